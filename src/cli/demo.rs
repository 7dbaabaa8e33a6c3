//! `broodcast demo --out DIR`: write the built-in demo scenario as files.

use std::path::PathBuf;

use super::{CliResult, Failure, print_out};
use crate::{demo, output};

/// Arguments of `demo`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Folder to create (must not exist yet, so nothing of yours is overwritten).
    #[arg(long)]
    out: PathBuf,
}

pub(crate) fn run(args: Args) -> CliResult {
    if args.out.exists() {
        return Err(Failure::Input(format!(
            "{}: already exists; choose a new folder for the demo scenario",
            args.out.display()
        )));
    }
    let files: Vec<(String, Vec<u8>)> = demo::FILES
        .iter()
        .map(|(name, bytes)| ((*name).to_string(), bytes.to_vec()))
        .collect();
    output::write_dir_atomically(&args.out, &files)?;
    print_out(&format!(
        "wrote the demo scenario ({} files) to {}\n",
        files.len(),
        args.out.display()
    ))
}
