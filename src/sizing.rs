//! Sizing, part of planning: the method, symbol lookup and table_bits of a codec whose spec
//! leaves them open. Bytes come from the layouts alone ([`crate::method::layout`]), so every
//! candidate is priced before anything is built; tables are built, for their rate, only for
//! candidates that fit.
//!
//! - With a flash budget: the lowest rate among the candidates that fit; rates within
//!   [`TIE`] of the lowest tie, and ties go to faster decoding (tANS, rANS with its table,
//!   rANS by search), then fewer bytes, then the smaller table. rANS is a candidate only in
//!   tagged framing: a rANS stream carries 4 bytes of state per lane, which short untagged
//!   frames cannot afford. Bytes grow with table_bits, so a method's sizes past the budget
//!   are never built.
//! - Without a budget or table_bits: the fewest bytes of tables whose excess is at most
//!   [`EXCESS_WARNING_PERCENT`] (ties to faster decoding), over the same methods and lookups;
//!   if none gets there, the lowest rate (ties to fewer bytes).
//! - With zero entropy the excess means nothing: every candidate ties (the smallest wins).

use crate::emit::input::row_count;
use crate::error::{Error, Result};
use crate::kind::InputMap;
use crate::method::{self, Tables};
use crate::quantize;
use crate::report::{excess_percent, EXCESS_WARNING_PERCENT};
use crate::spec::{CodecSpec, Framing, Lookup, Method, MAX_TABLE_BITS};

/// Rates this close to the lowest (relative) count as tied: a difference that small is
/// below what training data says about the data a device will see.
pub const TIE: f64 = 0.001;

/// One size a codec could have, priced.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Candidate {
    pub method: Method,
    /// [`Lookup::Table`] for tANS, which has only its table.
    pub lookup: Lookup,
    pub table_bits: u32,
    pub encode_bytes: usize,
    pub decode_bytes: usize,
    /// All tables, as the emitted statics take them.
    pub bytes: usize,
}

impl Candidate {
    /// Decoding speed, fastest first: one table read a symbol; a table read and a multiply;
    /// a search over the cumulative slots.
    pub fn speed_rank(&self) -> u8 {
        match (self.method, self.lookup) {
            (Method::Tans, _) => 0,
            (Method::Rans, Lookup::Table) => 1,
            (Method::Rans, Lookup::Search) => 2,
        }
    }

    /// The method and lookup together, as the report names them.
    pub fn describe(&self) -> String {
        match self.method {
            Method::Tans => format!("tANS, table_bits = {}", self.table_bits),
            Method::Rans => format!(
                "rANS with symbol_lookup = \"{}\", table_bits = {}",
                lookup_name(self.lookup),
                self.table_bits
            ),
        }
    }
}

pub fn lookup_name(lookup: Lookup) -> &'static str {
    match lookup {
        Lookup::Table => "table",
        Lookup::Search => "search",
    }
}

/// A candidate with its rate (bits per symbol for the training data).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weighed {
    pub candidate: Candidate,
    pub rate: f64,
}

/// What a larger flash budget would buy, when the budget holds the excess above
/// [`EXCESS_WARNING_PERCENT`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BudgetHint {
    /// The smallest budget whose choice codes within it, and that choice.
    Raise { budget: usize, choice: Weighed },
    /// No budget gets there; the lowest rate of every size.
    Unreachable { best: Weighed },
}

/// Which rule made the choice (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rule {
    /// The lowest rate within this flash budget.
    Budget(usize),
    /// No budget: the smallest tables within the excess warning.
    Smallest,
    /// No budget, and no size comes within the excess warning: the lowest rate.
    LowestRate,
}

/// How a codec's sizes were chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct Sizing {
    pub rule: Rule,
    /// Every candidate whose rate was computed for the choice, in the order tried.
    pub weighed: Vec<Weighed>,
    /// Index of the choice in `weighed`.
    pub chosen: usize,
    /// Set when a budget holds the excess above the warning and table_bits was open.
    pub hint: Option<BudgetHint>,
}

impl Sizing {
    pub fn choice(&self) -> Option<&Weighed> {
        self.weighed.get(self.chosen)
    }
}

/// Every size the spec leaves open, in a fixed order: tANS before rANS, the table before
/// the search, smaller tables first.
pub fn candidates(spec: &CodecSpec) -> Vec<Candidate> {
    let (put_rows, absent) = put_rows(&spec.kind.input(), spec.kind.alphabet_len());
    // The method and lookup are chosen only with the size: a given table_bits keeps them.
    let methods: Vec<Method> = if spec.given.method || spec.given.table_bits {
        vec![spec.method]
    } else if spec.framing == Framing::Tagged
        && spec.kind.integers().is_none()
        && spec.kind.escape().is_none()
        && spec.context_tables.is_none()
    {
        // Offset bits (integers, escapes) and table sets ride on tANS only.
        vec![Method::Tans, Method::Rans]
    } else {
        // Untagged frames keep tANS.
        vec![Method::Tans]
    };
    let bits = if spec.given.table_bits {
        spec.table_bits..=spec.table_bits
    } else {
        crate::spec::smallest_table_bits(spec.kind.alphabet_len())..=MAX_TABLE_BITS
    };
    let mut out = Vec::new();
    for method in methods {
        let lookups: Vec<Lookup> = match method {
            Method::Tans => vec![Lookup::Table],
            Method::Rans if spec.given.lookup || spec.given.table_bits => vec![spec.lookup],
            Method::Rans => vec![Lookup::Table, Lookup::Search],
        };
        for lookup in lookups {
            for table_bits in bits.clone() {
                let mut layout = method::layout(
                    method,
                    lookup,
                    table_bits,
                    spec.kind.alphabet_len(),
                    spec.kind.symbol_bytes(),
                    put_rows,
                    absent,
                );
                layout.tables.extend(spec.kind.extra_tables(table_bits));
                out.push(Candidate {
                    method,
                    lookup,
                    table_bits,
                    encode_bytes: layout.encode_bytes(),
                    decode_bytes: layout.decode_bytes(),
                    bytes: layout.bytes(),
                });
            }
        }
    }
    out
}

/// Rows of the encoding table and whether they carry an absent flag.
pub fn put_rows(input: &InputMap, symbols: usize) -> (usize, bool) {
    (
        row_count(input, symbols),
        matches!(input, InputMap::Rows(rows) if rows.contains(&None)),
    )
}

/// Why no tables of `spec` fit its budget, if none do.
pub fn budget_error(spec: &CodecSpec) -> Option<String> {
    let budget = spec.flash_budget?;
    let all = candidates(spec);
    if all.iter().any(|c| c.bytes <= budget) {
        return None;
    }
    let smallest = all
        .iter()
        .min_by_key(|c| (c.bytes, c.speed_rank(), c.table_bits))?;
    Some(if spec.given.table_bits {
        format!(
            "flash_budget = {budget} is too small for table_bits = {}: the smallest such tables take {} bytes ({}); lower table_bits or raise the budget",
            spec.table_bits,
            smallest.bytes,
            smallest.describe()
        )
    } else {
        format!(
            "flash_budget = {budget} is too small: the smallest tables of this codec take {} bytes ({})",
            smallest.bytes,
            smallest.describe()
        )
    })
}

/// Chooses the open sizes of `spec` for the training `counts`; `None` when nothing is open
/// (given sizes are still held to the budget).
pub fn choose(spec: &CodecSpec, counts: &[u64], probabilities: &[f64]) -> Result<Option<Sizing>> {
    if let Some(message) = budget_error(spec) {
        return Err(Error::input(None, message));
    }
    let all = candidates(spec);
    if all.len() < 2 {
        return Ok(None);
    }
    let mut rates = Rates::new(counts, probabilities, all.len());
    let sizing = match spec.flash_budget {
        Some(budget) => {
            let chosen = rates
                .pick(&all, budget)?
                .ok_or_else(|| Error::internal("no candidate fits a budget that was checked"))?;
            let (weighed, chosen) = rates.weighed(&all, chosen)?;
            let excess = excess_percent(weighed[chosen].rate, rates.entropy);
            let hint = match excess {
                Some(e) if e > EXCESS_WARNING_PERCENT && !spec.given.table_bits => {
                    Some(rates.hint(&all, budget)?)
                }
                _ => None,
            };
            Sizing {
                rule: Rule::Budget(budget),
                weighed,
                chosen,
                hint,
            }
        }
        None => {
            let (chosen, within_reach) = rates.smallest_within(&all)?;
            let (weighed, chosen) = rates.weighed(&all, chosen)?;
            Sizing {
                rule: if within_reach {
                    Rule::Smallest
                } else {
                    Rule::LowestRate
                },
                weighed,
                chosen,
                hint: None,
            }
        }
    };
    Ok(Some(sizing))
}

/// Rates of candidates, computed once each; slots are shared by the methods at a size, and
/// the two rANS lookups share one rate.
struct Rates<'a> {
    counts: &'a [u64],
    probabilities: &'a [f64],
    entropy: f64,
    rates: Vec<Option<f64>>,
    slots: Vec<(u32, Vec<u32>)>,
    by_method: Vec<(Method, u32, f64)>,
}

impl<'a> Rates<'a> {
    fn new(counts: &'a [u64], probabilities: &'a [f64], n: usize) -> Self {
        Rates {
            counts,
            probabilities,
            entropy: quantize::entropy(counts),
            rates: vec![None; n],
            slots: Vec::new(),
            by_method: Vec::new(),
        }
    }

    fn rate(&mut self, all: &[Candidate], i: usize) -> Result<f64> {
        if let Some(Some(r)) = self.rates.get(i) {
            return Ok(*r);
        }
        let c = all
            .get(i)
            .ok_or_else(|| Error::internal("a candidate out of range"))?;
        let known = self
            .by_method
            .iter()
            .find(|(m, b, _)| *m == c.method && *b == c.table_bits)
            .map(|&(_, _, r)| r);
        let rate = match known {
            Some(r) => r,
            None => {
                let at = match self.slots.iter().position(|(b, _)| *b == c.table_bits) {
                    Some(at) => at,
                    None => {
                        let q = quantize::quantize(self.counts, c.table_bits)?;
                        self.slots.push((c.table_bits, q));
                        self.slots.len() - 1
                    }
                };
                let (_, r) = Tables::build(
                    c.method,
                    &self.slots[at].1,
                    self.counts,
                    self.probabilities,
                    c.table_bits,
                )?;
                // An unusable rate never wins.
                let r = if r.is_finite() { r } else { f64::INFINITY };
                self.by_method.push((c.method, c.table_bits, r));
                r
            }
        };
        self.rates[i] = Some(rate);
        Ok(rate)
    }

    /// Whether rate `r` ties with the lowest rate `best`.
    fn ties(&self, r: f64, best: f64) -> bool {
        self.entropy <= 0.0 || r <= best + best * TIE
    }

    /// The choice among the candidates that fit `budget` (`None`: none fits).
    fn pick(&mut self, all: &[Candidate], budget: usize) -> Result<Option<usize>> {
        let mut fitting = Vec::new();
        for (i, c) in all.iter().enumerate() {
            if c.bytes <= budget {
                fitting.push((i, self.rate(all, i)?));
            }
        }
        let best = fitting
            .iter()
            .map(|&(_, r)| r)
            .fold(f64::INFINITY, f64::min);
        Ok(fitting
            .iter()
            .filter(|&&(_, r)| self.ties(r, best))
            .map(|&(i, _)| i)
            .min_by_key(|&i| (all[i].speed_rank(), all[i].bytes, all[i].table_bits)))
    }

    /// The candidate of fewest bytes within the excess warning (ties to faster decoding,
    /// then the smaller table), and whether one was; otherwise the lowest rate, ties to
    /// fewer bytes.
    fn smallest_within(&mut self, all: &[Candidate]) -> Result<(usize, bool)> {
        let mut order: Vec<usize> = (0..all.len()).collect();
        order.sort_by_key(|&i| (all[i].bytes, all[i].speed_rank(), all[i].table_bits));
        for i in order {
            let r = self.rate(all, i)?;
            match excess_percent(r, self.entropy) {
                None => return Ok((i, true)),
                Some(e) if e <= EXCESS_WARNING_PERCENT => return Ok((i, true)),
                Some(_) => {}
            }
        }
        let best = self
            .rates
            .iter()
            .flatten()
            .fold(f64::INFINITY, |a, &b| a.min(b));
        let chosen = (0..all.len())
            .filter(|&i| self.rates[i].is_some_and(|r| self.ties(r, best)))
            .min_by_key(|&i| (all[i].bytes, all[i].table_bits))
            .ok_or_else(|| Error::internal("no candidate has a rate"))?;
        Ok((chosen, false))
    }

    /// The candidates weighed so far, and where `chosen` is among them.
    fn weighed(&self, all: &[Candidate], chosen: usize) -> Result<(Vec<Weighed>, usize)> {
        let mut out = Vec::new();
        let mut at = None;
        for (i, (c, r)) in all.iter().zip(&self.rates).enumerate() {
            if let Some(rate) = *r {
                if i == chosen {
                    at = Some(out.len());
                }
                out.push(Weighed {
                    candidate: *c,
                    rate,
                });
            }
        }
        let at = at.ok_or_else(|| Error::internal("the choice was not weighed"))?;
        Ok((out, at))
    }

    /// The smallest budget above `budget` whose choice codes within the excess warning.
    fn hint(&mut self, all: &[Candidate], budget: usize) -> Result<BudgetHint> {
        let mut budgets: Vec<usize> = all
            .iter()
            .map(|c| c.bytes)
            .filter(|&b| b > budget)
            .collect();
        budgets.sort_unstable();
        budgets.dedup();
        for b in budgets {
            if let Some(i) = self.pick(all, b)? {
                let rate = self.rate(all, i)?;
                if excess_percent(rate, self.entropy).is_some_and(|e| e <= EXCESS_WARNING_PERCENT) {
                    return Ok(BudgetHint::Raise {
                        budget: b,
                        choice: Weighed {
                            candidate: all[i],
                            rate,
                        },
                    });
                }
            }
        }
        let mut best: Option<Weighed> = None;
        for (i, c) in all.iter().enumerate() {
            let rate = self.rate(all, i)?;
            if best.is_none_or(|w| rate < w.rate) {
                best = Some(Weighed {
                    candidate: *c,
                    rate,
                });
            }
        }
        let best = best.ok_or_else(|| Error::internal("no candidate to hint at"))?;
        Ok(BudgetHint::Unreachable { best })
    }
}

/// Every size the report plots: each table_bits from the smallest that holds the alphabet,
/// over the methods and lookups the spec leaves open (the given ones when `table_bits` is
/// given), each with its rate. The same candidates and rates as the choice.
pub fn curve(spec: &CodecSpec, counts: &[u64], probabilities: &[f64]) -> Result<Vec<Weighed>> {
    let mut open = spec.clone();
    if spec.given.table_bits {
        open.given.method = true;
        open.given.lookup = true;
        open.given.table_bits = false;
    }
    let all = candidates(&open);
    let mut rates = Rates::new(counts, probabilities, all.len());
    let mut out = Vec::with_capacity(all.len());
    for (i, c) in all.iter().enumerate() {
        out.push(Weighed {
            candidate: *c,
            rate: rates.rate(&all, i)?,
        });
    }
    Ok(out)
}
