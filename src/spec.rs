//! Stage 1: the spec text, parsed and validated into [`Spec`]. Every key keeps its span, so
//! that any complaint, here or in a later stage, points at the line and column the user
//! wrote; every mistake of a spec is reported in one pass. `[defaults]` is merged into each
//! codec once, key by key, before any value is read.

use crate::error::{Error, Location, Result};
use crate::kind::{self, a_type, Kind};
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use toml::de::{DeTable, DeValue};
use toml::Spanned;

/// Largest table precast builds: states and table positions must fit in `u16`.
pub const MAX_TABLE_BITS: u32 = 15;
/// Smallest table precast builds.
pub const MIN_TABLE_BITS: u32 = 1;
/// Largest `flash_budget`: the largest tables precast builds take under 1 MiB, so a larger
/// budget is a typing mistake.
pub const MAX_FLASH_BUDGET: u32 = 64 << 20;

/// Most codecs one spec may declare. Generation time grows linearly with them; the compiler's
/// memory does too, at about 3.5 MB per small codec (rustc 1.95, debug).
pub const MAX_CODECS: usize = 1024;

/// Interleaved states a codec may use (FORMAT.md).
pub const LANES: [u32; 4] = [1, 2, 4, 8];

/// A spec key whose value is one of a few names.
pub trait Choice: Copy + 'static {
    /// The key, for messages.
    const KEY: &'static str;
    /// Every name and its value; the first is the default.
    const OPTIONS: &'static [(&'static str, Self)];
}

/// Which entropy coder the tables drive.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Table-driven ANS: one table lookup per symbol, bits read one symbol at a time.
    Tans,
    /// Range ANS: a 32-bit state renormalised in 16-bit words, division-free encoding.
    Rans,
}

impl Choice for Method {
    const KEY: &'static str = "method";
    const OPTIONS: &'static [(&'static str, Self)] =
        &[("tans", Method::Tans), ("rans", Method::Rans)];
}

/// How a rANS decoder finds the symbol of a slot.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Lookup {
    /// One table entry per slot: fastest, `2^table_bits` entries of flash.
    Table,
    /// A search over the cumulative slot counts: one entry per symbol, slower.
    Search,
}

impl Choice for Lookup {
    const KEY: &'static str = "symbol_lookup";
    const OPTIONS: &'static [(&'static str, Self)] =
        &[("table", Lookup::Table), ("search", Lookup::Search)];
}

/// How streams are delimited (FORMAT.md).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Framing {
    /// A 16-bit fingerprint and the symbol count: self-delimiting (streams can follow one
    /// another), and a decoder refuses streams of other tables. For storage.
    Tagged,
    /// An 8-bit check of the tables and the symbol count, and the payload to the end of the
    /// stream: for radio frames, whose length the link knows.
    Compact,
    /// Payload only, to the end of the stream: the caller knows the symbol count (the
    /// output length), and nothing identifies the tables.
    Bare,
}

/// What chooses the table set of a symbol.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Context {
    /// One table set for every symbol (order 0).
    None,
    /// The lane's previous symbol chooses one of at most `context_tables` sets.
    Previous,
}

impl Choice for Context {
    const KEY: &'static str = "context";
    const OPTIONS: &'static [(&'static str, Self)] =
        &[("none", Context::None), ("previous", Context::Previous)];
}

/// Most table sets of a context codec (`context_tables`), and its default.
pub const MAX_CONTEXT_TABLES: u32 = 16;
pub const DEFAULT_CONTEXT_TABLES: u32 = 8;

impl Choice for Framing {
    const KEY: &'static str = "framing";
    const OPTIONS: &'static [(&'static str, Self)] = &[
        ("tagged", Framing::Tagged),
        ("compact", Framing::Compact),
        ("bare", Framing::Bare),
    ];
}

/// A piece of training data, as declared (files are read by the load stage).
#[derive(Debug, Clone)]
pub enum Source {
    /// Explicit counts, by symbol index.
    Counts(Vec<u64>),
    /// Explicit counts of an integers codec, by place (`kind::integers`), sorted.
    PlaceCounts(Vec<(u32, u64)>),
    /// Inline text; `location` is where the string starts in the spec.
    Text { text: String, location: Location },
    /// A sample file: `declared` as written, `path` resolved against the spec's folder.
    Sample {
        declared: String,
        path: PathBuf,
        location: Location,
    },
    /// A counts file (written by `precast count`), `path` resolved against the spec's folder.
    CountsFile {
        declared: String,
        path: PathBuf,
        location: Location,
    },
}

/// Which of the sizing keys a codec sets (itself or through `[defaults]`). `plan::plan`
/// chooses the others (`src/sizing.rs`) and writes them into its copy of the spec.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Given {
    pub method: bool,
    pub lookup: bool,
    pub table_bits: bool,
}

/// One validated `[codec.NAME]` table.
#[derive(Debug, Clone)]
pub struct CodecSpec {
    pub name: String,
    /// The alphabet, owned by its kind (`src/kind/`).
    pub kind: Arc<dyn Kind>,
    /// Given, or chosen by `plan::plan` (see [`Given`]); until then the default, tANS.
    pub method: Method,
    /// Given, or chosen by `plan::plan`; until then the smallest table that holds the
    /// alphabet.
    pub table_bits: u32,
    /// Interleaved states, one of [`LANES`].
    pub lanes: u32,
    /// Given, or chosen by `plan::plan`; until then the default, a table.
    pub lookup: Lookup,
    pub framing: Framing,
    /// Bytes all of the codec's tables may take together, encode and decode (`flash_budget`).
    pub flash_budget: Option<usize>,
    /// `context = "previous"`: at most this many table sets (`context_tables`); `None`: one.
    pub context_tables: Option<u32>,
    pub given: Given,
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

/// Keys of a `[codec.NAME]` table (and of `[defaults]`).
pub const CODEC_KEYS: &[&str] = &[
    "kind",
    "method",
    "table_bits",
    "lanes",
    "symbol_lookup",
    "framing",
    "flash_budget",
    "context",
    "context_tables",
    "symbols",
    "counts",
    "text",
    "samples",
    "counts_file",
    // kind = "integers" (src/kind/integers.rs)
    "range",
    "value_type",
    "delta",
    "max_symbols",
    // escapes (src/kind/mod.rs)
    "escape",
    "escape_share",
];

/// Reads and validates the spec file at `path`; returns it with its text.
pub fn load(path: &Path) -> Result<(Spec, String)> {
    let text = crate::load::spec_text(path)?;
    let spec = parse(&text, path)?;
    Ok((spec, text))
}

/// Parses and validates spec text; `path` names the file in messages and anchors sample
/// paths. All mistakes are reported at once, in the order of the text.
pub fn parse(text: &str, path: &Path) -> Result<Spec> {
    let checker = Checker { path, text };
    let doc = match DeTable::parse(text) {
        Ok(doc) => doc,
        Err(e) => {
            let at = e.span().map_or(0, |s| s.start);
            let mut message = e.message().trim().to_string();
            // The parser's message does not say which key; the span starts at it.
            if message == "duplicate key" {
                let key: String = text[at.min(text.len())..]
                    .chars()
                    .take_while(|c| !matches!(c, '=' | ']' | '\n') && !c.is_whitespace())
                    .collect();
                if !key.is_empty() {
                    message = format!("duplicate key `{key}`");
                }
            }
            return Err(Error::input(Some(Location::at(path, text, at)), message));
        }
    };
    let mut errors: Vec<(usize, Error)> = Vec::new();
    let mut defaults: Option<&DeTable<'_>> = None;
    let mut tables: Option<&DeTable<'_>> = None;
    for (key, value) in doc.get_ref().iter() {
        match (key.get_ref().as_ref(), value.get_ref()) {
            ("defaults", DeValue::Table(t)) => {
                checker.check_keys(t, None, &mut errors);
                defaults = Some(t);
            }
            ("codec", DeValue::Table(t)) => tables = Some(t),
            (k @ ("defaults" | "codec"), other) => errors.push(checker.error(
                value.span(),
                None,
                format!("`{k}` must be a table, found {}", a_type(other)),
            )),
            (k, _) => {
                errors.push(checker.error(key.span(), None, unknown_key(k, &["defaults", "codec"])))
            }
        }
    }
    let mut codecs: Vec<(usize, CodecSpec)> = Vec::new();
    let mut declared: Vec<_> = tables.into_iter().flat_map(|t| t.iter()).collect();
    declared.sort_by_key(|(_, table)| table.span().start);
    if let Some((name, _)) = declared.get(MAX_CODECS) {
        errors.push(checker.error(
            name.span(),
            Some(name.get_ref().as_ref()),
            format!("a spec may declare at most {MAX_CODECS} codecs: split it into several specs"),
        ));
        declared.truncate(MAX_CODECS);
    }
    for (name, table) in declared {
        let name_text = name.get_ref().as_ref();
        let DeValue::Table(t) = table.get_ref() else {
            errors.push(checker.error(
                table.span(),
                Some(name_text),
                format!(
                    "a codec is a table `[codec.{name_text}]`, found {}",
                    a_type(table.get_ref())
                ),
            ));
            continue;
        };
        checker.check_keys(t, Some(name_text), &mut errors);
        let merged = Merged { codec: t, defaults };
        match checker.codec(name_text, table.span(), &merged) {
            Ok(codec) => codecs.push((table.span().start, codec)),
            Err(mut e) => errors.append(&mut e),
        }
    }
    if codecs.is_empty() && errors.is_empty() {
        errors.push(checker.error(
            0..0,
            None,
            "the spec declares no codec: add a `[codec.NAME]` table".to_string(),
        ));
    }
    if !errors.is_empty() {
        // In the order of the text; a bad value in `[defaults]` is reported once.
        errors.sort_by_key(|(at, _)| *at);
        errors.dedup_by(|b, a| a.0 == b.0 && a.1.message == b.1.message);
        let gathered = Error::gather(errors.into_iter().map(|(_, e)| e).collect());
        return Err(gathered.unwrap_or_else(|| Error::internal("an empty list of spec errors")));
    }
    codecs.sort_by_key(|(start, _)| *start);
    Ok(Spec {
        path: path.to_path_buf(),
        codecs: codecs.into_iter().map(|(_, c)| c).collect(),
    })
}

/// A codec's keys with `[defaults]` underneath.
struct Merged<'a, 'i> {
    codec: &'a DeTable<'i>,
    defaults: Option<&'a DeTable<'i>>,
}

impl<'a, 'i> Merged<'a, 'i> {
    fn get(&self, key: &str) -> Option<&'a Spanned<DeValue<'i>>> {
        self.codec
            .get(key)
            .or_else(|| self.defaults.and_then(|d| d.get(key)))
    }
}

impl kind::SpecKeys for Merged<'_, '_> {
    fn key(&self, name: &str) -> Option<&Spanned<DeValue<'_>>> {
        self.get(name)
    }
}

/// Errors found while reading one codec, each with the byte offset it sorts by.
type Found = Vec<(usize, Error)>;

struct Checker<'a> {
    path: &'a Path,
    text: &'a str,
}

impl Checker<'_> {
    fn error(&self, span: Range<usize>, codec: Option<&str>, message: String) -> (usize, Error) {
        let mut e = Error::input(
            Some(Location::at(self.path, self.text, span.start)),
            message,
        );
        if let Some(c) = codec {
            e = e.in_codec(c);
        }
        (span.start, e)
    }

    fn check_keys(&self, table: &DeTable<'_>, codec: Option<&str>, errors: &mut Found) {
        for key in table.keys() {
            let k = key.get_ref().as_ref();
            if !CODEC_KEYS.contains(&k) {
                // Another name for the table size (earlier versions had one) points to ours,
                // unless it is a near miss of a key, which gets the usual suggestion.
                let near = CODEC_KEYS.iter().any(|known| edit_distance(k, known) <= 2);
                let message = if k.ends_with("_bits") && !near {
                    format!("unknown key `{k}`: the table size is `table_bits` (log2 of the number of slots)")
                } else {
                    unknown_key(k, CODEC_KEYS)
                };
                errors.push(self.error(key.span(), codec, message));
            }
        }
    }

    fn codec(
        &self,
        name: &str,
        span: Range<usize>,
        keys: &Merged<'_, '_>,
    ) -> std::result::Result<CodecSpec, Found> {
        let mut errors: Found = Vec::new();
        let mut fail = |span: Range<usize>, message: String| {
            errors.push(self.error(span, Some(name), message));
        };
        if let Err(m) = check_identifier(name) {
            fail(span.clone(), m);
        }

        let kind_entry = match keys.get("kind") {
            None => {
                fail(
                    span.clone(),
                    format!("missing key `kind` ({})", kind::names()),
                );
                None
            }
            Some(v) => match v.get_ref() {
                DeValue::String(s) => match kind::find(s) {
                    Some(entry) => Some(entry),
                    None => {
                        fail(
                            v.span(),
                            format!("unknown kind \"{s}\": expected {}", kind::names()),
                        );
                        None
                    }
                },
                other => {
                    fail(v.span(), type_error("kind", "a string", other));
                    None
                }
            },
        };
        let method = self.choice::<Method>(keys, &mut fail);
        let framing = self.choice::<Framing>(keys, &mut fail);
        let lookup = self.choice::<Lookup>(keys, &mut fail);
        if let (Some(Method::Tans), Some(Lookup::Search), Some(v)) =
            (method, lookup, keys.get(Lookup::KEY))
        {
            fail(
                v.span(),
                "symbol_lookup = \"search\" applies to method = \"rans\"; a tANS decoder always reads its state table".to_string(),
            );
        }
        let lanes = self.number(keys, "lanes", 1, &mut fail, |n, written| {
            LANES
                .into_iter()
                .find(|&l| i128::from(l) == n)
                .ok_or_else(|| format!("lanes = {written} is not available: expected 1, 2, 4 or 8"))
        });
        let context = self.choice::<Context>(keys, &mut fail);
        let context_tables =
            self.optional_number(keys, "context_tables", &mut fail, |n, written| {
                if (1..=i128::from(MAX_CONTEXT_TABLES)).contains(&n) {
                    Ok(n as u32)
                } else {
                    Err(format!(
                        "context_tables = {written} is out of range: expected 1 to {MAX_CONTEXT_TABLES}"
                    ))
                }
            });
        if let (Some(Context::None), Some(Some(_)), Some(v)) =
            (context, context_tables, keys.get("context_tables"))
        {
            fail(
                v.span(),
                "`context_tables` applies to context = \"previous\"".to_string(),
            );
        }
        if let (Some(Context::Previous), Some(Lookup::Search), Some(v)) =
            (context, lookup, keys.get(Lookup::KEY))
        {
            fail(
                v.span(),
                "a context codec looks symbols up in a table: symbol_lookup = \"search\" has no table sets".to_string(),
            );
        }
        let table_bits = self.optional_number(keys, "table_bits", &mut fail, |n, written| {
            if (i128::from(MIN_TABLE_BITS)..=i128::from(MAX_TABLE_BITS)).contains(&n) {
                Ok(n as u32)
            } else {
                Err(format!(
                    "table_bits = {written} is out of range: expected {MIN_TABLE_BITS} to {MAX_TABLE_BITS}"
                ))
            }
        });
        let flash_budget = self.optional_number(keys, "flash_budget", &mut fail, |n, written| {
            if (1..=i128::from(MAX_FLASH_BUDGET)).contains(&n) {
                Ok(n as u32)
            } else {
                Err(format!(
                    "flash_budget = {written} is out of range: expected 1 to {MAX_FLASH_BUDGET} bytes (64 MiB)"
                ))
            }
        });

        let alphabet = kind_entry.and_then(|entry| {
            match (entry.read)(keys.get("symbols"), span.clone(), keys) {
                Ok(k) => Some(k),
                Err(list) => {
                    for (s, m) in list {
                        fail(s, m);
                    }
                    None
                }
            }
        });
        // Keys of another kind are mistakes, not silently ignored.
        if let Some(entry) = kind_entry.filter(|e| e.name != "integers") {
            for key in kind::integers::KEYS {
                if let Some(v) = keys.codec.get(*key) {
                    fail(
                        v.span(),
                        format!(
                            "`{key}` applies to kind = \"integers\", not \"{}\"",
                            entry.name
                        ),
                    );
                }
            }
        }
        if let Some(entry) =
            kind_entry.filter(|e| !["bytes", "chars", "integers"].contains(&e.name))
        {
            for key in kind::ESCAPE_KEYS {
                if let Some(v) = keys.codec.get(*key) {
                    fail(
                        v.span(),
                        format!(
                            "`{key}` applies to kinds \"bytes\", \"chars\" and \"integers\", not \"{}\"",
                            entry.name
                        ),
                    );
                }
            }
        }
        if let (Some(k), Some(f)) = (&alphabet, framing) {
            if let Some(message) = k.framing_error(f) {
                let at = keys.get(Framing::KEY).map_or(span.clone(), |v| v.span());
                fail(at, message);
            }
        }
        // Offset bits ride on the tANS bit stream only.
        if let (Some(k), Some(Method::Rans), Some(v)) = (&alphabet, method, keys.get(Method::KEY)) {
            if k.escape().is_some() && k.integers().is_none() {
                fail(
                    v.span(),
                    "a codec with an escape is coded with method = \"tans\" (rANS does not carry raw bits yet)".to_string(),
                );
            }
            if k.integers().is_some() {
                fail(
                    v.span(),
                    "an integers codec is coded with method = \"tans\" (rANS does not carry offset bits yet)".to_string(),
                );
            }
        }
        // A chosen size starts at the smallest table that holds the alphabet.
        let table_bits = match (&alphabet, table_bits) {
            (Some(k), Some(Some(bits))) => {
                if k.alphabet_len() > 1usize << bits {
                    let at = keys.get("table_bits").map_or(span.clone(), |v| v.span());
                    fail(
                        at,
                        format!(
                            "{} symbols do not fit in a table of 2^{bits} slots: raise table_bits to at least {}",
                            k.alphabet_len(),
                            smallest_table_bits(k.alphabet_len())
                        ),
                    );
                }
                Some(bits)
            }
            (Some(k), Some(None)) => {
                let bits = smallest_table_bits(k.alphabet_len());
                if bits > MAX_TABLE_BITS {
                    fail(
                        span.clone(),
                        format!(
                            "{} symbols do not fit in the largest table (2^{MAX_TABLE_BITS} slots)",
                            k.alphabet_len()
                        ),
                    );
                }
                Some(bits)
            }
            _ => None,
        };

        let sources = self.sources(keys, alphabet.as_deref(), &mut fail);
        let declared = ["counts", "text", "samples", "counts_file"]
            .iter()
            .any(|k| keys.get(k).is_some());
        if !declared {
            fail(
                span.clone(),
                "no training data: give at least one of `counts`, `text`, `samples` or `counts_file`".to_string(),
            );
        }

        let given = Given {
            method: keys.get(Method::KEY).is_some(),
            lookup: keys.get(Lookup::KEY).is_some(),
            table_bits: keys.get("table_bits").is_some(),
        };
        let codec = match (
            alphabet,
            method,
            table_bits,
            lanes,
            lookup,
            framing,
            flash_budget,
        ) {
            (
                Some(kind),
                Some(method),
                Some(table_bits),
                Some(lanes),
                Some(lookup),
                Some(framing),
                Some(flash_budget),
            ) if errors.is_empty() => CodecSpec {
                name: name.to_string(),
                kind,
                method,
                table_bits,
                lanes,
                lookup,
                framing,
                flash_budget: flash_budget.map(|b| b as usize),
                context_tables: match (context, context_tables) {
                    (Some(Context::Previous), Some(k)) => Some(k.unwrap_or(DEFAULT_CONTEXT_TABLES)),
                    _ => None,
                },
                given,
                sources,
                location: Location::at(self.path, self.text, span.start),
            },
            _ => return Err(errors),
        };
        // Whether any tables fit the budget depends on sizes only, so it is told here, at
        // the key, with the spec's other mistakes.
        if let (Some(message), Some(v)) = (
            crate::sizing::budget_error(&codec),
            keys.get("flash_budget"),
        ) {
            return Err(vec![self.error(v.span(), Some(name), message)]);
        }
        Ok(codec)
    }

    /// The training data: `counts` (read by the alphabet's kind), `text` and `samples`.
    fn sources(
        &self,
        keys: &Merged<'_, '_>,
        alphabet: Option<&dyn Kind>,
        fail: &mut impl FnMut(Range<usize>, String),
    ) -> Vec<Source> {
        let mut sources = Vec::new();
        if let Some(v) = keys.get("counts") {
            match (v.get_ref(), alphabet) {
                (DeValue::Table(t), Some(k)) => match self.counts(k, t) {
                    Ok(c) if k.integers().is_some() => {
                        let mut places: Vec<(u32, u64)> =
                            c.into_iter().map(|(u, n)| (u as u32, n)).collect();
                        places.sort_unstable();
                        sources.push(Source::PlaceCounts(places));
                    }
                    Ok(c) => {
                        let mut dense = vec![0u64; k.alphabet_len()];
                        for (i, n) in c {
                            dense[i] = n;
                        }
                        sources.push(Source::Counts(dense));
                    }
                    Err(list) => {
                        for (s, m) in list {
                            fail(s, m);
                        }
                    }
                },
                (DeValue::Table(_), None) => {}
                (other, _) => fail(
                    v.span(),
                    type_error("counts", "a table of symbol = count", other),
                ),
            }
        }
        if let Some(v) = keys.get("text") {
            match v.get_ref() {
                DeValue::String(s) => sources.push(Source::Text {
                    text: s.to_string(),
                    location: Location::at(self.path, self.text, v.span().start),
                }),
                other => fail(v.span(), type_error("text", "a string", other)),
            }
        }
        if let Some(v) = keys.get("samples") {
            let folder = self.path.parent().unwrap_or(Path::new(""));
            let mut one = |item: &Spanned<DeValue<'_>>,
                           fail: &mut dyn FnMut(Range<usize>, String)| {
                match item.get_ref() {
                    DeValue::String(s) if s.is_empty() => {
                        fail(item.span(), "empty sample path".to_string())
                    }
                    DeValue::String(s) => sources.push(Source::Sample {
                        path: folder.join(s.as_ref()),
                        declared: s.to_string(),
                        location: Location::at(self.path, self.text, item.span().start),
                    }),
                    other => fail(item.span(), type_error("samples", "a path string", other)),
                }
            };
            match v.get_ref() {
                DeValue::String(_) => one(v, fail),
                DeValue::Array(items) if items.is_empty() => fail(
                    v.span(),
                    "`samples` is empty: list at least one file or remove the key".to_string(),
                ),
                DeValue::Array(items) => {
                    for item in items.iter() {
                        one(item, fail);
                    }
                }
                other => fail(
                    v.span(),
                    type_error("samples", "a path or a list of paths", other),
                ),
            }
        }
        if let Some(v) = keys.get("counts_file") {
            match v.get_ref() {
                DeValue::String(s) if s.is_empty() => {
                    fail(v.span(), "empty counts_file path".to_string())
                }
                DeValue::String(s) => sources.push(Source::CountsFile {
                    path: self.path.parent().unwrap_or(Path::new("")).join(s.as_ref()),
                    declared: s.to_string(),
                    location: Location::at(self.path, self.text, v.span().start),
                }),
                other => fail(v.span(), type_error("counts_file", "a path string", other)),
            }
        }
        sources
    }

    /// An integer key, `default` when absent, checked by `accept`.
    fn number(
        &self,
        keys: &Merged<'_, '_>,
        key: &str,
        default: u32,
        fail: &mut impl FnMut(Range<usize>, String),
        accept: impl Fn(i128, &str) -> std::result::Result<u32, String>,
    ) -> Option<u32> {
        self.optional_number(keys, key, fail, accept)
            .map(|n| n.unwrap_or(default))
    }

    /// An integer key checked by `accept`: `Some(None)` when absent, `None` when wrong.
    fn optional_number(
        &self,
        keys: &Merged<'_, '_>,
        key: &str,
        fail: &mut impl FnMut(Range<usize>, String),
        accept: impl Fn(i128, &str) -> std::result::Result<u32, String>,
    ) -> Option<Option<u32>> {
        let Some(v) = keys.get(key) else {
            return Some(None);
        };
        let written = self.text.get(v.span()).unwrap_or_default().trim();
        let checked = integer(v.get_ref())
            .map_err(|found| type_error(key, "an integer", found))
            .and_then(|n| accept(n, written));
        match checked {
            Ok(n) => Some(Some(n)),
            Err(m) => {
                fail(v.span(), m);
                None
            }
        }
    }

    /// The value of a choice key, its first option when absent.
    fn choice<T: Choice>(
        &self,
        keys: &Merged<'_, '_>,
        fail: &mut impl FnMut(Range<usize>, String),
    ) -> Option<T> {
        let Some(v) = keys.get(T::KEY) else {
            return T::OPTIONS.first().map(|(_, c)| *c);
        };
        let expected = {
            let names: Vec<String> = T::OPTIONS.iter().map(|(n, _)| format!("\"{n}\"")).collect();
            match names.split_last() {
                Some((last, rest)) if !rest.is_empty() => format!("{} or {last}", rest.join(", ")),
                _ => names.join(""),
            }
        };
        match v.get_ref() {
            DeValue::String(s) => match T::OPTIONS.iter().find(|(n, _)| *n == s.as_ref()) {
                Some((_, c)) => Some(*c),
                None => {
                    fail(
                        v.span(),
                        format!("unknown {} \"{s}\": expected {expected}", T::KEY),
                    );
                    None
                }
            },
            other => {
                fail(
                    v.span(),
                    type_error(T::KEY, &format!("one of {expected}"), other),
                );
                None
            }
        }
    }

    fn counts(
        &self,
        kind: &dyn Kind,
        table: &DeTable<'_>,
    ) -> std::result::Result<Vec<(usize, u64)>, Vec<kind::Misplaced>> {
        // Sparse: an integers codec keys its counts by place, up to 2^32 of them.
        let mut counts = Vec::new();
        let mut named: std::collections::BTreeMap<usize, usize> = Default::default();
        let mut errors = Vec::new();
        for (key, value) in table.iter() {
            let k = key.get_ref().as_ref();
            let index = match kind.count_key(k) {
                Ok(i) => i,
                Err(m) => {
                    errors.push((key.span(), m));
                    continue;
                }
            };
            let v = match integer(value.get_ref()) {
                Ok(v) => v,
                Err(found) => {
                    errors.push((value.span(), type_error("counts", "integer counts", found)));
                    continue;
                }
            };
            let written = self.text.get(value.span()).unwrap_or_default().trim();
            if v < 0 {
                errors.push((
                    value.span(),
                    format!("count {written} for {} is negative", kind.describe(index)),
                ));
                continue;
            }
            let Ok(v) = u64::try_from(v) else {
                errors.push((
                    value.span(),
                    format!("count {written} for {} is too large", kind.describe(index)),
                ));
                continue;
            };
            if let Some(&first) = named.get(&index) {
                errors.push((
                    value.span(),
                    format!(
                        "{} is counted twice (first at line {})",
                        kind.describe(index),
                        Location::at(self.path, self.text, first).line
                    ),
                ));
                continue;
            }
            named.insert(index, value.span().start);
            counts.push((index, v));
        }
        if errors.is_empty() {
            Ok(counts)
        } else {
            Err(errors)
        }
    }
}

/// The smallest table size that holds `symbols` symbols (at least [`MIN_TABLE_BITS`]).
pub fn smallest_table_bits(symbols: usize) -> u32 {
    (usize::BITS - symbols.saturating_sub(1).leading_zeros()).max(MIN_TABLE_BITS)
}

/// The integer in `v`, or `v` itself when it is something else. An integer too large for
/// any key saturates, so that range checks report it as out of range.
fn integer<'v, 'i>(v: &'v DeValue<'i>) -> std::result::Result<i128, &'v DeValue<'i>> {
    match v {
        DeValue::Integer(i) => Ok(i128::from_str_radix(i.as_str(), i.radix()).unwrap_or(
            if i.as_str().starts_with('-') {
                i128::MIN
            } else {
                i128::MAX
            },
        )),
        other => Err(other),
    }
}

fn type_error(key: &str, expected: &str, found: &DeValue<'_>) -> String {
    format!("`{key}` must be {expected}, found {}", a_type(found))
}

/// "unknown key `knd`", with the closest known key when one is near.
fn unknown_key(key: &str, known: &[&str]) -> String {
    let near = known
        .iter()
        .map(|k| (edit_distance(key, k), *k))
        .filter(|&(d, k)| d <= 2.max(k.len() / 3) && d < k.len())
        .min();
    match near {
        Some((_, k)) => format!("unknown key `{key}`: did you mean `{k}`?"),
        None => format!("unknown key `{key}`: expected one of {}", known.join(", ")),
    }
}

/// Levenshtein distance (common practice), over bytes; keys are short.
fn edit_distance(a: &str, b: &str) -> usize {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    if a.len() > 64 {
        return a.len();
    }
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, &x) in a.iter().enumerate() {
        let mut diagonal = row[0];
        row[0] = i + 1;
        for (j, &y) in b.iter().enumerate() {
            let next = (diagonal + usize::from(x != y))
                .min(row[j] + 1)
                .min(row[j + 1] + 1);
            diagonal = row[j + 1];
            row[j + 1] = next;
        }
    }
    row[b.len()]
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
