//! `ledger report`: season totals as CSV files and one printable HTML page with bar charts.
//!
//! Groupings: by week, by facility, by site kind, and by facility × site kind. The manifest
//! carries no area or region column, so facility × site kind stands in for "area" (each
//! facility serves the sites nearest to it). Only ids, dates and counts appear: no names,
//! addresses, coordinates or notes.
//!
//! `report.html` is a `maud` template: every value spliced into it is HTML-escaped, the bar
//! charts' labels included.

use std::collections::{BTreeMap, BTreeSet};

use chrono::NaiveDate;
use maud::{DOCTYPE, Markup, PreEscaped, html};

use super::{Ledger, LedgerError, Status, parse_date};

/// One stored shipment as the report needs it.
#[derive(Clone, Debug, PartialEq)]
pub struct SeasonShipment {
    /// Monday of the committed week.
    pub week_start: NaiveDate,
    /// Sending facility.
    pub facility_id: String,
    /// Day it left.
    pub dispatch_date: NaiveDate,
    /// Receiving site.
    pub site_id: String,
    /// `block` or `dooryard`.
    pub site_kind: String,
    /// Vials.
    pub vials: u32,
    /// Wasps at packing.
    pub wasps_packed: u64,
    /// Expected live wasps at release.
    pub wasps_expected_alive: f64,
    /// Outcome.
    pub status: Status,
    /// Release date from the confirmation, else the dispatch date (for released shipments).
    pub release_date: NaiveDate,
}

/// What the report is made of: a season's shipments and the dooryard candidates listed by its
/// committed plans.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SeasonData {
    /// The season (calendar year of `week_start`), or `None` for every week in the ledger.
    pub season: Option<i32>,
    /// Committed weeks, sorted.
    pub weeks: Vec<NaiveDate>,
    /// Shipments sorted by (week, dispatch date, facility, site).
    pub shipments: Vec<SeasonShipment>,
    /// (week, request id) of dooryard requests listed in a committed plan's allocation.
    pub candidates: Vec<(NaiveDate, String)>,
}

impl Ledger {
    /// Reads one season (calendar year of the week start), or all of the ledger. O(S log S).
    pub fn season(&self, season: Option<i32>) -> Result<SeasonData, LedgerError> {
        let in_season = |d: &NaiveDate| season.is_none_or(|y| chrono::Datelike::year(d) == y);
        let mut data = SeasonData {
            season,
            ..SeasonData::default()
        };
        let mut q = self
            .conn
            .prepare("SELECT week_start FROM plans ORDER BY week_start")
            .map_err(self.err())?;
        for w in q
            .query_map([], |r| r.get::<_, String>(0))
            .map_err(self.err())?
        {
            if let Some(d) = parse_date(&w.map_err(self.err())?).filter(in_season) {
                data.weeks.push(d);
            }
        }
        let mut q = self
            .conn
            .prepare(
                "SELECT week_start, facility_id, dispatch_date, site_id, site_kind, vials,
                        wasps_packed, wasps_expected_alive, status, released_at
                 FROM shipments ORDER BY week_start, dispatch_date, facility_id, site_id, shipment_id",
            )
            .map_err(self.err())?;
        let rows = q
            .query_map([], |r| {
                Ok((
                    r.get::<_, String>(0)?,
                    r.get::<_, String>(1)?,
                    r.get::<_, String>(2)?,
                    r.get::<_, String>(3)?,
                    r.get::<_, String>(4)?,
                    r.get::<_, u32>(5)?,
                    r.get::<_, i64>(6)?,
                    r.get::<_, f64>(7)?,
                    r.get::<_, String>(8)?,
                    r.get::<_, Option<String>>(9)?,
                ))
            })
            .map_err(self.err())?;
        for row in rows {
            let (week, facility_id, dispatch, site_id, site_kind, vials, packed, alive, st, at) =
                row.map_err(self.err())?;
            let (Some(week_start), Some(dispatch_date), Some(status)) =
                (parse_date(&week), parse_date(&dispatch), Status::parse(&st))
            else {
                continue;
            };
            if !in_season(&week_start) {
                continue;
            }
            let release_date = at
                .as_deref()
                .and_then(|s| parse_date(s.get(..10).unwrap_or(s)))
                .unwrap_or(dispatch_date);
            data.shipments.push(SeasonShipment {
                week_start,
                facility_id,
                dispatch_date,
                site_id,
                site_kind,
                vials,
                wasps_packed: u64::try_from(packed).unwrap_or(0),
                wasps_expected_alive: alive,
                status,
                release_date,
            });
        }
        let mut q = self
            .conn
            .prepare("SELECT week_start, site_id FROM candidates ORDER BY week_start, site_id")
            .map_err(self.err())?;
        for row in q
            .query_map([], |r| Ok((r.get::<_, String>(0)?, r.get::<_, String>(1)?)))
            .map_err(self.err())?
        {
            let (w, site) = row.map_err(self.err())?;
            if let Some(d) = parse_date(&w).filter(in_season) {
                data.candidates.push((d, site));
            }
        }
        Ok(data)
    }
}

/// Sums over a group of shipments.
#[derive(Clone, Debug, Default, PartialEq)]
struct Totals {
    shipments: u64,
    vials: u64,
    wasps_packed: u64,
    wasps_expected_alive: f64,
    by_status: [u64; 4],
    vials_released: u64,
}

const TOTAL_COLUMNS: [&str; 10] = [
    "shipments",
    "vials",
    "wasps_packed",
    "wasps_expected_alive",
    "scheduled",
    "released",
    "not_released",
    "dead_on_arrival",
    "vials_released",
    "share_released",
];

impl Totals {
    fn add(&mut self, s: &SeasonShipment) {
        self.shipments += 1;
        self.vials += u64::from(s.vials);
        self.wasps_packed += s.wasps_packed;
        self.wasps_expected_alive += s.wasps_expected_alive;
        self.by_status[s.status as usize] += 1;
        if s.status == Status::Released {
            self.vials_released += u64::from(s.vials);
        }
    }

    fn cells(&self) -> Vec<String> {
        let share = if self.vials > 0 {
            self.vials_released as f64 / self.vials as f64
        } else {
            0.0
        };
        let mut v = vec![
            self.shipments.to_string(),
            self.vials.to_string(),
            self.wasps_packed.to_string(),
            format!("{:.1}", self.wasps_expected_alive),
        ];
        v.extend(self.by_status.iter().map(u64::to_string));
        v.push(self.vials_released.to_string());
        v.push(format!("{share:.3}"));
        v
    }
}

/// A table: header and rows of cells, written as CSV and as HTML.
struct Table {
    file: &'static str,
    title: &'static str,
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl Table {
    fn grouped<K: Ord>(
        file: &'static str,
        title: &'static str,
        keys: &[&str],
        data: &SeasonData,
        key: impl Fn(&SeasonShipment) -> K,
        cells: impl Fn(&K) -> Vec<String>,
    ) -> Table {
        let mut groups: BTreeMap<K, Totals> = BTreeMap::new();
        for s in &data.shipments {
            groups.entry(key(s)).or_default().add(s);
        }
        let mut header: Vec<String> = keys.iter().map(|k| k.to_string()).collect();
        header.extend(TOTAL_COLUMNS.iter().map(|c| c.to_string()));
        let rows = groups
            .iter()
            .map(|(k, t)| {
                let mut r = cells(k);
                r.extend(t.cells());
                r
            })
            .collect();
        Table {
            file,
            title,
            header,
            rows,
        }
    }

    fn csv(&self) -> Vec<u8> {
        let mut w = csv::Writer::from_writer(Vec::new());
        // Writing to memory cannot fail.
        w.write_record(&self.header).expect("CSV to memory");
        for r in &self.rows {
            w.write_record(r).expect("CSV to memory");
        }
        w.into_inner().expect("CSV to memory")
    }

    fn html(&self) -> Markup {
        html! {
            section {
                h2 { (self.title) }
                p.file { (self.file) }
                table {
                    thead { tr { @for h in &self.header { th { (h) } } } }
                    tbody {
                        @if self.rows.is_empty() {
                            tr { td colspan=(self.header.len()) { "none" } }
                        }
                        @for r in &self.rows {
                            tr { @for c in r { td { (c) } } }
                        }
                    }
                }
            }
            "\n"
        }
    }
}

/// Per block: releases and the shortest gap between two (days).
fn blocks_table(data: &SeasonData) -> Table {
    let mut per: BTreeMap<&str, (u64, u64, u64, Vec<NaiveDate>)> = BTreeMap::new();
    for s in data.shipments.iter().filter(|s| s.site_kind == "block") {
        let e = per.entry(&s.site_id).or_default();
        match s.status {
            Status::Released => {
                e.0 += 1;
                e.2 += u64::from(s.vials);
                e.3.push(s.release_date);
            }
            Status::Scheduled => e.1 += 1,
            _ => {}
        }
    }
    let rows = per
        .into_iter()
        .map(|(id, (released, scheduled, vials, mut dates))| {
            dates.sort_unstable();
            let gap = dates
                .windows(2)
                .map(|w| (w[1] - w[0]).num_days())
                .min()
                .map_or(String::new(), |g| g.to_string());
            vec![
                id.to_string(),
                released.to_string(),
                scheduled.to_string(),
                vials.to_string(),
                dates.first().map_or(String::new(), NaiveDate::to_string),
                dates.last().map_or(String::new(), NaiveDate::to_string),
                gap,
            ]
        })
        .collect();
    Table {
        file: "blocks.csv",
        title: "Releases per block",
        header: [
            "site_id",
            "releases",
            "scheduled",
            "vials_released",
            "first_release",
            "last_release",
            "shortest_gap_days",
        ]
        .map(String::from)
        .to_vec(),
        rows,
    }
}

/// Dooryard requests not yet served: listed by a committed plan, or returned by a
/// not-released or dead-on-arrival shipment, with no scheduled or released shipment. Waiting
/// days run from the first committed week that listed the request to the latest committed
/// week of the season (the ledger never sees `requests.csv`, so `received` is not known here).
fn waiting_table(data: &SeasonData) -> Table {
    let served: BTreeSet<&str> = data
        .shipments
        .iter()
        .filter(|s| s.site_kind == "dooryard" && s.status.counts_as_release())
        .map(|s| s.site_id.as_str())
        .collect();
    let mut first: BTreeMap<&str, (NaiveDate, BTreeSet<NaiveDate>, bool)> = BTreeMap::new();
    for (w, site) in &data.candidates {
        let e = first.entry(site).or_insert((*w, BTreeSet::new(), false));
        e.0 = e.0.min(*w);
        e.1.insert(*w);
    }
    for s in data
        .shipments
        .iter()
        .filter(|s| s.site_kind == "dooryard" && !s.status.counts_as_release())
    {
        let e = first
            .entry(&s.site_id)
            .or_insert((s.week_start, BTreeSet::new(), true));
        e.0 = e.0.min(s.week_start);
        e.1.insert(s.week_start);
        e.2 = true;
    }
    let latest = data.weeks.last().copied();
    let mut rows: Vec<Vec<String>> = first
        .into_iter()
        .filter(|(id, _)| !served.contains(id))
        .map(|(id, (since, weeks, returned))| {
            let days = latest.map_or(0, |l| (l - since).num_days().max(0));
            vec![
                id.to_string(),
                since.to_string(),
                weeks.len().to_string(),
                days.to_string(),
                if returned { "yes" } else { "no" }.to_string(),
            ]
        })
        .collect();
    // Longest wait first, then by id.
    rows.sort_by(|a, b| {
        let d = |r: &Vec<String>| r[3].parse::<i64>().unwrap_or(0);
        d(b).cmp(&d(a)).then_with(|| a[0].cmp(&b[0]))
    });
    Table {
        file: "requests_waiting.csv",
        title: "Requests waiting",
        header: [
            "site_id",
            "first_listed_week",
            "weeks_listed",
            "days_waiting",
            "returned",
        ]
        .map(String::from)
        .to_vec(),
        rows,
    }
}

/// A horizontal bar chart (inline SVG): one bar per label, a darker part for `released`. The
/// bars are written as text (`<rect/>`, numbers only); every label goes through the template.
fn bar_chart(title: &str, bars: &[(String, u64, u64)]) -> Markup {
    let max = bars.iter().map(|b| b.1).max().unwrap_or(0).max(1) as f64;
    let (row_h, label_w, bar_w) = (18.0, 150.0, 420.0);
    let h = row_h * bars.len() as f64 + 30.0;
    html! {
        figure {
            figcaption { (title) }
            svg xmlns="http://www.w3.org/2000/svg" width=(format!("{:.0}", label_w + bar_w + 80.0))
                height=(format!("{h:.0}")) role="img" {
                @for (i, (label, total, released)) in bars.iter().enumerate() {
                    @let y = i as f64 * row_h + 4.0;
                    @let w_all = bar_w * *total as f64 / max;
                    @let w_rel = bar_w * *released as f64 / max;
                    text x=(format!("{:.0}", label_w - 6.0)) y=(format!("{:.1}", y + 12.0))
                        text-anchor="end" font-size="11" { (label) }
                    (PreEscaped(format!(
                        "<rect x=\"{label_w:.0}\" y=\"{y:.1}\" width=\"{w_all:.1}\" height=\"{:.0}\" fill=\"#b9cbe0\"/>\
                         <rect x=\"{label_w:.0}\" y=\"{y:.1}\" width=\"{w_rel:.1}\" height=\"{:.0}\" fill=\"#2f5f8f\"/>",
                        row_h - 4.0,
                        row_h - 4.0,
                    )))
                    text x=(format!("{:.1}", label_w + w_all + 4.0)) y=(format!("{:.1}", y + 12.0))
                        font-size="11" { (total) }
                }
                text x=(format!("{label_w:.0}")) y=(format!("{:.0}", h - 6.0)) font-size="10" {
                    "vials: dark = released, light = all committed"
                }
            }
        }
    }
}

/// The report page's own style, after the shared page rules.
const CSS: &str = "body{font-family:\"DejaVu Sans\",\"Liberation Sans\",Arial,sans-serif;font-size:9.5pt;margin:1.5em;color:#222}\
         h1{font-size:15pt} h2{font-size:11pt;break-after:avoid}\
         table{border-collapse:collapse;margin:.5em 0 1.5em;font-size:8.5pt}\
         thead{display:table-header-group} tr{break-inside:avoid}\
         th,td{border:1px solid #bbb;padding:2px 6px;text-align:right}\
         th:first-child,td:first-child{text-align:left}\
         .file{color:#666;font-size:8pt;margin:0}\
         figure{margin:1em 0;break-inside:avoid} figcaption{font-weight:bold}\
         svg{max-width:100%;height:auto}\
         section{break-inside:avoid} @media print{body{margin:0}}";

/// Renders the season report: `weeks.csv`, `facilities.csv`, `site_kinds.csv`,
/// `facility_site_kinds.csv`, `blocks.csv`, `requests_waiting.csv` and `report.html`, as
/// (file name, bytes) for `output::write_dir_atomically`. Deterministic. O(S log S).
pub fn render_report(data: &SeasonData) -> Vec<(String, Vec<u8>)> {
    let by_week = Table::grouped(
        "weeks.csv",
        "By week",
        &["week_start"],
        data,
        |s| s.week_start,
        |k| vec![k.to_string()],
    );
    let by_facility = Table::grouped(
        "facilities.csv",
        "By facility",
        &["facility_id"],
        data,
        |s| s.facility_id.clone(),
        |k| vec![k.clone()],
    );
    let by_kind = Table::grouped(
        "site_kinds.csv",
        "By site kind",
        &["site_kind"],
        data,
        |s| s.site_kind.clone(),
        |k| vec![k.clone()],
    );
    let by_area = Table::grouped(
        "facility_site_kinds.csv",
        "By facility and site kind (the manifest has no area column)",
        &["facility_id", "site_kind"],
        data,
        |s| (s.facility_id.clone(), s.site_kind.clone()),
        |k| vec![k.0.clone(), k.1.clone()],
    );
    let blocks = blocks_table(data);
    let waiting = waiting_table(data);
    let tables = [by_week, by_facility, by_kind, by_area, blocks, waiting];

    let mut all = Totals::default();
    for s in &data.shipments {
        all.add(s);
    }
    let bars = |t: &Table| -> Vec<(String, u64, u64)> {
        t.rows
            .iter()
            .map(|r| {
                let n = t.header.len() - TOTAL_COLUMNS.len();
                let num = |i: usize| r.get(n + i).and_then(|c| c.parse().ok()).unwrap_or(0);
                (r[..n].join(" "), num(1), num(8))
            })
            .collect()
    };
    let season = data
        .season
        .map_or_else(|| "all weeks".to_string(), |y| format!("season {y}"));
    let first = data.weeks.first().map_or("–".into(), NaiveDate::to_string);
    let last = data.weeks.last().map_or("–".into(), NaiveDate::to_string);
    let page = html! {
        (DOCTYPE)
        html lang="en" {
            head {
                meta charset="utf-8";
                title { "Season report — " (season) }
                // Constant style sheets: raw text, not markup to escape.
                style { (PreEscaped(crate::output::PAGE_CSS)) (PreEscaped(CSS)) }
            }
            body {
                h1 { "Season report — " (season) }
                p {
                    (data.weeks.len()) " committed week(s), " (first) " – " (last) ": "
                    (all.shipments) " shipments, " (all.vials) " vials, " (all.vials_released) " released ("
                    (all.by_status[Status::NotReleased as usize]) " not released, "
                    (all.by_status[Status::DeadOnArrival as usize]) " dead on arrival, "
                    (all.by_status[Status::Scheduled as usize]) " without outcome yet)."
                }
                (bar_chart("Vials per week", &bars(&tables[0])))
                (bar_chart("Vials per facility", &bars(&tables[1])))
                (bar_chart("Vials per facility and site kind", &bars(&tables[3])))
                @for t in &tables { (t.html()) }
                p {
                    "Decision support only: follow the release permits and rules of your jurisdiction; \
                     local extension and licensed pest-control practice decide."
                }
            }
        }
        "\n"
    };
    let mut files: Vec<(String, Vec<u8>)> = tables
        .iter()
        .map(|t| (t.file.to_string(), t.csv()))
        .collect();
    files.push(("report.html".to_string(), page.into_string().into_bytes()));
    files
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ship(week: &str, site: &str, kind: &str, vials: u32, status: Status) -> SeasonShipment {
        let w = parse_date(week).expect("date");
        SeasonShipment {
            week_start: w,
            facility_id: "F<1>".into(),
            dispatch_date: w,
            site_id: site.into(),
            site_kind: kind.into(),
            vials,
            wasps_packed: u64::from(vials) * 500,
            wasps_expected_alive: f64::from(vials) * 400.0,
            status,
            release_date: w,
        }
    }

    /// Markup, ampersands and quotes in a facility id and a site id (the ledger takes them
    /// from a plan folder's manifest) reach the tables and the charts as text.
    #[test]
    fn ids_are_escaped_by_the_template() {
        let hostile = "<script>alert(\"x\")</script> & 'co'";
        let escaped = "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; 'co'";
        let mut s = ship("2027-03-01", hostile, "block", 4, Status::Released);
        s.facility_id = hostile.into();
        let data = SeasonData {
            season: Some(2027),
            weeks: vec![s.week_start],
            shipments: vec![s],
            candidates: Vec::new(),
        };
        let files: BTreeMap<String, String> = render_report(&data)
            .into_iter()
            .map(|(n, b)| (n, String::from_utf8(b).expect("utf8")))
            .collect();
        let html = &files["report.html"];
        assert!(!html.contains("<script>"), "{html}");
        for want in [
            // By facility, and the chart's bar label.
            format!("<tr><td>{escaped}</td><td>1</td>"),
            format!("font-size=\"11\">{escaped}</text>"),
            // Releases per block.
            format!("<tr><td>{escaped}</td><td>1</td><td>0</td><td>4</td>"),
        ] {
            assert!(html.contains(&want), "{want}");
        }
    }

    #[test]
    fn totals_blocks_and_waiting_requests() {
        let data = SeasonData {
            season: Some(2027),
            weeks: vec![
                parse_date("2027-03-01").expect("d"),
                parse_date("2027-03-29").expect("d"),
            ],
            shipments: vec![
                ship("2027-03-01", "B1", "block", 4, Status::Released),
                ship("2027-03-29", "B1", "block", 2, Status::Released),
                ship("2027-03-01", "R1", "dooryard", 2, Status::NotReleased),
                ship("2027-03-01", "R2", "dooryard", 2, Status::Released),
            ],
            candidates: vec![
                (parse_date("2027-03-01").expect("d"), "R3".into()),
                (parse_date("2027-03-01").expect("d"), "R2".into()),
            ],
        };
        let files: BTreeMap<String, String> = render_report(&data)
            .into_iter()
            .map(|(n, b)| (n, String::from_utf8(b).expect("utf8")))
            .collect();
        let weeks = &files["weeks.csv"];
        assert!(
            weeks.contains("2027-03-01,3,8,4000,3200.0,0,2,1,0,6,0.750"),
            "{weeks}"
        );
        let blocks = &files["blocks.csv"];
        assert!(
            blocks.contains("B1,2,0,6,2027-03-01,2027-03-29,28"),
            "{blocks}"
        );
        let waiting = &files["requests_waiting.csv"];
        assert!(waiting.contains("R1,2027-03-01,1,28,yes"), "{waiting}");
        assert!(waiting.contains("R3,2027-03-01,1,28,no"), "{waiting}");
        assert!(
            !waiting.contains("R2"),
            "served request is not waiting: {waiting}"
        );
        let html = &files["report.html"];
        assert!(
            html.contains("F&lt;1&gt;") && !html.contains("F<1>"),
            "escaped"
        );
        assert!(html.contains("<svg"));
    }
}
