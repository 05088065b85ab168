//! The last stage: what a codec costs, in words a reviewer reads in the generated module docs
//! and the build log: entropy, exact rate, excess, table bytes, and a line per symbol.

use crate::method::{Direction, TableLayout};
use crate::model::Model;
use crate::plan::TableSet;
use crate::quantize::{cross_entropy, entropy, log2};
use crate::sizing::{self, Rule, Sizing, Weighed};
use crate::spec::{CodecSpec, Method, MAX_TABLE_BITS};
use crate::verify::Verified;

/// Excess above which the build script suggests larger tables, and which chosen tables
/// stay within when they can and no budget says otherwise.
pub const EXCESS_WARNING_PERCENT: f64 = 0.5;

/// Tables chosen without a budget above this size get a note in the build log: a device
/// has a few KiB for them (DESIGN.md).
pub const LARGE_TABLES_BYTES: usize = 16 * 1024;

/// Most rows of the table of sizes weighed, per method and lookup.
const ROWS_PER_METHOD: usize = 5;

/// Excess of `rate` as a percentage of `entropy` (`None` when the entropy is zero).
pub fn excess_percent(rate: f64, entropy: f64) -> Option<f64> {
    (entropy > 0.0).then(|| 100.0 * (rate - entropy) / entropy)
}

/// Figures for one codec.
#[derive(Debug, Clone)]
pub struct Report {
    pub name: String,
    pub symbols: usize,
    pub table_bits: u32,
    pub training_symbols: u64,
    /// Shannon entropy of the training counts, bits/symbol.
    pub entropy: f64,
    /// Cross-entropy under the quantised slots (entropy plus the quantisation cost).
    pub quantised: f64,
    /// Exact expected code length of the finished tables (stationary state chain).
    pub exact_rate: f64,
    /// Measured on the training sequences by the reference coder: payload bits/symbol.
    pub measured_rate: Option<f64>,
    pub table_bytes: usize,
    pub spread: &'static str,
    pub method: &'static str,
    pub lanes: u32,
    /// How streams are framed, in words: `tagged streams`, `compact frames`, `bare frames`.
    pub framing: &'static str,
    pub verified: Verified,
    /// Symbols of samples and inline text; the round trip covers at most the first
    /// `load::KEPT_SYMBOLS` of each sample.
    pub sequence_symbols: u64,
    /// Per symbol: name, count, slots.
    pub lines: Vec<(String, u64, u32)>,
    /// The codec's flash budget, if it has one.
    pub flash_budget: Option<usize>,
    /// How open sizes were chosen (`None`: the spec gave them all).
    pub sizing: Option<Sizing>,
    /// Average length of a Huffman code for the training counts, bits/symbol (`None`
    /// without training data).
    pub huffman: Option<f64>,
    /// Every static table, with the direction that reads it.
    pub layout: TableLayout,
    /// Training files (samples and counts files) as declared, with the FNV-1a of their bytes.
    pub files: Vec<(String, u64)>,
    /// Integers codecs: the figures per value, offset bits included.
    pub integers: Option<IntegerFigures>,
    /// Codecs with an escape: what an escaped value costs.
    pub escape: Option<EscapeFigures>,
    /// Context codecs: the table sets and what they gain.
    pub contexts: Option<ContextFigures>,
}

/// A context codec's figures: its table sets and their gain over one set (order 0).
#[derive(Debug, Clone)]
pub struct ContextFigures {
    /// `context_tables`: the most sets allowed (a power of two at most it).
    pub most: usize,
    pub sets: Vec<SetFigures>,
    /// The first symbol's context, as a label.
    pub first: String,
    /// H(X|Y) of the training pairs (the bound a context codec aims at), and H(X) of
    /// the same symbols, bits/symbol.
    pub conditional_entropy: f64,
    pub order0_entropy: f64,
    /// Percent below one table set, priced at the quantised rates: on the training
    /// blocks, and on the held-out ones (every fifth block of 256 symbols).
    pub train_gain: f64,
    pub held_gain: f64,
    /// All sets' tables together.
    pub table_bytes: usize,
    /// The price the sets were chosen by, bits: the held-out blocks' (the training data's
    /// when nothing is held out) under the sets' slots.
    pub price: f64,
}

/// One table set of a context codec.
#[derive(Debug, Clone)]
pub struct SetFigures {
    pub contexts: Vec<String>,
    pub symbols: u64,
    pub entropy: f64,
    pub rate: f64,
}

impl ContextFigures {
    pub fn new(
        spec: &CodecSpec,
        c: &crate::context::Clustering,
        set_of: &[u8],
        members: &[(&Vec<u64>, f64)],
        conditional_entropy: f64,
        table_bytes: usize,
        most: usize,
    ) -> ContextFigures {
        let kind = spec.kind.as_ref();
        let n = kind.alphabet_len();
        let mut column = vec![0u64; n];
        // `members`: each set's counts and rate; `set_of`: each context's set.
        let sets = members
            .iter()
            .enumerate()
            .map(|(j, &(counts, rate))| {
                for (t, &x) in column.iter_mut().zip(counts) {
                    *t = t.saturating_add(x);
                }
                SetFigures {
                    contexts: (0..n)
                        .filter(|&ctx| set_of.get(ctx).map_or(0, |&s| usize::from(s)) == j)
                        .map(|ctx| kind.label(ctx))
                        .collect(),
                    symbols: counts.iter().fold(0u64, |a, &x| a.saturating_add(x)),
                    entropy: entropy(counts),
                    rate,
                }
            })
            .collect();
        let gain = |order0: f64, with: f64| {
            if order0 > 0.0 {
                100.0 * (order0 - with) / order0
            } else {
                0.0
            }
        };
        ContextFigures {
            most,
            sets,
            first: kind.label(crate::context::FIRST_CONTEXT),
            conditional_entropy,
            order0_entropy: entropy(&column),
            price: if c.order0_held_bits > 0.0 {
                c.held_bits
            } else {
                c.train_bits
            },
            train_gain: gain(c.order0_train_bits, c.train_bits),
            held_gain: gain(c.order0_held_bits, c.held_bits),
            table_bytes,
        }
    }

    pub fn lines(&self) -> Vec<String> {
        let mut d = vec![
            String::new(),
            format!(
                "Contexts: each lane's previous symbol chooses one of {} table sets (at most {}; a lane's first symbol has the context {}). {:.2} % below one table set on the training data, {:.2} % on held-out data (every fifth block of 256 symbols); H(X|Y) = {:.4} bits/symbol against H(X) = {:.4}; {} bytes of tables in all.",
                self.sets.len(),
                self.most,
                self.first,
                self.train_gain,
                self.held_gain,
                unsigned(self.conditional_entropy),
                unsigned(self.order0_entropy),
                self.table_bytes
            ),
            String::new(),
            "| set | contexts | symbols | entropy | exact rate | excess |".to_string(),
            "|---|---|---:|---:|---:|---:|".to_string(),
        ];
        for (j, s) in self.sets.iter().enumerate() {
            let shown: Vec<&str> = s.contexts.iter().take(12).map(String::as_str).collect();
            let more = s.contexts.len().saturating_sub(12);
            d.push(format!(
                "| {j} | {}{} | {} | {:.4} | {:.4} | {} |",
                shown.join(", ").replace('|', "\\|"),
                if more > 0 {
                    format!(" and {more} more")
                } else {
                    String::new()
                },
                s.symbols,
                unsigned(s.entropy),
                unsigned(s.rate),
                match excess_percent(s.rate, s.entropy) {
                    Some(p) => format!("{:.3} %", unsigned(p)),
                    None => "-".into(),
                }
            ));
        }
        d
    }
}

/// What an escaped value costs: the escape symbol's bits and the raw bits after it.
#[derive(Debug, Clone)]
pub struct EscapeFigures {
    /// -log2 of the escape's share of the table.
    pub symbol_bits: f64,
    pub raw_bits: u32,
    pub slots: u32,
    /// The count the escape was given, and whether it came from the spec's `escape_share`.
    pub count: u64,
    pub from_share: bool,
    /// Escaped symbols a value takes (a chars codec's escaped character: three).
    pub units: u32,
}

impl EscapeFigures {
    pub fn line(&self, table_bits: u32) -> String {
        format!(
            "Escape: a value outside the alphabet costs about {:.2} bits: {}the escape symbol's {:.2} ({} of {} slots, from a count of {}{}) plus {} raw bits.",
            f64::from(self.units) * (self.symbol_bits + f64::from(self.raw_bits)),
            if self.units > 1 {
                format!("{} times ", self.units)
            } else {
                String::new()
            },
            self.symbol_bits,
            self.slots,
            1u32 << table_bits,
            self.count,
            if self.from_share {
                ", the spec's escape_share"
            } else {
                ": how often the training data left the alphabet, at least 1/1024 of it"
            },
            self.raw_bits
        )
    }
}

/// An integers codec's figures, in bits per value.
#[derive(Debug, Clone)]
pub struct IntegerFigures {
    /// Order-0 entropy of the training values (with `delta`, of their differences).
    pub value_entropy: f64,
    /// Mean offset bits of the training values.
    pub offset_bits: f64,
    /// The bins' coded size: their symbols' entropy plus the offset bits (what the bins
    /// were chosen to minimise).
    pub layout_cost: f64,
    /// The exact rate of the tables plus the offset bits: the size a stream of data like
    /// the training data comes to, first states and header aside.
    pub bound: f64,
    pub bins: usize,
    pub max_symbols: usize,
    pub widest: u32,
}

impl IntegerFigures {
    fn doc_lines(&self) -> Vec<String> {
        vec![
            String::new(),
            format!(
                "Values: {} bins (at most {}; aligned power-of-two bins, the partition of the range with the least coded size of the training data), offsets of 0 to {} bits.",
                self.bins, self.max_symbols, self.widest
            ),
            String::new(),
            "| figure | bits/value |".to_string(),
            "|---|---|".to_string(),
            format!("| entropy of the training values | {:.6} |", unsigned(self.value_entropy)),
            format!("| bins: symbol entropy plus offset bits | {:.6} |", unsigned(self.layout_cost)),
            format!("| mean offset bits | {:.6} |", unsigned(self.offset_bits)),
            format!("| exact rate of these tables plus offset bits | {:.6} |", unsigned(self.bound)),
        ]
    }
}

impl Report {
    /// Bits per symbol above the entropy.
    pub fn excess_bits(&self) -> f64 {
        self.exact_rate - self.entropy
    }

    /// Excess as a percentage of the entropy (`None` when the entropy is zero).
    pub fn excess_percent(&self) -> Option<f64> {
        excess_percent(self.exact_rate, self.entropy)
    }

    /// What the tables save against a Huffman code for the same counts, percent of its length.
    pub fn saving_percent(&self) -> Option<f64> {
        self.huffman
            .filter(|&h| h > 0.0)
            .map(|h| 100.0 * (h - self.exact_rate) / h)
    }

    /// The report as doc-comment lines (without the `///`).
    pub fn doc_lines(&self) -> Vec<String> {
        let mut d = vec![
            format!(
                "Codec `{}`: {} symbols, {}, {} lane(s), table of 2^{} = {} slots, {}.",
                self.name,
                self.symbols,
                self.method,
                self.lanes,
                self.table_bits,
                1u32 << self.table_bits,
                self.framing
            ),
            String::new(),
            "| figure | bits/symbol |".to_string(),
            "|---|---|".to_string(),
            format!(
                "| entropy of the training data | {:.6} |",
                unsigned(self.entropy)
            ),
            format!(
                "| with the rounded slots | {:.6} |",
                unsigned(self.quantised)
            ),
            if self.method == "rANS" {
                // rANS has no state chain to solve; its 32-bit state adds under 10^-4.
                format!(
                    "| rate of these tables (the slots' cost) | {:.6} |",
                    unsigned(self.exact_rate)
                )
            } else {
                format!(
                    "| exact rate of these tables | {:.6} |",
                    unsigned(self.exact_rate)
                )
            },
        ];
        if let Some(m) = self.measured_rate {
            d.push(format!(
                "| measured on the training data | {:.6} |",
                unsigned(m)
            ));
        }
        d.push(String::new());
        d.push(match self.excess_percent() {
            Some(p) => format!(
                "Excess: {:.6} bits/symbol ({:.3} % above the entropy). Tables: {} bytes. Spread: {}.",
                unsigned(self.excess_bits()),
                unsigned(p),
                self.table_bytes,
                self.spread
            ),
            None => format!(
                "Excess: {:.6} bits/symbol (the training data has zero entropy). Tables: {} bytes. Spread: {}.",
                unsigned(self.excess_bits()),
                self.table_bytes,
                self.spread
            ),
        });
        d.push(if self.verified.symbols < self.sequence_symbols {
            format!(
                "Trained on {} symbols; {} training sequence(s), {} of their symbols, round-tripped at generation time into {} bytes.",
                self.training_symbols, self.verified.sequences, self.verified.symbols, self.verified.stream_bytes
            )
        } else {
            format!(
                "Trained on {} symbols; {} training sequence(s) round-tripped at generation time into {} bytes.",
                self.training_symbols, self.verified.sequences, self.verified.stream_bytes
            )
        });
        if let Some(h) = self.huffman {
            d.push(format!(
                "A Huffman code for the same counts averages {:.6} bits/symbol; these tables code {:.3} % below it.",
                unsigned(h),
                unsigned(self.saving_percent().unwrap_or(0.0))
            ));
        }
        if let Some(i) = &self.integers {
            d.extend(i.doc_lines());
        }
        if let Some(e) = &self.escape {
            d.push(String::new());
            d.push(e.line(self.table_bits));
        }
        if let Some(c) = &self.contexts {
            d.extend(c.lines());
        }
        d.extend(self.sizing_lines());
        d.push(String::new());
        d.push("| symbol | count | slots | ideal bits | coded bits |".to_string());
        d.push("|---|---|---|---|---|".to_string());
        let total = self.training_symbols.max(1) as f64;
        let l = f64::from(1u32 << self.table_bits);
        for (name, count, slots) in &self.lines {
            let ideal = if *count > 0 {
                format!("{:.3}", unsigned(-log2(*count as f64 / total)))
            } else {
                "-".to_string()
            };
            d.push(format!(
                "| {} | {count} | {slots} | {ideal} | {:.3} |",
                name.replace('|', "\\|"),
                unsigned(-log2(f64::from(*slots) / l))
            ));
        }
        d
    }

    /// The flash budget and the sizes weighed, if any, as doc lines.
    fn sizing_lines(&self) -> Vec<String> {
        let mut d = Vec::new();
        let Some(sizing) = &self.sizing else {
            if let Some(budget) = self.flash_budget {
                d.push(format!(
                    "Flash budget: {budget} bytes; these tables take {}.",
                    self.table_bytes
                ));
            }
            return d;
        };
        let Some(chosen) = sizing.choice() else {
            return d;
        };
        let rule = match sizing.rule {
            Rule::Budget(budget) => format!(
                "the lowest rate within the flash budget of {budget} bytes (rates within {} % of it tie; ties go to faster decoding, then fewer bytes)",
                sizing::TIE * 100.0
            ),
            Rule::Smallest => format!(
                "the smallest tables within {EXCESS_WARNING_PERCENT} % of the entropy"
            ),
            Rule::LowestRate => format!(
                "no tables up to table_bits = {MAX_TABLE_BITS} come within {EXCESS_WARNING_PERCENT} % of the entropy, so the lowest rate (rates within {} % of it tie; ties go to fewer bytes)",
                sizing::TIE * 100.0
            ),
        };
        d.push(String::new());
        d.push(format!(
            "Sizes chosen: {rule}. Chosen: {}.",
            chosen.candidate.describe()
        ));
        d.push(String::new());
        d.push(
            "| method | symbol lookup | table_bits | encode bytes | decode bytes | total bytes | excess | |"
                .to_string(),
        );
        d.push("|---|---|---|---|---|---|---|---|".to_string());
        for w in rows_shown(sizing) {
            let c = &w.candidate;
            let (method, lookup) = match c.method {
                Method::Tans => ("tANS", "-"),
                Method::Rans => ("rANS", sizing::lookup_name(c.lookup)),
            };
            let excess = match excess_percent(w.rate, self.entropy) {
                Some(p) => format!("{:.3} %", unsigned(p)),
                None => "-".to_string(),
            };
            let mark = if w == chosen { "chosen" } else { "" };
            d.push(format!(
                "| {method} | {lookup} | {} | {} | {} | {} | {excess} | {mark} |",
                c.table_bits, c.encode_bytes, c.decode_bytes, c.bytes
            ));
        }
        d
    }

    /// One line for the build log.
    pub fn summary(&self) -> String {
        let excess = match self.excess_percent() {
            Some(p) => format!("{p:.3} %"),
            None => format!("{:.4} bits", self.excess_bits()),
        };
        let mut line = format!(
            "codec `{}`: entropy {:.4} bits/symbol, exact rate {:.4}, excess {excess}, tables {} bytes",
            self.name, self.entropy, self.exact_rate, self.table_bytes
        );
        if let Some(budget) = self.flash_budget {
            line.push_str(&format!(" (flash budget {budget})"));
        }
        if let Some(chosen) = self.sizing.as_ref().and_then(Sizing::choice) {
            line.push_str(&format!(", chosen: {}", chosen.candidate.describe()));
        }
        line
    }
}

/// `x` with a negative zero made positive (`-0.0 + 0.0` is `+0.0` in IEEE 754), so that a
/// figure prints the same whatever sign of zero an optimiser's rounding left.
fn unsigned(x: f64) -> f64 {
    x + 0.0
}

/// The rows of the table of sizes weighed: per method and lookup, the sizes nearest the
/// chosen one (which is always among them), in the order weighed.
fn rows_shown(sizing: &Sizing) -> Vec<&Weighed> {
    let Some(chosen) = sizing.choice() else {
        return Vec::new();
    };
    let at = chosen.candidate.table_bits;
    let mut shown: Vec<(usize, &Weighed)> = Vec::new();
    let mut groups: Vec<(Method, crate::spec::Lookup)> = Vec::new();
    for w in &sizing.weighed {
        let g = (w.candidate.method, w.candidate.lookup);
        if !groups.contains(&g) {
            groups.push(g);
        }
    }
    for g in groups {
        let mut members: Vec<(usize, &Weighed)> = sizing
            .weighed
            .iter()
            .enumerate()
            .filter(|(_, w)| (w.candidate.method, w.candidate.lookup) == g)
            .collect();
        members.sort_by_key(|(_, w)| (w.candidate.table_bits.abs_diff(at), w.candidate.table_bits));
        members.truncate(ROWS_PER_METHOD);
        shown.extend(members);
    }
    shown.sort_by_key(|&(i, _)| i);
    shown.into_iter().map(|(_, w)| w).collect()
}

/// Assembles the report of one codec (its one table set).
pub fn build(
    codec: &CodecSpec,
    model: &Model,
    set: &TableSet,
    verified: Verified,
    sizing: Option<Sizing>,
) -> Report {
    let counts = &model.counts[..];
    let sequence_symbols = model.sequence_symbols;
    let kind = codec.kind.as_ref();
    let lines = (0..kind.alphabet_len())
        .zip(counts)
        .zip(&set.slots)
        .map(|((s, &c), &q)| (kind.label(s), c, q))
        .collect();
    Report {
        name: codec.name.clone(),
        symbols: kind.alphabet_len(),
        table_bits: set.tables.table_bits(),
        training_symbols: counts.iter().fold(0u64, |a, &c| a.saturating_add(c)),
        entropy: entropy(counts),
        quantised: cross_entropy(counts, &set.slots, set.tables.table_bits()),
        exact_rate: set.rate,
        measured_rate: (verified.symbols > 0)
            .then(|| verified.payload_bits as f64 / verified.symbols as f64),
        table_bytes: set.layout.bytes(),
        spread: set.tables.spread_description(),
        method: set.tables.method_name(),
        lanes: codec.lanes,
        framing: match codec.framing {
            crate::spec::Framing::Tagged => "tagged streams",
            crate::spec::Framing::Compact => "compact frames",
            crate::spec::Framing::Bare => "bare frames",
        },
        verified,
        sequence_symbols,
        lines,
        flash_budget: codec.flash_budget,
        sizing,
        huffman: huffman_average(counts),
        layout: set.layout.clone(),
        files: Vec::new(),
        integers: integer_figures(codec, model, set.rate),
        escape: kind.escape().map(|e| {
            let slots = set.slots.get(e.symbol).copied().unwrap_or(1);
            let table_bits = set.tables.table_bits();
            EscapeFigures {
                symbol_bits: f64::from(table_bits) - log2(f64::from(slots.max(1))),
                raw_bits: e.raw_bits,
                slots,
                count: counts.get(e.symbol).copied().unwrap_or(0),
                from_share: e.share.is_some(),
                units: if kind.chars().is_some() {
                    crate::kind::chars::ESCAPE_DIGITS as u32
                } else {
                    1
                },
            }
        }),
        contexts: None,
    }
}

// ---- Review figures: Huffman baseline, frame cost, the Markdown report ----

/// Average code length, bits/symbol, of a Huffman code for `counts` (symbols that never
/// occur get no code), by Huffman's algorithm (D. A. Huffman, "A Method for the
/// Construction of Minimum-Redundancy Codes", Proc. IRE 40(9), 1952): merge the two
/// lightest nodes until one is left; the average length is the sum of the merged weights
/// over the total. One symbol needs no bits. `None` without training data.
pub fn huffman_average(counts: &[u64]) -> Option<f64> {
    use std::cmp::Reverse;
    use std::collections::BinaryHeap;
    // (weight, order): the order breaks ties, so the result never depends on the heap.
    let mut heap: BinaryHeap<Reverse<(u128, usize)>> = counts
        .iter()
        .enumerate()
        .filter(|(_, &c)| c > 0)
        .map(|(i, &c)| Reverse((u128::from(c), i)))
        .collect();
    let total: u128 = heap.iter().map(|Reverse((w, _))| w).sum();
    if total == 0 {
        return None;
    }
    let mut merged: u128 = 0;
    let mut order = counts.len();
    while heap.len() > 1 {
        let (Some(Reverse((a, _))), Some(Reverse((b, _)))) = (heap.pop(), heap.pop()) else {
            break;
        };
        merged += a + b;
        heap.push(Reverse((a + b, order)));
        order += 1;
    }
    Some(merged as f64 / total as f64)
}

/// Symbols in the frames whose cost the report gives (a radio frame, README "framing").
pub const FRAME_SYMBOLS: usize = 64;
/// Frames drawn for that figure.
pub const FRAMES_DRAWN: usize = 256;
/// Seed of the generator that draws them: the figure is the same on every run.
pub const FRAME_SEED: u64 = 0x7072_6563_6173_7421;

/// What a frame of [`FRAME_SYMBOLS`] symbols costs, measured with the reference coder.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrameCost {
    /// Mean bytes of a whole frame.
    pub bytes: f64,
    /// Mean header bytes.
    pub header: f64,
    /// Mean information content of a frame's symbols under the training distribution, bits.
    pub ideal_bits: f64,
}

impl FrameCost {
    /// Mean bytes above the symbols' own bits.
    pub fn overhead(&self) -> f64 {
        self.bytes - self.ideal_bits / 8.0
    }
}

/// SplitMix64 (Steele, Lea, Flood, "Fast Splittable Pseudorandom Number Generators",
/// OOPSLA 2014; from memory): small, seeded, the same everywhere.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }
}

/// The mean cost of [`FRAMES_DRAWN`] frames of [`FRAME_SYMBOLS`] symbols drawn i.i.d. from
/// the training counts with a fixed-seed SplitMix64, each encoded by the reference coder
/// (`verify.rs`) in the codec's framing and lanes. `None` without training data.
pub fn frame_cost(plan: &crate::plan::CodecPlan) -> Option<FrameCost> {
    let set = plan.sets.first()?;
    let counts = &plan.model.counts;
    let total = counts.iter().fold(0u64, |a, &c| a.saturating_add(c));
    if total == 0 {
        return None;
    }
    // Cumulative counts for drawing by binary search.
    let mut cum = Vec::with_capacity(counts.len());
    let mut acc = 0u64;
    for &c in counts {
        acc = acc.saturating_add(c);
        cum.push(acc);
    }
    let coder = crate::verify::Reference::framed(
        &set.tables,
        plan.fingerprint,
        plan.spec.framing,
        plan.spec.lanes,
    );
    let mut rng = SplitMix(FRAME_SEED);
    let (mut bytes, mut ideal) = (0usize, 0.0f64);
    for _ in 0..FRAMES_DRAWN {
        let frame: Vec<u16> = (0..FRAME_SYMBOLS)
            .map(|_| {
                // Modulo bias is below 2^-40 for any total a spec can hold in practice.
                let r = rng.next() % total;
                cum.partition_point(|&c| c <= r) as u16
            })
            .collect();
        ideal += frame
            .iter()
            .map(|&s| -log2(counts[usize::from(s)] as f64 / total as f64))
            .sum::<f64>();
        bytes += coder.encode(&frame).len();
    }
    let n = FRAMES_DRAWN as f64;
    Some(FrameCost {
        bytes: bytes as f64 / n,
        header: crate::verify::header_len(plan.spec.framing, FRAME_SYMBOLS) as f64,
        ideal_bits: ideal / n,
    })
}

fn direction_name(d: Direction) -> &'static str {
    match d {
        Direction::Encode => "encode",
        Direction::Decode => "decode",
        Direction::Both => "both",
    }
}

/// The Markdown report of one codec (`precast report`): every figure from its plan's
/// [`Report`], the frame cost from [`frame_cost`].
pub fn markdown(plan: &crate::plan::CodecPlan) -> String {
    let r = &plan.report;
    let mut m = String::new();
    let mut line = |s: String| {
        m.push_str(&s);
        m.push('\n');
    };
    line(format!("## Codec `{}`", r.name));
    line(String::new());
    line(format!(
        "{} symbols ({}), {}, {} lane(s), table_bits = {} ({} slots), {}, fingerprint 0x{:04x}.",
        r.symbols,
        plan.spec.kind.name(),
        r.method,
        r.lanes,
        r.table_bits,
        1u32 << r.table_bits,
        r.framing,
        plan.fingerprint
    ));
    line(String::new());
    line("| figure | bits/symbol |".into());
    line("|---|---:|".into());
    line(format!(
        "| entropy (Shannon) | {:.6} |",
        unsigned(r.entropy)
    ));
    line(format!(
        "| quantisation cost, KL(counts ‖ slots) | {:.6} |",
        unsigned(r.quantised - r.entropy)
    ));
    line(format!(
        "| exact rate of these tables | {:.6} |",
        unsigned(r.exact_rate)
    ));
    line(format!(
        "| excess (rate − entropy) | {:.6} ({}) |",
        unsigned(r.excess_bits()),
        match r.excess_percent() {
            Some(p) => format!("{:.3} %", unsigned(p)),
            None => "zero entropy".into(),
        }
    ));
    match r.huffman {
        Some(h) => {
            line(format!(
                "| Huffman code for the same counts (Huffman 1952) | {:.6} |",
                unsigned(h)
            ));
            line(format!(
                "| saved against it | {:.6} ({:.3} %) |",
                unsigned(h - r.exact_rate),
                unsigned(r.saving_percent().unwrap_or(0.0))
            ));
        }
        None => line("| Huffman code for the same counts | no training data |".into()),
    }
    if let Some(e) = &r.escape {
        line(String::new());
        line(e.line(r.table_bits));
    }
    if let Some(c) = &r.contexts {
        for l in c.lines() {
            line(l);
        }
    }
    line(String::new());
    line("### Tables".into());
    line(String::new());
    line("| table | entry | entries | bytes/entry | bytes | read by |".into());
    line("|---|---|---:|---:|---:|---|".into());
    for t in &r.layout.tables {
        line(format!(
            "| `{}` | `{}` | {} | {} | {} | {} |",
            t.name,
            t.entry,
            t.entries,
            t.entry_bytes,
            t.bytes(),
            direction_name(t.direction)
        ));
    }
    line(format!(
        "\nEncode: {} bytes; decode: {} bytes; all tables: {} bytes{}.",
        r.layout.encode_bytes(),
        r.layout.decode_bytes(),
        r.layout.bytes(),
        match r.flash_budget {
            Some(b) => format!(" (flash_budget = {b})"),
            None => String::new(),
        }
    ));
    let sizing = r.sizing_lines();
    if !sizing.is_empty() {
        for l in sizing {
            line(l);
        }
    }
    line(String::new());
    line("### Frames".into());
    line(String::new());
    match frame_cost(plan) {
        Some(f) => line(format!(
            "A {FRAME_SYMBOLS}-symbol frame ({}) takes {:.2} bytes on average ({} of header), {:.2} bytes above its symbols' own {:.1} bits. Measured with the reference coder on {FRAMES_DRAWN} frames drawn i.i.d. from the training counts by SplitMix64 with the fixed seed 0x{FRAME_SEED:016x}.",
            r.framing,
            f.bytes,
            f.header,
            unsigned(f.overhead()),
            f.ideal_bits
        )),
        None => line("No training data: no frames to draw.".into()),
    }
    line(String::new());
    line("### Training data".into());
    line(String::new());
    line(format!(
        "{} symbols in all; {} training sequence(s) round-tripped by the reference coder.",
        r.training_symbols, r.verified.sequences
    ));
    if !r.files.is_empty() {
        line(String::new());
        line("| file | FNV-1a 64 |".into());
        line("|---|---|".into());
        for (name, hash) in &r.files {
            line(format!("| `{}` | `{hash:016x}` |", name.replace('`', "'")));
        }
    }
    line(String::new());
    line("### Symbols".into());
    line(String::new());
    line("| symbol | count | probability | slots | ideal bits | assigned bits |".into());
    line("|---|---:|---:|---:|---:|---:|".into());
    let total = r.training_symbols.max(1) as f64;
    let l = f64::from(1u32 << r.table_bits);
    for (name, count, slots) in &r.lines {
        let p = *count as f64 / total;
        let ideal = if *count > 0 {
            format!("{:.3}", unsigned(-log2(p)))
        } else {
            "-".into()
        };
        line(format!(
            "| {} | {count} | {:.6} | {slots} | {ideal} | {:.3} |",
            name.replace('|', "\\|"),
            p,
            unsigned(-log2(f64::from(*slots) / l))
        ));
    }
    m
}

/// The per-value figures of an integers codec.
fn integer_figures(codec: &CodecSpec, model: &Model, rate: f64) -> Option<IntegerFigures> {
    let ints = codec.kind.integers()?;
    let counts = &model.place_counts;
    let total: u64 = counts.values().fold(0u64, |a, &c| a.saturating_add(c));
    let per_bin = crate::kind::integers::bin_counts(&ints.bins, counts);
    let offset_bits = if total == 0 {
        0.0
    } else {
        ints.bins
            .iter()
            .zip(&per_bin)
            .map(|(b, &c)| c as f64 * f64::from(b.width))
            .sum::<f64>()
            / total as f64
    };
    let values: Vec<u64> = counts.values().copied().collect();
    Some(IntegerFigures {
        value_entropy: entropy(&values),
        offset_bits,
        layout_cost: crate::kind::integers::coded_bits(&ints.bins, counts) / (total.max(1)) as f64,
        bound: rate + offset_bits,
        bins: ints.bins.len(),
        max_symbols: ints.domain.max_symbols,
        widest: ints.max_width(),
    })
}
