//! The escape codecs of `tests/specs/escapes.toml`, expanded in place and tied byte for byte
//! to the reference coder: values inside and outside the alphabet (every byte value, the
//! value type's ends), empty input, truncated and damaged streams. Part of the `matrix` test,
//! so that `--target i686-unknown-linux-gnu` runs the 32-bit path.

precast_macros::codecs!("../tests/specs/escapes.toml");

use super::common::Rng;
use super::differential::{self, Codec};
use crate::differential_codec as codec;

fn built(name: &str) -> (precast::Built, precast::spec::Framing, u32) {
    differential::built("escapes.toml", name)
}

/// How a value goes to the reference coder (symbol and raw bits) and comes back.
struct Split<V> {
    split: Box<dyn Fn(V) -> (u16, u32)>,
    join: Box<dyn Fn(u16, u32) -> V>,
    /// Whether the value goes as the escape.
    escapes: Box<dyn Fn(V) -> bool>,
}

fn check<V, E>(c: Codec<V, E>, s: Split<V>, inputs: Vec<Vec<V>>)
where
    V: Copy + Default + PartialEq + std::fmt::Debug,
    E: Copy + PartialEq + std::fmt::Debug,
{
    let (built, framing, lanes) = built(c.name);
    let reference = differential::reference(&built, framing, lanes);
    let escaped: usize = inputs
        .iter()
        .map(|v| v.iter().filter(|&&x| (s.escapes)(x)).count())
        .sum();
    assert!(escaped > 0, "{}: no input escaped", c.name);
    differential::round_trips(
        &c,
        &reference,
        framing,
        &inputs,
        |values: &[V]| values.iter().map(|&v| (s.split)(v)).unzip(),
        |sy: &[u16], o: &[u32]| sy.iter().zip(o).map(|(&a, &b)| (s.join)(a, b)).collect(),
        5,
    );
}

/// Lengths of the random inputs: every short one, and some longer.
fn lengths() -> Vec<usize> {
    let mut l: Vec<usize> = (0..=19).collect();
    l.extend([31, 64, 100, 257, 1000, 4099]);
    l
}

const BASES: &[u8] = b"ACGT";

/// The bases codecs: bases with one byte in ten drawn from every byte value (IUPAC codes
/// among them), every byte value in one stream, and each byte value alone.
fn bases<E: Copy + PartialEq + std::fmt::Debug>(c: Codec<u8, E>) {
    let mut rng = Rng(17);
    let mut inputs: Vec<Vec<u8>> = lengths()
        .into_iter()
        .map(|len| {
            (0..len)
                .map(|_| {
                    if rng.below(10) == 0 {
                        rng.below(256) as u8
                    } else {
                        BASES[rng.below(4)]
                    }
                })
                .collect()
        })
        .collect();
    inputs.push((0..=255u8).collect());
    inputs.extend((0..=255u8).map(|b| vec![b]));
    // IUPAC ambiguity codes (NC-IUB, "Nomenclature for incompletely specified bases in
    // nucleic acid sequences", 1984) in a run of bases.
    inputs.push(b"ACGTNNNNRYSWKMBDHVACGT".to_vec());
    let split = Split {
        split: Box::new(|b: u8| match BASES.iter().position(|&x| x == b) {
            Some(i) => (i as u16, 0),
            None => (4, u32::from(b)),
        }),
        join: Box::new(|s: u16, o: u32| match BASES.get(usize::from(s)) {
            Some(&b) => b,
            None => o as u8,
        }),
        escapes: Box::new(|b: u8| !BASES.contains(&b)),
    };
    check(c, split, inputs);
}

#[test]
fn bases_tagged() {
    bases(codec!(bases));
}
#[test]
fn bases_compact_l2() {
    bases(codec!(bases_compact_l2));
}
#[test]
fn bases_bare_l4() {
    bases(codec!(bases_bare_l4));
}

/// An integers codec with an escape: its bins from the generator, values drawn from the
/// training places, one in eight anywhere in the type, and the type's and range's ends.
fn readings<V, E>(c: Codec<V, E>, lo: i64, hi: i64)
where
    V: Copy + Default + PartialEq + std::fmt::Debug + Into<i64> + TryFrom<i64> + 'static,
    <V as TryFrom<i64>>::Error: std::fmt::Debug,
    E: Copy + PartialEq + std::fmt::Debug,
{
    let (built, _, _) = built(c.name);
    let ints = built
        .model
        .bound
        .as_ref()
        .and_then(|k| k.integers())
        .unwrap()
        .clone();
    let d = ints.domain;
    let (tmin, tmax) = (d.value_type.min(), d.value_type.max());
    let bits = d.value_type.bits();
    let places: Vec<u32> = built
        .model
        .place_counts
        .keys()
        .copied()
        .filter(|&u| u64::from(u) < d.size())
        .collect();
    let weights: Vec<u64> = places.iter().map(|u| built.model.place_counts[u]).collect();
    let to_v = |v: i64| V::try_from(v).unwrap();
    let mut rng = Rng(23);
    let mut inputs: Vec<Vec<V>> = lengths()
        .into_iter()
        .map(|len| {
            (0..len)
                .map(|_| {
                    let v = if rng.below(8) == 0 {
                        tmin + (rng.next() % (tmax - tmin + 1) as u64) as i64
                    } else {
                        d.lo + i64::from(places[rng.weighted(&weights)])
                    };
                    to_v(v)
                })
                .collect()
        })
        .collect();
    let edges: Vec<i64> = [tmin, tmin + 1, lo - 1, lo, hi, hi + 1, tmax - 1, tmax, 0]
        .into_iter()
        .filter(|v| (tmin..=tmax).contains(v))
        .collect();
    inputs.push(edges.iter().map(|&v| to_v(v)).collect());
    inputs.extend(edges.iter().map(|&v| vec![to_v(v)]));
    let escape = ints.escape.unwrap().symbol as u16;
    let (bins, bins2) = (ints.bins.clone(), ints.bins.clone());
    let mask = u64::MAX >> (64 - bits);
    let split = Split {
        split: Box::new(move |v: V| {
            let v: i64 = v.into();
            if (lo..=hi).contains(&v) {
                let u = (v - lo) as u32;
                let i = precast::kind::integers::bin_index(&bins, u);
                (i as u16, u - bins[i].start)
            } else {
                (escape, ((v as u64) & mask) as u32)
            }
        }),
        join: Box::new(move |s: u16, o: u32| {
            let v = match bins2.get(usize::from(s)) {
                Some(b) => lo + i64::from(b.start) + i64::from(o),
                // The raw bits as a value of the type (sign-extended when signed).
                None if tmin < 0 && (u64::from(o) >> (bits - 1)) & 1 == 1 => {
                    i64::from(o) - (1i64 << bits)
                }
                None => i64::from(o),
            };
            V::try_from(v).unwrap()
        }),
        escapes: Box::new(move |v: V| !(lo..=hi).contains(&v.into())),
    };
    check(c, split, inputs);
}

#[test]
fn reading_i16() {
    readings(codec!(reading_i16), -64, 63);
}
#[test]
fn reading_u8_compact_l2() {
    readings(codec!(reading_u8_compact_l2), 0, 99);
}
#[test]
fn reading_i32_bare_l2() {
    readings(codec!(reading_i32_bare_l2), -1000, 1000);
}
