//! How streams are delimited, for both methods: the tagged header (format version, padding
//! count, fingerprint, LEB128 symbol count) or none at all (bare). FORMAT.md has the layout.

use crate::spec::Framing;
use proc_macro2::TokenStream;
use quote::quote;

/// The framing pieces a method's encoder and decoder splice in.
pub struct FramingTokens {
    /// `const` expression: the largest header for `symbols` symbols.
    pub header_max: TokenStream,
    /// The header length for `input`.
    pub header_len: TokenStream,
    /// Decoder start: binds `count`, `header` and `pad`, and narrows `out` to `count`.
    pub start: TokenStream,
    /// Items the framing needs at module level.
    pub items: TokenStream,
}

pub fn tokens(framing: Framing) -> FramingTokens {
    match framing {
        Framing::Tagged => FramingTokens {
            header_max: quote!(3 + leb128_len(symbols)),
            header_len: quote!(3 + leb128_len(input.len())),
            start: quote! {
                let (count, header, pad) = read_header(stream)?;
                let Some(out) = out.get_mut(..count) else {
                    return Err(Error::OutputTooSmall);
                };
            },
            items: tagged_items(),
        },
        Framing::Bare => FramingTokens {
            header_max: quote!(0usize),
            header_len: quote!(0usize),
            start: quote! {
                // Bare: the output length is the symbol count.
                let (count, header, pad) = (out.len(), 0usize, 0usize);
            },
            items: TokenStream::new(),
        },
    }
}

/// Encoder end: writes the header in front of the stream, with `pad` padding bits (a `u8`
/// expression). Nothing for bare streams.
pub fn write_header(framing: Framing, pad: TokenStream) -> TokenStream {
    match framing {
        Framing::Tagged => quote!(write_header(out, input.len(), header, #pad);),
        Framing::Bare => TokenStream::new(),
    }
}

fn tagged_items() -> TokenStream {
    quote! {
        const fn leb128_len(mut n: usize) -> usize {
            let mut len = 1;
            while n >= 0x80 {
                n >>= 7;
                len += 1;
            }
            len
        }

        /// Writes the header of a stream of `symbols` symbols into the first `header` bytes of
        /// `out`, with `pad` padding bits.
        #[inline(always)]
        fn write_header(out: &mut [u8], symbols: usize, header: usize, pad: u8) {
            if let Some(dst) = out.get_mut(..3) {
                let [lo, hi] = FINGERPRINT.to_le_bytes();
                dst.copy_from_slice(&[(FORMAT_VERSION << 4) | pad, lo, hi]);
            }
            let mut n = symbols;
            for dst in out.iter_mut().take(header).skip(3) {
                *dst = (n & 0x7f) as u8 | if n >= 0x80 { 0x80 } else { 0 };
                n >>= 7;
            }
        }

        /// Header: (symbol count, header length, padding bits).
        fn read_header(stream: &[u8]) -> Result<(usize, usize, usize), Error> {
            let Some(&tag) = stream.first() else {
                return Err(Error::Truncated);
            };
            if tag & 0xf8 != FORMAT_VERSION << 4 {
                return Err(Error::UnknownFormat);
            }
            let (Some(&lo), Some(&hi)) = (stream.get(1), stream.get(2)) else {
                return Err(Error::Truncated);
            };
            if u16::from_le_bytes([lo, hi]) != FINGERPRINT {
                return Err(Error::WrongCodec);
            }
            let mut count: u64 = 0;
            let mut shift = 0u32;
            let mut pos = 3;
            loop {
                let Some(&b) = stream.get(pos) else {
                    return Err(Error::Truncated);
                };
                pos += 1;
                if shift > 63 || (shift == 63 && b > 1) {
                    return Err(Error::BadLength);
                }
                count |= u64::from(b & 0x7f) << shift;
                if b & 0x80 == 0 {
                    if b == 0 && shift > 0 {
                        return Err(Error::BadLength);
                    }
                    break;
                }
                shift += 7;
            }
            match usize::try_from(count) {
                Ok(count) => Ok((count, pos, usize::from(tag & 7))),
                Err(_) => Err(Error::BadLength),
            }
        }
    }
}
