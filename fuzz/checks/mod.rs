//! The checks of the fuzz targets, free of libFuzzer: each fuzz target and the ordinary test
//! `tests/fuzz_seeds.rs` include this module with `#[path = ...]` and call the same function,
//! so every committed seed in `fuzz/seeds/` runs under `cargo test` on a stable toolchain.
//! A check panics on a finding and returns on anything else.

#[allow(dead_code)]
pub mod golden {
    include!("../../tests/golden/small.rs");
}

pub mod decode_stream;
pub mod encode_round_trip;
pub mod parse_spec;
pub mod random_specs;
