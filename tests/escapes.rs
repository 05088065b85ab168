//! Escapes on real data: DNA bases of bacterial reference sequences, with IUPAC ambiguity
//! codes as escapes. The data is Debian's package `kaptive-data` (2.0.4-1), file
//! /usr/share/kaptive/reference_database/Klebsiella_k_locus_variant_reference.gbk: GenBank
//! records whose ORIGIN sections hold the bases (a, c, g, t; n and the ambiguity codes r, y,
//! m, w, ... as the NC-IUB recommendations of 1984 name them). CI installs the package;
//! where it is absent the test says so and passes. Also: the spec keys of escapes.

use precast::kind::integers::bin_index;
use precast::verify::Reference;
use std::path::Path;

const GENBANK: &str =
    "/usr/share/kaptive/reference_database/Klebsiella_k_locus_variant_reference.gbk";

/// The bases of each record of a GenBank flat file, upper-cased: the letters between an
/// `ORIGIN` line and the record's `//` (GenBank release notes, section 3.4.16; common
/// practice).
fn records(text: &str) -> Vec<Vec<u8>> {
    let mut out = Vec::new();
    let mut current: Option<Vec<u8>> = None;
    for line in text.lines() {
        if line.starts_with("ORIGIN") {
            current = Some(Vec::new());
        } else if line.starts_with("//") {
            if let Some(r) = current.take() {
                out.push(r);
            }
        } else if let Some(r) = current.as_mut() {
            r.extend(
                line.bytes()
                    .filter(u8::is_ascii_alphabetic)
                    .map(|b| b.to_ascii_uppercase()),
            );
        }
    }
    out
}

/// Trained on the first half of the records, the codec codes the held-out second half,
/// ambiguity codes and all, losslessly and within 1 % of its order-0 bound: the held-out
/// bases' entropy under the codec's own table (cross-entropy of the counts against the
/// slots), plus 8 raw bits per escaped code.
#[test]
fn dna_with_iupac_codes_as_escapes() {
    let Ok(text) = std::fs::read_to_string(GENBANK) else {
        eprintln!("skipped: {GENBANK} is absent (apt-get install kaptive-data)");
        return;
    };
    let recs = records(&text);
    assert!(recs.len() > 10, "{} records", recs.len());
    let (train, held) = recs.split_at(recs.len() / 2);
    let train: Vec<u8> = train.concat();
    let held: Vec<u8> = held.concat();
    let dir = std::env::temp_dir().join(format!("precast-dna-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(dir.join("train.txt"), &train).unwrap();
    let spec = "[codec.bases]\nkind = \"bytes\"\nsymbols = \"ACGT\"\nescape = true\ntable_bits = 10\nsamples = [\"train.txt\"]\n";
    let path = dir.join("dna.toml");
    std::fs::write(&path, spec).unwrap();
    let (spec, _) = precast::spec::load(&path).unwrap();
    let built = precast::build_codec(&spec.codecs[0]).unwrap();
    let escape = built.kind.escape().unwrap().symbol;
    let split = |data: &[u8]| -> (Vec<u16>, Vec<u32>) {
        data.iter()
            .map(|&b| match b"ACGT".iter().position(|&x| x == b) {
                Some(i) => (i as u16, 0),
                None => (escape as u16, u32::from(b)),
            })
            .unzip()
    };
    let (symbols, offsets) = split(&held);
    let escaped = symbols
        .iter()
        .filter(|&&s| usize::from(s) == escape)
        .count();
    let trained_escapes = split(&train)
        .0
        .iter()
        .filter(|&&s| usize::from(s) == escape)
        .count();
    assert!(
        escaped > 0 && trained_escapes > 0,
        "{escaped} {trained_escapes}"
    );

    let coder = Reference::framed(&built.tables, built.fingerprint, spec.codecs[0].framing, 1)
        .with_widths(built.kind.widths());
    let stream = coder.encode_offsets(&symbols, &offsets);
    let (s, o, used) = coder.decode_offsets(&stream, held.len()).unwrap();
    assert_eq!(used, stream.len());
    let back: Vec<u8> = s
        .iter()
        .zip(&o)
        .map(|(&s, &o)| b"ACGT".get(usize::from(s)).copied().unwrap_or(o as u8))
        .collect();
    assert_eq!(back, held);

    // The bound: each held-out symbol at -log2(slots / 2^table_bits), escapes plus 8 bits.
    let slots = built.tables.slots();
    let l = f64::from(1u32 << built.tables.table_bits());
    let bound: f64 = symbols
        .iter()
        .map(|&s| -(f64::from(slots[usize::from(s)]) / l).log2())
        .sum::<f64>()
        + 8.0 * escaped as f64;
    let bits = (stream.len() * 8) as f64;
    let e = built.report.escape.as_ref().unwrap();
    eprintln!(
        "DNA: {} held-out bases ({escaped} escaped; {trained_escapes} in {} training bases) -> {} bytes, {:.4} bits/base, bound {:.4}; an escape costs {:.2} bits",
        held.len(),
        train.len(),
        stream.len(),
        bits / held.len() as f64,
        bound / held.len() as f64,
        e.symbol_bits + f64::from(e.raw_bits)
    );
    assert!(bits <= bound * 1.01 + 64.0, "{bits} against {bound}");
    assert!(bits / held.len() as f64 <= 2.05);
}

/// The escape keys: refused on kinds without escapes and where they mean nothing, with the
/// key's place.
#[test]
fn escape_keys_are_checked() {
    let cases: &[(&str, &str)] = &[
        (
            "kind = \"tokens\"\nsymbols = [\"a\", \"b\"]\nescape = true\ntext = \"a b\"",
            "`escape` applies to kinds",
        ),
        (
            "kind = \"bytes\"\nsymbols = \"ab\"\nescape = 1",
            "`escape` must be true or false",
        ),
        (
            "kind = \"bytes\"\nsymbols = \"ab\"\nescape_share = 0.01",
            "`escape_share` needs `escape = true`",
        ),
        (
            "kind = \"bytes\"\nsymbols = \"ab\"\nescape = true\nescape_share = 0.7",
            "`escape_share` must be a number above 0 and below 0.5",
        ),
        (
            "kind = \"bytes\"\nescape = true",
            "all 256 are symbols already",
        ),
        (
            "kind = \"integers\"\nrange = [0, 10]\ndelta = true\nescape = true",
            "`escape` applies to integers without `delta`",
        ),
        (
            "kind = \"integers\"\nrange = [0, 255]\nescape = true",
            "needs a range narrower than value_type \"u8\"",
        ),
        (
            "kind = \"bytes\"\nsymbols = \"ab\"\nescape = true\nmethod = \"rans\"",
            "method = \"tans\"",
        ),
    ];
    for (body, want) in cases {
        let text = format!("[codec.c]\n{body}\n");
        let err = precast::spec::parse(&text, Path::new("escape.toml"))
            .err()
            .unwrap_or_else(|| panic!("accepted: {body}"))
            .to_string();
        assert!(err.contains(want), "{body}: {err}");
        assert!(err.contains("escape.toml:"), "not located: {err}");
    }
}

/// Training data outside the alphabet counts toward the escape, with a floor of 1/1024 of
/// the symbols; `escape_share` sets its count instead.
#[test]
fn escape_counts_come_from_the_training_data_with_a_floor() {
    let dir = std::env::temp_dir().join(format!("precast-esc-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let build = |body: &str| {
        let path = dir.join("e.toml");
        std::fs::write(&path, format!("[codec.c]\n{body}\n")).unwrap();
        let (spec, _) = precast::spec::load(&path).unwrap();
        precast::build_codec(&spec.codecs[0]).unwrap()
    };
    // 4 of 2048 symbols outside "ab": above the floor (2).
    let text = format!("{}xyzw", "ab".repeat(1022));
    let b = build(&format!(
        "kind = \"bytes\"\nsymbols = \"ab\"\nescape = true\ntext = \"{text}\""
    ));
    assert_eq!(b.model.counts, vec![1022, 1022, 4]);
    // None outside: the floor, ceil(2044 / 1024) = 2.
    let b = build(&format!(
        "kind = \"bytes\"\nsymbols = \"ab\"\nescape = true\ntext = \"{}\"",
        "ab".repeat(1022)
    ));
    assert_eq!(b.model.counts, vec![1022, 1022, 2]);
    // escape_share = 0.1 of the symbols: e / (2044 + e) = 0.1.
    let b = build(&format!(
        "kind = \"bytes\"\nsymbols = \"ab\"\nescape = true\nescape_share = 0.1\ntext = \"{}\"",
        "ab".repeat(1022)
    ));
    assert_eq!(b.model.counts, vec![1022, 1022, 227]);
    // Integers: values outside the range escape in training too.
    let b = build("kind = \"integers\"\nrange = [0, 9]\nescape = true\ntext = \"1 2 3 200 250 4\"");
    let ints = b.kind.integers().unwrap();
    assert_eq!(b.model.counts[ints.escape.unwrap().symbol], 2);
    assert_eq!(
        bin_index(&ints.bins, 3),
        ints.bins
            .iter()
            .position(|x| x.start <= 3 && 3 < x.start + (1 << x.width))
            .unwrap()
    );
}
