//! The flash images: each enabled implementation × direction is called once through an
//! opaque function pointer on opaque buffers, so that exactly those functions, their
//! helpers and their tables are linked, out of line, and nothing else of the codecs.

#![allow(unused_imports, dead_code)]

use crate::{codecs, huffman::codec as huffman};
use core::hint::black_box;

fn encode<S: Copy, E>(f: fn(&[S], &mut [u8]) -> Result<usize, E>, input: &[S]) -> bool {
    let mut out = [0u8; 16];
    black_box(f)(black_box(input), black_box(&mut out[..])).is_ok()
}

fn decode<S: Copy, E>(f: fn(&[u8], &mut [S]) -> Result<usize, E>, fill: S) -> bool {
    let stream = [0u8; 16];
    let mut out = [fill; 16];
    black_box(f)(black_box(&stream[..]), black_box(&mut out[..])).is_ok()
}

macro_rules! keep {
    ($feature:literal, $dir:ident, $imp:ident) => {
        #[cfg(feature = $feature)]
        {
            black_box(keep!(@$dir $imp));
        }
    };
    (@encode $imp:ident) => {
        (
            encode($imp::gauge_status::encode, &codecs::gauge_status::ALL),
            encode($imp::level_delta::encode, &[812, 813, 813, 811]),
            encode($imp::field_notes::encode, b"gauge 14 ok\n"),
        )
    };
    (@encode_ctx) => {
        (
            encode(codecs::field_notes_ctx::encode, b"gauge 14 ok\n"),
            encode(codecs::field_notes_ctx4::encode, b"gauge 14 ok\n"),
        )
    };
    (@decode $imp:ident) => {
        (
            decode($imp::gauge_status::decode, codecs::gauge_status::Symbol::Ok),
            decode($imp::level_delta::decode, 0u16),
            decode($imp::field_notes::decode, 0u8),
        )
    };
    (@decode_ctx) => {
        (
            decode(codecs::field_notes_ctx::decode, 0u8),
            decode(codecs::field_notes_ctx4::decode, 0u8),
        )
    };
    // Escapes and text: not measured, linked for the audit only.
    (@encode_more) => {
        (
            encode(codecs::notes_escape::encode, b"Gauge 14 OK\n"),
            encode(codecs::level_escape::encode, &[812, 40000, 813]),
            encode_text(codecs::notes_text::encode, "gauge 14 é ok\n"),
        )
    };
    (@decode_more) => {
        (
            decode(codecs::notes_escape::decode, 0u8),
            decode(codecs::level_escape::decode, 0u16),
            decode_text(codecs::notes_text::decode),
        )
    };
}

fn encode_text<E>(f: fn(&str, &mut [u8]) -> Result<usize, E>, input: &str) -> bool {
    let mut out = [0u8; 64];
    black_box(f)(black_box(input), black_box(&mut out[..])).is_ok()
}

fn decode_text<E>(f: for<'a> fn(&[u8], &'a mut [u8]) -> Result<&'a str, E>) -> bool {
    let stream = [0u8; 16];
    let mut out = [0u8; 64];
    black_box(f)(black_box(&stream[..]), black_box(&mut out[..])).is_ok()
}

/// Calls what the image's features ask for; the results do not matter.
pub fn run() -> bool {
    keep!("precast-encode", encode, codecs);
    keep!("precast-decode", decode, codecs);
    // precast's context codecs (the Huffman baseline has none).
    #[cfg(feature = "precast-encode")]
    black_box(keep!(@encode_ctx));
    #[cfg(feature = "precast-decode")]
    black_box(keep!(@decode_ctx));
    #[cfg(feature = "precast-encode")]
    black_box(keep!(@encode_more));
    #[cfg(feature = "precast-decode")]
    black_box(keep!(@decode_more));
    keep!("huffman-encode", encode, huffman);
    keep!("huffman-decode", decode, huffman);
    true
}
