//! `kind = "integers"`: the bin choice against brute force, located errors in sample files
//! and specs. The generated code is tested in `macros/tests/integers/` (against the reference
//! coder, and for sizes on two-sided geometric data).

mod common;

use common::{render_failure, Rng};
use precast::kind::integers::{choose_bins, coded_bits, Bin};
use std::collections::BTreeMap;
use std::path::Path;

/// Every partition of places `start .. start + 2^level` (clipped to `0 .. size`) into aligned
/// dyadic bins, by brute force.
fn partitions(start: u64, level: u32, size: u64) -> Vec<Vec<Bin>> {
    if start >= size {
        return vec![Vec::new()];
    }
    let mut out = Vec::new();
    if start + (1u64 << level) <= size {
        out.push(vec![Bin {
            start: start as u32,
            width: level,
        }]);
    }
    if level > 0 {
        let half = 1u64 << (level - 1);
        for left in partitions(start, level - 1, size) {
            for right in partitions(start + half, level - 1, size) {
                let mut both = left.clone();
                both.extend(right);
                out.push(both);
            }
        }
    }
    out
}

/// The DP's bins cost exactly the least of every dyadic partition within the cap, for every
/// range size up to 12 places, random counts (some places empty) and every cap.
#[test]
fn bin_choice_matches_brute_force_on_small_ranges() {
    let mut rng = Rng(3);
    for size in 1u64..=12 {
        let level = 64 - (size - 1).leading_zeros();
        let all = partitions(0, level, size);
        for _ in 0..12 {
            let mut counts = BTreeMap::new();
            for u in 0..size as u32 {
                if rng.below(3) > 0 {
                    counts.insert(u, 1 + rng.below(50) as u64);
                }
            }
            for cap in 1..=size as usize {
                let best = all
                    .iter()
                    .filter(|p| p.len() <= cap)
                    .map(|p| coded_bits(p, &counts))
                    .fold(f64::INFINITY, f64::min);
                match choose_bins(size, &counts, cap) {
                    Ok(bins) => {
                        assert!(bins.len() <= cap, "size {size} cap {cap}");
                        assert!(
                            all.contains(&bins),
                            "size {size}: {bins:?} is not a partition"
                        );
                        let got = coded_bits(&bins, &counts);
                        assert!(
                            (got - best).abs() <= 1e-9 * best.max(1.0),
                            "size {size} cap {cap}: {got} against {best} ({counts:?})"
                        );
                    }
                    Err(fewest) => {
                        assert!(best.is_infinite(), "size {size} cap {cap}");
                        let least = all.iter().map(Vec::len).min().unwrap();
                        assert_eq!(fewest, least, "size {size}");
                        assert!(cap < least);
                    }
                }
            }
        }
    }
}

/// Without training data every bin costs nothing: the fewest bins that tile the range
/// (the binary digits of its size).
#[test]
fn no_training_data_gives_the_fewest_bins() {
    for size in [1u64, 5, 8, 1000, 8192, 1 << 32] {
        let bins = choose_bins(size, &BTreeMap::new(), 64).unwrap();
        assert_eq!(bins.len() as u32, size.count_ones(), "size {size}");
    }
}

const SAMPLE_SPEC: &str = r#"
[codec.level]
kind = "integers"
range = [-100, 100]
samples = ["levels.txt"]
"#;

/// A bad sample is refused at its file, line and column (common practice: 1-based lines and
/// columns, as compilers report them).
#[test]
fn bad_sample_files_are_located() {
    let cases: [(&str, &[u8], &str, &str); 5] = [
        (
            "letter",
            b"1, 2, 3\n4 x5\n",
            "levels.txt:2:3:",
            "'x' is not part of a decimal integer",
        ),
        (
            "range",
            b"1\n2\n  101\n",
            "levels.txt:3:3:",
            "value 101 is outside the range [-100, 100]",
        ),
        (
            "sign",
            b"7 --3\n",
            "levels.txt:1:3:",
            "\"--3\" is not a decimal integer",
        ),
        (
            "minus",
            b"7 3-\n",
            "levels.txt:1:3:",
            "\"3-\" is not a decimal integer",
        ),
        (
            "utf8",
            b"1 2\n\xff\n",
            "levels.txt:2:1:",
            "byte 0xff is not part of a decimal integer",
        ),
    ];
    for (name, sample, at, message) in cases {
        let e = render_failure(name, SAMPLE_SPEC, &[("levels.txt", sample)]);
        assert!(e.contains(at), "{name}: {e}");
        assert!(e.contains(message), "{name}: {e}");
        assert!(e.contains("codec `level`"), "{name}: {e}");
    }
}

/// Spec mistakes of integers codecs, each at its key.
#[test]
fn integers_spec_errors_are_located() {
    let cases: [(&str, &str, &str); 8] = [
        (
            "no range",
            "kind = \"integers\"\ntext = \"1\"",
            "missing key `range`",
        ),
        (
            "bad range",
            "kind = \"integers\"\nrange = [5, 1]\ntext = \"1\"",
            "lo <= hi",
        ),
        (
            "narrow type",
            "kind = \"integers\"\nrange = [0, 300]\nvalue_type = \"u8\"\ntext = \"1\"",
            "value_type \"u8\" does not hold the range [0, 300]",
        ),
        (
            "rans",
            "kind = \"integers\"\nrange = [0, 3]\nmethod = \"rans\"\ntext = \"1\"",
            "method = \"tans\"",
        ),
        (
            "range on bytes",
            "kind = \"bytes\"\nrange = [0, 3]\ntext = \"a\"",
            "`range` applies to kind = \"integers\"",
        ),
        (
            "symbols",
            "kind = \"integers\"\nrange = [0, 3]\nsymbols = [1]\ntext = \"1\"",
            "not `symbols`",
        ),
        (
            "count key",
            "kind = \"integers\"\nrange = [0, 3]\ncounts = { \"4\" = 1 }",
            "count for value 4 outside [0, 3]",
        ),
        (
            "too few bins",
            "kind = \"integers\"\nrange = [0, 6]\nmax_symbols = 2\ntext = \"1\"",
            "needs at least 3 aligned bins",
        ),
    ];
    for (name, body, message) in cases {
        let spec = format!("[codec.level]\n{body}\n");
        let e = render_failure(&name.replace(' ', "_"), &spec, &[]);
        assert!(e.contains("codecs.toml:"), "{name}: {e}");
        assert!(e.contains(message), "{name}: {e}");
    }
}

/// Counts keyed by difference for a delta codec, and inline text, render.
#[test]
fn delta_counts_are_keyed_by_difference() {
    let spec = r#"
[codec.level]
kind = "integers"
range = [0, 9]
delta = true
counts = { "-5" = 1, "0" = 10, "4" = 2 }
text = "3 4 4 5 0 9"
"#;
    let out = precast::render_str(spec, Path::new("codecs.toml")).unwrap();
    assert!(out.source.contains("pub type Symbol = u8;"));
    let e = precast::render_str(
        &spec.replace("\"4\" = 2", "\"5\" = 2"),
        Path::new("codecs.toml"),
    )
    .err()
    .unwrap()
    .to_string();
    assert!(e.contains("count for difference 5 outside [-5, 4]"), "{e}");
}
