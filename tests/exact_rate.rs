//! The exact-rate solver (`method/rate.rs`): the stationary distribution of a tANS encoder's
//! state chain, checked against published rates and against plain simulation.

mod common;

use common::Rng;
use precast::quantize::{entropy, quantize};
use precast::tables::{exact_rate, from_spread, SpreadRule};
use precast::verify::Reference;

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

/// p = (0.04, 0.16, 0.16, 0.64), L = 16 (Duda, encode.su forum post on tANS tuning, 2014;
/// figures recomputed with rational arithmetic in CHECKS.md).
const P16: [f64; 4] = [0.04, 0.16, 0.16, 0.64];
const C16: [u64; 4] = [4, 16, 16, 64];

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

/// The rate by brute force: iterate the whole chain `π ← π·P` (every state, every symbol)
/// many times, then average the bits of one step. Independent of the solver's splitting.
fn power_iteration_rate(tans: &precast::tables::Tans, p: &[f64], rounds: usize) -> f64 {
    let l = 1usize << tans.table_bits;
    let mut pi = vec![1.0 / l as f64; l];
    let step = |pi: &[f64]| {
        let mut next = vec![0.0; l];
        let mut bits = 0.0;
        for (i, &w) in pi.iter().enumerate() {
            for (s, &ps) in p.iter().enumerate() {
                let (to, k) = tans.encode_step(s, (l + i) as u32);
                next[to as usize - l] += w * ps;
                bits += w * ps * f64::from(k);
            }
        }
        (next, bits)
    };
    for _ in 0..rounds {
        // Half-lazy, so that periodic chains converge too.
        let (next, _) = step(&pi);
        pi = pi.iter().zip(&next).map(|(a, b)| 0.5 * (a + b)).collect();
    }
    step(&pi).1
}

#[test]
fn the_solver_agrees_with_brute_force_iteration() {
    // Small tables of random sources, every spread rule: the solver's rate and 20,000 rounds
    // of the plain chain agree to well under a millibit (common practice: both compute the
    // stationary distribution of the same Markov chain).
    let mut rng = Rng(11);
    for case in 0..12 {
        let n = 2 + rng.below(5);
        let counts: Vec<u64> = (0..n).map(|_| 1 + rng.below(100) as u64).collect();
        let total: u64 = counts.iter().sum();
        let p: Vec<f64> = counts.iter().map(|&c| c as f64 / total as f64).collect();
        let bits = 3 + (case % 4) as u32;
        let slots = quantize(&counts, bits).unwrap();
        for rule in [SpreadRule::Tuned, SpreadRule::Even, SpreadRule::Stride] {
            let spread = precast::tables::spread(rule, &slots, &p, bits);
            let tans = from_spread(&slots, spread, rule, bits).unwrap();
            let solved = exact_rate(&tans, &p);
            let brute = power_iteration_rate(&tans, &p, 20_000);
            assert!(
                close(solved, brute, 1e-7),
                "{counts:?} at 2^{bits}, {rule:?}: solver {solved}, brute force {brute}"
            );
        }
    }
}

#[test]
fn the_solver_predicts_the_size_of_long_streams() {
    // 400,000 symbols drawn i.i.d. through the reference coder cost the exact rate per symbol,
    // within sampling noise (common practice: a stationary ergodic chain's time average).
    let counts = [50u64, 25, 12, 8, 5];
    let p: Vec<f64> = counts.iter().map(|&c| c as f64 / 100.0).collect();
    let slots = quantize(&counts, 6).unwrap();
    let (tans, rate) = precast::tables::build(&slots, &p, 6).unwrap();
    let tables = precast::tables::Tables::Tans(tans);
    let coder = Reference::framed(&tables, 0, precast::spec::Framing::Bare, 1);
    let mut rng = Rng(3);
    let n = 400_000;
    let symbols: Vec<u16> = (0..n).map(|_| rng.weighted(&counts) as u16).collect();
    let measured = coder.encode(&symbols).len() as f64 * 8.0 / n as f64;
    assert!(
        close(measured, rate, 0.01),
        "measured {measured}, exact {rate}"
    );
    assert!(rate > entropy(&counts));
}
