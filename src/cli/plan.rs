//! `broodcast plan [DIR] [--out DIR] [--set KEY=VALUE ...] [--without FACILITY_ID ...]
//! [--quiet]`: plan the week (or one what-if of it) and write every output.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::time::Duration;

use super::{CliResult, Failure, print_out, source_of};
use crate::allocate::Solver;
use crate::ledger::LedgerMarks;
use crate::output::{self, PlanView};
use crate::plan::{self, PlanOptions};
use crate::progress::Progress;
use crate::scenario;
use crate::sweep::{self, Setting};

/// Arguments of `plan`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Scenario folder (default: the built-in demo).
    dir: Option<PathBuf>,
    /// Output folder, replaced as a whole only once every file is ready, and only when it is
    /// new, empty or an unchanged earlier broodcast output.
    #[arg(long, default_value = "out")]
    out: PathBuf,
    /// When --out holds files broodcast did not write, move that folder aside to
    /// `<name>.replaced-<n>` instead of refusing (nothing is ever deleted).
    #[arg(long)]
    force: bool,
    /// Season ledger to read first: requests already served and blocks released within
    /// `policy.rerelease_interval_days` are not candidates.
    #[arg(long)]
    ledger: Option<PathBuf>,
    /// Withhold request addresses from the route sheets (dooryard stops and parcel labels
    /// then show the request id and coordinates), e.g. to share the sheets for review.
    #[arg(long)]
    redact: bool,
    /// LP solver of the allocation's relaxation: `clarabel` (default, pure Rust) or `highs`
    /// (only in a build with the `highs` feature: `cargo build --release --features highs`).
    #[arg(long, value_enum, default_value_t = SolverArg::Clarabel)]
    solver: SolverArg,
    /// What-if: override a scenario.json key for this plan, e.g.
    /// policy.dooryard_share_min=0.3 (any key `broodcast check` validates but `name` and
    /// `week_start`); repeat for more. The scenario is re-validated with the new values.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    set: Vec<String>,
    /// What-if: plan the week with a facility down (its supply and vehicles removed); repeat
    /// for more.
    #[arg(long = "without", value_name = "FACILITY_ID")]
    without: Vec<String>,
    /// No progress on standard error and no summary on standard output (errors are still
    /// reported). Progress is shown only when standard error is a terminal.
    #[arg(long, short)]
    quiet: bool,
}

/// A spinner on standard error naming the stage being run, when standard error is a terminal
/// and `--quiet` is not given; hidden otherwise. The tick only redraws the spinner: no result
/// depends on it.
fn progress(quiet: bool) -> indicatif::ProgressBar {
    if quiet || !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let bar = indicatif::ProgressBar::new_spinner();
    if let Ok(style) = indicatif::ProgressStyle::with_template("{spinner} {msg} ({elapsed})") {
        bar.set_style(style);
    }
    bar.enable_steady_tick(Duration::from_millis(120));
    bar
}

/// `--solver` values. Both are always accepted by the parser, so that a build without HiGHS
/// can say how to get it rather than list only `clarabel`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub(crate) enum SolverArg {
    /// Clarabel, pure Rust (default).
    Clarabel,
    /// HiGHS (needs a build with `--features highs`).
    Highs,
}

impl SolverArg {
    /// The solver, or an input error (exit 2) when this build has no HiGHS.
    pub(crate) fn solver(self) -> Result<Solver, Failure> {
        match self {
            SolverArg::Clarabel => Ok(Solver::Clarabel),
            #[cfg(feature = "highs")]
            SolverArg::Highs => Ok(Solver::Highs),
            #[cfg(not(feature = "highs"))]
            SolverArg::Highs => Err(Failure::Input(
                "--solver highs: this broodcast was built without HiGHS; rebuild with \
                 `cargo build --release --features highs` (needs cmake and a C++ compiler), \
                 or use the default `--solver clarabel`"
                    .to_string(),
            )),
        }
    }
}

pub(crate) fn run(args: Args) -> CliResult {
    // Checked before loading: a build without HiGHS refuses `--solver highs` at once.
    let solver = args.solver.solver()?;
    let mut inputs: Vec<&std::path::Path> = args.dir.iter().map(PathBuf::as_path).collect();
    inputs.extend(args.ledger.as_deref());
    // Checked before the (possibly long) plan: a refused --out costs nothing.
    let target = output::OutputFolder::check(&args.out, &inputs, args.force)?;
    // What-if arguments are checked before anything is loaded.
    let settings: Vec<Setting> = args
        .set
        .iter()
        .map(|s| Setting::parse(s))
        .collect::<Result<_, _>>()
        .map_err(super::sweep::input)?;
    let bar = progress(args.quiet);
    bar.set_message("loading the scenario");
    let source = source_of(&args.dir);
    // The scenario as given must be valid on its own, so that a problem found after the
    // overrides is theirs.
    let mut scenario = scenario::load(&source)?;
    if !settings.is_empty() {
        scenario =
            sweep::load_with_settings(&super::sweep::scenario_files(&source, &settings), &settings)
                .map_err(super::sweep::input)?;
    }
    if !args.without.is_empty() {
        scenario =
            sweep::without_facilities(&scenario, &args.without).map_err(super::sweep::input)?;
    }
    let mut opts = PlanOptions::default();
    opts.alloc.solver = solver;
    if !bar.is_hidden() {
        let shown = bar.clone();
        opts.progress = Progress::new(move |step| shown.set_message(step.to_string()));
    }
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
    bar.set_message("writing the outputs");
    if let Some(m) = &marks {
        m.mark(&mut p.allocation);
    }
    let view = PlanView::of(&p);
    let options = output::RenderOptions {
        redact: args.redact,
    };
    let files =
        output::render_all_with(&view, &options).map_err(|e| Failure::Internal(e.into()))?;
    let written = target.write(&files)?;
    bar.finish_and_clear();
    if args.quiet {
        return Ok(());
    }
    let a = &p.allocation;
    let shipped: u32 = a.shipments.iter().map(|s| s.vials).sum();
    let mut text = format!(
        "planned '{}': {} of {} vials shipped, {}, {}\n\
         objective {:.1}, whole-vial bound {:.1} (LP bound {:.1}), gap {:.2} %\n",
        output::week_title(&p.scenario.name, p.scenario.week_start),
        shipped,
        p.scenario.total_supply_vials(),
        plural(p.dispatch.routes.len(), "route", "routes"),
        plural(p.dispatch.parcels.len(), "parcel", "parcels"),
        a.objective,
        a.bound,
        a.lp_bound,
        a.gap * 100.0,
    );
    if !args.set.is_empty() || !args.without.is_empty() {
        let mut what = args
            .set
            .iter()
            .map(|s| format!("--set {s}"))
            .collect::<Vec<_>>();
        what.extend(args.without.iter().map(|f| format!("--without {f}")));
        text.push_str(&format!("what-if: {}\n", what.join(" ")));
    }
    if solver != Solver::default() {
        text.push_str(&format!("LP solver: {}\n", solver.name()));
    }
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
    text.push_str(&super::wrote_line(files.len(), &args.out, &written));
    print_out(&text)
}

/// `n` and the noun, singular for 1: "1 route", "3 routes".
pub(crate) fn plural(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}
