//! The differential loop the matrix's kind modules share (`integers`, `escapes`,
//! `contexts`): a generated codec against the reference coder on given inputs, byte for byte,
//! with truncated and damaged streams.

use super::common::Rng;
use precast::spec::Framing;
use precast::verify::Reference;
use std::path::Path;

/// The generator's own build of codec `name` of the spec `tests/specs/{spec}`, and its
/// framing and lanes.
pub fn built(spec: &str, name: &str) -> (precast::Built, Framing, u32) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../tests/specs")
        .join(spec);
    let (spec, _) = precast::spec::load(&path).unwrap();
    let codec = spec.codecs.iter().find(|c| c.name == name).unwrap();
    (
        precast::build_codec(codec).unwrap(),
        codec.framing,
        codec.lanes,
    )
}

/// The reference coder of a build: its raw bits after symbols, its table sets.
pub fn reference(built: &precast::Built, framing: Framing, lanes: u32) -> Reference<'_> {
    let coder = Reference::framed(&built.tables, built.fingerprint, framing, lanes)
        .with_widths(built.kind.widths());
    if built.set_of.is_empty() {
        coder
    } else {
        coder.with_contexts(&built.sets, built.set_of.clone())
    }
}

/// One codec's functions over its value type.
pub struct Codec<V, E> {
    pub name: &'static str,
    pub max_encoded_len: fn(usize) -> usize,
    pub encode: fn(&[V], &mut [u8]) -> Result<usize, E>,
    pub decode: fn(&[u8], &mut [V]) -> Result<usize, E>,
    pub too_small: E,
}

/// The [`Codec`] of a generated module.
#[macro_export]
macro_rules! differential_codec {
    ($m:ident) => {
        $crate::differential::Codec {
            name: stringify!($m),
            max_encoded_len: $m::max_encoded_len,
            encode: $m::encode,
            decode: $m::decode,
            too_small: $m::Error::OutputTooSmall,
        }
    };
}

/// Each input through the generated encoder equals the reference coder's stream for its
/// symbols and raw bits (`split`), decodes back, and a buffer a byte short is refused;
/// for inputs of up to 300 values every truncation and 40 bit flips decode exactly when
/// the reference decoder accepts them, to the same values (`join`).
pub fn round_trips<V, E>(
    c: &Codec<V, E>,
    reference: &Reference<'_>,
    framing: Framing,
    inputs: &[Vec<V>],
    split: impl Fn(&[V]) -> (Vec<u16>, Vec<u32>),
    join: impl Fn(&[u16], &[u32]) -> Vec<V>,
    seed: u64,
) where
    V: Copy + Default + PartialEq + std::fmt::Debug,
    E: Copy + PartialEq + std::fmt::Debug,
{
    let mut rng = Rng(seed);
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
