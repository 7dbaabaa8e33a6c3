//! `ledger confirm`: what happened to each shipment (`confirmations.csv`).
//!
//! Columns `shipment_id,status,released_at,note`; `status` is `released`, `not_released` or
//! `dead_on_arrival`; `released_at` is an ISO date or local date-time, optional, and must be
//! empty for `not_released`; `note` is free text kept in the ledger and never shown in the
//! report (it may hold anything a coordinator types). The last import of a shipment wins;
//! importing the same file again changes nothing.

use std::path::Path;

use rusqlite::{OptionalExtension, TransactionBehavior, params};

use super::{Ledger, LedgerError, line_problem};
use crate::csvread::{self, Cells, CsvRow, iso_date, local_datetime};

/// A shipment's outcome.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Status {
    /// Committed, no outcome yet.
    Scheduled,
    /// The vials were released at the site.
    Released,
    /// Not released (no access, homeowner away, vehicle failed…): a dooryard request goes back
    /// to the queue; a block does not count as released.
    NotReleased,
    /// The wasps arrived dead: no release happened, so (like `not_released`) the request goes
    /// back to the queue and the block does not count as released.
    DeadOnArrival,
}

impl Status {
    /// The code stored in the ledger and written in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Scheduled => "scheduled",
            Status::Released => "released",
            Status::NotReleased => "not_released",
            Status::DeadOnArrival => "dead_on_arrival",
        }
    }

    /// Parses a stored or written code.
    pub fn parse(s: &str) -> Option<Status> {
        Some(match s {
            "scheduled" => Status::Scheduled,
            "released" => Status::Released,
            "not_released" => Status::NotReleased,
            "dead_on_arrival" => Status::DeadOnArrival,
            _ => return None,
        })
    }

    /// Whether the shipment counts as a release (done or still planned): it serves a request
    /// and starts a block's re-release interval.
    pub fn counts_as_release(self) -> bool {
        matches!(self, Status::Scheduled | Status::Released)
    }
}

/// One line of `confirmations.csv`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Confirmation {
    /// 1-based line in the file (header = 1).
    pub line: u64,
    /// `shipment_id`.
    pub shipment_id: String,
    /// `status` (never `Scheduled`).
    pub status: Status,
    /// `released_at`, normalised to `YYYY-MM-DD` or `YYYY-MM-DDTHH:MM`.
    pub released_at: Option<String>,
    /// `note`, trimmed.
    pub note: String,
}

/// What [`Ledger::confirm`] did.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ConfirmOutcome {
    /// Lines read.
    pub lines: usize,
    /// Shipments whose stored outcome changed.
    pub changed: usize,
    /// Dooryard requests whose shipment is now `not_released` or `dead_on_arrival` (they are
    /// candidates again), sorted.
    pub requests_back_in_queue: Vec<String>,
}

impl CsvRow for Confirmation {
    const COLUMNS: &'static [&'static str] = &crate::output::CONFIRMATION_COLUMNS;
    const UNIQUE: Option<(&'static str, &'static str)> =
        Some(("shipment_id", "give each shipment one line"));

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let shipment_id = c.required(
            "shipment_id",
            "every line needs a shipment id (from manifest.csv)",
        );
        let status = c.parse_with("status", |s| match Status::parse(s) {
            Some(s) if s != Status::Scheduled => Ok(s),
            _ => Err("must be released, not_released or dead_on_arrival".to_string()),
        });
        let released_at = c.parse_with("released_at", |raw| {
            if raw.is_empty() {
                Ok(None)
            } else if let Some(t) = local_datetime(raw) {
                Ok(Some(t.format("%Y-%m-%dT%H:%M").to_string()))
            } else if let Some(d) = iso_date(raw) {
                Ok(Some(d.to_string()))
            } else {
                Err(
                    "not an ISO date (YYYY-MM-DD) or local date-time (YYYY-MM-DDTHH:MM); \
                     leave it empty when unknown"
                        .to_string(),
                )
            }
        });
        if status == Some(Status::NotReleased) && released_at.as_ref().is_some_and(Option::is_some)
        {
            c.problem(
                "released_at",
                "a shipment that was not released has no release time; leave it empty",
            );
        }
        Some(Confirmation {
            line: c.line(),
            shipment_id: shipment_id?,
            status: status?,
            released_at: released_at?,
            note: c.text("note").to_string(),
        })
    }
}

/// Reads a confirmations file; every problem is reported with file, line and field. O(n log n).
pub fn read_confirmations(path: &Path) -> Result<Vec<Confirmation>, LedgerError> {
    let file = path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let bytes = std::fs::read(path).map_err(|source| LedgerError::Io {
        path: path.display().to_string(),
        source,
    })?;
    let read = csvread::read::<Confirmation>(&file, &bytes);
    if !read.problems.is_empty() {
        return Err(LedgerError::input(read.problems));
    }
    Ok(read.rows.into_iter().map(|(_, c)| c).collect())
}

impl Ledger {
    /// Applies `confirmations` (read from `file`, named in errors) in one transaction. An
    /// unknown shipment id fails the whole import, naming every such line; nothing changes.
    /// O(n log S) for n lines and S stored shipments.
    pub fn confirm(
        &mut self,
        file: &str,
        confirmations: &[Confirmation],
    ) -> Result<ConfirmOutcome, LedgerError> {
        let path = self.path.clone();
        let err = |source| LedgerError::Sqlite {
            path: path.clone(),
            source,
        };
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(err)?;
        let mut unknown = Vec::new();
        let mut changed = 0;
        let mut back = Vec::new();
        {
            let mut get = tx
                .prepare(
                    "SELECT status, released_at, note, site_kind, site_id FROM shipments
                     WHERE shipment_id = ?1",
                )
                .map_err(err)?;
            let mut set = tx
                .prepare(
                    "UPDATE shipments SET status = ?2, released_at = ?3, note = ?4
                     WHERE shipment_id = ?1",
                )
                .map_err(err)?;
            for c in confirmations {
                let now: Option<(String, Option<String>, String, String, String)> = get
                    .query_row([&c.shipment_id], |r| {
                        Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
                    })
                    .optional()
                    .map_err(err)?;
                let Some((status, released_at, note, kind, site)) = now else {
                    unknown.push(line_problem(
                        file,
                        c.line,
                        Some("shipment_id"),
                        Some(&c.shipment_id),
                        "no such shipment in the ledger; commit its plan first (`broodcast ledger commit`)",
                    ));
                    continue;
                };
                if kind == "dooryard" && !c.status.counts_as_release() {
                    back.push(site);
                }
                if (status.as_str(), released_at.as_deref(), note.as_str())
                    == (c.status.as_str(), c.released_at.as_deref(), c.note.as_str())
                {
                    continue;
                }
                set.execute(params![
                    c.shipment_id,
                    c.status.as_str(),
                    c.released_at,
                    c.note
                ])
                .map_err(err)?;
                changed += 1;
            }
        }
        if !unknown.is_empty() {
            // Dropping the transaction rolls back every update made above.
            return Err(LedgerError::input(unknown));
        }
        tx.commit().map_err(err)?;
        back.sort();
        back.dedup();
        Ok(ConfirmOutcome {
            lines: confirmations.len(),
            changed,
            requests_back_in_queue: back,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::super::commit::tests::{folder, row};
    use super::super::read_plan_folder;
    use super::*;

    /// Problems of `read_confirmations` on a file holding `bytes`, as printed.
    fn problems(bytes: &[u8]) -> Vec<String> {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("c.csv");
        std::fs::write(&path, bytes).expect("write");
        match read_confirmations(&path) {
            Ok(c) => panic!("read {} lines", c.len()),
            Err(LedgerError::Input { problems, .. }) => {
                problems.iter().map(ToString::to_string).collect()
            }
            Err(e) => panic!("not an input error: {e}"),
        }
    }

    #[test]
    fn crlf_files_name_the_physical_line() {
        let p =
            problems(b"shipment_id,status,released_at,note\r\nS-A,released,,\r\nS-B,lost,,\r\n");
        assert_eq!(p.len(), 1);
        assert!(p[0].starts_with("c.csv:3: field 'status'"), "{p:?}");
    }

    #[test]
    fn invalid_utf8_names_its_line() {
        let p = problems(
            b"shipment_id,status,released_at,note\nS-A,released,,ok\nS-B,released,,caf\xe9\n",
        );
        assert_eq!(p.len(), 1);
        assert!(p[0].starts_with("c.csv:3:"), "{p:?}");
        assert!(p[0].contains("UTF-8"), "{p:?}");
    }

    #[test]
    fn an_open_quote_that_swallows_a_line_is_named_and_not_quoted() {
        let p = problems(
            b"shipment_id,status,released_at,note\nS-A,released,,\"gate code 555-0100\nS-B,not_released,,away\" ok\n",
        );
        assert_eq!(p.len(), 1, "{p:?}");
        assert!(p[0].starts_with("c.csv:2: field 'note'"), "{p:?}");
        assert!(p[0].contains("line 3"), "{p:?}");
        assert!(!p[0].contains("555-0100"), "{p:?}");
    }

    #[test]
    fn an_invisible_character_in_a_value_is_shown_escaped() {
        let p =
            problems("shipment_id,status,released_at,note\nS-A,\u{feff}released,,\n".as_bytes());
        assert!(p[0].contains("value '\\u{feff}released'"), "{p:?}");
    }

    fn setup() -> (tempfile::TempDir, Ledger) {
        let dir = tempfile::tempdir().expect("temp dir");
        let (mut l, _) = Ledger::init(&dir.path().join("s.db")).expect("init");
        let a = row("S-A", "2027-03-01", "B1", "block", 3);
        let b = row("S-B", "2027-03-02", "R1", "dooryard", 2);
        let p = read_plan_folder(folder("2027-03-01", &[&a, &b]).path()).expect("read");
        l.commit(&p, false).expect("commit");
        (dir, l)
    }

    fn write(dir: &Path, body: &str) -> std::path::PathBuf {
        let p = dir.join("confirmations.csv");
        std::fs::write(&p, format!("shipment_id,status,released_at,note\n{body}")).expect("w");
        p
    }

    fn statuses(l: &Ledger) -> Vec<(String, String, Option<String>)> {
        let mut q = l
            .conn
            .prepare("SELECT shipment_id, status, released_at FROM shipments ORDER BY 1")
            .expect("prepare");
        q.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
            .expect("query")
            .collect::<Result<_, _>>()
            .expect("rows")
    }

    #[test]
    fn confirm_twice_changes_nothing_the_second_time() {
        let (dir, mut l) = setup();
        let p = write(
            dir.path(),
            "S-A,released,2027-03-01T10:15,ok\nS-B,not_released,,away\n",
        );
        let c = read_confirmations(&p).expect("read");
        let first = l.confirm("confirmations.csv", &c).expect("first");
        assert_eq!(first.changed, 2);
        assert_eq!(first.requests_back_in_queue, vec!["R1".to_string()]);
        let after_first = statuses(&l);
        let second = l.confirm("confirmations.csv", &c).expect("second");
        assert_eq!(second.changed, 0);
        assert_eq!(statuses(&l), after_first);
        assert_eq!(after_first[0].2.as_deref(), Some("2027-03-01T10:15"));
    }

    #[test]
    fn unknown_id_fails_the_whole_file_and_names_the_line() {
        let (dir, mut l) = setup();
        let before = statuses(&l);
        let p = write(dir.path(), "S-A,released,,\nS-NOPE,released,,\n");
        let c = read_confirmations(&p).expect("read");
        let e = l.confirm("confirmations.csv", &c).expect_err("unknown");
        assert!(e.is_input());
        assert!(
            e.to_string()
                .contains("confirmations.csv:3: field 'shipment_id'"),
            "{e}"
        );
        assert_eq!(statuses(&l), before, "nothing changed");
    }

    #[test]
    fn bad_lines_name_field() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = write(
            dir.path(),
            "S-A,maybe,,\nS-B,released,yesterday,\nS-C,not_released,2027-03-01,\nS-B,released,,\n",
        );
        let text = read_confirmations(&p).expect_err("bad").to_string();
        assert!(
            text.contains("confirmations.csv:2: field 'status'"),
            "{text}"
        );
        assert!(
            text.contains("confirmations.csv:3: field 'released_at'"),
            "{text}"
        );
        assert!(
            text.contains("confirmations.csv:4: field 'released_at'"),
            "{text}"
        );
        assert!(
            text.contains("confirmations.csv:5: field 'shipment_id'"),
            "{text}"
        );
    }
}
