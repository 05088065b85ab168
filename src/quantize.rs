//! Stage 3: counts → slots. Each symbol gets at least one of the `2^table_bits` slots and the
//! slots minimise the cross-entropy of the training counts, `-Σ c_s·log2(q_s / M)`.
//!
//! Why the result is the exact optimum: the objective is a sum of one concave function per
//! symbol (`c_s·ln q_s`) under one linear constraint (`Σ q_s = M`) on integers. For such
//! separable problems a point from which no single move of one slot from one symbol to another
//! improves the objective is a global optimum (the classic result for resource allocation with
//! concave returns, e.g. Ibaraki & Katoh, *Resource Allocation Problems*, 1988; from memory).
//! We start from the proportional share, hand out the rest by largest marginal gain, then move
//! slots while a move strictly gains. Ties go to the lower symbol index.
//!
//! The logarithms come from [`ln_ratio`], built from `+ - * /` alone, which IEEE 754 rounds
//! identically everywhere; so the slots, and the generated source, match on every platform.

use crate::error::{Error, Result};

/// `ln((k+1)/k)` for `k >= 1`, by the series `2·atanh(z)`, `z = 1/(2k+1) <= 1/3`.
pub fn ln_ratio(k: u64) -> f64 {
    let z = 1.0 / (2.0 * k as f64 + 1.0);
    let z2 = z * z;
    let mut term = z;
    let mut sum = 0.0;
    let mut n = 1.0;
    loop {
        let add = term / n;
        let next = sum + add;
        if next == sum {
            break;
        }
        sum = next;
        term *= z2;
        n += 2.0;
    }
    2.0 * sum
}

/// Natural logarithm of `x > 0` from basic operations only (see the module docs).
pub fn ln(x: f64) -> f64 {
    if x <= 0.0 || !x.is_finite() {
        return f64::NAN;
    }
    // x = m * 2^e with m in [1/√2, √2): ln x = e ln 2 + 2 atanh((m-1)/(m+1)).
    let mut m = x;
    let mut e = 0i32;
    while m >= std::f64::consts::SQRT_2 {
        m *= 0.5;
        e += 1;
    }
    while m < std::f64::consts::FRAC_1_SQRT_2 {
        m *= 2.0;
        e -= 1;
    }
    let z = (m - 1.0) / (m + 1.0);
    let z2 = z * z;
    let (mut term, mut sum, mut n) = (z, 0.0, 1.0);
    loop {
        let next = sum + term / n;
        if next == sum {
            break;
        }
        sum = next;
        term *= z2;
        n += 2.0;
    }
    f64::from(e) * std::f64::consts::LN_2 + 2.0 * sum
}

/// `log2(x)` from [`ln`].
pub fn log2(x: f64) -> f64 {
    ln(x) / std::f64::consts::LN_2
}

/// Slots for `counts` in a table of `2^table_bits`; every symbol gets at least one.
pub fn quantize(counts: &[u64], table_bits: u32) -> Result<Vec<u32>> {
    let n = counts.len();
    let m = 1u64 << table_bits;
    if n == 0 || n as u64 > m {
        return Err(Error::internal(format!(
            "quantize: {n} symbols for {m} slots"
        )));
    }
    // With no training data at all, every symbol is equally likely.
    let counts: Vec<u64> = if counts.iter().all(|&c| c == 0) {
        vec![1; n]
    } else {
        counts.to_vec()
    };
    let total: u128 = counts.iter().map(|&c| u128::from(c)).sum();
    let spare = u128::from(m - n as u64);
    let mut slots: Vec<u64> = counts
        .iter()
        .map(|&c| 1 + (u128::from(c) * spare / total) as u64)
        .collect();

    // gain(s) = c_s · ln((q_s+1)/q_s): what one more slot is worth to symbol s.
    let gain = |c: u64, q: u64| c as f64 * ln_ratio(q);
    let mut used: u64 = slots.iter().sum();
    while used < m {
        let best = best_gain(&counts, &slots, gain);
        slots[best] += 1;
        used += 1;
    }
    // Move slots while some move strictly gains; each move raises the objective, so this ends.
    loop {
        let to = best_gain(&counts, &slots, gain);
        let mut from = None;
        let mut least = f64::INFINITY;
        for (s, (&c, &q)) in counts.iter().zip(&slots).enumerate() {
            if q >= 2 && s != to {
                let loss = gain(c, q - 1);
                if loss < least {
                    least = loss;
                    from = Some(s);
                }
            }
        }
        match from {
            Some(from) if gain(counts[to], slots[to]) > least => {
                slots[to] += 1;
                slots[from] -= 1;
            }
            _ => break,
        }
    }
    Ok(slots.into_iter().map(|q| q as u32).collect())
}

fn best_gain(counts: &[u64], slots: &[u64], gain: impl Fn(u64, u64) -> f64) -> usize {
    let mut best = 0;
    let mut best_value = f64::NEG_INFINITY;
    for (s, (&c, &q)) in counts.iter().zip(slots).enumerate() {
        let v = gain(c, q);
        if v > best_value {
            best_value = v;
            best = s;
        }
    }
    best
}

/// Shannon entropy of the counts in bits per symbol.
pub fn entropy(counts: &[u64]) -> f64 {
    // Summed in floating point: counts near u64::MAX must not overflow.
    let t: f64 = counts.iter().map(|&c| c as f64).sum();
    if t == 0.0 {
        return 0.0;
    }
    let h: f64 = counts
        .iter()
        .filter(|&&c| c > 0)
        .map(|&c| {
            let p = c as f64 / t;
            -p * log2(p)
        })
        .sum();
    // A single symbol gives -0.0; report it as +0 (`max` may keep either zero).
    if h > 0.0 {
        h
    } else {
        0.0
    }
}

/// Cross-entropy of the counts coded with `slots` out of `2^table_bits`, bits per symbol.
pub fn cross_entropy(counts: &[u64], slots: &[u32], table_bits: u32) -> f64 {
    let t: f64 = counts.iter().map(|&c| c as f64).sum();
    if t == 0.0 {
        return 0.0;
    }
    let m = f64::from(1u32 << table_bits);
    counts
        .iter()
        .zip(slots)
        .filter(|(&c, _)| c > 0)
        .map(|(&c, &q)| c as f64 / t * -log2(f64::from(q) / m))
        .sum()
}
