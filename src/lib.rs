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
//! The pipeline, one module a stage: [`spec`] → [`model`] → [`quantize`] → [`tables`] →
//! [`verify`] → [`emit`] → [`report`].

#![forbid(unsafe_code)]

pub mod emit;
pub mod error;
pub mod model;
pub mod quantize;
pub mod report;
pub mod spec;
pub mod tables;
pub mod verify;

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

/// A codec carried through every stage.
pub struct Built {
    pub model: model::Model,
    pub tables: tables::Tables,
    pub fingerprint: u16,
    pub report: Report,
}

/// Runs one codec from its validated spec to its tables, verified, and its report.
pub fn build_codec(codec: &spec::CodecSpec) -> Result<Built> {
    let model = model::build(codec)?;
    let slots =
        quantize::quantize(&model.counts, codec.scale_bits).map_err(|e| e.in_codec(&codec.name))?;
    let probabilities = model.probabilities();
    let (tables, rate) = match codec.method {
        spec::Method::Tans => {
            let (tans, rate) = tables::build(&slots, &probabilities, codec.scale_bits)
                .map_err(|e| e.in_codec(&codec.name))?;
            (tables::Tables::Tans(tans), rate)
        }
        spec::Method::Rans => {
            let rans =
                tables::Rans::new(&slots, codec.scale_bits).map_err(|e| e.in_codec(&codec.name))?;
            // A 32-bit state codes within 10^-4 of the slots' own cost at scale_bits <= 12
            // and 10^-3 at 15 (tests/rans_precision.rs), so that cost is the rate.
            let rate = quantize::cross_entropy(&model.counts, &slots, codec.scale_bits);
            (tables::Tables::Rans(rans), rate)
        }
    };
    let fingerprint = verify::fingerprint(
        kind_tag(codec),
        &alphabet_bytes(codec),
        &tables,
        codec.lanes,
    );
    // Bare streams carry no fingerprint; the measured sizes below still match the framing.
    let verified = verify::verify(&tables, fingerprint, codec.framing, codec.lanes, &model)
        .map_err(|e| e.in_codec(&codec.name))?;
    let table_bytes = emit::table_bytes(codec, &tables);
    let report = report::build(codec, &model.counts, &tables, rate, verified, table_bytes);
    Ok(Built {
        model,
        tables,
        fingerprint,
        report,
    })
}

fn kind_tag(codec: &spec::CodecSpec) -> u8 {
    match codec.kind {
        spec::Kind::Bytes => 1,
        spec::Kind::Tokens => 2,
    }
}

fn alphabet_bytes(codec: &spec::CodecSpec) -> Vec<u8> {
    let mut out = Vec::new();
    for s in &codec.symbols {
        match s {
            spec::SymbolName::Byte(b) => out.push(*b),
            spec::SymbolName::Token(t) => {
                out.extend_from_slice(t.as_bytes());
                out.push(0);
            }
        }
    }
    out
}

fn run(spec: &spec::Spec, text: &str) -> Result<Rendered> {
    let mut built = Vec::with_capacity(spec.codecs.len());
    let mut inputs = Vec::new();
    let mut warnings = Vec::new();
    for codec in &spec.codecs {
        let b = build_codec(codec)?;
        for source in &codec.sources {
            if let spec::Source::Sample { path, .. } = source {
                inputs.push(path.clone());
            }
        }
        warnings.extend(advice(codec, &b));
        built.push(b);
    }
    let parts: Vec<emit::CodecParts<'_>> = spec
        .codecs
        .iter()
        .zip(&built)
        .map(|(codec, b)| emit::CodecParts {
            spec: codec,
            tables: &b.tables,
            fingerprint: b.fingerprint,
            report: &b.report,
        })
        .collect();
    // The spec (line endings normalised, so a CRLF checkout renders the same header) and
    // every sample, hashed in place rather than copied.
    let spec_text = text.replace("\r\n", "\n");
    let mut refs: Vec<&[u8]> = vec![spec_text.as_bytes()];
    for b in &built {
        refs.extend(b.model.sample_bytes.iter().map(Vec::as_slice));
    }
    let source = emit::file(&parts, verify::fnv1a(&refs))?;
    Ok(Rendered {
        source,
        reports: built.into_iter().map(|b| b.report).collect(),
        inputs,
        warnings,
    })
}

/// Build-log advice for one codec.
fn advice(codec: &spec::CodecSpec, built: &Built) -> Vec<String> {
    let mut out = Vec::new();
    let unseen: Vec<String> = codec
        .symbols
        .iter()
        .zip(&built.model.counts)
        .filter(|(_, &c)| c == 0)
        .map(|(s, _)| spec::show(s))
        .collect();
    if !unseen.is_empty() && built.model.total() > 0 {
        let list = if unseen.len() > 8 {
            format!("{} and {} more", unseen[..8].join(", "), unseen.len() - 8)
        } else {
            unseen.join(", ")
        };
        out.push(format!(
            "codec `{}`: {} symbol(s) never occur in the training data and keep one slot each: {list}",
            codec.name,
            unseen.len()
        ));
    }
    let excess = built.report.excess_percent().unwrap_or(0.0);
    if excess > report::EXCESS_WARNING_PERCENT {
        let p = built.model.probabilities();
        let better = (codec.scale_bits + 1..=spec::MAX_SCALE_BITS).find(|&bits| {
            quantize::quantize(&built.model.counts, bits)
                .and_then(|slots| tables::build(&slots, &p, bits))
                .is_ok_and(|(_, rate)| {
                    100.0 * (rate - built.report.entropy) / built.report.entropy
                        <= report::EXCESS_WARNING_PERCENT
                })
        });
        let hint = match better {
            Some(bits) => format!("scale_bits = {bits} brings it under {} %", report::EXCESS_WARNING_PERCENT),
            None => format!(
                "no table up to scale_bits = {} brings it under {} % (few symbols with skewed counts: consider merging rare ones)",
                spec::MAX_SCALE_BITS,
                report::EXCESS_WARNING_PERCENT
            ),
        };
        out.push(format!(
            "codec `{}`: the tables code {excess:.2} % above the entropy at scale_bits = {}; {hint}",
            codec.name, codec.scale_bits
        ));
    }
    out
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
