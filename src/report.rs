//! Stage 7: what a codec costs, in words a reviewer reads in the generated module docs and the
//! build log: entropy, exact rate, excess, table bytes, and a line per symbol.

use crate::quantize::{cross_entropy, entropy, log2};
use crate::spec::{show, CodecSpec, Kind, Method};
use crate::tables::Tables;
use crate::verify::Verified;

/// Excess above which the build script suggests a larger table.
pub const EXCESS_WARNING_PERCENT: f64 = 0.5;

/// Figures for one codec.
#[derive(Debug, Clone)]
pub struct Report {
    pub name: String,
    pub symbols: usize,
    pub scale_bits: u32,
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
                self.scale_bits,
                1u32 << self.scale_bits
            ),
            String::new(),
            "| figure | bits/symbol |".to_string(),
            "|---|---|".to_string(),
            format!("| entropy of the training data | {:.6} |", self.entropy),
            format!("| with the rounded slots | {:.6} |", self.quantised),
            if self.method == "rANS" {
                // rANS has no state chain to solve; its 32-bit state adds under 10^-4.
                format!(
                    "| rate of these tables (the slots' cost) | {:.6} |",
                    self.exact_rate
                )
            } else {
                format!("| exact rate of these tables | {:.6} |", self.exact_rate)
            },
        ];
        if let Some(m) = self.measured_rate {
            d.push(format!("| measured on the training data | {m:.6} |"));
        }
        d.push(String::new());
        d.push(match self.excess_percent() {
            Some(p) => format!(
                "Excess: {:.6} bits/symbol ({p:.3} % above the entropy). Tables: {} bytes. Spread: {}.",
                self.excess_bits(),
                self.table_bytes,
                self.spread
            ),
            None => format!(
                "Excess: {:.6} bits/symbol (the training data has zero entropy). Tables: {} bytes. Spread: {}.",
                self.excess_bits(),
                self.table_bytes,
                self.spread
            ),
        });
        d.push(format!(
            "Trained on {} symbols; {} training sequence(s) round-tripped at generation time into {} bytes.",
            self.training_symbols, self.verified.sequences, self.verified.stream_bytes
        ));
        d.push(String::new());
        d.push("| symbol | count | slots | ideal bits | coded bits |".to_string());
        d.push("|---|---|---|---|---|".to_string());
        let total = self.training_symbols.max(1) as f64;
        let l = f64::from(1u32 << self.scale_bits);
        for (name, count, slots) in &self.lines {
            let ideal = if *count > 0 {
                format!("{:.3}", -log2(*count as f64 / total))
            } else {
                "-".to_string()
            };
            d.push(format!(
                "| {} | {count} | {slots} | {ideal} | {:.3} |",
                name.replace('|', "\\|"),
                -log2(f64::from(*slots) / l)
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

/// Assembles the report of one codec.
pub fn build(
    codec: &CodecSpec,
    counts: &[u64],
    tables: &Tables,
    exact_rate: f64,
    verified: Verified,
    table_bytes: usize,
) -> Report {
    let lines = codec
        .symbols
        .iter()
        .zip(counts)
        .zip(tables.slots())
        .map(|((s, &c), &q)| {
            let name = match (codec.kind, s) {
                (Kind::Tokens, _) => show(s).trim_matches('"').to_string(),
                _ => show(s),
            };
            (name, c, q)
        })
        .collect();
    Report {
        name: codec.name.clone(),
        symbols: codec.symbols.len(),
        scale_bits: tables.scale_bits(),
        training_symbols: counts.iter().sum(),
        entropy: entropy(counts),
        quantised: cross_entropy(counts, tables.slots(), tables.scale_bits()),
        exact_rate,
        measured_rate: (verified.symbols > 0)
            .then(|| verified.payload_bits as f64 / verified.symbols as f64),
        table_bytes,
        spread: match tables {
            Tables::Tans(t) => t.spread_rule.describe(),
            Tables::Rans(_) => "none (rANS: symbols own contiguous slot ranges)",
        },
        method: match codec.method {
            Method::Tans => "tANS",
            Method::Rans => "rANS",
        },
        lanes: codec.lanes,
        verified,
        lines,
    }
}
