//! Stage 4: the coding methods. Each method owns, in its own file, its table building, its
//! rate, its encoding record and its [`TableLayout`]; [`Tables`] holds either, and is the one
//! place that dispatches on the method. Their emitted functions live in `emit/`.

pub mod rans;
pub mod rate;
pub mod tans;

use crate::error::{Error, Result};
use crate::spec::{Lookup, Method};

/// The tables of either method.
#[derive(Debug, Clone)]
pub enum Tables {
    Tans(tans::Tans),
    Rans(rans::Rans),
}

impl Tables {
    /// Builds the tables of `method` for `slots` (summing to `2^table_bits`); returns them
    /// with their rate for a source with the `counts` and `probabilities` of the training data.
    pub fn build(
        method: Method,
        slots: &[u32],
        counts: &[u64],
        probabilities: &[f64],
        table_bits: u32,
    ) -> Result<(Tables, f64)> {
        match method {
            Method::Tans => {
                let (t, rate) = tans::build(slots, probabilities, table_bits)?;
                Ok((Tables::Tans(t), rate))
            }
            Method::Rans => {
                let r = rans::Rans::new(slots, table_bits)?;
                // A 32-bit state codes within 10^-4 of the slots' own cost at table_bits <= 12
                // and 10^-3 at 15 (tests/rans_precision.rs), so that cost is the rate.
                let rate = crate::quantize::cross_entropy(counts, slots, table_bits);
                Ok((Tables::Rans(r), rate))
            }
        }
    }

    pub fn method(&self) -> Method {
        match self {
            Tables::Tans(_) => Method::Tans,
            Tables::Rans(_) => Method::Rans,
        }
    }

    pub fn slots(&self) -> &[u32] {
        match self {
            Tables::Tans(t) => &t.slots,
            Tables::Rans(r) => &r.slots,
        }
    }

    pub fn table_bits(&self) -> u32 {
        match self {
            Tables::Tans(t) => t.table_bits,
            Tables::Rans(r) => r.table_bits,
        }
    }

    /// The method's byte in the fingerprint, and the table contents it covers (the spread
    /// for tANS, the slots for rANS).
    pub fn identity(&self) -> (u8, Vec<u8>) {
        match self {
            Tables::Tans(t) => (1, t.spread.iter().flat_map(|s| s.to_le_bytes()).collect()),
            Tables::Rans(r) => (2, r.slots.iter().flat_map(|s| s.to_le_bytes()).collect()),
        }
    }

    /// The emitted tables and their sizes (see [`TableLayout`]).
    pub fn layout(
        &self,
        lookup: Lookup,
        symbol_bytes: usize,
        put_rows: usize,
        absent: bool,
    ) -> TableLayout {
        match self {
            Tables::Tans(t) => t.layout(symbol_bytes, put_rows),
            Tables::Rans(r) => r.layout(lookup, symbol_bytes, put_rows, absent),
        }
    }

    /// The method's name in reports.
    pub fn method_name(&self) -> &'static str {
        match self {
            Tables::Tans(_) => "tANS",
            Tables::Rans(_) => "rANS",
        }
    }

    /// What the report says about the layout of symbols in the table.
    pub fn spread_description(&self) -> &'static str {
        match self {
            Tables::Tans(t) => t.spread_rule.describe(),
            Tables::Rans(_) => "none (rANS: symbols own contiguous slot ranges)",
        }
    }
}

/// The layout of `method`'s tables at `table_bits` for `symbols` symbols, before any table
/// is built (sizes alone fix it): what sizing weighs against a flash budget.
pub fn layout(
    method: Method,
    lookup: Lookup,
    table_bits: u32,
    symbols: usize,
    symbol_bytes: usize,
    put_rows: usize,
    absent: bool,
) -> TableLayout {
    match method {
        Method::Tans => tans::layout(table_bits, symbol_bytes, put_rows),
        Method::Rans => rans::layout(lookup, table_bits, symbols, symbol_bytes, put_rows, absent),
    }
}

/// Which functions of a codec read a table: a device that only encodes (or only decodes)
/// links only the tables of that direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    Encode,
    Decode,
    /// Read by both directions (no method has such a table today).
    Both,
}

/// One static table of a codec: its name and entry type in the generated code, and its size.
/// The emitter asserts each `entry_bytes` against the emitted type at compile time, so the
/// report's table bytes and the generated code cannot drift apart.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LayoutEntry {
    pub name: &'static str,
    pub entry: &'static str,
    pub entries: usize,
    pub entry_bytes: usize,
    pub direction: Direction,
}

impl LayoutEntry {
    /// An entry of primitive fields of the given sizes: Rust orders such fields without gaps,
    /// so the size is their sum rounded up to the widest.
    pub fn new(
        name: &'static str,
        entry: &'static str,
        entries: usize,
        fields: &[usize],
        direction: Direction,
    ) -> Self {
        let sum: usize = fields.iter().sum();
        let align = fields.iter().copied().max().unwrap_or(1);
        LayoutEntry {
            name,
            entry,
            entries,
            entry_bytes: sum.div_ceil(align) * align,
            direction,
        }
    }

    pub fn bytes(&self) -> usize {
        self.entries * self.entry_bytes
    }
}

/// Every static table of a codec's table set.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TableLayout {
    pub tables: Vec<LayoutEntry>,
}

impl TableLayout {
    pub fn bytes(&self) -> usize {
        self.tables.iter().map(LayoutEntry::bytes).sum()
    }

    /// Bytes of the tables the encoder reads.
    pub fn encode_bytes(&self) -> usize {
        self.direction_bytes(Direction::Encode)
    }

    /// Bytes of the tables the decoder reads.
    pub fn decode_bytes(&self) -> usize {
        self.direction_bytes(Direction::Decode)
    }

    fn direction_bytes(&self, direction: Direction) -> usize {
        self.tables
            .iter()
            .filter(|t| t.direction == direction || t.direction == Direction::Both)
            .map(LayoutEntry::bytes)
            .sum()
    }

    pub fn entry(&self, name: &str) -> Result<&LayoutEntry> {
        self.tables
            .iter()
            .find(|t| t.name == name)
            .ok_or_else(|| Error::internal(format!("no table {name} in the layout")))
    }
}
