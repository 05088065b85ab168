//! Arbitrary bytes as a stream for every codec of the random spec
//! (`fuzz/seeds/random_specs.toml`, from `random_specs.rs`): decoding must never panic, and any
//! stream it accepts must be the one `encode` writes for those symbols.
//!
//! Not part of `checks/mod.rs`: the codecs are expanded by `precast_macros::codecs!`, whose path
//! is relative to the including crate, so each includer (the fuzz target and
//! `tests/fuzz_seeds.rs`) expands them as `crate::random_codecs` and includes this file with
//! `#[path]` beside `checks`.

use crate::checks::decode_stream::assert_canonical;
use crate::random_codecs as random;

// Zero and one reach the `OutputTooSmall` paths; seven is the frame size of the bare codecs'
// seeds; 300 lets the tagged seeds decode whole.
const OUT_SIZES: [usize; 4] = [0, 1, 7, 300];

/// The codecs checked below, by name and kind (`true` for bytes): `tests/fuzz_seeds.rs` holds
/// this list to the generator's (`random_specs::codecs`), so a new seed cannot leave a codec out.
pub const CODECS: [(&str, bool); 12] = [
    ("r0", true),
    ("r1", true),
    ("r2", false),
    ("r3", false),
    ("r4", false),
    ("r5", true),
    ("r6", true),
    ("r7", false),
    ("r8", false),
    ("r9", true),
    ("r10", false),
    ("r11", false),
];

// One macro rather than a trait: each module has its own `Symbol` and `Error` types. The
// output buffers start filled with the first symbol: `ALPHABET[0]` for bytes, `ALL[0]` for
// tokens.
macro_rules! check_codec {
    ($codec:ident, $stream:expr, $filler:expr) => {{
        use random::$codec as c;
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

/// Decodes `data` with every codec of the random spec (see the module docs).
pub fn check_decode_random_codecs(data: &[u8]) {
    check_codec!(r0, data, random::r0::ALPHABET[0]);
    check_codec!(r1, data, random::r1::ALPHABET[0]);
    check_codec!(r2, data, random::r2::ALL[0]);
    check_codec!(r3, data, random::r3::ALL[0]);
    check_codec!(r4, data, random::r4::ALL[0]);
    check_codec!(r5, data, random::r5::ALPHABET[0]);
    check_codec!(r6, data, random::r6::ALPHABET[0]);
    check_codec!(r7, data, random::r7::ALL[0]);
    check_codec!(r8, data, random::r8::ALL[0]);
    check_codec!(r9, data, random::r9::ALPHABET[0]);
    check_codec!(r10, data, random::r10::ALL[0]);
    check_codec!(r11, data, random::r11::ALL[0]);
}
