//! Every method × lanes × framing combination of `tests/specs/matrix.toml`, expanded in place
//! by the proc macro and tied byte for byte to the in-process reference coder.

// These specs carry advice on purpose; the macro reports advice as `deprecated` warnings.
#![allow(deprecated)]

precast_macros::codecs!("../tests/specs/matrix.toml");

use precast::spec::Framing;
use precast::verify::Reference;
use std::path::Path;

#[path = "../../tests/common/mod.rs"]
mod common;
mod contexts;
mod differential;
mod escapes;
mod integers;
use common::Rng;

fn spec_path() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/specs/matrix.toml")
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

fn mit_text() -> Vec<u8> {
    std::fs::read(Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/specs/mit-license.txt"))
        .unwrap()
}

/// One codec's functions, so that one test body covers every module.
struct Codec<E> {
    name: &'static str,
    alphabet: &'static [u8],
    max_encoded_len: fn(usize) -> usize,
    encode: fn(&[u8], &mut [u8]) -> Result<usize, E>,
    decode: fn(&[u8], &mut [u8]) -> Result<usize, E>,
    too_small: E,
    /// Tagged and compact codecs: the count read from the header.
    symbol_count: Option<SymbolCount<E>>,
}

/// A generated `symbol_count`.
type SymbolCount<E> = fn(&[u8]) -> Result<usize, E>;

macro_rules! codec {
    ($m:ident) => {
        Codec {
            name: stringify!($m),
            alphabet: &$m::ALPHABET,
            max_encoded_len: $m::max_encoded_len,
            encode: $m::encode,
            decode: $m::decode,
            too_small: $m::Error::OutputTooSmall,
            symbol_count: Some($m::symbol_count),
        }
    };
    ($m:ident, bare) => {
        Codec {
            name: stringify!($m),
            alphabet: &$m::ALPHABET,
            max_encoded_len: $m::max_encoded_len,
            encode: $m::encode,
            decode: $m::decode,
            too_small: $m::Error::OutputTooSmall,
            symbol_count: None,
        }
    };
}

fn check<E: std::fmt::Debug + PartialEq + Copy>(c: Codec<E>) {
    let (built, framing, lanes) = built(c.name);
    let reference = Reference::framed(&built.tables, built.fingerprint, framing, lanes);
    let index = |input: &[u8]| -> Vec<u16> {
        input
            .iter()
            .map(|b| c.alphabet.iter().position(|a| a == b).unwrap() as u16)
            .collect()
    };
    let weights: Vec<u64> = built.model.counts.iter().map(|&n| n + 1).collect();
    let mut rng = Rng(7);
    let mut lengths: Vec<usize> = (0..=19).collect();
    lengths.extend([31, 64, 100, 257, 1000, 4099, 65_537]);
    for &len in &lengths {
        let input: Vec<u8> = (0..len)
            .map(|_| c.alphabet[rng.weighted(&weights)])
            .collect();
        let mut buf = vec![0u8; (c.max_encoded_len)(len)];
        let n = (c.encode)(&input, &mut buf).unwrap();
        let stream = &buf[..n];
        assert_eq!(
            stream,
            &reference.encode(&index(&input))[..],
            "{} len {len}",
            c.name
        );
        let mut back = vec![0u8; len];
        assert_eq!(
            (c.decode)(stream, &mut back),
            Ok(len),
            "{} len {len}",
            c.name
        );
        assert_eq!(back, input, "{} len {len}", c.name);
        if let Some(symbol_count) = c.symbol_count {
            assert_eq!(symbol_count(stream), Ok(len), "{} len {len}", c.name);
        }
        // The exact size fits (compact and bare tANS streams need room for the trailing
        // zeros they leave out); one byte less does not.
        if framing == Framing::Tagged {
            let mut exact = vec![0u8; n];
            assert_eq!((c.encode)(&input, &mut exact), Ok(n));
            assert_eq!(exact, stream);
        }
        if n > 0 {
            let mut short = vec![0u8; n - 1];
            assert_eq!((c.encode)(&input, &mut short), Err(c.too_small));
        }
        if len > 300 {
            continue;
        }
        // Every truncation of a tagged stream is refused; a compact or bare one reads as
        // zeros what was cut, so it is refused exactly when the reference refuses it.
        for cut in 0..n {
            let got = (c.decode)(&stream[..cut], &mut back).is_ok();
            let want = framing != Framing::Tagged
                && reference
                    .decode(&stream[..cut], len)
                    .is_ok_and(|(_, used)| used == cut);
            assert_eq!(got, want, "{} len {len} cut {cut}", c.name);
        }
        // Bit flips: the generated decoder agrees with the reference decoder.
        let mut out = vec![0u8; len + 64];
        let out_len = if framing == Framing::Bare {
            len
        } else {
            out.len()
        };
        for _ in 0..40.min(n * 8) {
            let mut bad = stream.to_vec();
            let bit = rng.below(n * 8);
            bad[bit / 8] ^= 1 << (bit % 8);
            let got = (c.decode)(&bad, &mut out[..out_len]);
            let want = reference
                .decode(&bad, out_len)
                .ok()
                .filter(|&(_, used)| used == bad.len());
            assert_eq!(
                got.is_ok(),
                want.is_some(),
                "{} len {len} bit {bit}",
                c.name
            );
            if let (Ok(k), Some((symbols, _))) = (got, want) {
                assert_eq!(index(&out[..k]), symbols);
            }
        }
        // Junk never panics.
        let junk: Vec<u8> = (0..rng.below(80)).map(|_| rng.next() as u8).collect();
        let _ = (c.decode)(&junk, &mut out[..out_len]);
    }
    // The worst input: the rarest symbol, repeated, within max_encoded_len.
    let slots = built.tables.slots();
    let rarest = (0..slots.len()).min_by_key(|&s| slots[s]).unwrap();
    for len in [1usize, 9, 1000, 12_345] {
        let input = vec![c.alphabet[rarest]; len];
        let mut buf = vec![0u8; (c.max_encoded_len)(len)];
        let n = (c.encode)(&input, &mut buf).unwrap();
        let mut back = vec![0u8; len];
        assert_eq!((c.decode)(&buf[..n], &mut back), Ok(len));
        assert_eq!(back, input);
    }
    // The cheapest input: the likeliest symbol, repeated; the decoder's early refusal of
    // counts a payload cannot hold must never refuse it.
    let likeliest = (0..slots.len())
        .max_by_key(|&s| (slots[s], usize::MAX - s))
        .unwrap();
    for len in [1usize, 2, 7, 8, 9, 64, 1000, 65_537] {
        let input = vec![c.alphabet[likeliest]; len];
        let mut buf = vec![0u8; (c.max_encoded_len)(len)];
        let n = (c.encode)(&input, &mut buf).unwrap();
        let mut back = vec![0u8; len];
        assert_eq!(
            (c.decode)(&buf[..n], &mut back),
            Ok(len),
            "{} len {len}",
            c.name
        );
        assert_eq!(back, input);
    }
    // Codecs trained on the licence text: it codes within 1 % of its bound.
    if mit_text().iter().all(|b| c.alphabet.contains(b)) {
        // The training text: within 1 % of the order-0 entropy bound N·H/8 (Shannon), plus the
        // fixed cost of each lane's final state (4 bytes at most).
        let text = mit_text();
        let mut buf = vec![0u8; (c.max_encoded_len)(text.len())];
        let n = (c.encode)(&text, &mut buf).unwrap();
        let bound = text.len() as f64 * built.report.entropy / 8.0;
        eprintln!(
            "{}: {n} bytes for {} symbols, bound {bound:.1}",
            c.name,
            text.len()
        );
        assert!(
            (n as f64) < bound * 1.01 + 8.0 + 4.0 * f64::from(lanes),
            "{}: {n} bytes against a bound of {bound:.1}",
            c.name
        );
    }
}

#[test]
fn tans_l1() {
    check(codec!(tans_l1));
}
#[test]
fn tans_l2() {
    check(codec!(tans_l2));
}
#[test]
fn tans_l4() {
    check(codec!(tans_l4));
}
#[test]
fn tans_l8() {
    check(codec!(tans_l8));
}
#[test]
fn rans_l1() {
    check(codec!(rans_l1));
}
#[test]
fn rans_l2() {
    check(codec!(rans_l2));
}
#[test]
fn rans_l4() {
    check(codec!(rans_l4));
}
#[test]
fn rans_l8() {
    check(codec!(rans_l8));
}
#[test]
fn rans_l4_search() {
    check(codec!(rans_l4_search));
}
#[test]
fn tans_l4_bare() {
    check(codec!(tans_l4_bare, bare));
}
#[test]
fn rans_l4_bare() {
    check(codec!(rans_l4_bare, bare));
}
#[test]
fn tans_l8_wide() {
    check(codec!(tans_l8_wide));
}
#[test]
fn rans_l8_wide() {
    check(codec!(rans_l8_wide));
}

#[test]
fn token_codecs_round_trip_and_match_the_reference() {
    let mut rng = Rng(11);
    let (b, framing, lanes) = built("skewed_rans_l2");
    let reference = Reference::framed(&b.tables, b.fingerprint, framing, lanes);
    for len in [0usize, 1, 2, 3, 999, 20_000] {
        let idx: Vec<u16> = (0..len).map(|_| rng.weighted(&[90, 10]) as u16).collect();
        let input: Vec<_> = idx
            .iter()
            .map(|&i| skewed_rans_l2::ALL[usize::from(i)])
            .collect();
        let mut buf = vec![0u8; skewed_rans_l2::max_encoded_len(len)];
        let n = skewed_rans_l2::encode(&input, &mut buf).unwrap();
        assert_eq!(buf[..n], reference.encode(&idx)[..]);
        let mut back = vec![skewed_rans_l2::Symbol::Likely; len];
        assert_eq!(skewed_rans_l2::decode(&buf[..n], &mut back), Ok(len));
        assert_eq!(back, input);
        // Binary p = 0.9: entropy 0.4689955936 bits (CHECKS.md, recomputed), where a Huffman
        // code spends 1 bit (common practice); allow the sampling noise of 20k draws.
        if len == 20_000 {
            assert!(((n * 8) as f64 / len as f64) < 0.49);
        }
    }
    // The cheapest input, where the decoder's bound on what a symbol costs is tightest.
    for len in [1usize, 100, 100_000] {
        let input = vec![skewed_rans_l2::Symbol::Likely; len];
        let mut buf = vec![0u8; skewed_rans_l2::max_encoded_len(len)];
        let n = skewed_rans_l2::encode(&input, &mut buf).unwrap();
        let mut back = vec![skewed_rans_l2::Symbol::Unlikely; len];
        assert_eq!(skewed_rans_l2::decode(&buf[..n], &mut back), Ok(len));
        assert_eq!(back, input);
    }
    let (b, framing, lanes) = built("five_rans_search");
    let reference = Reference::framed(&b.tables, b.fingerprint, framing, lanes);
    for len in [0usize, 1, 5, 64, 5000] {
        let idx: Vec<u16> = (0..len)
            .map(|_| rng.weighted(&b.model.counts) as u16)
            .collect();
        let input: Vec<_> = idx
            .iter()
            .map(|&i| five_rans_search::ALL[usize::from(i)])
            .collect();
        let mut buf = vec![0u8; five_rans_search::max_encoded_len(len)];
        let n = five_rans_search::encode(&input, &mut buf).unwrap();
        assert_eq!(buf[..n], reference.encode(&idx)[..]);
        let mut back = vec![five_rans_search::Symbol::A; len];
        assert_eq!(five_rans_search::decode(&buf[..n], &mut back), Ok(len));
        assert_eq!(back, input);
    }
    // One symbol: nothing per symbol, only the header and the four lanes' states.
    for len in [0usize, 1, 1000, 100_000] {
        let input = vec![single_rans::Symbol::Only; len];
        let mut buf = vec![0u8; single_rans::max_encoded_len(len)];
        let n = single_rans::encode(&input, &mut buf).unwrap();
        assert_eq!(n, 2 + precast::verify::leb128(len as u64).len() + 16);
        let mut back = vec![single_rans::Symbol::Only; len];
        assert_eq!(single_rans::decode(&buf[..n], &mut back), Ok(len));
    }
}

#[test]
fn tans_l1_compact() {
    check(codec!(tans_l1_compact));
}

#[test]
fn tans_l1_bare() {
    check(codec!(tans_l1_bare, bare));
}

#[test]
fn tans_l2_compact() {
    check(codec!(tans_l2_compact));
}

#[test]
fn rans_l1_compact() {
    check(codec!(rans_l1_compact));
}

#[test]
fn skewed_tans_l1() {
    check(codec!(skewed_tans_l1));
}

#[test]
fn skewed_tans_l2_compact() {
    check(codec!(skewed_tans_l2_compact));
}
