//! tANS, table-driven ANS (Duda, "Asymmetric numeral systems", arXiv:0902.0271, and
//! arXiv:1311.2540). States are `x` in `[L, 2L)`, `L = 2^table_bits`; table position `i` is
//! state `L + i`. The spread puts `q_s` copies of each symbol `s` in the table; the copies of
//! `s`, left to right, are numbered `q_s .. 2q_s - 1` (the symbol's own small states).
//!
//! Decoding at position `i` (symbol `s`, number `o`): emit `s`, read `k = table_bits -
//! floor(log2 o)` bits `b`, go to state `(o << k) + b`. Encoding `s` from state `x` is the
//! inverse: write the low `k` bits of `x` where `x >> k` lands in `[q_s, 2q_s)`, then go to the
//! position of copy number `x >> k` of `s`.
//!
//! This file owns the tables, the spreads, the encoding record and the table layout; the
//! exact rate is in `rate.rs`, the emitted functions in `emit/tans.rs`.

use super::rate::Chain;
use super::Direction::{Decode, Encode};
use super::{LayoutEntry, TableLayout};
use crate::error::{Error, Result};
use crate::quantize::ln;

/// How the symbols were laid out in the table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpreadRule {
    /// Copy `j` of `s` sorted by `(j + 1/2) / q_s`: evenly spaced by the slots.
    Even,
    /// Copy number `o` of `s` sorted by `1 / (p_s · ln(1 + 1/o))`, the state at which `o`
    /// is the ideal successor for the symbol's true probability `p_s` (not the rounded one).
    Tuned,
    /// Walk the table with one odd step ([`stride_step`]: the step whose fraction of the table
    /// has the smallest continued-fraction quotients, nearest `L/φ` among those) and lay each
    /// symbol's copies consecutively along the walk, in alphabet order.
    Stride,
    /// Given explicitly (tests, and anyone reproducing a published table).
    Given,
}

impl SpreadRule {
    pub fn describe(self) -> &'static str {
        match self {
            SpreadRule::Even => "even (copies spaced by their slot share)",
            SpreadRule::Tuned => "tuned (copies placed for the true probabilities)",
            SpreadRule::Stride => "stride (odd step with small continued-fraction quotients)",
            SpreadRule::Given => "given",
        }
    }
}

/// One decode table entry: what position `i` emits and where it goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DecodeEntry {
    /// Symbol index in alphabet order.
    pub symbol: u16,
    /// Bits to read after emitting.
    pub bits: u8,
    /// Next position before the read bits are added: `(o << bits) - L`.
    pub base: u32,
}

/// How the encoder puts one symbol into the state: a record per symbol. The arithmetic is
/// Duda's tANS encoding step (arXiv:1311.2540, from memory): the bit count is the top of
/// `x + spend`, and the next state is found in the symbol's run of `next_state`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Put {
    /// Bits written from state `x`: `(x + spend) >> (table_bits + 1)`, wrapping u32 arithmetic.
    pub spend: u32,
    /// Copy number `o` of this symbol sits at `next_state[(o + run) mod L]`: the start of the
    /// symbol's run, less its slot count.
    pub run: u16,
}

/// A finished tANS table set.
#[derive(Debug, Clone)]
pub struct Tans {
    pub table_bits: u32,
    pub slots: Vec<u32>,
    pub spread_rule: SpreadRule,
    /// Symbol index at each table position.
    pub spread: Vec<u16>,
    pub decode: Vec<DecodeEntry>,
    pub puts: Vec<Put>,
    /// For each symbol in turn, the states `L + i` of its copies in order: `L` entries in all.
    pub next_state: Vec<u16>,
}

impl Tans {
    pub fn table_len(&self) -> usize {
        1usize << self.table_bits
    }

    /// Bits the encoder writes for `symbol` from state `x` in `[L, 2L)`.
    pub fn encode_bits(&self, symbol: usize, x: u32) -> u32 {
        x.wrapping_add(self.puts[symbol].spend) >> (self.table_bits + 1)
    }

    /// State after encoding `symbol` from state `x`, with the bit count written.
    pub fn encode_step(&self, symbol: usize, x: u32) -> (u32, u32) {
        let k = self.encode_bits(symbol, x);
        let o = x >> k;
        let mask = (1u32 << self.table_bits) - 1;
        let index = (o + u32::from(self.puts[symbol].run)) & mask;
        (u32::from(self.next_state[index as usize]), k)
    }
}

/// Largest table whose next states fit a byte (states are `L .. 2L`).
pub const NARROW_NEXT_TABLE_BITS: u32 = 7;

/// Largest table whose [`Put::spend`] plus a state fits 16 bits
/// (`x + spend < (table_bits + 1) << (table_bits + 1)`): `spend` and `run` then share one
/// 32-bit entry, and the sum never carries into `run`.
pub const NARROW_SPEND_TABLE_BITS: u32 = 11;

impl Tans {
    /// Bytes of a `next_state` entry.
    pub fn next_bytes(&self) -> usize {
        next_bytes(self.table_bits)
    }

    /// Whether [`Put::spend`] and [`Put::run`] share one 32-bit entry (`spend` low).
    pub fn joined_put(&self) -> bool {
        joined_put(self.table_bits)
    }

    /// The longest run of symbols one lane can decode without reading a bit, or `None` when
    /// some run never ends (a cycle of zero-bit steps: a symbol owning more than half the
    /// table can be that cheap for ever). With it, a decoder refuses a count its payload
    /// cannot hold before decoding anything.
    pub fn zero_run(&self) -> Option<usize> {
        // run(i) = 0 if position i reads bits, else 1 + run(next(i)), where a zero-bit step
        // goes to position `base`. Resolved along each chain; a chain that comes back to a
        // position still being resolved is a cycle.
        const OPEN: usize = usize::MAX;
        let l = self.decode.len();
        let mut run: Vec<Option<usize>> = vec![None; l];
        let mut marks = vec![0usize; l];
        let mut longest = 0;
        for start in 0..l {
            let mut chain = Vec::new();
            let mut i = start;
            let mut tail = loop {
                if let Some(r) = run[i] {
                    break r;
                }
                if self.decode[i].bits > 0 {
                    run[i] = Some(0);
                    break 0;
                }
                if marks[i] == OPEN {
                    return None;
                }
                marks[i] = OPEN;
                chain.push(i);
                i = self.decode[i].base as usize;
            };
            for &j in chain.iter().rev() {
                tail += 1;
                run[j] = Some(tail);
                marks[j] = 0;
            }
            longest = longest.max(tail);
        }
        Some(longest)
    }

    /// How a decode step is packed in `STEPS`: the base in the low bits, the bit count from
    /// this bit on. 16-bit entries up to 2^12 slots, 32-bit above.
    pub fn step_shift(&self) -> u32 {
        step_shift(self.table_bits)
    }

    /// The emitted tables (see [`layout`]).
    pub fn layout(&self, symbol_bytes: usize, put_rows: usize) -> TableLayout {
        layout(self.table_bits, symbol_bytes, put_rows)
    }
}

fn next_bytes(table_bits: u32) -> usize {
    if table_bits <= NARROW_NEXT_TABLE_BITS {
        1
    } else {
        2
    }
}

fn joined_put(table_bits: u32) -> bool {
    table_bits <= NARROW_SPEND_TABLE_BITS
}

fn step_shift(table_bits: u32) -> u32 {
    if table_bits <= 12 {
        12
    } else {
        16
    }
}

/// The emitted tables at `table_bits`: `symbol_bytes` is the size of the generated `Symbol`,
/// `put_rows` the rows of the encoding tables. It depends on sizes only, so that sizes can
/// be weighed before any table is built. An entry is what one step of a hot loop reads, so
/// that it costs the fewest loads from the fewest base registers (32-bit cores have few)
/// and carries no padding. Decode: the symbol, and the step packed in one integer, each one
/// load by position. Encode: `spend | run << 16` in 4 bytes (larger tables split them).
pub fn layout(table_bits: u32, symbol_bytes: usize, put_rows: usize) -> TableLayout {
    let l = 1usize << table_bits;
    let step = if step_shift(table_bits) == 12 { 2 } else { 4 };
    let mut tables = vec![
        LayoutEntry::new("SYMBOLS", "Symbol", l, &[symbol_bytes], Decode),
        LayoutEntry::new("STEPS", "step", l, &[step], Decode),
    ];
    if joined_put(table_bits) {
        tables.push(LayoutEntry::new(
            "PUT",
            "[u8; 4]",
            put_rows,
            &[1, 1, 1, 1],
            Encode,
        ));
    } else {
        tables.push(LayoutEntry::new("SPEND", "u32", put_rows, &[4], Encode));
        tables.push(LayoutEntry::new("RUN", "u16", put_rows, &[2], Encode));
    }
    tables.push(LayoutEntry::new(
        "NEXT_STATE",
        "state",
        l,
        &[next_bytes(table_bits)],
        Encode,
    ));
    TableLayout { tables }
}

/// Builds the tables for `slots` (summing to `2^table_bits`) and the training probabilities,
/// trying every spread rule and keeping the one with the lowest rate (ranked after a few
/// rounds of the chain; the winner's rate is then solved exactly).
pub fn build(slots: &[u32], probabilities: &[f64], table_bits: u32) -> Result<(Tans, f64)> {
    let mut best: Option<(Tans, Chain, f64)> = None;
    for rule in [SpreadRule::Tuned, SpreadRule::Even, SpreadRule::Stride] {
        let spread = spread(rule, slots, probabilities, table_bits);
        // A candidate that cannot be built is skipped: another rule still gives a table.
        let Ok(tans) = from_spread(slots, spread, rule, table_bits) else {
            continue;
        };
        let mut chain = Chain::new(&tans, probabilities);
        chain.settle(super::rate::WARM_ROUNDS);
        let rate = chain.rate();
        // Strictly lower only: ties keep the earlier rule, so the choice is deterministic.
        if best.as_ref().is_none_or(|(_, _, r)| rate < *r) {
            best = Some((tans, chain, rate));
        }
    }
    let (tans, mut chain, _) =
        best.ok_or_else(|| Error::internal("no spread rule produced a table"))?;
    chain.refine();
    let rate = chain.rate();
    Ok((tans, rate))
}

/// Lays out the symbols by `rule`.
pub fn spread(rule: SpreadRule, slots: &[u32], p: &[f64], table_bits: u32) -> Vec<u16> {
    let l = 1usize << table_bits;
    match rule {
        SpreadRule::Stride => {
            let step = stride_step(table_bits);
            let mask = l - 1;
            let mut table = vec![0u16; l];
            let mut pos = 0usize;
            for (s, &q) in slots.iter().enumerate() {
                for _ in 0..q {
                    table[pos] = s as u16;
                    pos = (pos + step) & mask;
                }
            }
            table
        }
        SpreadRule::Even => {
            // Sort copies by (2j+1)/q_s, compared exactly as (2j+1)·q_t against (2k+1)·q_s.
            let mut copies: Vec<(u64, u64, u16)> = Vec::with_capacity(l);
            for (s, &q) in slots.iter().enumerate() {
                for j in 0..q {
                    copies.push((2 * u64::from(j) + 1, u64::from(q), s as u16));
                }
            }
            copies.sort_by(|a, b| (a.0 * b.1).cmp(&(b.0 * a.1)).then(a.2.cmp(&b.2)));
            copies.into_iter().map(|c| c.2).collect()
        }
        SpreadRule::Tuned => {
            let mut copies: Vec<(f64, u16)> = Vec::with_capacity(l);
            for (s, &q) in slots.iter().enumerate() {
                // A symbol never seen in training keeps its rounded share.
                let ps = if p[s] > 0.0 {
                    p[s]
                } else {
                    f64::from(q) / l as f64
                };
                for o in q..2 * q {
                    let o = f64::from(o);
                    copies.push((1.0 / (ps * ln(1.0 + 1.0 / o)), s as u16));
                }
            }
            copies.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            copies.into_iter().map(|c| c.1).collect()
        }
        // A given spread comes from the caller (`from_spread`); there is nothing to lay out.
        SpreadRule::Given => Vec::new(),
    }
}

/// The step of [`SpreadRule::Stride`] for a table of `L = 2^table_bits`: among the odd `t` in
/// `1..L` (odd, so coprime with `L`, and the walk `0, t, 2t, … mod L` visits every position
/// once), the one whose continued fraction `t/L = [0; a_1, a_2, …]` has the smallest largest
/// quotient `a_i`, and among those the one nearest `L/φ`.
///
/// Why: the walk gives symbol `s` the positions of `q_s` consecutive multiples of `t`. By the
/// three-distance theorem (Sós, Ann. Univ. Sci. Budapest 1, 1958; Świerczkowski, Fund. Math.
/// 46, 1959; from memory) these cut the circle into gaps of at most three lengths, and how
/// unequal they are, for runs of every length, is bounded through the quotients `a_i` (the
/// discrepancy of `n·t/L mod 1`; Kuipers & Niederreiter, *Uniform Distribution of Sequences*,
/// 1974, ch. 2; from memory). Small quotients spread every symbol's copies evenly over the
/// states, which is what keeps the rate low: they are the classic test of a good
/// two-dimensional lattice point (Zaremba's), and Niederreiter ("Dyadic fractions with small
/// partial quotients", Monatsh. Math. 101, 1986; from memory) showed every power of two has an
/// odd `t` with all `a_i <= 3` (`tests/spread.rs` checks it for every size here). Ties go to the
/// step nearest `L/φ`, the Fibonacci-hashing step (Knuth, *The Art of Computer Programming*
/// vol. 3, §6.4; from memory), whose leading quotients are ones, so that short runs are spread
/// best. The plain odd step nearest `L/φ` has quotients up to 24 at `L = 2^9` and 29 at
/// `2^11`, and there codes at about three times the excess of this one.
/// `examples/spread_rates.rs` measures the exact rates: over ten textbook and real sources at
/// `2^3 ..= 2^12`, this step's excess over the entropy is 3.36 times the tuned spread's
/// (geometric mean), the plain `L/φ` step's 4.72, the best other step tried 3.59.
///
/// `O(L log L)` integer steps, with an early exit once a quotient exceeds the best so far.
pub fn stride_step(table_bits: u32) -> usize {
    let l = 1u64 << table_bits;
    if l <= 2 {
        return 1;
    }
    // Largest quotient of t/l, or `None` as soon as one exceeds `bound`.
    let largest = |t: u64, bound: u64| {
        let (mut a, mut b, mut m) = (l, t, 0);
        while b != 0 {
            m = m.max(a / b);
            if m > bound {
                return None;
            }
            (a, b) = (b, a % b);
        }
        Some(m)
    };
    let (mut best, mut best_quotient) = (1u64, l);
    let mut t = 3;
    while t < l {
        if let Some(m) = largest(t, best_quotient) {
            // t > best; t is nearer L/φ = L(√5 - 1)/2 iff t + best < L(√5 - 1), that is
            // (t + best + L)^2 < 5·L^2 (exact: L/φ is irrational, so there are no ties).
            if m < best_quotient || (t + best + l).pow(2) < 5 * l * l {
                best = t;
                best_quotient = m;
            }
        }
        t += 2;
    }
    best as usize
}

/// Builds decode and encode tables from a finished spread.
pub fn from_spread(
    slots: &[u32],
    spread: Vec<u16>,
    rule: SpreadRule,
    table_bits: u32,
) -> Result<Tans> {
    let l = 1usize << table_bits;
    let total: u64 = slots.iter().map(|&q| u64::from(q)).sum();
    if spread.len() != l || total != l as u64 || slots.contains(&0) {
        return Err(Error::internal(format!(
            "tables: {} positions and {total} slots for a table of {l}",
            spread.len()
        )));
    }
    let mut seen = vec![0u32; slots.len()];
    for &s in &spread {
        match seen.get_mut(usize::from(s)) {
            Some(c) => *c += 1,
            None => return Err(Error::internal(format!("tables: spread holds symbol {s}"))),
        }
    }
    if seen != slots {
        return Err(Error::internal("tables: spread does not match the slots"));
    }

    let mut first = vec![0u32; slots.len()];
    let mut acc = 0u32;
    for (f, &q) in first.iter_mut().zip(slots) {
        *f = acc;
        acc += q;
    }
    let mut number: Vec<u32> = slots.to_vec();
    let mut decode = Vec::with_capacity(l);
    let mut next_state = vec![0u16; l];
    for (i, &s) in spread.iter().enumerate() {
        let s_ix = usize::from(s);
        let o = number[s_ix];
        number[s_ix] += 1;
        let bits = table_bits - (31 - o.leading_zeros());
        decode.push(DecodeEntry {
            symbol: s,
            bits: bits as u8,
            base: (o << bits) - l as u32,
        });
        next_state[(first[s_ix] + o - slots[s_ix]) as usize] = (l + i) as u16;
    }
    let puts = slots
        .iter()
        .zip(&first)
        .map(|(&q, &f)| {
            let top = 31 - q.leading_zeros(); // floor(log2 q)
            let k0 = table_bits - top;
            // A symbol owning the whole table writes no bits: spend 0 gives that for every
            // state, and keeps `spend` small (the formula would give -L).
            let spend = if k0 == 0 {
                0
            } else {
                (k0 << (table_bits + 1)) - (q << k0)
            };
            let run = (f.wrapping_sub(q) & (l as u32 - 1)) as u16;
            Put { spend, run }
        })
        .collect();
    Ok(Tans {
        table_bits,
        slots: slots.to_vec(),
        spread_rule: rule,
        spread,
        decode,
        puts,
        next_state,
    })
}
