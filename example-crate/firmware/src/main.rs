//! precast's generated codecs and a hand-written canonical Huffman codec on a Cortex-M4
//! (QEMU `mps2-an386`).
//!
//! With the default feature `bench` the image measures executed instructions per symbol of
//! every codec's encode and decode (4096-symbol streams and 64-symbol frames), checks every
//! round trip, and prints one line per figure for `scripts/device-bench.sh`. With one of
//! `precast-encode`, `precast-decode`, `huffman-encode`, `huffman-decode` instead, the image
//! holds only that implementation and direction (for the flash figures); with no feature it
//! is the baseline.

#![no_std]
#![no_main]
// The flash images use only part of the harness.
#![cfg_attr(not(feature = "bench"), allow(dead_code))]

mod device;
mod huffman;

/// What precast generated from `codecs.toml` (see `build.rs`).
#[allow(dead_code)]
pub mod codecs {
    include!(concat!(env!("OUT_DIR"), "/codecs.rs"));
}

#[cfg(feature = "bench")]
mod bench;
#[cfg(not(feature = "bench"))]
mod keep;

#[cortex_m_rt::entry]
fn main() -> ! {
    #[cfg(feature = "bench")]
    let ok = bench::run();
    #[cfg(not(feature = "bench"))]
    let ok = keep::run();
    device::exit(ok)
}
