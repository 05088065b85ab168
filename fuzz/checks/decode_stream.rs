//! Arbitrary bytes as a stream for every golden codec: decoding must never panic,
//! and any stream it accepts must be the one `encode` writes for those symbols.

use super::golden;

// Zero and a small size reach the `OutputTooSmall` paths; 4096 lets most streams decode.
const OUT_SIZES: [usize; 3] = [0, 7, 4096];

// One macro rather than a trait: each module has its own `Symbol` and `Error` types.
macro_rules! check_codec {
    ($codec:ident, $stream:expr, $filler:expr) => {{
        use golden::$codec as c;
        let stream: &[u8] = $stream;
        for size in OUT_SIZES {
            let mut out = vec![$filler; size];
            if let Ok(n) = c::decode(stream, &mut out) {
                assert!(
                    n <= out.len(),
                    "{}: decode count past the buffer",
                    stringify!($codec)
                );
                assert_canonical::<c::Symbol, c::Error>(
                    stringify!($codec),
                    &out[..n],
                    stream,
                    c::max_encoded_len(n),
                    c::encode,
                );
            }
            let mut out = vec![$filler; size];
            if let Ok((n, used)) = c::decode_prefix(stream, &mut out) {
                assert!(
                    n <= out.len(),
                    "{}: prefix count past the buffer",
                    stringify!($codec)
                );
                assert!(
                    used <= stream.len(),
                    "{}: prefix used past the input",
                    stringify!($codec)
                );
                assert_canonical::<c::Symbol, c::Error>(
                    stringify!($codec),
                    &out[..n],
                    &stream[..used],
                    c::max_encoded_len(n),
                    c::encode,
                );
            }
        }
    }};
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
    check_codec!(mit_text, data, 0u8);
    check_codec!(five, data, golden::five::Symbol::A);
    check_codec!(skewed, data, golden::skewed::Symbol::Likely);
    check_codec!(single, data, golden::single::Symbol::Only);
    check_codec!(five_bare, data, golden::five_bare::Symbol::A);
    check_codec!(five_rans, data, golden::five_rans::Symbol::A);
    check_codec!(skewed_l8, data, golden::skewed_l8::Symbol::Likely);
}
