//! How streams are delimited, for both methods: the tagged header (fingerprint, LEB128 symbol
//! count), the compact one (check byte, count) or none at all (bare), the errors each can
//! give, and `symbol_count`. FORMAT.md has the layout.

use crate::spec::Framing;
use proc_macro2::TokenStream;
use quote::quote;

/// The framing pieces a method's encoder and decoder splice in.
pub struct FramingTokens {
    pub framing: Framing,
    /// `const` expression: the largest header for `symbols` symbols.
    pub header_max: TokenStream,
    /// Encoder start: binds `header`, the header's length for `input` (nothing when bare).
    pub header_len: TokenStream,
    /// The header's length in the encoder's and decoder's expressions: `header`, or `0`.
    pub header: TokenStream,
    /// Decoder start: binds `count`, `header` (not when bare) and `payload`, and narrows
    /// `out` to `count`.
    pub start: TokenStream,
    /// Items the framing needs at module level.
    pub items: TokenStream,
    /// The `Error` variants of the decoder, and their `Display` arms.
    pub error_variants: TokenStream,
    pub error_display: TokenStream,
}

/// The ways a stream can fail its checks, named as in FORMAT.md.
#[derive(Clone, Copy)]
pub enum Failure {
    Truncated,
    Corrupt,
    TrailingBytes,
}

impl FramingTokens {
    /// The error for `failure`: bare streams give one error for all of them, since nothing
    /// in a bare stream tells a wrong count (the output's length) from damage.
    pub fn error(&self, failure: Failure) -> TokenStream {
        match (self.framing, failure) {
            (Framing::Bare, _) => quote!(Error::CountMismatch),
            (_, Failure::Truncated) => quote!(Error::Truncated),
            (_, Failure::Corrupt) => quote!(Error::Corrupt),
            (_, Failure::TrailingBytes) => quote!(Error::TrailingBytes),
        }
    }

    /// Whether the stream runs to the end of what the decoder is given (compact and bare),
    /// rather than delimiting itself (tagged).
    pub fn to_the_end(&self) -> bool {
        self.framing != Framing::Tagged
    }

    /// Encoder end: writes the header in front of the stream. Nothing for bare streams.
    pub fn write_header(&self) -> TokenStream {
        match self.framing {
            Framing::Bare => TokenStream::new(),
            _ => quote!(write_header(out, input.len(), header);),
        }
    }

    /// The public entry points over the method's `decode_prefix`: `decode` for every
    /// framing, `decode_prefix` itself for tagged streams.
    pub fn entry_points(&self) -> TokenStream {
        match self.framing {
            Framing::Tagged => quote! {
                /// Decodes one whole stream into `out`; returns the number of symbols.
                pub fn decode(stream: &[u8], out: &mut [Symbol]) -> Result<usize, Error> {
                    let (count, used) = decode_prefix(stream, out)?;
                    if used != stream.len() {
                        return Err(Error::TrailingBytes);
                    }
                    Ok(count)
                }
            },
            Framing::Compact => quote! {
                /// Decodes one whole stream (the stream runs to the end of `stream`) into
                /// `out`; returns the number of symbols.
                pub fn decode(stream: &[u8], out: &mut [Symbol]) -> Result<usize, Error> {
                    decode_prefix(stream, out).map(|(count, _)| count)
                }
            },
            Framing::Bare => quote! {
                /// Decodes one whole bare stream into `out`: exactly `out.len()` symbols, the
                /// count the caller knows (the stream does not carry it).
                pub fn decode(stream: &[u8], out: &mut [Symbol]) -> Result<usize, Error> {
                    decode_prefix(stream, out).map(|(count, _)| count)
                }
            },
        }
    }
}

pub fn tokens(framing: Framing) -> FramingTokens {
    let (error_variants, error_display) = errors(framing);
    let (header_max, header_len, header, start, items) = match framing {
        Framing::Tagged | Framing::Compact => {
            let id = if framing == Framing::Tagged {
                quote!(2)
            } else {
                quote!(1)
            };
            (
                quote!(#id + leb128_len(symbols)),
                quote!(let header = #id + leb128_len(input.len());),
                quote!(header),
                quote! {
                    let (count, header) = read_header(stream)?;
                    let Some(out) = out.get_mut(..count) else {
                        return Err(Error::OutputTooSmall);
                    };
                    let payload = stream.get(header..).unwrap_or(&[]);
                },
                header_items(framing),
            )
        }
        Framing::Bare => (
            quote!(0usize),
            TokenStream::new(),
            quote!(0),
            quote! {
                // Bare: the stream is the payload, the output's length the symbol count.
                let (count, payload) = (out.len(), stream);
            },
            TokenStream::new(),
        ),
    };
    FramingTokens {
        framing,
        header_max,
        header_len,
        header,
        start,
        items,
        error_variants,
        error_display,
    }
}

/// The decoder's `Error` variants (after `OutputTooSmall` and the input's own) and their
/// messages: only those the framing can give.
fn errors(framing: Framing) -> (TokenStream, TokenStream) {
    match framing {
        Framing::Bare => (
            quote! {
                /// The stream does not decode to exactly `out.len()` symbols: the count is
                /// not the one it was written with, or the stream was damaged.
                CountMismatch,
            },
            quote! {
                Error::CountMismatch => f.write_str("the stream does not hold exactly the asked-for number of symbols"),
            },
        ),
        Framing::Tagged | Framing::Compact => (
            quote! {
                /// The stream was written by other tables: another codec, spec or format
                /// version.
                WrongCodec,
                /// The symbol count in the stream header is malformed.
                BadLength,
                /// The stream ends before its last symbol.
                Truncated,
                /// The stream fails its end check: some of its bits were changed.
                Corrupt,
                /// Bytes follow the end of the stream.
                TrailingBytes,
            },
            quote! {
                Error::WrongCodec => f.write_str("the stream was written by another codec"),
                Error::BadLength => f.write_str("the stream header has a malformed symbol count"),
                Error::Truncated => f.write_str("the stream is truncated"),
                Error::Corrupt => f.write_str("the stream is corrupt"),
                Error::TrailingBytes => f.write_str("bytes follow the end of the stream"),
            },
        ),
    }
}

/// The header's writer and reader, and `symbol_count`.
fn header_items(framing: Framing) -> TokenStream {
    let (id_len, write_id, check_id) = match framing {
        Framing::Tagged => (
            quote!(2),
            quote! {
                if let Some(dst) = out.first_chunk_mut::<2>() {
                    *dst = FINGERPRINT.to_le_bytes();
                }
            },
            quote! {
                let Some(&id) = stream.first_chunk::<2>() else {
                    return Err(Error::Truncated);
                };
                if u16::from_le_bytes(id) != FINGERPRINT {
                    return Err(Error::WrongCodec);
                }
            },
        ),
        _ => (
            quote!(1),
            quote! {
                if let Some(dst) = out.first_mut() {
                    *dst = CHECK;
                }
            },
            quote! {
                let Some(&id) = stream.first() else {
                    return Err(Error::Truncated);
                };
                if id != CHECK {
                    return Err(Error::WrongCodec);
                }
            },
        ),
    };
    let check = if framing == Framing::Compact {
        quote! {
            /// The compact header's first byte: the fingerprint's two bytes folded by XOR.
            const CHECK: u8 = FINGERPRINT.to_le_bytes()[0] ^ FINGERPRINT.to_le_bytes()[1];
        }
    } else {
        TokenStream::new()
    };
    quote! {
        #check

        const fn leb128_len(mut n: usize) -> usize {
            let mut len = 1;
            while n >= 0x80 {
                n >>= 7;
                len += 1;
            }
            len
        }

        /// Writes the header of a stream of `symbols` symbols into the first `header` bytes of
        /// `out`.
        #[inline(always)]
        fn write_header(out: &mut [u8], symbols: usize, header: usize) {
            #write_id
            let mut n = symbols;
            for dst in out.iter_mut().take(header).skip(#id_len) {
                *dst = (n & 0x7f) as u8 | if n >= 0x80 { 0x80 } else { 0 };
                n >>= 7;
            }
        }

        /// The number of symbols in the stream at the front of `stream`, read from its header
        /// (for sizing the output before decoding).
        pub fn symbol_count(stream: &[u8]) -> Result<usize, Error> {
            read_header(stream).map(|(count, _)| count)
        }

        /// Header: (symbol count, header length).
        fn read_header(stream: &[u8]) -> Result<(usize, usize), Error> {
            #check_id
            // Read in `usize` (32-bit cores need no register pairs); a count that does not
            // fit is refused once the number ends, as a 64-bit reading would.
            let mut count: usize = 0;
            let mut wide = false;
            let mut shift = 0u32;
            let mut pos = #id_len;
            loop {
                let Some(&b) = stream.get(pos) else {
                    return Err(Error::Truncated);
                };
                pos += 1;
                if shift > 63 || (shift == 63 && b > 1) {
                    return Err(Error::BadLength);
                }
                let chunk = usize::from(b & 0x7f);
                let part = if shift < usize::BITS {
                    chunk.wrapping_shl(shift)
                } else {
                    0
                };
                wide |= part.wrapping_shr(shift) != chunk || (shift >= usize::BITS && chunk != 0);
                count |= part;
                if b & 0x80 == 0 {
                    if b == 0 && shift > 0 {
                        return Err(Error::BadLength);
                    }
                    break;
                }
                shift += 7;
            }
            if wide {
                return Err(Error::BadLength);
            }
            Ok((count, pos))
        }
    }
}
