//! `kind = "tokens"`: symbols are named tokens; `Symbol` is a generated enum with one
//! UpperCamelCase variant per token, in spec order.

use super::{a_type, InputMap, Kind, KindEntry, Misfit, Misplaced, Scanner};
use proc_macro2::{Ident, Span, TokenStream};
use quote::quote;
use std::collections::BTreeMap;
use std::ops::Range;
use std::sync::Arc;
use toml::de::DeValue;
use toml::Spanned;

/// Most tokens an alphabet may have: the generated enum and its matches stay within about
/// 0.6 GB of compiler memory (measured with rustc 1.95: 0.27 GB at 2,048 tokens, 0.62 GB at
/// 4,096, 1.9 GB at 8,192).
pub const MAX_TOKENS: usize = 4096;

pub const ENTRY: KindEntry = KindEntry {
    name: "tokens",
    read,
};

/// A token alphabet, in spec order.
#[derive(Debug, Clone)]
pub struct Tokens {
    names: Vec<String>,
    /// `(name, index)` sorted by name, for scanning.
    sorted: Vec<(String, u16)>,
}

fn read(
    symbols: Option<&Spanned<DeValue<'_>>>,
    codec: Range<usize>,
    _keys: &dyn super::SpecKeys,
) -> Result<Arc<dyn Kind>, Vec<Misplaced>> {
    let Some(raw) = symbols else {
        return Err(vec![(
            codec,
            "missing key `symbols`: a tokens codec lists its token names".to_string(),
        )]);
    };
    let items = match raw.get_ref() {
        DeValue::Array(items) => items,
        DeValue::String(_) => {
            return Err(vec![(
            raw.span(),
            "a tokens codec lists its symbols as an array of names, e.g. [\"ok\", \"low_battery\"]"
                .to_string(),
        )])
        }
        other => {
            return Err(vec![(
                raw.span(),
                format!(
                    "`symbols` of a tokens codec is an array of names, found {}",
                    a_type(other)
                ),
            )])
        }
    };
    let mut errors = Vec::new();
    let mut names: Vec<String> = Vec::new();
    let mut variants: BTreeMap<String, String> = BTreeMap::new();
    for item in items.iter() {
        let name = match item.get_ref() {
            DeValue::String(n) => n.to_string(),
            DeValue::Integer(i) => {
                errors.push((
                    item.span(),
                    format!("token names are strings, found the number {i}"),
                ));
                continue;
            }
            other => {
                errors.push((
                    item.span(),
                    format!("token names are strings, found {}", a_type(other)),
                ));
                continue;
            }
        };
        if let Err(m) = check_token(&name) {
            errors.push((item.span(), m));
            continue;
        }
        if let Some(first) = names.iter().position(|n| *n == name) {
            errors.push((
                item.span(),
                format!(
                    "symbol \"{name}\" is listed twice (first as entry {})",
                    first + 1
                ),
            ));
            continue;
        }
        let v = variant_name(&name);
        if let Some(other) = variants.insert(v.clone(), name.clone()) {
            errors.push((
                item.span(),
                format!("tokens \"{other}\" and \"{name}\" both become the variant `{v}`"),
            ));
            continue;
        }
        names.push(name);
    }
    if names.len() > MAX_TOKENS {
        errors.push((
            raw.span(),
            format!(
                "{} tokens are more than a tokens codec may have ({MAX_TOKENS}): the generated enum would take too much compiler memory",
                names.len()
            ),
        ));
    }
    if names.is_empty() && errors.is_empty() {
        errors.push((
            raw.span(),
            "the alphabet is empty: declare at least one symbol".to_string(),
        ));
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    let mut sorted: Vec<(String, u16)> = names
        .iter()
        .enumerate()
        .map(|(i, n)| (n.clone(), i as u16))
        .collect();
    sorted.sort();
    Ok(Arc::new(Tokens { names, sorted }))
}

impl Tokens {
    fn index_of(&self, word: &str) -> Option<u16> {
        self.sorted
            .binary_search_by(|(t, _)| t.as_str().cmp(word))
            .ok()
            .map(|k| self.sorted[k].1)
    }

    fn variants(&self) -> Vec<Ident> {
        self.names
            .iter()
            .map(|n| Ident::new(&variant_name(n), Span::call_site()))
            .collect()
    }
}

impl Kind for Tokens {
    fn name(&self) -> &'static str {
        ENTRY.name
    }

    fn tag(&self) -> u8 {
        2
    }

    fn alphabet_len(&self) -> usize {
        self.names.len()
    }

    fn symbol_bytes(&self) -> usize {
        if self.names.len() > 256 {
            2
        } else {
            1
        }
    }

    fn identity(&self) -> Vec<u8> {
        let mut out = Vec::new();
        for n in &self.names {
            out.extend_from_slice(n.as_bytes());
            out.push(0);
        }
        out
    }

    fn label(&self, symbol: usize) -> String {
        self.names[symbol].clone()
    }

    fn describe(&self, symbol: usize) -> String {
        format!("\"{}\"", self.names[symbol])
    }

    fn count_key(&self, key: &str) -> Result<usize, String> {
        self.index_of(key)
            .map(usize::from)
            .ok_or_else(|| format!("count for \"{key}\" which is not in the alphabet"))
    }

    /// Whitespace-separated token names.
    fn scanner(&self) -> Box<dyn Scanner + '_> {
        Box::new(TokenScanner {
            alphabet: self,
            longest: self.names.iter().map(String::len).max().unwrap_or(0),
            word: Vec::new(),
            word_start: 0,
            offset: 0,
        })
    }

    fn input(&self) -> InputMap {
        InputMap::Index
    }

    fn symbol_items(&self) -> TokenStream {
        let variants = self.variants();
        let names = &self.names;
        let repr = if self.symbol_bytes() == 2 {
            quote!(u16)
        } else {
            quote!(u8)
        };
        let variant_docs = names.iter().map(|n| format!(" Token `{n}`."));
        quote! {
            /// A symbol of this codec: one token of the alphabet.
            #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
            #[repr(#repr)]
            pub enum Symbol {
                #(#[doc = #variant_docs] #variants,)*
            }
            /// Every symbol, in spec order.
            pub const ALL: [Symbol; ALPHABET_LEN] = [#(Symbol::#variants),*];
            impl Symbol {
                /// The token's name as written in the spec.
                pub const fn name(self) -> &'static str {
                    match self {
                        #(Symbol::#variants => #names,)*
                    }
                }
                /// The token with this name, if any.
                pub fn from_name(name: &str) -> Option<Symbol> {
                    match name {
                        #(#names => Some(Symbol::#variants),)*
                        _ => None,
                    }
                }
            }
            impl ::core::fmt::Display for Symbol {
                fn fmt(&self, f: &mut ::core::fmt::Formatter<'_>) -> ::core::fmt::Result {
                    f.write_str(self.name())
                }
            }
        }
    }

    fn all_symbols(&self) -> TokenStream {
        quote!(ALL)
    }

    fn row_literal(&self, symbol: usize) -> String {
        format!("Symbol::{}", variant_name(&self.names[symbol]))
    }
}

/// Splits the data at ASCII whitespace; a word may span pieces.
struct TokenScanner<'a> {
    alphabet: &'a Tokens,
    /// The longest token name: a longer word is refused before it is read whole.
    longest: usize,
    /// The word being read, and where it started.
    word: Vec<u8>,
    word_start: usize,
    /// Bytes scanned so far.
    offset: usize,
}

impl TokenScanner<'_> {
    fn end_word(&mut self, out: &mut Vec<u16>) -> Result<(), Misfit> {
        if self.word.is_empty() {
            return Ok(());
        }
        let found = std::str::from_utf8(&self.word)
            .ok()
            .filter(|_| self.word.len() <= self.longest)
            .and_then(|w| self.alphabet.index_of(w));
        match found {
            Some(index) => {
                out.push(index);
                self.word.clear();
                Ok(())
            }
            None => Err(Misfit {
                offset: self.word_start,
                message: format!(
                    "token \"{}\" is not in the alphabet",
                    String::from_utf8_lossy(&self.word)
                ),
            }),
        }
    }
}

impl Scanner for TokenScanner<'_> {
    fn feed(&mut self, piece: &[u8], out: &mut Vec<u16>) -> Result<(), Misfit> {
        for (i, &b) in piece.iter().enumerate() {
            if b.is_ascii_whitespace() {
                self.end_word(out)?;
            } else {
                if self.word.is_empty() {
                    self.word_start = self.offset + i;
                }
                // Past the longest name the word cannot be a token: keep only enough of it
                // for the message.
                if self.word.len() <= self.longest.max(64) {
                    self.word.push(b);
                } else if self.word.len() > self.longest {
                    return self.end_word(out);
                }
            }
        }
        self.offset += piece.len();
        Ok(())
    }

    fn finish(&mut self, out: &mut Vec<u16>) -> Result<(), Misfit> {
        self.end_word(out)
    }
}

fn check_token(name: &str) -> Result<(), String> {
    let ok = !name.is_empty()
        && name.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'_')
        && name.bytes().any(|b| b.is_ascii_alphabetic())
        && !name.as_bytes()[0].is_ascii_digit();
    if ok {
        Ok(())
    } else {
        Err(format!(
            "token name \"{name}\" must be ASCII letters, digits and _, starting with a letter or _ (it becomes an enum variant)"
        ))
    }
}

/// `low_battery` → `LowBattery`: the enum variant for a token.
pub fn variant_name(token: &str) -> String {
    let mut out = String::new();
    for part in token.split('_').filter(|p| !p.is_empty()) {
        let mut chars = part.chars();
        if let Some(first) = chars.next() {
            out.push(first.to_ascii_uppercase());
            out.extend(chars);
        }
    }
    if out.is_empty() || out.as_bytes()[0].is_ascii_digit() {
        out.insert(0, 'T');
    }
    // `Self` is the one keyword an UpperCamelCase name can hit.
    if out == "Self" {
        out.push('_');
    }
    out
}
