//! `broodcast demo --out DIR`: write the built-in demo scenario as files.

use std::path::PathBuf;

use super::{CliResult, print_out};
use crate::{demo, output};

/// Arguments of `demo`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Folder to create (new or empty; an unchanged earlier output of this command is replaced).
    #[arg(long)]
    out: PathBuf,
}

pub(crate) fn run(args: Args) -> CliResult {
    let target = output::OutputFolder::check(&args.out, &[], false)?;
    let files: Vec<(String, Vec<u8>)> = demo::FILES
        .iter()
        .map(|(name, bytes)| ((*name).to_string(), bytes.to_vec()))
        .collect();
    target.write(&files)?;
    print_out(&format!(
        "wrote the demo scenario ({} files) to {}\n",
        files.len(),
        args.out.display()
    ))
}
