//! `kind = "integers"`: values of a declared range `[lo, hi]`, `Symbol` the value type.
//!
//! Every value has a *place* `u` in `0 .. N`, `N = hi - lo + 1`: `u = v - lo`, or with
//! `delta = true` the difference from the previous value (the first from the reference value,
//! 0 or the range end nearest it), wrapped modulo `N` into `-floor(N/2) .. N - floor(N/2)`,
//! `u = d + floor(N/2)`. Wrapping keeps every difference of two values of the range codable
//! with `N` places, and the decoder undoes it exactly (`prev + d`, plus or minus `N` back
//! into the range).
//!
//! The places are split into **bins**: aligned dyadic intervals `[j·2^w, (j+1)·2^w)`, each one
//! symbol followed by `w` raw **offset bits** (`u - start`). A bin of width 1 is a value of its
//! own. [`choose_bins`] finds the partition of `0 .. N` into at most `max_symbols` such bins
//! that minimises the coded size of the training data (DEVELOPERS.md, "Integer bins").

use super::{a_type, Escape, InputMap, Kind, KindEntry, Misfit, Misplaced, Scanner, SpecKeys};
use crate::method::{Direction, LayoutEntry};
use crate::quantize::log2;
use proc_macro2::{Ident, Literal, Span, TokenStream};
use quote::quote;
use std::collections::BTreeMap;
use std::ops::Range;
use std::sync::Arc;
use toml::de::DeValue;
use toml::Spanned;

pub const ENTRY: KindEntry = KindEntry {
    name: "integers",
    read,
};

/// Keys only an integers codec takes.
pub const KEYS: &[&str] = &["range", "value_type", "delta", "max_symbols"];

/// Bins when the spec does not cap them.
pub const DEFAULT_MAX_SYMBOLS: usize = 64;
/// Largest `max_symbols`: the DP's work grows with it (DEVELOPERS.md, "Integer bins").
pub const MOST_SYMBOLS: usize = 1024;

/// The generated value type.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ValueType {
    U8,
    I8,
    U16,
    I16,
    U32,
    I32,
}

/// Narrowest first, unsigned before signed of a width: the default is the first that holds
/// the range.
const TYPES: [(&str, ValueType); 6] = [
    ("u8", ValueType::U8),
    ("i8", ValueType::I8),
    ("u16", ValueType::U16),
    ("i16", ValueType::I16),
    ("u32", ValueType::U32),
    ("i32", ValueType::I32),
];

impl ValueType {
    pub fn name(self) -> &'static str {
        TYPES.iter().find(|t| t.1 == self).map_or("i32", |t| t.0)
    }

    pub fn bits(self) -> u32 {
        match self {
            ValueType::U8 | ValueType::I8 => 8,
            ValueType::U16 | ValueType::I16 => 16,
            ValueType::U32 | ValueType::I32 => 32,
        }
    }

    fn signed(self) -> bool {
        matches!(self, ValueType::I8 | ValueType::I16 | ValueType::I32)
    }

    pub fn min(self) -> i64 {
        if self.signed() {
            -(1i64 << (self.bits() - 1))
        } else {
            0
        }
    }

    pub fn max(self) -> i64 {
        if self.signed() {
            (1i64 << (self.bits() - 1)) - 1
        } else {
            (1i64 << self.bits()) - 1
        }
    }

    fn ident(self) -> Ident {
        Ident::new(self.name(), Span::call_site())
    }

    /// The unsigned type of the same width.
    pub fn unsigned(self) -> Ident {
        Ident::new(&format!("u{}", self.bits()), Span::call_site())
    }

    /// `v` (taken modulo `2^bits`) as a literal of this type.
    pub fn literal(self, v: i64) -> Literal {
        let bits = self.bits();
        let pattern = (v as u64) & (u64::MAX >> (64 - bits));
        if self.signed() && pattern >> (bits - 1) == 1 {
            Literal::i64_unsuffixed(pattern as i64 - (1i64 << bits))
        } else {
            Literal::u64_unsuffixed(pattern)
        }
    }
}

/// What an integers codec codes: the range, the value type, delta or not, the cap on bins.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Domain {
    pub lo: i64,
    pub hi: i64,
    pub value_type: ValueType,
    pub delta: bool,
    pub max_symbols: usize,
}

impl Domain {
    /// `N`: values in the range, places of the coded values.
    pub fn size(&self) -> u64 {
        (self.hi - self.lo + 1) as u64
    }

    /// The smallest coded value: `lo`, or with deltas `-floor(N/2)`.
    pub fn coded_lo(&self) -> i64 {
        if self.delta {
            -((self.size() / 2) as i64)
        } else {
            self.lo
        }
    }

    /// The value the first delta is taken from: 0, or the range end nearest it.
    pub fn reference(&self) -> i64 {
        0i64.clamp(self.lo, self.hi)
    }

    /// The place of a coded value (`v` itself, or the delta) in `0 .. N`, if it has one.
    pub fn place_of_coded(&self, coded: i64) -> Option<u32> {
        let u = coded.checked_sub(self.coded_lo())?;
        (0..self.size() as i64).contains(&u).then_some(u as u32)
    }

    /// The place of value `v` of the range after `prev`: `v - lo`, or the wrapped delta.
    pub fn place(&self, v: i64, prev: i64) -> u32 {
        let n = self.size() as i64;
        if self.delta {
            (v - prev - self.coded_lo()).rem_euclid(n) as u32
        } else {
            (v - self.lo) as u32
        }
    }

    /// The value of place `u` after `prev`: the inverse of [`Domain::place`].
    pub fn value(&self, u: u32, prev: i64) -> i64 {
        if self.delta {
            let n = self.size() as i64;
            let t = prev + i64::from(u) + self.coded_lo();
            if t > self.hi {
                t - n
            } else if t < self.lo {
                t + n
            } else {
                t
            }
        } else {
            self.lo + i64::from(u)
        }
    }
}

/// One bin: places `start .. start + 2^width`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Bin {
    pub start: u32,
    pub width: u32,
}

impl Bin {
    fn last(&self) -> u64 {
        u64::from(self.start) + (1u64 << self.width) - 1
    }
}

/// An integers alphabet. Until the training data is counted it has no bins (`bins` empty,
/// and `alphabet_len` is the cap); [`Integers::bind`] chooses them. With an escape, one more
/// symbol after the bins stands for any value of the type outside the range, followed by
/// all its bits.
#[derive(Debug, Clone)]
pub struct Integers {
    pub domain: Domain,
    pub bins: Vec<Bin>,
    pub escape: Option<Escape>,
}

/// The place the value scanner gives a value outside the range when escapes are on (a
/// range with an escape is narrower than its type, so no place reaches it).
pub const ESCAPED: u32 = u32::MAX;

/// Reads `range`, `value_type`, `delta` and `max_symbols`; `symbols` has no meaning here.
fn read(
    symbols: Option<&Spanned<DeValue<'_>>>,
    codec: Range<usize>,
    keys: &dyn SpecKeys,
) -> Result<Arc<dyn Kind>, Vec<Misplaced>> {
    let (share, mut errors) = match super::read_escape(keys) {
        Ok(s) => (s, Vec::new()),
        Err(e) => (None, e),
    };
    if let Some(s) = symbols {
        errors.push((
            s.span(),
            "an integers codec takes `range`, not `symbols`: its symbols are bins chosen from the training data".to_string(),
        ));
    }
    let range = match keys.key("range") {
        None => {
            errors.push((codec.clone(), "missing key `range` ([lo, hi])".to_string()));
            None
        }
        Some(v) => match v.get_ref() {
            DeValue::Array(items) if items.len() == 2 => {
                let ends: Vec<Option<i64>> = items
                    .iter()
                    .map(|i| match i.get_ref() {
                        DeValue::Integer(n) => i64::from_str_radix(n.as_str(), n.radix())
                            .ok()
                            .filter(|n| (i64::from(i32::MIN)..=i64::from(u32::MAX)).contains(n)),
                        _ => None,
                    })
                    .collect();
                match (ends[0], ends[1]) {
                    (Some(lo), Some(hi)) if lo <= hi && hi - lo < 1i64 << 32 => Some((lo, hi)),
                    (Some(_), Some(_)) => {
                        errors.push((
                            v.span(),
                            "`range` = [lo, hi] needs lo <= hi and at most 2^32 values".to_string(),
                        ));
                        None
                    }
                    _ => {
                        errors.push((
                            v.span(),
                            format!(
                                "`range` ends are integers from {} to {}",
                                i32::MIN,
                                u32::MAX
                            ),
                        ));
                        None
                    }
                }
            }
            other => {
                errors.push((
                    v.span(),
                    format!("`range` must be [lo, hi], found {}", a_type(other)),
                ));
                None
            }
        },
    };
    let value_type = match keys.key("value_type") {
        None => None,
        Some(v) => match v.get_ref() {
            DeValue::String(s) => match TYPES.iter().find(|t| t.0 == s.as_ref()) {
                Some(t) => Some((t.1, v.span())),
                None => {
                    errors.push((v.span(), format!("unknown value_type \"{s}\": expected \"i8\", \"i16\", \"i32\", \"u8\", \"u16\" or \"u32\"")));
                    None
                }
            },
            other => {
                errors.push((
                    v.span(),
                    format!("`value_type` must be a string, found {}", a_type(other)),
                ));
                None
            }
        },
    };
    let delta = super::read_bool(keys, "delta", &mut errors);
    let max_symbols = match keys.key("max_symbols") {
        None => DEFAULT_MAX_SYMBOLS,
        Some(v) => match v.get_ref() {
            DeValue::Integer(n) => match usize::from_str_radix(n.as_str(), n.radix()) {
                Ok(m) if (1..=MOST_SYMBOLS).contains(&m) => m,
                _ => {
                    errors.push((
                        v.span(),
                        format!("`max_symbols` must be 1 to {MOST_SYMBOLS}"),
                    ));
                    DEFAULT_MAX_SYMBOLS
                }
            },
            other => {
                errors.push((
                    v.span(),
                    format!("`max_symbols` must be an integer, found {}", a_type(other)),
                ));
                DEFAULT_MAX_SYMBOLS
            }
        },
    };
    let Some((lo, hi)) = range else {
        return Err(errors);
    };
    let value_type = match value_type {
        Some((t, span)) => {
            if lo < t.min() || hi > t.max() {
                errors.push((
                    span,
                    format!(
                        "value_type \"{}\" does not hold the range [{lo}, {hi}]",
                        t.name()
                    ),
                ));
            }
            t
        }
        None => match TYPES
            .iter()
            .map(|t| t.1)
            .find(|t| t.min() <= lo && hi <= t.max())
        {
            Some(t) => t,
            None => {
                errors.push((
                    keys.key("range").map_or(codec.clone(), |v| v.span()),
                    format!("no value type holds the range [{lo}, {hi}]: it spans negative values and values above {}", i32::MAX),
                ));
                ValueType::I32
            }
        },
    };
    if share.is_some() {
        let at = keys.key("escape").map_or(codec.clone(), |v| v.span());
        if delta {
            errors.push((
                at,
                "`escape` applies to integers without `delta`: a delta codec codes every difference of values of its range, and refuses values outside it".to_string(),
            ));
        } else if lo == value_type.min() && hi == value_type.max() {
            errors.push((
                at,
                format!(
                    "`escape = true` needs a range narrower than value_type \"{}\": every value is in the range already",
                    value_type.name()
                ),
            ));
        }
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    Ok(Arc::new(Integers {
        domain: Domain {
            lo,
            hi,
            value_type,
            delta,
            max_symbols,
        },
        bins: Vec::new(),
        escape: share.map(|share| Escape {
            symbol: max_symbols,
            raw_bits: value_type.bits(),
            share,
        }),
    }))
}

/// The coded size of a bin holding `count` training values, less the `count·log2(total)`
/// every partition shares: `count · (width - log2 count)` bits.
fn bin_cost(count: u64, width: u32) -> f64 {
    if count == 0 {
        return 0.0;
    }
    let c = count as f64;
    c * (f64::from(width) - log2(c))
}

/// Best cost of a dyadic node with at most `k` bins, `k = 0 ..`: non-increasing; the last
/// entry holds for every larger `k`. `INFINITY` where no partition fits.
type Costs = Vec<f64>;

fn at(costs: &Costs, k: usize) -> f64 {
    costs[k.min(costs.len() - 1)]
}

/// A solved node of the dyadic tree over the places.
struct Node {
    costs: Costs,
    /// The node as one bin: its cost (`None` if it reaches past `N`).
    leaf: Option<f64>,
    children: Option<Box<(Node, Node)>>,
}

/// Solves node `[start, start + 2^level)` for `counts` (the sorted training counts by place
/// inside it), at most `cap` bins.
fn solve(start: u64, level: u32, size: u64, counts: &[(u64, u64)], cap: usize) -> Node {
    let end = start + (1u64 << level);
    if start >= size {
        // Past the range: no places, no bins.
        return Node {
            costs: vec![0.0],
            leaf: None,
            children: None,
        };
    }
    let inside = end <= size;
    let count = counts.iter().fold(0u64, |a, c| a.saturating_add(c.1));
    let leaf = inside.then(|| bin_cost(count, level));
    // A bin without training values costs nothing, so splitting one cannot gain.
    if inside && (count == 0 || level == 0) {
        return Node {
            costs: vec![f64::INFINITY, leaf.unwrap_or(0.0)],
            leaf,
            children: None,
        };
    }
    let half = start + (1u64 << (level - 1));
    let split = counts.partition_point(|c| c.0 < half);
    let left = solve(start, level - 1, size, &counts[..split], cap);
    let right = solve(half, level - 1, size, &counts[split..], cap);
    // Min-plus convolution of two non-increasing vectors: at most `k` bins in all.
    let len = (left.costs.len() + right.costs.len() - 1).min(cap + 1);
    let mut costs = vec![f64::INFINITY; len.max(2)];
    for (k, slot) in costs.iter_mut().enumerate() {
        // Past its last entry a side costs the same with fewer bins: only this window matters.
        let first = (k + 1).saturating_sub(right.costs.len());
        for a in first..=k.min(left.costs.len() - 1) {
            let c = at(&left.costs, a) + at(&right.costs, k - a);
            if c < *slot {
                *slot = c;
            }
        }
        if let Some(l) = leaf {
            // A tie goes to the single bin: fewer symbols.
            if k >= 1 && l <= *slot {
                *slot = l;
            }
        }
    }
    Node {
        costs,
        leaf,
        children: Some(Box::new((left, right))),
    }
}

/// The bins of the best partition of `node` with at most `k` bins, in place order.
fn collect(node: &Node, start: u64, level: u32, k: usize, out: &mut Vec<Bin>) {
    let best = at(&node.costs, k);
    if let Some(l) = node.leaf {
        if k >= 1 && l <= best {
            out.push(Bin {
                start: start as u32,
                width: level,
            });
            return;
        }
    }
    let Some(children) = &node.children else {
        return;
    };
    let (left, right) = &**children;
    for a in 0..=k {
        if at(&left.costs, a) + at(&right.costs, k - a) == best {
            collect(left, start, level - 1, a, out);
            collect(right, start + (1u64 << (level - 1)), level - 1, k - a, out);
            return;
        }
    }
}

/// The partition of places `0 .. size` into at most `cap` aligned dyadic bins with the
/// least coded size for `counts` (by place); `Err` with the fewest bins any partition needs
/// when `cap` is too small. Ties go to one bin over two halves, then to fewer bins on the left.
pub fn choose_bins(size: u64, counts: &BTreeMap<u32, u64>, cap: usize) -> Result<Vec<Bin>, usize> {
    let level = 64 - size.saturating_sub(1).leading_zeros();
    let sorted: Vec<(u64, u64)> = counts
        .iter()
        .filter(|c| *c.1 > 0)
        .map(|(&u, &c)| (u64::from(u), c))
        .collect();
    let root = solve(0, level, size, &sorted, cap);
    let best = at(&root.costs, cap);
    if !best.is_finite() {
        // The fewest aligned bins that tile `0 .. size`: one per binary digit of `size`.
        return Err(size.count_ones() as usize);
    }
    let mut bins = Vec::new();
    collect(&root, 0, level, cap, &mut bins);
    Ok(bins)
}

/// Coded size in bits of `counts` in `bins`: the bin symbols' entropy plus offset bits.
pub fn coded_bits(bins: &[Bin], counts: &BTreeMap<u32, u64>) -> f64 {
    let per_bin = bin_counts(bins, counts);
    let total = per_bin.iter().fold(0u64, |a, &c| a.saturating_add(c));
    if total == 0 {
        return 0.0;
    }
    let shared = total as f64 * log2(total as f64);
    shared
        + bins
            .iter()
            .zip(&per_bin)
            .map(|(b, &c)| bin_cost(c, b.width))
            .sum::<f64>()
}

/// Training values per bin (escaped values aside).
pub fn bin_counts(bins: &[Bin], counts: &BTreeMap<u32, u64>) -> Vec<u64> {
    let mut out = vec![0u64; bins.len()];
    let Some(end) = bins.last().map(Bin::last) else {
        return out;
    };
    for (&u, &c) in counts.range(..=end.min(u64::from(u32::MAX - 1)) as u32) {
        let i = bin_index(bins, u);
        out[i] = out[i].saturating_add(c);
    }
    out
}

/// The bin holding place `u` (a plain search: the reference the generated one is tested
/// against).
pub fn bin_index(bins: &[Bin], u: u32) -> usize {
    bins.iter()
        .position(|b| u64::from(u) <= b.last())
        .unwrap_or(bins.len().saturating_sub(1))
}

impl Integers {
    /// This alphabet with the bins chosen for `counts` (by place); `Err` says why not.
    pub fn bind(&self, counts: &BTreeMap<u32, u64>) -> Result<Integers, String> {
        let cap = self.domain.max_symbols;
        let size = self.domain.size();
        let in_range: BTreeMap<u32, u64> = counts
            .iter()
            .filter(|(&u, _)| u64::from(u) < size)
            .map(|(&u, &c)| (u, c))
            .collect();
        match choose_bins(size, &in_range, cap) {
            Ok(bins) => Ok(Integers {
                domain: self.domain,
                escape: self.escape.map(|e| Escape {
                    symbol: bins.len(),
                    ..e
                }),
                bins,
            }),
            Err(fewest) => Err(format!(
                "max_symbols = {cap} is too few: the range [{}, {}] needs at least {fewest} aligned bins",
                self.domain.lo, self.domain.hi
            )),
        }
    }

    /// The symbol of place `u`: its bin, or the escape for [`ESCAPED`].
    pub fn symbol_of(&self, u: u32) -> usize {
        match &self.escape {
            Some(e) if u == ESCAPED => e.symbol,
            _ => bin_index(&self.bins, u),
        }
    }

    /// Largest offset width of any bin.
    pub fn max_width(&self) -> u32 {
        self.bins.iter().map(|b| b.width).max().unwrap_or(0)
    }

    /// The bin's values (or deltas) for messages: `-3`, `8 ..= 15`.
    fn show(&self, b: &Bin) -> String {
        let first = i64::from(b.start) + self.domain.coded_lo();
        let last = first + (1i64 << b.width) - 1;
        if b.width == 0 {
            format!("{first}")
        } else {
            format!("{first} ..= {last}")
        }
    }

    /// The scanner of sample text: values of the range, as places (`delta`: after the
    /// previous value of the same piece of data).
    pub fn value_scanner(&self) -> ValueScanner {
        ValueScanner {
            domain: self.domain,
            offset: 0,
            token: Vec::new(),
            token_start: 0,
            prev: self.domain.reference(),
            escape: self.escape.is_some(),
        }
    }
}

impl Kind for Integers {
    fn name(&self) -> &'static str {
        ENTRY.name
    }

    fn tag(&self) -> u8 {
        3
    }

    fn alphabet_len(&self) -> usize {
        let bins = if self.bins.is_empty() {
            self.domain.max_symbols
        } else {
            self.bins.len()
        };
        bins + usize::from(self.escape.is_some())
    }

    fn symbol_bytes(&self) -> usize {
        (self.domain.value_type.bits() / 8) as usize
    }

    fn identity(&self) -> Vec<u8> {
        let d = &self.domain;
        let mut out = Vec::new();
        out.extend(d.lo.to_le_bytes());
        out.extend(d.hi.to_le_bytes());
        out.push(d.value_type.bits() as u8 | u8::from(d.value_type.signed()) << 7);
        out.push(u8::from(d.delta) | u8::from(self.escape.is_some()) << 1);
        for b in &self.bins {
            out.extend(b.start.to_le_bytes());
            out.push(b.width as u8);
        }
        out
    }

    fn label(&self, symbol: usize) -> String {
        match (self.bins.get(symbol), &self.escape) {
            (Some(b), _) if b.width == 0 => self.show(b),
            (Some(b), _) => format!("{} (+{} bits)", self.show(b), b.width),
            (None, Some(e)) if e.symbol == symbol => {
                format!("escape (any value outside the range, +{} bits)", e.raw_bits)
            }
            (None, _) => format!("bin {symbol}"),
        }
    }

    fn describe(&self, symbol: usize) -> String {
        match (self.bins.get(symbol), &self.escape) {
            (Some(b), _) => format!("bin {}", self.show(b)),
            (None, Some(e)) if e.symbol == symbol => "the escape".to_string(),
            (None, _) => format!("bin {symbol}"),
        }
    }

    /// Counts are keyed by the coded value in decimal (with `delta`, the difference).
    fn count_key(&self, key: &str) -> Result<usize, String> {
        let canonical = key.strip_prefix('-').unwrap_or(key);
        let ok = !canonical.is_empty()
            && canonical.bytes().all(|b| b.is_ascii_digit())
            && (canonical == "0" || !canonical.starts_with('0'))
            && key != "-0";
        let value = ok.then(|| key.parse::<i64>().ok()).flatten();
        let Some(v) = value else {
            return Err(format!(
                "count key \"{key}\" is not a decimal integer: an integers codec keys its counts by value, e.g. \"-3\" = 120"
            ));
        };
        let what = if self.domain.delta {
            "difference"
        } else {
            "value"
        };
        self.domain
            .place_of_coded(v)
            .map(|u| u as usize)
            .ok_or_else(|| {
                let lo = self.domain.coded_lo();
                let hi = lo + self.domain.size() as i64 - 1;
                format!("count for {what} {v} outside [{lo}, {hi}]")
            })
    }

    /// Bin indices of values; only used where offsets do not matter (the model reads values
    /// with [`Integers::value_scanner`]).
    fn scanner(&self) -> Box<dyn Scanner + '_> {
        Box::new(BinScanner {
            values: self.value_scanner(),
            alphabet: self,
            places: Vec::new(),
        })
    }

    fn input(&self) -> InputMap {
        InputMap::Index
    }

    fn symbol_items(&self) -> TokenStream {
        let d = &self.domain;
        let t = d.value_type.ident();
        let lo = d.value_type.literal(d.lo);
        let hi = d.value_type.literal(d.hi);
        let delta = d.delta;
        let doc = if self.escape.is_some() {
            " A value of this codec: any value encodes, those outside [`LOWEST`] ..= [`HIGHEST`] as the escape symbol and all their bits."
        } else {
            " A value of this codec: any value of [`LOWEST`] ..= [`HIGHEST`] encodes."
        };
        quote! {
            #[doc = #doc]
            pub type Symbol = #t;
            /// The smallest value of the range.
            pub const LOWEST: Symbol = #lo;
            /// The largest value of the range.
            pub const HIGHEST: Symbol = #hi;
            /// Whether streams carry the differences of successive values.
            pub const DELTA: bool = #delta;
        }
    }

    fn all_symbols(&self) -> TokenStream {
        quote!(BIN_FIRST)
    }

    /// A bin in decode rows: its first value (with deltas, its first place), as a value of
    /// `Symbol` to which the decoder adds the offset.
    /// The escape decodes as 0 plus its raw bits.
    fn row_literal(&self, symbol: usize) -> String {
        let d = &self.domain;
        let Some(b) = self.bins.get(symbol) else {
            return "0".to_string();
        };
        let start = i64::from(b.start);
        let first = if d.delta { start } else { d.lo + start };
        d.value_type.literal(first).to_string()
    }

    fn integers(&self) -> Option<&Integers> {
        Some(self)
    }

    fn escape(&self) -> Option<&Escape> {
        self.escape.as_ref()
    }

    fn widths(&self) -> Vec<u32> {
        let mut w: Vec<u32> = self.bins.iter().map(|b| b.width).collect();
        if let Some(e) = &self.escape {
            w.push(e.raw_bits);
        }
        w
    }

    fn extra_tables(&self, table_bits: u32) -> Vec<LayoutEntry> {
        let bins = self.alphabet_len() - usize::from(self.escape.is_some());
        vec![
            LayoutEntry::new("BIN_START", "u32", bins, &[4], Direction::Encode),
            LayoutEntry::new("BIN_WIDTH", "u8", bins, &[1], Direction::Encode),
            LayoutEntry::new("WIDTHS", "u8", 1 << table_bits, &[1], Direction::Decode),
        ]
    }
}

/// Reads decimal integers separated by whitespace and commas, a piece at a time; each value
/// must lie in the range. Gives places.
pub struct ValueScanner {
    domain: Domain,
    /// Bytes scanned so far.
    offset: usize,
    /// The number being read (a number split across pieces waits here).
    token: Vec<u8>,
    token_start: usize,
    prev: i64,
    /// Values outside the range become [`ESCAPED`] rather than errors.
    escape: bool,
}

impl ValueScanner {
    pub fn feed(&mut self, piece: &[u8], out: &mut Vec<u32>) -> Result<(), Misfit> {
        for (i, &b) in piece.iter().enumerate() {
            let at = self.offset + i;
            if b.is_ascii_whitespace() || b == b',' {
                self.end(out)?;
            } else if b.is_ascii_digit() || b == b'-' {
                if self.token.is_empty() {
                    self.token_start = at;
                }
                // Longer than any value of a 32-bit range: report it without holding more.
                if self.token.len() > 12 {
                    return Err(self.bad());
                }
                self.token.push(b);
            } else {
                let shown = if b.is_ascii_graphic() {
                    format!("'{}'", b as char)
                } else {
                    format!("byte 0x{b:02x}")
                };
                return Err(Misfit {
                    offset: at,
                    message: format!(
                        "{shown} is not part of a decimal integer (values are separated by whitespace or commas)"
                    ),
                });
            }
        }
        self.offset += piece.len();
        Ok(())
    }

    pub fn finish(&mut self, out: &mut Vec<u32>) -> Result<(), Misfit> {
        self.end(out)
    }

    fn bad(&self) -> Misfit {
        Misfit {
            offset: self.token_start,
            message: format!(
                "\"{}\" is not a decimal integer",
                String::from_utf8_lossy(&self.token)
            ),
        }
    }

    fn end(&mut self, out: &mut Vec<u32>) -> Result<(), Misfit> {
        if self.token.is_empty() {
            return Ok(());
        }
        let text = std::str::from_utf8(&self.token).unwrap_or("");
        let digits = text.strip_prefix('-').unwrap_or(text);
        let v = (!digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit()))
            .then(|| text.parse::<i64>().ok())
            .flatten();
        let Some(v) = v else {
            return Err(self.bad());
        };
        let d = self.domain;
        let t = d.value_type;
        if self.escape && (v < d.lo || v > d.hi) && (t.min()..=t.max()).contains(&v) {
            out.push(ESCAPED);
            self.token.clear();
            return Ok(());
        }
        if v < d.lo || v > d.hi {
            return Err(Misfit {
                offset: self.token_start,
                message: format!("value {v} is outside the range [{}, {}]", d.lo, d.hi),
            });
        }
        out.push(d.place(v, self.prev));
        self.prev = v;
        self.token.clear();
        Ok(())
    }
}

/// Values to bin indices (for [`Kind::scanner`]).
struct BinScanner<'a> {
    values: ValueScanner,
    alphabet: &'a Integers,
    places: Vec<u32>,
}

impl Scanner for BinScanner<'_> {
    fn feed(&mut self, piece: &[u8], out: &mut Vec<u16>) -> Result<(), Misfit> {
        self.places.clear();
        let r = self.values.feed(piece, &mut self.places);
        out.extend(
            self.places
                .iter()
                .map(|&u| self.alphabet.symbol_of(u) as u16),
        );
        r
    }

    fn finish(&mut self, out: &mut Vec<u16>) -> Result<(), Misfit> {
        self.places.clear();
        let r = self.values.finish(&mut self.places);
        out.extend(
            self.places
                .iter()
                .map(|&u| self.alphabet.symbol_of(u) as u16),
        );
        r
    }
}
