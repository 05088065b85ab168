//! `kind = "chars"`: symbols are Unicode scalar values, the generated API takes `&str` and
//! decodes into UTF-8. The stream codes each character's *index* in the alphabet (one byte),
//! so the core codec is the ordinary one over index bytes (`Symbol = u8` inside the module);
//! the text wrapper around it lives in `emit/chars.rs` (DEVELOPERS.md, "Chars codecs").

use super::{a_type, Escape, InputMap, Kind, KindEntry, Misfit, Misplaced, Scanner};
use crate::method::{Direction, LayoutEntry};
use crate::spec::Framing;
use proc_macro2::{Literal, TokenStream};
use quote::quote;
use std::collections::BTreeMap;
use std::ops::Range;
use std::sync::Arc;
use toml::de::DeValue;
use toml::Spanned;

pub const ENTRY: KindEntry = KindEntry {
    name: "chars",
    read,
};

/// Most characters an alphabet may have: an index is one byte, and index 255 stays free
/// (the encoder's mark for a character outside the alphabet; a later escape symbol).
pub const MAX_CHARS: usize = 255;

/// The index byte that no character has.
pub const ABSENT: u8 = 255;

/// Largest character the dense encoding table covers when the whole alphabet lies below
/// it: 0x7FF is the last two-byte scalar (The Unicode Standard, ch. 3, Table 3-6), so
/// Latin, Greek and Cyrillic text map by one load from at most 2 KiB.
const DENSE_UP_TO: u32 = 0x7FF;

/// Most characters of an alphabet with an escape: an escaped character goes as three index
/// bytes above the alphabet's, 7 bits of its scalar value each (21 bits hold every one).
pub const MAX_ESCAPED_CHARS: usize = 128;

/// Index bytes an escaped character takes.
pub const ESCAPE_DIGITS: usize = 3;

/// A character alphabet, in spec order. With an escape, one more symbol of the index codec
/// (the escape, followed by 8 raw bits) carries any index byte at or above the alphabet's
/// length: an escaped character is three of them.
#[derive(Debug, Clone)]
pub struct Chars {
    chars: Vec<char>,
    /// `(char, index)` sorted by char, for scanning and count keys.
    sorted: Vec<(char, u8)>,
    escape: Option<Escape>,
}

/// `symbols` is a string (its characters) or a list of one-character strings.
fn read(
    symbols: Option<&Spanned<DeValue<'_>>>,
    codec: Range<usize>,
    keys: &dyn super::SpecKeys,
) -> Result<Arc<dyn Kind>, Vec<Misplaced>> {
    let share = super::read_escape(keys)?;
    let Some(raw) = symbols else {
        return Err(vec![(
            codec,
            "missing key `symbols`: a chars codec lists its characters, e.g. symbols = \"abc é\""
                .to_string(),
        )]);
    };
    let mut listed: Vec<(char, Range<usize>)> = Vec::new();
    let mut errors = Vec::new();
    match raw.get_ref() {
        DeValue::String(s) => listed.extend(s.chars().map(|c| (c, raw.span()))),
        DeValue::Array(items) => {
            for item in items.iter() {
                match item.get_ref() {
                    DeValue::String(s) => {
                        let mut it = s.chars();
                        match (it.next(), it.next()) {
                            (Some(c), None) => listed.push((c, item.span())),
                            (None, _) => errors.push((
                                item.span(),
                                "an empty string is not a character: list one-character strings"
                                    .to_string(),
                            )),
                            (Some(_), Some(_)) => errors.push((
                                item.span(),
                                format!(
                                    "\"{}\" is {} characters, not one: list one-character strings",
                                    s.escape_debug(),
                                    s.chars().count()
                                ),
                            )),
                        }
                    }
                    other => errors.push((
                        item.span(),
                        format!(
                            "a chars symbol is a one-character string, found {}",
                            a_type(other)
                        ),
                    )),
                }
            }
        }
        other => errors.push((
            raw.span(),
            format!(
                "`symbols` of a chars codec is a string or a list of one-character strings, found {}",
                a_type(other)
            ),
        )),
    }
    let mut index: BTreeMap<char, usize> = BTreeMap::new();
    let mut chars = Vec::with_capacity(listed.len());
    for (c, span) in listed {
        if let Some(&first) = index.get(&c) {
            errors.push((
                span,
                format!(
                    "symbol {} is listed twice (first as entry {})",
                    show_char(c),
                    first + 1
                ),
            ));
        } else {
            index.insert(c, chars.len());
            chars.push(c);
        }
    }
    if chars.len() > MAX_CHARS {
        errors.push((
            raw.span(),
            format!(
                "{} characters are more than a chars codec may have ({MAX_CHARS}): each is coded as a one-byte index, and index 255 is kept free",
                chars.len()
            ),
        ));
    }
    if chars.is_empty() && errors.is_empty() {
        errors.push((
            raw.span(),
            "the alphabet is empty: declare at least one symbol".to_string(),
        ));
    }
    if share.is_some() && chars.len() > MAX_ESCAPED_CHARS {
        errors.push((
            raw.span(),
            format!(
                "{} characters are more than a chars codec with an escape may have ({MAX_ESCAPED_CHARS}): an escaped character goes as three index bytes above the alphabet's, 7 bits each",
                chars.len()
            ),
        ));
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    let sorted = index.into_iter().map(|(c, i)| (c, i as u8)).collect();
    let escape = share.map(|share| Escape {
        symbol: chars.len(),
        raw_bits: 8,
        share,
    });
    Ok(Arc::new(Chars {
        chars,
        sorted,
        escape,
    }))
}

impl Chars {
    /// The characters in spec order.
    pub fn chars(&self) -> &[char] {
        &self.chars
    }

    fn index_of(&self, c: char) -> Option<u8> {
        self.sorted
            .binary_search_by(|(k, _)| k.cmp(&c))
            .ok()
            .map(|k| self.sorted[k].1)
    }

    /// Bytes of the longest UTF-8 encoding among the characters (1 to 4).
    pub fn max_utf8_len(&self) -> usize {
        self.chars.iter().map(|c| c.len_utf8()).max().unwrap_or(1)
    }

    /// Bytes of `out` the decoder needs per index byte: the longest character's UTF-8, and
    /// with an escape at least 2 (three index bytes give up to four bytes of UTF-8).
    pub fn decoded_per_index(&self) -> usize {
        if self.escape.is_some() {
            self.max_utf8_len().max(2)
        } else {
            self.max_utf8_len()
        }
    }

    /// Whether characters outside the alphabet escape.
    pub fn escapes(&self) -> bool {
        self.escape.is_some()
    }

    /// Characters below this scalar value map to their index through one dense table: all
    /// of them when the largest is at most [`DENSE_UP_TO`], else those below 0x80. The rest
    /// (the *wide* ones) are found by a binary search.
    pub fn dense_len(&self) -> usize {
        let top = self.chars.iter().map(|&c| u32::from(c)).max().unwrap_or(0);
        if top <= DENSE_UP_TO {
            top as usize + 1
        } else {
            self.chars
                .iter()
                .map(|&c| u32::from(c))
                .filter(|&c| c < 0x80)
                .max()
                .map_or(0, |c| c as usize + 1)
        }
    }

    /// The dense table: the index of each scalar below [`Chars::dense_len`], or [`ABSENT`].
    pub fn dense(&self) -> Vec<u8> {
        (0..self.dense_len() as u32)
            .map(|v| {
                char::from_u32(v)
                    .and_then(|c| self.index_of(c))
                    .unwrap_or(ABSENT)
            })
            .collect()
    }

    /// Characters at or above [`Chars::dense_len`], sorted, with their indices.
    pub fn wide(&self) -> Vec<(char, u8)> {
        let dense = self.dense_len() as u32;
        self.sorted
            .iter()
            .copied()
            .filter(|&(c, _)| u32::from(c) >= dense)
            .collect()
    }
}

impl Kind for Chars {
    fn name(&self) -> &'static str {
        ENTRY.name
    }

    fn tag(&self) -> u8 {
        4
    }

    fn alphabet_len(&self) -> usize {
        self.chars.len() + usize::from(self.escape.is_some())
    }

    /// The core codec's symbol is the index byte.
    fn symbol_bytes(&self) -> usize {
        1
    }

    /// The characters' UTF-8, one after the other (UTF-8 delimits itself).
    fn identity(&self) -> Vec<u8> {
        let mut id = self.chars.iter().collect::<String>().into_bytes();
        // A byte no UTF-8 holds marks the escape.
        if self.escape.is_some() {
            id.push(0xff);
        }
        id
    }

    fn label(&self, symbol: usize) -> String {
        match self.chars.get(symbol) {
            Some(&c) => show_char(c),
            None => "escape (an index byte above the alphabet's, +8 bits; an escaped character takes three)".to_string(),
        }
    }

    fn describe(&self, symbol: usize) -> String {
        match self.chars.get(symbol) {
            Some(&c) => show_char(c),
            None => "the escape".to_string(),
        }
    }

    fn count_key(&self, key: &str) -> Result<usize, String> {
        let mut it = key.chars();
        let (Some(c), None) = (it.next(), it.next()) else {
            return Err(format!(
                "count key \"{}\" is not one character: a chars codec keys its counts by the character, e.g. \"é\" = 12",
                key.escape_debug()
            ));
        };
        self.index_of(c)
            .map(usize::from)
            .ok_or_else(|| format!("count for {} which is not in the alphabet", show_char(c)))
    }

    fn scanner(&self) -> Box<dyn Scanner + '_> {
        Box::new(CharScanner {
            alphabet: self,
            offset: 0,
            pending: [0; 4],
            pending_len: 0,
        })
    }

    /// Rows by index byte: one per character, then one absent row that every larger index
    /// (the wrapper's [`ABSENT`] among them) lands on.
    fn input(&self) -> InputMap {
        let mut rows: Vec<Option<u16>> = (0..self.chars.len() as u16).map(Some).collect();
        rows.push(self.escape.map(|e| e.symbol as u16));
        InputMap::Rows(rows)
    }

    /// The public items of the module; the index codec inside has its own `Symbol = u8`
    /// (`emit/chars.rs`).
    fn symbol_items(&self) -> TokenStream {
        let chars = self.chars.iter().map(|&c| Literal::character(c));
        let longest = Literal::usize_unsuffixed(self.decoded_per_index());
        if self.escape.is_some() {
            return quote! {
                /// A character of this codec's text: those in [`ALPHABET`] have symbols of
                /// their own, any other goes as three escaped index bytes.
                pub type Symbol = char;
                /// The alphabet, in spec order: a character's place here is its index in
                /// streams (the escape comes after them).
                pub const ALPHABET: [Symbol; ALPHABET_LEN - 1] = [#(#chars),*];
                /// Bytes of `out` that [`decode`] needs per symbol of a stream: the longest
                /// UTF-8 encoding among the alphabet's characters, at least 2 (an escaped
                /// character's three symbols give up to four bytes).
                pub const MAX_UTF8_LEN: usize = #longest;
            };
        }
        quote! {
            /// A symbol of this codec: one of the characters in [`ALPHABET`].
            pub type Symbol = char;
            /// The alphabet, in spec order: a character's place here is its index in streams.
            pub const ALPHABET: [Symbol; ALPHABET_LEN] = [#(#chars),*];
            /// Bytes of the longest UTF-8 encoding among the alphabet's characters: what
            /// [`decode`] needs per character.
            pub const MAX_UTF8_LEN: usize = #longest;
        }
    }

    /// The index codec's symbols in order (`emit/chars.rs` declares them where needed).
    fn all_symbols(&self) -> TokenStream {
        quote!(INDICES)
    }

    /// The index; the escape decodes as 0 plus its raw bits.
    fn row_literal(&self, symbol: usize) -> String {
        if symbol < self.chars.len() {
            symbol.to_string()
        } else {
            "0".to_string()
        }
    }

    fn escape(&self) -> Option<&Escape> {
        self.escape.as_ref()
    }

    fn chars(&self) -> Option<&Chars> {
        Some(self)
    }

    /// A bare stream carries no symbol count, and the `&str` decoder needs one before it
    /// decodes (to place the indices in `out`): bare framing is refused.
    fn framing_error(&self, framing: Framing) -> Option<String> {
        (framing == Framing::Bare).then(|| {
            "a chars codec needs the symbol count in its header: use framing = \"compact\" or \"tagged\" (a bare stream does not carry it, and a text's length in bytes does not give it)".to_string()
        })
    }

    fn extra_tables(&self, table_bits: u32) -> Vec<LayoutEntry> {
        let longest = self.decoded_per_index();
        let utf8_type = ["[u8; 1]", "[u8; 2]", "[u8; 3]", "[u8; 4]"][longest - 1];
        let mut tables = vec![LayoutEntry::new(
            "CHAR_INDEX",
            "u8",
            self.dense_len(),
            &[1],
            Direction::Encode,
        )];
        let wide = self.wide().len();
        if wide > 0 {
            tables.push(LayoutEntry::new(
                "WIDE_CHARS",
                "char",
                wide,
                &[4],
                Direction::Encode,
            ));
            tables.push(LayoutEntry::new(
                "WIDE_INDEX",
                "u8",
                wide,
                &[1],
                Direction::Encode,
            ));
        }
        tables.push(LayoutEntry::new(
            "UTF8",
            utf8_type,
            self.chars.len(),
            &[longest],
            Direction::Decode,
        ));
        if self.escape.is_some() {
            tables.extend(super::escape_tables(table_bits));
        }
        tables
    }
}

/// UTF-8 text, a character at a time; a character split between two pieces waits in
/// `pending` until the next one completes it.
struct CharScanner<'a> {
    alphabet: &'a Chars,
    /// Bytes scanned before the current piece (pending bytes included).
    offset: usize,
    /// The first bytes of a character the last piece ended inside.
    pending: [u8; 4],
    pending_len: usize,
}

impl CharScanner<'_> {
    fn push(&self, c: char, at: usize, out: &mut Vec<u16>) -> Result<(), Misfit> {
        match self.alphabet.index_of(c) {
            Some(i) => {
                out.push(u16::from(i));
                Ok(())
            }
            None if self.alphabet.escape.is_some() => {
                let escape = self.alphabet.chars.len() as u16;
                out.extend([escape; ESCAPE_DIGITS]);
                Ok(())
            }
            None => Err(Misfit {
                offset: at,
                message: format!("{} is not in the alphabet", show_char(c)),
            }),
        }
    }

    /// Pushes the characters of valid UTF-8 `text`, which starts at byte `at` of the data.
    fn push_all(&self, text: &str, at: usize, out: &mut Vec<u16>) -> Result<(), Misfit> {
        out.reserve(text.len());
        for (i, c) in text.char_indices() {
            self.push(c, at + i, out)?;
        }
        Ok(())
    }
}

/// Invalid UTF-8 at byte `offset`, whose first byte is `b`.
fn not_utf8(offset: usize, b: u8) -> Misfit {
    Misfit {
        offset,
        message: format!(
            "invalid UTF-8 (a sequence starting with byte 0x{b:02x}): a chars codec reads UTF-8 text"
        ),
    }
}

impl Scanner for CharScanner<'_> {
    fn feed(&mut self, piece: &[u8], out: &mut Vec<u16>) -> Result<(), Misfit> {
        let mut rest = piece;
        // Where `rest` starts in the data.
        let mut at = self.offset;
        self.offset += piece.len();
        // Complete a character the last piece ended inside, a byte at a time: it needs at
        // most three more.
        while self.pending_len > 0 {
            let start = at - self.pending_len;
            match std::str::from_utf8(&self.pending[..self.pending_len]) {
                Ok(s) => {
                    self.pending_len = 0;
                    self.push_all(s, start, out)?;
                }
                Err(e) if e.error_len().is_some() => return Err(not_utf8(start, self.pending[0])),
                Err(_) => {
                    let Some((&b, tail)) = rest.split_first() else {
                        return Ok(());
                    };
                    if self.pending_len == self.pending.len() {
                        return Err(not_utf8(start, self.pending[0]));
                    }
                    self.pending[self.pending_len] = b;
                    self.pending_len += 1;
                    rest = tail;
                    at += 1;
                }
            }
        }
        match std::str::from_utf8(rest) {
            Ok(s) => self.push_all(s, at, out),
            Err(e) => {
                let valid = e.valid_up_to();
                let s = std::str::from_utf8(&rest[..valid]).unwrap_or_default();
                self.push_all(s, at, out)?;
                let tail = &rest[valid..];
                match e.error_len() {
                    Some(_) => Err(not_utf8(at + valid, tail[0])),
                    // The piece ends inside a character (at most three bytes of it).
                    None => {
                        self.pending[..tail.len()].copy_from_slice(tail);
                        self.pending_len = tail.len();
                        Ok(())
                    }
                }
            }
        }
    }

    fn finish(&mut self, _out: &mut Vec<u16>) -> Result<(), Misfit> {
        if self.pending_len > 0 {
            return Err(Misfit {
                offset: self.offset - self.pending_len,
                message: format!(
                    "invalid UTF-8 (the data ends inside a character starting with byte 0x{:02x}): a chars codec reads UTF-8 text",
                    self.pending[0]
                ),
            });
        }
        Ok(())
    }
}

/// A character for messages and reports: `'é' (U+00E9)`, `'\n' (U+000A)`. Escaped as Rust
/// writes it in `{:?}`, so that control and bidirectional-override characters never reach
/// a comment or a doc line of the generated source raw.
pub fn show_char(c: char) -> String {
    format!("'{}' (U+{:04X})", c.escape_debug(), u32::from(c))
}
