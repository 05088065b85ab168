//! Property tests (proptest) of each stage on random input: quantisation, tANS and rANS
//! tables, the size bound of the generated encoders, and whole random specs through the
//! reference coder. Each property runs a fixed number of cases, chosen so that the file stays
//! well under 30 s in the debug test profile on a 2-core machine.
//!
//! A failing case prints its minimal input; proptest also stores its seed in
//! `tests/properties.proptest-regressions`, which is worth committing with the fix.

mod common;

#[allow(dead_code)]
mod golden {
    include!("golden/small.rs");
}

use common::Rng;
use precast::quantize::{cross_entropy, quantize};
use precast::spec::Framing;
use precast::tables::{
    build, from_spread, rans_code, rans_uncode, spread, Rans, SpreadRule, Tables, Tans,
};
use precast::verify::Reference;
use proptest::prelude::*;
use proptest::sample::Index;
use std::path::Path;

// ---------------------------------------------------------------------------------------
// Shared strategies and helpers
// ---------------------------------------------------------------------------------------

/// One training count: zeros, tiny counts and large ones all occur often.
fn count() -> impl Strategy<Value = u64> {
    prop_oneof![
        1 => Just(0u64),
        1 => 1u64..4,
        3 => 0u64..=1_000_000,
    ]
}

/// Smallest table (log2 of its size, at least 1) with room for `n` symbols.
fn min_table_bits(n: usize) -> u32 {
    (usize::BITS - (n.max(2) - 1).leading_zeros()).max(1)
}

/// Counts for 1..=`max_symbols` symbols and a table size in `table_bits` they fit in.
fn counts_and_table_bits(
    max_symbols: usize,
    table_bits: std::ops::RangeInclusive<u32>,
) -> impl Strategy<Value = (Vec<u64>, u32)> {
    table_bits.prop_flat_map(move |table_bits| {
        let most = max_symbols.min(1 << table_bits);
        (prop::collection::vec(count(), 1..=most), Just(table_bits))
    })
}

/// The probabilities the pipeline derives from counts: uniform when there are none
/// (as `model::Model::probabilities`).
fn probabilities(counts: &[u64]) -> Vec<f64> {
    let total: u64 = counts.iter().sum();
    if total == 0 {
        return vec![1.0 / counts.len() as f64; counts.len()];
    }
    counts.iter().map(|&c| c as f64 / total as f64).collect()
}

/// `Σ c_s · -log2(q_s / M)`: the bits the counts cost with these slots, from the platform's
/// `log2` (independent of `precast::quantize`'s own logarithms).
fn cost(counts: &[u64], slots: &[u32], table_bits: u32) -> f64 {
    counts
        .iter()
        .zip(slots)
        .filter(|(&c, _)| c > 0)
        .map(|(&c, &q)| c as f64 * (f64::from(table_bits) - f64::from(q).log2()))
        .sum()
}

/// The least cost over every way to give each symbol at least one of `2^table_bits` slots.
fn brute_force_cost(counts: &[u64], table_bits: u32) -> f64 {
    // Odometer over the first n - 1 symbols' slots; the last takes what is left.
    let n = counts.len();
    let m = 1u32 << table_bits;
    let mut slots = vec![1u32; n];
    let mut best = f64::INFINITY;
    loop {
        let used: u32 = slots[..n - 1].iter().sum();
        if used < m {
            slots[n - 1] = m - used;
            best = best.min(cost(counts, &slots, table_bits));
        }
        // Next combination of slots[..n - 1], each in 1..m, skipping those already too large.
        let mut i = 0;
        loop {
            if i == n - 1 {
                return best;
            }
            slots[i] += 1;
            if slots[..n - 1].iter().sum::<u32>() < m {
                break;
            }
            slots[i] = 1;
            i += 1;
        }
    }
}

// ---------------------------------------------------------------------------------------
// a. Quantisation
// ---------------------------------------------------------------------------------------

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn quantize_fills_the_table_and_keeps_every_symbol(
        (counts, table_bits) in counts_and_table_bits(64, 1..=15)
    ) {
        let slots = quantize(&counts, table_bits).unwrap();
        prop_assert_eq!(slots.len(), counts.len());
        prop_assert_eq!(slots.iter().map(|&q| u64::from(q)).sum::<u64>(), 1u64 << table_bits);
        prop_assert!(slots.iter().all(|&q| q >= 1), "a symbol lost its last slot: {:?}", slots);
    }

    #[test]
    fn quantize_refuses_more_symbols_than_slots(table_bits in 1u32..=6, extra in 1usize..4) {
        let counts = vec![1u64; (1 << table_bits) + extra];
        prop_assert!(quantize(&counts, table_bits).is_err());
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn quantize_is_optimal_against_brute_force(
        (counts, table_bits) in counts_and_table_bits(5, 1..=5)
    ) {
        let slots = quantize(&counts, table_bits).unwrap();
        let ours = cost(&counts, &slots, table_bits);
        let best = brute_force_cost(&counts, table_bits);
        // Equal up to rounding: the two sides sum the same logarithms in another order.
        prop_assert!(
            ours <= best + 1e-9 * best.max(1.0),
            "{:?} at {} bits: {:?} costs {} bits, the best costs {}",
            counts, table_bits, slots, ours, best
        );
        // The library's own objective agrees about which is better.
        let total: u64 = counts.iter().sum();
        if total > 0 {
            let ce = cross_entropy(&counts, &slots, table_bits);
            prop_assert!((ce * total as f64 - ours).abs() <= 1e-9 * ours.max(1.0));
        }
    }

}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn raising_a_count_never_lowers_its_slots(
        (counts, table_bits) in counts_and_table_bits(16, 1..=12),
        which in any::<Index>(),
        raise in prop_oneof![1u64..4, 1u64..=1_000_000],
    ) {
        let s = which.index(counts.len());
        let before = quantize(&counts, table_bits).unwrap();
        let mut raised = counts.clone();
        raised[s] += raise;
        let after = quantize(&raised, table_bits).unwrap();
        prop_assert!(
            after[s] >= before[s],
            "raising symbol {} of {:?} by {} at {} bits: {} slots became {}",
            s, counts, raise, table_bits, before[s], after[s]
        );
    }
}

// ---------------------------------------------------------------------------------------
// b. tANS tables
// ---------------------------------------------------------------------------------------

/// Every structural and coding property of one finished table.
fn check_tans(tans: &Tans, slots: &[u32], table_bits: u32) -> Result<(), TestCaseError> {
    let l = 1u32 << table_bits;
    let n = slots.len();
    prop_assert_eq!(&tans.slots[..], slots);
    prop_assert_eq!(tans.spread.len(), l as usize);
    prop_assert_eq!(tans.decode.len(), l as usize);
    prop_assert_eq!(tans.next_state.len(), l as usize);

    // The spread holds each symbol exactly as often as its slots.
    let mut seen = vec![0u32; n];
    for &s in &tans.spread {
        seen[usize::from(s)] += 1;
    }
    prop_assert_eq!(&seen[..], slots);

    // `next_state` is a permutation of the states L..2L: every state is reachable.
    let mut states: Vec<u32> = tans.next_state.iter().map(|&x| u32::from(x)).collect();
    states.sort_unstable();
    prop_assert!(
        states.iter().copied().eq(l..2 * l),
        "next_state is not a permutation of {}..{}",
        l,
        2 * l
    );

    // Each decode entry, recomputed from the spread alone: copy number o of symbol s (its
    // copies are numbered q_s..2q_s - 1 left to right) reads k = table_bits - floor(log2 o)
    // bits and goes to state (o << k) + bits, which must stay in [L, 2L).
    let mut number: Vec<u32> = slots.to_vec();
    for (i, entry) in tans.decode.iter().enumerate() {
        let s = usize::from(tans.spread[i]);
        let o = number[s];
        number[s] += 1;
        let k = table_bits - o.ilog2();
        prop_assert_eq!(usize::from(entry.symbol), s, "position {}", i);
        prop_assert_eq!(u32::from(entry.bits), k, "position {}", i);
        prop_assert_eq!(entry.base, (o << k) - l, "position {}", i);
        prop_assert!(
            entry.base + (1 << k) <= l,
            "position {} leaves the table",
            i
        );
    }

    // Encoding then decoding is the identity, for every state and every symbol: the decode
    // entry at the encoder's next state gives back the symbol, reads exactly the bits written,
    // and with them returns to the state the encoder started from.
    for x in l..2 * l {
        for s in 0..n {
            let (y, k) = tans.encode_step(s, x);
            prop_assert!(
                (l..2 * l).contains(&y),
                "encoding {} from {} left the states",
                s,
                x
            );
            let entry = tans.decode[(y - l) as usize];
            prop_assert_eq!(usize::from(entry.symbol), s, "encode {} from {}", s, x);
            prop_assert_eq!(u32::from(entry.bits), k, "encode {} from {}", s, x);
            let low = x & ((1 << k) - 1);
            prop_assert_eq!(l + entry.base + low, x, "encode {} from {}", s, x);
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    #[test]
    fn tans_tables_are_permutations_and_invert_per_state(
        (counts, table_bits) in counts_and_table_bits(40, 1..=10)
    ) {
        let slots = quantize(&counts, table_bits).unwrap();
        let p = probabilities(&counts);
        for rule in [SpreadRule::Tuned, SpreadRule::Even, SpreadRule::Stride] {
            let layout = spread(rule, &slots, &p, table_bits);
            let tans = match from_spread(&slots, layout, rule, table_bits) {
                Ok(tans) => tans,
                Err(e) => return Err(TestCaseError::fail(format!("{rule:?}: {e}"))),
            };
            prop_assert_eq!(tans.spread_rule, rule);
            check_tans(&tans, &slots, table_bits)?;
        }
        let (tans, rate) = match build(&slots, &p, table_bits) {
            Ok(built) => built,
            Err(e) => return Err(TestCaseError::fail(format!("build: {e}"))),
        };
        check_tans(&tans, &slots, table_bits)?;
        // No lossless code beats the entropy on average (Shannon's source coding theorem;
        // Cover & Thomas, Elements of Information Theory, 2nd ed., ch. 5; from memory). The
        // margin covers the bounded solve of the state chain (`Chain::refine` in src/tables.rs:
        // within 1.3e-5 bits/symbol).
        let entropy: f64 = p.iter().filter(|&&v| v > 0.0).map(|&v| -v * v.log2()).sum();
        prop_assert!(rate.is_finite(), "rate {}", rate);
        prop_assert!(rate >= entropy - 1e-4, "rate {} below the entropy {}", rate, entropy);
    }
}

// ---------------------------------------------------------------------------------------
// c. rANS coding function
// ---------------------------------------------------------------------------------------

/// rANS states live in [L, b·L) with L = 2^16 and b = 2^16 (src/tables.rs, `RANS_LOW`, and
/// FORMAT.md); before coding symbol s the encoder has brought x into
/// [(L/M)·f_s, (L/M)·b·f_s) (Duda, arXiv:1311.2540, streaming rANS; from memory).
const STATE_LOW: u64 = 1 << 16;
const STATE_HIGH: u64 = 1 << 32;

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    #[test]
    fn rans_code_and_uncode_are_inverse(
        (counts, table_bits) in counts_and_table_bits(40, 1..=15),
        highs in prop::collection::vec(any::<u32>(), 3),
        xs in prop::collection::vec(any::<u64>(), 8),
    ) {
        let slots = quantize(&counts, table_bits).unwrap();
        let rans = Rans::new(&slots, table_bits).unwrap();
        let m = 1u64 << table_bits;
        prop_assert_eq!(rans.cum.len(), slots.len() + 1);
        prop_assert_eq!(u64::from(rans.cum[slots.len()]), m);

        // Every slot, under a few high parts (0, 1 and random): decoding names the symbol
        // that owns the slot, and coding the result gives back the same number.
        for slot in 0..m {
            for high in [0u64, 1].into_iter().chain(highs.iter().map(|&h| u64::from(h))) {
                let x = (high << table_bits) | slot;
                let (s, prev) = rans_uncode(x, &rans.slots, &rans.cum, table_bits);
                prop_assert!(
                    u64::from(rans.cum[s]) <= slot && slot < u64::from(rans.cum[s + 1]),
                    "slot {} decoded as symbol {}",
                    slot,
                    s
                );
                let f = u64::from(rans.slots[s]);
                let c = u64::from(rans.cum[s]);
                prop_assert_eq!(rans_code(prev, f, c, table_bits), x, "slot {}", slot);
            }
        }

        // Every symbol, from random states and the ends of its coding interval: decoding the
        // coded state gives back the symbol and the state, and the interval maps into [L, bL).
        for (s, (&f, &c)) in rans.slots.iter().zip(&rans.cum).enumerate() {
            let (f, c) = (u64::from(f), u64::from(c));
            let lo = (STATE_LOW >> table_bits) * f;
            let hi = (STATE_HIGH >> table_bits) * f;
            let mut starts = vec![0, 1, lo, hi - 1];
            starts.extend(xs.iter().map(|&x| x % (1 << 40)));
            starts.extend(xs.iter().map(|&x| lo + x % (hi - lo)));
            for x in starts {
                let coded = rans_code(x, f, c, table_bits);
                prop_assert_eq!(
                    rans_uncode(coded, &rans.slots, &rans.cum, table_bits),
                    (s, x),
                    "symbol {} from {}",
                    s,
                    x
                );
                if (lo..hi).contains(&x) {
                    prop_assert!(
                        (STATE_LOW..STATE_HIGH).contains(&coded),
                        "symbol {} from {} went to {}",
                        s,
                        x,
                        coded
                    );
                }
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// d. `max_encoded_len` of the golden codecs
// ---------------------------------------------------------------------------------------

/// Which symbols an input is made of.
#[derive(Debug, Clone, Copy)]
enum Mix {
    /// The symbol that costs the most bits, repeated.
    Costliest,
    /// Uniformly random symbols.
    Uniform,
    /// Three quarters the costliest symbol, the rest random.
    MostlyCostly,
    /// The two costliest symbols at random.
    TwoCostliest,
}

fn mix() -> impl Strategy<Value = Mix> {
    prop_oneof![
        Just(Mix::Costliest),
        Just(Mix::Uniform),
        Just(Mix::MostlyCostly),
        Just(Mix::TwoCostliest),
    ]
}

/// Symbol indices for an input of `len` symbols; `by_cost` lists the alphabet costliest first.
fn indices(mix: Mix, len: usize, by_cost: &[usize], seed: u64) -> Vec<usize> {
    let mut rng = Rng(seed);
    let n = by_cost.len();
    (0..len)
        .map(|_| match mix {
            Mix::Costliest => by_cost[0],
            Mix::Uniform => rng.below(n),
            Mix::MostlyCostly if rng.below(4) != 0 => by_cost[0],
            Mix::MostlyCostly => rng.below(n),
            Mix::TwoCostliest => by_cost[rng.below(n.min(2))],
        })
        .collect()
}

// A macro because each golden module has its own `Symbol` and `Error` types.
macro_rules! check_bound {
    ($codec:ident, $alphabet:expr, $mix:expr, $len:expr, $seed:expr) => {{
        use golden::$codec as c;
        let alphabet: &[c::Symbol] = &$alphabet;
        // Rank the symbols by what 64 copies of each cost: found through `encode` alone.
        let mut by_cost: Vec<(usize, usize)> = (0..alphabet.len())
            .map(|i| {
                let input = [alphabet[i]; 64];
                let mut buf = vec![0u8; c::max_encoded_len(64)];
                (c::encode(&input, &mut buf).expect("encodes"), i)
            })
            .collect();
        by_cost.sort_by(|a, b| b.0.cmp(&a.0).then(a.1.cmp(&b.1)));
        let by_cost: Vec<usize> = by_cost.into_iter().map(|(_, i)| i).collect();
        let input: Vec<c::Symbol> = indices($mix, $len, &by_cost, $seed)
            .into_iter()
            .map(|i| alphabet[i])
            .collect();
        let bound = c::max_encoded_len(input.len());
        // A buffer of exactly the bound: encode must fit in it.
        let mut buf = vec![0u8; bound];
        let written = c::encode(&input, &mut buf);
        prop_assert!(
            written.is_ok(),
            "{}: {} symbols ({:?}) do not fit in max_encoded_len = {}: {:?}",
            stringify!($codec),
            input.len(),
            $mix,
            bound,
            written
        );
        let written = written.unwrap();
        prop_assert!(
            written <= bound,
            "{}: wrote {} > {}",
            stringify!($codec),
            written,
            bound
        );
        let mut back = input.clone();
        prop_assert_eq!(c::decode(&buf[..written], &mut back), Ok(input.len()));
        prop_assert!(
            back == input,
            "{}: round trip changed the symbols",
            stringify!($codec)
        );
    }};
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    #[test]
    fn encode_fits_in_max_encoded_len(
        mix in mix(),
        len in prop_oneof![0usize..16, 0usize..2000],
        seed in any::<u64>(),
    ) {
        check_bound!(mit_text, golden::mit_text::ALPHABET, mix, len, seed);
        check_bound!(five, golden::five::ALL, mix, len, seed);
        check_bound!(skewed, golden::skewed::ALL, mix, len, seed);
        check_bound!(single, golden::single::ALL, mix, len, seed);
        check_bound!(five_bare, golden::five_bare::ALL, mix, len, seed);
        check_bound!(five_rans, golden::five_rans::ALL, mix, len, seed);
        check_bound!(skewed_l8, golden::skewed_l8::ALL, mix, len, seed);
    }
}

// ---------------------------------------------------------------------------------------
// e. Random specs through the whole pipeline and the reference coder
// ---------------------------------------------------------------------------------------

/// The spec key for the table size (being renamed; keep it in this one place).
const TABLE_BITS_KEY: &str = "table_bits";

#[derive(Debug, Clone)]
struct RandomCodec {
    bytes: bool,
    /// Byte values (bytes codecs), in alphabet order; tokens codecs use their length only.
    alphabet: Vec<u8>,
    counts: Vec<u64>,
    /// Zero counts left out of the spec rather than written as `0`.
    omit_zeros: bool,
    table_bits: u32,
    rans: bool,
    lanes: u32,
    bare: bool,
    seed: u64,
}

fn random_codec() -> impl Strategy<Value = RandomCodec> {
    (1usize..=40).prop_flat_map(|n| {
        (
            any::<bool>(),
            prop::sample::subsequence((0..=255u8).collect::<Vec<_>>(), n).prop_shuffle(),
            prop::collection::vec(count(), n),
            any::<bool>(),
            min_table_bits(n)..=10,
            any::<bool>(),
            prop::sample::select(vec![1u32, 2, 4, 8]),
            any::<bool>(),
            any::<u64>(),
        )
            .prop_map(
                |(bytes, alphabet, counts, omit_zeros, table_bits, rans, lanes, bare, seed)| {
                    RandomCodec {
                        bytes,
                        alphabet,
                        counts,
                        omit_zeros,
                        table_bits,
                        rans,
                        lanes,
                        bare,
                        seed,
                    }
                },
            )
    })
}

/// A TOML basic string holding one byte of printable ASCII.
fn toml_char(b: u8) -> String {
    match b {
        b'"' => "\"\\\"\"".to_string(),
        b'\\' => "\"\\\\\"".to_string(),
        _ => format!("\"{}\"", b as char),
    }
}

/// The spec text of `codecs`, named `c0`, `c1`, ...
fn spec_text(codecs: &[RandomCodec]) -> String {
    let mut out = String::new();
    for (k, c) in codecs.iter().enumerate() {
        out.push_str(&format!("[codec.c{k}]\n"));
        out.push_str(if c.bytes {
            "kind = \"bytes\"\n"
        } else {
            "kind = \"tokens\"\n"
        });
        if c.rans || c.seed % 3 == 0 {
            let method = if c.rans { "rans" } else { "tans" };
            out.push_str(&format!("method = \"{method}\"\n"));
        }
        out.push_str(&format!("{TABLE_BITS_KEY} = {}\n", c.table_bits));
        if c.lanes != 1 || c.seed % 5 == 0 {
            out.push_str(&format!("lanes = {}\n", c.lanes));
        }
        if c.bare || c.seed % 7 == 0 {
            let framing = if c.bare { "bare" } else { "tagged" };
            out.push_str(&format!("framing = \"{framing}\"\n"));
        }
        let names: Vec<String> = if c.bytes {
            // Printable bytes sometimes as one-byte strings, the rest as integers.
            let printable = c.seed % 2 == 0;
            c.alphabet
                .iter()
                .map(|&b| {
                    if printable && (b' '..=b'~').contains(&b) {
                        toml_char(b)
                    } else {
                        b.to_string()
                    }
                })
                .collect()
        } else {
            (0..c.alphabet.len()).map(|i| format!("\"t{i}\"")).collect()
        };
        out.push_str(&format!("symbols = [{}]\n", names.join(", ")));
        let entries: Vec<String> = c
            .counts
            .iter()
            .enumerate()
            .filter(|&(_, &v)| v > 0 || !c.omit_zeros)
            .map(|(i, &v)| {
                if c.bytes {
                    format!("\"{}\" = {v}", c.alphabet[i])
                } else {
                    format!("t{i} = {v}")
                }
            })
            .collect();
        out.push_str(&format!("counts = {{ {} }}\n\n", entries.join(", ")));
    }
    out
}

proptest! {
    // Rendering costs milliseconds per codec in a debug build: few cases, few codecs each.
    #![proptest_config(ProptestConfig::with_cases(24))]

    #[test]
    fn random_specs_render_and_round_trip(
        codecs in prop::collection::vec(random_codec(), 1..=3)
    ) {
        let text = spec_text(&codecs);
        let path = Path::new("random.toml");
        let source = match precast::render_str(&text, path) {
            Ok(rendered) => rendered.source,
            Err(e) => return Err(TestCaseError::fail(format!("render failed: {e}\n{text}"))),
        };
        let spec = precast::spec::parse(&text, path).unwrap();
        prop_assert_eq!(spec.codecs.len(), codecs.len());
        for (k, (codec, want)) in spec.codecs.iter().zip(&codecs).enumerate() {
            prop_assert!(source.contains(&format!("pub mod c{k} ")), "no module c{}", k);
            prop_assert_eq!(codec.kind.alphabet_len(), want.counts.len());
            prop_assert_eq!(codec.lanes, want.lanes);
            prop_assert_eq!(codec.framing == Framing::Bare, want.bare);
            let built = precast::build_codec(codec).unwrap();
            prop_assert_eq!(&built.model.counts, &want.counts);
            prop_assert_eq!(matches!(built.tables, Tables::Rans(_)), want.rans);
            prop_assert_eq!(built.tables.slots().len(), want.counts.len());

            let table_len: u64 = built.tables.slots().iter().map(|&q| u64::from(q)).sum();
            prop_assert_eq!(table_len, 1u64 << want.table_bits);

            let coder =
                Reference::framed(&built.tables, built.fingerprint, codec.framing, codec.lanes);
            let weights: Vec<u64> = want.counts.iter().map(|&c| c + 1).collect();
            let mut rng = Rng(want.seed);
            for _ in 0..4 {
                let len = rng.below(300);
                let input: Vec<u16> = (0..len).map(|_| rng.weighted(&weights) as u16).collect();
                let stream = coder.encode(&input);
                let decoded = coder.decode(&stream, len);
                prop_assert!(decoded.is_ok(), "c{}: {} symbols: {:?}\n{}", k, len, decoded, text);
                let (symbols, used) = decoded.unwrap();
                prop_assert_eq!(&symbols, &input, "c{}: {} symbols\n{}", k, len, text);
                prop_assert_eq!(used, stream.len(), "c{}: {} symbols\n{}", k, len, text);
            }
        }
    }
}
