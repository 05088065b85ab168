//! The river-gauge codecs, generated at build time by precast from `codecs.toml`.
//!
//! `no_std`, no allocation: this library builds for `thumbv7em-none-eabihf` as it is.

#![no_std]
#![forbid(unsafe_code)]

include!(concat!(env!("OUT_DIR"), "/codecs.rs"));
