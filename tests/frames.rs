//! Small frames: what a 64-symbol frame costs above 64 times the codec's long-run rate, in
//! each framing (FORMAT.md, "Frames"), measured with the reference coder, which the
//! differential tests (`macros/tests/matrix.rs`, `tests/generated.rs`) tie byte for byte to
//! the generated code.

mod common;
use common::Rng;
use precast::spec::Framing;
use precast::verify::Reference;
use std::path::Path;

/// Twelve symbols with counts `round(4096 · a^k)` (at least 1): a one-sided geometric source
/// truncated to twelve symbols (P(k) = (1 − a) a^k, common practice; CHECKS.md).
fn geometric(a: f64) -> Vec<u64> {
    (0..12)
        .map(|k| ((4096.0 * a.powi(k)).round() as u64).max(1))
        .collect()
}

/// The spec text of a twelve-token codec with these counts.
fn spec(counts: &[u64], framing: &str, table_bits: u32) -> String {
    let names: Vec<String> = (0..counts.len()).map(|k| format!("s{k}")).collect();
    let symbols = names
        .iter()
        .map(|n| format!("\"{n}\""))
        .collect::<Vec<_>>()
        .join(", ");
    let counts = names
        .iter()
        .zip(counts)
        .map(|(n, c)| format!("{n} = {c}"))
        .collect::<Vec<_>>()
        .join(", ");
    format!(
        "[codec.status]\nkind = \"tokens\"\nsymbols = [{symbols}]\ncounts = {{ {counts} }}\n\
         table_bits = {table_bits}\nframing = \"{framing}\"\n"
    )
}

/// Mean bytes a frame of `n` symbols drawn from the counts costs above `n` times the exact
/// rate, over `frames` frames; every frame round-trips and its count reads back.
fn overhead(counts: &[u64], framing: Framing, table_bits: u32, n: usize, frames: usize) -> f64 {
    let name = match framing {
        Framing::Tagged => "tagged",
        Framing::Compact => "compact",
        Framing::Bare => "bare",
    };
    let parsed = precast::spec::parse(&spec(counts, name, table_bits), Path::new("frames.toml"))
        .expect("spec parses");
    let codec = &parsed.codecs[0];
    let built = precast::build_codec(codec).expect("codec builds");
    let reference = Reference::framed(&built.tables, built.fingerprint, framing, 1);
    let mut rng = Rng(64);
    let mut bytes = 0usize;
    for _ in 0..frames {
        let frame: Vec<u16> = (0..n).map(|_| rng.weighted(counts) as u16).collect();
        let stream = reference.encode(&frame);
        let (back, used) = reference.decode(&stream, n).expect("frame decodes");
        assert_eq!((back, used), (frame, stream.len()));
        bytes += stream.len();
    }
    bytes as f64 / frames as f64 - n as f64 * built.report.exact_rate / 8.0
}

#[test]
fn small_frames_cost_little_above_the_rate() {
    // The targets of the frames issue: 64-symbol frames of a twelve-token alphabet, at the
    // table sizes such an alphabet needs (at 2^10 slots a bare frame of the a = 0.5 source
    // costs 1.06 B: a lane's state grows with the table).
    for a in [0.1, 0.25, 0.5] {
        let counts = geometric(a);
        for table_bits in [7, 8, 9] {
            let bare = overhead(&counts, Framing::Bare, table_bits, 64, 2000);
            let compact = overhead(&counts, Framing::Compact, table_bits, 64, 2000);
            let tagged = overhead(&counts, Framing::Tagged, table_bits, 64, 2000);
            println!("a = {a}, table_bits = {table_bits}: bare {bare:.3} B, compact {compact:.3} B, tagged {tagged:.3} B");
            assert!(
                bare <= 1.0,
                "a = {a}, table_bits {table_bits}: bare {bare:.3} B"
            );
            assert!(
                compact <= 3.0,
                "a = {a}, table_bits {table_bits}: compact {compact:.3} B"
            );
            assert!(
                tagged <= 5.0,
                "a = {a}, table_bits {table_bits}: tagged {tagged:.3} B"
            );
            // A compact header is a check byte and one count byte up to 127 symbols.
            assert!((compact - bare - 2.0).abs() < 1e-9);
        }
    }
}
