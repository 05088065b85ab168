//! One typed plan per codec, carried from the validated spec to emission: the spec's choices
//! (kind, method, framing, lanes), the training model, and one or more table sets, each
//! with its slots, tables, rate and layout. A codec has exactly one table set today;
//! contexts will give it several, so everything downstream iterates over `sets`.

use crate::error::{Error, Result};
use crate::kind::InputMap;
use crate::method::{TableLayout, Tables};
use crate::model::{self, Model};
use crate::quantize;
use crate::report::{self, Report};
use crate::sizing;
use crate::spec::CodecSpec;
use crate::verify::{self, Verified};

/// One set of tables and what it costs.
#[derive(Debug, Clone)]
pub struct TableSet {
    pub slots: Vec<u32>,
    pub tables: Tables,
    /// Bits per symbol for the training distribution (tANS: exact; rANS: the slots' cost).
    pub rate: f64,
    pub layout: TableLayout,
}

/// A codec ready to emit.
#[derive(Debug, Clone)]
pub struct CodecPlan {
    /// The spec with every size decided: given, or chosen (see `report.sizing`).
    pub spec: CodecSpec,
    pub model: Model,
    pub sets: Vec<TableSet>,
    /// Ties streams to these tables (FORMAT.md).
    pub fingerprint: u16,
    pub input: InputMap,
    pub verified: Verified,
    pub report: Report,
}

impl CodecPlan {
    /// Rows of the encoding table and whether they carry an absent flag.
    pub fn put_rows(&self) -> (usize, bool) {
        sizing::put_rows(&self.input, self.spec.kind.alphabet_len())
    }
}

/// Plans one codec: counts, slots, tables, verification against the reference coder, report.
/// `samples` are its sample files, counted, in the order of its sources.
pub fn plan(spec: &CodecSpec, samples: Vec<crate::load::Sample>) -> Result<CodecPlan> {
    // Later stages' errors carry the codec's name, and its place in the spec when they
    // have none of their own.
    let in_codec = |mut e: Error| {
        if e.location.is_none() {
            e.location = Some(spec.location.clone());
        }
        e.in_codec(&spec.name)
    };
    // Training files and their hashes, in the order of the sources, for the report.
    let files: Vec<(String, u64)> = spec
        .sources
        .iter()
        .filter_map(|s| match s {
            crate::spec::Source::Sample { declared, .. }
            | crate::spec::Source::CountsFile { declared, .. } => Some(declared.clone()),
            _ => None,
        })
        .zip(samples.iter().map(|s| s.hash))
        .collect();
    let model = model::build(spec, samples).map_err(in_codec)?;
    // An integers codec's alphabet (its bins) comes from the training data.
    let bound;
    let spec = match &model.bound {
        Some(kind) => {
            bound = CodecSpec {
                kind: kind.clone(),
                ..spec.clone()
            };
            &bound
        }
        None => spec,
    };
    let input = spec.kind.input();
    let (rows, absent) = sizing::put_rows(&input, spec.kind.alphabet_len());
    let probabilities = model.probabilities();
    let sizing = sizing::choose(spec, &model.counts, &probabilities).map_err(in_codec)?;
    let mut spec = spec.clone();
    if let Some(choice) = sizing.as_ref().and_then(|s| s.choice()) {
        spec.method = choice.candidate.method;
        spec.lookup = choice.candidate.lookup;
        spec.table_bits = choice.candidate.table_bits;
    }
    let set = table_set(
        &spec,
        &model.counts,
        &probabilities,
        spec.table_bits,
        rows,
        absent,
    )
    .map_err(in_codec)?;
    // The tables as built must take what sizing priced them at.
    if let Some(choice) = sizing.as_ref().and_then(|s| s.choice()) {
        if choice.candidate.bytes != set.layout.bytes() {
            return Err(in_codec(Error::internal(
                "the built tables' layout differs from the priced one",
            )));
        }
    }
    let fingerprint = verify::fingerprint(
        spec.kind.tag(),
        &spec.kind.identity(),
        &set.tables,
        spec.lanes,
    );
    let verified = verify::verify(
        &set.tables,
        fingerprint,
        spec.framing,
        spec.lanes,
        &model,
        spec.kind.widths(),
    )
    .map_err(in_codec)?;
    let mut report = report::build(&spec, &model, &set, verified.clone(), sizing);
    report.files = files;
    Ok(CodecPlan {
        spec,
        model,
        sets: vec![set],
        fingerprint,
        input,
        verified,
        report,
    })
}

/// The table set for `counts` at `table_bits`, by the codec's method and lookup.
pub fn table_set(
    spec: &CodecSpec,
    counts: &[u64],
    probabilities: &[f64],
    table_bits: u32,
    rows: usize,
    absent: bool,
) -> Result<TableSet> {
    let slots = quantize::quantize(counts, table_bits)?;
    let (tables, rate) = Tables::build(spec.method, &slots, counts, probabilities, table_bits)?;
    let mut layout = tables.layout(spec.lookup, spec.kind.symbol_bytes(), rows, absent);
    layout.tables.extend(spec.kind.extra_tables(table_bits));
    Ok(TableSet {
        slots,
        tables,
        rate,
        layout,
    })
}

/// The table size (if any, above `plan`'s, up to the largest) that brings its excess under
/// `percent` with the codec's own method and lookup, and its tables' bytes.
pub fn table_bits_for_excess(plan: &CodecPlan, percent: f64) -> Option<(u32, usize)> {
    let entropy = plan.report.entropy;
    let p = plan.model.probabilities();
    let (rows, absent) = plan.put_rows();
    let spec = &plan.spec;
    (spec.table_bits + 1..=crate::spec::MAX_TABLE_BITS).find_map(|bits| {
        let set = table_set(spec, &plan.model.counts, &p, bits, rows, absent).ok()?;
        report::excess_percent(set.rate, entropy)
            .is_some_and(|e| e <= percent)
            .then(|| (bits, set.layout.bytes()))
    })
}
