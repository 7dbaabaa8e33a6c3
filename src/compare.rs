//! Comparing two plans: reads the `summary.json`, `manifest.csv` and `allocation.csv` that
//! `plan --out` wrote into two folders and says which sites were gained and lost, how many
//! vials each facility sends on each day in each plan, and how the headline figures changed.
//!
//! This is a second loader (of plan outputs, not of scenarios): every problem names the file,
//! the line, the field and the fix. A site counts as served when `manifest.csv` delivers it at
//! least one vial (as `sites_served` in `summary.json` counts). Cost: O(rows · log rows).

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use chrono::NaiveDate;
use serde::Serialize;

use crate::csvread::{self, CsvRow, problem};
use crate::output::{AllocationRecord, ManifestRecord};
use crate::scenario::{MAX_LISTED, Problem};

/// Problems with a plan folder's files: every one found, each naming file, line, field and
/// the fix.
#[derive(Debug, thiserror::Error)]
#[error("{}", csvread::problem_list(.problems, *.omitted))]
pub struct CompareError {
    /// Problems, in file order (at most [`MAX_LISTED`]).
    pub problems: Vec<Problem>,
    /// Problems found past [`MAX_LISTED`].
    pub omitted: usize,
}

impl CompareError {
    fn new(mut problems: Vec<Problem>) -> Self {
        let omitted = problems.len().saturating_sub(MAX_LISTED);
        problems.truncate(MAX_LISTED);
        CompareError { problems, omitted }
    }
}

/// The headline figures of `summary.json`.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Headline {
    /// `scenario`.
    pub scenario: String,
    /// `week_start`.
    pub week_start: String,
    /// `objective` (priority-weighted live wasps).
    pub objective: f64,
    /// `lp_bound` (same units).
    pub lp_bound: f64,
    /// `supply_vials`.
    pub supply_vials: u64,
    /// `shipped_vials`.
    pub shipped_vials: u64,
    /// `sites_served`.
    pub sites_served: u64,
    /// `requests_served`.
    pub requests_served: u64,
    /// `wasps_expected_alive`, wasps.
    pub wasps_expected_alive: f64,
}

/// What `plan --out` wrote, as far as a comparison reads it.
#[derive(Clone, Debug, PartialEq)]
pub struct PlanOutputs {
    /// The folder.
    pub dir: PathBuf,
    /// From `summary.json`.
    pub headline: Headline,
    /// From `manifest.csv`.
    pub manifest: Vec<ManifestRecord>,
    /// From `allocation.csv`.
    pub allocation: Vec<AllocationRecord>,
}

fn err(file: &Path, line: u64, field: Option<&str>, message: impl Into<String>) -> CompareError {
    CompareError::new(vec![problem(
        &file.display().to_string(),
        line,
        field,
        None,
        message,
    )])
}

const FIX_FOLDER: &str = "give a folder written by `broodcast plan --out DIR`";

fn read(path: &Path) -> Result<Vec<u8>, CompareError> {
    std::fs::read(path).map_err(|e| {
        let what = if e.kind() == std::io::ErrorKind::NotFound {
            "file is missing".to_string()
        } else {
            format!("cannot read the file ({e})")
        };
        err(path, 0, None, format!("{what}; {FIX_FOLDER}"))
    })
}

/// Reads a plan output folder.
///
/// # Errors
/// A [`CompareError`] for a missing file, or listing every problem of the three files.
pub fn read_plan(dir: &Path) -> Result<PlanOutputs, CompareError> {
    let sp = dir.join("summary.json");
    let mp = dir.join("manifest.csv");
    let ap = dir.join("allocation.csv");
    let headline = parse_summary(&sp, &read(&sp)?);
    let manifest = parse_manifest(&mp, &read(&mp)?);
    let allocation = parse_allocation(&ap, &read(&ap)?);
    match (headline, manifest, allocation) {
        (Ok(headline), Ok(manifest), Ok(allocation)) => Ok(PlanOutputs {
            dir: dir.to_path_buf(),
            headline,
            manifest,
            allocation,
        }),
        (h, m, a) => Err(CompareError::new(
            [h.err(), m.err(), a.err()]
                .into_iter()
                .flatten()
                .flat_map(|e| e.problems)
                .collect(),
        )),
    }
}

/// Parses `summary.json`; `file` names it in errors.
pub fn parse_summary(file: &Path, bytes: &[u8]) -> Result<Headline, CompareError> {
    let v: serde_json::Value = serde_json::from_slice(bytes).map_err(|e| {
        err(
            file,
            e.line() as u64,
            None,
            format!("not valid JSON (column {}): {e}; {FIX_FOLDER}", e.column()),
        )
    })?;
    if !v.is_object() {
        return Err(err(
            file,
            0,
            None,
            format!("expected a JSON object; {FIX_FOLDER}"),
        ));
    }
    let num = |key: &str| -> Result<f64, CompareError> {
        v.get(key)
            .and_then(serde_json::Value::as_f64)
            .filter(|x| x.is_finite())
            .ok_or_else(|| {
                err(
                    file,
                    0,
                    Some(key),
                    format!("missing or not a number; {FIX_FOLDER}"),
                )
            })
    };
    let count = |key: &str| -> Result<u64, CompareError> {
        v.get(key)
            .and_then(serde_json::Value::as_u64)
            .ok_or_else(|| {
                err(
                    file,
                    0,
                    Some(key),
                    format!("missing or not a whole number ≥ 0; {FIX_FOLDER}"),
                )
            })
    };
    let text = |key: &str| -> Result<String, CompareError> {
        v.get(key)
            .and_then(serde_json::Value::as_str)
            .map(str::to_string)
            .ok_or_else(|| {
                err(
                    file,
                    0,
                    Some(key),
                    format!("missing or not text; {FIX_FOLDER}"),
                )
            })
    };
    Ok(Headline {
        scenario: text("scenario")?,
        week_start: text("week_start")?,
        objective: num("objective")?,
        lp_bound: num("lp_bound")?,
        supply_vials: count("supply_vials")?,
        shipped_vials: count("shipped_vials")?,
        sites_served: count("sites_served")?,
        requests_served: count("requests_served")?,
        wasps_expected_alive: num("wasps_expected_alive")?,
    })
}

/// Rows of a CSV file of a plan folder, or every problem found; a problem about the file's
/// shape (no value to quote: a missing column, an unreadable row) also says what to give.
fn rows<R: CsvRow>(file: &Path, bytes: &[u8]) -> Result<Vec<R>, CompareError> {
    let read = csvread::read::<R>(&file.display().to_string(), bytes);
    if read.problems.is_empty() {
        return Ok(read.rows.into_iter().map(|(_, r)| r).collect());
    }
    let mut problems = read.problems;
    for p in &mut problems {
        if p.value.is_none() {
            p.message = format!("{}; {FIX_FOLDER}", p.message);
        }
    }
    Err(CompareError::new(problems))
}

/// Parses `manifest.csv`; `file` names it in errors.
pub fn parse_manifest(file: &Path, bytes: &[u8]) -> Result<Vec<ManifestRecord>, CompareError> {
    rows(file, bytes)
}

/// Parses `allocation.csv`; `file` names it in errors.
pub fn parse_allocation(file: &Path, bytes: &[u8]) -> Result<Vec<AllocationRecord>, CompareError> {
    rows(file, bytes)
}

/// A site served in one plan and not the other.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SiteChange {
    /// Site id.
    pub site_id: String,
    /// `block` or `dooryard`.
    pub site_kind: String,
    /// Vials delivered in plan A.
    pub vials_a: u64,
    /// Vials delivered in plan B.
    pub vials_b: u64,
    /// Why the plan without vials left it out (`allocation.csv` `reason`), when it says.
    pub reason: String,
}

/// Vials one facility sends on one day, in each plan.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FacilityDay {
    /// Facility id.
    pub facility_id: String,
    /// Dispatch date, ISO 8601.
    pub dispatch_date: String,
    /// Vials in plan A.
    pub vials_a: u64,
    /// Vials in plan B.
    pub vials_b: u64,
    /// `vials_b − vials_a`.
    pub change: i64,
}

/// A figure in both plans.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Change {
    /// Figure name (a `summary.json` key).
    pub name: &'static str,
    /// Plan A's value.
    pub a: f64,
    /// Plan B's value.
    pub b: f64,
    /// `b − a`.
    pub change: f64,
}

/// The comparison of plan B against plan A.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Comparison {
    /// Folder of plan A.
    pub plan_a: String,
    /// Folder of plan B.
    pub plan_b: String,
    /// Whether nothing differs: same sites, same vials per site, facility and day, same
    /// headline figures.
    pub no_change: bool,
    /// Headline figures (objective, lp_bound, vials, sites, wasps).
    pub figures: Vec<Change>,
    /// Served in B only, by site id.
    pub sites_gained: Vec<SiteChange>,
    /// Served in A only, by site id.
    pub sites_lost: Vec<SiteChange>,
    /// Served in both with a different number of vials.
    pub sites_changed: Vec<SiteChange>,
    /// Every (facility, day) with vials in either plan, sorted.
    pub vials_by_facility_day: Vec<FacilityDay>,
    /// Differences worth a look (e.g. another scenario or week).
    pub notes: Vec<String>,
}

/// Delivered vials and kind per served site.
fn per_site(p: &PlanOutputs) -> BTreeMap<&str, (u64, &str)> {
    let mut m: BTreeMap<&str, (u64, &str)> = BTreeMap::new();
    for r in &p.manifest {
        let e = m
            .entry(r.site_id.as_str())
            .or_insert((0, r.site_kind.as_str()));
        e.0 += u64::from(r.vials);
    }
    m.retain(|_, v| v.0 > 0);
    m
}

/// `allocation.csv` reason per site id.
fn reason_of(p: &PlanOutputs) -> BTreeMap<&str, &str> {
    p.allocation
        .iter()
        .map(|r| (r.site_id.as_str(), r.reason.as_str()))
        .collect()
}

/// Delivered vials per (facility id, dispatch date).
fn by_day(p: &PlanOutputs) -> BTreeMap<(&str, NaiveDate), u64> {
    let mut m: BTreeMap<(&str, NaiveDate), u64> = BTreeMap::new();
    for r in &p.manifest {
        *m.entry((r.facility_id.as_str(), r.dispatch_date))
            .or_insert(0) += u64::from(r.vials);
    }
    m
}

/// Compares plan B against plan A. O(rows · log rows).
pub fn compare(a: &PlanOutputs, b: &PlanOutputs) -> Comparison {
    let (sa, sb) = (per_site(a), per_site(b));
    let (ra, rb) = (reason_of(a), reason_of(b));
    let mut gained = Vec::new();
    let mut lost = Vec::new();
    let mut changed = Vec::new();
    let ids: BTreeSet<&str> = sa.keys().chain(sb.keys()).copied().collect();
    for id in ids {
        let (va, ka) = sa.get(id).copied().unwrap_or((0, ""));
        let (vb, kb) = sb.get(id).copied().unwrap_or((0, ""));
        let kind = if ka.is_empty() { kb } else { ka };
        let change = |reason: &str| SiteChange {
            site_id: id.to_string(),
            site_kind: kind.to_string(),
            vials_a: va,
            vials_b: vb,
            reason: reason.to_string(),
        };
        match (va > 0, vb > 0) {
            (true, false) => lost.push(change(rb.get(id).copied().unwrap_or(""))),
            (false, true) => gained.push(change(ra.get(id).copied().unwrap_or(""))),
            (true, true) if va != vb => changed.push(change("")),
            _ => {}
        }
    }
    let (da, db) = (by_day(a), by_day(b));
    let keys: BTreeSet<(&str, NaiveDate)> = da.keys().chain(db.keys()).copied().collect();
    let days: Vec<FacilityDay> = keys
        .into_iter()
        .map(|k| {
            let (x, y) = (
                da.get(&k).copied().unwrap_or(0),
                db.get(&k).copied().unwrap_or(0),
            );
            FacilityDay {
                facility_id: k.0.to_string(),
                dispatch_date: k.1.to_string(),
                vials_a: x,
                vials_b: y,
                change: y as i64 - x as i64,
            }
        })
        .collect();
    let (ha, hb) = (&a.headline, &b.headline);
    // Rounded as summary.json rounds its figures, so `--json` never prints float noise such as
    // -430085.4184689999.
    let fig = |name: &'static str, x: f64, y: f64| Change {
        name,
        a: x,
        b: y,
        change: crate::output::round_to(y - x, 6),
    };
    let figures = vec![
        fig("objective", ha.objective, hb.objective),
        fig("lp_bound", ha.lp_bound, hb.lp_bound),
        fig(
            "supply_vials",
            ha.supply_vials as f64,
            hb.supply_vials as f64,
        ),
        fig(
            "shipped_vials",
            ha.shipped_vials as f64,
            hb.shipped_vials as f64,
        ),
        fig(
            "sites_served",
            ha.sites_served as f64,
            hb.sites_served as f64,
        ),
        fig(
            "requests_served",
            ha.requests_served as f64,
            hb.requests_served as f64,
        ),
        fig(
            "wasps_expected_alive",
            ha.wasps_expected_alive,
            hb.wasps_expected_alive,
        ),
    ];
    let mut notes = Vec::new();
    if ha.scenario != hb.scenario {
        notes.push(format!(
            "the plans are of different scenarios ('{}' and '{}')",
            ha.scenario, hb.scenario
        ));
    }
    if ha.week_start != hb.week_start {
        notes.push(format!(
            "the plans are of different weeks ({} and {})",
            ha.week_start, hb.week_start
        ));
    }
    for (h, p) in [(ha, a), (hb, b)] {
        let served = per_site(p).len() as u64;
        if served != h.sites_served {
            notes.push(format!(
                "{}: manifest.csv serves {served} sites but summary.json says {}; the folder may \
                 mix files of two runs",
                p.dir.display(),
                h.sites_served
            ));
        }
    }
    let no_change = gained.is_empty()
        && lost.is_empty()
        && changed.is_empty()
        && days.iter().all(|d| d.change == 0)
        && figures.iter().all(|f| f.change == 0.0);
    Comparison {
        plan_a: a.dir.display().to_string(),
        plan_b: b.dir.display().to_string(),
        no_change,
        figures,
        sites_gained: gained,
        sites_lost: lost,
        sites_changed: changed,
        vials_by_facility_day: days,
        notes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "shipment_id,facility_id,dispatch_date,mode,route_id,stop_seq,site_id,site_kind,lat,lon,vials,wasps_packed,wasps_expected_alive,eta,release_by\n";

    fn summary(sites: u64) -> String {
        format!(
            r#"{{"scenario":"S","week_start":"2027-03-01","objective":10.0,"lp_bound":11.0,"supply_vials":9,"shipped_vials":9,"sites_served":{sites},"requests_served":1,"wasps_expected_alive":99.5}}"#
        )
    }

    fn outputs(dir: &str, manifest_rows: &str, sites: u64) -> PlanOutputs {
        let p = Path::new(dir);
        PlanOutputs {
            dir: p.to_path_buf(),
            headline: parse_summary(p, summary(sites).as_bytes()).unwrap(),
            manifest: parse_manifest(p, format!("{HEADER}{manifest_rows}").as_bytes()).unwrap(),
            allocation: parse_allocation(
                p,
                b"site_id,site_kind,priority,eligible,reason,vials,wasps_expected_alive\nB1,block,1,true,,3,1\nB2,block,1,true,below-cutoff,0,0\nR1,dooryard,1,true,,2,1\n",
            )
            .unwrap(),
        }
    }

    const ROWS: &str = "S1,F1,2027-03-02,route,R1,1,B1,block,27,-81,3,510,500.0,2027-03-02T08:00,2027-03-05T06:00\n\
                        S2,F1,2027-03-02,route,R1,2,R1,dooryard,27,-81,2,340,330.5,2027-03-02T08:30,2027-03-05T06:00\n";

    #[test]
    fn identical_plans_compare_as_no_change() {
        let a = outputs("a", ROWS, 2);
        let c = compare(&a, &a.clone());
        assert!(c.no_change, "{c:?}");
        assert!(c.notes.is_empty(), "{:?}", c.notes);
        assert_eq!(c.vials_by_facility_day.len(), 1);
        assert_eq!(c.vials_by_facility_day[0].vials_a, 5);
    }

    #[test]
    fn lost_gained_and_moved_vials_are_listed() {
        let a = outputs("a", ROWS, 2);
        let b_rows = "S1,F2,2027-03-03,route,R1,1,B2,block,27,-81,4,510,500.0,2027-03-03T08:00,2027-03-05T06:00\n\
                      S2,F1,2027-03-02,route,R1,2,R1,dooryard,27,-81,2,340,330.5,2027-03-02T08:30,2027-03-05T06:00\n";
        let b = outputs("b", b_rows, 2);
        let c = compare(&a, &b);
        assert!(!c.no_change);
        assert_eq!(c.sites_lost.len(), 1);
        assert_eq!(c.sites_lost[0].site_id, "B1");
        assert_eq!(c.sites_gained[0].site_id, "B2");
        assert_eq!(
            c.sites_gained[0].reason, "below-cutoff",
            "A's reason for leaving it out"
        );
        let f1 = &c.vials_by_facility_day[0];
        assert_eq!(
            (f1.facility_id.as_str(), f1.vials_a, f1.vials_b, f1.change),
            ("F1", 5, 2, -3)
        );
        let f2 = &c.vials_by_facility_day[1];
        assert_eq!((f2.facility_id.as_str(), f2.change), ("F2", 4));
    }

    #[test]
    fn a_summary_that_disagrees_with_its_manifest_is_noted() {
        let a = outputs("a", ROWS, 7);
        let c = compare(&a, &a.clone());
        assert!(c.notes[0].contains("manifest.csv serves 2 sites but summary.json says 7"));
    }

    #[test]
    fn a_bad_row_of_a_crlf_manifest_names_its_physical_line() {
        let p = Path::new("plan-a/manifest.csv");
        let good = "S1,F1,2027-03-02,route,R1,1,B1,block,27,-81,3,510,500,2027-03-02T08:00,2027-03-05T06:00";
        let bad = good.replace("S1,", "S2,").replace(",3,", ",three,");
        let text = format!("{HEADER}{good}\n{bad}\n").replace('\n', "\r\n");
        let e = parse_manifest(p, text.as_bytes()).unwrap_err();
        assert_eq!(e.problems.len(), 1, "{e}");
        assert_eq!(
            e.problems[0].location,
            crate::scenario::Location::Line(3),
            "{e}"
        );
    }

    #[test]
    fn bad_files_name_file_line_field_and_fix() {
        let p = Path::new("plan-a/manifest.csv");
        let e = parse_manifest(
            p,
            format!("{HEADER}S1,F1,2027-03-02,route,R1,1,B1,block,27,-81,three,510,500,2027-03-02T08:00,2027-03-05T06:00\n")
                .as_bytes(),
        )
        .unwrap_err()
        .to_string();
        assert_eq!(
            e,
            "1 problem:\n  plan-a/manifest.csv:2: field 'vials': value 'three': vials are a \
             whole number ≥ 0"
        );
        let e = parse_manifest(p, b"facility_id,site_id\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("plan-a/manifest.csv:1: field 'dispatch_date': required column is missing"),
            "{e}"
        );
        assert!(
            e.contains("give a folder written by `broodcast plan"),
            "{e}"
        );
        assert!(!e.contains("field 'lat'"), "coordinates are optional: {e}");
        let s = Path::new("plan-a/summary.json");
        let e = parse_summary(s, b"{\"objective\": \"high\"}")
            .unwrap_err()
            .to_string();
        assert!(e.contains("field 'scenario'"), "{e}");
        let e = parse_summary(s, b"{\n\"a\": ").unwrap_err().to_string();
        assert!(
            e.contains("\n  plan-a/summary.json:2: not valid JSON"),
            "{e}"
        );
        let e = read_plan(Path::new("/nonexistent/plan"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("summary.json: file is missing; give a folder written by"),
            "{e}"
        );
    }
}
