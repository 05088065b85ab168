//! Stage 2: counts per symbol, from sample files, inline text and explicit counts. Training
//! sequences are kept so that the verify stage can round-trip them. One table set's counts
//! today; contexts will give a codec several.

use crate::error::{Error, Result};
use crate::kind::integers::Integers;
use crate::kind::{self, Kind, Misfit};
use crate::load::Sample;
use crate::spec::{CodecSpec, Source};
use std::collections::BTreeMap;
use std::sync::Arc;

/// One piece of training data as symbol indices, and where it came from (for messages).
/// A large sample keeps only its first [`crate::load::KEPT_SYMBOLS`] symbols.
#[derive(Debug, Clone)]
pub struct Sequence {
    pub origin: String,
    pub symbols: Vec<u16>,
    /// Integers codecs: each symbol's offset in its bin (its bits follow the symbol's).
    pub offsets: Vec<u32>,
}

/// Counts per symbol (in alphabet order) and the sequences they came from.
#[derive(Debug, Clone)]
pub struct Model {
    pub counts: Vec<u64>,
    pub sequences: Vec<Sequence>,
    /// Symbols of samples and inline text in all, including any a large sample did not keep.
    pub sequence_symbols: u64,
    /// Integers codecs: the alphabet with its bins chosen from the training data, and the
    /// training counts by place.
    pub bound: Option<Arc<dyn Kind>>,
    pub place_counts: BTreeMap<u32, u64>,
}

impl Model {
    /// Training symbols in all; saturates rather than wrapping on absurd counts.
    pub fn total(&self) -> u64 {
        self.counts.iter().fold(0u64, |a, &c| a.saturating_add(c))
    }

    /// Probabilities of the training data; uniform when there is none.
    pub fn probabilities(&self) -> Vec<f64> {
        let total: f64 = self.counts.iter().map(|&c| c as f64).sum();
        if total == 0.0 {
            return vec![1.0 / self.counts.len() as f64; self.counts.len()];
        }
        self.counts.iter().map(|&c| c as f64 / total).collect()
    }
}

/// Counts the training data of `codec`; `samples` are its sample files, counted, in the
/// order of its sources (read by [`crate::load::samples`]).
pub fn build(codec: &CodecSpec, samples: Vec<Sample>) -> Result<Model> {
    if let Some(integers) = codec.kind.integers() {
        return build_integers(codec, integers, samples);
    }
    let kind = codec.kind.as_ref();
    let mut counts = vec![0u64; kind.alphabet_len()];
    let mut sequences = Vec::new();
    let mut files = samples.into_iter();
    let mut sequence_symbols = 0u64;
    for source in &codec.sources {
        match source {
            Source::PlaceCounts(_) => {}
            Source::Counts(c) => {
                for (slot, v) in counts.iter_mut().zip(c) {
                    *slot = slot.saturating_add(*v);
                }
            }
            Source::Text { text, location } => {
                let symbols =
                    kind::scan(kind, text.as_bytes()).map_err(|Misfit { offset, message }| {
                        Error::input(
                            Some(location.clone()),
                            format!("{message} (at byte {offset} of the inline text)"),
                        )
                        .in_codec(&codec.name)
                    })?;
                for &s in &symbols {
                    counts[usize::from(s)] = counts[usize::from(s)].saturating_add(1);
                }
                sequence_symbols = sequence_symbols.saturating_add(symbols.len() as u64);
                sequences.push(Sequence {
                    origin: "inline text".to_string(),
                    symbols,
                    offsets: Vec::new(),
                });
            }
            Source::CountsFile { declared, .. } => {
                let Some(file) = files.next() else {
                    return Err(Error::internal(format!(
                        "counts_file \"{declared}\" was not loaded"
                    )));
                };
                for (slot, c) in counts.iter_mut().zip(&file.counts) {
                    *slot = slot.saturating_add(*c);
                }
            }
            Source::Sample { declared, .. } => {
                let Some(sample) = files.next() else {
                    return Err(Error::internal(format!(
                        "sample \"{declared}\" was not loaded"
                    )));
                };
                sequence_symbols = sequence_symbols.saturating_add(sample.total);
                for (slot, c) in counts.iter_mut().zip(&sample.counts) {
                    *slot = slot.saturating_add(*c);
                }
                sequences.push(Sequence {
                    origin: format!("sample \"{declared}\""),
                    symbols: sample.kept,
                    offsets: Vec::new(),
                });
            }
        }
    }
    escape_floor(kind, &mut counts);
    Ok(Model {
        counts,
        sequences,
        sequence_symbols,
        bound: None,
        place_counts: BTreeMap::new(),
    })
}

/// The escape's count: as often as the training data left the alphabet with a floor, or
/// the spec's `escape_share` ([`crate::kind::Escape::count`]).
fn escape_floor(kind: &dyn Kind, counts: &mut [u64]) {
    if let Some(e) = kind.escape() {
        let seen = counts.get(e.symbol).copied().unwrap_or(0);
        let others = counts
            .iter()
            .fold(0u64, |a, &c| a.saturating_add(c))
            .saturating_sub(seen);
        // No training data at all: every symbol stays equally likely.
        if others == 0 && seen == 0 {
            return;
        }
        if let Some(slot) = counts.get_mut(e.symbol) {
            *slot = e.count(others, seen);
        }
    }
}

/// An integers codec: counts by place from every source, the bins chosen from them, then
/// counts by bin and the sequences as bins and offsets.
fn build_integers(codec: &CodecSpec, integers: &Integers, samples: Vec<Sample>) -> Result<Model> {
    let mut place_counts: BTreeMap<u32, u64> = BTreeMap::new();
    let mut add = |u: u32, n: u64| {
        let slot = place_counts.entry(u).or_insert(0);
        *slot = slot.saturating_add(n);
    };
    let mut pieces: Vec<(String, Vec<u32>)> = Vec::new();
    let mut files = samples.into_iter();
    let mut sequence_symbols = 0u64;
    for source in &codec.sources {
        match source {
            Source::Counts(_) => {}
            Source::CountsFile { declared, .. } => {
                return Err(Error::input(
                    Some(codec.location.clone()),
                    format!("counts_file \"{declared}\": integers codecs take samples or counts, not a counts file"),
                )
                .in_codec(&codec.name));
            }
            Source::PlaceCounts(c) => {
                for &(u, n) in c {
                    add(u, n);
                }
            }
            Source::Text { text, location } => {
                let mut scanner = integers.value_scanner();
                let mut places = Vec::new();
                scanner
                    .feed(text.as_bytes(), &mut places)
                    .and_then(|()| scanner.finish(&mut places))
                    .map_err(|Misfit { offset, message }| {
                        Error::input(
                            Some(location.clone()),
                            format!("{message} (at byte {offset} of the inline text)"),
                        )
                        .in_codec(&codec.name)
                    })?;
                for &u in &places {
                    add(u, 1);
                }
                sequence_symbols = sequence_symbols.saturating_add(places.len() as u64);
                pieces.push(("inline text".to_string(), places));
            }
            Source::Sample { declared, .. } => {
                let Some(sample) = files.next() else {
                    return Err(Error::internal(format!(
                        "sample \"{declared}\" was not loaded"
                    )));
                };
                sequence_symbols = sequence_symbols.saturating_add(sample.total);
                for (&u, &n) in &sample.place_counts {
                    add(u, n);
                }
                pieces.push((format!("sample \"{declared}\""), sample.places));
            }
        }
    }
    let bound = integers
        .bind(&place_counts)
        .map_err(|m| Error::input(Some(codec.location.clone()), m).in_codec(&codec.name))?;
    let mut counts = vec![0u64; bound.alphabet_len()];
    for (&u, &n) in &place_counts {
        let i = bound.symbol_of(u);
        counts[i] = counts[i].saturating_add(n);
    }
    escape_floor(&bound, &mut counts);
    let sequences = pieces
        .into_iter()
        .map(|(origin, places)| {
            let mut symbols = Vec::with_capacity(places.len());
            let mut offsets = Vec::with_capacity(places.len());
            for u in places {
                let i = bound.symbol_of(u);
                symbols.push(i as u16);
                // Escaped training values are kept as symbols only: their raw bits go as 0.
                offsets.push(bound.bins.get(i).map_or(0, |b| u - b.start));
            }
            Sequence {
                origin,
                symbols,
                offsets,
            }
        })
        .collect();
    Ok(Model {
        counts,
        sequences,
        sequence_symbols,
        bound: Some(Arc::new(bound)),
        place_counts,
    })
}
