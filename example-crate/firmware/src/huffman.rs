//! The baseline: a canonical Huffman codec written by hand (Huffman 1952; canonical codes
//! and table decoding are common practice), as a firmware engineer would write it.
//!
//! - Code lengths come from the training counts, limited to the codec's `table_bits`
//!   (package-merge, in `build.rs`), so that one lookup of the next `MAX_BITS` bits decodes
//!   a symbol: the decode table has `2^MAX_BITS` two-byte entries (symbol, length).
//! - Encoding: one `u32` per input value, the code (reversed: bits go out LSB-first) above
//!   its 8-bit length; bytes outside the alphabet have length 0 and are refused.
//! - Bits are packed LSB-first into a 32-bit buffer, written out 16 bits at a time.
//! - A stream is the symbol count (LEB128) followed by the packed codes, zero-padded to a
//!   whole byte.
//! - Integers (`level_delta`): the same code over the bins precast chose for the codec,
//!   each code followed by the bin's raw offset bits; values are coded as differences of
//!   successive values (the first from 0), wrapped into the range's power-of-two size.
//!
//! No panics: every buffer access goes through `get`/`first_chunk`, table indices are masked
//! to the table's power-of-two size or bounded by the input type.

/// One decode-table entry: the symbol and how many bits its code takes.
#[derive(Clone, Copy)]
pub struct Entry<S>(pub S, pub u8);

/// One decode-table entry of a binned codec: the bin's first place, its code length and
/// its offset bits.
#[derive(Clone, Copy)]
pub struct BinEntry(pub u16, pub u8, pub u8);

/// Why encoding or decoding failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Error {
    /// The output buffer is too small.
    OutputTooSmall,
    /// An input byte is not in the alphabet, or a value outside the range.
    NotInAlphabet,
    /// The symbol count in the header is malformed.
    BadLength,
    /// The stream ends before its last symbol.
    Truncated,
    /// The padding bits after the last code are not zero.
    Corrupt,
    /// Bytes follow the end of the stream.
    TrailingBytes,
}

/// Bytes of the LEB128 encoding of `n`.
pub const fn count_len(mut n: usize) -> usize {
    let mut len = 1;
    while n >= 0x80 {
        n >>= 7;
        len += 1;
    }
    len
}

/// Largest stream of `symbols` symbols whose codes are at most `max_bits` bits.
pub const fn max_encoded_len(symbols: usize, max_bits: u32) -> usize {
    count_len(symbols) + symbols.saturating_mul(max_bits as usize).div_ceil(8)
}

/// Encodes `input` into `out`; `code` gives an input value's table entry
/// (`code << 8 | length`). With `CHECKED`, a length of 0 is refused.
#[inline(always)]
pub fn encode<S: Copy, const CHECKED: bool>(
    input: &[S],
    out: &mut [u8],
    code: impl Fn(S) -> u32,
) -> Result<usize, Error> {
    let mut pos = write_count(input.len(), out)?;
    let mut buf: u32 = 0;
    let mut bits: u32 = 0;
    for &s in input {
        let entry = code(s);
        let len = entry & 0xff;
        if CHECKED && len == 0 {
            return Err(Error::NotInAlphabet);
        }
        buf |= (entry >> 8) << bits;
        bits += len;
        if bits >= 16 {
            let Some(dst) = out.get_mut(pos..).and_then(<[u8]>::first_chunk_mut::<2>) else {
                return Err(Error::OutputTooSmall);
            };
            *dst = (buf as u16).to_le_bytes();
            pos += 2;
            buf >>= 16;
            bits -= 16;
        }
    }
    write_tail(buf, bits, out, pos)
}

/// Decodes one whole stream into `out` with a decode table of `N = 2^MAX_BITS` entries;
/// returns the number of symbols.
#[inline(always)]
pub fn decode<S: Copy, const N: usize>(
    stream: &[u8],
    out: &mut [S],
    table: &[Entry<S>; N],
) -> Result<usize, Error> {
    let (count, header) = read_count(stream)?;
    let mut pos = header;
    let Some(out) = out.get_mut(..count) else {
        return Err(Error::OutputTooSmall);
    };
    // At least 16 bits in `buf` before each lookup (codes are at most 16 bits); past the end
    // of the stream the reads are zeros, and the length check below refuses the stream.
    let mut buf: u32 = 0;
    let mut bits: u32 = 0;
    for slot in out.iter_mut() {
        if bits < 16 {
            refill(stream, &mut pos, &mut buf, &mut bits);
        }
        let Entry(symbol, len) = table[buf as usize & (N - 1)];
        *slot = symbol;
        buf >>= len;
        bits = bits.wrapping_sub(u32::from(len));
    }
    check_end(stream, header, pos, buf, bits)?;
    Ok(count)
}

/// Writes the LEB128 symbol count; returns its length.
#[inline(always)]
fn write_count(mut n: usize, out: &mut [u8]) -> Result<usize, Error> {
    let mut pos = 0;
    loop {
        let Some(dst) = out.get_mut(pos) else {
            return Err(Error::OutputTooSmall);
        };
        pos += 1;
        if n < 0x80 {
            *dst = n as u8;
            return Ok(pos);
        }
        *dst = (n as u8) | 0x80;
        n >>= 7;
    }
}

/// Writes the last 0..=15 bits of `buf` at `pos`, zero-padded to whole bytes; returns the
/// stream's length.
#[inline(always)]
fn write_tail(buf: u32, bits: u32, out: &mut [u8], mut pos: usize) -> Result<usize, Error> {
    for byte in buf
        .to_le_bytes()
        .into_iter()
        .take(bits.div_ceil(8) as usize)
    {
        let Some(dst) = out.get_mut(pos) else {
            return Err(Error::OutputTooSmall);
        };
        *dst = byte;
        pos += 1;
    }
    Ok(pos)
}

/// Reads the symbol count (at most 5 bytes, no overlong encodings); returns it and the
/// header's length.
#[inline(always)]
fn read_count(stream: &[u8]) -> Result<(usize, usize), Error> {
    let mut count: usize = 0;
    let mut pos = 0;
    loop {
        let Some(&b) = stream.get(pos) else {
            return Err(Error::Truncated);
        };
        if pos == 4 && b > 0x0f || pos > 0 && b == 0 {
            return Err(Error::BadLength);
        }
        count |= usize::from(b & 0x7f) << (7 * pos);
        pos += 1;
        if b & 0x80 == 0 {
            return Ok((count, pos));
        }
    }
}

/// Loads 16 more bits above the `bits` in `buf` (`bits < 16`); past the end of the stream
/// they are zeros, and [`check_end`] refuses the stream.
#[inline(always)]
fn refill(stream: &[u8], pos: &mut usize, buf: &mut u32, bits: &mut u32) {
    let two = match stream.get(*pos..).and_then(<[u8]>::first_chunk::<2>) {
        Some(w) => u16::from_le_bytes(*w),
        None => stream.get(*pos).map_or(0, |&b| u16::from(b)),
    };
    *buf |= u32::from(two) << *bits;
    *bits += 16;
    *pos += 2;
}

/// Checks that the stream ends right after the last code, with zero padding: `pos - header`
/// bytes were loaded, `bits` of them (the low ones of `buf`) are unused.
#[inline(always)]
fn check_end(stream: &[u8], header: usize, pos: usize, buf: u32, bits: u32) -> Result<(), Error> {
    let used = ((pos - header) * 8).saturating_sub(bits as usize);
    let end = header + used.div_ceil(8);
    if end > stream.len() {
        return Err(Error::Truncated);
    }
    if end < stream.len() {
        return Err(Error::TrailingBytes);
    }
    let pad = (8 - used % 8) % 8;
    if buf & !(u32::MAX << pad) != 0 {
        return Err(Error::Corrupt);
    }
    Ok(())
}

/// Largest stream of `values` values of a binned codec.
pub const fn max_binned_len(values: usize, max_bits: u32, max_width: u32) -> usize {
    count_len(values)
        + values
            .saturating_mul((max_bits + max_width) as usize)
            .div_ceil(8)
}

/// Encodes `input`, values of `0 .. SIZE` (a power of two), as their differences (the first
/// from 0): each difference's bin code, then its offset in the bin. `start` holds each
/// bin's first place (a place is the difference plus `SIZE / 2`, wrapped), padded past
/// every place to `R` (a power of two) rows; `encode` each bin's
/// `code << 16 | offset bits << 8 | code length`.
#[inline(always)]
pub fn encode_binned<const R: usize, const SIZE: u32>(
    input: &[u16],
    out: &mut [u8],
    start: &[u16; R],
    encode: &[u32; R],
) -> Result<usize, Error> {
    let mut pos = write_count(input.len(), out)?;
    let mut buf: u32 = 0;
    let mut bits: u32 = 0;
    let mut prev: u32 = 0;
    for &v in input {
        let v = u32::from(v);
        if v >= SIZE {
            return Err(Error::NotInAlphabet);
        }
        let place = v.wrapping_sub(prev).wrapping_add(SIZE / 2) & (SIZE - 1);
        prev = v;
        // The last bin starting at or before `place`: a fixed number of halvings.
        let mut row = 0;
        let mut half = R / 2;
        while half > 0 {
            if u32::from(start[(row + half) & (R - 1)]) <= place {
                row += half;
            }
            half /= 2;
        }
        let row = row & (R - 1);
        let entry = encode[row];
        let offset = place.wrapping_sub(u32::from(start[row]));
        // The code, then the offset bits: each at most 16 bits, each after a flush.
        for (value, len) in [(entry >> 16, entry & 0xff), (offset, (entry >> 8) & 0xff)] {
            buf |= value << bits;
            bits += len;
            if bits >= 16 {
                let Some(dst) = out.get_mut(pos..).and_then(<[u8]>::first_chunk_mut::<2>) else {
                    return Err(Error::OutputTooSmall);
                };
                *dst = (buf as u16).to_le_bytes();
                pos += 2;
                buf >>= 16;
                bits -= 16;
            }
        }
    }
    write_tail(buf, bits, out, pos)
}

/// Decodes a stream of [`encode_binned`] with a decode table of `N = 2^MAX_BITS` entries;
/// returns the number of values.
#[inline(always)]
pub fn decode_binned<const N: usize, const SIZE: u32>(
    stream: &[u8],
    out: &mut [u16],
    table: &[BinEntry; N],
) -> Result<usize, Error> {
    let (count, header) = read_count(stream)?;
    let mut pos = header;
    let Some(out) = out.get_mut(..count) else {
        return Err(Error::OutputTooSmall);
    };
    let mut buf: u32 = 0;
    let mut bits: u32 = 0;
    let mut prev: u32 = 0;
    for slot in out.iter_mut() {
        if bits < 16 {
            refill(stream, &mut pos, &mut buf, &mut bits);
        }
        let BinEntry(first, len, width) = table[buf as usize & (N - 1)];
        buf >>= len;
        bits = bits.wrapping_sub(u32::from(len));
        // Offsets are at most 16 bits: one more refill at most.
        if bits < u32::from(width) {
            refill(stream, &mut pos, &mut buf, &mut bits);
        }
        let offset = buf & !(u32::MAX << width);
        buf >>= width;
        bits = bits.wrapping_sub(u32::from(width));
        prev = prev
            .wrapping_add(u32::from(first) + offset)
            .wrapping_add(SIZE / 2)
            & (SIZE - 1);
        *slot = prev as u16;
    }
    check_end(stream, header, pos, buf, bits)?;
    Ok(count)
}

include!(concat!(env!("OUT_DIR"), "/huffman_tables.rs"));

/// The per-codec entry points: what the bench calls and the flash images keep.
macro_rules! entry_points {
    ($($name:ident),*) => {$(
        pub mod $name {
            pub use crate::huffman::Error;
            use crate::huffman::$name::{Symbol, CHECKED, DECODE, ENCODE, MAX_BITS};

            /// Largest stream of `symbols` symbols.
            pub const fn max_encoded_len(symbols: usize) -> usize {
                crate::huffman::max_encoded_len(symbols, MAX_BITS)
            }

            /// Encodes `input` into `out`; returns the stream's length.
            pub fn encode(input: &[Symbol], out: &mut [u8]) -> Result<usize, Error> {
                crate::huffman::encode::<Symbol, CHECKED>(input, out, |s| ENCODE[s as usize])
            }

            /// Decodes one whole stream into `out`; returns the number of symbols.
            pub fn decode(stream: &[u8], out: &mut [Symbol]) -> Result<usize, Error> {
                crate::huffman::decode(stream, out, &DECODE)
            }
        }
    )*};
}

/// The entry points, named like precast's: `huffman::codec::gauge_status::encode`.
pub mod codec {
    entry_points!(gauge_status, field_notes);

    pub mod level_delta {
        use crate::huffman::level_delta::{
            Symbol, DECODE, ENCODE, MAX_BITS, MAX_WIDTH, SIZE, START,
        };
        pub use crate::huffman::Error;

        /// Largest stream of `values` values.
        pub const fn max_encoded_len(values: usize) -> usize {
            crate::huffman::max_binned_len(values, MAX_BITS, MAX_WIDTH)
        }

        /// Encodes `input` into `out`; returns the stream's length.
        pub fn encode(input: &[Symbol], out: &mut [u8]) -> Result<usize, Error> {
            crate::huffman::encode_binned::<_, SIZE>(input, out, &START, &ENCODE)
        }

        /// Decodes one whole stream into `out`; returns the number of values.
        pub fn decode(stream: &[u8], out: &mut [Symbol]) -> Result<usize, Error> {
            crate::huffman::decode_binned::<_, SIZE>(stream, out, &DECODE)
        }
    }
}
