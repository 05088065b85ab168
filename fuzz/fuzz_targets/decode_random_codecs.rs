//! Arbitrary bytes as a stream for every codec of the random spec
//! (`fuzz/seeds/random_specs.toml`): decoding must never panic, and any stream it accepts must
//! be the one `encode` writes for those symbols. The check is in
//! `fuzz/checks/decode_random_codecs.rs`, shared with `tests/fuzz_seeds.rs`.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[allow(dead_code)]
#[path = "../checks/mod.rs"]
mod checks;

#[allow(dead_code)]
mod random_codecs {
    precast_macros::codecs!("seeds/random_specs.toml");
}

#[allow(dead_code)]
#[path = "../checks/decode_random_codecs.rs"]
mod decode_random_codecs;

fuzz_target!(|data: &[u8]| decode_random_codecs::check_decode_random_codecs(data));
