//! `broodcast export-model [DIR] --out FILE.mps`: the LP relaxation as free MPS.

use std::path::PathBuf;

use super::{CliResult, Failure, print_out, source_of};
use crate::allocate;
use crate::output;
use crate::plan::{self, PlanOptions};
use crate::scenario;

/// Arguments of `export-model`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Scenario folder (default: the built-in demo).
    dir: Option<PathBuf>,
    /// MPS file to write.
    #[arg(long)]
    out: PathBuf,
}

pub(crate) fn run(args: Args) -> CliResult {
    let scenario = scenario::load(&source_of(&args.dir))?;
    let opts = PlanOptions::default();
    let (_, priority, arcs) = plan::prepare(&scenario, &opts);
    let mps = allocate::export_mps(&scenario, &priority, &arcs, &opts.alloc)
        .map_err(|e| Failure::Internal(e.into()))?;
    output::write_file_atomically(&args.out, mps.as_bytes())?;
    print_out(&format!(
        "wrote the LP relaxation to {}\n",
        args.out.display()
    ))
}
