//! Arbitrary symbols through every golden codec: encode, decode, compare, and check
//! that a buffer one byte short is refused rather than overrun or truncated.

use super::golden;

// Shared by every codec; a macro because each module has its own `Symbol` and `Error`.
macro_rules! round_trip {
    // Tagged codecs: `decode_prefix` takes the whole stream too.
    (@prefix $codec:ident, $stream:expr, $out:expr, $input:expr, $len:expr, prefix) => {{
        let (n, used) = golden::$codec::decode_prefix($stream, &mut $out)
            .unwrap_or_else(|e| panic!("{}: decode_prefix failed: {e:?}", stringify!($codec)));
        assert_eq!(
            (n, used),
            ($input.len(), $len),
            "{}: prefix sizes",
            stringify!($codec)
        );
    }};
    (@prefix $codec:ident, $stream:expr, $out:expr, $input:expr, $len:expr) => {};
    ($codec:ident, $input:expr, $filler:expr $(, $prefix:ident)?) => {{
        use golden::$codec as c;
        let input: &[c::Symbol] = $input;
        let mut stream = vec![0u8; c::max_encoded_len(input.len())];
        let len = c::encode(input, &mut stream)
            .unwrap_or_else(|e| panic!("{}: encode failed: {e:?}", stringify!($codec)));
        assert!(
            len <= stream.len(),
            "{}: length past the buffer",
            stringify!($codec)
        );
        let stream = &stream[..len];

        let mut out = vec![$filler; input.len()];
        let n = c::decode(stream, &mut out)
            .unwrap_or_else(|e| panic!("{}: decode failed: {e:?}", stringify!($codec)));
        assert_eq!(
            &out[..n],
            input,
            "{}: round trip changed the symbols",
            stringify!($codec)
        );

        round_trip!(@prefix $codec, stream, out, input, len $(, $prefix)?);

        if len > 0 {
            let mut short = vec![0u8; len - 1];
            assert_eq!(
                c::encode(input, &mut short),
                Err(c::Error::OutputTooSmall),
                "{}: one byte short",
                stringify!($codec)
            );
        }
    }};
}

fn tokens<T: Copy>(data: &[u8], all: &[T]) -> Vec<T> {
    data.iter()
        .map(|&b| all[usize::from(b) % all.len()])
        .collect()
}

/// `data` as bytes for `mit_text` and as tokens (`byte % ALPHABET_LEN`) for the others.
pub fn check_encode_round_trip(data: &[u8]) {
    use golden::mit_text;
    match data.iter().position(|b| !mit_text::ALPHABET.contains(b)) {
        Some(position) => {
            let mut out = vec![0u8; mit_text::max_encoded_len(data.len())];
            assert_eq!(
                mit_text::encode(data, &mut out),
                Err(mit_text::Error::UnknownSymbol { position }),
            );
            // Unknown bytes stay unknown however small the buffer is.
            let mut out = vec![0u8; data.len() % 9];
            assert!(mit_text::encode(data, &mut out).is_err());
        }
        None => round_trip!(mit_text, data, 0u8, prefix),
    }
    round_trip!(
        five,
        &tokens(data, &golden::five::ALL),
        golden::five::Symbol::A,
        prefix
    );
    round_trip!(
        skewed,
        &tokens(data, &golden::skewed::ALL),
        golden::skewed::Symbol::Likely,
        prefix
    );
    round_trip!(
        single,
        &tokens(data, &golden::single::ALL),
        golden::single::Symbol::Only,
        prefix
    );
    round_trip!(
        five_bare,
        &tokens(data, &golden::five_bare::ALL),
        golden::five_bare::Symbol::A
    );
    round_trip!(
        five_rans,
        &tokens(data, &golden::five_rans::ALL),
        golden::five_rans::Symbol::A,
        prefix
    );
    round_trip!(
        skewed_l8,
        &tokens(data, &golden::skewed_l8::ALL),
        golden::skewed_l8::Symbol::Likely,
        prefix
    );
}
