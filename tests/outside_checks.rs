//! The core checked against published values. Each check names its source.

use precast::quantize::{cross_entropy, entropy, quantize};
use precast::tables::{exact_rate, from_spread, SpreadRule};

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

#[test]
fn entropies_of_textbook_distributions() {
    // Values recomputed from the Shannon formula (CHECKS.md; Cover & Thomas, Elements of
    // Information Theory, 2nd ed., ch. 2).
    let cases: &[(&[u64], f64)] = &[
        (&[9, 1], 0.4689955936),
        (&[99, 1], 0.0807931359),
        (&[1, 3], 0.8112781245),
        (&[25, 25, 20, 15, 15], 2.2854752972),
        (&[4, 2, 2, 1, 1], 2.1219280949),
        (&[4, 16, 16, 64], 1.4438561898),
    ];
    for (counts, h) in cases {
        let got = entropy(counts);
        assert!(close(got, *h, 1e-9), "{counts:?}: {got} against {h}");
    }
}

#[test]
fn the_deterministic_logarithm_matches_the_platform_one() {
    // Our own ln (basic IEEE operations only) against std's, which calls the platform libm.
    for i in 1..20_000u32 {
        let x = f64::from(i) * 0.37 + 1e-3;
        let ours = precast::quantize::ln(x);
        assert!(
            (ours - x.ln()).abs() <= 4.0 * f64::EPSILON * x.ln().abs().max(1.0),
            "ln {x}"
        );
    }
    for k in 1..50_000u64 {
        let ours = precast::quantize::ln_ratio(k);
        let std = (1.0 / k as f64).ln_1p();
        assert!(
            (ours - std).abs() <= 4.0 * f64::EPSILON * std,
            "ln_ratio {k}"
        );
    }
}

/// p = (0.04, 0.16, 0.16, 0.64), L = 16 (Duda, encode.su forum post on tANS tuning, 2014;
/// figures recomputed with rational arithmetic in CHECKS.md).
const P16: [f64; 4] = [0.04, 0.16, 0.16, 0.64];
const C16: [u64; 4] = [4, 16, 16, 64];

#[test]
fn kl_optimal_slots_for_the_sixteen_state_example() {
    let slots = quantize(&C16, 4).unwrap();
    assert!(
        slots == [1, 3, 2, 10] || slots == [1, 2, 3, 10],
        "slots {slots:?}; both (1,3,2,10) and (1,2,3,10) are KL-optimal"
    );
    // KL(p‖q) = 0.016516 bits (CHECKS.md, recomputed).
    let kl = cross_entropy(&C16, &slots, 4) - entropy(&C16);
    assert!(close(kl, 0.016516, 5e-7), "KL {kl}");
}

#[test]
fn exact_rates_of_the_three_published_spreads() {
    // State 16+i holds the i-th character; rates from CHECKS.md (exact, recomputed).
    let cases = [
        ("0233233133133133", 1.472406),
        ("3313233103332133", 1.466026),
        ("3233321333313310", 1.450464),
    ];
    for (spread, rate) in cases {
        let spread: Vec<u16> = spread.bytes().map(|b| u16::from(b - b'0')).collect();
        let tans = from_spread(&[1, 3, 2, 10], spread, SpreadRule::Given, 4).unwrap();
        let got = exact_rate(&tans, &P16);
        assert!(close(got, rate, 5e-7), "spread rate {got} against {rate}");
        let h = entropy(&C16);
        let relative = (got - h) / h;
        assert!(relative > 0.0);
    }
}

#[test]
fn our_spread_for_the_sixteen_state_example_is_near_the_best_published_one() {
    let slots = quantize(&C16, 4).unwrap();
    let (tans, rate) = precast::tables::build(&slots, &P16, 4).unwrap();
    assert!(close(rate, exact_rate(&tans, &P16), 1e-12));
    // The best of the three published spreads codes at 1.450464 bits/symbol (CHECKS.md).
    assert!(rate <= 1.450464 + 5e-3, "our rate {rate}");
}

#[test]
fn a_dyadic_source_codes_at_its_entropy_with_any_spread() {
    // p = (1/2, 1/4, 1/8, 1/8), L = 16, q = (8, 4, 2, 2): every state costs 1, 2, 3, 3 bits,
    // so the rate is H = 1.75 for any spread (Pieprzyk, Duda et al., "The Compression
    // Optimality of Asymmetric Numeral Systems", Entropy 25(4):672, 2023).
    let p = [0.5, 0.25, 0.125, 0.125];
    let counts = [8u64, 4, 2, 2];
    let slots = quantize(&counts, 4).unwrap();
    assert_eq!(slots, [8, 4, 2, 2]);
    for rule in [SpreadRule::Tuned, SpreadRule::Even, SpreadRule::Stride] {
        let spread = precast::tables::spread(rule, &slots, &p, 4);
        let tans = from_spread(&slots, spread, rule, 4).unwrap();
        let rate = exact_rate(&tans, &p);
        assert!(close(rate, 1.75, 1e-9), "{rule:?}: {rate}");
    }
}

#[test]
fn huffman_cannot_beat_one_bit_but_tans_does() {
    // Binary p = 0.99: entropy 0.0807931359, a Huffman code spends 1 bit a symbol (CHECKS.md).
    let counts = [99u64, 1];
    let p = [0.99, 0.01];
    let slots = quantize(&counts, 11).unwrap();
    let (_, rate) = precast::tables::build(&slots, &p, 11).unwrap();
    assert!(rate < 0.0807931359 * 1.01, "rate {rate}");
}

#[test]
fn the_loss_from_rounding_is_the_kl_divergence() {
    // The quantisation part of the loss is exactly KL(empirical‖quantised) (Szewczyk,
    // arXiv:2605.00579, 2026): cross-entropy minus entropy, never negative, zero when exact.
    for counts in [
        &[25u64, 25, 20, 15, 15][..],
        &[4, 16, 16, 64],
        &[1, 2, 3, 4, 5, 6, 7],
    ] {
        for bits in 4..=12 {
            if counts.len() > 1 << bits {
                continue;
            }
            let slots = quantize(counts, bits).unwrap();
            let kl = cross_entropy(counts, &slots, bits) - entropy(counts);
            assert!(kl >= -1e-12);
        }
    }
    assert!(cross_entropy(&[8, 4, 2, 2], &[8, 4, 2, 2], 4) - entropy(&[8, 4, 2, 2]) < 1e-12);
}

#[test]
fn redundancy_shrinks_as_the_table_grows() {
    // tANS redundancy is O(σ/n) per symbol for table size n (Kosolobov, "Efficiency of ANS
    // Entropy Encoders", arXiv:2201.02514): doubling the table from 2^8 to 2^12 should cut the
    // excess of a 5-symbol source many times over.
    let counts = [25u64, 25, 20, 15, 15];
    let p: Vec<f64> = counts.iter().map(|&c| c as f64 / 100.0).collect();
    let h = entropy(&counts);
    let excess = |bits| {
        let slots = quantize(&counts, bits).unwrap();
        precast::tables::build(&slots, &p, bits).unwrap().1 - h
    };
    let (small, large) = (excess(6), excess(12));
    assert!(small > 0.0 && large >= 0.0);
    assert!(
        large < small / 8.0,
        "excess {small} at 2^6, {large} at 2^12"
    );
}
