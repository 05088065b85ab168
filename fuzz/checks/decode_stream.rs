//! Arbitrary bytes as a stream for every golden codec: decoding must never panic, and the
//! symbols of any stream it accepts must encode to a stream that decodes to them again
//! (several streams may decode to the same symbols: the final states are free, FORMAT.md).

use super::golden;

// Zero and a small size reach the `OutputTooSmall` paths; 4096 lets most streams decode.
const OUT_SIZES: [usize; 3] = [0, 7, 4096];

/// A generated `decode_prefix`: the symbols and the bytes the stream took.
pub type DecodePrefix<S, E> = fn(&[u8], &mut [S]) -> Result<(usize, usize), E>;

/// One codec's generated functions, so that one function checks every module (each has its
/// own `Symbol` and `Error` types).
pub struct Codec<S, E> {
    pub name: &'static str,
    pub decode: fn(&[u8], &mut [S]) -> Result<usize, E>,
    /// Tagged codecs only: compact and bare streams run to the end of what they are given.
    pub decode_prefix: Option<DecodePrefix<S, E>>,
    pub max_encoded_len: fn(usize) -> usize,
    pub encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
}

/// The `Codec` of module `$m`; `prefix` for a tagged codec, to check its `decode_prefix`
/// too (compact and bare streams run to the end of what they are given, and have none).
#[macro_export]
macro_rules! codec_of {
    ($m:path) => {{
        use $m as c;
        $crate::checks::decode_stream::Codec {
            name: stringify!($m),
            decode: c::decode,
            decode_prefix: None,
            max_encoded_len: c::max_encoded_len,
            encode: c::encode,
        }
    }};
    ($m:path, prefix) => {{
        use $m as c;
        $crate::checks::decode_stream::Codec {
            name: stringify!($m),
            decode: c::decode,
            decode_prefix: Some(c::decode_prefix),
            max_encoded_len: c::max_encoded_len,
            encode: c::encode,
        }
    }};
}

/// Decodes `stream` with `codec` into buffers of each of `sizes` symbols, starting filled
/// with `filler`: no panic, counts within the buffer, and any accepted stream's symbols
/// survive a re-encoding.
pub fn check_codec<S: Clone + PartialEq + std::fmt::Debug, E: std::fmt::Debug>(
    codec: Codec<S, E>,
    stream: &[u8],
    filler: S,
    sizes: &[usize],
) {
    let name = codec.name;
    for &size in sizes {
        let mut out = vec![filler.clone(); size];
        if let Ok(n) = (codec.decode)(stream, &mut out) {
            assert!(n <= out.len(), "{name}: decode count past the buffer");
            assert_re_encodes(&codec, &out[..n], stream, filler.clone());
        }
        let Some(decode_prefix) = codec.decode_prefix else {
            continue;
        };
        let mut out = vec![filler.clone(); size];
        if let Ok((n, used)) = decode_prefix(stream, &mut out) {
            assert!(n <= out.len(), "{name}: prefix count past the buffer");
            assert!(used <= stream.len(), "{name}: prefix used past the input");
            assert_re_encodes(&codec, &out[..n], &stream[..used], filler.clone());
        }
    }
}

/// An accepted `stream` of `symbols`: within `max_encoded_len`, and the encoder's stream
/// for the same symbols decodes to them.
pub fn assert_re_encodes<S: Clone + PartialEq + std::fmt::Debug, E: std::fmt::Debug>(
    codec: &Codec<S, E>,
    symbols: &[S],
    stream: &[u8],
    filler: S,
) {
    let name = codec.name;
    let max_len = (codec.max_encoded_len)(symbols.len());
    // The bound must hold for accepted streams too, not only for what encode writes.
    assert!(
        stream.len() <= max_len,
        "{name}: accepted stream of {} bytes exceeds max_encoded_len = {max_len}",
        stream.len()
    );
    let mut again = vec![0u8; max_len];
    let len = (codec.encode)(symbols, &mut again)
        .unwrap_or_else(|e| panic!("{name}: re-encoding decoded symbols failed: {e:?}"));
    let mut back = vec![filler; symbols.len()];
    let n = (codec.decode)(&again[..len], &mut back)
        .unwrap_or_else(|e| panic!("{name}: the re-encoded stream is refused: {e:?}"));
    assert_eq!(
        &back[..n],
        symbols,
        "{name}: re-encoding changed the symbols"
    );
}

/// Decodes `data` with every golden codec (see the module docs).
pub fn check_decode_stream(data: &[u8]) {
    let sizes = &OUT_SIZES;
    check_codec(codec_of!(golden::mit_text, prefix), data, 0u8, sizes);
    check_codec(
        codec_of!(golden::five, prefix),
        data,
        golden::five::Symbol::A,
        sizes,
    );
    check_codec(
        codec_of!(golden::skewed, prefix),
        data,
        golden::skewed::Symbol::Likely,
        sizes,
    );
    check_codec(
        codec_of!(golden::single, prefix),
        data,
        golden::single::Symbol::Only,
        sizes,
    );
    check_codec(
        codec_of!(golden::five_bare),
        data,
        golden::five_bare::Symbol::A,
        sizes,
    );
    check_codec(
        codec_of!(golden::five_rans, prefix),
        data,
        golden::five_rans::Symbol::A,
        sizes,
    );
    check_codec(
        codec_of!(golden::skewed_l8, prefix),
        data,
        golden::skewed_l8::Symbol::Likely,
        sizes,
    );
}
