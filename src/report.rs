//! The last stage: what a codec costs, in words a reviewer reads in the generated module docs
//! and the build log: entropy, exact rate, excess, table bytes, and a line per symbol.

use crate::model::Model;
use crate::plan::TableSet;
use crate::quantize::{cross_entropy, entropy, log2};
use crate::spec::CodecSpec;
use crate::verify::Verified;

/// Excess above which the build script suggests a larger table.
pub const EXCESS_WARNING_PERCENT: f64 = 0.5;

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
    pub verified: Verified,
    /// Symbols of samples and inline text; the round trip covers at most the first
    /// `load::KEPT_SYMBOLS` of each sample.
    pub sequence_symbols: u64,
    /// Per symbol: name, count, slots.
    pub lines: Vec<(String, u64, u32)>,
}

impl Report {
    /// Bits per symbol above the entropy.
    pub fn excess_bits(&self) -> f64 {
        self.exact_rate - self.entropy
    }

    /// Excess as a percentage of the entropy (`None` when the entropy is zero).
    pub fn excess_percent(&self) -> Option<f64> {
        (self.entropy > 0.0).then(|| 100.0 * self.excess_bits() / self.entropy)
    }

    /// The report as doc-comment lines (without the `///`).
    pub fn doc_lines(&self) -> Vec<String> {
        let mut d = vec![
            format!(
                "Codec `{}`: {} symbols, {}, {} lane(s), table of 2^{} = {} slots.",
                self.name,
                self.symbols,
                self.method,
                self.lanes,
                self.table_bits,
                1u32 << self.table_bits
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

    /// One line for the build log.
    pub fn summary(&self) -> String {
        let excess = match self.excess_percent() {
            Some(p) => format!("{p:.3} %"),
            None => format!("{:.4} bits", self.excess_bits()),
        };
        format!(
            "codec `{}`: entropy {:.4} bits/symbol, exact rate {:.4}, excess {excess}, tables {} bytes",
            self.name, self.entropy, self.exact_rate, self.table_bytes
        )
    }
}

/// `x` with a negative zero made positive (`-0.0 + 0.0` is `+0.0` in IEEE 754), so that a
/// figure prints the same whatever sign of zero an optimiser's rounding left.
fn unsigned(x: f64) -> f64 {
    x + 0.0
}

/// Assembles the report of one codec (its one table set).
pub fn build(codec: &CodecSpec, model: &Model, set: &TableSet, verified: Verified) -> Report {
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
        verified,
        sequence_symbols,
        lines,
    }
}
