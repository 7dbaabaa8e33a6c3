//! Outputs of `plan`: every file of the output contract (`docs/outputs.md`), rendered to bytes, and
//! an atomic directory writer so that a folder is never left half-written.
//!
//! [`render_all`] turns a [`PlanView`] into `(file name, bytes)` pairs; [`write_dir_atomically`]
//! puts them on disk. Rendering is deterministic: floats are written with fixed decimals, rows
//! are sorted, maps are `BTreeMap`s, and no clock or random source is read.
//!
//! Personal data: the only outputs that carry a request's street address are the driver's
//! documents ([`carries_addresses`]: `route-sheets.html`, `labels.html` and the GPX files
//! under [`ROUTES_DIR`]; the driver and dispatcher need it), and not even those when
//! [`RenderOptions::redact`] is set. Analyst outputs (`manifest.*`, `allocation.csv`,
//! `summary.json`, `plan.geojson`, `report.html`, `confirmations.csv`, `day-sheets.html`)
//! carry ids and coordinates only. The scenario never holds names, phones or e-mails.

mod allocation_csv;
mod atomic;
mod binding;
mod cell;
mod confirmations;
mod day_sheets;
#[doc(hidden)]
pub mod fixture;
mod geojson;
mod gpx;
mod labels;
mod manifest;
mod map_layer;
mod report;
mod route_sheets;
mod summary;
mod svg;
mod sweep_chart;
pub mod sweep_report;
pub mod target;

use std::collections::BTreeMap;

use chrono::{NaiveDate, NaiveDateTime};

use crate::allocate::Allocation;
use crate::dispatch::Dispatch;
use crate::scenario::{FacilityIdx, Scenario, SiteIdx};

pub use allocation_csv::{ALLOCATION_COLUMNS, AllocationRecord};
pub use atomic::{write_dir_atomically, write_file_atomically};
pub use binding::{BINDING_COLUMNS, BindingRecord};
pub use confirmations::{CONFIRMATION_COLUMNS, ConfirmationRecord};
pub use labels::LABELS_PER_PAGE;
pub use manifest::{MANIFEST_COLUMNS, ManifestRecord, ManifestRow};
pub use report::MAP_MARKERS_MAX;
pub use route_sheets::ONE_PAGE_STOPS;
pub use target::{OutputFile, OutputFolder, TargetError, WriteError};

/// Everything the outputs are rendered from: the validated scenario and the results of the
/// later stages. Borrowed, never modified.
#[derive(Clone, Copy, Debug)]
pub struct PlanView<'a> {
    /// The validated inputs.
    pub scenario: &'a Scenario,
    /// Site priority, indexed by `SiteIdx` (≥ 0, unitless weight).
    pub priority: &'a [f64],
    /// The whole-vial allocation.
    pub allocation: &'a Allocation,
    /// Routes and parcels that deliver the allocation.
    pub dispatch: &'a Dispatch,
    /// Lines saying what the route feedback moved and why (plain text).
    pub moved: &'a [String],
    /// The same week planned by hand, shown beside the plan when given.
    pub baseline: Option<&'a crate::baseline::Baseline>,
}

impl<'a> PlanView<'a> {
    /// The view of a finished plan: the one place a [`PlanView`] is built from a
    /// [`Plan`](crate::plan::Plan).
    pub fn of(plan: &'a crate::plan::Plan) -> Self {
        PlanView {
            scenario: &plan.scenario,
            priority: &plan.priority,
            allocation: &plan.allocation,
            dispatch: &plan.dispatch,
            moved: &plan.moved,
            baseline: Some(&plan.baseline),
        }
    }

    /// The plan's notes: the allocation's, then the route search's (plain text).
    pub fn notes(&self) -> impl Iterator<Item = &'a String> {
        self.allocation
            .notes
            .iter()
            .map(|n| &n.text)
            .chain(&self.dispatch.notes)
    }
}

/// Why the outputs could not be rendered.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    /// The view does not hang together (an index out of range); a bug in an earlier stage.
    #[error("inconsistent plan: {0}")]
    Inconsistent(String),
    /// Writing CSV failed.
    #[error("writing CSV: {0}")]
    Csv(#[from] csv::Error),
    /// Writing JSON failed.
    #[error("writing JSON: {0}")]
    Json(#[from] serde_json::Error),
    /// A record type does not fit its file's columns (a field that is not one plain cell, or
    /// fields that differ from the column list); a bug, not an input problem.
    #[error("writing a record: {0}")]
    Record(String),
}

/// File names of the output contract, in the order [`render_all`] returns them; the GPX
/// files of the routes follow them, one per route under [`ROUTES_DIR`].
pub const FILE_NAMES: [&str; 11] = [
    "manifest.csv",
    "manifest.json",
    "allocation.csv",
    "summary.json",
    "route-sheets.html",
    "plan.geojson",
    "report.html",
    "binding-constraints.csv",
    "confirmations.csv",
    "day-sheets.html",
    "labels.html",
];

/// Folder of the plan folder that holds one GPX 1.1 file per route,
/// `routes/<route id>.gpx` (characters other than ASCII letters, digits, `-` and `_` in the
/// route id written as `_`).
pub const ROUTES_DIR: &str = "routes";

/// Whether the output file `name` (as [`render_all`] returns it) is a driver's document that
/// may carry a request's street address: `route-sheets.html`, `labels.html` and the GPX
/// files under [`ROUTES_DIR`]. Every other output carries ids and coordinates only.
pub fn carries_addresses(name: &str) -> bool {
    name == "route-sheets.html"
        || name == "labels.html"
        || (name.starts_with(ROUTES_DIR)
            && name[ROUTES_DIR.len()..].starts_with('/')
            && name.ends_with(".gpx"))
}

/// The printed page of every HTML output (`report.html`, `route-sheets.html`, the sweep's
/// and the season's `report.html`): US Letter, portrait, 12 mm margins. Layouts keep to the
/// narrower A4 text width (186 mm), so a sheet printed on A4 loses nothing.
pub const PAGE_SIZE: &str = "Letter portrait, 12 mm margins";

/// The `@page` rule that sets [`PAGE_SIZE`]; every HTML output starts its stylesheet with it.
pub const PAGE_CSS: &str = "@page { size: letter portrait; margin: 12mm; }\n";

/// The cautions shown on every route sheet and in the report (common practice: permits,
/// insecticide re-entry intervals, heat in vehicles; each defers to local rules).
pub const CAUTIONS: [&str; 4] = [
    "Follow the release permits and local rules of your jurisdiction.",
    "Do not enter a treated block before its re-entry interval ends.",
    "Keep vials shaded and cool in transit; never leave them in a closed vehicle in the sun.",
    "This plan is decision support: local extension and licensed pest-control practice decide.",
];

/// Choices about how the outputs are written that do not change the plan.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct RenderOptions {
    /// Withhold request street addresses from the driver's documents, the only outputs that
    /// carry them ([`carries_addresses`]), so that they can be shared (e.g. with a contractor
    /// or for review). Each dooryard stop and parcel label then reads "address withheld" with
    /// the request id and coordinates; the layout stays the same.
    pub redact: bool,
}

/// Renders every output file: `(file name, bytes)` in [`FILE_NAMES`] order, then the GPX
/// file of each route in route order, with the default [`RenderOptions`] (addresses on the
/// driver's documents).
///
/// Cost: O(S + R·k + P) for S sites, R routes of k stops and P parcels, plus sorting.
///
/// # Errors
/// [`OutputError::Inconsistent`] when a stop, parcel or outcome points at a site, shipment,
/// facility or vehicle that does not exist; CSV/JSON errors otherwise (not expected for
/// in-memory writers).
pub fn render_all(view: &PlanView) -> Result<Vec<(String, Vec<u8>)>, OutputError> {
    render_all_with(view, &RenderOptions::default())
}

/// [`render_all`] with explicit [`RenderOptions`].
///
/// # Errors
/// As [`render_all`].
pub fn render_all_with(
    view: &PlanView,
    options: &RenderOptions,
) -> Result<Vec<(String, Vec<u8>)>, OutputError> {
    let plan = Delivered::build(view)?;
    let files = vec![
        ("manifest.csv", manifest::csv(&plan.rows)?),
        ("manifest.json", manifest::json(view, &plan)?),
        ("allocation.csv", allocation_csv::render(view, &plan)?),
        ("summary.json", summary::render(view, &plan)?),
        (
            "route-sheets.html",
            route_sheets::render(view, &plan, options.redact)?,
        ),
        ("plan.geojson", geojson::render(view, &plan)?),
        ("report.html", report::render(view, &plan)?),
        ("binding-constraints.csv", binding::render(view)?),
        ("confirmations.csv", confirmations::render(&plan)?),
        ("day-sheets.html", day_sheets::render(view, &plan)?),
        ("labels.html", labels::render(view, &plan, options.redact)?),
    ];
    let mut out: Vec<(String, Vec<u8>)> =
        files.into_iter().map(|(n, b)| (n.to_string(), b)).collect();
    out.extend(gpx::render_all(view, &plan, options.redact)?);
    Ok(out)
}

/// What actually gets delivered: the manifest rows and per-site totals, computed once and
/// shared by every renderer so that all files agree.
pub(crate) struct Delivered {
    /// One row per delivered shipment, sorted by (dispatch date, mode, route, stop, site).
    pub rows: Vec<ManifestRow>,
    /// Per site (indexed by `SiteIdx`): delivered vials, wasps, facility ids and route ids.
    pub per_site: Vec<SiteDelivery>,
    /// Per (facility, pack date): delivered vials.
    pub used_by_pack_day: BTreeMap<(FacilityIdx, NaiveDate), u64>,
    /// Index into `rows` of each delivered shipment, by index into `Allocation::shipments`.
    pub shipment_row: BTreeMap<usize, usize>,
}

/// Delivered totals for one site.
#[derive(Clone, Debug, Default)]
pub(crate) struct SiteDelivery {
    /// Vials delivered.
    pub vials: u64,
    /// Expected live wasps at release.
    pub wasps_expected_alive: f64,
    /// Facility ids that sent them (sorted, unique).
    pub facilities: Vec<String>,
    /// Route ids that carried them (sorted, unique).
    pub routes: Vec<String>,
}

impl Delivered {
    fn build(view: &PlanView) -> Result<Self, OutputError> {
        let rows = manifest::rows(view)?;
        let sc = view.scenario;
        let mut per_site = vec![SiteDelivery::default(); sc.sites.len()];
        let mut used_by_pack_day = BTreeMap::new();
        let mut shipment_row = BTreeMap::new();
        for (i, r) in rows.iter().enumerate() {
            shipment_row.insert(r.shipment, i);
            let d = per_site.get_mut(r.site).ok_or_else(|| bad_site(r.site))?;
            d.vials += u64::from(r.vials);
            d.wasps_expected_alive += r.wasps_expected_alive;
            push_unique(&mut d.facilities, &r.facility_id);
            if let Some(route) = &r.route_id {
                push_unique(&mut d.routes, route);
            }
            *used_by_pack_day
                .entry((r.facility, r.pack_date))
                .or_insert(0) += u64::from(r.vials);
        }
        Ok(Delivered {
            rows,
            per_site,
            used_by_pack_day,
            shipment_row,
        })
    }

    /// The manifest row of a delivered shipment (index into `Allocation::shipments`).
    pub fn row_of(&self, shipment: usize) -> Result<&ManifestRow, OutputError> {
        self.shipment_row
            .get(&shipment)
            .and_then(|&i| self.rows.get(i))
            .ok_or_else(|| {
                OutputError::Inconsistent(format!("shipment index {shipment} has no manifest row"))
            })
    }

    /// Vials delivered, all rows.
    pub fn shipped_vials(&self) -> u64 {
        self.rows.iter().map(|r| u64::from(r.vials)).sum()
    }

    /// Expected live wasps delivered, all rows.
    pub fn wasps_expected_alive(&self) -> f64 {
        self.rows.iter().map(|r| r.wasps_expected_alive).sum()
    }

    /// Expected live wasps delivered to the top priority quarter of the eligible sites
    /// ([`crate::baseline::top_quarter`], the report's top band).
    pub fn top_quarter_wasps(&self, view: &PlanView) -> f64 {
        let eligible: Vec<bool> = (0..self.per_site.len())
            .map(|s| view.allocation.sites.get(s).is_some_and(|o| o.eligible))
            .collect();
        let priority: Vec<f64> = (0..self.per_site.len())
            .map(|s| priority_of(view, s))
            .collect();
        let top = crate::baseline::top_quarter(&eligible, &priority);
        self.per_site
            .iter()
            .zip(&top)
            .filter(|(_, t)| **t)
            .map(|(d, _)| d.wasps_expected_alive)
            .sum()
    }

    /// Whether a site received at least one vial.
    pub fn served(&self, site: SiteIdx) -> bool {
        self.per_site.get(site).is_some_and(|d| d.vials > 0)
    }

    /// The reason code for a site that got nothing delivered (`None` when served): the
    /// allocation's reason; `undeliverable` when vials were allocated but no route or parcel
    /// carries them; `below-cutoff` when the allocation gave no reason and no vials.
    pub fn reason(&self, view: &PlanView, site: SiteIdx) -> Option<&'static str> {
        use crate::eligibility::Reason;
        if self.served(site) {
            return None;
        }
        let outcome = view.allocation.sites.get(site);
        Some(match outcome {
            Some(o) if o.vials > 0 => Reason::Undeliverable.code(),
            Some(o) => o.reason.unwrap_or(Reason::BelowCutoff).code(),
            None => Reason::BelowCutoff.code(),
        })
    }
}

/// A site's priority: the view's, else the allocation's outcome, else 0.
pub(crate) fn priority_of(view: &PlanView, site: SiteIdx) -> f64 {
    view.priority
        .get(site)
        .copied()
        .or_else(|| view.allocation.sites.get(site).map(|o| o.priority))
        .unwrap_or(0.0)
}

fn push_unique(v: &mut Vec<String>, s: &str) {
    if let Err(pos) = v.binary_search_by(|x| x.as_str().cmp(s)) {
        v.insert(pos, s.to_string());
    }
}

/// The depot and vehicle of route `r`, or an internal-consistency error naming the route.
pub(crate) fn route_depot_vehicle<'s>(
    sc: &'s Scenario,
    r: &crate::dispatch::Route,
) -> Result<(&'s crate::scenario::Facility, &'s crate::scenario::Vehicle), OutputError> {
    let depot = sc.facilities.get(r.depot).ok_or_else(|| {
        OutputError::Inconsistent(format!(
            "route {}: depot index {} is out of range",
            r.id, r.depot
        ))
    })?;
    let vehicle = sc.fleet.get(r.vehicle).ok_or_else(|| {
        OutputError::Inconsistent(format!(
            "route {}: vehicle index {} is out of range",
            r.id, r.vehicle
        ))
    })?;
    Ok((depot, vehicle))
}

/// A scenario's name with its week, for titles: "name — week of Monday", or the name alone
/// when it already holds the Monday's date (the demo's "Pellwether County — week of
/// 2027-03-01"), so that no title says the week twice.
///
/// ```
/// use broodcast::output::week_title;
/// let monday = chrono::NaiveDate::from_ymd_opt(2027, 3, 1).unwrap();
/// assert_eq!(week_title("North", monday), "North — week of 2027-03-01");
/// assert_eq!(week_title("North — week of 2027-03-01", monday), "North — week of 2027-03-01");
/// ```
pub fn week_title(name: &str, week_start: NaiveDate) -> String {
    let date = week_start.to_string();
    if name.contains(&date) {
        name.to_string()
    } else {
        format!("{name} — week of {date}")
    }
}

/// The opening of a printable week document, up to and including `<body>`: its title is
/// "`kind` — [`week_title`]", with " — addresses withheld" when `redact`, and its style the
/// shared page rules plus `css`.
pub(crate) fn week_page_head(sc: &Scenario, kind: &str, redact: bool, css: &str) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{kind} — {}{}</title>\n<style>{}{css}</style>\n</head>\n<body>\n",
        esc(&week_title(&sc.name, sc.week_start)),
        if redact {
            " — addresses withheld"
        } else {
            ""
        },
        PAGE_CSS
    )
}

pub(crate) fn bad_site(i: SiteIdx) -> OutputError {
    OutputError::Inconsistent(format!("site index {i} is out of range"))
}

/// ISO 8601 local time to the minute, e.g. `2027-03-02T10:15`.
pub(crate) fn iso_minutes(t: NaiveDateTime) -> String {
    t.format("%Y-%m-%dT%H:%M").to_string()
}

/// Clock time `HH:MM`.
pub(crate) fn hhmm(t: NaiveDateTime) -> String {
    t.format("%H:%M").to_string()
}

/// Rounds to `decimals` places so that JSON writes a fixed, short number; non-finite → 0
/// (outputs must never carry NaN or infinity, which JSON and GeoJSON cannot hold).
pub(crate) fn round_to(x: f64, decimals: i32) -> f64 {
    if !x.is_finite() {
        return 0.0;
    }
    let k = 10f64.powi(decimals);
    let r = (x * k).round() / k;
    // Avoid "-0.0" in outputs.
    if r == 0.0 { 0.0 } else { r }
}

/// Fixed-decimal text for CSV and HTML (`-0.00` written as `0.00`; non-finite as `0`).
pub(crate) fn fixed(x: f64, decimals: usize) -> String {
    let r = round_to(x, decimals as i32);
    format!("{r:.decimals$}")
}

/// CSV bytes: `columns` as the header, then each record's cells ([`cell::record`]). A record
/// whose field names are not `columns`, in order, is an error: the record type and its column
/// list are one contract.
fn write_csv<R: serde::Serialize>(
    columns: &[&str],
    records: impl IntoIterator<Item = R>,
) -> Result<Vec<u8>, OutputError> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(columns)?;
    for r in records {
        let cells = cell::record(&r)?;
        if !cells.iter().map(|(k, _)| *k).eq(columns.iter().copied()) {
            let fields: Vec<&str> = cells.iter().map(|(k, _)| *k).collect();
            return Err(OutputError::Record(format!(
                "the record's fields {} are not the columns {}",
                fields.join(","),
                columns.join(",")
            )));
        }
        w.write_record(cells.iter().map(|(_, v)| v))?;
    }
    w.into_inner()
        .map_err(|e| OutputError::Csv(csv::Error::from(e.into_error())))
}

/// HTML-escapes text for element content and quoted attribute values.
pub(crate) fn esc(s: &str) -> String {
    html_escape::encode_quoted_attribute(s).into_owned()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_never_writes_negative_zero_or_nan() {
        assert_eq!(fixed(-0.0001, 2), "0.00");
        assert_eq!(fixed(f64::NAN, 1), "0.0");
        assert_eq!(fixed(2.345, 1), "2.3");
        assert_eq!(round_to(f64::INFINITY, 3), 0.0);
    }

    #[test]
    fn esc_escapes_markup_and_quotes() {
        assert_eq!(
            esc("<a href=\"x\">&'"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#x27;"
        );
    }

    #[test]
    fn allocated_but_not_delivered_reads_undeliverable() {
        let mut p = fixture::tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        assert_eq!(plan.reason(&v, 2), Some("undeliverable"), "B3");
        assert_eq!(plan.reason(&v, 3), Some("no-flush"), "B4");
        assert_eq!(plan.reason(&v, 0), None, "B1 is served");
        // An outcome with neither vials nor reason: eligible but left out.
        p.allocation.sites[2].vials = 0;
        let v = p.view();
        assert_eq!(plan.reason(&v, 2), Some("below-cutoff"));
    }

    #[test]
    fn non_finite_numbers_never_reach_json() {
        let mut p = fixture::tiny_plan();
        p.priority[0] = f64::NAN;
        p.allocation.lp_bound = f64::INFINITY;
        p.dispatch.routes[0].stops[0].wasps_expected_alive = f64::NAN;
        let files = render_all(&p.view()).unwrap();
        // serde_json would write NaN and infinity as null; every field must stay a number.
        let summary: serde_json::Value = serde_json::from_slice(&files[3].1).unwrap();
        assert!(summary["lp_bound"].is_f64(), "{}", summary["lp_bound"]);
        let manifest: serde_json::Value = serde_json::from_slice(&files[1].1).unwrap();
        for row in manifest["rows"].as_array().unwrap() {
            assert!(row["wasps_expected_alive"].is_number(), "{row}");
        }
        let gj: serde_json::Value = serde_json::from_slice(&files[5].1).unwrap();
        assert_eq!(gj["features"][0]["properties"]["priority"], 0.0);
    }

    #[test]
    fn render_all_returns_every_contract_file_in_order() {
        let p = fixture::tiny_plan();
        let files = render_all(&p.view()).expect("renders");
        let names: Vec<&str> = files.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(names[..FILE_NAMES.len()], FILE_NAMES);
        assert_eq!(
            names[FILE_NAMES.len()..],
            ["routes/R-F1-20270302-1.gpx", "routes/R-F2-20270304-1.gpx"]
        );
        assert!(files.iter().all(|(_, b)| !b.is_empty()));
        for n in names {
            let driver = matches!(n, "route-sheets.html" | "labels.html") || n.ends_with(".gpx");
            assert_eq!(carries_addresses(n), driver, "{n}");
        }
        assert!(!carries_addresses("routes.gpx") && !carries_addresses("x/routes/a.gpx"));
    }
}
