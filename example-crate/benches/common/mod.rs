//! Shared by the criterion bench (`benches/codecs.rs`) and the `bench-report` binary: the
//! bench codecs (generated from `bench_codecs.toml`), their list, the datasets and the
//! baselines, so both time exactly the same work on exactly the same bytes.

// Each includer uses a different part of this module.
#![allow(dead_code)]

use miniz_oxide::deflate::core::{
    compress, create_comp_flags_from_zip_params, CompressorOxide, TDEFLFlush, TDEFLStatus,
};
use miniz_oxide::deflate::CompressionLevel;
use std::fmt::Debug;
use std::hint::black_box;

/// The codecs of `bench_codecs.toml`. The criterion bench calls only the timed ones; the
/// others' re-exported `encode` would be unused imports there.
#[allow(unused_imports)]
pub mod generated {
    include!(concat!(env!("OUT_DIR"), "/bench_codecs.rs"));
}

/// Symbols per dataset: 1 MiB of one-byte symbols.
pub const N: usize = 1 << 20;

/// Fixed so every run and both includers see the same data.
const SEED: u64 = 0x0b5e_55ed_da7a_2024;

/// SplitMix64: small, seedable, and ample for drawing i.i.d. bench data.
pub struct SplitMix64(u64);

impl SplitMix64 {
    pub fn new(seed: u64) -> SplitMix64 {
        SplitMix64(seed)
    }

    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in `0..n` by multiply-shift; the bias is below n / 2^64.
    pub fn below(&mut self, n: u64) -> u64 {
        ((u128::from(self.next_u64()) * u128::from(n)) >> 64) as u64
    }
}

/// `n` symbols drawn i.i.d. with probabilities proportional to `counts`; symbol `i` is the
/// byte `first + i`.
pub fn draw(counts: &[u64], first: u8, n: usize, seed: u64) -> Vec<u8> {
    let total: u64 = counts.iter().sum();
    let mut rng = SplitMix64::new(seed);
    (0..n)
        .map(|_| {
            let mut u = rng.below(total);
            let mut i = 0;
            while u >= counts[i] {
                u -= counts[i];
                i += 1;
            }
            first + i as u8
        })
        .collect()
}

/// Synthetic: round(4096 * 0.75^i) for 'a'..='p', as in bench_codecs.toml (3.164 bits/symbol).
pub const SKEW16_COUNTS: [u64; 16] = [
    4096, 3072, 2304, 1728, 1296, 972, 729, 547, 410, 308, 231, 173, 130, 97, 73, 55,
];
/// Synthetic: 0.9, 0.05, 0.03, 0.02 for 'a'..='d' (0.618 bits/symbol).
pub const QUAD_COUNTS: [u64; 4] = [9000, 500, 300, 200];
/// The demo's level changes as zigzag bytes 0..=31 (the byte alphabet `level_delta` had before
/// it became an integers codec; its differences in codecs.toml are these counts unfolded).
pub const LEVEL_DELTA_COUNTS: [u64; 32] = [
    41210, 15150, 14880, 5520, 5390, 2010, 1980, 760, 735, 280, 270, 105, 101, 40, 38, 15, 14, 6,
    6, 2, 2, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 9,
];

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Dataset {
    Skew16,
    Quad,
    GaugeStatus,
    LevelDelta,
    FieldNotes,
}

impl Dataset {
    pub const ALL: [Dataset; 5] = [
        Dataset::Skew16,
        Dataset::Quad,
        Dataset::GaugeStatus,
        Dataset::LevelDelta,
        Dataset::FieldNotes,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Dataset::Skew16 => "skew16",
            Dataset::Quad => "quad",
            Dataset::GaugeStatus => "gauge_status",
            Dataset::LevelDelta => "level_delta",
            Dataset::FieldNotes => "field_notes",
        }
    }

    /// `n` symbols, one byte each; tokens (gauge_status) as their index in spec order.
    pub fn data(self, n: usize) -> Vec<u8> {
        match self {
            Dataset::Skew16 => draw(&SKEW16_COUNTS, b'a', n, SEED),
            Dataset::Quad => draw(&QUAD_COUNTS, b'a', n, SEED ^ 1),
            // The codec's training distribution; the demo ships no level sample file.
            Dataset::LevelDelta => draw(&LEVEL_DELTA_COUNTS, 0, n, SEED ^ 2),
            // The demo's samples repeated: the order-0 statistics are what count here.
            Dataset::GaugeStatus => {
                let words: Vec<u8> = include_str!("../../samples/status_log.txt")
                    .split_whitespace()
                    .map(|w| {
                        precast_example::gauge_status::Symbol::from_name(w)
                            .expect("status_log.txt holds only gauge_status tokens")
                            as u8
                    })
                    .collect();
                words.iter().copied().cycle().take(n).collect()
            }
            Dataset::FieldNotes => include_bytes!("../../samples/field_notes.txt")
                .iter()
                .copied()
                .cycle()
                .take(n)
                .collect(),
        }
    }
}

/// One codec, ready to time: its input converted to its `Symbol` type once, and buffers for
/// the stream and the decoded symbols allocated up front.
pub trait Run {
    /// Encodes the input; returns the stream's length in bytes.
    fn encode(&mut self) -> usize;
    /// Decodes the last encoded stream; returns the number of symbols.
    fn decode(&mut self) -> usize;
    /// Encodes and decodes once and checks that the symbols come back exactly.
    fn round_trips(&mut self) -> bool;
    /// Length of the last encoded stream.
    fn encoded_len(&self) -> usize;
}

pub struct Runner<S, E> {
    input: Vec<S>,
    stream: Vec<u8>,
    len: usize,
    back: Vec<S>,
    encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
    decode: fn(&[u8], &mut [S]) -> Result<usize, E>,
}

impl<S: Copy + PartialEq, E: Debug> Runner<S, E> {
    pub fn new(
        input: Vec<S>,
        encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
        decode: fn(&[u8], &mut [S]) -> Result<usize, E>,
        max_encoded_len: usize,
    ) -> Runner<S, E> {
        // Filled with one symbol, so a decoder that wrote nothing fails the round trip.
        let back = vec![input[0]; input.len()];
        let mut r = Runner {
            input,
            stream: vec![0; max_encoded_len],
            len: 0,
            back,
            encode,
            decode,
        };
        r.encode();
        r
    }
}

impl<S: Copy + PartialEq, E: Debug> Run for Runner<S, E> {
    fn encode(&mut self) -> usize {
        self.len = (self.encode)(black_box(&self.input), &mut self.stream).expect("encode");
        self.len
    }

    fn decode(&mut self) -> usize {
        (self.decode)(black_box(&self.stream[..self.len]), &mut self.back).expect("decode")
    }

    fn round_trips(&mut self) -> bool {
        self.encode();
        self.back.fill(self.input[0]);
        self.decode() == self.input.len() && self.back == self.input
    }

    fn encoded_len(&self) -> usize {
        self.len
    }
}

/// A bench codec: its module in `generated`, and how to make a [`Run`] of it on a dataset.
pub struct Codec {
    pub module: &'static str,
    pub dataset: Dataset,
    pub method: &'static str,
    pub lanes: u32,
    pub prepare: fn(&[u8]) -> Box<dyn Run>,
}

macro_rules! prepare {
    (bytes, $m:ident, $data:expr) => {{
        use generated::$m as m;
        Box::new(Runner::new(
            $data.to_vec(),
            m::encode,
            m::decode,
            m::max_encoded_len($data.len()),
        ))
    }};
    (tokens, $m:ident, $data:expr) => {{
        use generated::$m as m;
        let input: Vec<m::Symbol> = $data.iter().map(|&i| m::ALL[usize::from(i)]).collect();
        Box::new(Runner::new(
            input,
            m::encode,
            m::decode,
            m::max_encoded_len($data.len()),
        ))
    }};
}

macro_rules! codec_list {
    ($($m:ident: $dataset:ident $kind:ident $method:literal $lanes:literal;)*) => {
        /// Every bench codec, in table order.
        pub fn codecs() -> Vec<Codec> {
            vec![$(Codec {
                module: stringify!($m),
                dataset: Dataset::$dataset,
                method: $method,
                lanes: $lanes,
                prepare: |data| prepare!($kind, $m, data),
            },)*]
        }
    };
}

// The one list of bench codecs: module: dataset kind method lanes.
codec_list! {
    skew16_tans_l1: Skew16 bytes "tans" 1;
    skew16_tans_l2: Skew16 bytes "tans" 2;
    skew16_tans_l4: Skew16 bytes "tans" 4;
    skew16_tans_l8: Skew16 bytes "tans" 8;
    skew16_rans_l1: Skew16 bytes "rans" 1;
    skew16_rans_l2: Skew16 bytes "rans" 2;
    skew16_rans_l4: Skew16 bytes "rans" 4;
    skew16_rans_l8: Skew16 bytes "rans" 8;
    quad_tans_l1: Quad bytes "tans" 1;
    quad_tans_l2: Quad bytes "tans" 2;
    quad_tans_l4: Quad bytes "tans" 4;
    quad_tans_l8: Quad bytes "tans" 8;
    quad_rans_l1: Quad bytes "rans" 1;
    quad_rans_l2: Quad bytes "rans" 2;
    quad_rans_l4: Quad bytes "rans" 4;
    quad_rans_l8: Quad bytes "rans" 8;
    gauge_status_tans_l1: GaugeStatus tokens "tans" 1;
    gauge_status_tans_l2: GaugeStatus tokens "tans" 2;
    gauge_status_tans_l4: GaugeStatus tokens "tans" 4;
    gauge_status_tans_l8: GaugeStatus tokens "tans" 8;
    gauge_status_rans_l1: GaugeStatus tokens "rans" 1;
    gauge_status_rans_l2: GaugeStatus tokens "rans" 2;
    gauge_status_rans_l4: GaugeStatus tokens "rans" 4;
    gauge_status_rans_l8: GaugeStatus tokens "rans" 8;
    level_delta_tans_l1: LevelDelta bytes "tans" 1;
    level_delta_tans_l2: LevelDelta bytes "tans" 2;
    level_delta_tans_l4: LevelDelta bytes "tans" 4;
    level_delta_tans_l8: LevelDelta bytes "tans" 8;
    level_delta_rans_l1: LevelDelta bytes "rans" 1;
    level_delta_rans_l2: LevelDelta bytes "rans" 2;
    level_delta_rans_l4: LevelDelta bytes "rans" 4;
    level_delta_rans_l8: LevelDelta bytes "rans" 8;
    field_notes_tans_l1: FieldNotes bytes "tans" 1;
    field_notes_tans_l2: FieldNotes bytes "tans" 2;
    field_notes_tans_l4: FieldNotes bytes "tans" 4;
    field_notes_tans_l8: FieldNotes bytes "tans" 8;
    field_notes_rans_l1: FieldNotes bytes "rans" 1;
    field_notes_rans_l2: FieldNotes bytes "rans" 2;
    field_notes_rans_l4: FieldNotes bytes "rans" 4;
    field_notes_rans_l8: FieldNotes bytes "rans" 8;
    field_notes_ctx_tans_l1: FieldNotes bytes "tans, contexts" 1;
    field_notes_ctx_rans_l1: FieldNotes bytes "rans, contexts" 1;
}

/// miniz_oxide raw deflate with the Huffman-only strategy (no match search), compressor and
/// output buffer reused across calls like the codecs' buffers.
pub struct HuffmanOnly {
    compressor: Box<CompressorOxide>,
    out: Vec<u8>,
    len: usize,
}

impl HuffmanOnly {
    pub fn new(max_input: usize) -> HuffmanOnly {
        // Window bits -15: raw deflate, no zlib header; strategy 2: Huffman only.
        let flags =
            create_comp_flags_from_zip_params(CompressionLevel::DefaultLevel as i32, -15, 2);
        HuffmanOnly {
            compressor: Box::new(CompressorOxide::new(flags)),
            out: vec![0; max_input + max_input / 2 + 1024],
            len: 0,
        }
    }

    /// Compresses `data`; returns the compressed length.
    pub fn deflate(&mut self, data: &[u8]) -> usize {
        self.compressor.reset();
        let (status, read, written) = compress(
            &mut self.compressor,
            black_box(data),
            &mut self.out,
            TDEFLFlush::Finish,
        );
        assert!(status == TDEFLStatus::Done && read == data.len(), "deflate");
        self.len = written;
        written
    }

    /// The last compressed stream.
    pub fn packed(&self) -> &[u8] {
        &self.out[..self.len]
    }
}

/// Raw inflate of `packed` into `out`, which must fit the whole output (no growth, as for the
/// codecs' decoders); returns the bytes written.
pub fn inflate(packed: &[u8], out: &mut [u8]) -> usize {
    miniz_oxide::inflate::decompress_slice_iter_to_slice(
        out,
        std::iter::once(black_box(packed)),
        false,
        false,
    )
    .expect("inflate")
}

/// memcpy of `data` into `out`.
pub fn memcpy(data: &[u8], out: &mut [u8]) {
    out.copy_from_slice(black_box(data));
}

/// Order-0 entropy of `data` in bits per symbol.
/// H(X|Y) in bits per symbol of the data, Y the byte before X (the first byte has none and is
/// left out): the bound a context codec aims at (Cover & Thomas, *Elements of Information
/// Theory*, 2nd ed., section 2.2; from memory).
pub fn conditional_entropy_bits(data: &[u8]) -> f64 {
    let mut pairs = vec![0u64; 256 * 256];
    let mut rows = [0u64; 256];
    for w in data.windows(2) {
        pairs[usize::from(w[0]) * 256 + usize::from(w[1])] += 1;
        rows[usize::from(w[0])] += 1;
    }
    let n = data.len().saturating_sub(1) as f64;
    pairs
        .iter()
        .enumerate()
        .filter(|(_, &c)| c > 0)
        .map(|(i, &c)| {
            let given = c as f64 / rows[i / 256] as f64;
            -(c as f64 / n) * given.log2()
        })
        .sum()
}

pub fn entropy_bits(data: &[u8]) -> f64 {
    let mut counts = [0u64; 256];
    for &b in data {
        counts[usize::from(b)] += 1;
    }
    let n = data.len() as f64;
    counts
        .iter()
        .filter(|&&c| c > 0)
        .map(|&c| {
            let p = c as f64 / n;
            -p * p.log2()
        })
        .sum()
}
