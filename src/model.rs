//! Stage 2: counts per symbol, from sample files, inline text and explicit counts. Training
//! sequences are kept so that the verify stage can round-trip them. One table set's counts
//! today; contexts will give a codec several.

use crate::error::{Error, Result};
use crate::kind::{self, Misfit};
use crate::load::Sample;
use crate::spec::{CodecSpec, Source};

/// One piece of training data as symbol indices, and where it came from (for messages).
/// A large sample keeps only its first [`crate::load::KEPT_SYMBOLS`] symbols.
#[derive(Debug, Clone)]
pub struct Sequence {
    pub origin: String,
    pub symbols: Vec<u16>,
}

/// Counts per symbol (in alphabet order) and the sequences they came from.
#[derive(Debug, Clone)]
pub struct Model {
    pub counts: Vec<u64>,
    pub sequences: Vec<Sequence>,
    /// Symbols of samples and inline text in all, including any a large sample did not keep.
    pub sequence_symbols: u64,
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
    let kind = codec.kind.as_ref();
    let mut counts = vec![0u64; kind.alphabet_len()];
    let mut sequences = Vec::new();
    let mut files = samples.into_iter();
    let mut sequence_symbols = 0u64;
    for source in &codec.sources {
        match source {
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
                });
            }
        }
    }
    Ok(Model {
        counts,
        sequences,
        sequence_symbols,
    })
}
