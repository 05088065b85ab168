//! How much the 32-bit rANS state adds to the slots' own cost: the reason the report takes
//! the cross-entropy of the slots as a rANS codec's rate.

mod common;

use common::Rng;
use precast::tables::{Rans, Tables};
use precast::verify::Reference;

/// Payload bits of the reference rANS coder against the ideal cost of the same symbols
/// under the slots, `sum -log2(f_s / M)`, for i.i.d. draws from `weights`.
fn excess(weights: &[u64], table_bits: u32, n: usize) -> f64 {
    let slots = precast::quantize::quantize(weights, table_bits).unwrap();
    let tables = Tables::Rans(Rans::new(&slots, table_bits).unwrap());
    let mut rng = Rng(42);
    let symbols: Vec<u16> = (0..n).map(|_| rng.weighted(weights) as u16).collect();
    let coder = Reference::framed(&tables, 0, precast::spec::Framing::Bare, 1);
    let stream = coder.encode(&symbols);
    let m = f64::from(1u32 << table_bits);
    let ideal: f64 = symbols
        .iter()
        .map(|&s| -(f64::from(slots[usize::from(s)]) / m).log2())
        .sum();
    // The 32-bit final state carries up to 16 bits of the start state L = 2^16 as overhead.
    let bits = (stream.len() * 8) as f64 - 32.0;
    (bits - ideal) / ideal
}

#[test]
fn the_state_adds_almost_nothing_to_the_slots_cost() {
    // A truncated geometric source over 16 symbols, and the {0.9, 0.05, 0.03, 0.02} source.
    let geometric: Vec<u64> = (0..16)
        .map(|i| (4096.0 * 0.75f64.powi(i)).round() as u64)
        .collect();
    let skewed = [9000u64, 500, 300, 200];
    for weights in [&geometric[..], &skewed[..]] {
        for table_bits in [11, 12] {
            let e = excess(weights, table_bits, 200_000);
            assert!(e.abs() < 1e-4, "table_bits {table_bits}: {e:e}");
        }
        // At the largest table L / M is only 2; still well under 0.1 %.
        let e = excess(weights, 15, 200_000);
        assert!(e.abs() < 1e-3, "table_bits 15: {e:e}");
    }
}
