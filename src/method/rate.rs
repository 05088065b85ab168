//! The exact rate of a tANS table: bits per symbol under the stationary distribution of the
//! encoder's state chain, for an i.i.d. source. Used to rank spreads and reported in every
//! tANS module's docs.

use super::tans::Tans;

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
pub(crate) const WARM_ROUNDS: usize = 4;

/// The encoder's state chain of one table, with its stationary distribution being found.
/// Loops are plain index loops: this runs in unoptimised build scripts, where iterator
/// adaptors cost a call per element.
pub(crate) struct Chain {
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
    pub(crate) fn new(tans: &Tans, p: &[f64]) -> Self {
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
            lo[y] = e.base as usize;
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
    pub(crate) fn settle(&mut self, rounds: usize) {
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
    pub(crate) fn refine(&mut self) {
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
    pub(crate) fn rate(&mut self) -> f64 {
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
