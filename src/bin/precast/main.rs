//! The precast command line (feature `cli`).

#![forbid(unsafe_code)]

use clap::{Parser, Subcommand};
use std::path::PathBuf;
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
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli.command {
        Command::Render {
            spec,
            output,
            verbose,
        } => {
            let rendered = match precast::render(&spec) {
                Ok(r) => r,
                Err(e) => {
                    eprintln!("{e}");
                    return ExitCode::from(1);
                }
            };
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
                    if let Err(e) = precast::write_if_changed(&path, rendered.source.as_bytes()) {
                        eprintln!("{e}");
                        return ExitCode::from(1);
                    }
                }
                None => print!("{}", rendered.source),
            }
            ExitCode::SUCCESS
        }
    }
}
