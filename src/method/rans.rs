//! rANS, range ANS (Duda, arXiv:1311.2540; streaming form as in Giesen, "rANS notes", 2014):
//! a 32-bit state renormalised in 16-bit words, with division-free encoding. This file owns
//! the slots' cumulative layout, the encoding record, the reciprocals and the table layout;
//! the emitted functions are in `emit/rans.rs`. The rate is the slots' own cost: a 32-bit
//! state adds under 10^-4 bits per symbol at table_bits <= 12 (`tests/rans_precision.rs`).

use super::Direction::{Decode, Encode};
use super::{LayoutEntry, TableLayout};
use crate::error::{Error, Result};
use crate::spec::Lookup;

/// rANS with a 32-bit state `x` in `[L, 2^16 L)`, `L = 2^16`, renormalised in 16-bit words
/// (Duda, arXiv:1311.2540; streaming form as in Giesen, "rANS notes", 2014). Slots are the
/// frequencies `f_s`, `M = 2^table_bits` their sum, `c_s` the cumulative counts.
#[derive(Debug, Clone)]
pub struct Rans {
    pub table_bits: u32,
    pub slots: Vec<u32>,
    /// `c_s`: slots of the symbols before `s`, in alphabet order; `ALPHABET_LEN + 1` entries.
    pub cum: Vec<u32>,
}

/// Lower end of the rANS state interval.
pub const RANS_LOW: u32 = 1 << 16;

/// How the encoder puts one symbol into the state: a record per symbol, no division at run
/// time. The step is `C(s, x) = x + c_s + floor(x / f_s) * (M - f_s)` (Duda's coding function
/// rewritten with `x mod f = x - f floor(x / f)`), the quotient by a reciprocal.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Put {
    /// `m` of the reciprocal: `floor(x / f) = (x + (x * m >> 32)) >> shift` for every u32 `x`.
    pub reciprocal: u32,
    /// Largest state from which the symbol is put without first writing a word:
    /// `f_s << (32 - table_bits)`, minus one.
    pub ceiling: u32,
    /// `c_s`, where the symbol's slots start.
    pub start: u32,
    /// `M - f_s`, the slots of the other symbols.
    pub gap: u32,
    pub shift: u32,
}

/// Round-up reciprocal of `f` for 32-bit dividends (Alverson, "Integer Division Using
/// Reciprocals", IEEE ARITH 1991; Granlund & Montgomery, PLDI 1994, from memory):
/// `r = ceil(2^(32+s) / f)` with `s = ceil(log2 f)`, stored as `m = r - 2^32`, so that
/// `floor(x / f) = (x * r) >> (32 + s) = (x + (x * m >> 32)) >> s` in 64-bit arithmetic.
/// Exact for all `x < 2^32` because `r * f - 2^(32+s) < f <= 2^s`.
pub fn reciprocal(f: u32) -> (u32, u32) {
    assert!((1..=1 << 16).contains(&f), "frequency out of range");
    let s = 32 - (f - 1).leading_zeros();
    let r = (1u128 << (32 + s)).div_ceil(u128::from(f));
    ((r - (1u128 << 32)) as u32, s)
}

/// `floor(x / f)` by the reciprocal of [`reciprocal`], as the generated encoder computes it.
pub fn divide(x: u32, multiplier: u32, shift: u32) -> u32 {
    let x = u64::from(x);
    ((x + ((x * u64::from(multiplier)) >> 32)) >> shift) as u32
}

/// The rANS coding function `C(s, x) = M floor(x / f) + c + (x mod f)` with `M = 2^table_bits`
/// (Duda, arXiv:1311.2540), in plain arithmetic.
pub fn rans_code(x: u64, f: u64, c: u64, table_bits: u32) -> u64 {
    ((x / f) << table_bits) + c + x % f
}

/// Its inverse `D(x) = (s, f floor(x / M) + (x mod M) - c)`, where `s` owns slot `x mod M`.
pub fn rans_uncode(x: u64, slots: &[u32], cum: &[u32], table_bits: u32) -> (usize, u64) {
    let slot = (x & ((1 << table_bits) - 1)) as u32;
    let s = cum.partition_point(|&c| c <= slot) - 1;
    let next = u64::from(slots[s]) * (x >> table_bits) + u64::from(slot - cum[s]);
    (s, next)
}

/// The streaming renormalisation bound `(L / M) b f` (Duda, arXiv:1311.2540): the encoder
/// sheds a word while `x >=` this. Here `L = 2^low_bits`, `b = 2^word_bits`.
pub fn rans_bound(low_bits: u32, word_bits: u32, table_bits: u32, f: u64) -> u64 {
    (1u64 << (low_bits - table_bits + word_bits)) * f
}

impl Rans {
    pub fn new(slots: &[u32], table_bits: u32) -> Result<Rans> {
        let mut cum = Vec::with_capacity(slots.len() + 1);
        let mut total = 0u32;
        cum.push(0);
        for &f in slots {
            if f == 0 {
                return Err(Error::internal("a symbol has no slots"));
            }
            total += f;
            cum.push(total);
        }
        if total != 1 << table_bits {
            return Err(Error::internal("slots do not fill the table"));
        }
        Ok(Rans {
            table_bits,
            slots: slots.to_vec(),
            cum,
        })
    }

    pub fn put(&self, s: usize) -> Put {
        let f = self.slots[s];
        let (reciprocal, shift) = reciprocal(f);
        Put {
            reciprocal,
            ceiling: ((u64::from(f) << (32 - self.table_bits)) - 1) as u32,
            start: self.cum[s],
            gap: (1 << self.table_bits) - f,
            shift,
        }
    }

    /// A lower bound on what one symbol costs, in 1/1024 bits, for refusing a count the
    /// payload cannot hold (0: none). A decode step shrinks `log2 x` by at least
    /// `log2(M / f_max) - log2(1 + M / L)` (the step is `x' < f (x / M + 1)` and `x >= L`);
    /// floored and less one, so that rounding never makes it too large.
    pub fn min_cost_1024(&self) -> u64 {
        let m = f64::from(1u32 << self.table_bits);
        let f_max = self.slots.iter().copied().max().unwrap_or(1);
        let bits = crate::quantize::log2(m / f64::from(f_max))
            - crate::quantize::log2(1.0 + m / f64::from(RANS_LOW));
        let cost = (bits * 1024.0).floor() - 1.0;
        if cost >= 1.0 {
            cost as u64
        } else {
            0
        }
    }

    /// The emitted tables (see [`layout`]).
    pub fn layout(
        &self,
        lookup: Lookup,
        symbol_bytes: usize,
        put_rows: usize,
        absent: bool,
    ) -> TableLayout {
        layout(
            lookup,
            self.table_bits,
            self.slots.len(),
            symbol_bytes,
            put_rows,
            absent,
        )
    }

    /// Symbol owning `slot`.
    pub fn symbol_at(&self, slot: u32) -> usize {
        self.cum.partition_point(|&c| c <= slot) - 1
    }
}

/// The emitted tables at `table_bits` for `symbols` symbols: `symbol_bytes` is the size of
/// the generated `Symbol`, `put_rows` the rows of the encoding table, `absent` whether those
/// rows carry an absent flag. It depends on sizes only, so that sizes can be weighed before
/// any table is built.
pub fn layout(
    lookup: Lookup,
    table_bits: u32,
    symbols: usize,
    symbol_bytes: usize,
    put_rows: usize,
    absent: bool,
) -> TableLayout {
    let mut put = vec![4, 4, 2, 2, 1];
    if absent {
        put.push(1);
    }
    let find = match lookup {
        Lookup::Table => LayoutEntry::new(
            "DECODE",
            "Step",
            1 << table_bits,
            &[symbol_bytes, 2, 4],
            Decode,
        ),
        Lookup::Search => LayoutEntry::new("CUM", "u16", symbols + 1, &[2], Decode),
    };
    TableLayout {
        tables: vec![
            find,
            LayoutEntry::new("PUTS", "Put", put_rows, &put, Encode),
        ],
    }
}
