//! Arbitrary symbols through every golden codec: encode, decode, compare, and check
//! that a buffer one byte short is refused rather than overrun or truncated.
//! The check itself is in `fuzz/checks/encode_round_trip.rs`, shared with `tests/fuzz_seeds.rs`.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[allow(dead_code)]
#[path = "../checks/mod.rs"]
mod checks;

fuzz_target!(|data: &[u8]| checks::encode_round_trip::check_encode_round_trip(data));
