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

/// rANS with a 32-bit state `x` in `[L, 2^16 L)`, `L = 2^16`, renormalised in 16-bit words
/// (Duda, arXiv:1311.2540; streaming form as in Giesen, "rANS notes", 2014). Slots are the
/// frequencies `f_s`, `M = 2^scale_bits` their sum, `c_s` the cumulative counts.
#[derive(Debug, Clone)]
pub struct Rans {
    pub scale_bits: u32,
    pub slots: Vec<u32>,
    /// `c_s`: slots of the symbols before `s`, in alphabet order; `ALPHABET_LEN + 1` entries.
    pub cum: Vec<u32>,
}

/// Lower end of the rANS state interval.
pub const RANS_LOW: u32 = 1 << 16;

/// Per-symbol rANS encoding constants: no division at run time.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RansRule {
    /// `m` of the reciprocal: `floor(x / f) = (x + (x * m >> 32)) >> shift` for every u32 `x`.
    pub multiplier: u32,
    pub shift: u32,
    /// Largest state from which `s` is encoded without first writing a word:
    /// `f_s << (32 - scale_bits)`, minus one.
    pub limit: u32,
    pub cum: u32,
    /// `M - f_s`: the encode step is `x + c_s + floor(x / f_s) * (M - f_s)`.
    pub complement: u32,
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

/// The rANS coding function `C(s, x) = M floor(x / f) + c + (x mod f)` with `M = 2^scale_bits`
/// (Duda, arXiv:1311.2540), in plain arithmetic.
pub fn rans_code(x: u64, f: u64, c: u64, scale_bits: u32) -> u64 {
    ((x / f) << scale_bits) + c + x % f
}

/// Its inverse `D(x) = (s, f floor(x / M) + (x mod M) - c)`, where `s` owns slot `x mod M`.
pub fn rans_uncode(x: u64, slots: &[u32], cum: &[u32], scale_bits: u32) -> (usize, u64) {
    let slot = (x & ((1 << scale_bits) - 1)) as u32;
    let s = cum.partition_point(|&c| c <= slot) - 1;
    let next = u64::from(slots[s]) * (x >> scale_bits) + u64::from(slot - cum[s]);
    (s, next)
}

/// The streaming renormalisation bound `(L / M) b f` (Duda, arXiv:1311.2540): the encoder
/// sheds a word while `x >=` this. Here `L = 2^low_bits`, `b = 2^word_bits`.
pub fn rans_bound(low_bits: u32, word_bits: u32, scale_bits: u32, f: u64) -> u64 {
    (1u64 << (low_bits - scale_bits + word_bits)) * f
}

impl Rans {
    pub fn new(slots: &[u32], scale_bits: u32) -> Result<Rans> {
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
        if total != 1 << scale_bits {
            return Err(Error::internal("slots do not fill the table"));
        }
        Ok(Rans {
            scale_bits,
            slots: slots.to_vec(),
            cum,
        })
    }

    pub fn rule(&self, s: usize) -> RansRule {
        let f = self.slots[s];
        let (multiplier, shift) = reciprocal(f);
        RansRule {
            multiplier,
            shift,
            limit: ((u64::from(f) << (32 - self.scale_bits)) - 1) as u32,
            cum: self.cum[s],
            complement: (1 << self.scale_bits) - f,
        }
    }

    /// Symbol owning `slot`.
    pub fn symbol_at(&self, slot: u32) -> usize {
        self.cum.partition_point(|&c| c <= slot) - 1
    }
}

/// The tables of either method.
#[derive(Debug, Clone)]
pub enum Tables {
    Tans(Tans),
    Rans(Rans),
}

impl Tables {
    pub fn slots(&self) -> &[u32] {
        match self {
            Tables::Tans(t) => &t.slots,
            Tables::Rans(r) => &r.slots,
        }
    }

    pub fn scale_bits(&self) -> u32 {
        match self {
            Tables::Tans(t) => t.scale_bits,
            Tables::Rans(r) => r.scale_bits,
        }
    }
}

/// Builds the tables for `slots` (summing to `2^scale_bits`) and the training probabilities,
/// trying every spread rule and keeping the one with the lowest rate (ranked after a few
/// rounds of the chain; the winner's rate is then solved exactly).
pub fn build(slots: &[u32], probabilities: &[f64], scale_bits: u32) -> Result<(Tans, f64)> {
    let mut best: Option<(Tans, Chain, f64)> = None;
    for rule in [SpreadRule::Tuned, SpreadRule::Even, SpreadRule::Stride] {
        let spread = spread(rule, slots, probabilities, scale_bits);
        let tans = from_spread(slots, spread, rule, scale_bits)?;
        let mut chain = Chain::new(&tans, probabilities);
        chain.settle(WARM_ROUNDS);
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
        // A given spread comes from the caller (`from_spread`); there is nothing to lay out.
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
/// probabilities `p`: the average bit count under the stationary distribution `π` of the
/// encoder's state chain `P = Σ_s p_s·T_s` (`T_s`: the deterministic step for symbol `s`).
///
/// Plain power iteration crawls when one symbol dominates: its step is close to a rotation of
/// `log2 x` and mixes only through the rare symbols. So we split off the most likely symbol
/// `d`: `π = π·R·(I - p_d·T_d)^-1` with `R = P - p_d·T_d`, and iterate that instead (the
/// chain watched only when a symbol other than `d` is coded). `(I - p_d·T_d)^-1` is applied
/// exactly in O(L) on the functional graph of `T_d` (trees in topological order, then each
/// cycle in closed form), and `R` by pulling: state `y` (copy `o` of `s`, `k` bits) is entered
/// from exactly the `2^k` states `[o·2^k, (o+1)·2^k)`, one prefix sum apiece.
pub fn exact_rate(tans: &Tans, p: &[f64]) -> f64 {
    let mut chain = Chain::new(tans, p);
    chain.settle(WARM_ROUNDS);
    chain.refine();
    chain.rate()
}

/// Rounds of plain iteration before candidate spreads are compared; enough to rank them
/// (the rates of different spreads differ far more than the error left after these rounds).
const WARM_ROUNDS: usize = 4;

/// The encoder's state chain of one table, with its stationary distribution being found.
/// Loops are plain index loops: this runs in unoptimised build scripts, where iterator
/// adaptors cost a call per element.
struct Chain {
    l: usize,
    /// Per position `y`: the range `[lo, hi)` of states that step into it, and its symbol's
    /// probability, zeroed for the dominant symbol in `weight_rest`.
    lo: Vec<usize>,
    hi: Vec<usize>,
    weight: Vec<f64>,
    weight_rest: Vec<f64>,
    bits: Vec<f64>,
    pd: f64,
    /// `T_d` as a map of positions.
    step: Vec<usize>,
    /// Positions off the cycles of `T_d`, each before its image.
    trees: Vec<usize>,
    /// The cycles of `T_d`, each in step order.
    cycles: Vec<Vec<usize>>,
    /// Average bits of the dominant symbol on the cycle the encoder falls into (for sources
    /// of one symbol only).
    cycle_bits: f64,
    pi: Vec<f64>,
    next: Vec<f64>,
    prefix: Vec<f64>,
}

impl Chain {
    fn new(tans: &Tans, p: &[f64]) -> Self {
        let l = tans.table_len();
        let mut dominant = 0usize;
        for s in 0..p.len() {
            if p[s] > p[dominant] {
                dominant = s;
            }
        }
        let n = tans.decode.len();
        let (mut lo, mut hi) = (vec![0usize; n], vec![0usize; n]);
        let (mut weight, mut weight_rest, mut bits) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        for y in 0..n {
            let e = tans.decode[y];
            lo[y] = usize::from(e.base);
            hi[y] = lo[y] + (1usize << e.bits);
            let s = usize::from(e.symbol);
            weight[y] = p[s];
            weight_rest[y] = if s == dominant { 0.0 } else { p[s] };
            bits[y] = f64::from(e.bits);
        }
        let mut step = vec![0usize; l];
        for (i, st) in step.iter_mut().enumerate() {
            *st = tans.encode_step(dominant, (l + i) as u32).0 as usize - l;
        }
        let mut indegree = vec![0u32; l];
        for &t in &step {
            indegree[t] += 1;
        }
        let mut trees: Vec<usize> = (0..l).filter(|&i| indegree[i] == 0).collect();
        let mut k = 0;
        while k < trees.len() {
            let t = step[trees[k]];
            indegree[t] -= 1;
            if indegree[t] == 0 {
                trees.push(t);
            }
            k += 1;
        }
        let mut cycles = Vec::new();
        for start in 0..l {
            let mut cycle = Vec::new();
            let mut i = start;
            while indegree[i] != 0 {
                indegree[i] = 0;
                cycle.push(i);
                i = step[i];
            }
            if !cycle.is_empty() {
                cycles.push(cycle);
            }
        }
        // The cycle reached from the encoder's first state, position 0.
        let mut seen = vec![false; l];
        let mut i = 0usize;
        while !seen[i] {
            seen[i] = true;
            i = step[i];
        }
        let (mut total, mut len, start) = (0u64, 0u64, i);
        loop {
            total += u64::from(tans.encode_bits(dominant, (l + i) as u32));
            len += 1;
            i = step[i];
            if i == start {
                break;
            }
        }
        // Start near the answer: states are visited roughly in proportion to 1/x.
        let mut pi: Vec<f64> = (0..l).map(|i| 1.0 / (l + i) as f64).collect();
        let sum: f64 = pi.iter().sum();
        for v in &mut pi {
            *v /= sum;
        }
        Chain {
            l,
            lo,
            hi,
            weight,
            weight_rest,
            bits,
            pd: p[dominant],
            step,
            trees,
            cycles,
            cycle_bits: total as f64 / len as f64,
            pi,
            next: vec![0.0; l],
            prefix: vec![0.0; l + 1],
        }
    }

    /// `out = v·A`: one step of the chain watched only between symbols other than the
    /// dominant one, `A = R·(I - p_d·T_d)^-1`.
    fn embedded(&self, v: &[f64], prefix: &mut [f64], out: &mut [f64]) {
        let l = self.l;
        let (lo, hi, w) = (&self.lo[..], &self.hi[..], &self.weight_rest[..]);
        let mut acc = 0.0;
        let mut i = 0;
        while i < l {
            acc += v[i];
            prefix[i + 1] = acc;
            i += 1;
        }
        let mut y = 0;
        while y < l {
            out[y] = w[y] * (prefix[hi[y]] - prefix[lo[y]]);
            y += 1;
        }
        // `w = out·(I - q·T_d)^-1`: w(y) = out(y) + q·Σ_{T_d(x) = y} w(x).
        let q = self.pd;
        let (trees, step) = (&self.trees[..], &self.step[..]);
        let mut k = 0;
        while k < trees.len() {
            let x = trees[k];
            out[step[x]] += q * out[x];
            k += 1;
        }
        for cycle in &self.cycles {
            // Around y_0 → y_1 → …: w_0 = (a_0 + q·a_{c-1} + … + q^{c-1}·a_1) / (1 - q^c).
            let (mut t, mut qc) = (0.0, q);
            let mut j = 1;
            while j < cycle.len() {
                t = out[cycle[j]] + q * t;
                qc *= q;
                j += 1;
            }
            let mut prev = (out[cycle[0]] + q * t) / (1.0 - qc);
            out[cycle[0]] = prev;
            let mut j = 1;
            while j < cycle.len() {
                prev = out[cycle[j]] + q * prev;
                out[cycle[j]] = prev;
                j += 1;
            }
        }
    }

    /// Plain half-lazy rounds `π ← (π + π·A)/2` (same fixed point, no oscillation).
    fn settle(&mut self, rounds: usize) {
        if self.pd >= 1.0 {
            return;
        }
        let mut pi = std::mem::take(&mut self.pi);
        let mut next = std::mem::take(&mut self.next);
        let mut prefix = std::mem::take(&mut self.prefix);
        for _ in 0..rounds {
            self.embedded(&pi, &mut prefix, &mut next);
            let mut sum = 0.0;
            let mut i = 0;
            while i < self.l {
                sum += next[i];
                i += 1;
            }
            let mut i = 0;
            while i < self.l {
                next[i] = 0.5 * (next[i] / sum + pi[i]);
                i += 1;
            }
            std::mem::swap(&mut pi, &mut next);
        }
        self.pi = pi;
        self.next = next;
        self.prefix = prefix;
    }

    /// Solves `π·(I - A) = 0, Σπ = 1` to rounding precision by GMRES (Saad & Schultz, SIAM J.
    /// Sci. Stat. Comput. 7(3), 1986) on `B·x = u`, `B x = x - x·A + u·Σx` with `u` uniform:
    /// nonsingular for an irreducible chain, and `π` is its solution. Plain rounds alone can
    /// take thousands of steps on nearly decomposable chains (near-dyadic sources); the
    /// Krylov solver needs a few dozen products. Bounded (2 restarts of 12 products) so that
    /// generation stays fast in unoptimised build scripts: well-mixing chains converge to
    /// rounding precision; nearly decomposable ones were measured within 1.3e-5 bits/symbol of
    /// a 10×40 solve.
    fn refine(&mut self) {
        if self.pd >= 1.0 {
            return;
        }
        match self.gmres() {
            Some(x) => self.pi = x,
            None => self.settle(256),
        }
    }

    fn gmres(&self) -> Option<Vec<f64>> {
        const M: usize = 12;
        const RESTARTS: usize = 2;
        const TOL: f64 = 1e-12;
        let l = self.l;
        let u = 1.0 / l as f64;
        let mut prefix = vec![0.0; l + 1];
        let mut tmp = vec![0.0; l];
        let apply = |v: &[f64], out: &mut [f64], prefix: &mut [f64], tmp: &mut [f64]| {
            self.embedded(v, prefix, tmp);
            let mut sum = 0.0;
            let mut i = 0;
            while i < l {
                sum += v[i];
                i += 1;
            }
            let mut i = 0;
            while i < l {
                out[i] = v[i] - tmp[i] + u * sum;
                i += 1;
            }
        };
        let dot = |a: &[f64], b: &[f64]| {
            let (mut s, mut i) = (0.0, 0);
            while i < a.len() {
                s += a[i] * b[i];
                i += 1;
            }
            s
        };
        let axpy = |y: &mut [f64], a: f64, x: &[f64]| {
            let mut i = 0;
            while i < y.len() {
                y[i] += a * x[i];
                i += 1;
            }
        };
        let mut x = self.pi.clone();
        let mut basis: Vec<Vec<f64>> = vec![vec![0.0; l]; M + 1];
        let mut w = vec![0.0; l];
        for _ in 0..RESTARTS {
            apply(&x, &mut w, &mut prefix, &mut tmp);
            for i in 0..l {
                basis[0][i] = u - w[i];
            }
            let beta = dot(&basis[0], &basis[0]).sqrt();
            if beta < TOL {
                return Some(x);
            }
            for v in basis[0].iter_mut() {
                *v /= beta;
            }
            let mut h = vec![[0.0f64; M + 1]; M];
            let mut rot: Vec<(f64, f64)> = Vec::with_capacity(M);
            let mut g = [0.0f64; M + 1];
            g[0] = beta;
            let mut k = 0;
            while k < M {
                apply(&basis[k], &mut w, &mut prefix, &mut tmp);
                for i in 0..=k {
                    let hij = dot(&w, &basis[i]);
                    h[k][i] = hij;
                    axpy(&mut w, -hij, &basis[i]);
                }
                let norm = dot(&w, &w).sqrt();
                h[k][k + 1] = norm;
                if norm > 0.0 {
                    for i in 0..l {
                        basis[k + 1][i] = w[i] / norm;
                    }
                }
                for (i, &(c, s)) in rot.iter().enumerate() {
                    let (a, b) = (h[k][i], h[k][i + 1]);
                    h[k][i] = c * a + s * b;
                    h[k][i + 1] = -s * a + c * b;
                }
                let (a, b) = (h[k][k], h[k][k + 1]);
                let r = a.hypot(b);
                let (c, s) = if r == 0.0 { (1.0, 0.0) } else { (a / r, b / r) };
                rot.push((c, s));
                h[k][k] = r;
                h[k][k + 1] = 0.0;
                g[k + 1] = -s * g[k];
                g[k] *= c;
                k += 1;
                if g[k].abs() < TOL || norm == 0.0 {
                    break;
                }
            }
            // Back-substitute the k×k triangle, then step x.
            let mut y = vec![0.0; k];
            for i in (0..k).rev() {
                let mut v = g[i];
                for j in i + 1..k {
                    v -= h[j][i] * y[j];
                }
                if h[i][i] == 0.0 {
                    return None;
                }
                y[i] = v / h[i][i];
            }
            for (i, &yi) in y.iter().enumerate() {
                axpy(&mut x, yi, &basis[i]);
            }
            if g[k].abs() < TOL {
                break;
            }
        }
        // Converged, or the best of a bounded effort (nearly decomposable chains, whose rate
        // the slow modes barely move): normalised either way.
        let sum: f64 = x.iter().sum();
        (sum > 0.0 && sum.is_finite()).then(|| x.iter().map(|v| v / sum).collect())
    }

    /// Bits per symbol: one step of the whole chain from the current distribution.
    fn rate(&mut self) -> f64 {
        if self.pd >= 1.0 {
            return self.cycle_bits;
        }
        let l = self.l;
        let mut i = 0;
        while i < l {
            self.prefix[i + 1] = self.prefix[i] + self.pi[i];
            i += 1;
        }
        let mut bits = 0.0;
        let mut y = 0;
        while y < l {
            bits +=
                self.weight[y] * (self.prefix[self.hi[y]] - self.prefix[self.lo[y]]) * self.bits[y];
            y += 1;
        }
        bits
    }
}
