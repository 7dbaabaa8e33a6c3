//! `broodcast generate --sites N --seed S --out DIR`: a seeded synthetic scenario.

use std::path::PathBuf;

use super::{CliResult, print_out};
use crate::{generate, output};

/// Arguments of `generate`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Candidate sites (blocks and requests together).
    #[arg(long)]
    sites: usize,
    /// Seed of the random stream (same seed, same files).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Folder to create (new or empty; an unchanged earlier output of this command is replaced).
    #[arg(long)]
    out: PathBuf,
}

pub(crate) fn run(args: Args) -> CliResult {
    let target = output::OutputFolder::check(&args.out, &[], false)?;
    let params = generate::GenParams::sized(args.sites, args.seed);
    let files = generate::generate(&params);
    target.write(&files)?;
    print_out(&format!(
        "wrote a {}-site scenario (seed {}) to {}\n",
        args.sites,
        args.seed,
        args.out.display()
    ))
}
