//! The integers codecs of `tests/specs/integers.toml`, expanded in place and tied byte for
//! byte to the reference coder: random values (seeded), every bin's first and last value,
//! the range ends and the largest differences, empty input, refusals, damaged streams.
//! Part of the `matrix` test, so that `--target i686-unknown-linux-gnu` runs the 32-bit path.

precast_macros::codecs!("../tests/specs/integers.toml");

use super::common::Rng;
use super::differential::{self, Codec as Functions};
use precast::kind::integers::{bin_index, Integers};
use precast::spec::Framing;
use std::path::Path;

fn built(name: &str) -> (precast::Built, Framing, u32) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/specs/integers.toml");
    let (spec, _) = precast::spec::load(&path).unwrap();
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
    /// The refusal of a value outside the range at a position, where the range is not the
    /// whole type.
    out_of_range: Option<fn(usize) -> E>,
}

macro_rules! codec {
    ($m:ident) => {
        Codec {
            name: stringify!($m),
            max_encoded_len: $m::max_encoded_len,
            encode: $m::encode,
            decode: $m::decode,
            too_small: $m::Error::OutputTooSmall,
            out_of_range: Some(|position| $m::Error::OutOfRange { position }),
        }
    };
    ($m:ident, whole) => {
        Codec {
            name: stringify!($m),
            max_encoded_len: $m::max_encoded_len,
            encode: $m::encode,
            decode: $m::decode,
            too_small: $m::Error::OutputTooSmall,
            out_of_range: None,
        }
    };
}

/// The reference coder's symbols and offsets for `values`.
fn split(ints: &Integers, values: &[i64]) -> (Vec<u16>, Vec<u32>) {
    let d = ints.domain;
    let mut prev = d.reference();
    let mut symbols = Vec::new();
    let mut offsets = Vec::new();
    for &v in values {
        let u = d.place(v, prev);
        prev = v;
        let i = bin_index(&ints.bins, u);
        symbols.push(i as u16);
        offsets.push(u - ints.bins[i].start);
    }
    (symbols, offsets)
}

/// Values back from the reference decoder's symbols and offsets.
fn join(ints: &Integers, symbols: &[u16], offsets: &[u32]) -> Vec<i64> {
    let d = ints.domain;
    let mut prev = d.reference();
    symbols
        .iter()
        .zip(offsets)
        .map(|(&s, &o)| {
            prev = d.value(ints.bins[usize::from(s)].start + o, prev);
            prev
        })
        .collect()
}

fn check<V, E>(c: Codec<V, E>)
where
    V: Copy + Default + PartialEq + std::fmt::Debug + Into<i64> + TryFrom<i64>,
    <V as TryFrom<i64>>::Error: std::fmt::Debug,
    E: Copy + PartialEq + std::fmt::Debug,
{
    let (built, framing, lanes) = built(c.name);
    let ints = built
        .model
        .bound
        .as_ref()
        .and_then(|k| k.integers())
        .unwrap()
        .clone();
    let d = ints.domain;
    let reference = differential::reference(&built, framing, lanes);
    let to_v = |v: i64| V::try_from(v).unwrap();
    let places: Vec<u32> = built.model.place_counts.keys().copied().collect();
    let weights: Vec<u64> = built.model.place_counts.values().copied().collect();
    let mut rng = Rng(11);
    // Three in four values from the training distribution, one uniform over the range.
    let draw = |rng: &mut Rng, prev: i64| -> i64 {
        let u = if rng.below(4) > 0 {
            places[rng.weighted(&weights)]
        } else {
            (rng.next() % d.size()) as u32
        };
        d.value(u, prev)
    };
    let mut inputs: Vec<Vec<i64>> = Vec::new();
    let mut lengths: Vec<usize> = (0..=19).collect();
    lengths.extend([31, 64, 100, 257, 1000, 4099]);
    for &len in &lengths {
        let mut prev = d.reference();
        inputs.push(
            (0..len)
                .map(|_| {
                    prev = draw(&mut rng, prev);
                    prev
                })
                .collect(),
        );
    }
    // Every bin's first and last place, in one stream and one a stream.
    let mut edges = Vec::new();
    let mut prev = d.reference();
    for b in &ints.bins {
        for u in [b.start, (u64::from(b.start) + (1u64 << b.width) - 1) as u32] {
            prev = d.value(u, prev);
            edges.push(prev);
            inputs.push(vec![d.value(u, d.reference())]);
        }
    }
    inputs.push(edges);
    // The range ends back and forth: the largest differences both ways.
    inputs.push(vec![d.lo, d.hi, d.lo, d.hi, d.hi, d.lo, d.lo]);
    let values: Vec<Vec<V>> = inputs
        .iter()
        .map(|input| input.iter().map(|&v| to_v(v)).collect())
        .collect();
    differential::round_trips(
        &Functions {
            name: c.name,
            max_encoded_len: c.max_encoded_len,
            encode: c.encode,
            decode: c.decode,
            too_small: c.too_small,
        },
        &reference,
        framing,
        &values,
        |v: &[V]| split(&ints, &v.iter().map(|&x| x.into()).collect::<Vec<i64>>()),
        |s: &[u16], o: &[u32]| join(&ints, s, o).into_iter().map(to_v).collect(),
        11,
    );
    // A value outside the range is refused at its position.
    if let Some(out_of_range) = c.out_of_range {
        let mut values = vec![to_v(d.lo); 5];
        let outside = if d.lo > d.value_type.min() {
            d.lo - 1
        } else {
            d.hi + 1
        };
        values[3] = to_v(outside);
        let mut buf = vec![0u8; (c.max_encoded_len)(5)];
        assert_eq!((c.encode)(&values, &mut buf), Err(out_of_range(3)));
    }
}

#[test]
fn geo_l1() {
    check(codec!(geo_l1));
}
#[test]
fn geo_l4_compact() {
    check(codec!(geo_l4_compact));
}
#[test]
fn delta_l2_bare() {
    check(codec!(delta_l2_bare));
}
#[test]
fn delta_l8_i8() {
    check(codec!(delta_l8_i8, whole));
}
#[test]
fn full_i32() {
    check(codec!(full_i32, whole));
}
#[test]
fn one_bin_u32() {
    check(codec!(one_bin_u32, whole));
}

/// Every value of a small range, each after every other (all differences), round-trips.
#[test]
fn every_value_and_difference_of_a_small_range() {
    let all: Vec<i8> = (-128..=127).collect();
    let mut buf = vec![0u8; delta_l8_i8::max_encoded_len(256 * 257)];
    let mut input = Vec::new();
    for &a in &all {
        input.push(a);
        input.extend(all.iter().copied());
    }
    let n = delta_l8_i8::encode(&input, &mut buf).unwrap();
    let mut back = vec![0i8; input.len()];
    assert_eq!(delta_l8_i8::decode(&buf[..n], &mut back), Ok(input.len()));
    assert_eq!(back, input);
}

/// A draw from the two-sided geometric source P(k) = (1-a)/(1+a) · a^|k| by inversion:
/// 0 with probability (1-a)/(1+a), else a sign and 1 + a geometric count of ratio a.
fn two_sided_geometric(rng: &mut Rng, a: f64) -> i64 {
    let uniform = |rng: &mut Rng| (rng.next() >> 11) as f64 / (1u64 << 53) as f64;
    if uniform(rng) < (1.0 - a) / (1.0 + a) {
        return 0;
    }
    let m = 1 + ((1.0 - uniform(rng)).ln() / a.ln()).floor() as i64;
    if rng.below(2) == 0 {
        m
    } else {
        -m
    }
}

/// On 200,000 values drawn from the two-sided geometric source with a = 0.7, a stream of
/// `geo_l1` comes within 1 % of the bound its report states (the tables' exact rate plus
/// the offset bits) and within 2 % of the source's entropy, H = -log2((1-a)/(1+a)) -
/// (2a/(1-a^2)) log2(a) = 3.915054 bits (CHECKS.md, "Integer sources"; common practice,
/// recomputed), and of the drawn data's own order-0 entropy.
#[test]
fn sizes_on_two_sided_geometric_data() {
    let a: f64 = 0.7;
    let h = -((1.0 - a) / (1.0 + a)).log2() - (2.0 * a / (1.0 - a * a)) * a.log2();
    assert!((h - 3.915054).abs() < 1e-6, "{h}");
    let (built, _, _) = built("geo_l1");
    let bound = built.report.integers.as_ref().unwrap().bound;
    let mut rng = Rng(2026);
    let n = 200_000;
    let values: Vec<i16> = (0..n)
        .map(|_| two_sided_geometric(&mut rng, a).clamp(-4096, 4095) as i16)
        .collect();
    let mut counts = std::collections::BTreeMap::new();
    for &v in &values {
        *counts.entry(v).or_insert(0u64) += 1;
    }
    let empirical: f64 = counts
        .values()
        .map(|&c| {
            let p = c as f64 / n as f64;
            -p * p.log2()
        })
        .sum();
    let mut buf = vec![0u8; geo_l1::max_encoded_len(n)];
    let len = geo_l1::encode(&values, &mut buf).unwrap();
    let mut back = vec![0i16; n];
    assert_eq!(geo_l1::decode(&buf[..len], &mut back), Ok(n));
    assert_eq!(back, values);
    let per_value = len as f64 * 8.0 / n as f64;
    eprintln!(
        "geo_l1: {len} bytes, {per_value:.5} bits/value; stated bound {bound:.5}, source entropy {h:.5}, data entropy {empirical:.5}"
    );
    assert!(per_value <= bound * 1.01, "{per_value} against {bound}");
    assert!(per_value <= h * 1.02, "{per_value} against {h}");
    assert!(
        per_value <= empirical * 1.02,
        "{per_value} against {empirical}"
    );
}
