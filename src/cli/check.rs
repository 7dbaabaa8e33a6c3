//! `broodcast check [DIR] [--json]`: validate and summarise a scenario.

use std::path::PathBuf;

use super::{CliResult, print_out, source_of};
use crate::{check, scenario};

/// Arguments of `check`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Scenario folder (default: the built-in demo).
    dir: Option<PathBuf>,
    /// Print the summary as JSON.
    #[arg(long)]
    json: bool,
}

pub(crate) fn run(args: Args) -> CliResult {
    let scenario = scenario::load(&source_of(&args.dir))?;
    let summary = check::summarize(&scenario);
    if args.json {
        let mut text = serde_json::to_string_pretty(&summary).map_err(anyhow::Error::from)?;
        text.push('\n');
        print_out(&text)
    } else {
        print_out(&summary.to_text())
    }
}
