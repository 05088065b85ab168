//! The context codecs of `tests/specs/contexts.toml`, expanded in place and tied byte for
//! byte to the reference coder, which chooses each symbol's table set by the same rule (the
//! lane's previous symbol): licence text and random bytes, every lane count and framing,
//! escapes, integers as values and as deltas, truncated and damaged streams. Part of the
//! `matrix` test, so that `--target i686-unknown-linux-gnu` runs the 32-bit path.

precast_macros::codecs!("../tests/specs/contexts.toml");

use super::common::Rng;
use precast::kind::integers::bin_index;
use precast::spec::Framing;
use precast::verify::Reference;
use std::path::Path;

fn spec_dir() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/specs")
}

fn built(name: &str) -> (precast::Built, Framing, u32) {
    let (spec, _) = precast::spec::load(&spec_dir().join("contexts.toml")).unwrap();
    let codec = spec.codecs.iter().find(|c| c.name == name).unwrap();
    (
        precast::build_codec(codec).unwrap(),
        codec.framing,
        codec.lanes,
    )
}

/// One codec's functions over its value type.
struct Codec<V, E> {
    name: &'static str,
    max_encoded_len: fn(usize) -> usize,
    encode: fn(&[V], &mut [u8]) -> Result<usize, E>,
    decode: fn(&[u8], &mut [V]) -> Result<usize, E>,
    too_small: E,
}

macro_rules! codec {
    ($m:ident) => {
        Codec {
            name: stringify!($m),
            max_encoded_len: $m::max_encoded_len,
            encode: $m::encode,
            decode: $m::decode,
            too_small: $m::Error::OutputTooSmall,
        }
    };
}

/// Round trips against the reference coder: `split` gives a value's symbol and raw bits
/// (deltas: after the value before), `join` the values back from the reference decoder's.
fn check<V, E>(
    c: Codec<V, E>,
    inputs: &[Vec<V>],
    split: impl Fn(&[V]) -> (Vec<u16>, Vec<u32>),
    join: impl Fn(&[u16], &[u32]) -> Vec<V>,
) where
    V: Copy + Default + PartialEq + std::fmt::Debug,
    E: Copy + PartialEq + std::fmt::Debug,
{
    let (built, framing, lanes) = built(c.name);
    assert!(built.sets.len() > 1, "{}: one table set", c.name);
    let reference = Reference::framed(&built.tables, built.fingerprint, framing, lanes)
        .with_widths(built.kind.widths())
        .with_contexts(&built.sets, built.set_of.clone());
    let mut rng = Rng(29);
    for values in inputs {
        let len = values.len();
        let (symbols, offsets) = split(values);
        let mut buf = vec![0u8; (c.max_encoded_len)(len)];
        let n = (c.encode)(values, &mut buf).unwrap();
        let stream = &buf[..n];
        assert_eq!(
            stream,
            &reference.encode_offsets(&symbols, &offsets)[..],
            "{} len {len}",
            c.name
        );
        let mut back = vec![V::default(); len];
        assert_eq!(
            (c.decode)(stream, &mut back),
            Ok(len),
            "{} len {len}",
            c.name
        );
        assert_eq!(&back, values, "{} len {len}", c.name);
        if n > 0 {
            let mut short = vec![0u8; n - 1];
            assert_eq!((c.encode)(values, &mut short), Err(c.too_small));
        }
        if len > 300 {
            continue;
        }
        for cut in 0..n {
            let got = (c.decode)(&stream[..cut], &mut back).is_ok();
            let want = framing != Framing::Tagged
                && reference
                    .decode_offsets(&stream[..cut], len)
                    .is_ok_and(|(_, _, used)| used == cut);
            assert_eq!(got, want, "{} len {len} cut {cut}", c.name);
        }
        // Bit flips: the generated decoder agrees with the reference decoder.
        let mut out = vec![V::default(); len + 64];
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
                .decode_offsets(&bad, out_len)
                .ok()
                .filter(|&(_, _, used)| used == bad.len());
            assert_eq!(
                got.is_ok(),
                want.is_some(),
                "{} len {len} bit {bit}",
                c.name
            );
            if let (Ok(k), Some((s, o, _))) = (got, want) {
                assert_eq!(
                    &out[..k],
                    &join(&s, &o)[..],
                    "{} len {len} bit {bit}",
                    c.name
                );
            }
        }
    }
}

/// Lengths of the inputs: every short one, and some longer.
fn lengths() -> Vec<usize> {
    let mut l: Vec<usize> = (0..=19).collect();
    l.extend([31, 64, 100, 257, 1000, 4099]);
    l
}

/// Pieces of the training text at random places, one byte in eight anywhere in 0..=255.
fn text_inputs(text: &[u8], seed: u64) -> Vec<Vec<u8>> {
    let mut rng = Rng(seed);
    let mut inputs: Vec<Vec<u8>> = lengths()
        .into_iter()
        .map(|len| {
            let start = rng.below(text.len());
            (0..len)
                .map(|i| {
                    if rng.below(8) == 0 {
                        rng.below(256) as u8
                    } else {
                        text[(start + i) % text.len()]
                    }
                })
                .collect()
        })
        .collect();
    inputs.push(text.to_vec());
    inputs.push((0..=255u8).collect());
    inputs
}

/// A bytes codec: symbols from its alphabet (and escape), raw bits the escaped byte.
fn bytes<E: Copy + PartialEq + std::fmt::Debug>(c: Codec<u8, E>, text: &str) {
    let (built, _, _) = built(c.name);
    let kind = built.kind.clone();
    let escape = kind.escape().map(|e| e.symbol as u16);
    let text = std::fs::read(spec_dir().join(text)).unwrap();
    let inputs = text_inputs(&text, 31);
    let k2 = kind.clone();
    check(
        c,
        &inputs,
        |values: &[u8]| {
            let symbols = precast::kind::scan(kind.as_ref(), values).unwrap();
            let offsets = symbols
                .iter()
                .zip(values)
                .map(|(&s, &b)| if Some(s) == escape { u32::from(b) } else { 0 })
                .collect();
            (symbols, offsets)
        },
        move |s: &[u16], o: &[u32]| {
            s.iter()
                .zip(o)
                .map(|(&s, &o)| {
                    if Some(s) == escape {
                        o as u8
                    } else {
                        byte_of(&k2.label(usize::from(s)))
                    }
                })
                .collect()
        },
    );
}

/// The byte of a bytes codec's symbol label (`byte 97 ('a')`).
fn byte_of(label: &str) -> u8 {
    label
        .strip_prefix("byte ")
        .and_then(|l| l.split(' ').next())
        .and_then(|n| n.parse().ok())
        .unwrap()
}

#[test]
fn mit_l1() {
    bytes(codec!(mit_l1), "mit-license.txt");
}
#[test]
fn mit_l2_compact() {
    bytes(codec!(mit_l2_compact), "mit-license.txt");
}
#[test]
fn apache_l4_bare() {
    bytes(codec!(apache_l4_bare), "apache-2.0.txt");
}
#[test]
fn apache_l8() {
    bytes(codec!(apache_l8), "apache-2.0.txt");
}
#[test]
fn apache_l1_wide_steps() {
    bytes(codec!(apache_l1_wide_steps), "apache-2.0.txt");
}

/// An integers codec: the licence's bytes as values (and one in eight anywhere in the
/// type), symbols by bin (or the escape), raw bits the offset (or the value).
fn values<E: Copy + PartialEq + std::fmt::Debug>(c: Codec<u8, E>) {
    let (built, _, _) = built(c.name);
    let ints = built
        .model
        .bound
        .as_ref()
        .and_then(|k| k.integers())
        .unwrap()
        .clone();
    let d = ints.domain;
    let text = std::fs::read(spec_dir().join("mit-license.txt")).unwrap();
    let inputs = text_inputs(&text, 37);
    let escape = ints.escape.map(|e| e.symbol as u16);
    let (bins, bins2) = (ints.bins.clone(), ints.bins.clone());
    check(
        c,
        &inputs,
        move |values: &[u8]| {
            let mut prev = d.reference();
            values
                .iter()
                .map(|&v| {
                    let v = i64::from(v);
                    if !(d.lo..=d.hi).contains(&v) {
                        return (escape.unwrap(), v as u32);
                    }
                    let u = d.place(v, prev);
                    prev = v;
                    let i = bin_index(&bins, u);
                    (i as u16, u - bins[i].start)
                })
                .unzip()
        },
        move |s: &[u16], o: &[u32]| {
            let mut prev = d.reference();
            s.iter()
                .zip(o)
                .map(|(&s, &o)| match bins2.get(usize::from(s)) {
                    Some(b) => {
                        prev = d.value(b.start + o, prev);
                        prev as u8
                    }
                    None => o as u8,
                })
                .collect()
        },
    );
}

#[test]
fn values_escape() {
    values(codec!(values_escape));
}
#[test]
fn values_delta_l2() {
    values(codec!(values_delta_l2));
}
