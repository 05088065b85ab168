//! Stage 2: the alphabet and its counts, from sample files, inline text and explicit counts.
//! Training sequences are kept so that the verify stage can round-trip them.

use crate::error::{Error, Location, Result};
use crate::spec::{show_byte, CodecSpec, Kind, Source, SymbolName};
use std::path::Path;

/// One piece of training data as symbol indices, and where it came from (for messages).
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
    /// Contents of every sample file, in order: they feed the spec hash.
    pub sample_bytes: Vec<Vec<u8>>,
}

impl Model {
    pub fn total(&self) -> u64 {
        self.counts.iter().sum()
    }

    /// Probabilities of the training data; uniform when there is none.
    pub fn probabilities(&self) -> Vec<f64> {
        let total = self.total();
        if total == 0 {
            return vec![1.0 / self.counts.len() as f64; self.counts.len()];
        }
        self.counts
            .iter()
            .map(|&c| c as f64 / total as f64)
            .collect()
    }
}

/// Counts the training data of `codec`.
pub fn build(codec: &CodecSpec) -> Result<Model> {
    let n = codec.symbols.len();
    let mut counts = vec![0u64; n];
    let mut sequences = Vec::new();
    let mut sample_bytes = Vec::new();
    let lookup = Lookup::new(codec);
    for source in &codec.sources {
        match source {
            Source::Counts(c) => {
                for (slot, v) in counts.iter_mut().zip(c) {
                    *slot = slot.saturating_add(*v);
                }
            }
            Source::Text { text, location } => {
                let symbols = lookup
                    .scan(text.as_bytes(), |offset| TextSpot::Inline {
                        location: location.clone(),
                        offset,
                    })
                    .map_err(|e| e.in_codec(&codec.name))?;
                sequences.push(Sequence {
                    origin: "inline text".to_string(),
                    symbols,
                });
            }
            Source::Sample {
                declared,
                path,
                location,
            } => {
                let bytes = std::fs::read(path).map_err(|e| {
                    Error::input(
                        Some(location.clone()),
                        format!("cannot read sample \"{declared}\": {e}"),
                    )
                    .in_codec(&codec.name)
                })?;
                let symbols = lookup
                    .scan(&bytes, |offset| TextSpot::File {
                        path,
                        bytes: &bytes,
                        offset,
                    })
                    .map_err(|e| e.in_codec(&codec.name))?;
                sequences.push(Sequence {
                    origin: format!("sample \"{declared}\""),
                    symbols,
                });
                sample_bytes.push(bytes);
            }
        }
    }
    for seq in &sequences {
        for &s in &seq.symbols {
            counts[usize::from(s)] = counts[usize::from(s)].saturating_add(1);
        }
    }
    Ok(Model {
        counts,
        sequences,
        sample_bytes,
    })
}

enum TextSpot<'a> {
    Inline {
        location: Location,
        offset: usize,
    },
    File {
        path: &'a Path,
        bytes: &'a [u8],
        offset: usize,
    },
}

impl TextSpot<'_> {
    fn location(&self) -> (Location, String) {
        match self {
            TextSpot::Inline { location, offset } => (
                location.clone(),
                format!(" (at byte {offset} of the inline text)"),
            ),
            TextSpot::File {
                path,
                bytes,
                offset,
            } => (
                Location::in_bytes(path, bytes, *offset),
                format!(" (byte offset {offset})"),
            ),
        }
    }
}

struct Lookup<'a> {
    kind: Kind,
    byte_index: [Option<u16>; 256],
    tokens: Vec<(&'a str, u16)>,
}

impl<'a> Lookup<'a> {
    fn new(codec: &'a CodecSpec) -> Self {
        let mut byte_index = [None; 256];
        let mut tokens = Vec::new();
        for (i, s) in codec.symbols.iter().enumerate() {
            match s {
                SymbolName::Byte(b) => byte_index[usize::from(*b)] = Some(i as u16),
                SymbolName::Token(t) => tokens.push((t.as_str(), i as u16)),
            }
        }
        tokens.sort();
        Lookup {
            kind: codec.kind,
            byte_index,
            tokens,
        }
    }

    fn scan<'b>(&self, data: &[u8], spot: impl Fn(usize) -> TextSpot<'b>) -> Result<Vec<u16>> {
        let fail = |offset: usize, what: String| {
            let (location, suffix) = spot(offset).location();
            Err(Error::input(Some(location), format!("{what}{suffix}")))
        };
        match self.kind {
            Kind::Bytes => {
                let mut out = Vec::with_capacity(data.len());
                for (offset, &b) in data.iter().enumerate() {
                    match self.byte_index[usize::from(b)] {
                        Some(i) => out.push(i),
                        None => {
                            return fail(offset, format!("{} is not in the alphabet", show_byte(b)))
                        }
                    }
                }
                Ok(out)
            }
            Kind::Tokens => {
                let mut out = Vec::new();
                let mut i = 0;
                while i < data.len() {
                    if data[i].is_ascii_whitespace() {
                        i += 1;
                        continue;
                    }
                    let start = i;
                    while i < data.len() && !data[i].is_ascii_whitespace() {
                        i += 1;
                    }
                    let word = &data[start..i];
                    let found = std::str::from_utf8(word).ok().and_then(|w| {
                        self.tokens
                            .binary_search_by(|(t, _)| (*t).cmp(w))
                            .ok()
                            .map(|k| self.tokens[k].1)
                    });
                    match found {
                        Some(index) => out.push(index),
                        None => {
                            return fail(
                                start,
                                format!(
                                    "token \"{}\" is not in the alphabet",
                                    String::from_utf8_lossy(word)
                                ),
                            )
                        }
                    }
                }
                Ok(out)
            }
        }
    }
}
