//! The context codecs of `tests/specs/contexts.toml`, expanded in place and tied byte for
//! byte to the reference coder, which chooses each symbol's table set by the same rule (the
//! lane's previous symbol): licence text and random bytes, every lane count and framing,
//! escapes, integers as values and as deltas, truncated and damaged streams. Part of the
//! `matrix` test, so that `--target i686-unknown-linux-gnu` runs the 32-bit path.

precast_macros::codecs!("../tests/specs/contexts.toml");

use super::common::Rng;
use super::differential::{self, Codec};
use crate::differential_codec as codec;
use precast::kind::integers::bin_index;
use std::path::Path;

fn spec_dir() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/specs")
}

fn built(name: &str) -> (precast::Built, precast::spec::Framing, u32) {
    differential::built("contexts.toml", name)
}

/// Round trips against the reference coder, which chooses each symbol's table set by the
/// same rule: `split` gives a value's symbol and raw bits (deltas: after the value before),
/// `join` the values back from the reference decoder's.
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
    let reference = differential::reference(&built, framing, lanes);
    differential::round_trips(&c, &reference, framing, inputs, split, join, 29);
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
    let mut inputs = text_inputs(&text, 31);
    // A declared alphabet without an escape takes its own bytes only; one more is refused.
    let refused: Vec<u8> = (0..=255u8)
        .filter(|&b| precast::kind::scan(kind.as_ref(), &[b]).is_err())
        .collect();
    if let Some(&outside) = refused.first() {
        for input in &mut inputs {
            input.retain(|b| !refused.contains(b));
        }
        let mut buf = vec![0u8; (c.max_encoded_len)(3)];
        assert!((c.encode)(&[b'a', outside, b'a'], &mut buf).is_err());
    }
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
fn apache_l2_wide_positions() {
    bytes(codec!(apache_l2_wide_positions), "apache-2.0.txt");
}
#[test]
fn apache_rans_l1() {
    bytes(codec!(apache_rans_l1), "apache-2.0.txt");
}
#[test]
fn apache_rans_l4_compact() {
    bytes(codec!(apache_rans_l4_compact), "apache-2.0.txt");
}
#[test]
fn apache_rans_l2_bare() {
    bytes(codec!(apache_rans_l2_bare), "apache-2.0.txt");
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
