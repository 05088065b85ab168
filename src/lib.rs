//! # precast
//!
//! precast turns a TOML spec of fixed alphabets and their training data into Rust source: one
//! module per codec with `static` tANS tables and `encode`/`decode` functions specialised to
//! that alphabet. The output needs no runtime crate, no `std`, no allocation and no `unsafe`.
//!
//! ## From a build script
//!
//! ```toml
//! # Cargo.toml
//! [build-dependencies]
//! precast = "0.1"
//! ```
//!
//! ```no_run
//! // build.rs, inside `fn main`: reads codecs.toml next to Cargo.toml, writes
//! // $OUT_DIR/codecs.rs.
//! precast::build("codecs.toml");
//! ```
//!
//! ```ignore
//! // src/lib.rs
//! include!(concat!(env!("OUT_DIR"), "/codecs.rs"));
//! ```
//!
//! [`build`] prints `cargo:rerun-if-changed` for the spec and every sample, so the code is
//! regenerated exactly when one of them changes, and rewrites the output only when its bytes
//! change. [`Builder`] sets options; [`Builder::render`] returns the source without touching disk.
//!
//! ## Rendering a spec in memory
//!
//! ```
//! let spec = r#"
//! [codec.gauge_status]
//! kind = "tokens"
//! symbols = ["ok", "low_battery", "sensor_fault", "reboot"]
//! counts = { ok = 9200, low_battery = 510, sensor_fault = 31, reboot = 4 }
//! "#;
//! let out = precast::render_str(spec, "codecs.toml".as_ref()).unwrap();
//! assert!(out.source.contains("pub mod gauge_status"));
//! assert!(out.reports[0].exact_rate < out.reports[0].entropy * 1.01);
//! ```
//!
//! The pipeline, one module a stage: [`load`] (the only I/O) → [`spec`] → [`kind`] →
//! [`model`] → [`quantize`] → [`method`] → [`verify`] → [`emit`] → [`report`], carried by
//! one [`plan::CodecPlan`] per codec.

#![forbid(unsafe_code)]
// Errors are cold (at most one per build, carrying every mistake of a spec); their size
// does not matter.
#![allow(clippy::result_large_err)]

pub mod context;
pub mod counts;
pub mod emit;
pub mod error;
pub mod kind;
pub mod load;
pub mod method;
pub mod model;
pub mod plan;
pub mod quantize;
pub mod report;
pub mod sizing;
pub mod spec;
pub mod stamp;
pub mod verify;

/// The methods' table builders under one stable path, for tests and tools.
pub mod tables {
    pub use crate::method::rans::{
        divide, rans_bound, rans_code, rans_uncode, reciprocal, Rans, RANS_LOW,
    };
    pub use crate::method::rate::exact_rate;
    pub use crate::method::tans::{
        build, from_spread, spread, stride_step, DecodeEntry, SpreadRule, Tans,
    };
    pub use crate::method::Tables;
}

pub use error::{Error, ErrorKind, Location, Result};
pub use report::Report;

use std::path::{Path, PathBuf};

/// The result of rendering a spec.
#[derive(Debug, Clone)]
pub struct Rendered {
    /// The generated Rust source.
    pub source: String,
    /// One report per codec, in spec order.
    pub reports: Vec<Report>,
    /// Files the output depends on: the spec (when read from disk) and every sample.
    pub inputs: Vec<PathBuf>,
    /// Advice for the build log (large excess, symbols never seen in training).
    pub warnings: Vec<String>,
}

/// Renders spec text; `path` names it in messages and sample paths are relative to its folder.
pub fn render_str(text: &str, path: &Path) -> Result<Rendered> {
    let spec = spec::parse(text, path)?;
    run(&spec, text)
}

/// Reads and renders the spec at `path` without writing anything.
pub fn render(path: impl AsRef<Path>) -> Result<Rendered> {
    let path = path.as_ref();
    let (spec, text) = spec::load(path)?;
    let mut out = run(&spec, &text)?;
    out.inputs.insert(0, path.to_path_buf());
    Ok(out)
}

/// A codec with one table set, as tests and tools inspect it.
pub struct Built {
    /// The alphabet as planned (an integers codec's with its bins).
    pub kind: std::sync::Arc<dyn kind::Kind>,
    pub model: model::Model,
    /// The first (with one set, the only) table set.
    pub tables: method::Tables,
    /// Every table set, and for a context codec the set of each context symbol (empty with
    /// one set).
    pub sets: Vec<method::Tables>,
    pub set_of: Vec<u8>,
    pub fingerprint: u16,
    pub report: Report,
}

/// Runs one codec from its validated spec to its tables, verified, and its report (reading
/// its sample files).
pub fn build_codec(codec: &spec::CodecSpec) -> Result<Built> {
    let samples = load::samples(codec, &mut verify::Fnv::default())?;
    let plan = plan::plan(codec, samples)?;
    let sets: Vec<method::Tables> = plan.sets.iter().map(|s| s.tables.clone()).collect();
    let Some(first) = sets.first().cloned() else {
        return Err(Error::internal("a plan without a table set"));
    };
    Ok(Built {
        kind: plan.spec.kind.clone(),
        model: plan.model,
        tables: first,
        sets,
        set_of: plan.set_of,
        fingerprint: plan.fingerprint,
        report: plan.report,
    })
}

fn run(spec: &spec::Spec, text: &str) -> Result<Rendered> {
    let planned = plan_parsed(spec, text)?;
    let source = emit::file(&planned.plans, planned.spec_hash)?;
    Ok(Rendered {
        source,
        reports: planned.plans.into_iter().map(|p| p.report).collect(),
        inputs: planned.inputs,
        warnings: planned.warnings,
    })
}

/// Every codec of a spec planned, before emission: what the tools (`report`, `check`,
/// `inspect`) read; `render` emits exactly these plans.
#[derive(Debug, Clone)]
pub struct Planned {
    pub plans: Vec<plan::CodecPlan>,
    /// The hash in the generated file's header (spec text and every training file).
    pub spec_hash: u64,
    /// Training files (samples and counts files), in spec order.
    pub inputs: Vec<PathBuf>,
    /// Advice for the build log.
    pub warnings: Vec<String>,
}

/// Reads and plans every codec of the spec at `path`.
pub fn plan_spec(path: impl AsRef<Path>) -> Result<Planned> {
    let (spec, text) = spec::load(path.as_ref())?;
    plan_parsed(&spec, &text)
}

fn plan_parsed(spec: &spec::Spec, text: &str) -> Result<Planned> {
    let mut plans = Vec::with_capacity(spec.codecs.len());
    let mut inputs = Vec::new();
    let mut warnings = Vec::new();
    // The header's hash covers the spec (line endings normalised, so that a CRLF checkout
    // renders the same) and every sample, hashed as they are read.
    let mut hash = verify::Fnv::default();
    hash.write(text.replace("\r\n", "\n").as_bytes());
    hash.end_part();
    for codec in &spec.codecs {
        let samples = load::samples(codec, &mut hash)?;
        let plan = plan::plan(codec, samples)?;
        for source in &codec.sources {
            if let spec::Source::Sample { path, .. } | spec::Source::CountsFile { path, .. } =
                source
            {
                inputs.push(path.clone());
            }
        }
        warnings.extend(advice(&plan));
        plans.push(plan);
    }
    Ok(Planned {
        plans,
        spec_hash: hash.finish(),
        inputs,
        warnings,
    })
}

/// Build-log advice for one codec.
fn advice(plan: &plan::CodecPlan) -> Vec<String> {
    let mut out = Vec::new();
    let name = &plan.spec.name;
    let kind = plan.spec.kind.as_ref();
    let unseen: Vec<String> = (0..kind.alphabet_len())
        .zip(&plan.model.counts)
        .filter(|(_, &c)| c == 0)
        .map(|(s, _)| kind.describe(s))
        .collect();
    // An integers codec's bins tile its range: bins without training values are expected.
    if !unseen.is_empty() && plan.model.total() > 0 && kind.integers().is_none() {
        let list = if unseen.len() > 8 {
            format!("{} and {} more", unseen[..8].join(", "), unseen.len() - 8)
        } else {
            unseen.join(", ")
        };
        out.push(format!(
            "codec `{name}`: {} symbol(s) never occur in the training data and keep one slot each: {list}",
            unseen.len()
        ));
    }
    out.extend(flash_advice(plan));
    out
}

/// Build-log advice on excess and flash: what larger tables would buy, and what they cost.
fn flash_advice(plan: &plan::CodecPlan) -> Option<String> {
    let name = &plan.spec.name;
    let report = &plan.report;
    let limit = report::EXCESS_WARNING_PERCENT;
    let bits = plan.spec.table_bits;
    let bytes = report.table_bytes;
    let sizing = report.sizing.as_ref();
    let excess = report.excess_percent().unwrap_or(0.0);
    if excess <= limit {
        // Tables chosen without a budget may be larger than a small device wants.
        return match (sizing, report.flash_budget) {
            (Some(_), None) if bytes > report::LARGE_TABLES_BYTES => Some(format!(
                "codec `{name}`: table_bits = {bits} is the smallest size within {limit} % of the entropy and its tables take {bytes} bytes; a flash_budget trades excess for flash"
            )),
            _ => None,
        };
    }
    let skewed = "few symbols with skewed counts: consider merging rare ones";
    let chosen = sizing.and_then(|s| Some((s.rule, s.choice()?, s.hint)));
    Some(match chosen {
        Some((sizing::Rule::Budget(budget), c, Some(hint))) => {
            let held = format!(
                "codec `{name}`: flash_budget = {budget} holds the tables to {excess:.2} % above the entropy ({}, {bytes} bytes)",
                c.candidate.describe()
            );
            match hint {
                sizing::BudgetHint::Raise { budget, choice } => format!(
                    "{held}; flash_budget = {budget} brings it under {limit} % ({}, {:.2} %)",
                    choice.candidate.describe(),
                    report::excess_percent(choice.rate, report.entropy).unwrap_or(0.0)
                ),
                // The budget did not hold it back: no size gets there.
                sizing::BudgetHint::Unreachable { best }
                    if c.rate <= best.rate + best.rate * sizing::TIE =>
                {
                    format!(
                        "codec `{name}`: no tables up to table_bits = {} come within {limit} % of the entropy; the chosen ones ({}) code {excess:.2} % above it with {bytes} bytes ({skewed})",
                        spec::MAX_TABLE_BITS,
                        c.candidate.describe()
                    )
                }
                sizing::BudgetHint::Unreachable { best } => format!(
                    "{held}; no budget brings it under {limit} %: the lowest rate of any size is {:.2} % above ({}, {} bytes) ({skewed})",
                    report::excess_percent(best.rate, report.entropy).unwrap_or(0.0),
                    best.candidate.describe(),
                    best.candidate.bytes
                ),
            }
        }
        Some((sizing::Rule::LowestRate, c, _)) => format!(
            "codec `{name}`: no tables up to table_bits = {} come within {limit} % of the entropy; the chosen ones ({}) code {excess:.2} % above it with {bytes} bytes ({skewed})",
            spec::MAX_TABLE_BITS,
            c.candidate.describe()
        ),
        _ => {
            let hint = match plan::table_bits_for_excess(plan, limit) {
                Some((k, k_bytes)) => {
                    let over = match report.flash_budget {
                        Some(budget) if k_bytes > budget => {
                            format!(", over flash_budget = {budget}")
                        }
                        _ => String::new(),
                    };
                    format!("table_bits = {k} brings it under {limit} % with {k_bytes} bytes of tables{over}")
                }
                None => format!(
                    "no table up to table_bits = {} brings it under {limit} % ({skewed})",
                    spec::MAX_TABLE_BITS
                ),
            };
            format!(
                "codec `{name}`: the tables code {excess:.2} % above the entropy at table_bits = {bits} ({bytes} bytes of tables); {hint}"
            )
        }
    })
}

/// Options for generating code from a build script.
#[derive(Debug, Clone)]
pub struct Builder {
    spec: PathBuf,
    out_dir: Option<PathBuf>,
    file_name: Option<String>,
    cargo_output: bool,
}

impl Builder {
    /// A builder for the spec at `spec`; a relative path is taken from `CARGO_MANIFEST_DIR`
    /// when that is set (as it is in build scripts).
    pub fn new(spec: impl AsRef<Path>) -> Builder {
        Builder {
            spec: spec.as_ref().to_path_buf(),
            out_dir: None,
            file_name: None,
            cargo_output: true,
        }
    }

    /// Where to write; defaults to `OUT_DIR`.
    pub fn out_dir(&mut self, dir: impl AsRef<Path>) -> &mut Builder {
        self.out_dir = Some(dir.as_ref().to_path_buf());
        self
    }

    /// Output file name; defaults to the spec's file stem with `.rs` (`codecs.toml` →
    /// `codecs.rs`).
    pub fn file_name(&mut self, name: impl Into<String>) -> &mut Builder {
        self.file_name = Some(name.into());
        self
    }

    /// Whether to print `cargo:` lines (rerun-if-changed, warnings); on by default.
    pub fn cargo_output(&mut self, on: bool) -> &mut Builder {
        self.cargo_output = on;
        self
    }

    fn spec_path(&self) -> PathBuf {
        match std::env::var_os("CARGO_MANIFEST_DIR") {
            Some(dir) if self.spec.is_relative() => Path::new(&dir).join(&self.spec),
            _ => self.spec.clone(),
        }
    }

    /// Renders the spec and returns the source; writes nothing, prints nothing.
    pub fn render(&self) -> Result<Rendered> {
        render(self.spec_path())
    }

    /// Renders the spec and writes the file (only if its bytes change); returns its path.
    pub fn write(&self) -> Result<PathBuf> {
        let spec_path = self.spec_path();
        if self.cargo_output {
            // Before rendering, so that a failing spec is still watched.
            println!("cargo:rerun-if-changed={}", spec_path.display());
        }
        let rendered = render(&spec_path)?;
        if self.cargo_output {
            for input in rendered.inputs.iter().skip(1) {
                println!("cargo:rerun-if-changed={}", input.display());
            }
            for w in &rendered.warnings {
                println!("cargo:warning={w}");
            }
        }
        let dir = match &self.out_dir {
            Some(d) => d.clone(),
            None => std::env::var_os("OUT_DIR")
                .map(PathBuf::from)
                .ok_or_else(|| {
                    Error::input(
                        None,
                        "OUT_DIR is not set: call this from a build script or set Builder::out_dir",
                    )
                })?,
        };
        let name = match &self.file_name {
            Some(n) => n.clone(),
            None => format!(
                "{}.rs",
                self.spec
                    .file_stem()
                    .map_or("codecs".into(), |s| s.to_string_lossy())
            ),
        };
        let path = dir.join(name);
        write_if_changed(&path, rendered.source.as_bytes())?;
        Ok(path)
    }
}

/// Writes `bytes` to `path` unless the file already holds exactly them.
pub fn write_if_changed(path: &Path, bytes: &[u8]) -> Result<()> {
    if std::fs::read(path).is_ok_and(|old| old == bytes) {
        return Ok(());
    }
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, &e))?;
    }
    std::fs::write(path, bytes).map_err(|e| Error::io(path, &e))
}

/// The one-line build-script call: renders `spec` (relative to the package) into
/// `$OUT_DIR/<stem>.rs`. On error it prints the message and exits the build script with
/// status 1, which fails the build with that message.
pub fn build(spec: impl AsRef<Path>) {
    if let Err(e) = Builder::new(spec).write() {
        eprintln!("error: {e}");
        std::process::exit(1);
    }
}
