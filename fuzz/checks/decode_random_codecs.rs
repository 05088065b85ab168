//! Arbitrary bytes as a stream for every codec of the random spec
//! (`fuzz/seeds/random_specs.toml`, from `random_specs.rs`): decoding must never panic, and the
//! symbols of any stream it accepts must survive a re-encoding.
//!
//! Not part of `checks/mod.rs`: the codecs are expanded by `precast_macros::codecs!`, whose path
//! is relative to the including crate, so each includer (the fuzz target and
//! `tests/fuzz_seeds.rs`) expands them as `crate::random_codecs` and includes this file with
//! `#[path]` beside `checks`.

use crate::checks::decode_stream::check_codec;
use crate::codec_of;
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

/// Decodes `data` with every codec of the random spec (see the module docs).
pub fn check_decode_random_codecs(data: &[u8]) {
    check_codec(
        codec_of!(random::r0),
        data,
        random::r0::ALPHABET[0],
        &OUT_SIZES,
    );
    check_codec(
        codec_of!(random::r1),
        data,
        random::r1::ALPHABET[0],
        &OUT_SIZES,
    );
    check_codec(codec_of!(random::r2), data, random::r2::ALL[0], &OUT_SIZES);
    check_codec(codec_of!(random::r3), data, random::r3::ALL[0], &OUT_SIZES);
    check_codec(codec_of!(random::r4), data, random::r4::ALL[0], &OUT_SIZES);
    check_codec(
        codec_of!(random::r5),
        data,
        random::r5::ALPHABET[0],
        &OUT_SIZES,
    );
    check_codec(
        codec_of!(random::r6),
        data,
        random::r6::ALPHABET[0],
        &OUT_SIZES,
    );
    check_codec(codec_of!(random::r7), data, random::r7::ALL[0], &OUT_SIZES);
    check_codec(codec_of!(random::r8), data, random::r8::ALL[0], &OUT_SIZES);
    check_codec(
        codec_of!(random::r9),
        data,
        random::r9::ALPHABET[0],
        &OUT_SIZES,
    );
    check_codec(
        codec_of!(random::r10),
        data,
        random::r10::ALL[0],
        &OUT_SIZES,
    );
    check_codec(
        codec_of!(random::r11),
        data,
        random::r11::ALL[0],
        &OUT_SIZES,
    );
}
