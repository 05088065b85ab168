//! Stage 4: tANS tables (Duda, "Asymmetric numeral systems", arXiv:0902.0271, and
//! arXiv:1311.2540). States are `x` in `[L, 2L)`, `L = 2^scale_bits`; table position `i` is
//! state `L + i`. The spread puts `q_s` copies of each symbol `s` in the table; the copies of
//! `s`, left to right, are numbered `q_s .. 2q_s - 1` (the symbol's own small states).
//!
//! Decoding at position `i` (symbol `s`, number `o`): emit `s`, read `k = scale_bits -
//! floor(log2 o)` bits `b`, go to state `(o << k) + b`. Encoding `s` from state `x` is the
//! inverse: write the low `k` bits of `x` where `x >> k` lands in `[q_s, 2q_s)`, then go to the
//! position of copy number `x >> k` of `s`.

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
    /// Walk the table with a fixed odd step `L/2 + L/8 + 3`, the scattering rule of Duda's
    /// arXiv:1311.2540 section on tANS (from memory).
    Stride,
    /// Given explicitly (tests, and anyone reproducing a published table).
    Given,
}

impl SpreadRule {
    pub fn describe(self) -> &'static str {
        match self {
            SpreadRule::Even => "even (copies spaced by their slot share)",
            SpreadRule::Tuned => "tuned (copies placed for the true probabilities)",
            SpreadRule::Stride => "stride (fixed odd step through the table)",
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
    pub base: u16,
}

/// Per-symbol encoding rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct EncodeRule {
    /// `bits = (x + bias) >> (scale_bits + 1)` (wrapping u32 arithmetic).
    pub bias: u32,
    /// Index of copy number `o` of this symbol in `next_state` is `(o + offset) mod L`.
    pub offset: u16,
}

/// A finished tANS table set.
#[derive(Debug, Clone)]
pub struct Tans {
    pub scale_bits: u32,
    pub slots: Vec<u32>,
    pub spread_rule: SpreadRule,
    /// Symbol index at each table position.
    pub spread: Vec<u16>,
    pub decode: Vec<DecodeEntry>,
    pub rules: Vec<EncodeRule>,
    /// For each symbol in turn, the states `L + i` of its copies in order: `L` entries in all.
    pub next_state: Vec<u16>,
}

impl Tans {
    pub fn table_len(&self) -> usize {
        1usize << self.scale_bits
    }

    /// Bits the encoder writes for `symbol` from state `x` in `[L, 2L)`.
    pub fn encode_bits(&self, symbol: usize, x: u32) -> u32 {
        x.wrapping_add(self.rules[symbol].bias) >> (self.scale_bits + 1)
    }

    /// State after encoding `symbol` from state `x`, with the bit count written.
    pub fn encode_step(&self, symbol: usize, x: u32) -> (u32, u32) {
        let k = self.encode_bits(symbol, x);
        let o = x >> k;
        let mask = (1u32 << self.scale_bits) - 1;
        let index = (o + u32::from(self.rules[symbol].offset)) & mask;
        (u32::from(self.next_state[index as usize]), k)
    }
}

/// Builds the tables for `slots` (summing to `2^scale_bits`) and the training probabilities,
/// trying every spread rule and keeping the one with the lowest exact rate.
pub fn build(slots: &[u32], probabilities: &[f64], scale_bits: u32) -> Result<(Tans, f64)> {
    let mut best: Option<(Tans, f64)> = None;
    for rule in [SpreadRule::Tuned, SpreadRule::Even, SpreadRule::Stride] {
        let spread = spread(rule, slots, probabilities, scale_bits);
        let tans = from_spread(slots, spread, rule, scale_bits)?;
        let rate = exact_rate(&tans, probabilities);
        // Strictly lower only: ties keep the earlier rule, so the choice is deterministic.
        if best.as_ref().is_none_or(|(_, r)| rate < *r) {
            best = Some((tans, rate));
        }
    }
    best.ok_or_else(|| Error::internal("no spread rule produced a table"))
}

/// Lays out the symbols by `rule`.
pub fn spread(rule: SpreadRule, slots: &[u32], p: &[f64], scale_bits: u32) -> Vec<u16> {
    let l = 1usize << scale_bits;
    match rule {
        SpreadRule::Stride => {
            let step = (l >> 1) + (l >> 3) + 3;
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
        SpreadRule::Given => Vec::new(),
    }
}

/// Builds decode and encode tables from a finished spread.
pub fn from_spread(
    slots: &[u32],
    spread: Vec<u16>,
    rule: SpreadRule,
    scale_bits: u32,
) -> Result<Tans> {
    let l = 1usize << scale_bits;
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
        let bits = scale_bits - (31 - o.leading_zeros());
        decode.push(DecodeEntry {
            symbol: s,
            bits: bits as u8,
            base: ((o << bits) - l as u32) as u16,
        });
        next_state[(first[s_ix] + o - slots[s_ix]) as usize] = (l + i) as u16;
    }
    let rules = slots
        .iter()
        .zip(&first)
        .map(|(&q, &f)| {
            let top = 31 - q.leading_zeros(); // floor(log2 q)
            let k0 = scale_bits - top;
            let bias = (k0 << (scale_bits + 1)).wrapping_sub(q << k0);
            let offset = (f.wrapping_sub(q) & (l as u32 - 1)) as u16;
            EncodeRule { bias, offset }
        })
        .collect();
    Ok(Tans {
        scale_bits,
        slots: slots.to_vec(),
        spread_rule: rule,
        spread,
        decode,
        rules,
        next_state,
    })
}

/// Exact expected code length in bits per symbol of `tans` for an i.i.d. source with
/// probabilities `p`: the average bit count under the stationary distribution of the
/// encoder's state chain.
///
/// The chain is iterated by pulling: state `y` (copy `o` of `s`, `k` bits) is entered exactly
/// from the `2^k` states `[o·2^k, (o+1)·2^k)`, so one step costs O(L) with prefix sums. The
/// half-lazy step `π ← (π + Pπ)/2` has the same stationary distribution and cannot oscillate.
pub fn exact_rate(tans: &Tans, p: &[f64]) -> f64 {
    let l = tans.table_len();
    let mut pi = vec![1.0 / l as f64; l];
    let mut next = vec![0.0; l];
    let mut prefix = vec![0.0; l + 1];
    let mut rate = 0.0;
    for round in 0..20_000 {
        for i in 0..l {
            prefix[i + 1] = prefix[i] + pi[i];
        }
        let mut r = 0.0;
        let mut change = 0.0;
        for (y, e) in tans.decode.iter().enumerate() {
            let lo = usize::from(e.base);
            let hi = lo + (1usize << e.bits);
            let inflow = p[usize::from(e.symbol)] * (prefix[hi] - prefix[lo]);
            r += inflow * f64::from(e.bits);
            let v = 0.5 * (pi[y] + inflow);
            change += (v - pi[y]).abs();
            next[y] = v;
        }
        // Renormalise against rounding drift.
        let sum: f64 = next.iter().sum();
        for v in &mut next {
            *v /= sum;
        }
        std::mem::swap(&mut pi, &mut next);
        let done = (r - rate).abs() < 1e-13 && change < 1e-12;
        rate = r;
        if done && round > 4 {
            break;
        }
    }
    rate
}
