//! Stage 5: the reference coder, and the check that the tables round-trip the training data.
//!
//! The reference coder writes and reads the stream format of `FORMAT.md` in the plainest way
//! (a vector of bits, the encoding step found by search from the spread itself, not from the
//! emitted formulas), so that it is an independent statement of what the generated code must do.
//! The generated code is tested against it byte for byte.

use crate::error::{Error, Result};
use crate::method::rans::{rans_bound, rans_code, rans_uncode, Rans, RANS_LOW};
use crate::method::tans::Tans;
use crate::method::Tables;
use crate::model::Model;
use crate::spec::Framing;

/// Stream format version; it is hashed into the fingerprint, so a stream of another version
/// is refused as written by other tables.
pub const FORMAT_VERSION: u8 = 3;

/// One-lane tANS streams of compact or bare framing with at most this many symbols try
/// One-lane compact and bare tANS streams try [`SEARCH_STARTS`] starting states, each judged
/// by a dry run over the first [`TRIAL_SYMBOLS`] symbols the encoder puts in (FORMAT.md,
/// "Frames").
pub const TRIAL_SYMBOLS: usize = 16;
/// Streams of more symbols skip the search: what it saves (a byte at most) no longer counts.
pub const SEARCH_SYMBOLS: usize = 256;
/// Starting states tried by that search.
pub const SEARCH_STARTS: usize = 16;
/// Bits a compact or bare tANS decoder may read past the end of the stream, as zeros: the
/// trailing zeros an encoder leaves out.
pub const PAST_END_BITS: usize = 64;

/// The compact header's check byte: the fingerprint's two bytes folded by XOR.
pub fn check_byte(fingerprint: u16) -> u8 {
    let [lo, hi] = fingerprint.to_le_bytes();
    lo ^ hi
}

/// What the reference decoder found wrong with a stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StreamError {
    WrongCodec,
    BadLength,
    TooLong,
    Truncated,
    Corrupt,
    TrailingBytes,
    /// Bare streams: the stream does not hold exactly the asked-for count of symbols.
    CountMismatch,
}

/// FNV-1a, 64 bits (Fowler, Noll, Vo; common practice): small, fixed, and the same
/// everywhere. Fed a piece at a time, so that a large sample is hashed as it is read.
#[derive(Debug, Clone)]
pub struct Fnv(u64);

impl Default for Fnv {
    fn default() -> Self {
        Fnv(0xcbf2_9ce4_8422_2325)
    }
}

impl Fnv {
    pub fn write(&mut self, bytes: &[u8]) {
        let mut h = self.0;
        for &b in bytes {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
        self.0 = h;
    }

    /// Ends one part, so that ("ab", "c") and ("a", "bc") differ.
    pub fn end_part(&mut self) {
        self.write(&[0xff]);
    }

    pub fn finish(&self) -> u64 {
        self.0
    }
}

/// FNV-1a of `parts`, each followed by a separator.
pub fn fnv1a(parts: &[&[u8]]) -> u64 {
    let mut h = Fnv::default();
    for part in parts {
        h.write(part);
        h.end_part();
    }
    h.finish()
}

/// The 16-bit fingerprint of a codec's tables, as carried in its streams: FNV-1a over the
/// format version, the kind, the method, the lanes, the table size, the alphabet and the
/// layout (the spread for tANS, the slots for rANS), folded to 16 bits.
pub fn fingerprint(kind_tag: u8, alphabet: &[u8], tables: &Tables, lanes: u32) -> u16 {
    fingerprint_of_version(FORMAT_VERSION, kind_tag, alphabet, tables, lanes)
}

/// [`fingerprint`] as format `version` computes it: a stream of another version carries
/// another fingerprint, and is refused as written by other tables.
pub fn fingerprint_of_version(
    version: u8,
    kind_tag: u8,
    alphabet: &[u8],
    tables: &Tables,
    lanes: u32,
) -> u16 {
    let (method, layout) = tables.identity();
    let h = fnv1a(&[
        &[
            version,
            kind_tag,
            tables.table_bits() as u8,
            method,
            lanes as u8,
        ],
        alphabet,
        &layout,
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

/// The reference coder over a codec's table sets.
pub struct Reference<'a> {
    tables: &'a Tables,
    fingerprint: u16,
    framing: Framing,
    lanes: usize,
    /// tANS: each table set with where its copies are.
    sets: Vec<TansSet<'a>>,
    /// rANS context codecs: each table set (empty: `tables` alone).
    rans_sets: Vec<&'a Rans>,
    /// Context codecs: the table set of each context symbol; empty: one set.
    set_of: Vec<u8>,
    /// Offset bits after each symbol (integers codecs); empty: none.
    widths: Vec<u32>,
}

/// One tANS table set and where its copies are.
struct TansSet<'a> {
    tans: &'a Tans,
    /// For each symbol, the table positions of its copies, left to right.
    positions: Vec<Vec<u32>>,
    /// For each table position, the number of its copy (`q_s ..= 2q_s - 1`).
    number: Vec<u32>,
}

impl<'a> TansSet<'a> {
    fn new(tans: &'a Tans) -> Self {
        let mut positions = vec![Vec::new(); tans.slots.len()];
        let mut number = Vec::new();
        for (i, &s) in tans.spread.iter().enumerate() {
            let list: &mut Vec<u32> = &mut positions[usize::from(s)];
            number.push(tans.slots[usize::from(s)] + list.len() as u32);
            list.push(i as u32);
        }
        TansSet {
            tans,
            positions,
            number,
        }
    }
}

/// Bits, least significant first, packed into bytes least significant bit first.
fn pack(bits: &[bool]) -> Vec<u8> {
    bits.chunks(8)
        .map(|byte| {
            byte.iter()
                .enumerate()
                .fold(0u8, |acc, (i, &b)| acc | (u8::from(b) << i))
        })
        .collect()
}

impl<'a> Reference<'a> {
    /// The coder for `framing` with `lanes` interleaved states.
    pub fn framed(tables: &'a Tables, fingerprint: u16, framing: Framing, lanes: u32) -> Self {
        let sets = match tables {
            Tables::Tans(tans) => vec![TansSet::new(tans)],
            Tables::Rans(_) => Vec::new(),
        };
        Reference {
            tables,
            fingerprint,
            framing,
            lanes: lanes as usize,
            sets,
            rans_sets: Vec::new(),
            set_of: Vec::new(),
            widths: Vec::new(),
        }
    }

    /// The coder for a context codec (tANS): `all` its table sets, `set_of` the set of each
    /// context symbol. A symbol's context is the symbol `lanes` before it, its lane's
    /// previous one; a lane's first symbol has [`crate::context::FIRST_CONTEXT`].
    pub fn with_contexts(mut self, all: &'a [Tables], set_of: Vec<u8>) -> Self {
        self.sets = all
            .iter()
            .filter_map(|t| match t {
                Tables::Tans(tans) => Some(TansSet::new(tans)),
                Tables::Rans(_) => None,
            })
            .collect();
        self.rans_sets = all
            .iter()
            .filter_map(|t| match t {
                Tables::Rans(r) => Some(r),
                Tables::Tans(_) => None,
            })
            .collect();
        self.set_of = set_of;
        self
    }

    /// The table set number of symbol `i`, from the symbols before it.
    fn set_index(&self, symbols: &[u16], i: usize) -> usize {
        let context = match i.checked_sub(self.lanes) {
            Some(j) => usize::from(symbols[j]),
            None => crate::context::FIRST_CONTEXT,
        };
        self.set_of.get(context).map_or(0, |&s| usize::from(s))
    }

    /// The tANS table set of symbol `i`.
    fn set_at(&self, symbols: &[u16], i: usize) -> &TansSet<'a> {
        let set = self.set_index(symbols, i);
        &self.sets[set.min(self.sets.len() - 1)]
    }

    /// The rANS tables of symbol `i`: `rans` itself without contexts.
    fn rans_at<'b>(&'b self, rans: &'b Rans, symbols: &[u16], i: usize) -> &'b Rans {
        match self.rans_sets.get(self.set_index(symbols, i)) {
            Some(r) => r,
            None => rans,
        }
    }

    /// The coder for a codec whose symbols are followed by `widths[s]` raw offset bits.
    pub fn with_widths(mut self, widths: Vec<u32>) -> Self {
        self.widths = widths;
        self
    }

    /// Offset bits after symbol `s`.
    fn width(&self, s: u16) -> u32 {
        self.widths.get(usize::from(s)).copied().unwrap_or(0)
    }

    /// The coder for tagged single-lane streams.
    pub fn new(tables: &'a Tables, fingerprint: u16) -> Self {
        Reference::framed(tables, fingerprint, Framing::Tagged, 1)
    }

    /// Encodes symbol indices into a whole stream (header and payload).
    pub fn encode(&self, symbols: &[u16]) -> Vec<u8> {
        self.encode_offsets(symbols, &[])
    }

    /// Encodes symbol indices and, for a codec with offset bits, each symbol's offset (zero
    /// where `offsets` is short).
    pub fn encode_offsets(&self, symbols: &[u16], offsets: &[u32]) -> Vec<u8> {
        let payload = match self.tables {
            Tables::Tans(t) => self.encode_tans(t, symbols, offsets),
            Tables::Rans(r) => self.encode_rans(r, symbols),
        };
        let mut out = match self.framing {
            Framing::Tagged => self.fingerprint.to_le_bytes().to_vec(),
            Framing::Compact => vec![check_byte(self.fingerprint)],
            Framing::Bare => return payload,
        };
        out.extend(leb128(symbols.len() as u64));
        out.extend(payload);
        out
    }

    /// The positions of `s`'s copies in the order a searching encoder tries them as a lane's
    /// starting state: table positions in bit-reversed counting order (0, L/2, L/4, 3L/4,
    /// ...), the most aligned first, so that the bits the next symbol writes of it are
    /// most often zeros.
    fn starts(&self, tans: &Tans, s: u16, limit: usize) -> Vec<u32> {
        let r = tans.table_bits;
        (0..1u32 << r)
            .map(|i| i.reverse_bits() >> (32 - r))
            .filter(|&p| tans.spread[p as usize] == s)
            .take(limit)
            .collect()
    }

    /// tANS payload. Symbol `i` belongs to lane `i % lanes`; a lane's last symbol is its
    /// starting state's, and costs no bits. Compact and bare streams of one lane try several
    /// starting states and keep the shortest stream; they leave out trailing zeros.
    fn encode_tans(&self, tans: &Tans, symbols: &[u16], offsets: &[u32]) -> Vec<u8> {
        let n = symbols.len();
        let used = n.min(self.lanes);
        // Each used lane's last symbol, lane by lane.
        let mut last = vec![0u16; used];
        for (i, &s) in symbols.iter().enumerate().skip(n - used) {
            last[i % self.lanes] = s;
        }
        let framed = self.framing == Framing::Tagged;
        // Codecs with offset bits or contexts keep the first start: no search.
        let tries = if !framed
            && self.lanes == 1
            && n <= SEARCH_SYMBOLS
            && self.widths.is_empty()
            && self.set_of.is_empty()
        {
            SEARCH_STARTS
        } else {
            1
        };
        // Without the search, the copy the encoder reaches from state `L` (in the table set
        // of the symbol's context).
        let l = 1u32 << tans.table_bits;
        let first: Vec<u32> = (n - used..n)
            .map(|i| self.put(self.set_at(symbols, i), l, symbols[i]).2 - l)
            .collect();
        let mut by_lane = first.clone();
        for (j, i) in (n - used..n).enumerate() {
            by_lane[i % self.lanes] = first[j];
        }
        let first = by_lane;
        let start = match last.first() {
            Some(&s) if tries > 1 => {
                // The candidate whose first symbols write the fewest bits, less the zeros
                // they end the stream with (the first on a tie).
                let mut best: Option<(i64, u32)> = None;
                for p in self.starts(tans, s, tries) {
                    let score = self.trial(&self.sets[0], &symbols[..n - 1], p);
                    if best.is_none_or(|(b, _)| score < b) {
                        best = Some((score, p));
                    }
                }
                best.map_or(first, |(_, p)| vec![p])
            }
            _ => first,
        };
        let mut bits = self.tans_bits(tans.table_bits, symbols, offsets, &start);
        if !framed {
            // Trailing zeros read as zeros past the end: leave them out, up to the limit.
            let end = bits.iter().rposition(|&b| b).map_or(0, |i| i + 1);
            bits.truncate(end.max(bits.len().saturating_sub(PAST_END_BITS)));
        }
        pack(&bits)
    }

    /// One encoding step of symbol `s` from state `x`, found from the spread itself: the bit
    /// count `k` (the one with `x >> k` in `[q_s, 2q_s)`), the `k` bits written, and the
    /// state of copy number `x >> k` of `s`.
    fn put(&self, set: &TansSet<'_>, x: u32, s: u16) -> (u32, u32, u32) {
        let q = set.tans.slots[usize::from(s)];
        let mut k = 0;
        while (x >> k) >= 2 * q {
            k += 1;
        }
        let next = set.positions[usize::from(s)][((x >> k) - q) as usize];
        (
            k,
            x & ((1u32 << k) - 1),
            (1u32 << set.tans.table_bits) + next,
        )
    }

    /// A starting position's score: over the first [`TRIAL_SYMBOLS`] symbols of `head` the
    /// encoder puts in (backwards), the bits they write less the zeros these end the stream
    /// with (read least significant first, a field ends in its high bits); when the whole
    /// head is in the trial and wrote only zeros, the zeros of the first state's field too.
    fn trial(&self, set: &TansSet<'_>, head: &[u16], start: u32) -> i64 {
        let r = set.tans.table_bits;
        let l = 1u32 << r;
        let mut x = l + start;
        let (mut bits, mut zeros, mut clean) = (0i64, 0i64, true);
        for &s in head.iter().rev().take(TRIAL_SYMBOLS) {
            let (k, low, next) = self.put(set, x, s);
            if clean {
                zeros += i64::from(k - (32 - low.leading_zeros()));
                clean = low == 0;
            }
            bits += i64::from(k);
            x = next;
        }
        if clean && head.len() <= TRIAL_SYMBOLS {
            let field = x - l;
            zeros += i64::from(r - (32 - field.leading_zeros()));
        }
        bits - zeros
    }

    /// The payload bits, in reading order, for the lanes' starting positions `start`.
    fn tans_bits(&self, r: u32, symbols: &[u16], offsets: &[u32], start: &[u32]) -> Vec<bool> {
        let l = 1u32 << r;
        let n = symbols.len();
        // Chunks in the order the encoder produces them; the decoder reads them backwards.
        let mut chunks: Vec<(u32, u32)> = Vec::with_capacity(n + self.lanes);
        let offset = |i: usize| offsets.get(i).copied().unwrap_or(0);
        // The lanes' last symbols read no state bits, only their offsets, at the end.
        for (i, &s) in symbols.iter().enumerate().rev().take(start.len()) {
            chunks.push((offset(i), self.width(s)));
        }
        let mut x: Vec<u32> = start.iter().map(|&p| l + p).collect();
        for (i, &s) in symbols.iter().enumerate().rev().skip(start.len()) {
            // A symbol's offset bits follow its state bits in reading order.
            chunks.push((offset(i), self.width(s)));
            let set = self.set_at(symbols, i);
            let x = &mut x[i % self.lanes];
            let (k, low, next) = self.put(set, *x, s);
            chunks.push((low, k));
            *x = next;
        }
        for &x in x.iter().rev() {
            chunks.push((x - l, r));
        }
        let mut bits: Vec<bool> = Vec::new();
        for &(value, k) in chunks.iter().rev() {
            for b in 0..k {
                bits.push((value >> b) & 1 == 1);
            }
        }
        bits
    }

    /// rANS payload: the lanes' final states, then the renormalisation words in read order.
    fn encode_rans(&self, rans: &Rans, symbols: &[u16]) -> Vec<u8> {
        let n = rans.table_bits;
        let mut x = vec![u64::from(RANS_LOW); self.lanes];
        let mut words: Vec<u16> = Vec::new();
        for (i, &s) in symbols.iter().enumerate().rev() {
            let rans = self.rans_at(rans, symbols, i);
            let x = &mut x[i % self.lanes];
            let f = u64::from(rans.slots[usize::from(s)]);
            let c = u64::from(rans.cum[usize::from(s)]);
            if *x >= rans_bound(16, 16, n, f) {
                words.push(*x as u16);
                *x >>= 16;
            }
            *x = rans_code(*x, f, c, n);
        }
        let mut out = Vec::new();
        for &x in &x {
            out.extend_from_slice(&(x as u32).to_le_bytes());
        }
        for &w in words.iter().rev() {
            out.extend_from_slice(&w.to_le_bytes());
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
        self.decode_offsets(stream, limit)
            .map(|(symbols, _, used)| (symbols, used))
    }

    /// [`Reference::decode`] with each symbol's offset (zero for symbols without offset bits).
    pub fn decode_offsets(
        &self,
        stream: &[u8],
        limit: usize,
    ) -> std::result::Result<Decoded, StreamError> {
        let pos = match self.framing {
            Framing::Bare => return self.payload(stream, 0, limit),
            Framing::Tagged => {
                if stream.len() < 2 {
                    return Err(StreamError::Truncated);
                }
                if u16::from_le_bytes([stream[0], stream[1]]) != self.fingerprint {
                    return Err(StreamError::WrongCodec);
                }
                2
            }
            Framing::Compact => {
                let &check = stream.first().ok_or(StreamError::Truncated)?;
                if check != check_byte(self.fingerprint) {
                    return Err(StreamError::WrongCodec);
                }
                1
            }
        };
        let (count, pos) = read_count(stream, pos)?;
        if count > limit {
            return Err(StreamError::TooLong);
        }
        self.payload(stream, pos, count)
    }

    /// Bare streams report every failure of their end checks as a count mismatch: nothing
    /// else in them tells a wrong count from damage.
    fn bare_or(&self, e: StreamError) -> StreamError {
        if self.framing == Framing::Bare {
            StreamError::CountMismatch
        } else {
            e
        }
    }

    fn payload(
        &self,
        stream: &[u8],
        pos: usize,
        count: usize,
    ) -> std::result::Result<Decoded, StreamError> {
        match self.tables {
            Tables::Tans(t) => self.payload_tans(t, stream, pos, count),
            Tables::Rans(r) => self.payload_rans(r, stream, pos, count).map(|(s, used)| {
                let offsets = vec![0; s.len()];
                (s, offsets, used)
            }),
        }
    }

    /// Decodes `count` symbols from the tANS payload at `stream[pos..]`.
    fn payload_tans(
        &self,
        tans: &Tans,
        stream: &[u8],
        pos: usize,
        count: usize,
    ) -> std::result::Result<Decoded, StreamError> {
        let r = tans.table_bits;
        let payload = &stream[pos..];
        let bit = |i: usize| -> bool {
            payload
                .get(i / 8)
                .is_some_and(|&byte| (byte >> (i % 8)) & 1 == 1)
        };
        let mut at = 0;
        let mut read = |k: u32| -> u32 {
            let mut v = 0;
            for b in 0..k {
                v |= u32::from(bit(at)) << b;
                at += 1;
            }
            v
        };
        let used = count.min(self.lanes);
        let mut state: Vec<usize> = (0..used).map(|_| read(r) as usize).collect();
        let mut out = Vec::with_capacity(count.min(1 << 20));
        let mut offsets = Vec::with_capacity(count.min(1 << 20));
        for i in 0..count {
            let set = self.set_at(&out, i);
            let state = &mut state[i % self.lanes];
            let s = set.tans.spread[*state];
            out.push(s);
            // A lane's last symbol is its final state's: no state bits after it.
            if i + self.lanes < count {
                let o = set.number[*state];
                let k = r - (31 - o.leading_zeros());
                *state = (((o << k) | read(k)) - (1u32 << r)) as usize;
            }
            offsets.push(read(self.width(s)));
        }
        let len = payload.len() * 8;
        if self.framing == Framing::Tagged {
            // The stream ends at the byte of the last bit read, in zero padding.
            if at > len {
                return Err(StreamError::Truncated);
            }
            if (at..at.div_ceil(8) * 8).any(bit) {
                return Err(StreamError::Corrupt);
            }
            return Ok((out, offsets, pos + at.div_ceil(8)));
        }
        // Compact and bare: the payload runs to the end of the stream, its trailing zeros
        // left out: every byte was reached, no more than `PAST_END_BITS` were read past
        // the end, and the bits after the last one read are zero.
        if at + 8 <= len {
            return Err(self.bare_or(StreamError::TrailingBytes));
        }
        if at > len + PAST_END_BITS {
            return Err(self.bare_or(StreamError::Truncated));
        }
        if (at..len).any(bit) {
            return Err(self.bare_or(StreamError::Corrupt));
        }
        Ok((out, offsets, stream.len()))
    }

    /// Decodes `count` symbols from the rANS payload at `stream[pos..]`.
    fn payload_rans(
        &self,
        rans: &Rans,
        stream: &[u8],
        pos: usize,
        count: usize,
    ) -> std::result::Result<(Vec<u16>, usize), StreamError> {
        let n = rans.table_bits;
        let payload = &stream[pos..];
        let first = 4 * self.lanes;
        if payload.len() < first {
            return Err(self.bare_or(StreamError::Truncated));
        }
        let mut x: Vec<u64> = payload[..first]
            .chunks(4)
            .map(|w| u64::from(u32::from_le_bytes([w[0], w[1], w[2], w[3]])))
            .collect();
        if x.iter().any(|&x| x < u64::from(RANS_LOW)) {
            return Err(self.bare_or(StreamError::Corrupt));
        }
        let mut at = first;
        let mut out = Vec::with_capacity(count.min(1 << 20));
        for i in 0..count {
            let rans = self.rans_at(rans, &out, i);
            let x = &mut x[i % self.lanes];
            let (s, next) = rans_uncode(*x, &rans.slots, &rans.cum, n);
            *x = next;
            if *x < u64::from(RANS_LOW) {
                let lo = payload.get(at).copied().unwrap_or(0);
                let hi = payload.get(at + 1).copied().unwrap_or(0);
                *x = (*x << 16) | u64::from(u16::from_le_bytes([lo, hi]));
                at += 2;
            }
            out.push(s as u16);
        }
        if at > payload.len() {
            return Err(self.bare_or(StreamError::Truncated));
        }
        if x.iter().any(|&x| x != u64::from(RANS_LOW)) {
            return Err(self.bare_or(StreamError::Corrupt));
        }
        // Compact and bare streams end at the end of the stream.
        if self.framing != Framing::Tagged && at < payload.len() {
            return Err(self.bare_or(StreamError::TrailingBytes));
        }
        Ok((out, pos + at))
    }
}

/// Decoded symbols, their offsets, and the bytes the stream took.
pub type Decoded = (Vec<u16>, Vec<u32>, usize);

/// Bytes of the header of a stream of `symbols` symbols.
pub fn header_len(framing: Framing, symbols: usize) -> usize {
    match framing {
        Framing::Tagged => 2 + leb128(symbols as u64).len(),
        Framing::Compact => 1 + leb128(symbols as u64).len(),
        Framing::Bare => 0,
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
    /// Payload bits (no header; padding included).
    pub payload_bits: u64,
}

/// Symbols of training data round-tripped as one stream: longer sequences go in several,
/// so that the reference coder's memory stays bounded whatever the sample's size.
pub const VERIFY_STREAM: usize = 1 << 20;

/// Round-trips every training sequence through the reference coder.
pub fn verify(
    sets: &[Tables],
    set_of: &[u8],
    fingerprint: u16,
    framing: Framing,
    lanes: u32,
    model: &Model,
    widths: Vec<u32>,
) -> Result<Verified> {
    let Some(tables) = sets.first() else {
        return Err(Error::internal("verify: no table set"));
    };
    let mut coder = Reference::framed(tables, fingerprint, framing, lanes).with_widths(widths);
    if !set_of.is_empty() {
        coder = coder.with_contexts(sets, set_of.to_vec());
    }
    let mut v = Verified::default();
    for seq in &model.sequences {
        let empty: &[u16] = &[];
        let pieces = seq.symbols.chunks(VERIFY_STREAM);
        let pieces: Vec<&[u16]> = if seq.symbols.is_empty() {
            vec![empty]
        } else {
            pieces.collect()
        };
        for (k, piece) in pieces.into_iter().enumerate() {
            let at = k * VERIFY_STREAM;
            // Codecs without offset bits have offsets of zero.
            let offsets: Vec<u32> = (at..at + piece.len())
                .map(|i| seq.offsets.get(i).copied().unwrap_or(0))
                .collect();
            let stream = coder.encode_offsets(piece, &offsets);
            let decoded = coder.decode_offsets(&stream, piece.len());
            match decoded {
                Ok((symbols, o, used))
                    if symbols == piece && o == offsets && used == stream.len() => {}
                other => {
                    return Err(Error::internal(format!(
                        "the tables failed to round-trip {} ({} symbols): {:?}",
                        seq.origin,
                        piece.len(),
                        other.map(|(s, _, used)| (s.len(), used))
                    )))
                }
            }
            let header = header_len(framing, piece.len());
            v.symbols += piece.len() as u64;
            v.stream_bytes += stream.len() as u64;
            v.payload_bits += (stream.len() - header) as u64 * 8;
        }
        v.sequences += 1;
    }
    Ok(v)
}

/// The LEB128 symbol count at `stream[pos..]` and the position after it.
fn read_count(stream: &[u8], mut pos: usize) -> std::result::Result<(usize, usize), StreamError> {
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
    Ok((count, pos))
}
