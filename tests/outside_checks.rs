//! The core checked against published values. Each check names its source.

use precast::quantize::{cross_entropy, entropy, quantize};

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

/// Counts for p = (0.04, 0.16, 0.16, 0.64), L = 16 (Duda, encode.su forum post on tANS
/// tuning, 2014; figures recomputed with rational arithmetic in CHECKS.md).
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

#[test]
fn rans_worked_example() {
    use precast::tables::{rans_code, rans_uncode};
    // Duda, arXiv:1311.2540, notation of Giesen, "rANS notes", 2014 (CHECKS.md, recomputed):
    // M = 4, f = (1, 3), c = (0, 1); from state 1, symbols 0,1,1,1,1 give 1→4→6→9→13→18.
    let (slots, cum) = ([1u32, 3], [0u32, 1, 4]);
    let (f, c) = ([1u64, 3], [0u64, 1]);
    let mut x = 1u64;
    let mut states = vec![x];
    for s in [0usize, 1, 1, 1, 1] {
        x = rans_code(x, f[s], c[s], 2);
        states.push(x);
    }
    assert_eq!(states, [1, 4, 6, 9, 13, 18]);
    // Decoding 18 gives 1,1,1,1,0 back and ends at 1.
    let mut back = Vec::new();
    for _ in 0..5 {
        let (s, next) = rans_uncode(x, &slots, &cum, 2);
        back.push(s);
        x = next;
    }
    assert_eq!((back, x), (vec![1, 1, 1, 1, 0], 1));
    // C(0, x) = 4x; C(1, x) for x = 1..8 is 2,3,5,6,7,9,10,11.
    for x in 1..20 {
        assert_eq!(rans_code(x, 1, 0, 2), 4 * x);
    }
    let c1: Vec<u64> = (1..=8).map(|x| rans_code(x, 3, 1, 2)).collect();
    assert_eq!(c1, [2, 3, 5, 6, 7, 9, 10, 11]);
}

#[test]
fn rans_streaming_bounds() {
    use precast::tables::{rans_bound, Rans};
    // The invariant x in [L, bL) with the shedding bound (L/M)·b·f (Duda, arXiv:1311.2540).
    // CHECKS.md (recomputed), L = 2^23, b = 2^8, M = 2^12: f = 1, 3, 4096 → 524288,
    // 1572864, 2^31.
    assert_eq!(rans_bound(23, 8, 12, 1), 524_288);
    assert_eq!(rans_bound(23, 8, 12, 3), 1_572_864);
    assert_eq!(rans_bound(23, 8, 12, 4096), 1 << 31);
    // Ours, L = 2^16 and b = 2^16: the generated `ceiling` is that bound minus one.
    for table_bits in 1..=15u32 {
        let m = 1u32 << table_bits;
        let slots = [1, m - 1];
        let rans = Rans::new(&slots, table_bits).unwrap();
        for (s, &f) in slots.iter().enumerate() {
            let put = rans.put(s);
            assert_eq!(
                u64::from(put.ceiling) + 1,
                rans_bound(16, 16, table_bits, u64::from(f))
            );
        }
    }
}

#[test]
fn reciprocals_divide_exactly_for_every_frequency() {
    use precast::tables::{divide, reciprocal};
    // Round-up reciprocals (Alverson, IEEE ARITH 1991; Granlund & Montgomery, PLDI 1994,
    // from memory). With k = 32 + s and r·f = 2^k + e, the quotient computed at x = qf + j
    // (0 <= j < f) is q + floor((j·2^k + x·e) / (f·2^k)): it is right iff j·2^k + x·e < f·2^k.
    // The margin is smallest at j = f - 1 and shrinks as x grows, so exactness over all
    // x < 2^32 is the one condition x_top·e < 2^k at the largest x_top ≡ f - 1 (mod f).
    // Checked for every frequency a table can hold (1 ..= 2^15), with the computed quotient
    // also compared at x_top and at the lowest and highest few thousand dividends.
    for f in 1..=(1u32 << 15) {
        let (m, s) = reciprocal(f);
        let r = (1u128 << 32) + u128::from(m);
        let e = r * u128::from(f) - (1u128 << (32 + s));
        assert!(e < u128::from(f), "f {f}: r is not the round-up reciprocal");
        let top = u64::from(u32::MAX);
        let x_top = top - (top + 1) % u64::from(f);
        assert_eq!(x_top % u64::from(f), u64::from(f) - 1);
        assert!(u128::from(x_top) * e < 1u128 << (32 + s), "f {f}");
        let check = |x: u32| assert_eq!(divide(x, m, s), x / f, "f {f}, x {x}");
        for k in 0..(2 * f).min(4096) {
            check(k);
            check(u32::MAX - k);
        }
        check(x_top as u32);
    }
    // And a full sweep of the whole 32-bit range for some frequencies (release speed only).
    if !cfg!(debug_assertions) {
        for f in [3u32, 5, 7, 641, 12_345, 32_767] {
            let (m, s) = reciprocal(f);
            for x in 0..=u32::MAX {
                assert_eq!(divide(x, m, s), x / f);
            }
        }
    }
}
