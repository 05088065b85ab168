//! Counts files: what `precast count` writes and a spec's `counts_file` reads. A plain text
//! format of our own (README, "Counts files"), merged by addition:
//!
//! ```text
//! precast-counts 1
//! kind tokens
//! ok 9200
//! reboot 4
//! ```
//!
//! The first line names the format and its version, the second the kind; then one
//! `KEY COUNT` line per symbol that occurs, keys written as in a spec's `counts` (bytes:
//! decimal byte values; tokens: names), bytes by value, tokens in byte order of the name.
//! Lines starting with `#` and blank lines are ignored.

use std::collections::BTreeMap;

/// The first line of every counts file.
pub const MAGIC: &str = "precast-counts 1";

/// Longest token `count` accepts: no generated enum variant is longer in practice, and a
/// bound keeps a run without whitespace from growing memory.
pub const MAX_TOKEN_BYTES: usize = 256;

/// Most distinct tokens a counts file may hold: 16 times the largest alphabet, so that
/// memory stays bounded on a corpus that is not made of tokens at all.
pub const MAX_DISTINCT: usize = 16 * crate::kind::MAX_TOKENS;

/// The kinds `count` can count without an alphabet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CountKind {
    Bytes,
    Tokens,
}

impl CountKind {
    pub fn parse(name: &str) -> Option<CountKind> {
        match name {
            "bytes" => Some(CountKind::Bytes),
            "tokens" => Some(CountKind::Tokens),
            _ => None,
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            CountKind::Bytes => "bytes",
            CountKind::Tokens => "tokens",
        }
    }
}

/// Counts by key; bytes in a fixed array, tokens in an ordered map (deterministic output).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Tally {
    pub kind: CountKind,
    pub bytes: Vec<u64>,
    pub tokens: BTreeMap<String, u64>,
}

impl Tally {
    pub fn new(kind: CountKind) -> Tally {
        Tally {
            kind,
            bytes: vec![0; 256],
            tokens: BTreeMap::new(),
        }
    }

    /// Adds `other` (of the same kind) to this tally; counts saturate.
    pub fn merge(&mut self, other: &Tally) -> Result<(), String> {
        if other.kind != self.kind {
            return Err(format!(
                "cannot add counts of kind {} to counts of kind {}",
                other.kind.name(),
                self.kind.name()
            ));
        }
        for (a, b) in self.bytes.iter_mut().zip(&other.bytes) {
            *a = a.saturating_add(*b);
        }
        for (k, v) in &other.tokens {
            self.add_token(k, *v)?;
        }
        Ok(())
    }

    /// Adds `n` occurrences of token `key`, refusing more than [`MAX_DISTINCT`] keys.
    pub fn add_token(&mut self, key: &str, n: u64) -> Result<(), String> {
        if let Some(v) = self.tokens.get_mut(key) {
            *v = v.saturating_add(n);
            return Ok(());
        }
        if self.tokens.len() >= MAX_DISTINCT {
            return Err(format!(
                "more than {MAX_DISTINCT} distinct tokens: this is not a tokens corpus"
            ));
        }
        self.tokens.insert(key.to_string(), n);
        Ok(())
    }

    /// Every key that occurs and its count, in file order.
    pub fn entries(&self) -> Vec<(String, u64)> {
        match self.kind {
            CountKind::Bytes => (0..256)
                .zip(&self.bytes)
                .filter(|(_, &c)| c > 0)
                .map(|(b, &c)| (b.to_string(), c))
                .collect(),
            CountKind::Tokens => self
                .tokens
                .iter()
                .filter(|(_, &c)| c > 0)
                .map(|(k, &c)| (k.clone(), c))
                .collect(),
        }
    }

    /// Symbols counted in all.
    pub fn total(&self) -> u64 {
        self.entries()
            .iter()
            .fold(0u64, |a, (_, c)| a.saturating_add(*c))
    }

    /// The counts file's text.
    pub fn to_text(&self) -> String {
        let mut out = format!("{MAGIC}\nkind {}\n", self.kind.name());
        for (k, c) in self.entries() {
            out.push_str(&format!("{k} {c}\n"));
        }
        out
    }
}

/// Whether `b` may be part of a token name (the tokens kind's rule).
pub fn token_byte(b: u8) -> bool {
    b.is_ascii_alphanumeric() || b == b'_'
}

/// A line of a counts file that is wrong: its line number (from 1), column and message.
pub type BadLine = (usize, usize, String);

/// Parses a counts file's text.
pub fn parse(text: &str) -> Result<Tally, BadLine> {
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim_end_matches('\r')))
        .filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'));
    match lines.next() {
        Some((_, l)) if l.trim() == MAGIC => {}
        Some((n, _)) => return Err((n, 1, format!("expected `{MAGIC}` (a counts file)"))),
        None => return Err((1, 1, format!("empty: expected `{MAGIC}`"))),
    }
    let kind = match lines.next() {
        Some((n, l)) => match l.trim().strip_prefix("kind ") {
            Some(k) => CountKind::parse(k.trim())
                .ok_or_else(|| (n, 6, format!("unknown kind `{}`", k.trim())))?,
            None => return Err((n, 1, "expected `kind bytes` or `kind tokens`".to_string())),
        },
        None => return Err((2, 1, "expected `kind bytes` or `kind tokens`".to_string())),
    };
    let mut tally = Tally::new(kind);
    let mut seen_bytes = [false; 256];
    for (n, line) in lines {
        let mut parts = line.split_ascii_whitespace();
        let (Some(key), Some(count), None) = (parts.next(), parts.next(), parts.next()) else {
            return Err((n, 1, "expected `KEY COUNT`".to_string()));
        };
        let col = line.find(count).map_or(1, |i| i + 1);
        let count: u64 = count
            .parse()
            .map_err(|_| (n, col, format!("`{count}` is not a count (a whole number)")))?;
        match kind {
            CountKind::Bytes => {
                let canonical = key.bytes().all(|b| b.is_ascii_digit())
                    && (key == "0" || !key.starts_with('0'));
                let Some(b) = canonical.then(|| key.parse::<u8>().ok()).flatten() else {
                    return Err((n, 1, format!("`{key}` is not a byte value 0 to 255")));
                };
                if std::mem::replace(&mut seen_bytes[usize::from(b)], true) {
                    return Err((n, 1, format!("byte {b} is counted twice")));
                }
                tally.bytes[usize::from(b)] = count;
            }
            CountKind::Tokens => {
                if !key.bytes().all(token_byte) || key.len() > MAX_TOKEN_BYTES {
                    return Err((n, 1, format!("`{key}` is not a token name")));
                }
                if tally.tokens.contains_key(key) {
                    return Err((n, 1, format!("`{key}` is counted twice")));
                }
                tally.add_token(key, count).map_err(|m| (n, 1, m))?;
            }
        }
    }
    Ok(tally)
}

/// Counts what a piece of a corpus holds. For tokens the piece owns the tokens that start in
/// `own` (byte range within `data`); `data` may reach one byte before it (to see whether a
/// token starts there) and past it (to finish the last one).
pub fn count_piece(
    tally: &mut Tally,
    data: &[u8],
    own: std::ops::Range<usize>,
) -> Result<(), (usize, String)> {
    match tally.kind {
        CountKind::Bytes => {
            // Four partial histograms break the store-to-load chain of repeated bytes.
            let mut h = [[0u64; 256]; 4];
            let piece = &data[own];
            let mut quads = piece.chunks_exact(4);
            for q in &mut quads {
                h[0][usize::from(q[0])] += 1;
                h[1][usize::from(q[1])] += 1;
                h[2][usize::from(q[2])] += 1;
                h[3][usize::from(q[3])] += 1;
            }
            for &b in quads.remainder() {
                h[0][usize::from(b)] += 1;
            }
            for (i, slot) in tally.bytes.iter_mut().enumerate() {
                *slot = slot.saturating_add(h[0][i] + h[1][i] + h[2][i] + h[3][i]);
            }
            Ok(())
        }
        CountKind::Tokens => {
            let mut i = own.start;
            while i < own.end {
                if data[i].is_ascii_whitespace() || (i > 0 && !data[i - 1].is_ascii_whitespace()) {
                    i += 1;
                    continue;
                }
                let end = data[i..]
                    .iter()
                    .position(|b| b.is_ascii_whitespace())
                    .map_or(data.len(), |p| i + p);
                let word = &data[i..end];
                if let Some(bad) = word.iter().position(|&b| !token_byte(b)) {
                    return Err((
                        i + bad,
                        format!(
                            "byte 0x{:02x} cannot be part of a token name (ASCII letters, digits, `_`)",
                            word[bad]
                        ),
                    ));
                }
                if word.len() > MAX_TOKEN_BYTES {
                    return Err((i, format!("a token longer than {MAX_TOKEN_BYTES} bytes")));
                }
                // Only ASCII here, so the word is UTF-8.
                let key = String::from_utf8_lossy(word);
                tally.add_token(&key, 1).map_err(|m| (i, m))?;
                i = end;
            }
            Ok(())
        }
    }
}
