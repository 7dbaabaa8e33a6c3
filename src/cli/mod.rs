//! The command-line layer: the only place that prints. One file per subcommand.

mod check;
mod compare;
mod demo;
mod export_model;
mod forecast;
mod generate;
mod ledger;
mod plan;
mod sequence;
mod sweep;

use std::io::{self, Write};
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

use crate::scenario::{InputError, Source};

/// Plans a week of parasitoid releases: allocation, routes, manifest, route sheets, report.
#[derive(Debug, Parser)]
#[command(name = "broodcast", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Plan the week: allocation, routes and every output (no DIR: the built-in demo).
    Plan(plan::Args),
    /// Validate a scenario folder and summarise it (no DIR: the built-in demo).
    Check(check::Args),
    /// Write the built-in demo scenario as files to start from.
    Demo(demo::Args),
    /// Best visiting order for one vehicle from a travel-time matrix (depot = first id).
    Sequence(sequence::Args),
    /// Write the allocation LP relaxation as free MPS, exactly as solved.
    ExportModel(export_model::Args),
    /// Write a seeded synthetic scenario of a given size (for benchmarks and tests).
    Generate(generate::Args),
    /// Plan every supply multiplier (with facilities removed or scenario keys set) and chart
    /// value, marginal value and sites served against supply.
    Sweep(sweep::Args),
    /// Compare two plan output folders: sites gained and lost, vials by facility and day.
    Compare(compare::Args),
    /// The season ledger: init, commit a plan, confirm outcomes, report the season.
    Ledger(ledger::Args),
    /// Forecast vials packed per facility and day from the cage log and temperatures.
    Forecast(forecast::Args),
}

/// What went wrong, sorted by who must act.
#[derive(Debug)]
pub(crate) enum Failure {
    /// The input is wrong: the user must fix it (exit 2).
    Input(String),
    /// broodcast failed (exit 1).
    Internal(anyhow::Error),
    /// Writing the output failed part-way (full disk, …): exit 1, the message names the path
    /// and the fix.
    Write(String),
}

impl From<crate::output::TargetError> for Failure {
    fn from(e: crate::output::TargetError) -> Self {
        Failure::Input(e.to_string())
    }
}

impl From<crate::output::WriteError> for Failure {
    fn from(e: crate::output::WriteError) -> Self {
        if e.is_input() {
            Failure::Input(e.to_string())
        } else {
            Failure::Write(e.to_string())
        }
    }
}

/// The line a command prints after writing a folder, with where `--force` moved the old one.
pub(crate) fn wrote_line(
    files: usize,
    out: &std::path::Path,
    w: &crate::output::target::Written,
) -> String {
    let mut s = format!("wrote {files} files to {}\n", out.display());
    if let Some(a) = &w.moved_aside {
        s.push_str(&format!(
            "moved what was in {} before to {} (nothing was deleted)\n",
            out.display(),
            a.display()
        ));
    }
    s
}

impl From<InputError> for Failure {
    fn from(e: InputError) -> Self {
        Failure::Input(e.to_string())
    }
}

impl From<anyhow::Error> for Failure {
    fn from(e: anyhow::Error) -> Self {
        Failure::Internal(e)
    }
}

impl From<io::Error> for Failure {
    fn from(e: io::Error) -> Self {
        Failure::Internal(e.into())
    }
}

pub(crate) type CliResult = Result<(), Failure>;

/// Where a command reads its scenario: a folder, or the embedded demo when none is given.
pub(crate) fn source_of(dir: &Option<PathBuf>) -> Source {
    match dir {
        Some(d) => Source::Dir(d.clone()),
        None => Source::EmbeddedDemo,
    }
}

/// Writes `text` to stdout; a closed pipe (e.g. `| head`) is not an error.
pub(crate) fn print_out(text: &str) -> CliResult {
    let mut out = io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Err(e) if e.kind() != io::ErrorKind::BrokenPipe => Err(e.into()),
        _ => Ok(()),
    }
}

/// Entry point of the binary.
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Plan(a) => plan::run(a),
        Command::Check(a) => check::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Sequence(a) => sequence::run(a),
        Command::ExportModel(a) => export_model::run(a),
        Command::Generate(a) => generate::run(a),
        Command::Sweep(a) => sweep::run(a),
        Command::Compare(a) => compare::run(a),
        Command::Ledger(a) => ledger::run(a),
        Command::Forecast(a) => forecast::run(a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(Failure::Input(msg)) => {
            eprint!("error: {msg}");
            if !msg.ends_with('\n') {
                eprintln!();
            }
            ExitCode::from(2)
        }
        Err(Failure::Internal(e)) => {
            eprintln!("internal error: {e:#}");
            ExitCode::from(1)
        }
        Err(Failure::Write(msg)) => {
            eprintln!("error: {msg}");
            ExitCode::from(1)
        }
    }
}
