//! The fuzz targets' seed corpora as ordinary tests: every file in `fuzz/seeds/<target>/`
//! goes through the same check the fuzz target runs (`fuzz/checks/`, shared with
//! `fuzz/fuzz_targets/` by `#[path]`), so the seeds run on the stable toolchain with the rest
//! of the tests.
//!
//! Most seeds are derived here from the golden codecs, the specs in the repository and the
//! seeded generator; `derived_seeds_are_fresh` fails when they drift from what is committed
//! (after a format change, say). Regenerate them with
//! `PRECAST_BLESS=1 cargo test --test fuzz_seeds` and review the change. Other files in the
//! seed folders (fuzz findings, added by hand) are run but never rewritten.

// These specs carry advice on purpose; the macro reports advice as `deprecated` warnings.
#![allow(deprecated)]

mod common;

#[allow(dead_code)]
#[path = "../fuzz/checks/mod.rs"]
mod checks;

// The random spec's codecs, for `decode_random_codecs` (the fuzz target expands the same file).
#[allow(dead_code)]
mod random_codecs {
    precast_macros::codecs!("fuzz/seeds/random_specs.toml");
}

#[path = "../fuzz/checks/decode_random_codecs.rs"]
mod decode_random_codecs;

use checks::golden;
use common::{root, Rng};
use std::path::{Path, PathBuf};

type Check = fn(&[u8]);

const TARGETS: [(&str, Check); 4] = [
    ("decode_stream", checks::decode_stream::check_decode_stream),
    (
        "decode_random_codecs",
        decode_random_codecs::check_decode_random_codecs,
    ),
    (
        "encode_round_trip",
        checks::encode_round_trip::check_encode_round_trip,
    ),
    ("parse_spec", checks::parse_spec::check_parse_spec),
];

fn seed_dir(target: &str) -> PathBuf {
    root().join("fuzz/seeds").join(target)
}

/// The seed files of `target`, in name order.
fn seed_files(target: &str) -> Vec<PathBuf> {
    let dir = seed_dir(target);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|entry| entry.expect("directory entry").path())
        .filter(|p| p.is_file())
        .collect();
    files.sort();
    files
}

fn run_seeds(target: &str) {
    let check = TARGETS
        .iter()
        .find(|(name, _)| *name == target)
        .expect("known target")
        .1;
    let files = seed_files(target);
    // The derived seeds alone are more than this; fewer means the folder went missing.
    assert!(
        files.len() >= 3,
        "{target}: only {} seed files",
        files.len()
    );
    for file in files {
        let data = std::fs::read(&file).expect("seed reads");
        // Shown with the test's output when the check panics.
        eprintln!("{target}: {}", file.display());
        check(&data);
    }
}

#[test]
fn decode_stream_seeds_pass_the_check() {
    run_seeds("decode_stream");
}

#[test]
fn decode_random_codecs_seeds_pass_the_check() {
    run_seeds("decode_random_codecs");
}

#[test]
fn encode_round_trip_seeds_pass_the_check() {
    run_seeds("encode_round_trip");
}

#[test]
fn parse_spec_seeds_pass_the_check() {
    run_seeds("parse_spec");
}

/// The committed random spec is what `random_specs::spec_text` gives.
#[test]
fn random_spec_is_fresh() {
    let path = root().join("fuzz/seeds/random_specs.toml");
    let text = checks::random_specs::spec_text();
    if std::env::var_os("PRECAST_BLESS").is_some() {
        precast::write_if_changed(&path, text.as_bytes()).expect("writes random spec");
    } else {
        assert!(
            std::fs::read_to_string(&path).ok().as_deref() == Some(&text[..]),
            "{} is missing or stale\nrun `PRECAST_BLESS=1 cargo test --test fuzz_seeds` and review the diff",
            path.display()
        );
    }
}

/// The check names every codec of the spec with its kind, and the seed chosen for the spec
/// gives codecs of every kind, method, lookup, lane count and framing, alphabets of one
/// symbol and of twenty or more, zero counts, a dominant symbol and a codec with no counts.
#[test]
fn random_spec_covers_every_option() {
    let codecs = checks::random_specs::codecs();
    let listed: Vec<(String, bool)> = decode_random_codecs::CODECS
        .iter()
        .map(|&(name, bytes)| (name.to_string(), bytes))
        .collect();
    let generated: Vec<(String, bool)> = codecs.iter().map(|c| (c.name.clone(), c.bytes)).collect();
    assert_eq!(
        listed, generated,
        "update CODECS and the check in decode_random_codecs.rs"
    );
    let any = |f: &dyn Fn(&checks::random_specs::RandomCodec) -> bool| codecs.iter().any(f);
    assert!(any(&|c| c.bytes && c.counts.len() >= 20));
    assert!(any(&|c| !c.bytes && c.counts.len() >= 20));
    assert!(any(&|c| c.counts.len() == 1));
    for rans in [false, true] {
        for bare in [false, true] {
            assert!(
                any(&|c| c.rans == rans && c.bare == bare),
                "rans {rans}, bare {bare}"
            );
        }
        assert!(
            any(&|c| c.rans == rans && c.compact),
            "rans {rans}, compact"
        );
    }
    assert!(any(&|c| c.rans && c.search) && any(&|c| c.rans && !c.search));
    for lanes in [1, 2, 4, 8] {
        assert!(any(&|c| c.lanes == lanes), "lanes {lanes}");
    }
    assert!(any(&|c| c.counts.iter().all(|&n| n == 0)));
    assert!(any(&|c| c.counts.iter().any(|&n| n >= 1_000_000_000)));
    assert!(any(
        &|c| c.counts.contains(&0) && c.counts.iter().any(|&n| n > 0)
    ));
    for c in &codecs {
        assert!((1..=40).contains(&c.counts.len()), "{}", c.name);
        assert!(
            c.counts.len() <= 1 << c.table_bits && c.table_bits <= 10,
            "{}",
            c.name
        );
        assert!(!c.search || c.rans, "{}", c.name);
    }
}

#[test]
fn derived_seeds_are_fresh() {
    let bless = std::env::var_os("PRECAST_BLESS").is_some();
    let mut stale = Vec::new();
    for (target, name, bytes) in derived_seeds() {
        assert!(
            TARGETS.iter().any(|(t, _)| *t == target),
            "unknown target {target}"
        );
        let path = seed_dir(target).join(&name);
        if bless {
            precast::write_if_changed(&path, &bytes).expect("writes seed");
        } else if std::fs::read(&path).ok().as_deref() != Some(&bytes[..]) {
            stale.push(path);
        }
    }
    assert!(
        stale.is_empty(),
        "seed files missing or stale: {stale:#?}\nrun `PRECAST_BLESS=1 cargo test --test fuzz_seeds` and review the diff"
    );
}

// ---------------------------------------------------------------------------------------
// How the derived seeds are made
// ---------------------------------------------------------------------------------------

/// The training text of `mit_text`, cut at a line end near `len` bytes.
fn licence(len: usize) -> Vec<u8> {
    let text = std::fs::read(root().join("tests/specs/mit-license.txt")).expect("licence reads");
    let cut = text[..len.min(text.len())]
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(len.min(text.len()), |i| i + 1);
    text[..cut].to_vec()
}

/// Encodes with codec module `$m`, checks the stream decodes back, and returns it.
macro_rules! stream {
    ($m:path, $input:expr) => {{
        use $m as c;
        let input: &[c::Symbol] = &$input;
        let mut buf = vec![0u8; c::max_encoded_len(input.len())];
        let n = c::encode(input, &mut buf).expect("encodes");
        buf.truncate(n);
        let mut back = input.to_vec();
        assert_eq!(c::decode(&buf, &mut back), Ok(input.len()));
        assert!(back == input, "{} round trip", stringify!($m));
        buf
    }};
}

/// `len` symbols of `all`, uniformly at random.
fn random_symbols<T: Copy>(rng: &mut Rng, all: &[T], len: usize) -> Vec<T> {
    (0..len).map(|_| all[rng.below(all.len())]).collect()
}

fn random_bytes(rng: &mut Rng, len: usize) -> Vec<u8> {
    (0..len).map(|_| rng.next() as u8).collect()
}

/// A TOML basic string of `bytes` (UTF-8 text).
fn toml_string(bytes: &[u8]) -> String {
    let text = std::str::from_utf8(bytes).expect("sample is UTF-8");
    let mut out = String::from("\"");
    for c in text.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\t' => out.push_str("\\t"),
            c if c.is_control() => out.push_str(&format!("\\u{:04X}", u32::from(c))),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// The spec at `path` (relative to the repository) with each one-line `samples = [...]`
/// replaced by `text = "..."` holding the start of those samples: the fuzzer runs in its own
/// folder and must not depend on files beside the spec.
fn spec_without_samples(path: &str) -> Vec<u8> {
    let path = root().join(path);
    let folder = path.parent().expect("spec folder").to_path_buf();
    let text = std::fs::read_to_string(&path).expect("spec reads");
    let mut out = String::new();
    for line in text.lines() {
        match line.strip_prefix("samples = [") {
            Some(list) => {
                let mut sample = Vec::new();
                for name in list.split('"').skip(1).step_by(2) {
                    sample.extend(std::fs::read(folder.join(name)).expect("sample reads"));
                }
                // A few lines are plenty for a seed; cut at whitespace so no token is split.
                let cut = sample[..sample.len().min(300)]
                    .iter()
                    .rposition(u8::is_ascii_whitespace)
                    .map_or(sample.len().min(300), |i| i + 1);
                out.push_str(&format!("text = {}\n", toml_string(&sample[..cut])));
            }
            None => {
                out.push_str(line);
                out.push('\n');
            }
        }
    }
    assert!(
        !out.contains("samples ="),
        "{}: a samples list spans lines",
        path.display()
    );
    out.into_bytes()
}

/// Every derived seed: (target, file name, contents).
fn derived_seeds() -> Vec<(&'static str, String, Vec<u8>)> {
    use golden::{five, five_bare, five_rans, single, skewed, skewed_l8};
    let mut rng = Rng(0x5eed);
    let mut seeds: Vec<(&'static str, String, Vec<u8>)> = Vec::new();
    let mut add = |target: &'static str, name: &str, bytes: Vec<u8>| {
        seeds.push((target, name.to_string(), bytes));
    };

    // decode_stream: real streams of every golden codec, and damaged or foreign ones.
    let text = licence(300);
    let mit = stream!(golden::mit_text, text[..]);
    let five_stream = stream!(golden::five, random_symbols(&mut rng, &five::ALL, 100));
    add("decode_stream", "mit_text.bin", mit.clone());
    add("decode_stream", "five.bin", five_stream.clone());
    add(
        "decode_stream",
        "skewed.bin",
        stream!(golden::skewed, random_symbols(&mut rng, &skewed::ALL, 100)),
    );
    add(
        "decode_stream",
        "single.bin",
        stream!(golden::single, [single::Symbol::Only; 100]),
    );
    add(
        "decode_stream",
        "five_bare.bin",
        stream!(
            golden::five_bare,
            random_symbols(&mut rng, &five_bare::ALL, 7)
        ),
    );
    add(
        "decode_stream",
        "five_rans.bin",
        stream!(
            golden::five_rans,
            random_symbols(&mut rng, &five_rans::ALL, 100)
        ),
    );
    add(
        "decode_stream",
        "skewed_l8.bin",
        stream!(
            golden::skewed_l8,
            random_symbols(&mut rng, &skewed_l8::ALL, 100)
        ),
    );
    let mut two = stream!(golden::mit_text, b"permission is hereby granted"[..]);
    two.extend(stream!(golden::mit_text, b"the above copyright notice"[..]));
    add("decode_stream", "mit_text_two_streams.bin", two);
    add(
        "decode_stream",
        "mit_text_truncated.bin",
        mit[..mit.len() - 1].to_vec(),
    );
    let mut flipped = five_stream.clone();
    let bit = 8 * 4 + rng.below((flipped.len() - 4) * 8);
    flipped[bit / 8] ^= 1 << (bit % 8);
    add("decode_stream", "five_bit_flip.bin", flipped);
    let mut junk = five_stream[..4].to_vec();
    junk.extend(random_bytes(&mut rng, 32));
    add("decode_stream", "five_header_random_payload.bin", junk);
    // Found by this target once: a wrong padding count was accepted (see
    // `each_symbol_sequence_has_exactly_one_accepted_stream` in tests/generated.rs).
    add(
        "decode_stream",
        "skewed_padding_finding.bin",
        vec![
            0x11, 0x9d, 0x51, 0x66, 0x45, 0xec, 0xff, 0xff, 0x01, 0x00, 0x00, 0x00,
        ],
    );
    add("decode_stream", "random.bin", random_bytes(&mut rng, 64));
    add("decode_stream", "empty.bin", Vec::new());

    // decode_random_codecs: real streams of the random spec's tagged codecs (100 symbols) and
    // bare ones (7 symbols, one of the check's buffer sizes), and damaged or foreign ones.
    {
        use random_codecs::{r1, r10, r11, r2, r3, r5, r6, r9};
        // A generator of its own, so the other targets' seeds do not move.
        let mut rng = Rng(0xf022);
        let target = "decode_random_codecs";
        let r2_stream = stream!(random_codecs::r2, random_symbols(&mut rng, &r2::ALL, 100));
        add(target, "r2_tans_l8.bin", r2_stream.clone());
        add(
            target,
            "r6_rans_bytes.bin",
            stream!(
                random_codecs::r6,
                random_symbols(&mut rng, &r6::ALPHABET, 100)
            ),
        );
        let r9_stream = stream!(
            random_codecs::r9,
            random_symbols(&mut rng, &r9::ALPHABET, 100)
        );
        add(target, "r9_rans_search_l4.bin", r9_stream.clone());
        add(
            target,
            "r9_truncated.bin",
            r9_stream[..r9_stream.len() - 1].to_vec(),
        );
        add(
            target,
            "r10_rans_l2.bin",
            stream!(random_codecs::r10, random_symbols(&mut rng, &r10::ALL, 100)),
        );
        let mut two = r2_stream[..].to_vec();
        two.extend(stream!(
            random_codecs::r2,
            random_symbols(&mut rng, &r2::ALL, 20)
        ));
        add(target, "r2_two_streams.bin", two);
        add(
            target,
            "r1_bare_rans_search.bin",
            stream!(
                random_codecs::r1,
                random_symbols(&mut rng, &r1::ALPHABET, 7)
            ),
        );
        add(
            target,
            "r3_bare_uniform.bin",
            stream!(random_codecs::r3, random_symbols(&mut rng, &r3::ALL, 7)),
        );
        add(
            target,
            "r5_bare_tans_bytes.bin",
            stream!(
                random_codecs::r5,
                random_symbols(&mut rng, &r5::ALPHABET, 7)
            ),
        );
        add(
            target,
            "r11_bare_tans.bin",
            stream!(random_codecs::r11, random_symbols(&mut rng, &r11::ALL, 7)),
        );
        add(target, "random.bin", random_bytes(&mut rng, 64));
        add(target, "empty.bin", Vec::new());
    }

    // encode_round_trip: bytes as mit_text symbols, and as token indices for the others.
    add("encode_round_trip", "licence.txt", text.clone());
    let mut unknown = text[..60.min(text.len())].to_vec();
    unknown.insert(unknown.len() / 2, b'#');
    add("encode_round_trip", "unknown_byte.txt", unknown);
    add("encode_round_trip", "all_bytes.bin", (0..=255u8).collect());
    add("encode_round_trip", "run.bin", vec![4u8; 1000]);
    add(
        "encode_round_trip",
        "random.bin",
        random_bytes(&mut rng, 200),
    );
    add("encode_round_trip", "empty.bin", Vec::new());

    // parse_spec: the repository's specs, with inline text for their samples.
    add(
        "parse_spec",
        "small.toml",
        spec_without_samples("tests/specs/small.toml"),
    );
    add(
        "parse_spec",
        "matrix.toml",
        spec_without_samples("tests/specs/matrix.toml"),
    );
    add(
        "parse_spec",
        "demo.toml",
        spec_without_samples("example-crate/codecs.toml"),
    );
    seeds
}

#[test]
fn derived_seeds_are_what_they_claim() {
    // Guard the derivation itself: the stream seeds really are accepted streams (or, for the
    // damaged ones, refused where the format says they must be).
    let seeds = derived_seeds();
    let get = |name: &str| -> &[u8] {
        &seeds
            .iter()
            .find(|(t, n, _)| *t == "decode_stream" && n == name)
            .expect("seed exists")
            .2
    };
    let mut out = vec![0u8; 4096];
    let n = golden::mit_text::decode(get("mit_text.bin"), &mut out).unwrap();
    assert_eq!(out[..n], licence(300)[..]);
    assert!(golden::mit_text::decode(get("mit_text_truncated.bin"), &mut out).is_err());
    assert_eq!(
        golden::mit_text::decode(get("mit_text_two_streams.bin"), &mut out),
        Err(golden::mit_text::Error::TrailingBytes)
    );
    let mut out = vec![golden::five_bare::Symbol::A; 7];
    assert_eq!(
        golden::five_bare::decode(get("five_bare.bin"), &mut out),
        Ok(7)
    );
    // The random spec's seeds: a tagged stream decodes whole and not once truncated; a bare
    // one decodes into a buffer of its seven symbols.
    let get = |name: &str| -> &[u8] {
        &seeds
            .iter()
            .find(|(t, n, _)| *t == "decode_random_codecs" && n == name)
            .expect("seed exists")
            .2
    };
    let mut out = vec![0u8; 300];
    assert_eq!(
        random_codecs::r9::decode(get("r9_rans_search_l4.bin"), &mut out),
        Ok(100)
    );
    assert!(random_codecs::r9::decode(get("r9_truncated.bin"), &mut out).is_err());
    let mut out = vec![random_codecs::r11::ALL[0]; 7];
    assert_eq!(
        random_codecs::r11::decode(get("r11_bare_tans.bin"), &mut out),
        Ok(7)
    );
    // The spec seeds parse; the small one also renders (so the check exercises rendering).
    for name in ["small.toml", "matrix.toml", "demo.toml"] {
        let (_, _, bytes) = seeds
            .iter()
            .find(|(t, n, _)| *t == "parse_spec" && n == name)
            .unwrap();
        let text = std::str::from_utf8(bytes).unwrap();
        let parsed = precast::spec::parse(text, Path::new("seed.toml"));
        assert!(parsed.is_ok(), "{name}: {:?}", parsed.err());
    }
    let (_, _, small) = seeds.iter().find(|(_, n, _)| n == "small.toml").unwrap();
    let small = std::str::from_utf8(small).unwrap();
    assert!(precast::render_str(small, Path::new("seed.toml")).is_ok());
}
