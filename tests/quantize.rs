//! Quantisation against exhaustive search: the slots must minimise the cross-entropy exactly.

mod common;

use common::Rng;
use precast::quantize::{cross_entropy, quantize};

/// Every way to give `n` symbols at least one of `m` slots, best cross-entropy first found.
fn brute_force(counts: &[u64], bits: u32) -> f64 {
    fn go(counts: &[u64], left: u32, slots: &mut Vec<u32>, bits: u32, best: &mut f64) {
        if slots.len() + 1 == counts.len() {
            slots.push(left);
            let c = cross_entropy(counts, slots, bits);
            if c < *best {
                *best = c;
            }
            slots.pop();
            return;
        }
        let rest = (counts.len() - slots.len() - 1) as u32;
        for q in 1..=left - rest {
            slots.push(q);
            go(counts, left - q, slots, bits, best);
            slots.pop();
        }
    }
    let mut best = f64::INFINITY;
    go(counts, 1 << bits, &mut Vec::new(), bits, &mut best);
    best
}

#[test]
fn quantize_matches_brute_force_on_small_cases() {
    let mut rng = Rng(11);
    for case in 0..300 {
        let n = 2 + rng.below(4);
        let bits = 3 + rng.below(3) as u32;
        if n > 1 << bits {
            continue;
        }
        let counts: Vec<u64> = (0..n)
            .map(|_| match rng.below(4) {
                0 => 0,
                1 => 1 + rng.below(3) as u64,
                _ => rng.below(10_000) as u64,
            })
            .collect();
        if counts.iter().all(|&c| c == 0) {
            continue;
        }
        let slots = quantize(&counts, bits).unwrap();
        assert_eq!(slots.iter().sum::<u32>(), 1 << bits);
        assert!(slots.iter().all(|&q| q >= 1));
        let ours = cross_entropy(&counts, &slots, bits);
        let best = brute_force(&counts, bits);
        assert!(
            ours <= best + 1e-12,
            "case {case}: {counts:?} at {bits} bits: {slots:?} gives {ours}, best {best}"
        );
    }
}

#[test]
fn quantize_is_deterministic_and_keeps_every_symbol() {
    let counts: Vec<u64> = (0..256u64)
        .map(|i| if i % 3 == 0 { 0 } else { i * i })
        .collect();
    for bits in 8..=15 {
        let a = quantize(&counts, bits).unwrap();
        assert_eq!(a, quantize(&counts, bits).unwrap());
        assert_eq!(a.iter().map(|&q| u64::from(q)).sum::<u64>(), 1 << bits);
        assert!(a.iter().all(|&q| q >= 1));
    }
    // Ties go to the lower index: two equal counts in a table that cannot split evenly.
    assert_eq!(quantize(&[5, 5], 1).unwrap(), [1, 1]);
    assert_eq!(quantize(&[5, 5, 5], 2).unwrap(), [2, 1, 1]);
    // No training data at all: uniform.
    assert_eq!(quantize(&[0, 0, 0, 0], 4).unwrap(), [4, 4, 4, 4]);
    assert!(quantize(&[1, 2, 3], 1).is_err());
}
