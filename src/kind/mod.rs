//! Codec kinds: what a symbol is. Each kind lives in one file behind [`Kind`] and is
//! registered in [`KINDS`] with one line. A kind owns how `symbols` is read and checked, how
//! training data and count keys become symbol indices, its fingerprint tag, the generated
//! `Symbol` items, the labels of table rows and report lines, and how an input value of the
//! generated `encode` finds its table row ([`InputMap`]).

mod bytes;
pub mod chars;
pub mod integers;
mod tokens;

pub use tokens::MAX_TOKENS;

use proc_macro2::TokenStream;
use std::fmt;
use std::ops::Range;
use std::sync::Arc;
use toml::de::DeValue;
use toml::Spanned;

/// A problem with the spec at a byte span of its text; the spec stage adds file and codec.
pub type Misplaced = (Range<usize>, String);

/// The codec's keys (with `[defaults]` underneath), for kinds that read keys of their own.
pub trait SpecKeys {
    fn key(&self, name: &str) -> Option<&Spanned<DeValue<'_>>>;
}

/// Reads a kind's alphabet from its `symbols` value (absent: the kind's default, if any) and
/// its own keys. `codec` is the span of the whole codec table, for errors about a missing key.
pub type ReadSymbols = fn(
    symbols: Option<&Spanned<DeValue<'_>>>,
    codec: Range<usize>,
    keys: &dyn SpecKeys,
) -> Result<Arc<dyn Kind>, Vec<Misplaced>>;

/// One registered kind: its name in specs and its reader.
pub struct KindEntry {
    pub name: &'static str,
    pub read: ReadSymbols,
}

/// Every kind a spec may name, in the order messages list them.
pub const KINDS: &[KindEntry] = &[bytes::ENTRY, tokens::ENTRY, integers::ENTRY, chars::ENTRY];

/// The kind named `name`, if registered.
pub fn find(name: &str) -> Option<&'static KindEntry> {
    KINDS.iter().find(|k| k.name == name)
}

/// `"bytes", "tokens", "integers" or "chars"`, for messages.
pub fn names() -> String {
    let quoted: Vec<String> = KINDS.iter().map(|k| format!("\"{}\"", k.name)).collect();
    match quoted.split_last() {
        Some((last, [])) => last.clone(),
        Some((last, rest)) => format!("{} or {last}", rest.join(", ")),
        None => String::new(),
    }
}

/// A TOML value's type with its article, for messages: "a string", "an integer".
pub fn a_type(v: &DeValue<'_>) -> String {
    match v.type_str() {
        t @ ("integer" | "array" | "inline table") => format!("an {t}"),
        t => format!("a {t}"),
    }
}

/// A symbol of the training data that is not in the alphabet: where and what.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Misfit {
    /// Byte offset into the scanned data.
    pub offset: usize,
    pub message: String,
}

/// Turns training data into symbol indices a piece at a time, so that a large sample is never
/// held whole. Offsets in a [`Misfit`] count from the start of the data.
pub trait Scanner {
    /// Scans the next piece; `out` receives the symbols completed so far.
    fn feed(&mut self, piece: &[u8], out: &mut Vec<u16>) -> Result<(), Misfit>;
    /// Ends the data.
    fn finish(&mut self, out: &mut Vec<u16>) -> Result<(), Misfit>;
}

/// All of `data` through one scanner of `kind`.
pub fn scan(kind: &dyn Kind, data: &[u8]) -> Result<Vec<u16>, Misfit> {
    let mut scanner = kind.scanner();
    let mut out = Vec::new();
    scanner.feed(data, &mut out)?;
    scanner.finish(&mut out)?;
    Ok(out)
}

/// How a value handed to the generated `encode` finds its row of the encoding table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum InputMap {
    /// The input type is the symbol enum: `value as usize` is the symbol index.
    Index,
    /// The input is a raw value that indexes one row each; a row holds its symbol, or `None`
    /// for values outside the alphabet (the encoder refuses them). A value past the last row
    /// lands on the last row, so rows that do not cover every value end in a `None`. Kinds
    /// that code part of a value as raw extra bits after the symbol (integer bins, escapes)
    /// will add those bits to this variant's rows.
    Rows(Vec<Option<u16>>),
}

/// One validated alphabet of a given kind.
pub trait Kind: fmt::Debug + Send + Sync {
    /// The kind's name in specs, e.g. `"bytes"`.
    fn name(&self) -> &'static str;
    /// The kind's byte in the fingerprint; never reuse one.
    fn tag(&self) -> u8;
    /// Number of symbols.
    fn alphabet_len(&self) -> usize;
    /// Bytes of one generated `Symbol`.
    fn symbol_bytes(&self) -> usize;
    /// The alphabet as bytes, for the fingerprint.
    fn identity(&self) -> Vec<u8>;
    /// A symbol in report lines: `ok`, `byte 97 ('a')`.
    fn label(&self, symbol: usize) -> String;
    /// A symbol in messages: `"ok"`, `byte 97 ('a')`.
    fn describe(&self, symbol: usize) -> String;
    /// The symbol a key of `counts` names.
    fn count_key(&self, key: &str) -> Result<usize, String>;
    /// A scanner that turns training data (a sample file, read in blocks, or inline text)
    /// into symbol indices.
    fn scanner(&self) -> Box<dyn Scanner + '_>;
    /// How encoder input finds its table row.
    fn input(&self) -> InputMap;
    /// The generated `Symbol` type and its companions (`ALPHABET`, `ALL`, ...).
    fn symbol_items(&self) -> TokenStream;
    /// The name of the generated array holding every symbol in alphabet order.
    fn all_symbols(&self) -> TokenStream;
    /// A symbol as a Rust expression in table rows (`b'a'`, `Symbol::Ok`).
    fn row_literal(&self, symbol: usize) -> String;
    /// The integers alphabet, for the stages that treat its values and offset bits apart.
    fn integers(&self) -> Option<&integers::Integers> {
        None
    }
    /// The chars alphabet, for the emitter's text wrapper around the index codec.
    fn chars(&self) -> Option<&chars::Chars> {
        None
    }
    /// Why the kind cannot be framed this way, if it cannot (the spec stage locates it).
    fn framing_error(&self, _framing: crate::spec::Framing) -> Option<String> {
        None
    }
    /// Tables the kind adds to the method's (integer bins and their offset widths).
    fn extra_tables(&self, _table_bits: u32) -> Vec<crate::method::LayoutEntry> {
        Vec::new()
    }
    /// The escape symbol, when `escape = true`.
    fn escape(&self) -> Option<&Escape> {
        None
    }
    /// Raw bits that follow each symbol (integer bins' offsets, an escape's value); empty
    /// when no symbol carries any. By default the escape's raw bits, if there is one.
    fn widths(&self) -> Vec<u32> {
        match self.escape() {
            Some(e) => {
                let mut w = vec![0; self.alphabet_len()];
                if let Some(slot) = w.get_mut(e.symbol) {
                    *slot = e.raw_bits;
                }
                w
            }
            None => Vec::new(),
        }
    }
}

/// The tables an escape of raw-value input adds (the emitter's `escape_items`): which input
/// values escape, and the raw bits after the symbol at each table position.
pub fn escape_tables(table_bits: u32) -> [crate::method::LayoutEntry; 2] {
    use crate::method::{Direction, LayoutEntry};
    [
        LayoutEntry::new("ESCAPED", "u32", 8, &[4], Direction::Encode),
        LayoutEntry::new("WIDTHS", "u8", 1 << table_bits, &[1], Direction::Decode),
    ]
}

/// Keys of escapes (`bytes`, `chars`, `integers`).
pub const ESCAPE_KEYS: &[&str] = &["escape", "escape_share"];

/// Share of the training symbols the escape symbol counts as at least, when the spec gives
/// no `escape_share`: its slots then cost about 10 bits, and an escape in data never seen
/// in training stays cheap enough.
pub const ESCAPE_FLOOR: f64 = 1.0 / 1024.0;

/// `escape = true`: a reserved symbol, the last of the alphabet, followed by `raw_bits` raw
/// bits of the value, makes every value of the kind's domain encodable.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Escape {
    /// The escape's symbol index (the last one).
    pub symbol: usize,
    /// Raw bits of an escaped value.
    pub raw_bits: u32,
    /// `escape_share`: the share of the symbols the escape is counted as; `None`: as often
    /// as the training data leaves the alphabet, at least [`ESCAPE_FLOOR`].
    pub share: Option<f64>,
}

impl Escape {
    /// The escape's count for a codec whose other symbols were counted `others` times and
    /// whose training data left the alphabet `seen` times.
    pub fn count(&self, others: u64, seen: u64) -> u64 {
        let total = others.saturating_add(seen) as f64;
        match self.share {
            // share = e / (others + e)  =>  e = share * others / (1 - share).
            Some(share) => ((share * others as f64 / (1.0 - share)).round() as u64).max(1),
            None => seen.max((total * ESCAPE_FLOOR).ceil() as u64).max(1),
        }
    }
}

/// A kind's boolean key (`false` when absent); a value of another type is noted in `errors`.
pub fn read_bool(keys: &dyn SpecKeys, key: &str, errors: &mut Vec<Misplaced>) -> bool {
    match keys.key(key) {
        None => false,
        Some(v) => match v.get_ref() {
            DeValue::Boolean(b) => *b,
            other => {
                errors.push((
                    v.span(),
                    format!("`{key}` must be true or false, found {}", a_type(other)),
                ));
                false
            }
        },
    }
}

/// Reads `escape` and `escape_share`: `Some(share)` when escapes are on.
pub fn read_escape(keys: &dyn SpecKeys) -> Result<Option<Option<f64>>, Vec<Misplaced>> {
    let mut errors = Vec::new();
    let on = read_bool(keys, "escape", &mut errors);
    let share = match keys.key("escape_share") {
        None => None,
        Some(v) => {
            let value = match v.get_ref() {
                DeValue::Float(f) => f.as_str().parse::<f64>().ok(),
                _ => None,
            };
            match value {
                Some(x) if x > 0.0 && x < 0.5 => {
                    if !on {
                        errors.push((v.span(), "`escape_share` needs `escape = true`".to_string()));
                    }
                    Some(x)
                }
                _ => {
                    errors.push((
                        v.span(),
                        "`escape_share` must be a number above 0 and below 0.5 (the escape's share of the symbols, e.g. 0.01)".to_string(),
                    ));
                    None
                }
            }
        }
    };
    if errors.is_empty() {
        Ok(on.then_some(share))
    } else {
        Err(errors)
    }
}
