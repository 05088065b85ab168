//! `kind = "chars"`: the text API around the index codec. The module's core (tables,
//! `encode`/`decode` over index bytes, framing) goes into a private inner module `indices`,
//! where `Symbol = u8`; the public `encode(&str, ..)` and `decode(.., &mut [u8]) -> &str`
//! map characters to indices and back using `out` as scratch, so nothing is allocated.
//! DEVELOPERS.md, "Chars codecs", has the design and the proof that decoding in place never
//! overwrites an index it has not read.

use super::rows::{push_number, rows_of, RowSets};
use crate::kind::chars::{Chars, ABSENT};
use crate::method::Tables;
use crate::plan::CodecPlan;
use crate::spec::{Framing, Lookup};
use proc_macro2::{Literal, TokenStream};
use quote::quote;

/// The `UnknownSymbol` variant of a chars codec and its message: a byte offset into the text.
pub fn unknown_error() -> (TokenStream, TokenStream) {
    (
        quote! {
            /// The text holds a character outside [`ALPHABET`].
            UnknownSymbol {
                /// Byte offset of the first such character in the input `&str`.
                position: usize,
            },
        },
        quote! {
            Error::UnknownSymbol { position } => {
                ::core::write!(f, "the character at byte {} is not in the alphabet", position)
            }
        },
    )
}

/// The module's items after its `Error`: the text API and its tables, then `core` (the
/// index codec) inside `mod indices`.
pub fn items(
    plan: &CodecPlan,
    chars: &Chars,
    core: TokenStream,
    rows: &mut RowSets,
) -> TokenStream {
    let longest = chars.decoded_per_index();
    let absent = Literal::u8_unsuffixed(ABSENT);
    let escapes = chars.escapes();
    let ascii = longest == 1 && !escapes;
    let chars_len = Literal::usize_unsuffixed(chars.chars().len());

    let dense = chars.dense();
    let dense_len = Literal::usize_unsuffixed(dense.len());
    let dense_rows = rows.add(rows_of(&dense, 16, |line, &i| {
        push_number(line, u64::from(i));
        line.push_str(", ");
    }));
    let wide = chars.wide();
    let (index_of, wide_tables) = if wide.is_empty() {
        (
            quote! {
                /// The index of `c`, or `ABSENT`.
                #[inline(always)]
                fn index_of(c: char) -> u8 {
                    CHAR_INDEX.get(c as usize).copied().unwrap_or(ABSENT)
                }
            },
            TokenStream::new(),
        )
    } else {
        let wide_len = Literal::usize_unsuffixed(wide.len());
        let char_rows = rows.add(rows_of(&wide, 4, |line, &(c, _)| {
            line.push_str(&format!("'\\u{{{:x}}}', ", u32::from(c)));
        }));
        let index_rows = rows.add(rows_of(&wide, 16, |line, &(_, i)| {
            push_number(line, u64::from(i));
            line.push_str(", ");
        }));
        (
            quote! {
                /// The index of `c`, or `ABSENT`: one load below `CHAR_INDEX.len()`, a
                /// binary search of `WIDE_CHARS` above.
                #[inline(always)]
                fn index_of(c: char) -> u8 {
                    match CHAR_INDEX.get(c as usize) {
                        Some(&index) => index,
                        None => wide_index(c),
                    }
                }

                /// The index of a character past `CHAR_INDEX`, or `ABSENT`.
                fn wide_index(c: char) -> u8 {
                    match WIDE_CHARS.binary_search(&c) {
                        Ok(k) => WIDE_INDEX.get(k).copied().unwrap_or(ABSENT),
                        Err(_) => ABSENT,
                    }
                }

                /// The alphabet's characters past `CHAR_INDEX`, in scalar order.
                static WIDE_CHARS: [char; #wide_len] = #char_rows;

                /// The index of each character of `WIDE_CHARS`.
                static WIDE_INDEX: [u8; #wide_len] = #index_rows;
            },
            quote!(),
        )
    };
    let utf8: Vec<[u8; 4]> = chars
        .chars()
        .iter()
        .map(|c| {
            let mut row = [0u8; 4];
            c.encode_utf8(&mut row);
            row
        })
        .collect();
    let per_line = if longest > 2 { 4 } else { 8 };
    let utf8_rows = rows.add(rows_of(&utf8, per_line, |line, row| {
        line.push('[');
        for b in &row[..longest] {
            line.push_str(&format!("0x{b:02x}, "));
        }
        line.truncate(line.len() - 2);
        line.push_str("], ");
    }));

    // ASCII alphabets map bytes: a byte at or above 0x80 (part of a longer character) is
    // absent, and the index codec's position is then the byte offset itself.
    let (map, position) = if ascii {
        (
            quote! {
                let mut text = input.bytes();
                let mut n = 0usize;
                for slot in out.iter_mut() {
                    let Some(b) = text.next() else { break };
                    *slot = CHAR_INDEX.get(usize::from(b)).copied().unwrap_or(ABSENT);
                    n += 1;
                }
            },
            quote!(position),
        )
    } else {
        (
            quote! {
                let mut text = input.chars();
                let mut n = 0usize;
                for slot in out.iter_mut() {
                    let Some(c) = text.next() else { break };
                    *slot = index_of(c);
                    n += 1;
                }
            },
            quote! {
                input.char_indices().nth(position).map_or(input.len(), |(at, _)| at)
            },
        )
    };
    let char_len = if ascii {
        quote!(1)
    } else {
        // The sequence length from its first byte (The Unicode Standard, ch. 3, Table 3-7).
        let mut sum = quote!(1);
        for (limit, from) in [(0xc0u8, 2), (0xe0, 3), (0xf0, 4)] {
            if longest >= from {
                let limit = Literal::u8_unsuffixed(limit);
                sum = quote!(#sum + usize::from(row[0] >= #limit));
            }
        }
        sum
    };
    // With an escape a character outside the alphabet takes three index bytes; the index
    // codec then refuses nothing.
    let (map, max_encoded, unknown_arm, digits_per_char) = if escapes {
        (
            quote! {
                let mut n = 0usize;
                for c in input.chars() {
                    let index = index_of(c);
                    if index != ABSENT {
                        let Some(slot) = out.get_mut(n) else {
                            return Err(Error::OutputTooSmall);
                        };
                        *slot = index;
                        n += 1;
                    } else {
                        let v = c as u32;
                        let digits = [
                            ESCAPE_BASE + ((v >> 14) & 127) as u8,
                            ESCAPE_BASE + ((v >> 7) & 127) as u8,
                            ESCAPE_BASE + (v & 127) as u8,
                        ];
                        let Some(slot) = out.get_mut(n..).and_then(<[u8]>::first_chunk_mut::<3>) else {
                            return Err(Error::OutputTooSmall);
                        };
                        *slot = digits;
                        n += 3;
                    }
                }
            },
            quote! {
                chars.saturating_mul(3).saturating_add(indices::max_encoded_len(chars.saturating_mul(3)))
            },
            TokenStream::new(),
            quote!(3),
        )
    } else {
        (
            quote! {
                #map
                if text.next().is_some() {
                    return Err(Error::OutputTooSmall);
                }
            },
            quote!(chars.saturating_add(indices::max_encoded_len(chars))),
            quote! {
                Err(Error::UnknownSymbol { position }) => {
                    return Err(Error::UnknownSymbol { position: #position });
                }
            },
            quote!(1),
        )
    };
    let call = if escapes {
        quote!(let len = indices::encode(scratch, rest)?;)
    } else {
        quote! {
            let len = match indices::encode(scratch, rest) {
                Ok(len) => len,
                #unknown_arm
                Err(e) => return Err(e),
            };
        }
    };
    let expand_step = if escapes {
        quote! {
            if index < ESCAPE_BASE {
                let Some(&row) = UTF8.get(usize::from(index)) else {
                    return Err(Error::Corrupt);
                };
                if let Some(dst) = out.get_mut(written..).and_then(<[u8]>::first_chunk_mut::<MAX_UTF8_LEN>) {
                    *dst = row;
                }
                written += #char_len;
                read += 1;
            } else {
                // Three digits of 7 bits each, the scalar value's high bits first.
                let (Some(&a), Some(&b), Some(&c)) = (out.get(read), out.get(read + 1), out.get(read + 2)) else {
                    return Err(Error::Corrupt);
                };
                let (a, b, c) = (a.wrapping_sub(ESCAPE_BASE), b.wrapping_sub(ESCAPE_BASE), c.wrapping_sub(ESCAPE_BASE));
                if (a | b | c) > 127 {
                    return Err(Error::Corrupt);
                }
                let v = u32::from(a) << 14 | u32::from(b) << 7 | u32::from(c);
                let Some(ch) = char::from_u32(v) else {
                    return Err(Error::Corrupt);
                };
                let (bytes, len) = utf8(ch);
                if let Some(dst) = out.get_mut(written..).and_then(<[u8]>::first_chunk_mut::<4>) {
                    *dst = bytes;
                }
                written += len;
                read += 3;
            }
        }
    } else {
        quote! {
            // Decoded indices are below ALPHABET_LEN: the decode table holds no other.
            let Some(&row) = UTF8.get(usize::from(index)) else {
                return Err(Error::Corrupt);
            };
            if let Some(dst) = out.get_mut(written..).and_then(<[u8]>::first_chunk_mut::<MAX_UTF8_LEN>) {
                *dst = row;
            }
            written += #char_len;
            read += 1;
        }
    };
    let escape_items = if escapes {
        quote! {
            /// The first index byte of an escaped character's digits: the alphabet's length.
            const ESCAPE_BASE: u8 = #chars_len;

            /// The UTF-8 of `c`, padded to four bytes, and its length (The Unicode Standard,
            /// ch. 3, Table 3-6).
            fn utf8(c: char) -> ([u8; 4], usize) {
                let v = c as u32;
                if v < 0x80 {
                    ([v as u8, 0, 0, 0], 1)
                } else if v < 0x800 {
                    ([0xc0 | (v >> 6) as u8, 0x80 | (v & 0x3f) as u8, 0, 0], 2)
                } else if v < 0x10000 {
                    ([0xe0 | (v >> 12) as u8, 0x80 | ((v >> 6) & 0x3f) as u8, 0x80 | (v & 0x3f) as u8, 0], 3)
                } else {
                    (
                        [
                            0xf0 | (v >> 18) as u8,
                            0x80 | ((v >> 12) & 0x3f) as u8,
                            0x80 | ((v >> 6) & 0x3f) as u8,
                            0x80 | (v & 0x3f) as u8,
                        ],
                        4,
                    )
                }
            }
        }
    } else {
        TokenStream::new()
    };
    let utf8_len = if escapes {
        quote!(ALPHABET_LEN - 1)
    } else {
        quote!(ALPHABET_LEN)
    };
    let _ = digits_per_char;
    let prefix = if plan.spec.framing == Framing::Tagged {
        quote! {
            /// Decodes the stream at the front of `stream` (tagged streams delimit
            /// themselves) into `out`; returns the text and the stream's length in bytes.
            /// `out` needs [`max_decoded_bytes`] of the stream's character count.
            pub fn decode_prefix<'a>(stream: &[u8], out: &'a mut [u8]) -> Result<(&'a str, usize), Error> {
                let (out, start) = room(out, indices::symbol_count(stream)?)?;
                let (_, used) = indices::decode_prefix(stream, out.get_mut(start..).unwrap_or_default())?;
                Ok((expand(out, start)?, used))
            }
        }
    } else {
        TokenStream::new()
    };
    // `MAX_SYMBOL_BITS` (tANS only), and the index codec's symbols in order for the rANS
    // search.
    let symbol_bits = if let Tables::Tans(_) = &plan.sets[0].tables {
        quote! {
            /// Most bits any one character costs.
            pub const MAX_SYMBOL_BITS: u32 = indices::MAX_SYMBOL_BITS;
        }
    } else {
        TokenStream::new()
    };
    let indices_list =
        if matches!(plan.sets[0].tables, Tables::Rans(_)) && plan.spec.lookup == Lookup::Search {
            let all = (0..chars.chars().len()).map(|i| Literal::u8_unsuffixed(i as u8));
            quote! {
                /// Every index in order.
                static INDICES: [Symbol; ALPHABET_LEN] = [#(#all),*];
            }
        } else {
            TokenStream::new()
        };

    quote! {
        /// The index byte of a character outside the alphabet: the index codec refuses it
        /// (its row is the absent one).
        const ABSENT: u8 = #absent;

        /// Largest stream [`encode`] writes for `chars` characters, plus the one byte per
        /// character it uses as scratch in front of the stream: an `out` this long always
        /// suffices.
        pub const fn max_encoded_len(chars: usize) -> usize {
            #max_encoded
        }

        /// Bytes of `out` that [`decode`] needs for a stream of `chars` characters
        /// ([`symbol_count`] reads it from the header): [`MAX_UTF8_LEN`] each. The text it
        /// returns may be shorter.
        pub const fn max_decoded_bytes(chars: usize) -> usize {
            chars.saturating_mul(MAX_UTF8_LEN)
        }

        /// The number of characters in the stream at the front of `stream`, read from its
        /// header: [`max_decoded_bytes`] of it sizes `out` for [`decode`].
        pub fn symbol_count(stream: &[u8]) -> Result<usize, Error> {
            indices::symbol_count(stream)
        }

        #symbol_bits

        /// Encodes `input` into `out`; returns the stream's length (the stream is
        /// `out[..len]`). `out` is also the scratch space: its front first takes one index
        /// byte per character, the stream is written behind them and then moved to the
        /// front, so `out` needs [`max_encoded_len`] of the character count (not only the
        /// stream's length). A character outside [`ALPHABET`] gives
        /// [`Error::UnknownSymbol`] with its byte offset in `input`. After an error the
        /// contents of `out` are unspecified.
        pub fn encode(input: &str, out: &mut [u8]) -> Result<usize, Error> {
            #map
            let Some((scratch, rest)) = out.split_at_mut_checked(n) else {
                return Err(Error::OutputTooSmall);
            };
            #call
            // The stream moves forward by `n`: each byte is read before a write reaches it.
            for i in 0..len {
                if let Some(&b) = out.get(n.wrapping_add(i)) {
                    if let Some(dst) = out.get_mut(i) {
                        *dst = b;
                    }
                }
            }
            Ok(len)
        }

        /// Decodes one whole stream into `out` as UTF-8 and returns the text. `out` needs
        /// [`max_decoded_bytes`] of the stream's character count ([`symbol_count`]),
        /// else [`Error::OutputTooSmall`]: the indices are decoded into the end of that room,
        /// then rewritten as UTF-8 from its front.
        pub fn decode<'a>(stream: &[u8], out: &'a mut [u8]) -> Result<&'a str, Error> {
            let (out, start) = room(out, indices::symbol_count(stream)?)?;
            indices::decode(stream, out.get_mut(start..).unwrap_or_default())?;
            expand(out, start)
        }

        #prefix

        /// The first `MAX_UTF8_LEN * count` bytes of `out`, and where the `count` indices
        /// go in them (the last `count` bytes).
        fn room(out: &mut [u8], count: usize) -> Result<(&mut [u8], usize), Error> {
            let Some(len) = count.checked_mul(MAX_UTF8_LEN) else {
                return Err(Error::OutputTooSmall);
            };
            match out.get_mut(..len) {
                Some(out) => Ok((out, len - count)),
                None => Err(Error::OutputTooSmall),
            }
        }

        /// Rewrites the indices at `out[start..]` as UTF-8 from the front of `out`, a whole
        /// `MAX_UTF8_LEN`-byte row each (the cursor then moves by the character's length).
        /// Never overwrites an index before reading it: with `n` indices in
        /// `out.len() = MAX_UTF8_LEN * n` bytes, index `i` is at `start + i =
        /// (MAX_UTF8_LEN - 1) * n + i`; when it is read at most `MAX_UTF8_LEN * i` bytes are
        /// written, and its row ends by `MAX_UTF8_LEN * (i + 1)`, which is at most
        /// `start + i + 1` because `(MAX_UTF8_LEN - 1) * (i + 1) <= (MAX_UTF8_LEN - 1) * n`:
        /// the rows reach index `i`'s own byte at most, already read.
        fn expand(out: &mut [u8], start: usize) -> Result<&str, Error> {
            let mut written = 0usize;
            let mut read = start;
            while let Some(&index) = out.get(read) {
                #expand_step
            }
            let out: &[u8] = out;
            // Valid by construction; checking is the only way to a `&str` without `unsafe`.
            ::core::str::from_utf8(out.get(..written).unwrap_or_default()).map_err(|_| Error::Corrupt)
        }

        #index_of

        #wide_tables

        /// The index of each scalar value below its length (`ABSENT`: not in the alphabet).
        static CHAR_INDEX: [u8; #dense_len] = #dense_rows;

        /// The UTF-8 of each character by index, padded with zeros to `MAX_UTF8_LEN` bytes.
        static UTF8: [[u8; MAX_UTF8_LEN]; #utf8_len] = #utf8_rows;

        #escape_items

        /// The index codec: the ordinary core over index bytes (`Symbol = u8`), private:
        /// only the text API above calls it, with indices below `ALPHABET_LEN` or `ABSENT`.
        mod indices {
            use super::*;
            use ::core::option::Option::{None, Some};
            use ::core::result::Result::{self, Err, Ok};

            /// An index into [`ALPHABET`].
            pub type Symbol = u8;

            #indices_list

            #core
        }
    }
}
