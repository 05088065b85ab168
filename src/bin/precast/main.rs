//! The precast command line (feature `cli`). A front end: it finds files, calls the library
//! and prints; every figure comes from the library's plans and reports.

#![forbid(unsafe_code)]

mod inspect;
mod svg;

use clap::{Parser, Subcommand};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "precast",
    version,
    about = "Build-time generator of ANS entropy codecs"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Print (or write) the Rust source generated from a spec.
    Render {
        /// The spec file.
        spec: PathBuf,
        /// Write the source here instead of standard output (only if it changed).
        #[arg(short, long)]
        output: Option<PathBuf>,
        /// Print each codec's report and any advice on standard error.
        #[arg(short, long)]
        verbose: bool,
    },
    /// Print a Markdown report of every codec of a spec.
    Report {
        /// The spec file.
        spec: PathBuf,
        /// Also write two SVG plots per codec into this folder.
        #[arg(long, value_name = "DIR")]
        svg: Option<PathBuf>,
    },
    /// Exit 0 if FILE holds exactly what `render` writes for the spec; else say why, exit 1.
    Check {
        /// The spec file.
        spec: PathBuf,
        /// The generated file under review.
        #[arg(long, value_name = "FILE")]
        against: PathBuf,
    },
    /// Read a captured stream: header, fingerprint check, count and symbols.
    Inspect {
        /// The spec file.
        #[arg(long)]
        spec: PathBuf,
        /// The codec that should have written the stream.
        #[arg(long)]
        codec: String,
        /// FILE holds hex text (whitespace ignored) rather than raw bytes.
        #[arg(long)]
        hex: bool,
        /// Symbols in a bare stream (bare streams do not carry their count).
        #[arg(long, value_name = "N")]
        count: Option<usize>,
        /// The stream.
        file: PathBuf,
    },
    /// Count symbols of large corpora into a counts file (`counts_file` in a spec).
    Count {
        /// Corpus files (with --merge: counts files).
        #[arg(required = true)]
        files: Vec<PathBuf>,
        /// `bytes` or `tokens`.
        #[arg(long)]
        kind: String,
        /// The counts file to write.
        #[arg(short, long)]
        output: PathBuf,
        /// Add counts files together instead of counting a corpus.
        #[arg(long)]
        merge: bool,
        /// Worker threads (default: every core).
        #[arg(long)]
        threads: Option<usize>,
    },
}

fn main() -> ExitCode {
    let result = match Cli::parse().command {
        Command::Render {
            spec,
            output,
            verbose,
        } => render(&spec, output.as_deref(), verbose),
        Command::Report { spec, svg } => report(&spec, svg.as_deref()),
        Command::Check { spec, against } => check(&spec, &against),
        Command::Inspect {
            spec,
            codec,
            hex,
            count,
            file,
        } => inspect::run(&spec, &codec, hex, count, &file),
        Command::Count {
            files,
            kind,
            output,
            merge,
            threads,
        } => count(&files, &kind, &output, merge, threads),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(message) => {
            eprintln!("{message}");
            ExitCode::from(1)
        }
    }
}

fn render(spec: &Path, output: Option<&Path>, verbose: bool) -> Result<(), String> {
    let rendered = precast::render(spec).map_err(|e| e.to_string())?;
    for w in &rendered.warnings {
        eprintln!("warning: {w}");
    }
    if verbose {
        for r in &rendered.reports {
            eprintln!("{}", r.summary());
        }
    }
    match output {
        Some(path) => {
            precast::write_if_changed(path, rendered.source.as_bytes()).map_err(|e| e.to_string())
        }
        None => {
            print!("{}", rendered.source);
            Ok(())
        }
    }
}

fn report(spec: &Path, svg_dir: Option<&Path>) -> Result<(), String> {
    let planned = precast::plan_spec(spec).map_err(|e| e.to_string())?;
    let mut out = format!(
        "# precast report: `{}`\n\nGenerator {}, spec hash `{:016x}`, stream format {}.\n",
        spec.display(),
        env!("CARGO_PKG_VERSION"),
        planned.spec_hash,
        precast::verify::FORMAT_VERSION
    );
    for w in &planned.warnings {
        out.push_str(&format!("\n> Advice: {w}\n"));
    }
    for plan in &planned.plans {
        out.push('\n');
        out.push_str(&precast::report::markdown(plan));
    }
    if let Some(dir) = svg_dir {
        std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        for plan in &planned.plans {
            let written = svg::plots(plan, dir)?;
            out.push_str(&format!("\nPlots of `{}`:", plan.spec.name));
            for path in written {
                out.push_str(&format!(" `{}`", path.display()));
            }
            out.push('\n');
        }
    }
    print!("{out}");
    Ok(())
}

fn check(spec: &Path, against: &Path) -> Result<(), String> {
    let rendered = precast::render(spec).map_err(|e| e.to_string())?;
    let old = std::fs::read(against).map_err(|e| format!("{}: {e}", against.display()))?;
    let old = String::from_utf8_lossy(&old);
    let differences = precast::stamp::differences(&old, &rendered.source);
    if differences.is_empty() {
        println!(
            "{} is what `precast render {}` writes",
            against.display(),
            spec.display()
        );
        return Ok(());
    }
    let mut message = format!(
        "{} is stale: `precast render {}` writes otherwise:",
        against.display(),
        spec.display()
    );
    for d in differences {
        message.push_str(&format!("\n  - {d}"));
    }
    Err(message)
}

fn count(
    files: &[PathBuf],
    kind: &str,
    output: &Path,
    merge: bool,
    threads: Option<usize>,
) -> Result<(), String> {
    use precast::counts::{CountKind, Tally};
    let kind = CountKind::parse(kind)
        .ok_or_else(|| format!("--kind {kind}: `count` knows \"bytes\" and \"tokens\""))?;
    let start = std::time::Instant::now();
    let tally = if merge {
        let mut total = Tally::new(kind);
        for f in files {
            let t = precast::load::read_counts(f).map_err(|e| e.to_string())?;
            total
                .merge(&t)
                .map_err(|m| format!("{}: {m}", f.display()))?;
        }
        total
    } else {
        let threads = threads
            .or_else(|| std::thread::available_parallelism().ok().map(|n| n.get()))
            .unwrap_or(1);
        precast::load::count_files(files, kind, threads).map_err(|e| e.to_string())?
    };
    std::fs::write(output, tally.to_text()).map_err(|e| format!("{}: {e}", output.display()))?;
    eprintln!(
        "{}: {} symbols, {} distinct, from {} file(s) in {:.2} s",
        output.display(),
        tally.total(),
        tally.entries().len(),
        files.len(),
        start.elapsed().as_secs_f64()
    );
    Ok(())
}
