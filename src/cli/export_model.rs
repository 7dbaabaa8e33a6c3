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
    /// MPS file to write (an earlier export is overwritten; any other file is refused).
    #[arg(long)]
    out: PathBuf,
    /// When --out is a file broodcast did not write, move it aside to `<name>.replaced-<n>`
    /// instead of refusing (nothing is ever deleted).
    #[arg(long)]
    force: bool,
}

pub(crate) fn run(args: Args) -> CliResult {
    let inputs: Vec<&std::path::Path> = args.dir.iter().map(PathBuf::as_path).collect();
    let target = output::OutputFile::check(
        &args.out,
        &inputs,
        Some(output::target::MPS_SIGNATURE),
        args.force,
    )?;
    let scenario = scenario::load(&source_of(&args.dir))?;
    let opts = PlanOptions::default();
    let (_, priority, arcs) = plan::prepare(&scenario, &opts);
    let mps = allocate::export_mps(&scenario, &priority, &arcs, &opts.alloc)
        .map_err(|e| Failure::Internal(e.into()))?;
    let bytes = format!("{}\n{mps}", output::target::MPS_SIGNATURE);
    let aside = target.write(bytes.as_bytes())?;
    let mut text = format!("wrote the LP relaxation to {}\n", args.out.display());
    if let Some(a) = aside {
        text.push_str(&format!(
            "moved the file that was there to {} (nothing was deleted)\n",
            a.display()
        ));
    }
    print_out(&text)
}
