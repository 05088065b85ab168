//! Contexts for `context = "previous"`: the previous symbol chooses which of at most K table
//! sets codes the next symbol. This is the build-time part only: pair counts, a fixed
//! hold-out split, and the grouping of contexts into table sets.
//!
//! A grouping is priced at its real quantised rate: each set's slots come from
//! [`quantize`] on the summed training counts of its contexts, and every context pays
//! `-log2(slot / 2^table_bits)` per symbol under its set's slots. Every symbol has at least one
//! slot, so the held-out price is finite too. For each k the grouping of least training price
//! is sought; k is then chosen by the held-out price.
//!
//! Splitting a set never raises the training price (the merged slots remain a feasible table
//! for each part, and [`quantize`] is the exact optimum), so more sets always fit the
//! training data at least as well; only held-out data can say when they stop paying.

use std::cell::RefCell;
use std::collections::BTreeMap;
use std::rc::Rc;

use crate::error::{Error, Result};
use crate::quantize::{entropy, log2, quantize};
use crate::spec::MAX_TABLE_BITS;

/// The context of a stream's first symbol. Any fixed symbol would do, since encoder and
/// decoder agree on it; symbol 0 is always in the alphabet, so it needs no extra table row.
pub const FIRST_CONTEXT: usize = 0;

/// Hold-out block length in symbols: long enough to keep local runs together, short enough
/// that a few kilobytes of training data still give several held-out blocks.
pub const HOLD_BLOCK: usize = 256;

/// Every `HOLD_EVERY`-th block is held out (a fifth of the data).
pub const HOLD_EVERY: usize = 5;

/// Exact search up to this many contexts with training data (3^10 steps of the subset DP).
const EXACT_CONTEXTS: usize = 10;

/// Exact search also needs `2^contexts * symbols` within this, since each subset is
/// quantised once and [`quantize`] takes about a millisecond for 256 symbols in debug.
const EXACT_WORK: usize = 1 << 14;

/// Bound on the refinement passes (each pass costs `contexts * sets * symbols`).
const REFINE_PASSES: usize = 16;

/// Agglomeration starts from at most this many sets, bounding its cubic time.
const MERGE_START: usize = 256;

/// `x log2 x` is cached below this; merged counts are mostly small.
const XLOGX_CACHE: usize = 1 << 14;

/// Pair counts `counts[context][symbol]` of the sequences: each sequence's first symbol is
/// counted in [`FIRST_CONTEXT`], each later one in the context of the symbol before it.
///
/// A symbol `>= n` is not counted, and neither is the symbol after it (its context is not a
/// symbol). Rows of contexts that never occur are left empty (read them as all zero), so
/// memory follows the contexts that occur. Counts saturate.
pub fn pair_counts(sequences: &[&[u16]], n: usize) -> Vec<Vec<u64>> {
    count_pairs(sequences, n, |_| false).0
}

/// [`pair_counts`] split into `(train, held)` by position: the symbol at position `p` of the
/// concatenated sequences is held out when `(p / HOLD_BLOCK) % HOLD_EVERY == HOLD_EVERY - 1`,
/// i.e. every fifth block of 256 symbols. Its context is still the true previous symbol, so
/// no pair is lost at block edges. Positions run on across sequences, so many short
/// sequences still give held-out data; below `4 * 256` symbols in all, nothing is held out.
pub fn split_pair_counts(sequences: &[&[u16]], n: usize) -> (Vec<Vec<u64>>, Vec<Vec<u64>>) {
    count_pairs(sequences, n, |p| {
        (p / HOLD_BLOCK) % HOLD_EVERY == HOLD_EVERY - 1
    })
}

fn count_pairs(
    sequences: &[&[u16]],
    n: usize,
    held_out: impl Fn(usize) -> bool,
) -> (Vec<Vec<u64>>, Vec<Vec<u64>>) {
    let mut train: Vec<Vec<u64>> = vec![Vec::new(); n];
    let mut held: Vec<Vec<u64>> = vec![Vec::new(); n];
    let mut position = 0usize;
    for sequence in sequences {
        let mut previous = Some(FIRST_CONTEXT);
        for &symbol in sequence.iter() {
            let symbol = usize::from(symbol);
            let into = if held_out(position) {
                &mut held
            } else {
                &mut train
            };
            position = position.wrapping_add(1);
            if let (Some(context), true) = (previous, symbol < n) {
                if let Some(row) = into.get_mut(context) {
                    if row.is_empty() {
                        row.resize(n, 0);
                    }
                    row[symbol] = row[symbol].saturating_add(1);
                }
            }
            previous = (symbol < n).then_some(symbol);
        }
    }
    (train, held)
}

/// `H(X|Y)` in bits per symbol of a joint count table whose rows are the context `Y` and
/// columns the symbol `X`: the row entropies weighted by the rows' shares. Zero for no counts.
pub fn conditional_entropy(joint: &[Vec<u64>]) -> f64 {
    let total: f64 = joint.iter().flatten().map(|&c| c as f64).sum();
    if total == 0.0 {
        return 0.0;
    }
    joint
        .iter()
        .map(|row| {
            let t: f64 = row.iter().map(|&c| c as f64).sum();
            t / total * entropy(row)
        })
        .sum()
}

/// The chosen grouping of contexts into table sets, with its prices in bits (totals, not per
/// symbol) beside those of a single table set (order 0).
#[derive(Debug, Clone, PartialEq)]
pub struct Clustering {
    /// Table set of each context, numbered in order of first appearance by context index.
    pub set_of: Vec<u8>,
    /// Number of table sets used (at least 1).
    pub sets: usize,
    /// Training data priced under the chosen sets' slots.
    pub train_bits: f64,
    /// Held-out data priced under the same slots.
    pub held_bits: f64,
    /// Training data under one table set.
    pub order0_train_bits: f64,
    /// Held-out data under one table set.
    pub order0_held_bits: f64,
}

/// Groups the contexts (rows) of `train` into at most `max_sets` table sets (`0` counts as 1,
/// more than 256 as 256) for tables of `2^table_bits` slots.
///
/// For each k the grouping of least training price is found: exactly (dynamic programming
/// over subsets) when few contexts have training data, otherwise by agglomerative merging
/// on ideal entropy followed by refinement on the quantised price. The k of least held-out
/// price is kept, ties going to fewer sets. Without held-out data, k minimises the training
/// price plus `(d - 1) / 2 * log2(N)` bits per extra set (the BIC penalty, Schwarz 1978;
/// from memory), `d` being the symbols seen and `N` the training symbols.
///
/// Contexts without training data join the set that prices their held-out counts least;
/// ties, and contexts with no data at all, go to the set with most training data (the
/// closest to the overall distribution, the best guess for an unseen context).
///
/// Time: exact search `O(K * 3^m)` plus `2^m` quantisations for `m` contexts with training
/// data; the heuristic `O(s^3 + s^2 * d)` for the merging (`s = min(m, 256)`, `d` symbols a
/// row) plus at most 16 refinement passes of `O(m * k * d)` and their quantisations for
/// each k. About 0.6 s for 256 × 256 dense counts and K = 16 in a debug build.
///
/// Rows may be ragged (missing entries are zero). Errors when the alphabet does not fit the
/// table or `table_bits` exceeds the spec's maximum.
pub fn cluster(
    train: &[Vec<u64>],
    held: &[Vec<u64>],
    max_sets: usize,
    table_bits: u32,
) -> Result<Clustering> {
    cluster_where(train, held, max_sets, table_bits, |_| true)
}

/// [`cluster`], keeping only groupings whose number of sets `allowed` accepts (one set is
/// always accepted): the generated code takes powers of two, so that a set's index is
/// masked, not checked.
pub fn cluster_where(
    train: &[Vec<u64>],
    held: &[Vec<u64>],
    max_sets: usize,
    table_bits: u32,
    allowed: impl Fn(usize) -> bool,
) -> Result<Clustering> {
    if table_bits > MAX_TABLE_BITS {
        return Err(Error::internal(format!(
            "context clustering: table_bits {table_bits} above {MAX_TABLE_BITS}"
        )));
    }
    let contexts = train.len().max(held.len());
    let n = train.iter().chain(held).map(Vec::len).max().unwrap_or(0);
    if n == 0 {
        return Ok(Clustering {
            set_of: vec![0; contexts],
            sets: 1,
            train_bits: 0.0,
            held_bits: 0.0,
            order0_train_bits: 0.0,
            order0_held_bits: 0.0,
        });
    }
    let problem = Problem::new(train, held, contexts, n, table_bits);
    let active = problem.active.len();
    let most = max_sets.clamp(1, 256).min(active.max(1));
    let labels = if active <= EXACT_CONTEXTS && n.saturating_mul(1 << active) <= EXACT_WORK {
        problem.exact(most)?
    } else {
        problem.heuristic(most)?
    };

    let mut evaluated = Vec::with_capacity(labels.len());
    for l in &labels {
        evaluated.push(problem.evaluate(l)?);
    }
    let held_total = problem
        .held_sparse
        .iter()
        .flatten()
        .fold(0u64, |a, &(_, c)| a.saturating_add(c));
    let penalty = problem.set_penalty();
    let score = |e: &Evaluation| {
        if held_total > 0 {
            e.held
        } else {
            e.train + (e.sets - 1) as f64 * penalty
        }
    };
    // Index order with a strict `<`: ties keep fewer sets.
    let mut best = 0;
    for (i, e) in evaluated.iter().enumerate() {
        if (e.sets == 1 || allowed(e.sets)) && score(e) < score(&evaluated[best]) {
            best = i;
        }
    }
    let order0 = match evaluated.first() {
        Some(e) => (e.train, e.held),
        None => (0.0, 0.0),
    };
    let chosen = match evaluated.into_iter().nth(best) {
        Some(e) => e,
        None => problem.evaluate(&[])?,
    };
    Ok(Clustering {
        set_of: chosen.set_of.iter().map(|&s| s as u8).collect(),
        sets: chosen.sets,
        train_bits: chosen.train,
        held_bits: chosen.held,
        order0_train_bits: order0.0,
        order0_held_bits: order0.1,
    })
}

/// Each set's summed counts: `rows` (e.g. the training pair counts) added up by `set_of`;
/// `n` columns, `sets` rows. Contexts beyond `set_of` and sets `>= sets` are skipped.
pub fn set_counts(rows: &[Vec<u64>], set_of: &[u8], sets: usize, n: usize) -> Vec<Vec<u64>> {
    let mut out = vec![vec![0u64; n]; sets];
    for (row, &set) in rows.iter().zip(set_of) {
        if let Some(sum) = out.get_mut(usize::from(set)) {
            for (s, &c) in sum.iter_mut().zip(row) {
                *s = s.saturating_add(c);
            }
        }
    }
    out
}

type Sparse = Vec<(usize, u64)>;

/// The contexts' counts as sparse rows; `active` lists the contexts with training data, and
/// the searches label those only.
struct Problem {
    n: usize,
    bits: u32,
    train_sparse: Vec<Sparse>,
    held_sparse: Vec<Sparse>,
    active: Vec<usize>,
    /// Prices of the sets already quantised, by their sorted active members: the searches
    /// for successive k share most sets, and [`quantize`] is the slow step.
    tables: RefCell<BTreeMap<Vec<usize>, Rc<[f64]>>>,
}

/// A grouping of every context priced on both data.
struct Evaluation {
    set_of: Vec<usize>,
    sets: usize,
    train: f64,
    held: f64,
}

/// Per-symbol price `table_bits - log2(slots)` of quantised slots.
fn prices(counts: &[u64], bits: u32) -> Result<Vec<f64>> {
    let slots = quantize(counts, bits)?;
    Ok(slots
        .iter()
        .map(|&q| f64::from(bits) - log2(f64::from(q)))
        .collect())
}

/// Bits to code `row` at `prices`, summed in symbol order.
fn price(row: &[(usize, u64)], prices: &[f64]) -> f64 {
    // A plain loop: this is the inner loop of the refinement, and runs unoptimised.
    let mut total = 0.0;
    for &(s, c) in row {
        if s < prices.len() {
            total += c as f64 * prices[s];
        }
    }
    total
}

fn sparse(rows: &[Vec<u64>], contexts: usize) -> Vec<Sparse> {
    (0..contexts)
        .map(|c| {
            rows.get(c).map_or_else(Vec::new, |row| {
                row.iter()
                    .enumerate()
                    .filter(|&(_, &x)| x > 0)
                    .map(|(s, &x)| (s, x))
                    .collect()
            })
        })
        .collect()
}

fn add_into(sum: &mut [u64], row: &[(usize, u64)]) {
    for &(s, c) in row {
        if let Some(x) = sum.get_mut(s) {
            *x = x.saturating_add(c);
        }
    }
}

/// Labels renumbered 0.. in order of first appearance; returns the number of labels.
fn canonical(labels: &mut [usize]) -> usize {
    let mut map: Vec<(usize, usize)> = Vec::new();
    for l in labels.iter_mut() {
        let new = match map.iter().find(|&&(old, _)| old == *l) {
            Some(&(_, new)) => new,
            None => {
                map.push((*l, map.len()));
                map.len() - 1
            }
        };
        *l = new;
    }
    map.len()
}

impl Problem {
    fn new(train: &[Vec<u64>], held: &[Vec<u64>], contexts: usize, n: usize, bits: u32) -> Self {
        let train_sparse = sparse(train, contexts);
        let active = (0..contexts)
            .filter(|&c| !train_sparse[c].is_empty())
            .collect();
        Problem {
            n,
            bits,
            held_sparse: sparse(held, contexts),
            train_sparse,
            active,
            tables: RefCell::new(BTreeMap::new()),
        }
    }

    /// Prices of the set of active contexts `members` (sorted), quantised once.
    fn table(&self, members: &[usize]) -> Result<Rc<[f64]>> {
        if let Some(t) = self.tables.borrow().get(members) {
            return Ok(Rc::clone(t));
        }
        let mut sum = vec![0u64; self.n];
        for &i in members {
            add_into(&mut sum, self.row(i));
        }
        let table: Rc<[f64]> = prices(&sum, self.bits)?.into();
        self.tables
            .borrow_mut()
            .insert(members.to_vec(), Rc::clone(&table));
        Ok(table)
    }

    /// Each set's prices for labels numbered `0..sets`.
    fn tables_of(&self, labels: &[usize], sets: usize) -> Result<Vec<Rc<[f64]>>> {
        let mut members = vec![Vec::new(); sets];
        for (i, &l) in labels.iter().enumerate() {
            members[l].push(i);
        }
        members.iter().map(|m| self.table(m)).collect()
    }

    /// Active context `i`'s training row.
    fn row(&self, i: usize) -> &[(usize, u64)] {
        &self.train_sparse[self.active[i]]
    }

    fn train_total(&self, i: usize) -> u64 {
        self.row(i)
            .iter()
            .fold(0u64, |a, &(_, c)| a.saturating_add(c))
    }

    /// BIC price of one more table set, in bits.
    fn set_penalty(&self) -> f64 {
        let mut order0 = vec![0u64; self.n];
        for i in 0..self.active.len() {
            add_into(&mut order0, self.row(i));
        }
        let seen = order0.iter().filter(|&&c| c > 0).count();
        let total = order0.iter().fold(0u64, |a, &c| a.saturating_add(c));
        if seen < 2 || total < 2 {
            return 0.0;
        }
        (seen - 1) as f64 / 2.0 * log2(total as f64)
    }

    /// Training price of active contexts labelled `labels` (any numbering) with their sets'
    /// own quantised slots.
    fn train_price(&self, labels: &[usize]) -> Result<f64> {
        let mut labels = labels.to_vec();
        let sets = canonical(&mut labels);
        let tables = self.tables_of(&labels, sets)?;
        Ok(labels
            .iter()
            .enumerate()
            .map(|(i, &l)| price(self.row(i), &tables[l]))
            .sum())
    }

    /// Every context placed (active ones by `labels`, the rest as [`cluster`] documents) and
    /// priced.
    fn evaluate(&self, labels: &[usize]) -> Result<Evaluation> {
        let mut labels = labels.to_vec();
        let sets = canonical(&mut labels).max(1);
        let tables = self.tables_of(&labels, sets)?;
        let mut totals = vec![0u64; sets];
        for (i, &l) in labels.iter().enumerate() {
            totals[l] = totals[l].saturating_add(self.train_total(i));
        }
        // The set with most training data, lowest number on ties.
        let mut largest = 0;
        for (s, &t) in totals.iter().enumerate() {
            if t > totals[largest] {
                largest = s;
            }
        }
        let contexts = self.train_sparse.len();
        let mut set_of = vec![largest; contexts];
        for (i, &l) in labels.iter().enumerate() {
            set_of[self.active[i]] = l;
        }
        let rows = self.train_sparse.iter().zip(&self.held_sparse);
        for (set, (train, held)) in set_of.iter_mut().zip(rows) {
            if !train.is_empty() || held.is_empty() {
                continue;
            }
            let mut best_price = price(held, &tables[largest]);
            for (s, table) in tables.iter().enumerate() {
                let p = price(held, table);
                if p < best_price {
                    *set = s;
                    best_price = p;
                }
            }
        }
        let train = (0..contexts)
            .map(|c| price(&self.train_sparse[c], &tables[set_of[c]]))
            .sum();
        let held = (0..contexts)
            .map(|c| price(&self.held_sparse[c], &tables[set_of[c]]))
            .sum();
        // Zero-data contexts may have taken a set number before its first active member.
        let used = canonical(&mut set_of).max(1);
        Ok(Evaluation {
            set_of,
            sets: used,
            train,
            held,
        })
    }

    /// Least-price labels of the active contexts for k = 1..=most, by dynamic programming
    /// over subsets: `best[j][S]` = least price of subset `S` in at most `j` sets, the set
    /// holding `S`'s lowest context chosen among the subsets of `S` that contain it. Time
    /// `O(most * 3^m)` plus `2^m` quantisations.
    fn exact(&self, most: usize) -> Result<Vec<Vec<usize>>> {
        let m = self.active.len();
        let full = (1usize << m) - 1;
        let mut price_of = vec![0.0f64; full + 1];
        let mut sum = vec![0u64; self.n];
        for (mask, slot) in price_of.iter_mut().enumerate().skip(1) {
            sum.fill(0);
            for i in (0..m).filter(|&i| mask >> i & 1 == 1) {
                add_into(&mut sum, self.row(i));
            }
            let table = prices(&sum, self.bits)?;
            *slot = (0..m)
                .filter(|&i| mask >> i & 1 == 1)
                .map(|i| price(self.row(i), &table))
                .sum();
        }
        // picks[j - 2][S]: the set taken first when S is split into at most j sets.
        let mut picks: Vec<Vec<usize>> = Vec::new();
        let mut previous = price_of.clone();
        for _ in 2..=most {
            let mut best = vec![0.0f64; full + 1];
            let mut pick = vec![0usize; full + 1];
            for mask in 1..=full {
                let low = mask & mask.wrapping_neg();
                let rest = mask ^ low;
                // From the whole of `mask` downwards, so a tie keeps fewer sets.
                let mut t = rest;
                let mut best_value = f64::INFINITY;
                let mut best_sub = mask;
                loop {
                    let sub = low | t;
                    let value = price_of[sub] + previous[mask ^ sub];
                    if value < best_value {
                        best_value = value;
                        best_sub = sub;
                    }
                    if t == 0 {
                        break;
                    }
                    t = (t - 1) & rest;
                }
                best[mask] = best_value;
                pick[mask] = best_sub;
            }
            picks.push(pick);
            previous = best;
        }
        let mut out = Vec::with_capacity(most);
        for k in 1..=most {
            let mut labels = vec![0usize; m];
            let mut mask = full;
            let mut label = 0;
            let mut j = k;
            while mask != 0 {
                let sub = if j >= 2 { picks[j - 2][mask] } else { mask };
                for (i, l) in labels.iter_mut().enumerate() {
                    if sub >> i & 1 == 1 {
                        *l = label;
                    }
                }
                label += 1;
                mask ^= sub;
                j = j.saturating_sub(1);
            }
            out.push(labels);
        }
        Ok(out)
    }

    /// Labels for k = 1..=most when exact search is too costly: for each k the better of two
    /// starts, each refined on the quantised price, and never worse than k - 1's result.
    fn heuristic(&self, most: usize) -> Result<Vec<Vec<usize>>> {
        let m = self.active.len();
        let merged = self.agglomerate(most);
        let mut out: Vec<Vec<usize>> = Vec::with_capacity(most);
        let mut last_price = self.train_price(&vec![0; m])?;
        out.push(vec![0; m]);
        for k in 2..=most {
            let mut best: Option<(Vec<usize>, f64)> = None;
            let mut starts = vec![self.heaviest_apart(k)];
            if let Some(labels) = merged.get(k - 1).filter(|l| l.len() == m) {
                starts.insert(0, labels.clone());
            }
            for start in starts {
                let (labels, p) = self.refine(start)?;
                if best.as_ref().is_none_or(|(_, b)| p < *b) {
                    best = Some((labels, p));
                }
            }
            match best {
                Some((labels, p)) if p < last_price => {
                    last_price = p;
                    out.push(labels);
                }
                _ => {
                    let keep = out.last().cloned().unwrap_or_else(|| vec![0; m]);
                    out.push(keep);
                }
            }
        }
        Ok(out)
    }

    /// The k - 1 contexts with most training data alone, the rest together.
    fn heaviest_apart(&self, k: usize) -> Vec<usize> {
        let m = self.active.len();
        let totals: Vec<u64> = (0..m).map(|i| self.train_total(i)).collect();
        let mut order: Vec<usize> = (0..m).collect();
        order.sort_by(|&a, &b| totals[b].cmp(&totals[a]).then(a.cmp(&b)));
        let mut labels = vec![k - 1; m];
        for (label, &i) in order.iter().take(k - 1).enumerate() {
            labels[i] = label;
        }
        labels
    }

    /// Alternate between moving each context to the set whose current slots price it least
    /// (strictly less than its own) and requantising the sets that changed. Neither step
    /// raises the price, the second because [`quantize`] is the exact optimum for a set's
    /// counts, so the price falls until no context moves or the pass bound is reached.
    /// A set left empty keeps its last slots. Returns the labels and their price.
    fn refine(&self, mut labels: Vec<usize>) -> Result<(Vec<usize>, f64)> {
        let m = labels.len();
        let k = canonical(&mut labels).max(1);
        let members = |labels: &[usize], set: usize| -> Vec<usize> {
            (0..labels.len()).filter(|&i| labels[i] == set).collect()
        };
        let mut tables = self.tables_of(&labels, k)?;
        for _ in 0..REFINE_PASSES {
            let mut changed = vec![false; k];
            for (i, label) in labels.iter_mut().enumerate() {
                let row = self.row(i);
                let here = *label;
                let mut best = here;
                let mut best_price = price(row, &tables[here]);
                for (s, table) in tables.iter().enumerate() {
                    if s != here {
                        let p = price(row, table);
                        if p < best_price {
                            best = s;
                            best_price = p;
                        }
                    }
                }
                if best != here {
                    changed[here] = true;
                    changed[best] = true;
                    *label = best;
                }
            }
            if !changed.contains(&true) {
                break;
            }
            for s in (0..k).filter(|&s| changed[s]) {
                let m = members(&labels, s);
                if !m.is_empty() {
                    tables[s] = self.table(&m)?;
                }
            }
        }
        let total = (0..m).map(|i| price(self.row(i), &tables[labels[i]])).sum();
        Ok((labels, total))
    }

    /// Agglomerative merging, from one set per active context (beyond [`MERGE_START`]
    /// contexts, the lightest share one starting set, for the refinement to spread): always
    /// the pair whose merge raises the ideal price `T log2 T - Σ c log2 c` least (lowest
    /// indices on ties). Returns the labels at each count of sets 1..=most (index k - 1).
    /// Time `O(s^3 + s^2 * d)` for `s <= MERGE_START` starting sets of at most `d` distinct
    /// symbols; memory `O(s^2 + s * n)`.
    fn agglomerate(&self, most: usize) -> Vec<Vec<usize>> {
        let cache: Vec<f64> = (0..XLOGX_CACHE as u64).map(xlogx_direct).collect();
        let xlogx = |x: u64| xlogx_cached(&cache, x);
        let active = self.active.len();
        let mut owner: Vec<usize> = (0..active).collect();
        if active > MERGE_START {
            let mut order: Vec<usize> = (0..active).collect();
            order.sort_by(|&a, &b| (self.train_total(b).cmp(&self.train_total(a))).then(a.cmp(&b)));
            for (rank, &i) in order.iter().enumerate() {
                owner[i] = rank.min(MERGE_START - 1);
            }
        }
        let m = active.min(MERGE_START);
        let mut dense = vec![vec![0u64; self.n]; m];
        for (i, &o) in owner.iter().enumerate() {
            add_into(&mut dense[o], self.row(i));
        }
        let mut support: Vec<Vec<usize>> = dense
            .iter()
            .map(|d| (0..self.n).filter(|&s| d[s] > 0).collect())
            .collect();
        let mut totals: Vec<u64> = dense
            .iter()
            .map(|d| d.iter().fold(0u64, |a, &c| a.saturating_add(c)))
            .collect();
        // Σ c log2 c of each set's counts.
        let mut own: Vec<f64> = dense
            .iter()
            .map(|d| d.iter().map(|&c| xlogx(c)).sum())
            .collect();
        // Raise of the ideal price when sets a and b merge. Σ over the smaller support of
        // `(x+y) log(x+y) - y log y`, less its own Σ x log x, is the merged set's change in
        // Σ c log c: symbols outside that support keep their terms.
        let raise = |a: usize,
                     b: usize,
                     dense: &[Vec<u64>],
                     support: &[Vec<usize>],
                     t: &[u64],
                     own: &[f64]| {
            let (small, other) = if support[a].len() <= support[b].len() {
                (a, b)
            } else {
                (b, a)
            };
            let (xs, ys) = (&dense[small][..], &dense[other][..]);
            let mut joined = 0.0;
            for &s in &support[small] {
                let y = ys[s];
                joined += xlogx(xs[s].saturating_add(y)) - xlogx(y);
            }
            let shared = joined - own[small];
            xlogx(t[a].saturating_add(t[b])) - xlogx(t[a]) - xlogx(t[b]) - shared
        };
        let mut delta = vec![0.0f64; m * m];
        for a in 0..m {
            for b in a + 1..m {
                delta[a * m + b] = raise(a, b, &dense, &support, &totals, &own);
            }
        }
        let mut alive = vec![true; m];
        let mut out = vec![Vec::new(); most];
        let mut count = m;
        if count <= most && count > 0 {
            out[count - 1] = owner.clone();
        }
        while count > 1 {
            let mut pair = (0, 0);
            let mut least = f64::INFINITY;
            for a in (0..m).filter(|&a| alive[a]) {
                for b in (a + 1..m).filter(|&b| alive[b]) {
                    if delta[a * m + b] < least {
                        least = delta[a * m + b];
                        pair = (a, b);
                    }
                }
            }
            let (a, b) = pair;
            if a == b {
                break;
            }
            let moved = std::mem::take(&mut dense[b]);
            for (x, &y) in dense[a].iter_mut().zip(&moved) {
                *x = x.saturating_add(y);
            }
            own[a] = dense[a].iter().map(|&c| xlogx(c)).sum();
            let mut union: Vec<usize> = support[a].iter().chain(&support[b]).copied().collect();
            union.sort_unstable();
            union.dedup();
            support[a] = union;
            support[b] = Vec::new();
            totals[a] = totals[a].saturating_add(totals[b]);
            alive[b] = false;
            for o in owner.iter_mut() {
                if *o == b {
                    *o = a;
                }
            }
            count -= 1;
            for c in (0..m).filter(|&c| alive[c] && c != a) {
                let (lo, hi) = (a.min(c), a.max(c));
                delta[lo * m + hi] = raise(lo, hi, &dense, &support, &totals, &own);
            }
            if count <= most {
                out[count - 1] = owner.clone();
            }
        }
        out
    }
}

fn xlogx_cached(cache: &[f64], x: u64) -> f64 {
    if x < cache.len() as u64 {
        cache[x as usize]
    } else {
        xlogx_direct(x)
    }
}

fn xlogx_direct(x: u64) -> f64 {
    if x == 0 {
        0.0
    } else {
        x as f64 * log2(x as f64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::quantize::cross_entropy;

    /// SplitMix64 (Steele, Lea & Flood, OOPSLA 2014; from memory): seeded test data.
    struct Rng(u64);

    impl Rng {
        fn next(&mut self) -> u64 {
            self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut z = self.0;
            z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            z ^ (z >> 31)
        }

        fn below(&mut self, n: usize) -> usize {
            (self.next() % n as u64) as usize
        }

        fn weighted(&mut self, weights: &[u64]) -> usize {
            let total: u64 = weights.iter().sum();
            let mut r = self.next() % total;
            for (i, &w) in weights.iter().enumerate() {
                if r < w {
                    return i;
                }
                r -= w;
            }
            weights.len() - 1
        }
    }

    /// The price of a grouping of every context, written independently of the module: per
    /// set, slots from the summed training counts; per context, `cross_entropy` times its
    /// count.
    fn naive_price(train: &[Vec<u64>], labels: &[usize], bits: u32) -> f64 {
        let n = train.iter().map(Vec::len).max().unwrap_or(0);
        let sets = labels.iter().max().map_or(0, |&l| l + 1);
        let mut total = 0.0;
        for set in 0..sets {
            let mut sum = vec![0u64; n];
            for (row, _) in train.iter().zip(labels).filter(|&(_, &l)| l == set) {
                for (s, &c) in sum.iter_mut().zip(row) {
                    *s += c;
                }
            }
            if sum.iter().all(|&c| c == 0) {
                continue;
            }
            let slots = quantize(&sum, bits).unwrap();
            for (row, _) in train.iter().zip(labels).filter(|&(_, &l)| l == set) {
                let count: u64 = row.iter().sum();
                total += count as f64 * cross_entropy(row, &slots, bits);
            }
        }
        total
    }

    /// Least price over every assignment of the contexts to at most `k` labels.
    fn brute_force(train: &[Vec<u64>], k: usize, bits: u32) -> f64 {
        let contexts = train.len();
        let mut labels = vec![0usize; contexts];
        let mut best = f64::INFINITY;
        loop {
            best = best.min(naive_price(train, &labels, bits));
            // Next assignment, as a base-k counter.
            let mut i = 0;
            while i < contexts && labels[i] == k - 1 {
                labels[i] = 0;
                i += 1;
            }
            if i == contexts {
                return best;
            }
            labels[i] += 1;
        }
    }

    /// Labels over every context from labels over the active ones (idle contexts to 0).
    fn spread(problem: &Problem, labels: &[usize]) -> Vec<usize> {
        let mut all = vec![0; problem.train_sparse.len()];
        for (i, &l) in labels.iter().enumerate() {
            all[problem.active[i]] = l;
        }
        all
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
    }

    /// Counts of `draws[c]` symbols drawn for each context from `dists[group[c]]`.
    fn drawn(rng: &mut Rng, dists: &[Vec<u64>], group: &[usize], draws: &[usize]) -> Vec<Vec<u64>> {
        group
            .iter()
            .zip(draws)
            .map(|(&g, &d)| {
                let mut row = vec![0u64; dists[g].len()];
                for _ in 0..d {
                    row[rng.weighted(&dists[g])] += 1;
                }
                row
            })
            .collect()
    }

    /// A Markov chain whose next symbol is drawn from `dists[group[previous]]`.
    fn chain(rng: &mut Rng, dists: &[Vec<u64>], group: &[usize], len: usize) -> Vec<u16> {
        let mut previous = FIRST_CONTEXT;
        (0..len)
            .map(|_| {
                let s = rng.weighted(&dists[group[previous]]);
                previous = s;
                s as u16
            })
            .collect()
    }

    #[test]
    fn conditional_entropy_of_the_textbook_joint_distribution() {
        // Cover & Thomas, Elements of Information Theory, 2nd ed., Example 2.2.1 (from
        // memory): p(x, y) with rows y = 1..4 and columns x = 1..4, times 32. There
        // H(X|Y) = 11/8 and H(Y|X) = 13/8 bits; rows are our contexts Y, columns symbols X.
        let joint = vec![
            vec![4, 2, 1, 1],
            vec![2, 4, 1, 1],
            vec![2, 2, 2, 2],
            vec![8, 0, 0, 0],
        ];
        assert!((conditional_entropy(&joint) - 11.0 / 8.0).abs() < 1e-12);
        let transposed: Vec<Vec<u64>> = (0..4)
            .map(|x| joint.iter().map(|row| row[x]).collect())
            .collect();
        assert!((conditional_entropy(&transposed) - 13.0 / 8.0).abs() < 1e-12);
        assert_eq!(conditional_entropy(&[]), 0.0);
        assert_eq!(conditional_entropy(&[vec![0, 0], vec![]]), 0.0);
    }

    #[test]
    fn pair_counts_follow_the_previous_symbol() {
        // Worked by hand from the documented rule.
        let counts = pair_counts(&[&[1, 2, 1], &[2]], 3);
        assert_eq!(counts, vec![vec![0, 1, 1], vec![0, 0, 1], vec![0, 1, 0]]);
        // 7 is outside the alphabet: neither it nor the 2 after it is counted.
        let counts = pair_counts(&[&[1, 7, 2, 1]], 3);
        assert_eq!(counts, vec![vec![0, 1, 0], vec![], vec![0, 1, 0]]);
        assert!(pair_counts(&[&[0, 1, 2]], 0).is_empty());
        assert_eq!(pair_counts(&[], 2), vec![Vec::<u64>::new(); 2]);
        // A symbol fixed by its predecessor carries no information (common practice).
        let alternating: Vec<u16> = (1..101).map(|i| i % 2).collect();
        assert_eq!(conditional_entropy(&pair_counts(&[&alternating], 2)), 0.0);
    }

    #[test]
    fn every_fifth_block_is_held_out_with_its_true_context() {
        // Worked by hand from the documented rule: positions 1024..1280 are held out.
        let mut sequence = vec![0u16; 1300];
        sequence[1023] = 1;
        sequence[1024] = 2;
        let (train, held) = split_pair_counts(&[&sequence], 3);
        let sum = |rows: &[Vec<u64>]| rows.iter().flatten().sum::<u64>();
        assert_eq!(sum(&held), 256);
        assert_eq!(sum(&train), 1300 - 256);
        // Position 1024 opens the held-out block; its context is position 1023's symbol.
        assert_eq!(held[1][2], 1);
        assert_eq!(train[0][1], 1);
        // Positions run on across sequences: 5 x 256 one-symbol sequences hold out 256.
        let ones = vec![[1u16]; 5 * 256];
        let refs: Vec<&[u16]> = ones.iter().map(|s| &s[..]).collect();
        let (train, held) = split_pair_counts(&refs, 2);
        assert_eq!((train[0][1], held[0][1]), (4 * 256, 256));
    }

    #[test]
    fn exact_search_matches_brute_force() {
        let mut rng = Rng(7);
        for case in 0..24 {
            let contexts = 3 + rng.below(5);
            let n = 2 + rng.below(4);
            let bits = 4 + rng.below(3) as u32;
            let train: Vec<Vec<u64>> = (0..contexts)
                .map(|_| {
                    let idle = rng.below(6) == 0;
                    (0..n)
                        .map(|_| match rng.below(5) {
                            _ if idle => 0,
                            0 => 0,
                            1 => rng.below(4) as u64,
                            _ => rng.below(300) as u64,
                        })
                        .collect()
                })
                .collect();
            let problem = Problem::new(&train, &[], contexts, n, bits);
            let m = problem.active.len();
            let most = 4.min(m.max(1));
            let found = problem.exact(most).unwrap();
            for k in 1..=4 {
                let labels = spread(&problem, &found[k.min(most) - 1]);
                assert!(labels.iter().filter(|&&l| l > 0).all(|&l| l < k));
                let ours = naive_price(&train, &labels, bits);
                let best = brute_force(&train, k, bits);
                assert!(close(ours, best), "case {case}, k {k}: {ours} vs {best}");
                let set = cluster(&train, &[], k, bits).unwrap();
                assert!(set.sets <= k);
            }
        }
    }

    #[test]
    fn heuristic_beats_order0_and_trivial_groupings() {
        let mut rng = Rng(21);
        for case in 0..4 {
            let contexts = 24 + rng.below(16);
            let n = 8 + rng.below(24);
            let bits = 8;
            let dists: Vec<Vec<u64>> = (0..4)
                .map(|_| (0..n).map(|_| 1 + rng.below(50) as u64).collect())
                .collect();
            let group: Vec<usize> = (0..contexts).map(|_| rng.below(4)).collect();
            let draws: Vec<usize> = (0..contexts).map(|_| rng.below(400)).collect();
            let train = drawn(&mut rng, &dists, &group, &draws);
            let problem = Problem::new(&train, &[], contexts, n, bits);
            let found = problem.heuristic(6).unwrap();
            let order0 = naive_price(&train, &vec![0; contexts], bits);
            let mut last = order0;
            for k in 1..=6 {
                let ours = naive_price(&train, &spread(&problem, &found[k - 1]), bits);
                let round_robin: Vec<usize> = (0..contexts).map(|c| c % k).collect();
                let blocks: Vec<usize> = (0..contexts).map(|c| c * k / contexts).collect();
                let slack = 1e-9 * order0;
                assert!(
                    ours <= last + slack,
                    "case {case}, k {k}: {ours} above k-1 {last}"
                );
                for other in [&round_robin, &blocks] {
                    let theirs = naive_price(&train, other, bits);
                    assert!(
                        ours <= theirs + slack,
                        "case {case}, k {k}: {ours} vs {theirs}"
                    );
                }
                last = ours;
            }
            assert!(last < order0, "case {case}: no gain over order 0");
        }
    }

    #[test]
    fn more_contexts_than_starting_sets() {
        let mut rng = Rng(12);
        let n = 400;
        let dists: Vec<Vec<u64>> = (0..4)
            .map(|g| (0..n).map(|s| if s % 4 == g { 20 } else { 1 }).collect())
            .collect();
        let group: Vec<usize> = (0..n).map(|_| rng.below(4)).collect();
        let draws: Vec<usize> = (0..n).map(|_| 20 + rng.below(200)).collect();
        let train = drawn(&mut rng, &dists, &group, &draws);
        let problem = Problem::new(&train, &[], n, n, 10);
        assert!(problem.active.len() > MERGE_START);
        let found = problem.heuristic(4).unwrap();
        let order0 = naive_price(&train, &vec![0; n], 10);
        let round_robin: Vec<usize> = (0..n).map(|c| c % 4).collect();
        let ours = naive_price(&train, &spread(&problem, &found[3]), 10);
        assert!(ours < order0);
        assert!(ours <= naive_price(&train, &round_robin, 10));
        let mut truth = group.clone();
        canonical(&mut truth);
        let mut four = spread(&problem, &found[3]);
        canonical(&mut four);
        assert_eq!(four, truth);
    }

    #[test]
    fn three_sources_give_three_sets() {
        let mut rng = Rng(5);
        let n = 16;
        // Each source favours its own five symbols.
        let dists: Vec<Vec<u64>> = (0..3)
            .map(|g| (0..n).map(|s| if s / 5 == g { 40 } else { 2 }).collect())
            .collect();
        let contexts = 60;
        let group: Vec<usize> = (0..contexts).map(|_| rng.below(3)).collect();
        let draws: Vec<usize> = (0..contexts).map(|_| 500 + rng.below(2500)).collect();
        let train = drawn(&mut rng, &dists, &group, &draws);
        let fifth: Vec<usize> = draws.iter().map(|d| d / 5).collect();
        let held = drawn(&mut rng, &dists, &group, &fifth);
        let problem = Problem::new(&train, &held, contexts, n, 8);
        let found = problem.heuristic(8).unwrap();
        let mut truth = group.clone();
        canonical(&mut truth);
        let mut three = spread(&problem, &found[2]);
        canonical(&mut three);
        assert_eq!(three, truth);
        // On held-out data a split of one source costs or gains only noise, so the choice
        // may keep a fourth set; it must still never mix two sources.
        let chosen = cluster(&train, &held, 8, 8).unwrap();
        assert!(chosen.sets >= 3, "{chosen:?}");
        for set in 0..chosen.sets {
            let sources: Vec<usize> = (0..contexts)
                .filter(|&c| usize::from(chosen.set_of[c]) == set)
                .map(|c| truth[c])
                .collect();
            assert!(sources.iter().all(|&g| g == sources[0]), "{chosen:?}");
        }
    }

    #[test]
    fn held_out_data_limits_the_sets() {
        let mut rng = Rng(99);
        let n = 16;
        let dists: Vec<Vec<u64>> = (0..8)
            .map(|_| (0..n).map(|_| 1 + rng.below(30) as u64).collect())
            .collect();
        let group: Vec<usize> = (0..n).map(|c| c % 8).collect();
        let held_seq = chain(&mut rng, &dists, &group, 50_000);
        let held = pair_counts(&[&held_seq], n);
        let sets = |len: usize, rng: &mut Rng| {
            let seq = chain(rng, &dists, &group, len);
            cluster(&pair_counts(&[&seq], n), &held, 8, 8).unwrap()
        };
        let tiny = sets(150, &mut rng);
        let plenty = sets(100_000, &mut rng);
        assert!(tiny.sets < plenty.sets, "{} vs {}", tiny.sets, plenty.sets);
        assert!(plenty.held_bits < plenty.order0_held_bits);
        assert!(tiny.held_bits <= tiny.order0_held_bits);
    }

    #[test]
    fn without_held_out_data_the_penalty_decides() {
        let mut rng = Rng(3);
        let n = 16;
        let dists: Vec<Vec<u64>> = (0..4)
            .map(|_| (0..n).map(|_| 1 + rng.below(30) as u64).collect())
            .collect();
        let group: Vec<usize> = (0..n).map(|c| c % 4).collect();
        let seq = chain(&mut rng, &dists, &group, 60);
        let small = cluster(&pair_counts(&[&seq], n), &[], 8, 8).unwrap();
        let seq = chain(&mut rng, &dists, &group, 200_000);
        let large = cluster(&pair_counts(&[&seq], n), &[], 8, 8).unwrap();
        assert!(small.sets < large.sets, "{} vs {}", small.sets, large.sets);
        assert_eq!(large.held_bits, 0.0);
    }

    #[test]
    fn idle_contexts_join_the_set_that_prices_them_least() {
        // Worked by hand: contexts 0 and 1 train opposite tables; 2 has only held-out data,
        // shaped like 1's; 3 has none and joins the larger set (0 on the tie).
        let train = vec![vec![900, 10], vec![10, 900], vec![0, 0], vec![0, 0]];
        let held = vec![vec![0, 0], vec![0, 0], vec![1, 50], vec![0, 0]];
        let c = cluster(&train, &held, 2, 6).unwrap();
        assert_eq!(c.set_of, vec![0, 1, 1, 0]);
        assert_eq!(c.sets, 2);
    }

    #[test]
    fn degenerate_inputs_do_not_panic() {
        let empty = cluster(&[], &[], 4, 11).unwrap();
        assert_eq!((empty.set_of.len(), empty.sets), (0, 1));
        let one = cluster(&[vec![5]], &[vec![2]], 3, 0).unwrap();
        assert_eq!((one.sets, one.train_bits, one.held_bits), (1, 0.0, 0.0));
        // No training data: one uniform table; a uniform code over 4 symbols costs 2 bits a
        // symbol (common practice), so 16 held-out symbols cost 32 bits.
        let zero = vec![vec![0u64; 4]; 4];
        let held = vec![vec![1u64; 4]; 4];
        let c = cluster(&zero, &held, 0, 4).unwrap();
        assert_eq!((c.sets, c.held_bits), (1, 32.0));
        let ragged = vec![vec![3], vec![], vec![0, 0, 7], vec![1, 1]];
        let c = cluster(&ragged, &[vec![1, 2, 3, 4, 5]], 1000, 5).unwrap();
        assert_eq!(c.set_of.len(), 4);
        let huge = vec![vec![u64::MAX; 3]; 3];
        let c = cluster(&huge, &huge, 16, 4).unwrap();
        assert!(c.train_bits.is_finite() && c.held_bits.is_finite());
        assert!(cluster(&zero, &held, 2, 40).is_err());
        assert!(cluster(&[vec![1; 300]], &[], 2, 8).is_err());
        let mut rng = Rng(1);
        let rows: Vec<Vec<u64>> = (0..12)
            .map(|_| (0..300).map(|_| rng.below(3) as u64).collect())
            .collect();
        assert!(cluster(&rows, &[], 4, 8).is_err());
        assert_eq!(
            set_counts(&[vec![1, 2], vec![3]], &[1, 9], 2, 2),
            vec![vec![0, 0], vec![1, 2]]
        );
    }

    #[test]
    fn full_byte_alphabet_is_fast_and_deterministic() {
        let mut rng = Rng(42);
        let n = 256;
        let dists: Vec<Vec<u64>> = (0..16)
            .map(|_| (0..n).map(|_| 1 + rng.below(40) as u64).collect())
            .collect();
        let noisy = |rng: &mut Rng| -> Vec<Vec<u64>> {
            (0..n)
                .map(|c| {
                    dists[c % 16]
                        .iter()
                        .map(|&w| w * (1 + rng.below(4) as u64))
                        .collect()
                })
                .collect()
        };
        let train = noisy(&mut rng);
        let held = noisy(&mut rng);
        let start = std::time::Instant::now();
        let first = cluster(&train, &held, 16, 11).unwrap();
        let took = start.elapsed();
        eprintln!("256 x 256, K = 16: {took:?}, {} sets", first.sets);
        assert!(first.held_bits < first.order0_held_bits);
        assert_eq!(cluster(&train, &held, 16, 11).unwrap(), first);
    }

    /// Real text, for the report: `cargo test --lib context -- --ignored --nocapture`.
    #[test]
    #[ignore]
    fn license_texts() {
        let dir = std::path::Path::new("/usr/share/common-licenses");
        let (Ok(gpl), Ok(apache)) = (
            std::fs::read(dir.join("GPL-3")),
            std::fs::read(dir.join("Apache-2.0")),
        ) else {
            eprintln!("no license texts here");
            return;
        };
        let words = |b: &[u8]| -> Vec<u16> { b.iter().map(|&x| u16::from(x)).collect() };
        let train = pair_counts(&[&words(&gpl)], 256);
        let held = pair_counts(&[&words(&apache)], 256);
        eprintln!("H(X|Y) of GPL-3: {:.4} bits", conditional_entropy(&train));
        for k in [1, 2, 4, 8, 16] {
            let start = std::time::Instant::now();
            let c = cluster(&train, &held, k, 11).unwrap();
            eprintln!(
                "K = {k:2}: {} sets, held {:.0} bits vs order 0 {:.0} ({:.2}% less), train {:.0} vs {:.0}, {:?}",
                c.sets,
                c.held_bits,
                c.order0_held_bits,
                100.0 * (1.0 - c.held_bits / c.order0_held_bits),
                c.train_bits,
                c.order0_train_bits,
                start.elapsed()
            );
        }
    }
}
