//! Arbitrary bytes as a stream for every golden codec: decoding must never panic,
//! and any stream it accepts must be the one `encode` writes for those symbols.
//! The check itself is in `fuzz/checks/decode_stream.rs`, shared with `tests/fuzz_seeds.rs`.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[allow(dead_code)]
#[path = "../checks/mod.rs"]
mod checks;

fuzz_target!(|data: &[u8]| checks::decode_stream::check_decode_stream(data));
