//! Stage 1: parse the TOML spec and validate it into [`Spec`], keeping every span so that any
//! later complaint can point at the line and column the user wrote.

use crate::error::{Error, Location, Result};
use serde::de::{self, Deserializer, SeqAccess, Visitor};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// Largest table precast builds: states and table positions must fit in `u16`.
pub const MAX_SCALE_BITS: u32 = 15;
/// Smallest table precast builds.
pub const MIN_SCALE_BITS: u32 = 1;
/// Default table size, 2^11 slots: a few KiB of tables, excess well under 1 % for most data.
pub const DEFAULT_SCALE_BITS: u32 = 11;

/// What a codec's symbols are.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Byte values; `Symbol = u8`.
    Bytes,
    /// Named tokens; `Symbol` is a generated enum.
    Tokens,
}

/// Which entropy coder the tables drive.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Table-driven ANS: one table lookup per symbol, bits read one symbol at a time.
    Tans,
    /// Range ANS: a 32-bit state renormalised in 16-bit words, division-free encoding.
    Rans,
}

/// How a rANS decoder finds the symbol of a slot.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Lookup {
    /// One table entry per slot: fastest, `2^scale_bits` entries of flash.
    Table,
    /// A search over the cumulative slot counts: one entry per symbol, slower.
    Search,
}

/// Interleaved states a codec may use (FORMAT.md).
pub const LANES: [u32; 4] = [1, 2, 4, 8];

/// How streams are delimited (FORMAT.md).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Framing {
    /// Header with format version, fingerprint and symbol count: self-delimiting, and a
    /// decoder refuses streams of other tables.
    Tagged,
    /// Payload only, for fixed-size frames: the caller knows the symbol count (the output
    /// length), and nothing identifies the tables.
    Bare,
}

/// One symbol of an alphabet, as declared.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SymbolName {
    Byte(u8),
    Token(String),
}

/// A piece of training data, as declared (files are read by the model stage).
#[derive(Debug, Clone)]
pub enum Source {
    /// Explicit counts, by symbol index.
    Counts(Vec<u64>),
    /// Inline text; `location` is where the string starts in the spec.
    Text { text: String, location: Location },
    /// A sample file: `declared` as written, `path` resolved against the spec's folder.
    Sample {
        declared: String,
        path: PathBuf,
        location: Location,
    },
}

/// One validated `[codec.NAME]` table.
#[derive(Debug, Clone)]
pub struct CodecSpec {
    pub name: String,
    pub kind: Kind,
    pub method: Method,
    pub scale_bits: u32,
    /// Interleaved states, one of [`LANES`].
    pub lanes: u32,
    pub lookup: Lookup,
    pub framing: Framing,
    pub symbols: Vec<SymbolName>,
    pub sources: Vec<Source>,
    /// Where the codec's table starts in the spec, for errors found by later stages.
    pub location: Location,
}

/// A validated spec: codecs in the order the file declares them.
#[derive(Debug, Clone)]
pub struct Spec {
    /// The spec's path as given (used in messages, never in generated code).
    pub path: PathBuf,
    pub codecs: Vec<CodecSpec>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSpec {
    defaults: Option<RawCodec>,
    codec: Option<BTreeMap<String, Spanned<RawCodec>>>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawCodec {
    kind: Option<Spanned<String>>,
    method: Option<Spanned<String>>,
    scale_bits: Option<Spanned<i64>>,
    lanes: Option<Spanned<i64>>,
    symbol_lookup: Option<Spanned<String>>,
    framing: Option<Spanned<String>>,
    symbols: Option<Spanned<RawSymbols>>,
    counts: Option<Spanned<BTreeMap<String, Spanned<i64>>>>,
    text: Option<Spanned<String>>,
    samples: Option<Spanned<Vec<Spanned<String>>>>,
}

/// `symbols` is either a string (its bytes, or for tokens an error) or a list.
enum RawSymbols {
    Text(String),
    List(Vec<Spanned<RawSymbol>>),
}

enum RawSymbol {
    Int(i64),
    Name(String),
}

impl<'de> Deserialize<'de> for RawSymbols {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawSymbols;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a string or a list of byte values or token names")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> std::result::Result<RawSymbols, E> {
                Ok(RawSymbols::Text(v.to_string()))
            }
            fn visit_seq<A: SeqAccess<'de>>(
                self,
                mut seq: A,
            ) -> std::result::Result<RawSymbols, A::Error> {
                let mut items = Vec::new();
                while let Some(item) = seq.next_element::<Spanned<RawSymbol>>()? {
                    items.push(item);
                }
                Ok(RawSymbols::List(items))
            }
        }
        d.deserialize_any(V)
    }
}

impl<'de> Deserialize<'de> for RawSymbol {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = RawSymbol;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a byte value (integer) or a token name (string)")
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> std::result::Result<RawSymbol, E> {
                Ok(RawSymbol::Int(v))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> std::result::Result<RawSymbol, E> {
                Ok(RawSymbol::Int(i64::try_from(v).unwrap_or(i64::MAX)))
            }
            fn visit_str<E: de::Error>(self, v: &str) -> std::result::Result<RawSymbol, E> {
                Ok(RawSymbol::Name(v.to_string()))
            }
        }
        d.deserialize_any(V)
    }
}

/// Reads and validates the spec file at `path`.
pub fn load(path: &Path) -> Result<(Spec, String)> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, &e))?;
    let spec = parse(&text, path)?;
    Ok((spec, text))
}

/// Parses and validates spec text; `path` names the file in messages and anchors sample paths.
pub fn parse(text: &str, path: &Path) -> Result<Spec> {
    let raw: RawSpec = toml::from_str(text).map_err(|e| {
        let location = e.span().map(|s| Location::at(path, text, s.start));
        Error::input(location, e.message().trim().to_string())
    })?;
    let ctx = Ctx { path, text };
    let defaults = raw.defaults.unwrap_or_default();
    let mut codecs: Vec<(usize, CodecSpec)> = Vec::new();
    for (name, table) in raw.codec.unwrap_or_default() {
        let start = table.span().start;
        let codec = ctx
            .codec(&name, table.span(), table.into_inner(), &defaults)
            .map_err(|e| e.in_codec(&name))?;
        codecs.push((start, codec));
    }
    if codecs.is_empty() {
        return Err(Error::input(
            Some(Location::at(path, text, 0)),
            "the spec declares no codec: add a `[codec.NAME]` table",
        ));
    }
    codecs.sort_by_key(|(start, _)| *start);
    Ok(Spec {
        path: path.to_path_buf(),
        codecs: codecs.into_iter().map(|(_, c)| c).collect(),
    })
}

struct Ctx<'a> {
    path: &'a Path,
    text: &'a str,
}

impl Ctx<'_> {
    fn loc(&self, span: Range<usize>) -> Location {
        Location::at(self.path, self.text, span.start)
    }

    fn err<T>(&self, span: Range<usize>, message: impl Into<String>) -> Result<T> {
        Err(Error::input(Some(self.loc(span)), message))
    }

    fn codec(
        &self,
        name: &str,
        span: Range<usize>,
        raw: RawCodec,
        defaults: &RawCodec,
    ) -> Result<CodecSpec> {
        check_identifier(name).or_else(|m| self.err(span.clone(), m))?;

        let kind = match raw.kind.as_ref().or(defaults.kind.as_ref()) {
            None => return self.err(span, "missing key `kind` (\"bytes\" or \"tokens\")"),
            Some(k) => match k.get_ref().as_str() {
                "bytes" => Kind::Bytes,
                "tokens" => Kind::Tokens,
                other => {
                    return self.err(
                        k.span(),
                        format!("unknown kind \"{other}\": expected \"bytes\" or \"tokens\""),
                    )
                }
            },
        };
        let method = match raw.method.as_ref().or(defaults.method.as_ref()) {
            None => Method::Tans,
            Some(m) => match m.get_ref().as_str() {
                "tans" => Method::Tans,
                "rans" => Method::Rans,
                other => {
                    return self.err(
                        m.span(),
                        format!("unknown method \"{other}\": expected \"tans\" or \"rans\""),
                    )
                }
            },
        };
        let lanes = match raw.lanes.as_ref().or(defaults.lanes.as_ref()) {
            None => 1,
            Some(l) => {
                let v = *l.get_ref();
                match LANES.iter().find(|&&n| i64::from(n) == v) {
                    Some(&n) => n,
                    None => {
                        return self.err(
                            l.span(),
                            format!("lanes = {v} is not available: expected 1, 2, 4 or 8"),
                        )
                    }
                }
            }
        };
        let lookup = match raw.symbol_lookup.as_ref().or(defaults.symbol_lookup.as_ref()) {
            None => Lookup::Table,
            Some(k) => match (k.get_ref().as_str(), method) {
                ("table", _) => Lookup::Table,
                ("search", Method::Rans) => Lookup::Search,
                ("search", Method::Tans) => {
                    return self.err(
                        k.span(),
                        "symbol_lookup = \"search\" applies to method = \"rans\"; a tANS decoder always reads its state table",
                    )
                }
                (other, _) => {
                    return self.err(
                        k.span(),
                        format!("unknown symbol_lookup \"{other}\": expected \"table\" or \"search\""),
                    )
                }
            },
        };
        let scale_bits = match raw.scale_bits.as_ref().or(defaults.scale_bits.as_ref()) {
            None => DEFAULT_SCALE_BITS,
            Some(b) => {
                let v = *b.get_ref();
                if !(i64::from(MIN_SCALE_BITS)..=i64::from(MAX_SCALE_BITS)).contains(&v) {
                    return self.err(
                        b.span(),
                        format!(
                            "scale_bits = {v} is out of range: expected {MIN_SCALE_BITS} to {MAX_SCALE_BITS}"
                        ),
                    );
                }
                v as u32
            }
        };

        let framing = match raw.framing.as_ref().or(defaults.framing.as_ref()) {
            None => Framing::Tagged,
            Some(f) => match f.get_ref().as_str() {
                "tagged" => Framing::Tagged,
                "bare" => Framing::Bare,
                other => {
                    return self.err(
                        f.span(),
                        format!("unknown framing \"{other}\": expected \"tagged\" or \"bare\""),
                    )
                }
            },
        };
        let symbols = match raw.symbols.as_ref().or(defaults.symbols.as_ref()) {
            Some(s) => self.symbols(kind, s)?,
            None if kind == Kind::Bytes => (0..=255u8).map(SymbolName::Byte).collect(),
            None => {
                return self.err(
                    span,
                    "missing key `symbols`: a tokens codec lists its token names",
                )
            }
        };
        if symbols.len() > 1usize << scale_bits {
            let s = raw
                .scale_bits
                .as_ref()
                .or(defaults.scale_bits.as_ref())
                .map_or(span.clone(), |b| b.span());
            return self.err(
                s,
                format!(
                    "{} symbols do not fit in a table of 2^{scale_bits} slots: raise scale_bits to at least {}",
                    symbols.len(),
                    usize::BITS - (symbols.len() - 1).leading_zeros()
                ),
            );
        }

        let mut sources = Vec::new();
        if let Some(c) = raw.counts.as_ref().or(defaults.counts.as_ref()) {
            sources.push(Source::Counts(self.counts(kind, &symbols, c)?));
        }
        if let Some(t) = raw.text.as_ref().or(defaults.text.as_ref()) {
            sources.push(Source::Text {
                text: t.get_ref().clone(),
                location: self.loc(t.span()),
            });
        }
        if let Some(list) = raw.samples.as_ref().or(defaults.samples.as_ref()) {
            if list.get_ref().is_empty() {
                return self.err(
                    list.span(),
                    "`samples` is empty: list at least one file or remove the key",
                );
            }
            let folder = self.path.parent().unwrap_or(Path::new(""));
            for item in list.get_ref() {
                let declared = item.get_ref().clone();
                if declared.is_empty() {
                    return self.err(item.span(), "empty sample path");
                }
                sources.push(Source::Sample {
                    path: folder.join(&declared),
                    declared,
                    location: self.loc(item.span()),
                });
            }
        }
        if sources.is_empty() {
            return self.err(
                span,
                "no training data: give at least one of `counts`, `text` or `samples`",
            );
        }

        Ok(CodecSpec {
            name: name.to_string(),
            kind,
            method,
            scale_bits,
            lanes,
            lookup,
            framing,
            symbols,
            sources,
            location: self.loc(span),
        })
    }

    fn symbols(&self, kind: Kind, raw: &Spanned<RawSymbols>) -> Result<Vec<SymbolName>> {
        let mut out: Vec<SymbolName> = Vec::new();
        let push = |name: SymbolName, span: Range<usize>, out: &mut Vec<SymbolName>| {
            if let Some(first) = out.iter().position(|s| *s == name) {
                return self.err(
                    span,
                    format!(
                        "symbol {} is listed twice (first as entry {})",
                        show(&name),
                        first + 1
                    ),
                );
            }
            out.push(name);
            Ok(())
        };
        match (kind, raw.get_ref()) {
            (Kind::Bytes, RawSymbols::Text(s)) => {
                for b in s.bytes() {
                    push(SymbolName::Byte(b), raw.span(), &mut out)?;
                }
            }
            (Kind::Tokens, RawSymbols::Text(_)) => {
                return self.err(raw.span(), "a tokens codec lists its symbols as an array of names, e.g. [\"ok\", \"low_battery\"]");
            }
            (_, RawSymbols::List(items)) => {
                for item in items {
                    let name = match (kind, item.get_ref()) {
                        (Kind::Bytes, RawSymbol::Int(v)) => match u8::try_from(*v) {
                            Ok(b) => SymbolName::Byte(b),
                            Err(_) => {
                                return self.err(
                                    item.span(),
                                    format!("byte value {v} is out of range 0..=255"),
                                )
                            }
                        },
                        (Kind::Bytes, RawSymbol::Name(n)) => {
                            let bytes = n.as_bytes();
                            if bytes.len() != 1 {
                                return self.err(item.span(), format!("\"{n}\" is not a single byte: list byte values as integers or one-byte strings"));
                            }
                            SymbolName::Byte(bytes[0])
                        }
                        (Kind::Tokens, RawSymbol::Name(n)) => {
                            check_token(n).or_else(|m| self.err(item.span(), m))?;
                            SymbolName::Token(n.clone())
                        }
                        (Kind::Tokens, RawSymbol::Int(v)) => {
                            return self.err(
                                item.span(),
                                format!("token names are strings, found the number {v}"),
                            )
                        }
                    };
                    push(name, item.span(), &mut out)?;
                }
            }
        }
        if out.is_empty() {
            return self.err(
                raw.span(),
                "the alphabet is empty: declare at least one symbol",
            );
        }
        if kind == Kind::Tokens {
            let mut seen: BTreeMap<String, &str> = BTreeMap::new();
            for s in &out {
                if let SymbolName::Token(t) = s {
                    let v = variant_name(t);
                    if let Some(other) = seen.insert(v.clone(), t) {
                        return self.err(
                            raw.span(),
                            format!("tokens \"{other}\" and \"{t}\" both become the variant `{v}`"),
                        );
                    }
                }
            }
        }
        Ok(out)
    }

    fn counts(
        &self,
        kind: Kind,
        symbols: &[SymbolName],
        raw: &Spanned<BTreeMap<String, Spanned<i64>>>,
    ) -> Result<Vec<u64>> {
        let mut counts = vec![0u64; symbols.len()];
        let mut entries: Vec<_> = raw.get_ref().iter().collect();
        entries.sort_by_key(|(_, v)| v.span().start);
        for (key, value) in entries {
            let name = match kind {
                Kind::Tokens => SymbolName::Token(key.clone()),
                Kind::Bytes => match key.parse::<u8>() {
                    Ok(b) => SymbolName::Byte(b),
                    Err(_) => {
                        return self.err(
                            value.span(),
                            format!("count key \"{key}\" is not a byte value: a bytes codec keys its counts by decimal byte value, e.g. 97 = 120"),
                        )
                    }
                },
            };
            let Some(index) = symbols.iter().position(|s| *s == name) else {
                return self.err(
                    value.span(),
                    format!("count for {} which is not in the alphabet", show(&name)),
                );
            };
            let v = *value.get_ref();
            if v < 0 {
                return self.err(
                    value.span(),
                    format!("count {v} for {} is negative", show(&name)),
                );
            }
            counts[index] = v as u64;
        }
        Ok(counts)
    }
}

/// Human form of a symbol for messages: `"ok"`, or `byte 97 ('a')`.
pub fn show(s: &SymbolName) -> String {
    match s {
        SymbolName::Token(t) => format!("\"{t}\""),
        SymbolName::Byte(b) => show_byte(*b),
    }
}

pub fn show_byte(b: u8) -> String {
    if b.is_ascii_graphic() || b == b' ' {
        format!("byte {b} ({:?})", b as char)
    } else {
        format!("byte {b} ({})", std::ascii::escape_default(b))
    }
}

const KEYWORDS: &[&str] = &[
    "as", "async", "await", "break", "const", "continue", "crate", "dyn", "else", "enum", "extern",
    "false", "fn", "for", "gen", "if", "impl", "in", "let", "loop", "match", "mod", "move", "mut",
    "pub", "ref", "return", "self", "static", "struct", "super", "trait", "true", "type", "unsafe",
    "use", "where", "while", "abstract", "become", "box", "do", "final", "macro", "override",
    "priv", "try", "typeof", "unsized", "virtual", "yield", "core", "std",
];

fn check_identifier(name: &str) -> std::result::Result<(), String> {
    let ok_chars = name
        .bytes()
        .all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'_');
    let starts = name.bytes().next().is_some_and(|b| b.is_ascii_lowercase());
    if !ok_chars || !starts {
        return Err(format!(
            "codec name \"{name}\" is not a snake_case Rust identifier (lowercase letters, digits and _, starting with a letter)"
        ));
    }
    if KEYWORDS.contains(&name) {
        return Err(format!(
            "codec name \"{name}\" is a Rust keyword or reserved name"
        ));
    }
    Ok(())
}

fn check_token(name: &str) -> std::result::Result<(), String> {
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
