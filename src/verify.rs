//! Stage 5: the reference coder, and the check that the tables round-trip the training data.
//!
//! The reference coder writes and reads the stream format of `FORMAT.md` in the plainest way
//! (a vector of bits, the encoding step found by search from the spread itself, not from the
//! emitted formulas), so that it is an independent statement of what the generated code must do.
//! The generated code is tested against it byte for byte.

use crate::error::{Error, Result};
use crate::model::Model;
use crate::spec::Framing;
use crate::tables::Tans;

/// Stream format version, in the high nibble of the first header byte.
pub const FORMAT_VERSION: u8 = 1;
/// First header byte with the padding count (low three bits) cleared.
pub const TAG: u8 = FORMAT_VERSION << 4;

/// What the reference decoder found wrong with a stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StreamError {
    UnknownFormat,
    WrongCodec,
    BadLength,
    TooLong,
    Truncated,
    Corrupt,
    TrailingBytes,
}

/// FNV-1a, 64 bits (Fowler, Noll, Vo; common practice): small, fixed, and the same everywhere.
pub fn fnv1a(parts: &[&[u8]]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for part in parts {
        for &b in part.iter() {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
        // Separate the parts so that ("ab", "c") and ("a", "bc") differ.
        h ^= 0xff;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// The 16-bit fingerprint of a codec's tables, as carried in its streams: FNV-1a over the
/// format version, the kind, the alphabet, the scale and the spread, folded to 16 bits.
pub fn fingerprint(kind_tag: u8, alphabet: &[u8], tans: &Tans) -> u16 {
    let spread: Vec<u8> = tans.spread.iter().flat_map(|s| s.to_le_bytes()).collect();
    let h = fnv1a(&[
        &[FORMAT_VERSION, kind_tag, tans.scale_bits as u8],
        alphabet,
        &spread,
    ]);
    (h ^ (h >> 16) ^ (h >> 32) ^ (h >> 48)) as u16
}

/// Bytes of an unsigned LEB128 number.
pub fn leb128(mut v: u64) -> Vec<u8> {
    let mut out = Vec::new();
    loop {
        let byte = (v & 0x7f) as u8;
        v >>= 7;
        if v == 0 {
            out.push(byte);
            return out;
        }
        out.push(byte | 0x80);
    }
}

/// The reference coder over one table set.
pub struct Reference<'a> {
    tans: &'a Tans,
    fingerprint: u16,
    bare: bool,
    /// For each symbol, the table positions of its copies, left to right.
    positions: Vec<Vec<u32>>,
    /// For each table position, the number of its copy (`q_s ..= 2q_s - 1`).
    number: Vec<u32>,
}

impl<'a> Reference<'a> {
    /// The coder for `framing`.
    pub fn framed(tans: &'a Tans, fingerprint: u16, framing: Framing) -> Self {
        let mut r = Reference::new(tans, fingerprint);
        r.bare = framing == Framing::Bare;
        r
    }

    /// The coder for tagged streams.
    pub fn new(tans: &'a Tans, fingerprint: u16) -> Self {
        let mut positions = vec![Vec::new(); tans.slots.len()];
        let mut number = Vec::with_capacity(tans.spread.len());
        for (i, &s) in tans.spread.iter().enumerate() {
            let list: &mut Vec<u32> = &mut positions[usize::from(s)];
            number.push(tans.slots[usize::from(s)] + list.len() as u32);
            list.push(i as u32);
        }
        Reference {
            tans,
            fingerprint,
            bare: false,
            positions,
            number,
        }
    }

    /// Encodes symbol indices into a whole stream (header and payload).
    pub fn encode(&self, symbols: &[u16]) -> Vec<u8> {
        let r = self.tans.scale_bits;
        let l = 1u32 << r;
        // Chunks in the order the encoder produces them; the decoder reads them backwards.
        let mut chunks: Vec<(u32, u32)> = Vec::with_capacity(symbols.len() + 1);
        let mut x = l;
        for &s in symbols.iter().rev() {
            let q = self.tans.slots[usize::from(s)];
            let mut k = 0;
            while (x >> k) >= 2 * q {
                k += 1;
            }
            chunks.push((x & ((1u32 << k) - 1), k));
            x = l + self.positions[usize::from(s)][((x >> k) - q) as usize];
        }
        chunks.push((x - l, r));
        let mut bits: Vec<bool> = Vec::new();
        for &(value, k) in chunks.iter().rev() {
            for b in (0..k).rev() {
                bits.push((value >> b) & 1 == 1);
            }
        }
        let pad = (8 - bits.len() % 8) % 8;
        if self.bare {
            // Payload only; the padding goes at the end, where the decoder stops anyway.
            bits.extend(std::iter::repeat_n(false, pad));
            return bits
                .chunks(8)
                .map(|byte| byte.iter().fold(0u8, |acc, &b| (acc << 1) | u8::from(b)))
                .collect();
        }
        let mut out = vec![TAG | pad as u8];
        out.extend_from_slice(&self.fingerprint.to_le_bytes());
        out.extend(leb128(symbols.len() as u64));
        let padded: Vec<bool> = std::iter::repeat_n(false, pad).chain(bits).collect();
        for byte in padded.chunks(8) {
            out.push(byte.iter().fold(0u8, |acc, &b| (acc << 1) | u8::from(b)));
        }
        out
    }

    /// Decodes one stream from the front of `stream`: the symbols and the bytes used.
    /// `limit` caps the symbol count a header may claim; a bare stream holds exactly `limit`.
    pub fn decode(
        &self,
        stream: &[u8],
        limit: usize,
    ) -> std::result::Result<(Vec<u16>, usize), StreamError> {
        if self.bare {
            return self.payload(stream, 0, 0, limit);
        }
        let (&tag, rest) = stream.split_first().ok_or(StreamError::Truncated)?;
        if tag & 0xf8 != TAG {
            return Err(StreamError::UnknownFormat);
        }
        let pad = usize::from(tag & 7);
        if rest.len() < 2 {
            return Err(StreamError::Truncated);
        }
        if u16::from_le_bytes([rest[0], rest[1]]) != self.fingerprint {
            return Err(StreamError::WrongCodec);
        }
        let mut pos = 3;
        let mut count: u64 = 0;
        let mut shift = 0;
        loop {
            let &b = stream.get(pos).ok_or(StreamError::Truncated)?;
            pos += 1;
            if shift == 63 && b > 1 || shift > 63 {
                return Err(StreamError::BadLength);
            }
            count |= u64::from(b & 0x7f) << shift;
            if b & 0x80 == 0 {
                if b == 0 && shift > 0 {
                    return Err(StreamError::BadLength);
                }
                break;
            }
            shift += 7;
        }
        let count = usize::try_from(count).map_err(|_| StreamError::TooLong)?;
        if count > limit {
            return Err(StreamError::TooLong);
        }
        self.payload(stream, pos, pad, count)
    }

    /// Decodes `count` symbols from the payload at `stream[pos..]`, after `pad` zero bits.
    fn payload(
        &self,
        stream: &[u8],
        pos: usize,
        pad: usize,
        count: usize,
    ) -> std::result::Result<(Vec<u16>, usize), StreamError> {
        let r = self.tans.scale_bits;
        let payload = &stream[pos..];
        let bit = |i: usize| -> bool {
            payload
                .get(i / 8)
                .is_some_and(|&byte| (byte >> (7 - i % 8)) & 1 == 1)
        };
        for i in 0..pad {
            if bit(i) {
                return Err(StreamError::Corrupt);
            }
        }
        let mut at = pad;
        let mut read = |k: u32| -> u32 {
            let mut v = 0;
            for _ in 0..k {
                v = (v << 1) | u32::from(bit(at));
                at += 1;
            }
            v
        };
        let mut state = read(r) as usize;
        let mut out = Vec::with_capacity(count.min(1 << 20));
        for _ in 0..count {
            let s = self.tans.spread[state];
            let o = self.number[state];
            let k = r - (31 - o.leading_zeros());
            out.push(s);
            state = (((o << k) | read(k)) - (1u32 << r)) as usize;
        }
        if at > payload.len() * 8 {
            return Err(StreamError::Truncated);
        }
        if state != 0 {
            return Err(StreamError::Corrupt);
        }
        // Bare streams end in zero padding up to the byte boundary; tagged ones exactly on it.
        if self.bare && (at..at.div_ceil(8) * 8).any(bit) || !self.bare && at % 8 != 0 {
            return Err(StreamError::Corrupt);
        }
        Ok((out, pos + at.div_ceil(8)))
    }
}

/// What verification measured.
#[derive(Debug, Clone, Default)]
pub struct Verified {
    /// Training sequences round-tripped.
    pub sequences: usize,
    pub symbols: u64,
    /// Whole streams, headers included.
    pub stream_bytes: u64,
    /// Payload bits (state and symbol bits; no header; padding excluded for tagged streams,
    /// included for bare ones).
    pub payload_bits: u64,
}

/// Round-trips every training sequence through the reference coder.
pub fn verify(tans: &Tans, fingerprint: u16, framing: Framing, model: &Model) -> Result<Verified> {
    let coder = Reference::framed(tans, fingerprint, framing);
    let mut v = Verified::default();
    for seq in &model.sequences {
        let stream = coder.encode(&seq.symbols);
        let decoded = coder.decode(&stream, seq.symbols.len());
        match decoded {
            Ok((symbols, used)) if symbols == seq.symbols && used == stream.len() => {}
            other => {
                return Err(Error::internal(format!(
                    "the tables failed to round-trip {} ({} symbols): {:?}",
                    seq.origin,
                    seq.symbols.len(),
                    other.map(|(s, used)| (s.len(), used))
                )))
            }
        }
        let (header, pad) = match framing {
            Framing::Tagged => (
                3 + leb128(seq.symbols.len() as u64).len(),
                u64::from(stream[0] & 7),
            ),
            Framing::Bare => (0, 0),
        };
        v.sequences += 1;
        v.symbols += seq.symbols.len() as u64;
        v.stream_bytes += stream.len() as u64;
        v.payload_bits += (stream.len() - header) as u64 * 8 - pad;
    }
    Ok(v)
}
