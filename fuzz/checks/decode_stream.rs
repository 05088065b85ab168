//! Arbitrary bytes as a stream for every golden codec: decoding must never panic,
//! and any stream it accepts must be the one `encode` writes for those symbols.

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
    pub decode_prefix: DecodePrefix<S, E>,
    pub max_encoded_len: fn(usize) -> usize,
    pub encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
}

/// The `Codec` of module `$m`.
#[macro_export]
macro_rules! codec_of {
    ($m:path) => {{
        use $m as c;
        $crate::checks::decode_stream::Codec {
            name: stringify!($m),
            decode: c::decode,
            decode_prefix: c::decode_prefix,
            max_encoded_len: c::max_encoded_len,
            encode: c::encode,
        }
    }};
}

/// Decodes `stream` with `codec` into buffers of each of `sizes` symbols, starting filled
/// with `filler`: no panic, counts within the buffer, and any accepted stream canonical.
pub fn check_codec<S: Clone, E: std::fmt::Debug>(
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
            assert_canonical(
                name,
                &out[..n],
                stream,
                (codec.max_encoded_len)(n),
                codec.encode,
            );
        }
        let mut out = vec![filler.clone(); size];
        if let Ok((n, used)) = (codec.decode_prefix)(stream, &mut out) {
            assert!(n <= out.len(), "{name}: prefix count past the buffer");
            assert!(used <= stream.len(), "{name}: prefix used past the input");
            assert_canonical(
                name,
                &out[..n],
                &stream[..used],
                (codec.max_encoded_len)(n),
                codec.encode,
            );
        }
    }
}

pub fn assert_canonical<S, E: std::fmt::Debug>(
    codec: &str,
    symbols: &[S],
    stream: &[u8],
    max_len: usize,
    encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
) {
    // The bound must hold for accepted streams too, not only for what encode writes.
    assert!(
        stream.len() <= max_len,
        "{codec}: accepted stream of {} bytes exceeds max_encoded_len = {max_len}",
        stream.len()
    );
    let mut again = vec![0u8; max_len];
    let len = encode(symbols, &mut again)
        .unwrap_or_else(|e| panic!("{codec}: re-encoding decoded symbols failed: {e:?}"));
    assert_eq!(
        &again[..len],
        stream,
        "{codec}: accepted a non-canonical stream"
    );
}

/// Decodes `data` with every golden codec (see the module docs).
pub fn check_decode_stream(data: &[u8]) {
    let sizes = &OUT_SIZES;
    check_codec(codec_of!(golden::mit_text), data, 0u8, sizes);
    check_codec(
        codec_of!(golden::five),
        data,
        golden::five::Symbol::A,
        sizes,
    );
    check_codec(
        codec_of!(golden::skewed),
        data,
        golden::skewed::Symbol::Likely,
        sizes,
    );
    check_codec(
        codec_of!(golden::single),
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
        codec_of!(golden::five_rans),
        data,
        golden::five_rans::Symbol::A,
        sizes,
    );
    check_codec(
        codec_of!(golden::skewed_l8),
        data,
        golden::skewed_l8::Symbol::Likely,
        sizes,
    );
}
