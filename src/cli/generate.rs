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
    /// Facilities (1–50); the week's total supply stays the same, shared among them.
    #[arg(long, default_value_t = 6, value_parser = clap::value_parser!(u16).range(1..=50))]
    facilities: u16,
    /// Multiplier on the week's supply (e.g. 0.3 for a short week, 6 for a glut).
    #[arg(long, default_value_t = 1.0, value_parser = supply_multiplier)]
    supply: f64,
    /// Folder to create (new or empty; an unchanged earlier output of this command is replaced).
    #[arg(long)]
    out: PathBuf,
}

pub(crate) fn run(args: Args) -> CliResult {
    let target = output::OutputFolder::check(&args.out, &[], false)?;
    let mut params = generate::GenParams::sized(args.sites, args.seed);
    params.supply_scale *= args.supply * params.facilities as f64 / f64::from(args.facilities);
    params.facilities = usize::from(args.facilities);
    let files = generate::generate(&params);
    target.write(&files)?;
    print_out(&format!(
        "wrote a {}-site scenario (seed {}) to {}\n",
        args.sites,
        args.seed,
        args.out.display()
    ))
}

/// Parses `--supply`: a finite multiplier in (0, 1000].
fn supply_multiplier(text: &str) -> Result<f64, String> {
    match text.parse::<f64>() {
        Ok(m) if m > 0.0 && m <= 1000.0 => Ok(m),
        _ => Err(format!(
            "expected a number above 0 and at most 1000, got {text:?}"
        )),
    }
}
