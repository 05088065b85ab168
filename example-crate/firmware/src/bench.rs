//! The measuring image. Output, one record a line (read by `scripts/device-bench.sh`):
//!
//! - `I codec key=value...`: figures from the build (entropy, Huffman code rates, ...).
//! - `C expected_instructions ticks`: the calibration loop.
//! - `M codec impl op shape symbols ticks bytes`: `ticks` SysTick ticks (40 instructions
//!   each) for `symbols` symbols of `op` (encode/decode) on `shape` (one 4096-symbol stream,
//!   or 64-symbol frames: the 64 frames of the stream, `REPEATS` times); `bytes` is the
//!   stream's length, or the 64 frames' total.
//! - `F codec impl what`: a failed round trip or call. The image then exits with status 1.

use crate::device::{print, spin, ticks, Line};
use crate::{codecs, huffman::codec as huffman};
use core::hint::black_box;

mod data {
    include!(concat!(env!("OUT_DIR"), "/bench_data.rs"));
}

/// Symbols of a stream; also the frames' total.
const N: usize = 4096;
/// Symbols of a frame.
const FRAME: usize = 64;
/// Frames of the stream.
const FRAMES: usize = N / FRAME;
/// Times the frame loops run over all the frames.
const REPEATS: usize = 4;
/// Buffer room for one stream and for one frame (checked against `max_encoded_len`).
const STREAM_ROOM: usize = 12288;
const FRAME_ROOM: usize = 192;

type Encode<S, E> = fn(&[S], &mut [u8]) -> Result<usize, E>;
type Decode<S, E> = fn(&[u8], &mut [S]) -> Result<usize, E>;

/// One implementation of one codec.
struct Codec<S, E1, E2> {
    name: &'static str,
    imp: &'static str,
    encode: Encode<S, E1>,
    decode: Decode<S, E2>,
    max_encoded_len: fn(usize) -> usize,
}

pub fn run() -> bool {
    print(data::INFO);
    let expected = 2_000_000;
    let t = ticks(|| spin(black_box(expected as u32 / 2)));
    Line::new().str("C").num(expected).num(t as usize).send();
    Line::new()
        .str("C")
        .num(0)
        .num(ticks(|| {}) as usize)
        .send();

    let mut ok = true;
    let mut gauge = [codecs::gauge_status::Symbol::Ok; N];
    for (s, &i) in gauge.iter_mut().zip(data::GAUGE_STATUS.iter()) {
        match codecs::gauge_status::ALL.get(usize::from(i)) {
            Some(&symbol) => *s = symbol,
            None => ok = false,
        }
    }
    ok &= bench(
        &gauge,
        Codec {
            name: "gauge_status",
            imp: "precast",
            encode: codecs::gauge_status::encode,
            decode: codecs::gauge_status::decode,
            max_encoded_len: codecs::gauge_status::max_encoded_len,
        },
    );
    ok &= bench(
        &gauge,
        Codec {
            name: "gauge_status",
            imp: "huffman",
            encode: huffman::gauge_status::encode,
            decode: huffman::gauge_status::decode,
            max_encoded_len: huffman::gauge_status::max_encoded_len,
        },
    );
    ok &= bench(
        &data::LEVEL_DELTA,
        Codec {
            name: "level_delta",
            imp: "precast",
            encode: codecs::level_delta::encode,
            decode: codecs::level_delta::decode,
            max_encoded_len: codecs::level_delta::max_encoded_len,
        },
    );
    ok &= bench(
        &data::LEVEL_DELTA,
        Codec {
            name: "level_delta",
            imp: "huffman",
            encode: huffman::level_delta::encode,
            decode: huffman::level_delta::decode,
            max_encoded_len: huffman::level_delta::max_encoded_len,
        },
    );
    ok &= bench(
        &data::FIELD_NOTES,
        Codec {
            name: "field_notes",
            imp: "precast",
            encode: codecs::field_notes::encode,
            decode: codecs::field_notes::decode,
            max_encoded_len: codecs::field_notes::max_encoded_len,
        },
    );
    // The context codecs code the same notes; their baseline is field_notes' Huffman code.
    ok &= bench(
        &data::FIELD_NOTES,
        Codec {
            name: "field_notes_ctx",
            imp: "precast",
            encode: codecs::field_notes_ctx::encode,
            decode: codecs::field_notes_ctx::decode,
            max_encoded_len: codecs::field_notes_ctx::max_encoded_len,
        },
    );
    ok &= bench(
        &data::FIELD_NOTES,
        Codec {
            name: "field_notes_ctx4",
            imp: "precast",
            encode: codecs::field_notes_ctx4::encode,
            decode: codecs::field_notes_ctx4::decode,
            max_encoded_len: codecs::field_notes_ctx4::max_encoded_len,
        },
    );
    ok &= bench(
        &data::FIELD_NOTES,
        Codec {
            name: "field_notes",
            imp: "huffman",
            encode: huffman::field_notes::encode,
            decode: huffman::field_notes::decode,
            max_encoded_len: huffman::field_notes::max_encoded_len,
        },
    );
    Line::new()
        .str(if ok { "DONE ok" } else { "DONE failed" })
        .send();
    ok
}

fn fail(c: &Codec<impl Copy, impl Sized, impl Sized>, what: &str) -> bool {
    Line::new()
        .str("F ")
        .str(c.name)
        .str(" ")
        .str(c.imp)
        .str(" ")
        .str(what)
        .send();
    false
}

fn record(
    c: &Codec<impl Copy, impl Sized, impl Sized>,
    op: &str,
    shape: &str,
    symbols: usize,
    t: u32,
    bytes: usize,
) {
    Line::new()
        .str("M ")
        .str(c.name)
        .str(" ")
        .str(c.imp)
        .str(" ")
        .str(op)
        .str(" ")
        .str(shape)
        .num(symbols)
        .num(t as usize)
        .num(bytes)
        .send();
}

/// Measures one implementation of one codec on `input` and checks every round trip.
#[inline(never)]
fn bench<S: Copy + PartialEq, E1, E2>(input: &[S; N], c: Codec<S, E1, E2>) -> bool {
    // Opaque: the calls cannot be inlined into the measuring loops or specialised to them.
    let encode = black_box(c.encode);
    let decode = black_box(c.decode);
    let mut ok = true;

    // One stream of N symbols.
    let mut stream = [0u8; STREAM_ROOM];
    let room = (c.max_encoded_len)(N);
    let Some(out) = stream.get_mut(..room) else {
        return fail(&c, "stream buffer too small for max_encoded_len");
    };
    let mut result = Err(());
    let t = ticks(|| result = encode(black_box(input), out).map_err(drop));
    let Ok(len) = result else {
        return fail(&c, "stream encode returned an error");
    };
    record(&c, "encode", "stream", N, t, len);
    let mut decoded = [input[0]; N];
    let encoded = stream.get(..len).unwrap_or(&[]);
    let mut result = Err(());
    let t = ticks(|| result = decode(black_box(encoded), &mut decoded).map_err(drop));
    record(&c, "decode", "stream", N, t, len);
    if result != Ok(N) || decoded != *input {
        ok = fail(&c, "stream round trip");
    }

    // 64-symbol frames: the stream cut in FRAMES pieces, each its own stream.
    let mut frames = [0u8; FRAMES * FRAME_ROOM];
    let mut lens = [0usize; FRAMES];
    let room = (c.max_encoded_len)(FRAME);
    if room > FRAME_ROOM {
        return fail(&c, "frame buffer too small for max_encoded_len");
    }
    let mut errors = 0usize;
    let t = ticks(|| {
        for _ in 0..REPEATS {
            let pieces = input
                .chunks_exact(FRAME)
                .zip(frames.chunks_exact_mut(FRAME_ROOM));
            for ((src, dst), len) in pieces.zip(lens.iter_mut()) {
                match encode(src, dst.get_mut(..room).unwrap_or(&mut [])) {
                    Ok(n) => *len = n,
                    Err(_) => errors += 1,
                }
            }
        }
    });
    let total: usize = lens.iter().sum();
    record(&c, "encode", "frame", REPEATS * N, t, total);
    if errors != 0 {
        ok = fail(&c, "frame encode returned an error");
    }
    let mut decoded = [input[0]; N];
    let t = ticks(|| {
        for _ in 0..REPEATS {
            let pieces = frames
                .chunks_exact(FRAME_ROOM)
                .zip(decoded.chunks_exact_mut(FRAME));
            for ((src, dst), &len) in pieces.zip(lens.iter()) {
                if !matches!(decode(src.get(..len).unwrap_or(&[]), dst), Ok(FRAME)) {
                    errors += 1;
                }
            }
        }
    });
    record(&c, "decode", "frame", REPEATS * N, t, total);
    if errors != 0 || decoded != *input {
        ok = fail(&c, "frame round trip");
    }
    ok
}
