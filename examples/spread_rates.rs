//! Exact rates of the tANS spread rules, and of other steps for the stride rule, on textbook
//! distributions and a small real text, at table sizes 2^3 ..= 2^12:
//!
//!     cargo run --release --example spread_rates            # the table, about 2 s
//!     cargo run --release --example spread_rates -- --sweep  # every odd step, 2^4 ..= 2^11
//!
//! Each cell is the exact rate (`precast::tables::exact_rate`, the stationary rate of the
//! encoder's state chain) minus the source entropy, in millibits per symbol. `kl` is the
//! rounding of the probabilities to slots, KL(p‖q), the same for every spread. Columns:
//! `tuned` and `even` as the library lays them out; `best`, the table `build` picks among the
//! library's rules; `stride`, the library's `SpreadRule::Stride` (step
//! `precast::tables::stride_step`: smallest largest continued-fraction quotient of `t/L`,
//! nearest `L/φ` among those); and other odd steps, each walking the table and laying each
//! symbol's copies consecutively along the walk, in alphabet order:
//!
//! - `phi`: `floor(L/φ) | 1`, the odd integer nearest `L/φ` (Fibonacci hashing);
//! - `phi2`: the odd integer nearest `L/φ² = L - L/φ`: the same walk run backwards;
//! - `silver`: `floor(L(√2 - 1)) | 1`, the odd integer nearest `L(√2 - 1)`;
//! - `sumpq`: the smallest sum of continued-fraction quotients, nearest `phi` among those;
//! - `maxpq2`: as `stride`, but ties go to the step nearest `phi2`.
//!
//! The summary's `geomean/tuned` is the geometric mean of (excess / excess of `tuned`) over
//! the cells where the tuned excess is above 1e-7 bits (the solver agrees with 200,000 rounds
//! of plain power iteration to within 1e-9 bits on such cells). The sweep ranks every odd step
//! by that mean at one table size and groups the steps by their largest quotient.

use precast::quantize::{cross_entropy, entropy, quantize};
use precast::tables::{build, exact_rate, from_spread, spread, stride_step, SpreadRule};

/// Lays each symbol's copies consecutively along the walk `0, step, 2·step, … (mod L)`.
/// `None` if the walk is not a permutation of the table.
fn stride(slots: &[u32], table_bits: u32, step: usize) -> Option<Vec<u16>> {
    let l = 1usize << table_bits;
    let mut table = vec![u16::MAX; l];
    let mut pos = 0usize;
    for (s, &q) in slots.iter().enumerate() {
        for _ in 0..q {
            if table[pos] != u16::MAX {
                return None;
            }
            table[pos] = s as u16;
            pos = (pos + step) & (l - 1);
        }
    }
    Some(table)
}

/// `floor(√(a·L²) - L)`, exactly, in integers.
fn root_step(l: u64, a: u64) -> u64 {
    (l * l * a).isqrt() - l
}

/// Largest and sum of the continued-fraction quotients of `t / l`.
fn quotients(t: u64, l: u64) -> (u64, u64) {
    let (mut a, mut b, mut max, mut sum) = (l, t, 0, 0);
    while b != 0 {
        max = max.max(a / b);
        sum += a / b;
        (a, b) = (b, a % b);
    }
    (max, sum)
}

/// The compared steps for a table of `l`, the library's first.
fn steps(table_bits: u32) -> Vec<(&'static str, usize)> {
    let l = 1u64 << table_bits;
    // floor(L/φ) = floor((√(5L²) - L) / 2); its `| 1` is the odd integer nearest L/φ. L/φ² is
    // L - L/φ, and L is even, so the odd integer nearest it is L minus that one.
    let phi = (root_step(l, 5) / 2) | 1;
    let odd = || (1..l.max(2)).step_by(2);
    let near = |t: u64, target: u64| t.abs_diff(target);
    let sumpq = odd()
        .min_by_key(|&t| (quotients(t, l).1, near(t, phi)))
        .unwrap_or(1);
    let maxpq2 = odd()
        .min_by_key(|&t| (quotients(t, l).0, near(t, l - phi)))
        .unwrap_or(1);
    vec![
        ("stride", stride_step(table_bits)),
        ("phi", phi as usize),
        ("phi2", (l - phi) as usize),
        ("silver", (root_step(l, 2) | 1) as usize),
        ("sumpq", sumpq as usize),
        ("maxpq2", maxpq2 as usize),
    ]
}

/// Two-sided geometric source P(k) ∝ a^|k| for |k| <= range (common practice), as counts.
fn geometric(a: f64, range: i32) -> Vec<u64> {
    (-range..=range)
        .map(|k| (1e9 * a.powi(k.abs())).round() as u64)
        .collect()
}

/// The textbook distributions of CHECKS.md (shared notes), as counts, and the bytes of the MIT
/// licence text.
fn sources() -> Vec<(&'static str, Vec<u64>)> {
    let mit = std::fs::read(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/specs/mit-license.txt"
    ))
    .expect("the MIT licence text is in tests/specs");
    let mut byte_counts = [0u64; 256];
    for &b in &mit {
        byte_counts[usize::from(b)] += 1;
    }
    let mit_counts: Vec<u64> = byte_counts.iter().copied().filter(|&c| c > 0).collect();
    vec![
        ("binary 0.9", vec![9, 1]),
        ("binary 0.99", vec![99, 1]),
        ("(1/4,3/4)", vec![1, 3]),
        ("C&T 5.6.1", vec![25, 25, 20, 15, 15]),
        ("Sayood 3.2.1", vec![4, 2, 2, 1, 1]),
        ("16-state", vec![4, 16, 16, 64]),
        // Huffman, Proc. IRE 40(9), 1952: entropy 3.354561 bits, as in CHECKS.md.
        (
            "Huffman 13",
            vec![20, 18, 10, 10, 10, 6, 6, 4, 4, 4, 4, 3, 1],
        ),
        ("geom 0.7 ±15", geometric(0.7, 15)),
        ("geom 0.5 ±10", geometric(0.5, 10)),
        ("MIT bytes", mit_counts),
    ]
}

/// Probabilities, entropy and slots of `counts` at `table_bits`, if the alphabet fits.
fn prepare(counts: &[u64], table_bits: u32) -> Option<(Vec<f64>, f64, Vec<u32>)> {
    if counts.len() > 1 << table_bits {
        return None;
    }
    let total: u64 = counts.iter().sum();
    let p = counts.iter().map(|&c| c as f64 / total as f64).collect();
    let slots = quantize(counts, table_bits).expect("alphabet fits");
    Some((p, entropy(counts), slots))
}

fn stride_rate(slots: &[u32], p: &[f64], table_bits: u32, step: usize) -> Option<f64> {
    let table = stride(slots, table_bits, step)?;
    let tans = from_spread(slots, table, SpreadRule::Given, table_bits).ok()?;
    Some(exact_rate(&tans, p))
}

fn main() {
    let sources = sources();
    if std::env::args().any(|a| a == "--sweep") {
        sweep(&sources);
    } else {
        table(&sources);
    }
}

fn table(sources: &[(&str, Vec<u64>)]) {
    const COLUMNS: usize = 9;
    const FIRST_STRIDE: usize = 3;
    let names = [
        "tuned", "even", "best", "stride", "phi", "phi2", "silver", "sumpq", "maxpq2",
    ];
    let mut sum = [0.0f64; COLUMNS];
    let mut cells = [0usize; COLUMNS];
    let mut log_ratio = [0.0f64; COLUMNS];
    let mut ratio_cells = [0usize; COLUMNS];
    let mut wins = [0usize; COLUMNS];
    let mut worst = [f64::NEG_INFINITY; COLUMNS];
    let mut fails = [0usize; COLUMNS];
    let mut by_size = [[(0.0f64, 0usize); COLUMNS]; 13];

    for (name, counts) in sources {
        println!(
            "\n{name}: {} symbols, H = {:.6} bits",
            counts.len(),
            entropy(counts)
        );
        print!("{:>4} {:>8}", "bits", "kl");
        for n in names {
            print!(" {n:>8}");
        }
        println!("   (excess over H, millibits/symbol)");
        for bits in 3..=12u32 {
            let Some((p, h, slots)) = prepare(counts, bits) else {
                continue;
            };
            let kl = cross_entropy(counts, &slots, bits) - h;
            let rule = |rule: SpreadRule| {
                let table = spread(rule, &slots, &p, bits);
                from_spread(&slots, table, rule, bits)
                    .ok()
                    .map(|t| exact_rate(&t, &p))
            };
            let mut row = vec![
                rule(SpreadRule::Tuned),
                rule(SpreadRule::Even),
                build(&slots, &p, bits).ok().map(|(_, r)| r),
            ];
            for (_, step) in steps(bits) {
                row.push(stride_rate(&slots, &p, bits, step));
            }
            // The library's stride lays out what the local walk with its step does.
            assert_eq!(
                spread(SpreadRule::Stride, &slots, &p, bits),
                stride(&slots, bits, stride_step(bits)).expect("odd step")
            );
            print!("{bits:>4} {:>8.3}", kl * 1e3);
            for r in &row {
                match r {
                    Some(r) => print!(" {:>8.3}", (r - h) * 1e3),
                    None => print!(" {:>8}", "fail"),
                }
            }
            println!();
            let tuned = row[0].expect("tuned never fails") - h;
            let best_stride = row[FIRST_STRIDE..]
                .iter()
                .flatten()
                .copied()
                .fold(f64::INFINITY, f64::min);
            for (k, r) in row.iter().enumerate() {
                let Some(r) = r else {
                    fails[k] += 1;
                    continue;
                };
                let e = r - h;
                sum[k] += e;
                cells[k] += 1;
                worst[k] = worst[k].max(e - tuned);
                if tuned > 1e-7 {
                    log_ratio[k] += (e / tuned).ln();
                    ratio_cells[k] += 1;
                    by_size[bits as usize][k].0 += (e / tuned).ln();
                    by_size[bits as usize][k].1 += 1;
                }
                if k >= FIRST_STRIDE && *r <= best_stride + 1e-12 {
                    wins[k] += 1;
                }
            }
        }
    }

    println!("\ngeometric mean of excess / tuned excess, by table size");
    print!("{:>4}", "bits");
    for n in names {
        print!(" {n:>8}");
    }
    println!();
    for (bits, row) in by_size.iter().enumerate().skip(3) {
        print!("{bits:>4}");
        for (lg, n) in row {
            print!(" {:>8.3}", (lg / (*n).max(1) as f64).exp());
        }
        println!();
    }
    println!("\nsummary over all cells (distribution × table size where the alphabet fits)");
    println!(
        "{:>8} {:>6} {:>11} {:>14} {:>16} {:>6} {:>5}",
        "rule", "cells", "mean mb/sym", "geomean/tuned", "worst-tuned mb", "wins", "fail"
    );
    for (k, n) in names.iter().enumerate() {
        println!(
            "{n:>8} {:>6} {:>11.3} {:>14.3} {:>16.3} {:>6} {:>5}",
            cells[k],
            sum[k] / cells[k].max(1) as f64 * 1e3,
            (log_ratio[k] / ratio_cells[k].max(1) as f64).exp(),
            worst[k] * 1e3,
            if k >= FIRST_STRIDE {
                wins[k].to_string()
            } else {
                "-".into()
            },
            fails[k],
        );
    }
    println!("(wins: cells where the step is the best of the stride columns, ties counted)");
}

/// Every odd step at each table size, ranked by the geometric mean over the sources of its
/// excess divided by the tuned rule's excess, grouped by the largest quotient of `t/L`.
fn sweep(sources: &[(&str, Vec<u64>)]) {
    for bits in 4..=11u32 {
        let l = 1usize << bits;
        let mut prepared = Vec::new();
        for (_, counts) in sources {
            let Some((p, h, slots)) = prepare(counts, bits) else {
                continue;
            };
            let tuned = spread(SpreadRule::Tuned, &slots, &p, bits);
            let tuned = from_spread(&slots, tuned, SpreadRule::Tuned, bits).expect("builds");
            let tuned = exact_rate(&tuned, &p) - h;
            if tuned > 1e-7 {
                prepared.push((p, h, slots, tuned));
            }
        }
        let mut ranked: Vec<(f64, usize)> = (1..l)
            .step_by(2)
            .map(|step| {
                let mut log = 0.0;
                for (p, h, slots, tuned) in &prepared {
                    let rate = stride_rate(slots, p, bits, step).expect("odd steps work");
                    log += ((rate - h) / tuned).ln();
                }
                ((log / prepared.len() as f64).exp(), step)
            })
            .collect();
        ranked.sort_by(|a, b| a.0.total_cmp(&b.0));
        let median = ranked[ranked.len() / 2].0;
        print!(
            "L = {l:>5}: {} odd steps, median {median:.3}; best",
            ranked.len()
        );
        for (g, step) in ranked.iter().take(3) {
            print!(" {step} ({:.3}L) {g:.3},", *step as f64 / l as f64);
        }
        println!();
        // By largest quotient: count, geometric mean, best.
        let mut groups: std::collections::BTreeMap<u64, (f64, usize, f64)> = Default::default();
        for &(g, step) in &ranked {
            let e = groups
                .entry(quotients(step as u64, l as u64).0)
                .or_insert((0.0, 0, f64::MAX));
            e.0 += g.ln();
            e.1 += 1;
            e.2 = e.2.min(g);
        }
        for (q, (lg, n, best)) in groups.iter().take(4) {
            println!(
                "    largest quotient {q:>3}: {n:>4} steps, geomean {:.3}, best {best:.3}",
                (lg / *n as f64).exp()
            );
        }
        let rest: Vec<_> = ranked
            .iter()
            .filter(|r| quotients(r.1 as u64, l as u64).0 > 10)
            .collect();
        if !rest.is_empty() {
            let lg: f64 = rest.iter().map(|r| r.0.ln()).sum();
            println!(
                "    largest quotient > 10: {:>4} steps, geomean {:.3}",
                rest.len(),
                (lg / rest.len() as f64).exp()
            );
        }
        for (name, step) in steps(bits) {
            let rank = ranked.iter().position(|r| r.1 == step).expect("odd") + 1;
            println!(
                "    {name:>7} step {step:>5} ({:.3}L): {:.3}, rank {rank}, largest quotient {}",
                step as f64 / l as f64,
                ranked[rank - 1].0,
                quotients(step as u64, l as u64).0
            );
        }
    }
}
