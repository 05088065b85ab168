//! The review and field verbs of the command line: `report` (and its plots), `check`,
//! `inspect` and `count`, run as a user runs them, checked against outside values and
//! against the library's own pipeline.

mod common;
use common::{root, Rng};
use precast::verify::Reference;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn precast(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_precast"))
        .args(args)
        .output()
        .expect("the binary runs")
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// A fresh folder for one test.
fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("precast-tools-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// The report line `| figure | value |` as a number.
fn figure(report: &str, codec: &str, name: &str) -> f64 {
    let section = report
        .split("## Codec `")
        .find(|s| s.starts_with(&format!("{codec}`")))
        .expect("the codec has a section");
    let row = section
        .lines()
        .find(|l| l.starts_with(&format!("| {name}")))
        .unwrap_or_else(|| panic!("no row {name}"));
    row.split('|')
        .nth(2)
        .unwrap()
        .split_whitespace()
        .next()
        .unwrap()
        .parse()
        .unwrap()
}

#[test]
fn report_gives_entropy_and_huffman_average_of_textbook_sources() {
    let spec = root().join("tests/specs/small.toml");
    let out = precast(&["report", s(&spec)]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let report = text(&out.stdout);
    // (0.25, 0.25, 0.2, 0.15, 0.15): Cover & Thomas, Elements of Information Theory, 2nd
    // ed., Ex. 5.6.1 (from memory; CHECKS.md): H = 2.2854752972, Huffman average 2.3.
    assert!((figure(&report, "five", "entropy") - 2.285475).abs() < 1e-6);
    assert!((figure(&report, "five", "Huffman code") - 2.3).abs() < 1e-6);
    // Binary p = 0.9 (common practice; CHECKS.md): H = 0.4689955936, Huffman 1 bit.
    assert!((figure(&report, "skewed", "entropy") - 0.468996).abs() < 1e-6);
    assert!((figure(&report, "skewed", "Huffman code") - 1.0).abs() < 1e-9);
    // Every section carries the per-symbol table, the tables by direction and the frame
    // cost measured with the reference coder.
    for needle in [
        "| symbol | count | probability | slots |",
        "| decode |",
        "fixed seed",
    ] {
        assert!(report.contains(needle), "{needle}");
    }
}

#[test]
fn huffman_average_matches_published_examples() {
    use precast::report::huffman_average;
    // Sayood, Introduction to Data Compression, Ex. 3.2.1 (from memory; CHECKS.md).
    let h = huffman_average(&[4, 2, 2, 1, 1]).unwrap();
    assert!((h - 2.2).abs() < 1e-12, "{h}");
    // Huffman, Proc. IRE 40(9), 1952: the 13-message example, average 171/50 = 3.42
    // (CHECKS.md; probabilities in hundredths, from memory).
    let h = huffman_average(&[20, 18, 10, 10, 10, 6, 6, 4, 4, 3, 3, 3, 3]).unwrap();
    assert!((h - 3.42).abs() < 1e-12, "{h}");
    // (0.04, 0.16, 0.16, 0.64): 1.56 (CHECKS.md, recomputed).
    let h = huffman_average(&[4, 16, 16, 64]).unwrap();
    assert!((h - 1.56).abs() < 1e-12, "{h}");
    assert_eq!(huffman_average(&[0, 0]), None);
}

#[test]
fn huffman_average_lies_within_one_bit_above_the_entropy_on_random_counts() {
    // Shannon's source coding bound for optimal prefix codes, H <= L < H + 1 (Cover &
    // Thomas, 2nd ed., Thm. 5.4.1 and 5.8.1; from memory).
    let mut rng = Rng(12);
    for _ in 0..500 {
        let n = 2 + rng.below(40);
        let counts: Vec<u64> = (0..n).map(|_| 1 + rng.below(1000) as u64).collect();
        let h = precast::quantize::entropy(&counts);
        let l = precast::report::huffman_average(&counts).unwrap();
        assert!(l >= h - 1e-9 && l < h + 1.0, "{counts:?}: H {h}, L {l}");
    }
}

#[test]
fn report_svgs_parse_as_xml() {
    let dir = scratch("svg");
    let spec = root().join("example-crate/codecs.toml");
    let out = precast(&["report", s(&spec), "--svg", s(&dir)]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let mut seen = 0;
    for entry in std::fs::read_dir(&dir).unwrap() {
        let path = entry.unwrap().path();
        let svg = std::fs::read_to_string(&path).unwrap();
        let doc =
            roxmltree::Document::parse(&svg).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        assert_eq!(doc.root_element().tag_name().name(), "svg");
        seen += 1;
    }
    // Two plots for each of the demo's four codecs (three, and the notes without contexts).
    assert_eq!(seen, 8);
}

#[test]
fn check_accepts_fresh_output_and_names_the_codec_whose_counts_changed() {
    let dir = scratch("check");
    let spec = dir.join("small.toml");
    std::fs::copy(root().join("tests/specs/small.toml"), &spec).unwrap();
    std::fs::copy(
        root().join("tests/specs/mit-license.txt"),
        dir.join("mit-license.txt"),
    )
    .unwrap();
    let file = dir.join("codecs.rs");
    assert!(precast(&["render", s(&spec), "-o", s(&file)])
        .status
        .success());
    let fresh = precast(&["check", s(&spec), "--against", s(&file)]);
    assert_eq!(fresh.status.code(), Some(0), "{}", text(&fresh.stderr));
    let edited = std::fs::read_to_string(&spec)
        .unwrap()
        .replace("counts = { only = 10 }", "counts = { only = 11 }");
    std::fs::write(&spec, edited).unwrap();
    let stale = precast(&["check", s(&spec), "--against", s(&file)]);
    assert_eq!(stale.status.code(), Some(1));
    let why = text(&stale.stderr);
    assert!(why.contains("codec `single`: counts changed"), "{why}");
    // Only that codec changed.
    assert!(!why.contains("codec `five`"), "{why}");
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x} ")).collect()
}

/// A stream of `symbols` written by codec `name` of the small spec.
fn stream_of(name: &str, symbols: &[u16]) -> Vec<u8> {
    let planned = precast::plan_spec(root().join("tests/specs/small.toml")).unwrap();
    let plan = planned.plans.iter().find(|p| p.spec.name == name).unwrap();
    Reference::framed(
        &plan.sets[0].tables,
        plan.fingerprint,
        plan.spec.framing,
        plan.spec.lanes,
    )
    .encode(symbols)
}

#[test]
fn inspect_lists_the_tokens_of_a_good_hex_stream() {
    let dir = scratch("inspect-good");
    let file = dir.join("frame.hex");
    // skewed: ["likely", "unlikely"], tagged framing.
    std::fs::write(&file, hex(&stream_of("skewed", &[0, 0, 1, 0, 1, 1, 0]))).unwrap();
    let spec = root().join("tests/specs/small.toml");
    let out = precast(&[
        "inspect",
        "--spec",
        s(&spec),
        "--codec",
        "skewed",
        "--hex",
        s(&file),
    ]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let shown = text(&out.stdout);
    assert!(
        shown.contains("fingerprint check: matches codec `skewed`"),
        "{shown}"
    );
    assert!(shown.contains("symbol count: 7"), "{shown}");
    assert!(
        shown.contains("likely likely unlikely likely unlikely unlikely likely"),
        "{shown}"
    );
}

/// A chars stream shows as its text, escaped as a Rust string.
#[test]
fn inspect_shows_the_text_of_a_chars_stream() {
    let dir = scratch("inspect-chars");
    let file = dir.join("frame.bin");
    let spec = root().join("tests/specs/chars.toml");
    let planned = precast::plan_spec(&spec).unwrap();
    let plan = planned
        .plans
        .iter()
        .find(|p| p.spec.name == "costs")
        .unwrap();
    let note = "18,50 € → 3 ‰\n";
    let alphabet = plan.spec.kind.chars().unwrap().chars();
    let symbols: Vec<u16> = note
        .chars()
        .map(|c| alphabet.iter().position(|&a| a == c).unwrap() as u16)
        .collect();
    let stream = Reference::framed(
        &plan.sets[0].tables,
        plan.fingerprint,
        plan.spec.framing,
        plan.spec.lanes,
    )
    .encode(&symbols);
    std::fs::write(&file, stream).unwrap();
    let out = precast(&["inspect", "--spec", s(&spec), "--codec", "costs", s(&file)]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let shown = text(&out.stdout);
    assert!(shown.contains("symbol count: 14"), "{shown}");
    assert!(shown.contains("\"18,50 € → 3 ‰\\n\""), "{shown}");
}

#[test]
fn inspect_names_the_codec_that_wrote_a_foreign_stream() {
    let dir = scratch("inspect-foreign");
    let file = dir.join("frame.bin");
    // five_rans wrote it; it is read as five's (both tagged).
    std::fs::write(&file, stream_of("five_rans", &[0, 1, 2, 3, 4])).unwrap();
    let spec = root().join("tests/specs/small.toml");
    let out = precast(&["inspect", "--spec", s(&spec), "--codec", "five", s(&file)]);
    assert_eq!(out.status.code(), Some(1));
    let all = text(&out.stdout) + &text(&out.stderr);
    assert!(
        all.contains("matches codec `five_rans` of this spec"),
        "{all}"
    );
    assert!(all.contains("byte offset 0"), "{all}");
}

#[test]
fn inspect_gives_the_offset_where_a_truncated_stream_ends() {
    let dir = scratch("inspect-cut");
    let file = dir.join("frame.bin");
    let symbols: Vec<u16> = (0..200).map(|i| (i % 5) as u16).collect();
    let stream = stream_of("five", &symbols);
    let cut = stream.len() - 3;
    std::fs::write(&file, &stream[..cut]).unwrap();
    let spec = root().join("tests/specs/small.toml");
    let out = precast(&["inspect", "--spec", s(&spec), "--codec", "five", s(&file)]);
    assert_eq!(out.status.code(), Some(1));
    let err = text(&out.stderr);
    assert!(
        err.contains(&format!("byte offset {cut}: the stream ends")),
        "{err}"
    );
    // A header cut inside its count.
    std::fs::write(&file, &stream[..3]).unwrap();
    let out = precast(&["inspect", "--spec", s(&spec), "--codec", "five", s(&file)]);
    assert_eq!(out.status.code(), Some(1));
    assert!(text(&out.stderr).contains("byte offset 3: the stream ends inside the symbol count"));
}

#[test]
fn inspect_never_panics_on_random_bytes() {
    let dir = scratch("inspect-random");
    let file = dir.join("frame.bin");
    let spec = root().join("tests/specs/small.toml");
    let mut rng = Rng(5);
    for (i, codec) in ["five", "five_bare", "skewed_l8", "five_rans", "mit_text"]
        .iter()
        .enumerate()
    {
        let len = rng.below(40);
        let mut bytes: Vec<u8> = (0..len).map(|_| rng.next() as u8).collect();
        if i % 2 == 0 && len >= 2 {
            // Give half of them the right identity, so the payload is exercised.
            let right = stream_of(codec, &[0]);
            bytes[..2.min(right.len())].copy_from_slice(&right[..2.min(right.len())]);
        }
        std::fs::write(&file, &bytes).unwrap();
        let out = if *codec == "five_bare" {
            precast(&[
                "inspect",
                "--spec",
                s(&spec),
                "--codec",
                codec,
                "--count",
                "9",
                s(&file),
            ])
        } else {
            precast(&["inspect", "--spec", s(&spec), "--codec", codec, s(&file)])
        };
        // Exit 0 or 1, never a panic (101).
        assert!(
            matches!(out.status.code(), Some(0 | 1)),
            "{codec}: {}",
            text(&out.stderr)
        );
    }
}

/// Tokens text drawn from weighted names: random data, not invented figures.
fn token_corpus(rng: &mut Rng, words: usize) -> String {
    let names = ["ok", "low_battery", "sensor_fault", "reboot"];
    let weights = [900u64, 60, 30, 10];
    let mut out = String::new();
    for i in 0..words {
        out.push_str(names[rng.weighted(&weights)]);
        out.push(if i % 7 == 6 { '\n' } else { ' ' });
    }
    out
}

#[test]
fn sharded_then_merged_counts_equal_one_pass() {
    let dir = scratch("count-merge");
    let mut rng = Rng(77);
    let shards: Vec<PathBuf> = (0..3)
        .map(|i| {
            let p = dir.join(format!("shard{i}.txt"));
            std::fs::write(&p, token_corpus(&mut rng, 5000 + 1000 * i)).unwrap();
            p
        })
        .collect();
    let whole = dir.join("whole.counts");
    let mut args = vec!["count"];
    args.extend(shards.iter().map(|p| s(p)));
    args.extend(["--kind", "tokens", "-o", s(&whole)]);
    assert!(precast(&args).status.success());
    let mut parts = Vec::new();
    for (i, shard) in shards.iter().enumerate() {
        let out = dir.join(format!("shard{i}.counts"));
        let run = precast(&[
            "count",
            s(shard),
            "--kind",
            "tokens",
            "-o",
            s(&out),
            "--threads",
            "1",
        ]);
        assert!(run.status.success(), "{}", text(&run.stderr));
        parts.push(out);
    }
    let merged = dir.join("merged.counts");
    let mut args = vec!["count", "--merge"];
    args.extend(parts.iter().map(|p| s(p)));
    args.extend(["--kind", "tokens", "-o", s(&merged)]);
    assert!(precast(&args).status.success());
    assert_eq!(
        std::fs::read_to_string(&whole).unwrap(),
        std::fs::read_to_string(&merged).unwrap()
    );
}

#[test]
fn counting_in_pieces_on_many_threads_equals_a_plain_count() {
    // Pieces of 8 MiB cut tokens anywhere; a 20 MiB corpus on 3 workers has three pieces.
    let dir = scratch("count-pieces");
    let mut rng = Rng(3);
    let corpus = token_corpus(&mut rng, 2_600_000);
    let file = dir.join("corpus.txt");
    std::fs::write(&file, &corpus).unwrap();
    let tally = precast::load::count_files(
        std::slice::from_ref(&file),
        precast::counts::CountKind::Tokens,
        3,
    )
    .unwrap();
    let mut plain = std::collections::BTreeMap::<String, u64>::new();
    for w in corpus.split_ascii_whitespace() {
        *plain.entry(w.to_string()).or_default() += 1;
    }
    assert_eq!(tally.tokens, plain);
    let bytes = precast::load::count_files(&[file], precast::counts::CountKind::Bytes, 3).unwrap();
    let mut h = vec![0u64; 256];
    for &b in corpus.as_bytes() {
        h[usize::from(b)] += 1;
    }
    assert_eq!(bytes.bytes, h);
}

/// Plans codec `c` of the spec text `spec` written into `dir`.
fn plan_of(dir: &Path, spec: &str) -> precast::plan::CodecPlan {
    let path = dir.join("spec.toml");
    std::fs::write(&path, spec).unwrap();
    precast::plan_spec(&path).unwrap().plans.remove(0)
}

#[test]
fn a_counts_file_gives_the_same_tables_as_the_samples() {
    let dir = scratch("count-same");
    let mut rng = Rng(9);
    std::fs::write(dir.join("log.txt"), token_corpus(&mut rng, 20_000)).unwrap();
    let run = precast(&[
        "count",
        s(&dir.join("log.txt")),
        "--kind",
        "tokens",
        "-o",
        s(&dir.join("log.counts")),
    ]);
    assert!(run.status.success(), "{}", text(&run.stderr));
    let head = "[codec.c]\nkind = \"tokens\"\nsymbols = [\"ok\", \"low_battery\", \"sensor_fault\", \"reboot\"]\nframing = \"compact\"\nflash_budget = 400\n";
    let a = plan_of(&dir, &format!("{head}samples = [\"log.txt\"]\n"));
    let b = plan_of(&dir, &format!("{head}counts_file = \"log.counts\"\n"));
    assert_eq!(a.model.counts, b.model.counts);
    assert_eq!(a.sets[0].slots, b.sets[0].slots);
    assert_eq!(a.sets[0].tables.identity(), b.sets[0].tables.identity());
    assert_eq!(a.sets[0].layout, b.sets[0].layout);
    assert_eq!(a.fingerprint, b.fingerprint);

    // Bytes: Debian's word list (`wamerican`), counted and as a sample.
    let words = Path::new("/usr/share/dict/american-english");
    if !words.exists() {
        eprintln!(
            "skipped the bytes half: {} is absent (Debian package wamerican)",
            words.display()
        );
        return;
    }
    std::fs::copy(words, dir.join("words.txt")).unwrap();
    let run = precast(&[
        "count",
        s(&dir.join("words.txt")),
        "--kind",
        "bytes",
        "-o",
        s(&dir.join("words.counts")),
    ]);
    assert!(run.status.success(), "{}", text(&run.stderr));
    let head = "[codec.w]\nkind = \"bytes\"\ntable_bits = 11\n";
    let a = plan_of(&dir, &format!("{head}samples = \"words.txt\"\n"));
    let b = plan_of(&dir, &format!("{head}counts_file = \"words.counts\"\n"));
    assert_eq!(a.sets[0].tables.identity(), b.sets[0].tables.identity());
    assert_eq!(a.sets[0].layout, b.sets[0].layout);
    assert_eq!(a.fingerprint, b.fingerprint);
    // 985,084 bytes, order-0 entropy 4.443836 bits/byte (CHECKS.md, recomputed).
    assert_eq!(b.model.total(), 985_084);
    assert!((b.report.entropy - 4.443836).abs() < 1e-6);
}

#[test]
fn bad_counts_files_and_corpora_are_located_errors() {
    let dir = scratch("count-bad");
    std::fs::write(
        dir.join("bad.counts"),
        "precast-counts 1\nkind tokens\nok 12\nreboot x\n",
    )
    .unwrap();
    let spec = dir.join("spec.toml");
    std::fs::write(
        &spec,
        "[codec.c]\nkind = \"tokens\"\nsymbols = [\"ok\", \"reboot\"]\ncounts_file = \"bad.counts\"\n",
    )
    .unwrap();
    let out = precast(&["render", s(&spec)]);
    assert_eq!(out.status.code(), Some(1));
    let err = text(&out.stderr);
    assert!(
        err.contains("bad.counts:4:8:") && err.contains("`x` is not a count"),
        "{err}"
    );
    // A counts file of another kind.
    std::fs::write(
        dir.join("bad.counts"),
        "precast-counts 1\nkind bytes\n97 3\n",
    )
    .unwrap();
    let err = text(&precast(&["render", s(&spec)]).stderr);
    assert!(
        err.contains("spec.toml:4:15:") && err.contains("of kind bytes"),
        "{err}"
    );
    // A corpus word that is no token name: its line, column and byte offset.
    std::fs::write(dir.join("corpus.txt"), "ok ok\nreboot o-k\n").unwrap();
    let out = precast(&[
        "count",
        s(&dir.join("corpus.txt")),
        "--kind",
        "tokens",
        "-o",
        s(&dir.join("c.counts")),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let err = text(&out.stderr);
    assert!(
        err.contains("corpus.txt:2:9:") && err.contains("byte offset 14"),
        "{err}"
    );
}

#[test]
fn inspect_prints_the_values_of_an_integers_stream() {
    // delta_l8_i8 (tests/specs/integers.toml): deltas of i8 values over eight lanes, tagged.
    // Values at both ends of the range and big jumps, so that deltas wrap and bins of
    // several widths carry offset bits.
    let values: [i64; 12] = [0, 1, -1, 127, -128, 5, 5, 100, -100, 3, -3, 0];
    let planned = precast::plan_spec(root().join("tests/specs/integers.toml")).unwrap();
    let plan = planned
        .plans
        .iter()
        .find(|p| p.spec.name == "delta_l8_i8")
        .unwrap();
    let ints = plan.spec.kind.integers().unwrap();
    let (mut symbols, mut offsets) = (Vec::new(), Vec::new());
    let mut prev = ints.domain.reference();
    for &v in &values {
        let place = ints.domain.place(v, prev);
        let bin = precast::kind::integers::bin_index(&ints.bins, place);
        symbols.push(bin as u16);
        offsets.push(place - ints.bins[bin].start);
        prev = v;
    }
    let stream = Reference::framed(
        &plan.sets[0].tables,
        plan.fingerprint,
        plan.spec.framing,
        plan.spec.lanes,
    )
    .with_widths(ints.bins.iter().map(|b| b.width).collect())
    .encode_offsets(&symbols, &offsets);
    let dir = scratch("inspect-integers");
    let file = dir.join("frame.bin");
    std::fs::write(&file, &stream).unwrap();
    let spec = root().join("tests/specs/integers.toml");
    let out = precast(&[
        "inspect",
        "--spec",
        s(&spec),
        "--codec",
        "delta_l8_i8",
        s(&file),
    ]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let shown = text(&out.stdout);
    let want: Vec<String> = values.iter().map(|v| v.to_string()).collect();
    assert!(shown.contains(&want.join(" ")), "{shown}");
}
