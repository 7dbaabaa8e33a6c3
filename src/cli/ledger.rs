//! `broodcast ledger init|commit|confirm|report`: the season ledger (`docs/season.md`).

use std::path::{Path, PathBuf};

use super::{CliResult, Failure, print_out};
use crate::ledger::{self, CommitOutcome, Ledger, LedgerError};
use crate::output;

/// Arguments of `ledger`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    #[command(subcommand)]
    command: Sub,
}

#[derive(Debug, clap::Subcommand)]
enum Sub {
    /// Create a season ledger (SQLite file), or bring an existing one to the current schema.
    Init {
        /// Ledger file.
        db: PathBuf,
    },
    /// Record a plan folder's manifest as the week's scheduled shipments (idempotent).
    Commit {
        /// Ledger file.
        db: PathBuf,
        /// Plan folder written by `broodcast plan --out` (read, never written).
        plan: PathBuf,
        /// Replace a different plan already committed for the same week.
        #[arg(long)]
        replace: bool,
    },
    /// Import outcomes: shipment_id,status,released_at,note (status released | not_released |
    /// dead_on_arrival). The whole file or nothing.
    Confirm {
        /// Ledger file.
        db: PathBuf,
        /// Confirmations CSV.
        confirmations: PathBuf,
    },
    /// Season totals as CSV files and a printable report.html.
    Report {
        /// Ledger file.
        db: PathBuf,
        /// Only weeks starting in this calendar year.
        #[arg(long)]
        season: Option<i32>,
        /// Output folder, replaced as a whole once every file is ready, and only when it is
        /// new, empty or an unchanged earlier broodcast output.
        #[arg(long, default_value = "season-report")]
        out: PathBuf,
        /// When --out holds files broodcast did not write, move that folder aside to
        /// `<name>.replaced-<n>` instead of refusing (nothing is ever deleted).
        #[arg(long)]
        force: bool,
    },
}

impl From<LedgerError> for Failure {
    fn from(e: LedgerError) -> Self {
        if e.is_input() {
            Failure::Input(e.to_string())
        } else {
            Failure::Internal(e.into())
        }
    }
}

/// Opens the ledger for `plan --ledger`.
pub(crate) fn open(db: &Path) -> Result<Ledger, Failure> {
    Ok(Ledger::open(db)?)
}

pub(crate) fn run(args: Args) -> CliResult {
    match args.command {
        Sub::Init { db } => {
            let (l, o) = Ledger::init(&db)?;
            let text = if o.from_version == o.to_version {
                format!(
                    "ledger {} is at schema version {}; nothing to do\n",
                    l.path(),
                    o.to_version
                )
            } else {
                format!(
                    "ledger {} ready (schema version {} → {})\n",
                    l.path(),
                    o.from_version,
                    o.to_version
                )
            };
            print_out(&text)
        }
        Sub::Commit { db, plan, replace } => {
            let mut l = Ledger::open(&db)?;
            let plan = ledger::read_plan_folder(&plan)?;
            let text = match l.commit(&plan, replace)? {
                CommitOutcome::Recorded { shipments } => format!(
                    "committed week of {}: {shipments} shipments scheduled\n",
                    plan.week_start
                ),
                CommitOutcome::Unchanged { shipments } => format!(
                    "week of {} already has this plan ({shipments} shipments); nothing changed\n",
                    plan.week_start
                ),
                CommitOutcome::Replaced {
                    old,
                    new,
                    kept_outcomes,
                } => format!(
                    "replaced the plan for the week of {}: {old} → {new} shipments, {kept_outcomes} outcomes kept\n",
                    plan.week_start
                ),
            };
            print_out(&text)
        }
        Sub::Confirm { db, confirmations } => {
            let mut l = Ledger::open(&db)?;
            let rows = ledger::read_confirmations(&confirmations)?;
            let name = confirmations.file_name().map_or_else(
                || confirmations.display().to_string(),
                |n| n.to_string_lossy().into_owned(),
            );
            let o = l.confirm(&name, &rows)?;
            let mut text = format!(
                "{} confirmations read, {} shipments changed\n",
                o.lines, o.changed
            );
            if !o.requests_back_in_queue.is_empty() {
                text.push_str(&format!(
                    "{} request(s) back in the queue: {}\n",
                    o.requests_back_in_queue.len(),
                    o.requests_back_in_queue.join(", ")
                ));
            }
            print_out(&text)
        }
        Sub::Report {
            db,
            season,
            out,
            force,
        } => {
            let target = output::OutputFolder::check(&out, &[db.as_path()], force)?;
            let l = Ledger::open(&db)?;
            let data = l.season(season)?;
            let files = ledger::render_report(&data);
            let written = target.write(&files)?;
            print_out(&format!(
                "{}, {}; {}",
                super::plan::plural(data.weeks.len(), "week", "weeks"),
                super::plan::plural(data.shipments.len(), "shipment", "shipments"),
                super::wrote_line(files.len(), &out, &written)
            ))
        }
    }
}
