//! `kind = "chars"`: the generated `&str` API round-trips text of one- to four-byte UTF-8
//! characters for each framing a chars codec allows, lanes 1 to 8 and both methods, writes
//! the reference coder's streams byte for byte, and refuses characters outside the
//! alphabet, small buffers and damaged streams without a panic. Spec and sample mistakes
//! are located (sample errors at their byte offset, also across the 1 MiB read blocks).
//!
//! UTF-8 facts used here: a scalar value takes 1, 2, 3 or 4 bytes below U+0080, U+0800,
//! U+10000 and U+110000 (The Unicode Standard, ch. 3, Table 3-6), and bytes 0x80..=0xBF
//! never start a character, 0xC0, 0xC1 and 0xF5..=0xFF never occur (Table 3-7; RFC 3629).

// These specs carry advice on purpose; the macro reports advice as `deprecated` warnings.
#![allow(deprecated)]

mod common;

mod generated {
    precast_macros::codecs!("tests/specs/chars.toml");
}

use common::{render_failure, root, scratch, Rng};
use generated::*;
use precast::spec::Framing;
use precast::verify::Reference;
use std::path::{Path, PathBuf};

/// One codec's functions, so that one test body covers every module.
struct Codec<E> {
    name: &'static str,
    alphabet: &'static [char],
    max_utf8_len: usize,
    max_encoded_len: fn(usize) -> usize,
    max_decoded_bytes: fn(usize) -> usize,
    encode: fn(&str, &mut [u8]) -> Result<usize, E>,
    decode: for<'a> fn(&[u8], &'a mut [u8]) -> Result<&'a str, E>,
    symbol_count: fn(&[u8]) -> Result<usize, E>,
    too_small: E,
    unknown: fn(usize) -> E,
}

macro_rules! codec {
    ($m:ident) => {
        Codec {
            name: stringify!($m),
            alphabet: &$m::ALPHABET,
            max_utf8_len: $m::MAX_UTF8_LEN,
            max_encoded_len: $m::max_encoded_len,
            max_decoded_bytes: $m::max_decoded_bytes,
            encode: $m::encode,
            decode: $m::decode,
            symbol_count: $m::symbol_count,
            too_small: $m::Error::OutputTooSmall,
            unknown: |position| $m::Error::UnknownSymbol { position },
        }
    };
}

fn spec_path() -> PathBuf {
    root().join("tests/specs/chars.toml")
}

/// The generator's own build of codec `name`, and its framing and lanes.
fn built(name: &str) -> (precast::Built, Framing, u32) {
    let (spec, _) = precast::spec::load(&spec_path()).unwrap();
    let codec = spec.codecs.iter().find(|c| c.name == name).unwrap();
    (
        precast::build_codec(codec).unwrap(),
        codec.framing,
        codec.lanes,
    )
}

fn notes_text() -> String {
    std::fs::read_to_string(root().join("tests/specs/gauge-notes-utf8.txt")).unwrap()
}

fn licence_text() -> String {
    std::fs::read_to_string(root().join("tests/specs/apache-2.0.txt")).unwrap()
}

/// Encodes `text` into a buffer of exactly `max_encoded_len` characters and decodes it
/// into exactly `max_decoded_bytes`; returns the stream.
fn round_trip<E: std::fmt::Debug + PartialEq + Copy>(c: &Codec<E>, text: &str) -> Vec<u8> {
    let n = text.chars().count();
    let mut buf = vec![0xa5u8; (c.max_encoded_len)(n)];
    let len = (c.encode)(text, &mut buf).unwrap_or_else(|e| panic!("{}: {e:?}", c.name));
    let stream = buf[..len].to_vec();
    assert_eq!((c.symbol_count)(&stream), Ok(n), "{}", c.name);
    let mut out = vec![0x5au8; (c.max_decoded_bytes)(n)];
    assert_eq!((c.max_decoded_bytes)(n), n * c.max_utf8_len);
    assert_eq!((c.decode)(&stream, &mut out), Ok(text), "{}", c.name);
    // A larger buffer decodes the same; a smaller one is refused.
    let mut more = vec![0u8; out.len() + 7];
    assert_eq!((c.decode)(&stream, &mut more), Ok(text), "{}", c.name);
    if n > 0 {
        let mut less = vec![0u8; out.len() - 1];
        assert_eq!(
            (c.decode)(&stream, &mut less),
            Err(c.too_small),
            "{}",
            c.name
        );
    }
    stream
}

fn check<E: std::fmt::Debug + PartialEq + Copy>(c: Codec<E>) {
    let (built, framing, lanes) = built(c.name);
    assert_ne!(framing, Framing::Bare);
    let reference = Reference::framed(&built.tables, built.fingerprint, framing, lanes);
    let index = |text: &str| -> Vec<u16> {
        text.chars()
            .map(|ch| c.alphabet.iter().position(|&a| a == ch).unwrap() as u16)
            .collect()
    };
    let mut texts: Vec<String> = vec![String::new()];
    // Every character alone, all in order, all backwards, and the widest ones only (the
    // decoder's room is then exactly full).
    texts.extend(c.alphabet.iter().map(|ch| ch.to_string()));
    texts.push(c.alphabet.iter().collect());
    texts.push(c.alphabet.iter().rev().collect());
    let widest: String = c
        .alphabet
        .iter()
        .filter(|ch| ch.len_utf8() == c.max_utf8_len)
        .cycle()
        .take(37)
        .collect();
    texts.push(widest);
    // Random text drawn with the training counts (plus one), at many lengths.
    let weights: Vec<u64> = built.model.counts.iter().map(|&n| n + 1).collect();
    let mut rng = Rng(11);
    let mut lengths: Vec<usize> = (1..=19).collect();
    lengths.extend([31, 64, 100, 257, 1000, 4099]);
    for len in lengths {
        texts.push(
            (0..len)
                .map(|_| c.alphabet[rng.weighted(&weights)])
                .collect(),
        );
    }
    for text in &texts {
        let stream = round_trip(&c, text);
        assert_eq!(
            stream,
            reference.encode(&index(text)),
            "{}: {text:?}",
            c.name
        );
    }
    // One byte of `out` less than `max_encoded_len` may still do (the bound is loose), but
    // far too little is refused, never a panic.
    for text in texts.iter().filter(|t| !t.is_empty()).take(40) {
        let n = text.chars().count();
        for len in [0, 1, n / 2, n, n + 1] {
            let mut small = vec![0u8; len];
            assert_eq!(
                (c.encode)(text, &mut small),
                Err(c.too_small),
                "{}: {len} bytes for {text:?}",
                c.name
            );
        }
    }
    check_refusals(&c, &texts, &mut rng);
}

/// Characters outside the alphabet, and damaged streams.
fn check_refusals<E: std::fmt::Debug + PartialEq + Copy>(
    c: &Codec<E>,
    texts: &[String],
    rng: &mut Rng,
) {
    // A character outside the alphabet at a byte offset after characters of every width
    // the alphabet has, and at the start.
    let outside = ['\u{7f}', 'Ω', '⊕', '🦀', 'q', '\u{202d}']
        .into_iter()
        .filter(|ch| !c.alphabet.contains(ch));
    for bad in outside {
        let before: String = c.alphabet.iter().take(9).collect();
        let text = format!("{before}{bad}{before}");
        let mut buf = vec![0u8; (c.max_encoded_len)(text.chars().count())];
        assert_eq!(
            (c.encode)(&text, &mut buf),
            Err((c.unknown)(before.len())),
            "{}: {bad:?}",
            c.name
        );
        let text = format!("{bad}{before}");
        assert_eq!(
            (c.encode)(&text, &mut buf),
            Err((c.unknown)(0)),
            "{}",
            c.name
        );
    }
    // Damaged streams: every result is an error or text of the alphabet, which encodes to
    // a stream that decodes to it again.
    let mut out = vec![0u8; 64 * 1024];
    for text in texts.iter().take(60) {
        let n = text.chars().count();
        let mut buf = vec![0u8; (c.max_encoded_len)(n)];
        let len = (c.encode)(text, &mut buf).unwrap();
        let stream = &buf[..len];
        let mut damaged: Vec<Vec<u8>> = (0..len).map(|cut| stream[..cut].to_vec()).collect();
        for _ in 0..24.min(len * 8) {
            let mut bad = stream.to_vec();
            let bit = rng.below(len * 8);
            bad[bit / 8] ^= 1 << (bit % 8);
            damaged.push(bad);
        }
        let mut noise = stream.to_vec();
        noise.extend((0..rng.below(12)).map(|_| rng.next() as u8));
        damaged.push(noise);
        // Headers claiming more characters than any buffer holds.
        let mut huge = stream[..2.min(len)].to_vec();
        huge.extend([0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x7f]);
        damaged.push(huge);
        for bad in &damaged {
            if let Ok(back) = (c.decode)(bad, &mut out) {
                assert!(
                    back.chars().all(|ch| c.alphabet.contains(&ch)),
                    "{}",
                    c.name
                );
                let back = back.to_string();
                let mut again = vec![0u8; (c.max_encoded_len)(back.chars().count())];
                let l = (c.encode)(&back, &mut again).unwrap();
                let mut out2 = vec![0u8; (c.max_decoded_bytes)(back.chars().count())];
                assert_eq!((c.decode)(&again[..l], &mut out2), Ok(back.as_str()));
            }
        }
    }
    // Random bytes after a valid header byte or two.
    for _ in 0..500 {
        let len = rng.below(40);
        let bytes: Vec<u8> = (0..len).map(|_| rng.next() as u8).collect();
        let _ = (c.decode)(&bytes, &mut out);
        let _ = (c.symbol_count)(&bytes);
    }
}

#[test]
fn notes_tagged_tans_one_lane() {
    check(codec!(notes));
}

#[test]
fn notes_compact_two_lanes() {
    check(codec!(notes_compact_l2));
}

#[test]
fn notes_tagged_four_lanes() {
    check(codec!(notes_l4));
}

#[test]
fn notes_compact_eight_lanes() {
    check(codec!(notes_l8_compact));
}

#[test]
fn notes_rans_table_two_lanes() {
    check(codec!(notes_rans));
}

#[test]
fn notes_rans_search_four_lanes() {
    check(codec!(notes_rans_search_l4));
}

#[test]
fn notes_chosen_sizes() {
    check(codec!(notes_chosen));
}

#[test]
fn ascii_alphabet() {
    check(codec!(ascii_compact));
}

#[test]
fn two_byte_alphabet_in_one_dense_table() {
    check(codec!(latin));
}

#[test]
fn three_byte_alphabet() {
    check(codec!(costs));
}

/// The training text itself: the field notes (every width of UTF-8) and the licence.
#[test]
fn training_text_round_trips() {
    let notes = notes_text();
    let licence = licence_text();
    for text in [&notes, &licence] {
        round_trip(&codec!(notes), text);
        round_trip(&codec!(notes_l4), text);
        round_trip(&codec!(notes_rans), text);
        round_trip(&codec!(notes_compact_l2), text);
    }
    round_trip(&codec!(ascii_compact), &licence);
    // Its report counts what the files hold, character by character.
    let (built, _, _) = built("notes");
    let total: u64 = built.model.counts.iter().sum();
    assert_eq!(
        total as usize,
        notes.chars().count() + licence.chars().count()
    );
}

/// Tagged streams delimit themselves: `decode_prefix` splits two that follow each other.
#[test]
fn tagged_streams_follow_one_another() {
    let (a, b) = ("Pegel 1,42 m ↑ 🌊", "ok → 💧\n");
    let mut buf = vec![0u8; notes::max_encoded_len(32)];
    let la = notes::encode(a, &mut buf).unwrap();
    let mut both = buf[..la].to_vec();
    let lb = notes::encode(b, &mut buf).unwrap();
    both.extend_from_slice(&buf[..lb]);
    let mut out = vec![0u8; 256];
    let (text, used) = notes::decode_prefix(&both, &mut out).unwrap();
    assert_eq!((text, used), (a, la));
    let (text, used) = notes::decode_prefix(&both[la..], &mut out).unwrap();
    assert_eq!((text, used), (b, lb));
    assert_eq!(
        notes::decode(&both, &mut out),
        Err(notes::Error::TrailingBytes)
    );
}

/// The API as documented: the error's position is a byte offset that slices the input.
#[test]
fn unknown_character_position_slices_the_input() {
    let text = "Gauge 7: 2,07 m → ok ✓ done";
    let mut buf = vec![0u8; notes::max_encoded_len(text.chars().count())];
    let Err(notes::Error::UnknownSymbol { position }) = notes::encode(text, &mut buf) else {
        panic!("the check mark is not in the alphabet");
    };
    assert!(text[position..].starts_with('✓'));
    assert_eq!(
        notes::Error::UnknownSymbol { position }.to_string(),
        format!("the character at byte {position} is not in the alphabet")
    );
    // ASCII codecs map bytes: a multi-byte character is refused at its first byte.
    let text = "License é";
    let mut buf = vec![0u8; ascii_compact::max_encoded_len(text.len())];
    assert_eq!(
        ascii_compact::encode(text, &mut buf),
        Err(ascii_compact::Error::UnknownSymbol { position: 8 })
    );
}

// ---------------------------------------------------------------------------------------
// Specs and samples
// ---------------------------------------------------------------------------------------

const SAMPLE_SPEC: &str = r#"
[codec.notes]
kind = "chars"
symbols = "abcé€🌊 \n"
samples = ["notes.txt"]
"#;

/// A bad sample is refused at its file, line and column (1-based, columns counting
/// characters; common practice) and its byte offset.
#[test]
fn bad_sample_files_are_located() {
    let cases: [(&str, &[u8], &str, &str); 6] = [
        (
            "outside",
            "abc\nbé x\n".as_bytes(),
            "notes.txt:2:4:",
            "'x' (U+0078) is not in the alphabet (byte offset 8)",
        ),
        (
            "lone continuation",
            b"ab\n\x80c",
            "notes.txt:2:1:",
            "invalid UTF-8 (a sequence starting with byte 0x80): a chars codec reads UTF-8 text (byte offset 3)",
        ),
        (
            "overlong",
            b"a\xc0\xafb",
            "notes.txt:1:2:",
            "byte 0xc0",
        ),
        (
            // A surrogate's encoding, ED A0 80, is not UTF-8 (Table 3-7).
            "surrogate",
            b"\xf0\x9f\x8c\x8a a\xed\xa0\x80",
            "notes.txt:1:4:",
            "(byte offset 6)",
        ),
        (
            "cut short inside",
            b"ab\xe2\x82c",
            "notes.txt:1:3:",
            "byte 0xe2",
        ),
        (
            "cut short at the end",
            "a€\n🌊".as_bytes().split_last().unwrap().1,
            "notes.txt:2:1:",
            "(the data ends inside a character starting with byte 0xf0): a chars codec reads UTF-8 text (byte offset 5)",
        ),
    ];
    for (name, sample, at, message) in cases {
        let e = render_failure(
            &name.replace(' ', "_"),
            SAMPLE_SPEC,
            &[("notes.txt", sample)],
        );
        assert!(e.contains(at), "{name}: {e}");
        assert!(e.contains(message), "{name}: {e}");
        assert!(e.contains("codec `notes`"), "{name}: {e}");
    }
}

/// Samples are read in 1 MiB blocks: a character split between two blocks counts once,
/// and a mistake past the first block is located at its byte offset in the file.
#[test]
fn characters_across_read_blocks() {
    const BLOCK: usize = 1 << 20;
    for split in 1..4 {
        // The four-byte wave starts `split` bytes before the block's end.
        let mut text = "a".repeat(BLOCK - split);
        text.push('🌊');
        text.push_str("é€\n");
        let dir = scratch(&format!("blocks{split}"));
        std::fs::write(dir.join("notes.txt"), &text).unwrap();
        let path = dir.join("codecs.toml");
        std::fs::write(&path, SAMPLE_SPEC).unwrap();
        let out = precast::render(&path).unwrap();
        let counts: Vec<(String, u64)> = out.reports[0]
            .lines
            .iter()
            .map(|(l, n, _)| (l.clone(), *n))
            .collect();
        assert!(
            counts.contains(&("'🌊' (U+1F30A)".to_string(), 1)),
            "{counts:?}"
        );
        assert!(counts.contains(&("'a' (U+0061)".to_string(), (BLOCK - split) as u64)));
    }
    // A bad byte inside a character that straddles the block boundary.
    let mut bytes = vec![b'a'; BLOCK - 2];
    bytes.extend_from_slice(b"\xf0\x9f\x41\x41");
    let e = render_failure("blocks_bad", SAMPLE_SPEC, &[("notes.txt", &bytes)]);
    assert!(e.contains(&format!("(byte offset {})", BLOCK - 2)), "{e}");
}

/// The scanner fed in pieces of every size gives the symbols of the whole text, and
/// an invalid byte at the same offset, wherever the pieces are cut.
#[test]
fn scanner_keeps_partial_characters_between_pieces() {
    let spec = precast::spec::parse(
        &SAMPLE_SPEC.replace("samples = [\"notes.txt\"]", "text = \"a\""),
        Path::new("codecs.toml"),
    )
    .unwrap();
    let kind = spec.codecs[0].kind.clone();
    let text = "aé€🌊\nbé🌊🌊c€\n".as_bytes();
    let whole = precast::kind::scan(kind.as_ref(), text).unwrap();
    assert_eq!(whole.len(), "aé€🌊\nbé🌊🌊c€\n".chars().count());
    let mut bad = text.to_vec();
    // A bad byte inside the first wave (bytes 6..10): the error is at the wave's start.
    bad.insert(9, 0xff);
    let bad_at = std::str::from_utf8(&bad).unwrap_err().valid_up_to();
    assert_eq!(bad_at, 6);
    for size in 1..=text.len() {
        for (data, want) in [(text, Ok(whole.clone())), (&bad[..], Err(bad_at))] {
            let mut scanner = kind.scanner();
            let mut out = Vec::new();
            let mut result = Ok(());
            for piece in data.chunks(size) {
                result = scanner.feed(piece, &mut out);
                if result.is_err() {
                    break;
                }
            }
            if result.is_ok() {
                result = scanner.finish(&mut out);
            }
            match (result, &want) {
                (Ok(()), Ok(w)) => assert_eq!(&out, w, "pieces of {size}"),
                (Err(m), Err(at)) => assert_eq!(m.offset, *at, "pieces of {size}: {m:?}"),
                (got, _) => panic!("pieces of {size}: {got:?}"),
            }
        }
    }
}

/// Spec mistakes of chars codecs, each at its key.
#[test]
fn chars_spec_errors_are_located() {
    let many: String = ('\u{100}'..'\u{200}').collect();
    let cases: Vec<(&str, String, &str)> = vec![
        (
            "no symbols",
            "kind = \"chars\"\ntext = \"a\"".into(),
            "missing key `symbols`",
        ),
        (
            "empty",
            "kind = \"chars\"\nsymbols = \"\"\ntext = \"a\"".into(),
            "the alphabet is empty",
        ),
        (
            "duplicate",
            "kind = \"chars\"\nsymbols = \"aéb é\"\ntext = \"a\"".into(),
            "symbol 'é' (U+00E9) is listed twice (first as entry 2)",
        ),
        (
            "duplicate in a list",
            "kind = \"chars\"\nsymbols = [\"a\", \"🌊\", \"🌊\"]\ntext = \"a\"".into(),
            "symbol '🌊' (U+1F30A) is listed twice (first as entry 2)",
        ),
        (
            "two characters",
            "kind = \"chars\"\nsymbols = [\"a\", \"é€\"]\ntext = \"a\"".into(),
            "\"é€\" is 2 characters, not one",
        ),
        (
            "empty item",
            "kind = \"chars\"\nsymbols = [\"a\", \"\"]\ntext = \"a\"".into(),
            "an empty string is not a character",
        ),
        (
            "number item",
            "kind = \"chars\"\nsymbols = [\"a\", 98]\ntext = \"a\"".into(),
            "a chars symbol is a one-character string, found an integer",
        ),
        (
            "table",
            "kind = \"chars\"\nsymbols = { a = 1 }\ntext = \"a\"".into(),
            "`symbols` of a chars codec is a string or a list of one-character strings",
        ),
        (
            "too many",
            format!("kind = \"chars\"\nsymbols = \"{many}\"\ntext = \"\u{100}\""),
            "256 characters are more than a chars codec may have (255)",
        ),
        (
            "bare",
            "kind = \"chars\"\nsymbols = \"ab\"\nframing = \"bare\"\ntext = \"a\"".into(),
            "a chars codec needs the symbol count in its header",
        ),
        (
            "count key",
            "kind = \"chars\"\nsymbols = \"ab\"\ncounts = { ab = 3 }".into(),
            "count key \"ab\" is not one character",
        ),
        (
            "count outside",
            "kind = \"chars\"\nsymbols = \"ab\"\ncounts = { \"é\" = 3 }".into(),
            "count for 'é' (U+00E9) which is not in the alphabet",
        ),
        (
            "inline text",
            "kind = \"chars\"\nsymbols = \"ab\"\ntext = \"ab€\"".into(),
            "'€' (U+20AC) is not in the alphabet (at byte 2 of the inline text)",
        ),
    ];
    for (name, body, message) in cases {
        let spec = format!("[codec.notes]\n{body}\n");
        let e = render_failure(&name.replace(' ', "_"), &spec, &[]);
        assert!(e.contains("codecs.toml:"), "{name}: {e}");
        assert!(e.contains(message), "{name}: {e}");
    }
    // 255 characters are fine.
    let most: String = ('\u{100}'..'\u{1ff}').collect();
    let spec =
        format!("[codec.notes]\nkind = \"chars\"\nsymbols = \"{most}\"\ntext = \"\u{100}\"\n");
    precast::render_str(&spec, Path::new("codecs.toml")).unwrap();
}

/// Counts keyed by character, labels in the report, and a fingerprint that covers the
/// alphabet (its order too: indices are positions in it).
#[test]
fn counts_labels_and_fingerprint() {
    let spec = r#"
[codec.notes]
kind = "chars"
symbols = "aé€🌊"
counts = { "é" = 12, "a" = 30, "€" = 2, "🌊" = 1 }
table_bits = 6
"#;
    let out = precast::render_str(spec, Path::new("codecs.toml")).unwrap();
    let lines = &out.reports[0].lines;
    assert_eq!(lines[1], ("'é' (U+00E9)".to_string(), 12, lines[1].2));
    assert_eq!(lines[3].0, "'🌊' (U+1F30A)");
    assert!(out.source.contains("pub const MAX_UTF8_LEN: usize = 4;"));
    let fingerprint = |source: &str| {
        let at = source.find("pub const FINGERPRINT: u16 = ").unwrap();
        source[at..].split(';').next().unwrap().to_string()
    };
    let swapped = spec
        .replace("\"aé€🌊\"", "\"éa€🌊\"")
        .replace("\"é\" = 12, \"a\" = 30", "\"é\" = 30, \"a\" = 12");
    let other = precast::render_str(&swapped, Path::new("codecs.toml")).unwrap();
    assert_ne!(fingerprint(&out.source), fingerprint(&other.source));
}

/// Control and bidirectional-override characters reach the generated source escaped only
/// (the `costs` codec has U+202E, and compiles above under `-D warnings` in clippy).
#[test]
fn unusual_characters_are_escaped_in_the_source() {
    let out = precast::render(spec_path()).unwrap();
    assert!(!out.source.contains('\u{202e}'));
    assert!(out.source.contains("'\\u{202e}' (U+202E)"));
    assert_eq!(costs::ALPHABET.last(), Some(&'\u{202e}'));
    // `latin` has two-byte characters only: one dense table, no search.
    assert_eq!(latin::MAX_UTF8_LEN, 2);
    let latin = out.source.split("pub mod latin {").nth(1).unwrap();
    let latin = latin.split("\npub mod ").next().unwrap();
    assert!(!latin.contains("WIDE_CHARS"));
    assert!(latin.contains("static CHAR_INDEX: [u8; 253]"));
}

/// One escape codec's functions.
struct Escaping<E> {
    name: &'static str,
    alphabet: &'static [char],
    max_encoded_len: fn(usize) -> usize,
    max_decoded_bytes: fn(usize) -> usize,
    encode: fn(&str, &mut [u8]) -> Result<usize, E>,
    decode: for<'a> fn(&[u8], &'a mut [u8]) -> Result<&'a str, E>,
    symbol_count: fn(&[u8]) -> Result<usize, E>,
}

macro_rules! escaping {
    ($m:ident) => {
        Escaping {
            name: stringify!($m),
            alphabet: &$m::ALPHABET,
            max_encoded_len: $m::max_encoded_len,
            max_decoded_bytes: $m::max_decoded_bytes,
            encode: $m::encode,
            decode: $m::decode,
            symbol_count: $m::symbol_count,
        }
    };
}

/// Text with characters outside the alphabet round-trips, the stream byte for byte the
/// reference coder's for the index bytes (an escaped character as three digits of 7 bits,
/// each the escape symbol and its 8 bits); damaged streams never panic.
fn check_escapes<E: std::fmt::Debug + PartialEq + Copy>(c: Escaping<E>) {
    let (built, framing, lanes) = built(c.name);
    let k = c.alphabet.len() as u16;
    let reference = Reference::framed(&built.tables, built.fingerprint, framing, lanes)
        .with_widths(built.kind.widths());
    // Index bytes and their raw bits, as the encoder's scratch holds them.
    let split = |text: &str| -> (Vec<u16>, Vec<u32>) {
        let mut s = Vec::new();
        let mut o = Vec::new();
        for ch in text.chars() {
            match c.alphabet.iter().position(|&a| a == ch) {
                Some(i) => {
                    s.push(i as u16);
                    o.push(0);
                }
                None => {
                    let v = u32::from(ch);
                    for d in [v >> 14, (v >> 7) & 127, v & 127] {
                        s.push(k);
                        o.push(u32::from(k) + d);
                    }
                }
            }
        }
        (s, o)
    };
    let mut texts: Vec<String> = vec![
        String::new(),
        "é".into(),
        "A".into(),
        "\u{0}".into(),
        "\u{10FFFF}".into(),
        "\u{FFFD}\u{7FF}\u{800}\u{FFFF}\u{10000}".into(),
        "Level 2.4 m ↑, 🌊 rising at Gauge 7 (Ü-bridge).".into(),
    ];
    texts.push(notes_text());
    texts.push(licence_text());
    let pool: Vec<char> = notes_text()
        .chars()
        .chain("ABCßΩЖ中😀\u{10FFFF}".chars())
        .collect();
    let mut rng = Rng(41);
    for len in [1usize, 2, 3, 5, 8, 13, 64, 257, 1000] {
        texts.push((0..len).map(|_| pool[rng.below(pool.len())]).collect());
    }
    for text in &texts {
        let n = text.chars().count();
        let mut buf = vec![0u8; (c.max_encoded_len)(n)];
        let len = (c.encode)(text, &mut buf).unwrap_or_else(|e| panic!("{}: {e:?}", c.name));
        let stream = &buf[..len];
        let (symbols, offsets) = split(text);
        assert_eq!(
            stream,
            &reference.encode_offsets(&symbols, &offsets)[..],
            "{}: {text:?}",
            c.name
        );
        let count = (c.symbol_count)(stream).unwrap();
        assert_eq!(count, symbols.len());
        let mut out = vec![0u8; (c.max_decoded_bytes)(count)];
        assert_eq!(
            (c.decode)(stream, &mut out),
            Ok(text.as_str()),
            "{}",
            c.name
        );
        // Damaged streams: any outcome but a panic; whatever decodes is text.
        if text.len() < 300 {
            for _ in 0..40.min(len * 8) {
                let mut bad = stream.to_vec();
                let bit = rng.below(len * 8);
                bad[bit / 8] ^= 1 << (bit % 8);
                let mut out = vec![0u8; 4 * (count + 64)];
                let _ = (c.decode)(&bad, &mut out);
            }
            for cut in 0..len {
                let mut out = vec![0u8; 4 * (count + 64)];
                let _ = (c.decode)(&stream[..cut], &mut out);
            }
        }
    }
    // An escaped character's three index bytes fit in what `max_encoded_len` promises.
    let all_escaped: String = "😀".repeat(50);
    let mut buf = vec![0u8; (c.max_encoded_len)(50)];
    assert!((c.encode)(&all_escaped, &mut buf).is_ok());
    let e = built.report.escape.as_ref().unwrap();
    eprintln!(
        "{}: an escaped index byte costs {:.2} bits, a character three of them",
        c.name,
        e.symbol_bits + f64::from(e.raw_bits)
    );
}

#[test]
fn escapes_carry_any_character() {
    check_escapes(escaping!(lower_escape));
}

#[test]
fn escapes_compact_two_lanes() {
    check_escapes(escaping!(lower_escape_compact_l2));
}

/// A chars codec with contexts and an escape: text round-trips, and the stream is the
/// reference coder's (with the same table sets) for the index bytes.
#[test]
fn contexts_and_escapes_together() {
    let c = escaping!(lower_escape_context);
    let (built, framing, lanes) = built(c.name);
    assert!(built.sets.len() > 1, "one table set");
    let reference = Reference::framed(&built.tables, built.fingerprint, framing, lanes)
        .with_widths(built.kind.widths())
        .with_contexts(&built.sets, built.set_of.clone());
    let k = c.alphabet.len() as u16;
    for text in [
        String::new(),
        "a".to_string(),
        "Level 2.4 m ↑, 🌊 rising at Gauge 7 (Ü-bridge).".to_string(),
        notes_text(),
        licence_text(),
    ] {
        let mut symbols = Vec::new();
        let mut offsets = Vec::new();
        for ch in text.chars() {
            match c.alphabet.iter().position(|&a| a == ch) {
                Some(i) => {
                    symbols.push(i as u16);
                    offsets.push(0);
                }
                None => {
                    let v = u32::from(ch);
                    for d in [v >> 14, (v >> 7) & 127, v & 127] {
                        symbols.push(k);
                        offsets.push(u32::from(k) + d);
                    }
                }
            }
        }
        let n = text.chars().count();
        let mut buf = vec![0u8; (c.max_encoded_len)(n)];
        let len = (c.encode)(&text, &mut buf).unwrap();
        assert_eq!(
            &buf[..len],
            &reference.encode_offsets(&symbols, &offsets)[..],
            "{text:?}"
        );
        let count = (c.symbol_count)(&buf[..len]).unwrap();
        let mut out = vec![0u8; (c.max_decoded_bytes)(count)];
        assert_eq!((c.decode)(&buf[..len], &mut out), Ok(text.as_str()));
    }
}
