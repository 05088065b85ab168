//! Arbitrary text as a spec: parsing and rendering may refuse it, never panic.
//! The check itself is in `fuzz/checks/parse_spec.rs`, shared with `tests/fuzz_seeds.rs`.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[allow(dead_code)]
#[path = "../checks/mod.rs"]
mod checks;

fuzz_target!(|data: &[u8]| checks::parse_spec::check_parse_spec(data));
