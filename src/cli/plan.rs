//! `broodcast plan [DIR] [--out DIR]`: plan the week and write every output.

use std::path::PathBuf;

use super::{CliResult, Failure, print_out, source_of};
use crate::ledger::LedgerMarks;
use crate::output::{self, PlanView};
use crate::plan::{self, PlanOptions};
use crate::scenario;

/// Arguments of `plan`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Scenario folder (default: the built-in demo).
    dir: Option<PathBuf>,
    /// Output folder, replaced as a whole only once every file is ready.
    #[arg(long, default_value = "out")]
    out: PathBuf,
    /// Season ledger to read first: requests already served and blocks released within
    /// `policy.rerelease_interval_days` are not candidates.
    #[arg(long)]
    ledger: Option<PathBuf>,
    /// Withhold request addresses from the route sheets (dooryard stops and parcel labels
    /// then show the request id and coordinates), e.g. to share the sheets for review.
    #[arg(long)]
    redact: bool,
}

pub(crate) fn run(args: Args) -> CliResult {
    let scenario = scenario::load(&source_of(&args.dir))?;
    let mut opts = PlanOptions::default();
    // The ledger is read here, once; planning gets typed marks, never the file.
    let marks = match &args.ledger {
        Some(db) => {
            let history = super::ledger::open(db)?.history(scenario.week_start)?;
            let marks = LedgerMarks::new(&scenario, &history);
            marks.exclude_arcs(&scenario, &mut opts.alloc);
            Some(marks)
        }
        None => None,
    };
    let mut p = plan::plan(scenario, &opts).map_err(|e| Failure::Internal(e.into()))?;
    if let Some(m) = &marks {
        m.mark(&mut p.allocation);
    }
    let view = PlanView {
        scenario: &p.scenario,
        priority: &p.priority,
        allocation: &p.allocation,
        dispatch: &p.dispatch,
        moved: &p.moved,
    };
    let options = output::RenderOptions {
        redact: args.redact,
    };
    let files =
        output::render_all_with(&view, &options).map_err(|e| Failure::Internal(e.into()))?;
    output::write_dir_atomically(&args.out, &files)?;
    let a = &p.allocation;
    let shipped: u32 = a.shipments.iter().map(|s| s.vials).sum();
    let mut text = format!(
        "planned '{}' (week of {}): {} of {} vials shipped, {} routes, {} parcels\n\
         objective {:.1}, whole-vial bound {:.1} (LP bound {:.1}), gap {:.2} %\n",
        p.scenario.name,
        p.scenario.week_start,
        shipped,
        p.scenario.total_supply_vials(),
        p.dispatch.routes.len(),
        p.dispatch.parcels.len(),
        a.objective,
        a.bound,
        a.lp_bound,
        a.gap * 100.0,
    );
    if let Some(m) = &marks {
        let (served, recent) = m.counts();
        text.push_str(&format!(
            "ledger: {served} requests already served, {recent} blocks released recently\n"
        ));
    }
    for w in &p.scenario.warnings {
        text.push_str(&format!("warning: {w}\n"));
    }
    for n in &a.notes {
        text.push_str(&format!("note: {n}\n"));
    }
    text.push_str(&format!(
        "wrote {} files to {}\n",
        files.len(),
        args.out.display()
    ));
    print_out(&text)
}
