//! `kind = "bytes"`: symbols are byte values, `Symbol = u8`.

use super::{a_type, Escape, InputMap, Kind, KindEntry, Misfit, Misplaced, Scanner};
use crate::method::LayoutEntry;
use proc_macro2::{Literal, TokenStream};
use quote::quote;
use std::ops::Range;
use std::sync::Arc;
use toml::de::DeValue;
use toml::Spanned;

pub const ENTRY: KindEntry = KindEntry {
    name: "bytes",
    read,
};

/// A byte alphabet, in spec order; with an escape, one more symbol after them stands for
/// any other byte, whose 8 bits follow it.
#[derive(Debug, Clone)]
pub struct Bytes {
    values: Vec<u8>,
    /// Symbol index of each byte value.
    index: [Option<u16>; 256],
    escape: Option<Escape>,
}

/// Raw bits of an escaped byte.
const ESCAPED_BITS: u32 = 8;

/// `symbols` is a string (its bytes) or a list of byte values and one-byte strings; absent,
/// it is all 256 byte values.
fn read(
    symbols: Option<&Spanned<DeValue<'_>>>,
    _codec: Range<usize>,
    keys: &dyn super::SpecKeys,
) -> Result<Arc<dyn Kind>, Vec<Misplaced>> {
    let mut values: Vec<(u8, Range<usize>)> = Vec::new();
    let (share, mut errors) = match super::read_escape(keys) {
        Ok(s) => (s, Vec::new()),
        Err(e) => (None, e),
    };
    match symbols {
        None => values.extend((0..=255u8).map(|b| (b, 0..0))),
        Some(raw) => match raw.get_ref() {
            DeValue::String(s) => values.extend(s.bytes().map(|b| (b, raw.span()))),
            DeValue::Array(items) => {
                for item in items.iter() {
                    match item.get_ref() {
                        DeValue::Integer(i) => {
                            match i128::from_str_radix(i.as_str(), i.radix())
                                .ok()
                                .and_then(|v| u8::try_from(v).ok())
                            {
                                Some(b) => values.push((b, item.span())),
                                None => errors.push((
                                    item.span(),
                                    format!("byte value {i} is out of range 0..=255"),
                                )),
                            }
                        }
                        DeValue::String(s) if s.len() == 1 => {
                            values.push((s.as_bytes()[0], item.span()));
                        }
                        DeValue::String(s) => errors.push((
                            item.span(),
                            format!("\"{s}\" is not a single byte: list byte values as integers or one-byte strings"),
                        )),
                        other => errors.push((
                            item.span(),
                            format!("a byte symbol is an integer or a one-byte string, found {}", a_type(other)),
                        )),
                    }
                }
            }
            other => errors.push((
                raw.span(),
                format!(
                    "`symbols` of a bytes codec is a string or a list of byte values, found {}",
                    a_type(other)
                ),
            )),
        },
    }
    let mut index = [None; 256];
    let mut kept = Vec::with_capacity(values.len());
    for (b, span) in values {
        match index[usize::from(b)] {
            Some(first) => errors.push((
                span,
                format!(
                    "symbol {} is listed twice (first as entry {})",
                    show_byte(b),
                    usize::from(first) + 1
                ),
            )),
            None => {
                index[usize::from(b)] = Some(kept.len() as u16);
                kept.push(b);
            }
        }
    }
    if kept.is_empty() && errors.is_empty() {
        if let Some(raw) = symbols {
            errors.push((
                raw.span(),
                "the alphabet is empty: declare at least one symbol".to_string(),
            ));
        }
    }
    if share.is_some() && kept.len() == 256 {
        let at = keys.key("escape").map_or(0..0, |v| v.span());
        errors.push((
            at,
            "`escape = true` needs an alphabet without some byte values: all 256 are symbols already".to_string(),
        ));
    }
    if errors.is_empty() {
        let escape = share.map(|share| Escape {
            symbol: kept.len(),
            raw_bits: ESCAPED_BITS,
            share,
        });
        Ok(Arc::new(Bytes {
            values: kept,
            index,
            escape,
        }))
    } else {
        Err(errors)
    }
}

impl Kind for Bytes {
    fn name(&self) -> &'static str {
        ENTRY.name
    }

    fn tag(&self) -> u8 {
        1
    }

    fn alphabet_len(&self) -> usize {
        self.values.len() + usize::from(self.escape.is_some())
    }

    fn symbol_bytes(&self) -> usize {
        1
    }

    /// The values; with an escape, a repeated last value after them (no plain alphabet
    /// repeats one, so the two cannot look alike).
    fn identity(&self) -> Vec<u8> {
        let mut id = self.values.clone();
        if let (Some(_), Some(&last)) = (self.escape, self.values.last()) {
            id.extend([last, last]);
        }
        id
    }

    fn label(&self, symbol: usize) -> String {
        match self.values.get(symbol) {
            Some(&b) => show_byte(b),
            None => format!("escape (any other byte, +{ESCAPED_BITS} bits)"),
        }
    }

    fn describe(&self, symbol: usize) -> String {
        match self.values.get(symbol) {
            Some(&b) => show_byte(b),
            None => "the escape".to_string(),
        }
    }

    fn count_key(&self, key: &str) -> Result<usize, String> {
        // Canonical decimal only, so that `97`, `"097"` and `"+97"` cannot name one byte twice.
        let canonical = !key.is_empty()
            && key.bytes().all(|b| b.is_ascii_digit())
            && (key == "0" || !key.starts_with('0'));
        let byte = canonical.then(|| key.parse::<u8>().ok()).flatten();
        let Some(b) = byte else {
            return Err(format!(
                "count key \"{key}\" is not a byte value: a bytes codec keys its counts by decimal byte value, e.g. 97 = 120"
            ));
        };
        self.index[usize::from(b)]
            .map(usize::from)
            .ok_or_else(|| format!("count for {} which is not in the alphabet", show_byte(b)))
    }

    fn scanner(&self) -> Box<dyn Scanner + '_> {
        Box::new(ByteScanner {
            alphabet: self,
            offset: 0,
        })
    }

    /// Rows for the byte values up to the largest in the alphabet; larger values are
    /// refused through one absent row after them. With an escape, every value has a row:
    /// those outside the alphabet the escape's.
    fn input(&self) -> InputMap {
        let top = self.values.iter().copied().max().map_or(0, usize::from);
        if let Some(e) = &self.escape {
            // Larger values land on one more row, the escape's.
            let escape = Some(e.symbol as u16);
            let mut rows: Vec<Option<u16>> =
                self.index[..=top].iter().map(|r| r.or(escape)).collect();
            if rows.len() < 256 {
                rows.push(escape);
            }
            return InputMap::Rows(rows);
        }
        let mut rows = self.index[..=top].to_vec();
        // Larger values land on one more row, an absent one.
        if rows.len() < 256 {
            rows.push(None);
        }
        InputMap::Rows(rows)
    }

    fn symbol_items(&self) -> TokenStream {
        let values = self.values.iter().map(|&b| Literal::u8_unsuffixed(b));
        if self.escape.is_some() {
            return quote! {
                /// A byte of the input. Those in [`ALPHABET`] have symbols of their own; any
                /// other goes as the escape symbol followed by its 8 bits.
                pub type Symbol = u8;
                /// The bytes with symbols of their own, in spec order (the escape is the last
                /// symbol, after them).
                pub const ALPHABET: [Symbol; ALPHABET_LEN - 1] = [#(#values),*];
            };
        }
        quote! {
            /// A symbol of this codec: one of the byte values in [`ALPHABET`].
            pub type Symbol = u8;
            /// The alphabet, in spec order.
            pub const ALPHABET: [Symbol; ALPHABET_LEN] = [#(#values),*];
        }
    }

    fn all_symbols(&self) -> TokenStream {
        quote!(ALPHABET)
    }

    /// The escape decodes as 0 plus its raw bits.
    fn row_literal(&self, symbol: usize) -> String {
        self.values
            .get(symbol)
            .map_or_else(|| "0".to_string(), |&b| byte_literal(b))
    }

    fn escape(&self) -> Option<&Escape> {
        self.escape.as_ref()
    }

    fn extra_tables(&self, table_bits: u32) -> Vec<LayoutEntry> {
        match self.escape {
            Some(_) => super::escape_tables(table_bits).to_vec(),
            None => Vec::new(),
        }
    }
}

/// Every byte is a symbol.
struct ByteScanner<'a> {
    alphabet: &'a Bytes,
    /// Bytes scanned so far.
    offset: usize,
}

impl Scanner for ByteScanner<'_> {
    fn feed(&mut self, piece: &[u8], out: &mut Vec<u16>) -> Result<(), Misfit> {
        out.reserve(piece.len());
        for (i, &b) in piece.iter().enumerate() {
            match self.alphabet.index[usize::from(b)] {
                Some(s) => out.push(s),
                None if self.alphabet.escape.is_some() => {
                    out.push(self.alphabet.values.len() as u16)
                }
                None => {
                    return Err(Misfit {
                        offset: self.offset + i,
                        message: format!("{} is not in the alphabet", show_byte(b)),
                    })
                }
            }
        }
        self.offset += piece.len();
        Ok(())
    }

    fn finish(&mut self, _out: &mut Vec<u16>) -> Result<(), Misfit> {
        Ok(())
    }
}

/// A byte for messages: `byte 97 ('a')`, `byte 255 (\xff)`.
pub fn show_byte(b: u8) -> String {
    if b.is_ascii_graphic() || b == b' ' {
        format!("byte {b} ({:?})", b as char)
    } else {
        format!("byte {b} ({})", std::ascii::escape_default(b))
    }
}

/// A byte as a Rust literal in table rows.
pub fn byte_literal(b: u8) -> String {
    match b {
        b'\'' => "b'\\''".to_string(),
        b'\\' => "b'\\\\'".to_string(),
        b' '..=b'~' => format!("b'{}'", b as char),
        b'\n' => "b'\\n'".to_string(),
        b'\t' => "b'\\t'".to_string(),
        b'\r' => "b'\\r'".to_string(),
        _ => format!("0x{b:02x}"),
    }
}
