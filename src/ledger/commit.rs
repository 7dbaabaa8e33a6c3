//! `ledger commit`: a plan folder's manifest becomes the week's scheduled shipments.
//!
//! Shipment ids are the manifest's `shipment_id` (`S-<facility>-<yyyymmdd>-<site>`, with `-2`,
//! `-3`… for a second shipment of the same facility, day and site; see `output::manifest`).
//! They carry the dispatch date, so ids of different weeks never collide, and the same plan
//! gives the same ids, so a re-commit can be recognised row by row.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use chrono::{Datelike, NaiveDate, NaiveDateTime, Timelike, Weekday};
use rusqlite::{OptionalExtension, TransactionBehavior, params};

use super::{Ledger, LedgerError, line_problem, parse_date};
use crate::arcs::Mode;
use crate::csvread::{self, local_datetime};
use crate::output::{AllocationRecord, ManifestRecord, iso_minutes};
use crate::scenario::{Problem, SiteKind};

/// A plan folder as the ledger reads it.
#[derive(Clone, Debug, PartialEq)]
pub struct PlanRecord {
    /// Monday of the planned week: `summary.json` `week_start`, else the Monday on or before
    /// the earliest dispatch date.
    pub week_start: NaiveDate,
    /// `summary.json` `scenario` (empty without a summary).
    pub scenario: String,
    /// Manifest rows, sorted by shipment id, without coordinates (`lat`, `lon` are `None`:
    /// the ledger holds no locations).
    pub shipments: Vec<ManifestRecord>,
    /// Dooryard requests listed in `allocation.csv` (id, reason; reason empty when served),
    /// sorted by id; empty without an `allocation.csv`. Lets the report tell how long a
    /// request has been waiting.
    pub candidates: Vec<(String, String)>,
}

/// What [`Ledger::commit`] did.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum CommitOutcome {
    /// The week was new: this many shipments recorded.
    Recorded {
        /// Shipments written.
        shipments: usize,
    },
    /// The same plan was already committed: nothing written.
    Unchanged {
        /// Shipments of the week.
        shipments: usize,
    },
    /// A different plan for the week replaced the committed one.
    Replaced {
        /// Shipments of the old plan.
        old: usize,
        /// Shipments of the new plan.
        new: usize,
        /// Shipments present in both whose outcome (status, released_at, note) was kept.
        kept_outcomes: usize,
    },
}

const MANIFEST: &str = "manifest.csv";

/// Reads `manifest.csv` (required), `summary.json` and `allocation.csv` (optional) from a plan
/// folder written by `broodcast plan`. Every problem in the files is reported, each naming
/// file, line and field. O(n log n) in rows.
pub fn read_plan_folder(dir: &Path) -> Result<PlanRecord, LedgerError> {
    let mut problems = Vec::new();
    let manifest_path = dir.join(MANIFEST);
    let bytes = read_bytes(&manifest_path)?;
    let (lines, shipments) = parse_manifest(&bytes, &mut problems);
    let (summary_week, scenario) = read_summary(dir, &mut problems)?;
    let candidates = read_candidates(dir, &mut problems)?;
    if !problems.is_empty() {
        return Err(LedgerError::input(problems));
    }
    let week_start = match summary_week {
        Some(w) => w,
        None => match shipments.iter().map(|s| s.dispatch_date).min() {
            Some(d) => d - chrono::Days::new(u64::from(d.weekday().num_days_from_monday())),
            None => {
                return Err(LedgerError::input(vec![line_problem(
                    MANIFEST,
                    0,
                    None,
                    None,
                    "no shipments and no summary.json: the week cannot be told; commit the \
                     whole plan folder written by `broodcast plan`",
                )]));
            }
        },
    };
    let week_end = week_start + chrono::Days::new(6);
    for (s, line) in shipments.iter().zip(lines) {
        if s.dispatch_date < week_start || s.dispatch_date > week_end {
            problems.push(line_problem(
                MANIFEST,
                line,
                Some("dispatch_date"),
                Some(&s.dispatch_date.to_string()),
                format!(
                    "shipment {} leaves outside the week {week_start} – {week_end} of this plan",
                    s.shipment_id
                ),
            ));
        }
    }
    if !problems.is_empty() {
        return Err(LedgerError::input(problems));
    }
    Ok(PlanRecord {
        week_start,
        scenario,
        shipments,
        candidates,
    })
}

fn read_bytes(path: &Path) -> Result<Vec<u8>, LedgerError> {
    std::fs::read(path).map_err(|source| LedgerError::Io {
        path: path.display().to_string(),
        source,
    })
}

/// The manifest's shipments sorted by id, coordinates dropped, with the line of each.
fn parse_manifest(bytes: &[u8], problems: &mut Vec<Problem>) -> (Vec<u64>, Vec<ManifestRecord>) {
    let read = csvread::read::<ManifestRecord>(MANIFEST, bytes);
    problems.extend(read.problems);
    let mut out: Vec<(u64, ManifestRecord)> = read
        .rows
        .into_iter()
        .map(|(line, r)| {
            let r = ManifestRecord {
                lat: None,
                lon: None,
                ..r
            };
            (line, r)
        })
        .collect();
    out.sort_by(|a, b| a.1.shipment_id.cmp(&b.1.shipment_id));
    out.into_iter().unzip()
}

fn read_summary(
    dir: &Path,
    problems: &mut Vec<Problem>,
) -> Result<(Option<NaiveDate>, String), LedgerError> {
    let path = dir.join("summary.json");
    if !path.exists() {
        return Ok((None, String::new()));
    }
    let bytes = read_bytes(&path)?;
    let value: serde_json::Value = match serde_json::from_slice(&bytes) {
        Ok(v) => v,
        Err(e) => {
            problems.push(line_problem(
                "summary.json",
                e.line() as u64,
                None,
                None,
                format!("not valid JSON: {e}"),
            ));
            return Ok((None, String::new()));
        }
    };
    let scenario = value
        .get("scenario")
        .and_then(|v| v.as_str())
        .unwrap_or("")
        .to_string();
    let week = match value.get("week_start") {
        None => None,
        Some(v) => match v.as_str().and_then(parse_date) {
            Some(d) if d.weekday() == Weekday::Mon => Some(d),
            _ => {
                problems.push(Problem {
                    file: "summary.json".into(),
                    location: crate::scenario::Location::Key("week_start".into()),
                    field: None,
                    value: Some(v.to_string()),
                    message: "must be an ISO date that is a Monday".into(),
                });
                None
            }
        },
    };
    Ok((week, scenario))
}

fn read_candidates(
    dir: &Path,
    problems: &mut Vec<Problem>,
) -> Result<Vec<(String, String)>, LedgerError> {
    const FILE: &str = "allocation.csv";
    let path = dir.join(FILE);
    if !path.exists() {
        return Ok(Vec::new());
    }
    let read = csvread::read::<AllocationRecord>(FILE, &read_bytes(&path)?);
    problems.extend(read.problems);
    Ok(read
        .rows
        .into_iter()
        .filter(|(_, r)| r.site_kind == SiteKind::Dooryard)
        .map(|(_, r)| (r.site_id, r.reason))
        .collect::<BTreeMap<_, _>>()
        .into_iter()
        .collect())
}

/// A time as the ledger stores it: to the minute as `manifest.csv` writes it, with seconds
/// only when a hand-edited file gave some (so that committing that file again is a no-op).
fn stored_time(t: NaiveDateTime) -> String {
    if t.second() == 0 {
        iso_minutes(t)
    } else {
        t.format("%Y-%m-%dT%H:%M:%S").to_string()
    }
}

/// Outcome columns of a stored shipment: status, released_at, note.
type Outcome = (String, Option<String>, String);

impl Ledger {
    /// Records `plan` as the scheduled shipments of its week, in one transaction.
    ///
    /// The same plan again: [`CommitOutcome::Unchanged`], nothing written. A different plan for
    /// a committed week: [`LedgerError::WeekConflict`] unless `replace`; replacing keeps the
    /// outcome of shipments present in both plans and refuses to drop confirmed ones.
    /// O(n log n) in shipments.
    pub fn commit(
        &mut self,
        plan: &PlanRecord,
        replace: bool,
    ) -> Result<CommitOutcome, LedgerError> {
        let path = self.path.clone();
        let err = |source| LedgerError::Sqlite {
            path: path.clone(),
            source,
        };
        let week = plan.week_start.to_string();
        // IMMEDIATE: take the write lock before reading, so the comparison cannot go stale.
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(err)?;
        let existing: Option<String> = tx
            .query_row(
                "SELECT scenario FROM plans WHERE week_start = ?1",
                [&week],
                |r| r.get(0),
            )
            .optional()
            .map_err(err)?;
        let mut kept: BTreeMap<String, Outcome> = BTreeMap::new();
        let mut outcome = CommitOutcome::Recorded {
            shipments: plan.shipments.len(),
        };
        if let Some(scenario) = existing {
            let (old_rows, old_outcomes) = load_week(&tx, &week).map_err(err)?;
            let old_cands = load_candidates(&tx, &week).map_err(err)?;
            if old_rows == plan.shipments
                && old_cands == plan.candidates
                && scenario == plan.scenario
            {
                return Ok(CommitOutcome::Unchanged {
                    shipments: old_rows.len(),
                });
            }
            if !replace {
                return Err(LedgerError::WeekConflict {
                    week_start: plan.week_start,
                    existing: old_rows.len(),
                    new: plan.shipments.len(),
                });
            }
            let new_ids: BTreeSet<&str> = plan
                .shipments
                .iter()
                .map(|s| s.shipment_id.as_str())
                .collect();
            let dropped: Vec<String> = old_outcomes
                .iter()
                .filter(|(id, o)| o.0 != "scheduled" && !new_ids.contains(id.as_str()))
                .map(|(id, _)| id.clone())
                .collect();
            if !dropped.is_empty() {
                return Err(LedgerError::ConfirmedDropped {
                    week_start: plan.week_start,
                    shipment_ids: dropped,
                });
            }
            kept = old_outcomes
                .into_iter()
                .filter(|(id, o)| o.0 != "scheduled" && new_ids.contains(id.as_str()))
                .collect();
            outcome = CommitOutcome::Replaced {
                old: old_rows.len(),
                new: plan.shipments.len(),
                kept_outcomes: kept.len(),
            };
            tx.execute("DELETE FROM plans WHERE week_start = ?1", [&week])
                .map_err(err)?;
        }
        // Ids carry the dispatch date, so a clash with another week means a hand-edited file.
        let mut clashes = Vec::new();
        {
            let mut q = tx
                .prepare("SELECT week_start FROM shipments WHERE shipment_id = ?1")
                .map_err(err)?;
            for s in &plan.shipments {
                if let Some(w) = q
                    .query_row([&s.shipment_id], |r| r.get::<_, String>(0))
                    .optional()
                    .map_err(err)?
                {
                    clashes.push(line_problem(
                        MANIFEST,
                        0,
                        Some("shipment_id"),
                        Some(&s.shipment_id),
                        format!("already recorded for the week of {w}; shipment ids are unique over the season"),
                    ));
                }
            }
        }
        if !clashes.is_empty() {
            return Err(LedgerError::input(clashes));
        }
        tx.execute(
            "INSERT INTO plans (week_start, scenario) VALUES (?1, ?2)",
            params![week, plan.scenario],
        )
        .map_err(err)?;
        {
            let mut ins = tx
                .prepare(
                    "INSERT INTO shipments (shipment_id, week_start, facility_id, dispatch_date,
                       mode, route_id, stop_seq, site_id, site_kind, vials, wasps_packed,
                       wasps_expected_alive, eta, release_by, status, released_at, note)
                     VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15,
                       ?16, ?17)",
                )
                .map_err(err)?;
            for s in &plan.shipments {
                let (status, released_at, note) = kept
                    .get(&s.shipment_id)
                    .cloned()
                    .unwrap_or_else(|| ("scheduled".into(), None, String::new()));
                ins.execute(params![
                    s.shipment_id,
                    week,
                    s.facility_id,
                    s.dispatch_date.to_string(),
                    s.mode.as_str(),
                    s.route_id,
                    s.stop_seq,
                    s.site_id,
                    s.site_kind.as_str(),
                    s.vials,
                    // Wasps per shipment are far below i64::MAX; saturate rather than wrap.
                    i64::try_from(s.wasps_packed).unwrap_or(i64::MAX),
                    s.wasps_expected_alive,
                    stored_time(s.eta),
                    stored_time(s.release_by),
                    status,
                    released_at,
                    note,
                ])
                .map_err(err)?;
            }
            let mut ins = tx
                .prepare("INSERT INTO candidates (week_start, site_id, reason) VALUES (?1, ?2, ?3)")
                .map_err(err)?;
            for (site, reason) in &plan.candidates {
                ins.execute(params![week, site, reason]).map_err(err)?;
            }
        }
        tx.commit().map_err(err)?;
        Ok(outcome)
    }
}

/// The week's shipments (sorted by id) and their outcomes.
fn load_week(
    tx: &rusqlite::Transaction,
    week: &str,
) -> rusqlite::Result<(Vec<ManifestRecord>, BTreeMap<String, Outcome>)> {
    let mut q = tx.prepare(
        "SELECT shipment_id, facility_id, dispatch_date, mode, route_id, stop_seq, site_id,
                site_kind, vials, wasps_packed, wasps_expected_alive, eta, release_by,
                status, released_at, note
         FROM shipments WHERE week_start = ?1 ORDER BY shipment_id",
    )?;
    let mut rows = Vec::new();
    let mut outcomes = BTreeMap::new();
    let mut it = q.query([week])?;
    while let Some(r) = it.next()? {
        let id: String = r.get(0)?;
        let date: String = r.get(2)?;
        let mode: String = r.get(3)?;
        let kind: String = r.get(7)?;
        let packed: i64 = r.get(9)?;
        let eta: String = r.get(11)?;
        let release_by: String = r.get(12)?;
        rows.push(ManifestRecord {
            shipment_id: id.clone(),
            facility_id: r.get(1)?,
            // The CHECK constraints and the writer guarantee these parse; a row that does not
            // is reported as different, which only makes a re-commit ask for --replace.
            dispatch_date: parse_date(&date).unwrap_or(NaiveDate::MIN),
            mode: if mode == "parcel" {
                Mode::Parcel
            } else {
                Mode::Route
            },
            route_id: r.get(4)?,
            stop_seq: r.get(5)?,
            site_id: r.get(6)?,
            site_kind: if kind == "dooryard" {
                SiteKind::Dooryard
            } else {
                SiteKind::Block
            },
            vials: r.get(8)?,
            wasps_packed: u64::try_from(packed).unwrap_or(0),
            wasps_expected_alive: r.get(10)?,
            lat: None,
            lon: None,
            eta: local_datetime(&eta).unwrap_or(NaiveDateTime::MIN),
            release_by: local_datetime(&release_by).unwrap_or(NaiveDateTime::MIN),
        });
        outcomes.insert(id, (r.get(13)?, r.get(14)?, r.get(15)?));
    }
    Ok((rows, outcomes))
}

fn load_candidates(
    tx: &rusqlite::Transaction,
    week: &str,
) -> rusqlite::Result<Vec<(String, String)>> {
    let mut q = tx
        .prepare("SELECT site_id, reason FROM candidates WHERE week_start = ?1 ORDER BY site_id")?;
    q.query_map([week], |r| Ok((r.get(0)?, r.get(1)?)))?
        .collect()
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    #[test]
    fn the_test_header_is_the_writers() {
        assert_eq!(HEADER, crate::output::MANIFEST_COLUMNS.join(","));
    }

    pub(crate) const HEADER: &str = "shipment_id,facility_id,dispatch_date,mode,route_id,stop_seq,site_id,site_kind,lat,lon,vials,wasps_packed,wasps_expected_alive,eta,release_by";

    /// A plan folder with the given manifest body lines and a summary for `week`.
    pub(crate) fn folder(week: &str, lines: &[&str]) -> tempfile::TempDir {
        let d = tempfile::tempdir().expect("temp dir");
        let mut text = format!("{HEADER}\n");
        for l in lines {
            text.push_str(l);
            text.push('\n');
        }
        std::fs::write(d.path().join("manifest.csv"), text).expect("write manifest");
        std::fs::write(
            d.path().join("summary.json"),
            format!("{{\"scenario\": \"t\", \"week_start\": \"{week}\"}}"),
        )
        .expect("write summary");
        d
    }

    pub(crate) fn row(id: &str, date: &str, site: &str, kind: &str, vials: u32) -> String {
        format!(
            "{id},F1,{date},route,R1,1,{site},{kind},27.1,81.2,{vials},{},{:.1},{date}T09:00,{date}T18:00",
            vials * 500,
            f64::from(vials) * 400.0
        )
    }

    fn count(l: &Ledger) -> i64 {
        l.conn
            .query_row("SELECT count(*) FROM shipments", [], |r| r.get(0))
            .expect("count")
    }

    #[test]
    fn commit_is_idempotent_and_refuses_a_different_plan_without_replace() {
        let dir = tempfile::tempdir().expect("temp dir");
        let (mut l, _) = Ledger::init(&dir.path().join("s.db")).expect("init");
        let a = row("S-F1-20270301-B1", "2027-03-01", "B1", "block", 3);
        let b = row("S-F1-20270302-R1", "2027-03-02", "R1", "dooryard", 2);
        let p1 = read_plan_folder(folder("2027-03-01", &[&a, &b]).path()).expect("read");
        assert_eq!(p1.shipments.len(), 2);
        assert_eq!(
            l.commit(&p1, false).expect("first"),
            CommitOutcome::Recorded { shipments: 2 }
        );
        assert_eq!(
            l.commit(&p1, false).expect("again"),
            CommitOutcome::Unchanged { shipments: 2 }
        );
        assert_eq!(count(&l), 2);
        let p2 = read_plan_folder(folder("2027-03-01", &[&a]).path()).expect("read");
        let e = l.commit(&p2, false).expect_err("conflict");
        assert!(matches!(e, LedgerError::WeekConflict { .. }), "{e}");
        assert!(e.to_string().contains("--replace"));
        assert_eq!(count(&l), 2);
        assert_eq!(
            l.commit(&p2, true).expect("replace"),
            CommitOutcome::Replaced {
                old: 2,
                new: 1,
                kept_outcomes: 0
            }
        );
        assert_eq!(count(&l), 1);
    }

    #[test]
    fn a_hand_edited_time_with_seconds_recommits_as_unchanged() {
        let dir = tempfile::tempdir().expect("temp dir");
        let (mut l, _) = Ledger::init(&dir.path().join("s.db")).expect("init");
        let a = row("S-A", "2027-03-01", "B1", "block", 3).replace("T09:00", "T09:00:30");
        let b = row("S-B", "2027-03-02", "B2", "block", 1).replace(",27.1,81.2,", ",,,");
        let p = read_plan_folder(folder("2027-03-01", &[&a, &b]).path()).expect("read");
        assert_eq!(p.shipments[0].lat, None, "the ledger keeps no coordinates");
        l.commit(&p, false).expect("first");
        assert_eq!(
            l.commit(&p, false).expect("again"),
            CommitOutcome::Unchanged { shipments: 2 }
        );
    }

    #[test]
    fn manifest_errors_name_line_and_field() {
        let bad = "S-1,F1,2027-03-0x,truck,R1,0,B1,tree,1,2,-3,x,nan,soon,later";
        let e = read_plan_folder(folder("2027-03-01", &[bad]).path()).expect_err("bad");
        let text = e.to_string();
        for field in [
            "dispatch_date",
            "mode",
            "stop_seq",
            "site_kind",
            "vials",
            "wasps_packed",
            "wasps_expected_alive",
            "eta",
            "release_by",
        ] {
            assert!(
                text.contains(&format!("manifest.csv:2: field '{field}'")),
                "{field}: {text}"
            );
        }
    }

    #[test]
    fn missing_column_and_duplicate_id_are_reported() {
        let d = tempfile::tempdir().expect("temp dir");
        std::fs::write(d.path().join("manifest.csv"), "shipment_id,vials\nS,1\n").expect("w");
        let e = read_plan_folder(d.path()).expect_err("missing columns");
        assert!(e.to_string().contains("field 'facility_id'"), "{e}");
        let a = row("S-1", "2027-03-01", "B1", "block", 3);
        let e = read_plan_folder(folder("2027-03-01", &[&a, &a]).path()).expect_err("dup");
        assert!(
            e.to_string()
                .contains("manifest.csv:3: field 'shipment_id'"),
            "{e}"
        );
    }

    #[test]
    fn week_defaults_to_monday_of_first_dispatch_and_dates_must_fit() {
        let d = tempfile::tempdir().expect("temp dir");
        let a = row("S-1", "2027-03-03", "B1", "block", 3);
        std::fs::write(d.path().join("manifest.csv"), format!("{HEADER}\n{a}\n")).expect("w");
        let p = read_plan_folder(d.path()).expect("read");
        assert_eq!(p.week_start.to_string(), "2027-03-01");
        let late = row("S-2", "2027-03-09", "B1", "block", 3);
        let e = read_plan_folder(folder("2027-03-01", &[&late]).path()).expect_err("outside");
        assert!(e.to_string().contains("outside the week"), "{e}");
    }
}
