//! The season ledger: an SQLite file that remembers, across weeks, what was scheduled, what was
//! released and what came back, so that next week's plan does not serve a request twice or
//! release at a block again too soon.
//!
//! - [`Ledger::init`] / [`Ledger::open`]: the file, its schema version (`PRAGMA user_version`,
//!   migrated forward on open), WAL journal, `synchronous = FULL`, foreign keys on.
//! - [`read_plan_folder`] + [`Ledger::commit`]: a plan folder's `manifest.csv` becomes the week's
//!   scheduled shipments (idempotent; a different plan for a committed week needs `replace`).
//! - [`read_confirmations`] + [`Ledger::confirm`]: outcomes per shipment, the whole file in one
//!   transaction.
//! - [`Ledger::history`] + [`LedgerMarks`]: what the ledger says about sites of the week being
//!   planned, as typed values handed to planning (the planner never opens the file).
//! - [`Ledger::season`] + [`render_report`]: season totals as CSV and a printable HTML page.
//!
//! Every write is one transaction: a crash (even `kill -9`) leaves the file as before or as
//! after the command. The ledger holds no personal data: no names, phones, e-mails, addresses
//! or coordinates, only ids, dates and counts (and the coordinator's free-text `note`, which
//! the report never shows). Formats and schema: `docs/season.md`.

mod commit;
mod confirm;
mod history;
mod report;
mod schema;

use std::path::Path;

use chrono::NaiveDate;
use rusqlite::{Connection, OpenFlags};

use crate::scenario::{MAX_LISTED, Problem};

pub use commit::{CommitOutcome, PlanRecord, read_plan_folder};
pub use confirm::{ConfirmOutcome, Confirmation, Status, read_confirmations};
pub use history::{LedgerHistory, LedgerMarks};
pub use report::{SeasonData, SeasonShipment, render_report};
pub use schema::SCHEMA_VERSION;

/// Ledger errors. [`LedgerError::is_input`] tells the user's mistakes (exit 2) from ours.
#[derive(Debug, thiserror::Error)]
pub enum LedgerError {
    /// SQLite failed on the ledger file.
    #[error("ledger {path}: {source}")]
    Sqlite {
        /// The ledger file.
        path: String,
        /// What SQLite said.
        #[source]
        source: rusqlite::Error,
    },
    /// The ledger file does not exist.
    #[error("ledger {path} does not exist; create it with `broodcast ledger init {path}`")]
    Missing {
        /// The ledger file.
        path: String,
    },
    /// The file was written by a newer broodcast.
    #[error(
        "ledger {path} has schema version {found}, newer than this broodcast knows ({supported}); use a newer broodcast"
    )]
    TooNew {
        /// The ledger file.
        path: String,
        /// `PRAGMA user_version` found.
        found: i64,
        /// Latest version this build knows.
        supported: i64,
    },
    /// The file exists but is not an SQLite database.
    #[error(
        "{path} is not a season ledger (not an SQLite file); create one with `broodcast ledger init`"
    )]
    NotALedger {
        /// The file.
        path: String,
    },
    /// An input file (manifest, summary, allocation, confirmations) is wrong.
    #[error("{}", crate::csvread::problem_list(.problems, *.omitted))]
    Input {
        /// Problems found, in file order (at most [`MAX_LISTED`]).
        problems: Vec<Problem>,
        /// Problems found past [`MAX_LISTED`].
        omitted: usize,
    },
    /// A different plan is already committed for the week.
    #[error(
        "week of {week_start} already has a different committed plan ({existing} shipments; this one has {new}); \
         pass --replace to replace it"
    )]
    WeekConflict {
        /// Monday of the week.
        week_start: NaiveDate,
        /// Shipments of the committed plan.
        existing: usize,
        /// Shipments of the plan offered.
        new: usize,
    },
    /// Replacing a week would drop shipments that already have an outcome.
    #[error(
        "replacing the week of {week_start} would drop {} confirmed shipment(s) ({}); keep them in the new plan or confirm them again after",
        .shipment_ids.len(),
        .shipment_ids.join(", ")
    )]
    ConfirmedDropped {
        /// Monday of the week.
        week_start: NaiveDate,
        /// Shipments with a status other than `scheduled` missing from the new plan.
        shipment_ids: Vec<String>,
    },
    /// Reading an input file failed.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: String,
        /// The I/O error.
        #[source]
        source: std::io::Error,
    },
}

impl LedgerError {
    /// Whether the user must fix something (exit 2) rather than broodcast failing (exit 1).
    pub fn is_input(&self) -> bool {
        !matches!(self, LedgerError::Sqlite { .. })
    }

    /// An input error from collected problems (keeps the first [`MAX_LISTED`]).
    pub(crate) fn input(mut problems: Vec<Problem>) -> Self {
        let omitted = problems.len().saturating_sub(MAX_LISTED);
        problems.truncate(MAX_LISTED);
        LedgerError::Input { problems, omitted }
    }
}

/// A problem at a 1-based line of a file (0: the whole file).
pub(crate) use crate::csvread::problem as line_problem;

/// An open season ledger.
#[derive(Debug)]
pub struct Ledger {
    conn: Connection,
    path: String,
}

/// What [`Ledger::init`] did.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct InitOutcome {
    /// Schema version before (0 for a new file).
    pub from_version: i64,
    /// Schema version now ([`SCHEMA_VERSION`]).
    pub to_version: i64,
}

impl Ledger {
    /// Creates the ledger file (or opens an existing one) and brings its schema to
    /// [`SCHEMA_VERSION`]. Running it on a current ledger changes nothing.
    pub fn init(path: &Path) -> Result<(Ledger, InitOutcome), LedgerError> {
        let conn = Connection::open(path).map_err(sql(path))?;
        Self::setup(conn, path)
    }

    /// Opens an existing ledger, migrating an older schema forward.
    pub fn open(path: &Path) -> Result<Ledger, LedgerError> {
        if !path.is_file() {
            return Err(LedgerError::Missing {
                path: path.display().to_string(),
            });
        }
        let conn = Connection::open_with_flags(
            path,
            OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX,
        )
        .map_err(sql(path))?;
        Ok(Self::setup(conn, path)?.0)
    }

    fn setup(mut conn: Connection, path: &Path) -> Result<(Ledger, InitOutcome), LedgerError> {
        let p = path.display().to_string();
        let not_a_db = |e: rusqlite::Error| match e.sqlite_error_code() {
            Some(rusqlite::ErrorCode::NotADatabase) => LedgerError::NotALedger { path: p.clone() },
            _ => sql(path)(e),
        };
        // WAL: readers never block the writer and a killed writer leaves the main file intact;
        // FULL: a committed transaction survives power loss, not only a process crash.
        conn.pragma_update(None, "journal_mode", "WAL")
            .and_then(|_| conn.pragma_update(None, "synchronous", "FULL"))
            .and_then(|_| conn.pragma_update(None, "foreign_keys", "ON"))
            .and_then(|_| conn.busy_timeout(std::time::Duration::from_secs(10)))
            .map_err(not_a_db)?;
        let (from_version, to_version) = schema::migrate(&mut conn, &p)?;
        Ok((
            Ledger { conn, path: p },
            InitOutcome {
                from_version,
                to_version,
            },
        ))
    }

    /// The ledger file, as given.
    pub fn path(&self) -> &str {
        &self.path
    }

    /// `PRAGMA user_version`.
    pub fn schema_version(&self) -> Result<i64, LedgerError> {
        self.conn
            .pragma_query_value(None, "user_version", |r| r.get(0))
            .map_err(self.err())
    }

    /// Maps a SQLite error to [`LedgerError::Sqlite`] naming this file.
    pub(crate) fn err(&self) -> impl Fn(rusqlite::Error) -> LedgerError + '_ {
        |source| LedgerError::Sqlite {
            path: self.path.clone(),
            source,
        }
    }
}

fn sql(path: &Path) -> impl Fn(rusqlite::Error) -> LedgerError + '_ {
    move |source| LedgerError::Sqlite {
        path: path.display().to_string(),
        source,
    }
}

/// Parses an ISO date (`YYYY-MM-DD`).
pub(crate) use crate::csvread::iso_date as parse_date;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn init_sets_version_and_wal_and_is_repeatable() {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("season.db");
        let (l, first) = Ledger::init(&db).expect("init");
        assert_eq!(first.from_version, 0);
        assert_eq!(first.to_version, SCHEMA_VERSION);
        let mode: String = l
            .conn
            .pragma_query_value(None, "journal_mode", |r| r.get(0))
            .expect("journal mode");
        assert_eq!(mode, "wal");
        drop(l);
        let (_, again) = Ledger::init(&db).expect("init again");
        assert_eq!(again.from_version, SCHEMA_VERSION);
        assert_eq!(again.to_version, SCHEMA_VERSION);
    }

    #[test]
    fn open_missing_file_is_an_input_error() {
        let dir = tempfile::tempdir().expect("temp dir");
        let e = Ledger::open(&dir.path().join("nope.db")).expect_err("missing");
        assert!(e.is_input());
        assert!(e.to_string().contains("ledger init"), "{e}");
    }

    #[test]
    fn a_file_that_is_not_sqlite_is_an_input_error() {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("notes.txt");
        std::fs::write(
            &db,
            "this is not a database, just some text long enough to have a header page".repeat(20),
        )
        .expect("w");
        let e = Ledger::open(&db).expect_err("not sqlite");
        assert!(matches!(e, LedgerError::NotALedger { .. }), "{e}");
        assert!(e.is_input());
    }

    #[test]
    fn newer_schema_is_refused() {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("season.db");
        drop(Ledger::init(&db).expect("init"));
        let c = Connection::open(&db).expect("raw open");
        c.pragma_update(None, "user_version", SCHEMA_VERSION + 1)
            .expect("bump");
        drop(c);
        let e = Ledger::open(&db).expect_err("too new");
        assert!(matches!(e, LedgerError::TooNew { .. }), "{e}");
    }
}
