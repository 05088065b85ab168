//! One typed plan per codec, carried from the validated spec to emission: the spec's choices
//! (kind, method, framing, lanes), the training model, and one or more table sets, each
//! with its slots, tables, rate and layout. A codec has exactly one table set today;
//! contexts will give it several, so everything downstream iterates over `sets`.

use crate::context;
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
    /// Context codecs: the table set of each context symbol (alphabet order); empty with
    /// one table set.
    pub set_of: Vec<u8>,
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
    let mut sizing = sizing;
    if let Some(choice) = sizing.as_ref().and_then(|s| s.choice()) {
        spec.method = choice.candidate.method;
        spec.lookup = choice.candidate.lookup;
        spec.table_bits = choice.candidate.table_bits;
    }
    // A context codec's open table size stops at CONTEXT_TABLE_BITS: every set multiplies
    // the tables, and larger sets gain little.
    if spec.context_tables.is_some()
        && !spec.given.table_bits
        && spec.table_bits > CONTEXT_TABLE_BITS
    {
        let smallest = crate::spec::smallest_table_bits(spec.kind.alphabet_len());
        spec.table_bits = CONTEXT_TABLE_BITS.max(smallest);
        sizing = None;
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
    let pairs = match spec.context_tables {
        Some(_) => Some(context_pairs(&spec, &model).map_err(in_codec)?),
        None => None,
    };
    let (sets, set_of, contexts) = match (spec.context_tables, &pairs) {
        // With a budget and an open size, smaller tables may leave room for more sets: every
        // size from the order-0 choice down is tried, the least held-out price kept.
        (Some(most), Some(pairs)) if spec.flash_budget.is_some() && !spec.given.table_bits => {
            let smallest = crate::spec::smallest_table_bits(spec.kind.alphabet_len());
            let mut best: Option<(f64, u32, ContextSets)> = None;
            for bits in (smallest..=spec.table_bits).rev() {
                let mut at = spec.clone();
                at.table_bits = bits;
                // The order-0 tables at the size already built are those.
                let order0 = if bits == spec.table_bits {
                    set.clone()
                } else {
                    table_set(&at, &model.counts, &probabilities, bits, rows, absent)
                        .map_err(in_codec)?
                };
                let tried = context_sets(&at, &model, pairs, order0, most, rows, absent)
                    .map_err(in_codec)?;
                let price = tried.2.price;
                // Ties keep the larger tables (tried first).
                if best.as_ref().is_none_or(|b| price < b.0) {
                    best = Some((price, bits, tried));
                }
            }
            match best {
                Some((_, bits, (sets, set_of, figures))) => {
                    if bits != spec.table_bits {
                        spec.table_bits = bits;
                        sizing = None;
                    }
                    (sets, set_of, Some(figures))
                }
                None => (vec![set], Vec::new(), None),
            }
        }
        (Some(most), Some(pairs)) => {
            let (sets, set_of, figures) =
                context_sets(&spec, &model, pairs, set, most, rows, absent).map_err(in_codec)?;
            (sets, set_of, Some(figures))
        }
        _ => (vec![set], Vec::new(), None),
    };
    // The fingerprint covers the context map and every table set.
    let mut identity = spec.kind.identity();
    if !set_of.is_empty() {
        identity.extend([0xC0, sets.len() as u8]);
        identity.extend(&set_of);
        for s in &sets[1..] {
            identity.extend(s.tables.identity().1);
        }
    }
    let fingerprint = verify::fingerprint(spec.kind.tag(), &identity, &sets[0].tables, spec.lanes);
    let all: Vec<Tables> = sets.iter().map(|s| s.tables.clone()).collect();
    let verified = verify::verify(
        &all,
        &set_of,
        fingerprint,
        spec.framing,
        spec.lanes,
        &model,
        spec.kind.widths(),
    )
    .map_err(in_codec)?;
    let mut report = report::build(&spec, &model, &sets[0], verified.clone(), sizing);
    report.files = files;
    if let Some(c) = contexts {
        report.table_bytes = c.table_bytes;
        // The codec's rate: each set's at its share of the symbols.
        let total: f64 = c.sets.iter().map(|s| s.symbols as f64).sum();
        if total > 0.0 && c.sets.len() > 1 {
            report.exact_rate = c
                .sets
                .iter()
                .map(|s| s.symbols as f64 * s.rate)
                .sum::<f64>()
                / total;
        }
        report.contexts = Some(c);
    }
    Ok(CodecPlan {
        spec,
        model,
        sets,
        set_of,
        fingerprint,
        input,
        verified,
        report,
    })
}

/// The largest open `table_bits` of a context codec: every set multiplies the tables. On
/// the licence pairs of [`CONTEXT_BLEND`] the mean gain over order 0 was 11.3 % with sets of
/// at most 2^12 slots, 11.8 % at 2^13 and 12.0 % with no limit (the order-0 choice, 2^14).
pub const CONTEXT_TABLE_BITS: u32 = 13;

/// Share of the order-0 distribution blended into each context set's counts. On the 56
/// ordered pairs of eight licence texts of /usr/share/common-licenses (train on one, code
/// another; bytes, 8 sets, `table_bits` the order-0 choice) the mean gain over order 0 went
/// from 11.5 % unblended to 12.0 %, the worst pair from 5.6 % to 7.5 %; 0.2 and 0.35 gained
/// less. With `table_bits` at most [`CONTEXT_TABLE_BITS`]: 11.8 % on average, 7.7 % to
/// 15.2 %.
const CONTEXT_BLEND: f64 = 0.1;

/// Decode steps hold a position of every set in 20 bits: `table_bits` plus log2 of the
/// sets at most 20 (32-bit steps, the bit count above).
const MAX_POSITION_BITS: u32 = 20;

/// The lane subsequences of the training sequences: symbol `i` of a sequence goes to lane
/// `i % lanes`; in each, a symbol's context is the one before it (its lane's previous).
fn lane_sequences(model: &Model, lanes: usize) -> Vec<Vec<u16>> {
    let mut out = Vec::new();
    for seq in &model.sequences {
        for lane in 0..lanes.min(seq.symbols.len()) {
            out.push(
                seq.symbols
                    .iter()
                    .skip(lane)
                    .step_by(lanes)
                    .copied()
                    .collect(),
            );
        }
    }
    out
}

/// A context codec's table sets, the set of each context symbol, and the figures.
type ContextSets = (Vec<TableSet>, Vec<u8>, report::ContextFigures);

/// The training data's pairs (context, symbol), counted once for every table size tried.
struct Pairs {
    /// Split into training and held-out blocks ([`context::split_pair_counts`]).
    train: Vec<Vec<u64>>,
    held: Vec<Vec<u64>>,
    /// All of them.
    all: Vec<Vec<u64>>,
    /// H(X|Y) of `all`.
    conditional: f64,
}

/// The pairs of a context codec's training sequences (each lane's previous symbol as the
/// context); an error when the training data holds no sequence.
fn context_pairs(spec: &CodecSpec, model: &Model) -> Result<Pairs> {
    if model.sequences.iter().all(|s| s.symbols.is_empty()) {
        return Err(Error::input(
            Some(spec.location.clone()),
            "context = \"previous\" learns from sequences of symbols, and the samples and text hold none (counts carry no order): give `samples` or `text`",
        ));
    }
    let n = spec.kind.alphabet_len();
    let lanes = lane_sequences(model, spec.lanes as usize);
    let refs: Vec<&[u16]> = lanes.iter().map(Vec::as_slice).collect();
    let (train, held) = context::split_pair_counts(&refs, n);
    let all = context::pair_counts(&refs, n);
    let conditional = context::conditional_entropy(&all);
    Ok(Pairs {
        train,
        held,
        all,
        conditional,
    })
}

/// A context codec's table sets: the contexts (each lane's previous symbol) grouped into at
/// most `most` sets, a power of two, by [`context::cluster_where`] on a held-out split of
/// the training sequences; each set's tables from the counts of its contexts. With a
/// `flash_budget`, fewer sets until all fit (the order-0 set always does: sizing chose it).
fn context_sets(
    spec: &CodecSpec,
    model: &Model,
    pairs: &Pairs,
    order0: TableSet,
    most: u32,
    rows: usize,
    absent: bool,
) -> Result<ContextSets> {
    let n = spec.kind.alphabet_len();
    let table_bits = spec.table_bits;
    // Powers of two, and positions of every set within MAX_POSITION_BITS.
    let cap = 1u32 << MAX_POSITION_BITS.saturating_sub(table_bits).min(4);
    let mut most = (most.min(cap) as usize).max(1);
    most = 1 << most.ilog2();
    loop {
        let c = context::cluster_where(
            &pairs.train,
            &pairs.held,
            most,
            table_bits,
            usize::is_power_of_two,
        )?;
        // The sets' bytes depend on sizes alone: a budget is checked before any is built.
        let bytes = combined_layout(&order0.layout, c.sets, rows, table_bits).bytes();
        if c.sets > 1 && spec.flash_budget.is_some_and(|b| bytes > b) {
            most = c.sets / 2;
            continue;
        }
        let mut set_of = c.set_of.clone();
        set_of.resize(n, 0);
        if c.sets == 1 {
            // One set: the order-0 tables (sizing priced those); contexts do not pay.
            let figures = report::ContextFigures::new(
                spec,
                &c,
                &set_of,
                &[(&model.counts, order0.rate)],
                pairs.conditional,
                order0.layout.bytes(),
                most,
            );
            return Ok((vec![order0], Vec::new(), figures));
        }
        let counts = context::set_counts(&pairs.all, &set_of, c.sets, n);
        let mut sets = Vec::with_capacity(c.sets);
        // Each set's counts blended with CONTEXT_BLEND of the order-0 distribution (in
        // 64ths of a count), so that a pair the training data never showed stays cheap.
        let order0_total: f64 = model.counts.iter().map(|&x| x as f64).sum();
        let blended: Vec<Vec<u64>> = counts
            .iter()
            .map(|sc| {
                let total: f64 = sc.iter().map(|&x| x as f64).sum();
                sc.iter()
                    .zip(&model.counts)
                    .map(|(&x, &o)| {
                        let prior = CONTEXT_BLEND * total * o as f64 / order0_total.max(1.0);
                        (64.0 * (x as f64 + prior)).round() as u64
                    })
                    .collect()
            })
            .collect();
        for set_counts in &blended {
            let total: f64 = set_counts.iter().map(|&x| x as f64).sum();
            let p: Vec<f64> = if total > 0.0 {
                set_counts.iter().map(|&x| x as f64 / total).collect()
            } else {
                vec![1.0 / n as f64; n]
            };
            sets.push(table_set(spec, set_counts, &p, table_bits, rows, absent)?);
        }
        let members: Vec<(&Vec<u64>, f64)> =
            counts.iter().zip(sets.iter().map(|s| s.rate)).collect();
        let figures = report::ContextFigures::new(
            spec,
            &c,
            &set_of,
            &members,
            pairs.conditional,
            bytes,
            most,
        );
        // The first set's layout is the codec's: every set's tables together.
        if let Some(first) = sets.first_mut() {
            first.layout = combined_layout(&order0.layout, c.sets, rows, table_bits);
        }
        return Ok((sets, set_of, figures));
    }
}

/// The layout of `sets` table sets emitted together, from one set's: the method's tables
/// and the decode positions' widths once per set, the kind's encode tables once, and
/// `ROW_SET` (the table set of each encoding row as a context).
pub fn combined_layout(
    one: &TableLayout,
    sets: usize,
    rows: usize,
    table_bits: u32,
) -> TableLayout {
    // Decode steps hold a position of every set: wider entries past 2^12 positions.
    let wide_steps = crate::emit::tans::step_shift(table_bits, sets) > 12;
    const PER_SET: &[&str] = &[
        "SYMBOLS",
        "STEPS",
        "PUT",
        "PUTS",
        "DECODE",
        "SPEND",
        "RUN",
        "NEXT_STATE",
        "WIDTHS",
    ];
    let mut tables: Vec<_> = one
        .tables
        .iter()
        .cloned()
        .map(|mut t| {
            if PER_SET.contains(&t.name) {
                t.entries *= sets;
            }
            if t.name == "STEPS" && wide_steps {
                t.entry_bytes = 4;
            }
            t
        })
        .collect();
    if sets > 1 {
        tables.push(crate::method::LayoutEntry::new(
            "ROW_SET",
            "u8",
            rows,
            &[1],
            crate::method::Direction::Encode,
        ));
    }
    TableLayout { tables }
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
