//! `report.html`: the coordinator's printable week report, two or three printed pages at any
//! week size. In order: a headline in plain words (vials shipped of supply, sites served, the
//! main reason eligible sites got nothing), a map, supply used per facility and day, service by
//! priority band, why sites got nothing, the unserved eligible sites worth a look, the value of
//! one more vial per facility, the week's binding limits summarised by kind (the full list is
//! `binding-constraints.csv`), notes and the cautions.
//!
//! Every list is capped so the page count does not grow with the week: the map switches from
//! one marker per site to a grid of cells past [`MAP_MARKERS_MAX`] sites, and long lists show
//! their first rows and say where the rest are.
//!
//! No homeowner personal data: requests appear by id and position only, never by address.
//!
//! The page is a `maud` template: every value spliced into it is HTML-escaped. The map and the
//! supply chart are SVG written by hand (their facility ids escaped with [`super::esc`]) and
//! enter the template as they are.

use std::collections::BTreeMap;
use std::fmt::Write;

use chrono::NaiveDate;
use maud::{DOCTYPE, Markup, PreEscaped, html};

use super::binding::{self, Kind};
use super::svg::{Frame, f1};
use super::{
    CAUTIONS, Delivered, OutputError, PAGE_CSS, PlanView, esc, fixed, priority_of, round_to,
};
use crate::allocate::Allocation;
use crate::geodesy::distance_m;
use crate::scenario::SiteKind;

/// Past this many candidate sites the map draws a grid of cells coloured by what happened to
/// the sites in each cell, instead of one marker per site (markers overlap into a solid blob
/// well before 35,000 sites).
pub const MAP_MARKERS_MAX: usize = 1_500;

/// Rows shown of the unserved eligible sites, of the notes and of the route-feedback moves.
const LIST_ROWS: usize = 10;

const CSS: &str = r#"
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9pt; color: #000; margin: 0; }
h1 { font-size: 15pt; margin: 0 0 1mm 0; }
h2 { font-size: 11pt; margin: 4mm 0 1.2mm 0; border-bottom: 0.3mm solid #999; break-after: avoid; }
section { break-inside: avoid; }
p { margin: 1mm 0; }
.muted { color: #555; }
.small { font-size: 8pt; }
.headline { border: 0.5mm solid #3a7d2c; padding: 2mm 3mm; margin: 2mm 0; }
.headline p { margin: 0.6mm 0; font-size: 10pt; }
.headline p.main { font-size: 11pt; font-weight: bold; }
.figures { display: flex; gap: 2mm; margin: 2mm 0; }
.fig { border: 0.3mm solid #999; padding: 1.2mm 2.5mm; flex: 1; }
.fig .n { font-size: 13pt; font-weight: bold; white-space: nowrap; }
.fig .l { font-size: 7.5pt; color: #444; }
table { border-collapse: collapse; width: 100%; }
th, td { border: 0.3mm solid #bbb; padding: 0.6mm 1.3mm; text-align: left; vertical-align: top; }
th { background: #eee; font-size: 8pt; }
td { font-size: 8.5pt; }
td.num, th.num { text-align: right; white-space: nowrap; }
.nw { white-space: nowrap; }
.bar { display: inline-block; height: 2.6mm; background: #3a7d2c; vertical-align: middle; }
.bar.unmet { background: #d9a441; }
svg { width: 100%; height: auto; display: block; }
.map { border: 0.3mm solid #999; }
.legend { display: flex; flex-wrap: wrap; gap: 1mm 5mm; font-size: 8pt; margin: 1mm 0 0 0; }
.legend svg { display: inline-block; width: 4mm; height: 4mm; vertical-align: middle; margin-right: 1mm; }
.two { display: flex; gap: 4mm; }
.two > div { flex: 1; min-width: 0; }
ul { margin: 0.5mm 0 0 5mm; padding: 0; }
li { margin: 0.2mm 0; }
"#;

/// Colours per facility for the bar chart (cycled).
const PALETTE: [&str; 6] = [
    "#1f4e9c", "#c0392b", "#2e8b57", "#8e44ad", "#d35400", "#16a085",
];

/// Served green, eligible-unserved orange, ineligible grey (the map and the bars).
const SERVED: &str = "#3a7d2c";
const UNMET: &str = "#d9a441";
const INELIGIBLE: &str = "#999";

/// Reasons an eligible site can get nothing: the ones worth a coordinator's look.
const WORTH_A_LOOK: [&str; 3] = ["below-cutoff", "out-of-reach", "undeliverable"];

/// A reason code in plain words.
fn plain_reason(code: &str) -> &'static str {
    match code {
        "no-flush" => "block not flushing (no new leaves for the wasps)",
        "insecticide-window" => "insecticide applied too recently",
        "no-host-plant" => "no host plant at the address",
        "uses-insecticide" => "household uses insecticide",
        "forbidden" => "forbidden by an override",
        "out-of-reach" => "no facility gets live wasps there in time",
        "low-priority" => "no pest pressure nearby (priority 0)",
        "below-cutoff" => "eligible, but the vials went to higher-value sites",
        "undeliverable" => "vials allocated, but no route or parcel could carry them",
        "already-served" => "request already served this season",
        "released-recently" => "block released too recently (re-release interval)",
        _ => "other",
    }
}

/// What the headline and the sections share, computed once. O(S log S + B).
struct Week<'a> {
    supply: u64,
    shipped: u64,
    /// (served, candidates) of blocks and of requests.
    blocks: (usize, usize),
    requests: (usize, usize),
    /// Per reason code: (blocks, requests) that got nothing.
    reasons: BTreeMap<&'static str, (usize, usize)>,
    /// Unserved sites with a reason in [`WORTH_A_LOOK`]: (site, priority, reason), highest
    /// priority first.
    worth_a_look: Vec<(usize, f64, &'static str)>,
    /// Lowest priority among served sites.
    lowest_served: Option<f64>,
    /// Binding constraints by kind, largest dual first within a kind.
    binding: BTreeMap<Kind, Vec<binding::Parsed<'a>>>,
}

impl<'a> Week<'a> {
    fn build(view: &PlanView<'a>, plan: &Delivered) -> Self {
        let sc = view.scenario;
        let mut w = Week {
            supply: sc.total_supply_vials(),
            shipped: plan.shipped_vials(),
            blocks: (0, 0),
            requests: (0, 0),
            reasons: BTreeMap::new(),
            worth_a_look: Vec::new(),
            lowest_served: None,
            binding: BTreeMap::new(),
        };
        for (i, site) in sc.sites.iter().enumerate() {
            let tally = match site.kind() {
                SiteKind::Block => &mut w.blocks,
                SiteKind::Dooryard => &mut w.requests,
            };
            tally.1 += 1;
            let p = priority_of(view, i);
            match plan.reason(view, i) {
                None => {
                    tally.0 += 1;
                    w.lowest_served = Some(w.lowest_served.map_or(p, |l: f64| l.min(p)));
                }
                Some(r) => {
                    let e = w.reasons.entry(r).or_insert((0, 0));
                    match site.kind() {
                        SiteKind::Block => e.0 += 1,
                        SiteKind::Dooryard => e.1 += 1,
                    }
                    if WORTH_A_LOOK.contains(&r) {
                        w.worth_a_look.push((i, p, r));
                    }
                }
            }
        }
        w.worth_a_look
            .sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        for b in binding::all(view) {
            w.binding.entry(b.kind).or_default().push(b);
        }
        w
    }

    fn served(&self) -> usize {
        self.blocks.0 + self.requests.0
    }

    fn unserved_with(&self, reason: &str) -> usize {
        self.reasons.get(reason).map_or(0, |(b, d)| b + d)
    }

    fn binds(&self, kind: Kind) -> bool {
        self.binding.get(&kind).is_some_and(|v| !v.is_empty())
    }

    /// The one sentence that says why most eligible sites got nothing.
    fn main_reason(&self, view: &PlanView) -> String {
        let (reason, n) = WORTH_A_LOOK
            .iter()
            .map(|r| (*r, self.unserved_with(r)))
            .max_by_key(|(r, n)| (*n, std::cmp::Reverse(*r)))
            .unwrap_or(("", 0));
        if n == 0 {
            return "Every eligible site with pest pressure was served.".to_string();
        }
        let sites = count(n, "eligible site", "eligible sites");
        match reason {
            "below-cutoff" => {
                let below = self
                    .worth_a_look
                    .iter()
                    .filter(|(_, p, r)| {
                        *r == "below-cutoff" && self.lowest_served.is_some_and(|l| *p < l)
                    })
                    .count();
                let ranked = if below == n {
                    ", all ranked below the last one served".to_string()
                } else if below > 0 {
                    format!(
                        ", {} of them ranked below the last one served",
                        int(below as u64)
                    )
                } else {
                    String::new()
                };
                if self.binds(Kind::Supply) || (self.supply > 0 && self.shipped >= self.supply) {
                    format!("Supply ran out: {sites} got nothing{ranked}.")
                } else if self.binds(Kind::DooryardShare) {
                    format!(
                        "The dooryard share floor ({} % of vials to requests) held block vials back: {sites} got nothing while {} vials stayed at the facilities.",
                        fixed(100.0 * view.scenario.policy.dooryard_share_min, 0),
                        int(self.supply.saturating_sub(self.shipped))
                    )
                } else if self.binds(Kind::Vehicles) {
                    format!("Vehicle capacity ran out: {sites} got nothing{ranked}.")
                } else {
                    format!(
                        "{} got nothing: their vials would earn less than the travel to them costs{ranked}.",
                        capitalise(&sites)
                    )
                }
            }
            "out-of-reach" => format!(
                "Out of reach: {sites} got nothing because no facility gets live wasps there in time (shelf life, shifts, access hours, parcel days)."
            ),
            _ => format!(
                "Delivery failed: {sites} were allocated vials that no route or parcel could carry."
            ),
        }
    }
}

pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let al = view.allocation;
    let week = Week::build(view, plan);
    let name = super::week_title(&sc.name, sc.week_start);
    let pct = |a: u64, b: u64| {
        if b > 0 {
            fixed(100.0 * a as f64 / b as f64, 0)
        } else {
            "0".into()
        }
    };
    let eligible: usize = WORTH_A_LOOK
        .iter()
        .map(|r| week.unserved_with(r))
        .sum::<usize>()
        + week.served();
    let ineligible = sc.sites.len() - eligible - week.unserved_with("low-priority");
    let wasps = int(plan.wasps_expected_alive().round().max(0.0) as u64);
    let quality = format!(
        "Plan value {} (priority-weighted live wasps); no plan in whole vials can exceed {}, so this one is within {} % of the best. {}, {}{}.",
        int(al.objective.round().max(0.0) as u64),
        int(al.bound.round().max(0.0) as u64),
        fixed(100.0 * al.gap, 2),
        capitalise(&count(view.dispatch.routes.len(), "route", "routes")),
        count(view.dispatch.parcels.len(), "parcel", "parcels"),
        match view.dispatch.undeliverable.len() {
            0 => String::new(),
            n => format!(
                ", {} allocated but undeliverable",
                count(n, "shipment", "shipments")
            ),
        }
    );
    let figures = [
        (
            format!("{} / {}", int(week.shipped), int(week.supply)),
            "vials shipped of supply",
        ),
        (
            format!(
                "{} / {}",
                int(week.blocks.0 as u64),
                int(week.blocks.1 as u64)
            ),
            "grove blocks served of candidates",
        ),
        (
            format!(
                "{} / {}",
                int(week.requests.0 as u64),
                int(week.requests.1 as u64)
            ),
            "dooryard requests served of candidates",
        ),
        (wasps.clone(), "expected live wasps released"),
    ];
    let notes: Vec<String> = view.notes().cloned().collect();
    let lists = [
        ("Notes", &notes[..], "summary.json `notes`"),
        (
            "Moved by route feedback",
            view.moved,
            "summary.json `moved`",
        ),
    ];
    let page = html! {
        (DOCTYPE) "\n"
        html lang="en" {
            "\n"
            head {
                "\n" meta charset="utf-8"; "\n"
                title { "Plan report — " (name) } "\n"
                // Constant style sheets: raw text, not markup to escape.
                style { (PreEscaped(PAGE_CSS)) (PreEscaped(CSS)) } "\n"
            }
            "\n"
            body {
                "\n"
                h1 { "Plan report: " (name) } "\n"
                p.muted {
                    "Agent " (sc.agent.name) " · " (int(sc.sites.len() as u64)) " candidate sites · "
                    (count(sc.facilities.len(), "facility", "facilities"))
                }
                "\n"
                div.headline {
                    p.main { (week.main_reason(view)) }
                    p {
                        (int(week.shipped)) " of " (int(week.supply)) " vials shipped ("
                        (pct(week.shipped, week.supply)) " %) to " (count(week.served(), "site", "sites")) ": "
                        (count(week.blocks.0, "grove block", "grove blocks")) " and "
                        (count(week.requests.0, "dooryard request", "dooryard requests"))
                        "; about " (wasps) " live wasps released."
                    }
                    p {
                        (count(eligible, "site", "sites")) " could get a release this week; "
                        (int(ineligible as u64))
                        " could not (no host plant, insecticide, no flush, overrides) and "
                        (int(week.unserved_with("low-priority") as u64)) " have no pest pressure nearby."
                    }
                    p class="small muted" { (quality) }
                }
                "\n"
                div.figures {
                    @for (n, l) in &figures { div.fig { div.n { (n) } div.l { (l) } } }
                }
                "\n"
                section { h2 { "Map" } "\n" (overview_map(view, plan)) }
                "\n"
                section {
                    h2 { "Supply used per facility and pack day" } "\n"
                    // Hand-written SVG; its facility ids are escaped with `esc`.
                    (PreEscaped(supply_chart(view, plan)))
                }
                "\n"
                (priority_bands(view, plan))
                (against_hand(view, plan))
                (why_not(view, &week))
                (worth_a_look(view, &week))
                (marginal_values(view, plan))
                (limits(view, &week))
                @for (title, lines, rest) in lists {
                    @if !lines.is_empty() {
                        section {
                            h2 { (title) }
                            ul.small {
                                @for l in lines.iter().take(LIST_ROWS) { li { (l) } }
                                @if lines.len() > LIST_ROWS {
                                    li.muted {
                                        "… and " (int((lines.len() - LIST_ROWS) as u64)) " more in " (rest) "."
                                    }
                                }
                            }
                        }
                        "\n"
                    }
                }
                section {
                    h2 { "Cautions" }
                    ul.small { @for c in CAUTIONS { li { (c) } } }
                }
                "\n"
            }
            "\n"
        }
        "\n"
    };
    Ok(page.into_string().into_bytes())
}

/// The map: one marker per site up to [`MAP_MARKERS_MAX`] sites (circle: block, diamond:
/// request; served filled green, unserved eligible open orange, ineligible open grey), else a
/// grid of cells coloured by the share of their eligible sites served. Facilities as labelled
/// squares, scale bar, north arrow; the legend sits under the map, outside the data. O(S + F).
/// The map and the legend's icons are SVG written by hand (facility ids escaped with `esc`);
/// the legend's text is escaped by the template.
fn overview_map(view: &PlanView, plan: &Delivered) -> Markup {
    let sc = view.scenario;
    let (w, hgt) = (700.0, 360.0);
    let mut pts: Vec<_> = sc.sites.iter().map(|s| s.location).collect();
    pts.extend(sc.facilities.iter().map(|f| f.location));
    let frame = Frame::fit(&pts, w, hgt, 30.0, 2.0);
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"map\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {hgt}\" role=\"img\" aria-label=\"Map of sites and facilities\"><rect width=\"{w}\" height=\"{hgt}\" fill=\"#fbfbf7\"/>"
    );
    let ineligible = |i: usize| view.allocation.sites.get(i).is_some_and(|o| !o.eligible);
    let gridded = sc.sites.len() > MAP_MARKERS_MAX;
    if gridded {
        // Cells of CELL px: count served, unserved eligible and ineligible sites in each.
        const CELL: f64 = 10.0;
        let (nx, ny) = ((w / CELL).ceil() as usize, (hgt / CELL).ceil() as usize);
        let mut cells = vec![[0u32; 3]; nx * ny];
        for (i, site) in sc.sites.iter().enumerate() {
            let (x, y) = frame.px(site.location);
            if !(x.is_finite() && y.is_finite()) {
                continue;
            }
            let cx = ((x / CELL).floor().max(0.0) as usize).min(nx - 1);
            let cy = ((y / CELL).floor().max(0.0) as usize).min(ny - 1);
            let k = if plan.served(i) {
                0
            } else if ineligible(i) {
                2
            } else {
                1
            };
            cells[cy * nx + cx][k] += 1;
        }
        for (c, [served, unmet, inel]) in cells.iter().enumerate() {
            let (x, y) = ((c % nx) as f64 * CELL, (c / nx) as f64 * CELL);
            let fill = if served + unmet == 0 {
                if *inel == 0 {
                    continue;
                }
                "#d6d6d6"
            } else {
                let share = f64::from(*served) / f64::from(served + unmet);
                if share >= 0.5 {
                    SERVED
                } else if *served > 0 {
                    "#a9cf8f"
                } else {
                    UNMET
                }
            };
            let _ = write!(
                s,
                "<rect x=\"{}\" y=\"{}\" width=\"{CELL}\" height=\"{CELL}\" fill=\"{fill}\" stroke=\"#fff\" stroke-width=\"0.6\"/>",
                f1(x),
                f1(y)
            );
        }
    } else {
        // Unserved first so served sites draw on top.
        let mut order: Vec<usize> = (0..sc.sites.len()).collect();
        order.sort_by_key(|&i| plan.served(i));
        for i in order {
            let site = &sc.sites[i];
            let (x, y) = frame.px(site.location);
            let (fill, stroke, width) = if plan.served(i) {
                (SERVED, "#fff", 1.0)
            } else if ineligible(i) {
                ("none", INELIGIBLE, 1.2)
            } else {
                ("none", UNMET, 1.8)
            };
            s.push_str(&marker(site.kind(), x, y, fill, stroke, width));
        }
    }
    for f in &sc.facilities {
        let (x, y) = frame.px(f.location);
        let _ = write!(
            s,
            "<rect x=\"{}\" y=\"{}\" width=\"12\" height=\"12\" fill=\"#000\" stroke=\"#fff\"/><text x=\"{}\" y=\"{}\" font-size=\"12\" font-weight=\"bold\" stroke=\"#fff\" stroke-width=\"3\" paint-order=\"stroke\">{}</text>",
            f1(x - 6.0),
            f1(y - 6.0),
            f1(x + 9.0),
            f1(y + 4.0),
            esc(f.id.as_str())
        );
    }
    s.push_str(&frame.furniture());
    s.push_str("</svg>\n");
    let icon = |inner: String| {
        format!("<svg viewBox=\"0 0 14 14\" xmlns=\"http://www.w3.org/2000/svg\">{inner}</svg>")
    };
    let square =
        |fill: &str| format!("<rect x=\"1\" y=\"1\" width=\"12\" height=\"12\" fill=\"{fill}\"/>");
    let mut items: Vec<(String, &str)> = Vec::new();
    if gridded {
        items.push((
            icon(square(SERVED)),
            "half or more of its eligible sites served",
        ));
        items.push((icon(square("#a9cf8f")), "some served"));
        items.push((icon(square(UNMET)), "eligible sites, none served"));
        items.push((icon(square("#d6d6d6")), "ineligible sites only"));
    } else {
        items.push((
            icon(marker(SiteKind::Block, 7.0, 7.0, SERVED, "#fff", 1.0)),
            "served",
        ));
        items.push((
            icon(marker(SiteKind::Block, 7.0, 7.0, "none", UNMET, 1.8)),
            "eligible, not served",
        ));
        items.push((
            icon(marker(SiteKind::Block, 7.0, 7.0, "none", INELIGIBLE, 1.2)),
            "ineligible",
        ));
        items.push((
            icon(marker(SiteKind::Block, 7.0, 7.0, "#555", "#fff", 1.0)),
            "grove block",
        ));
        items.push((
            icon(marker(SiteKind::Dooryard, 7.0, 7.0, "#555", "#fff", 1.0)),
            "dooryard request",
        ));
    }
    items.push((icon(square("#000")), "facility"));
    html! {
        (PreEscaped(s))
        div.legend {
            @for (i, label) in items { span { (PreEscaped(i)) (label) } }
            @if gridded {
                span.muted {
                    (int(sc.sites.len() as u64)) " sites drawn as cells of about "
                    (fixed(10.0 / frame_px_per_km(&frame), 1)) " km (one marker per site up to "
                    (int(MAP_MARKERS_MAX as u64)) ")."
                }
            }
        }
        "\n"
    }
}

/// Pixels per km of a frame, measured between two projected points 1 km apart north–south.
fn frame_px_per_km(frame: &Frame) -> f64 {
    use crate::scenario::LonLat;
    let a = LonLat { lon: 0.0, lat: 0.0 };
    let b = LonLat {
        lon: 0.0,
        lat: (1.0f64 / 6371.0088).to_degrees(),
    };
    let (_, ya) = frame.px(a);
    let (_, yb) = frame.px(b);
    (ya - yb).abs().max(1e-9)
}

/// Service by priority quartile among eligible sites (those with an arc), highest first.
/// O(S log S).
fn priority_bands(view: &PlanView, plan: &Delivered) -> Markup {
    let mut ranked: Vec<(usize, f64)> = view
        .allocation
        .sites
        .iter()
        .filter(|o| o.eligible)
        .map(|o| (o.site, priority_of(view, o.site)))
        .collect();
    ranked.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    let n = ranked.len();
    let names = [
        "Top quarter",
        "Second quarter",
        "Third quarter",
        "Bottom quarter",
    ];
    let bands = names
        .iter()
        .enumerate()
        .map(|(q, name)| (*name, &ranked[n * q / 4..n * (q + 1) / 4]))
        .filter(|(_, band)| !band.is_empty());
    html! {
        section {
            h2 { "Served and unmet by priority band" }
            p class="small muted" {
                "Sites that could get a release this week, ranked by priority (pest pressure near them) and split into four equal bands."
            }
            table {
                thead {
                    tr {
                        th { "Band" } th.num { "Priority" } th.num { "Sites" } th.num { "Served" }
                        th.num { "Unmet" } th.num { "Vials" } th { "Share served" }
                    }
                }
                tbody {
                    @for (name, band) in bands {
                        @let served = band.iter().filter(|(i, _)| plan.served(*i)).count();
                        @let vials: u64 = band
                            .iter()
                            .map(|(i, _)| plan.per_site.get(*i).map_or(0, |d| d.vials))
                            .sum();
                        @let share = served as f64 / band.len() as f64;
                        tr {
                            td { (name) }
                            td.num { (fixed(band.last().map_or(0.0, |b| b.1), 2)) " – " (fixed(band[0].1, 2)) }
                            td.num { (int(band.len() as u64)) }
                            td.num { (int(served as u64)) }
                            td.num { (int((band.len() - served) as u64)) }
                            td.num { (int(vials)) }
                            td.nw {
                                span.bar style={ "width:" (fixed(30.0 * share, 1)) "mm" } {}
                                span class="bar unmet" style={ "width:" (fixed(30.0 * (1.0 - share), 1)) "mm" } {}
                                " " (fixed(100.0 * share, 0)) " %"
                            }
                        }
                    }
                    @if n == 0 {
                        tr { td colspan="7" class="muted" { "No site could get a release this week." } }
                    }
                }
            }
        }
        "\n"
    }
}

/// This plan beside the same week planned by hand (`crate::baseline`): value by the same
/// objective, live wasps in the top priority quarter, vials left at the facilities. Nothing
/// when the view has no hand plan. O(S log S).
fn against_hand(view: &PlanView, plan: &Delivered) -> Markup {
    let Some(b) = view.baseline else {
        return html! {};
    };
    let al = view.allocation;
    let supply = view.scenario.total_supply_vials();
    let ours_left = supply.saturating_sub(plan.shipped_vials());
    let more = if b.objective > 0.0 {
        format!(
            "This plan is worth {} % more than the hand plan by the same measure.",
            fixed(100.0 * (al.objective / b.objective - 1.0), 0)
        )
    } else {
        String::new()
    };
    let rows = [
        (
            "Value (priority-weighted live wasps)",
            signed(al.objective),
            signed(b.objective),
        ),
        (
            "Live wasps released in the top priority quarter",
            int(plan.top_quarter_wasps(view).round().max(0.0) as u64),
            int(b.top_quarter_wasps.round().max(0.0) as u64),
        ),
        (
            "Vials left unshipped (they die at the facilities)",
            int(ours_left),
            int(b.unshipped_vials()),
        ),
    ];
    html! {
        section {
            h2 { "Against planning by hand" }
            p class="small muted" {
                "The same week, supply, shelf life and vehicles planned the way an office does by hand: requests first come, first served up to the dooryard share, blocks by scouting count, each from the nearest facility on the earliest day (docs/baseline.md)."
            }
            table {
                thead { tr { th {} th.num { "This plan" } th.num { "By hand" } } }
                tbody {
                    @for (what, ours, hand) in &rows {
                        tr { td { (what) } td.num { (ours) } td.num { (hand) } }
                    }
                }
            }
            p.small { (more) }
        }
        "\n"
    }
}

/// Counts by reason, in plain words, largest first. O(reasons).
fn why_not(view: &PlanView, week: &Week) -> Markup {
    let mut rows: Vec<(&str, (usize, usize))> =
        week.reasons.iter().map(|(r, c)| (*r, *c)).collect();
    rows.sort_by(|a, b| (b.1.0 + b.1.1).cmp(&(a.1.0 + a.1.1)).then(a.0.cmp(b.0)));
    let supply_out = week.binds(Kind::Supply) || (week.supply > 0 && week.shipped >= week.supply);
    html! {
        section {
            h2 { "Why sites got nothing" }
            table {
                thead {
                    tr { th { "Reason" } th { "Code in allocation.csv" } th.num { "Blocks" } th.num { "Requests" } }
                }
                tbody {
                    @for (r, (b, d)) in &rows {
                        @let words = if *r == "below-cutoff" && supply_out {
                            "eligible, but supply ran out: the vials went to higher-value sites"
                        } else {
                            plain_reason(r)
                        };
                        tr { td { (words) } td.nw { (r) } td.num { (int(*b as u64)) } td.num { (int(*d as u64)) } }
                    }
                    @if rows.is_empty() {
                        tr { td colspan="4" class="muted" { "Every site was served." } }
                    }
                }
            }
            p class="small muted" {
                "Insecticide window: no release within " (view.scenario.policy.insecticide_exclusion_days)
                " days after an application."
            }
        }
        "\n"
    }
}

/// What one more vial packed at facility `f` would add to the plan's value (its marginal
/// value per vial, rounded, never below 0), as the report prints it.
fn one_more_vial(al: &Allocation, f: usize) -> String {
    int(al
        .marginal_value_per_vial
        .get(f)
        .copied()
        .unwrap_or(0.0)
        .round()
        .max(0.0) as u64)
}

/// The highest-priority unserved sites that could have had a release: what serving one would
/// take (vials from the nearest facility) and what each of those vials earns where it went
/// instead. O(S + rows · F).
fn worth_a_look(view: &PlanView, week: &Week) -> Markup {
    let sc = view.scenario;
    let al = view.allocation;
    if week.worth_a_look.is_empty() {
        return html! {
            section {
                h2 { "Unserved eligible sites worth a look" }
                p.muted { "None: every site that could get a release got one." }
            }
            "\n"
        };
    }
    let mut rows = Vec::new();
    for (i, p, r) in week.worth_a_look.iter().take(LIST_ROWS) {
        let site = &sc.sites[*i];
        let nearest = sc
            .facilities
            .iter()
            .enumerate()
            .map(|(f, fac)| (f, distance_m(site.location, fac.location)))
            .min_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
        let (fac, need, last) = match nearest {
            Some((f, m)) => {
                let fac = &sc.facilities[f];
                let need = match site.kind() {
                    SiteKind::Dooryard => sc.policy.dooryard_vials_per_request,
                    SiteKind::Block => (sc.agent.min_release_wasps
                        / f64::from(fac.wasps_per_vial.max(1)))
                    .ceil()
                    .clamp(1.0, f64::from(u32::MAX)) as u32,
                };
                (
                    format!("{} ({} km)", fac.id.as_str(), fixed(m / 1000.0, 1)),
                    count(need as usize, "vial", "vials"),
                    one_more_vial(al, f),
                )
            }
            None => ("—".into(), "—".into(), "—".into()),
        };
        let why = match *r {
            "below-cutoff" => "vials went to higher-value sites",
            "out-of-reach" => "no live wasps there in time",
            _ => "no route or parcel could carry it",
        };
        rows.push((site, *p, why, need, fac, last));
    }
    html! {
        section {
            h2 { "Unserved eligible sites worth a look" }
            p class="small muted" {
                "The " (week.worth_a_look.len().min(LIST_ROWS)) " highest-priority of "
                (int(week.worth_a_look.len() as u64))
                " such sites (all are in allocation.csv). To serve one, the vials it needs would have to come off a site that now gets them, or be packed in addition: the last column is what each such vial of the nearest facility earns where it went instead (the value of one more vial, below)."
            }
            table {
                thead {
                    tr {
                        th { "Site" } th { "Kind" } th.num { "Priority" } th { "Why not" }
                        th.num { "Would need" } th { "Nearest facility" } th.num { "Its vial earns now" }
                    }
                }
                tbody {
                    @for (site, p, why, need, fac, last) in &rows {
                        tr {
                            td { (site.id.as_str()) } td { (site.kind().as_str()) } td.num { (fixed(*p, 2)) }
                            td { (why) } td.num { (need) } td.nw { (fac) } td.num { (last) }
                        }
                    }
                }
            }
        }
        "\n"
    }
}

/// Per facility: vials packed and shipped and the value of one more vial, with one sentence
/// on what that value means and how it relates to the sweep's single figure. O(F + rows).
fn marginal_values(view: &PlanView, plan: &Delivered) -> Markup {
    let sc = view.scenario;
    let al = view.allocation;
    let mut packed = vec![0u64; sc.facilities.len()];
    for s in &sc.supply {
        if let Some(p) = packed.get_mut(s.facility) {
            *p += u64::from(s.vials);
        }
    }
    let mut shipped = vec![0u64; sc.facilities.len()];
    for ((f, _), v) in &plan.used_by_pack_day {
        if let Some(s) = shipped.get_mut(*f) {
            *s += v;
        }
    }
    let total: u64 = packed.iter().sum();
    let weighted: f64 = packed
        .iter()
        .zip(&al.marginal_value_per_vial)
        .map(|(p, v)| *p as f64 * v)
        .sum();
    let average = if total > 0 {
        int((weighted / total as f64).round().max(0.0) as u64)
    } else {
        "0".into()
    };
    html! {
        section {
            h2 { "Value of one more vial" }
            p.small {
                "One more vial packed at a facility (on its best day) would add this much to the plan's value, in priority-weighted live wasps: what the best site still waiting for a vial from it would gain. "
                "0 means the facility had vials to spare; a higher figure means its vials ran out first and an extra vial there is worth more."
            }
            table {
                thead {
                    tr { th { "Facility" } th.num { "Vials packed" } th.num { "Shipped" } th.num { "Value of one more vial" } }
                }
                tbody {
                    @for (f, fac) in sc.facilities.iter().enumerate() {
                        tr {
                            td { (fac.name) " (" (fac.id.as_str()) ")" }
                            td.num { (int(packed[f])) } td.num { (int(shipped[f])) } td.num { (one_more_vial(al, f)) }
                        }
                    }
                }
            }
            p class="small muted" {
                code { "broodcast sweep" }
                " reports one figure per supply level: these values averaged over facilities, weighted by vials packed ("
                (average) " for this week)."
            }
        }
        "\n"
    }
}

/// The week's binding limits by kind, in plain words. O(B).
fn limits(view: &PlanView, week: &Week) -> Markup {
    let sc = view.scenario;
    // Duals of `≥` rows (the share floor, forces) are negative: the size is what one more
    // unit of the limit is worth (or costs).
    let range = |v: &[binding::Parsed]| {
        let lo = v.iter().map(|b| b.dual.abs()).fold(f64::INFINITY, f64::min);
        let hi = v
            .iter()
            .map(|b| b.dual.abs())
            .fold(f64::NEG_INFINITY, f64::max);
        if (hi - lo).abs() < 0.05 * hi.abs().max(1.0) {
            value(hi)
        } else {
            format!("{}–{}", value(lo), value(hi))
        }
    };
    let days_by_facility = |v: &[binding::Parsed]| {
        let mut by: BTreeMap<&str, Vec<NaiveDate>> = BTreeMap::new();
        for b in v {
            if let (Some(f), Some(d)) = (b.facility, b.date) {
                by.entry(f).or_default().push(d);
            }
        }
        by.into_iter()
            .map(|(f, mut ds)| {
                ds.sort();
                format!("{f} {}", days(&ds))
            })
            .collect::<Vec<_>>()
            .join("; ")
    };
    // (limit, where it binds, value of one more unit)
    let mut rows: Vec<(&str, String, String)> = Vec::new();
    let mut row = |what: &'static str, where_: String, value: String| {
        rows.push((what, where_, value));
    };
    if let Some(v) = week.binding.get(&Kind::Supply) {
        row(
            "Supply (vials packed)",
            days_by_facility(v),
            format!("{} per vial", range(v)),
        );
    }
    if let Some(v) = week.binding.get(&Kind::DooryardShare) {
        row(
            "Dooryard share floor",
            format!(
                "at least {} % of vials must go to dooryard requests",
                fixed(100.0 * sc.policy.dooryard_share_min, 0)
            ),
            format!("costs {} per vial", range(v)),
        );
    }
    if let Some(v) = week.binding.get(&Kind::Vehicles) {
        row(
            "Vehicle capacity",
            days_by_facility(v),
            format!("{} per vial", range(v)),
        );
    }
    if let Some(v) = week.binding.get(&Kind::Parcel) {
        let mut ds: Vec<NaiveDate> = v.iter().filter_map(|b| b.date).collect();
        ds.sort();
        row(
            "Parcel cap",
            format!(
                "{} vials a day on {}",
                int(u64::from(sc.parcel.max_vials_per_day)),
                days(&ds)
            ),
            format!("{} per vial", range(v)),
        );
    }
    if let Some(v) = week.binding.get(&Kind::RequestVials) {
        row(
            "Vials per dooryard request",
            format!(
                "{} would take more than the standard {} vials",
                count(v.len(), "request", "requests"),
                sc.policy.dooryard_vials_per_request
            ),
            format!("{} per vial", range(v)),
        );
    }
    if let Some(v) = week.binding.get(&Kind::MaxRelease) {
        row(
            "Largest release per site",
            format!(
                "{} at the maximum of {} live wasps",
                count(v.len(), "site", "sites"),
                int(sc.agent.max_release_wasps.round().max(0.0) as u64)
            ),
            format!("{} per wasp", range(v)),
        );
    }
    if let Some(v) = week.binding.get(&Kind::Force) {
        row(
            "Forced releases",
            count(v.len(), "override", "overrides"),
            format!("{} per unit", range(v)),
        );
    }
    html! {
        section {
            h2 { "What limits the week" }
            table {
                thead { tr { th { "Limit" } th { "Where it binds" } th.num { "Value of one more unit" } } }
                tbody {
                    @for (what, where_, value) in &rows {
                        tr { td { (what) } td { (where_) } td.num { (value) } }
                    }
                    @if rows.is_empty() {
                        tr { td colspan="3" class="muted" { "Nothing binds: every site got what it could use." } }
                    }
                }
            }
            p class="small muted" {
                "Values are objective units (priority-weighted live wasps) gained per unit of the limit, from the allocation's duals. "
                "The full list of " (int(view.allocation.binding.len() as u64))
                " binding constraints, with the " (int(week.binding.get(&Kind::SiteValue).map_or(0, Vec::len) as u64))
                " per-site value rows that bind at every served site, is in binding-constraints.csv."
            }
        }
        "\n"
    }
}

/// Weekdays, runs of consecutive days joined: `Mon–Fri`, `Tue, Thu`.
fn days(ds: &[NaiveDate]) -> String {
    let mut parts: Vec<String> = Vec::new();
    let mut i = 0;
    while i < ds.len() {
        let mut j = i;
        while j + 1 < ds.len() && ds[j + 1] == ds[j] + chrono::Days::new(1) {
            j += 1;
        }
        let a = ds[i].format("%a").to_string();
        parts.push(match j - i {
            0 => a,
            1 => format!("{a}, {}", ds[j].format("%a")),
            _ => format!("{a}–{}", ds[j].format("%a")),
        });
        i = j + 1;
    }
    parts.join(", ")
}

/// An objective value for reading: one decimal below 10, else a whole number with
/// thousands separators.
fn value(x: f64) -> String {
    if x.abs() < 10.0 {
        fixed(x, 1)
    } else {
        int(x.round().max(0.0) as u64)
    }
}

/// A value rounded to a whole number with thousands separators, with a minus sign when
/// negative: `-1,250`.
fn signed(x: f64) -> String {
    let r = round_to(x, 0);
    let n = int(r.abs().min(u64::MAX as f64) as u64);
    if r < 0.0 { format!("−{n}") } else { n }
}

/// Whole number with thousands separators: `35,000`.
fn int(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::with_capacity(s.len() + s.len() / 3);
    for (k, ch) in s.chars().enumerate() {
        if k > 0 && (s.len() - k).is_multiple_of(3) {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

/// Grouped bars: for each pack day, one bar per facility, outline = vials packed, fill =
/// vials delivered from that day's packing. Y axis in vials. O(F · 7).
fn supply_chart(view: &PlanView, plan: &Delivered) -> String {
    let sc = view.scenario;
    let dates: Vec<NaiveDate> = sc.week_dates().to_vec();
    let nf = sc.facilities.len().max(1);
    let mut packed: BTreeMap<(usize, NaiveDate), u64> = BTreeMap::new();
    for s in &sc.supply {
        *packed.entry((s.facility, s.date)).or_insert(0) += u64::from(s.vials);
    }
    let max = packed
        .values()
        .chain(plan.used_by_pack_day.values())
        .copied()
        .max()
        .unwrap_or(0)
        .max(1);
    let (w, hgt) = (700.0, 230.0);
    let (left, right, top, bottom) = (56.0, 12.0, 26.0, 44.0);
    let plot_w = w - left - right;
    let plot_h = hgt - top - bottom;
    let step = nice_step(max as f64 / 4.0);
    let y_max = (max as f64 / step).ceil() * step;
    let y = |v: f64| top + plot_h * (1.0 - v / y_max);
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {hgt}\" role=\"img\" aria-label=\"Vials packed and shipped per facility and pack day\" font-size=\"11\">"
    );
    let mut v = 0.0;
    while v <= y_max + 1e-9 {
        let yy = y(v);
        let _ = write!(
            s,
            "<line x1=\"{left}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#ddd\"/><text x=\"{}\" y=\"{}\" text-anchor=\"end\">{}</text>",
            f1(w - right),
            f1(yy),
            f1(yy),
            f1(left - 6.0),
            f1(yy + 4.0),
            fixed(v, 0)
        );
        v += step;
    }
    let group_w = plot_w / dates.len() as f64;
    let bar_w = (group_w * 0.8 / nf as f64).min(40.0);
    for (di, d) in dates.iter().enumerate() {
        let gx = left + group_w * di as f64 + (group_w - bar_w * nf as f64) / 2.0;
        for fi in 0..sc.facilities.len() {
            let colour = PALETTE[fi % PALETTE.len()];
            let x = gx + bar_w * fi as f64;
            let p = packed.get(&(fi, *d)).copied().unwrap_or(0) as f64;
            let u = plan.used_by_pack_day.get(&(fi, *d)).copied().unwrap_or(0) as f64;
            let _ = write!(
                s,
                "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"none\" stroke=\"{colour}\" stroke-width=\"1.2\"/><rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{colour}\"/>",
                f1(x + 1.0),
                f1(y(p)),
                f1(bar_w - 2.0),
                f1(top + plot_h - y(p)),
                f1(x + 1.0),
                f1(y(u)),
                f1(bar_w - 2.0),
                f1(top + plot_h - y(u)),
            );
        }
        let _ = write!(
            s,
            "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">{}</text>",
            f1(left + group_w * (di as f64 + 0.5)),
            f1(top + plot_h + 14.0),
            d.format("%a %d")
        );
    }
    let _ = write!(
        s,
        "<line x1=\"{left}\" x2=\"{left}\" y1=\"{top}\" y2=\"{}\" stroke=\"#000\"/><line x1=\"{left}\" x2=\"{}\" y1=\"{b}\" y2=\"{b}\" stroke=\"#000\"/>\
<text x=\"14\" y=\"{}\" text-anchor=\"middle\" transform=\"rotate(-90 14 {})\">vials</text>\
<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">pack day (outline: packed, filled: shipped)</text>",
        f1(top + plot_h),
        f1(w - right),
        f1(top + plot_h / 2.0),
        f1(top + plot_h / 2.0),
        f1(left + plot_w / 2.0),
        f1(hgt - 8.0),
        b = f1(top + plot_h),
    );
    let mut lx = left;
    for (fi, f) in sc.facilities.iter().enumerate() {
        let _ = write!(
            s,
            "<rect x=\"{}\" y=\"8\" width=\"10\" height=\"10\" fill=\"{}\"/><text x=\"{}\" y=\"17\">{}</text>",
            f1(lx),
            PALETTE[fi % PALETTE.len()],
            f1(lx + 14.0),
            esc(f.id.as_str())
        );
        lx += 24.0 + 7.0 * f.id.as_str().chars().count() as f64;
    }
    s.push_str("</svg>\n");
    s
}

/// A site marker: circle for a block, diamond for a dooryard request (5 px radius).
fn marker(kind: SiteKind, x: f64, y: f64, fill: &str, stroke: &str, width: f64) -> String {
    match kind {
        SiteKind::Block => format!(
            "<circle cx=\"{}\" cy=\"{}\" r=\"5\" fill=\"{fill}\" stroke=\"{stroke}\" stroke-width=\"{width}\"/>",
            f1(x),
            f1(y)
        ),
        SiteKind::Dooryard => format!(
            "<path d=\"M{} {}l6 6l-6 6l-6 -6Z\" fill=\"{fill}\" stroke=\"{stroke}\" stroke-width=\"{width}\"/>",
            f1(x),
            f1(y - 6.0)
        ),
    }
}

/// `1 parcel`, `2 parcels`.
fn count(n: usize, one: &str, many: &str) -> String {
    format!("{} {}", int(n as u64), if n == 1 { one } else { many })
}

/// 1-2-5 × 10ⁿ step not below `raw`.
fn nice_step(raw: f64) -> f64 {
    let raw = if raw.is_finite() && raw > 0.0 {
        raw
    } else {
        1.0
    };
    let base = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * base)
        .find(|s| *s >= raw * (1.0 - 1e-9))
        .unwrap_or(10.0 * base)
        .max(1.0)
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    #[test]
    fn nice_steps_are_round() {
        assert_eq!(nice_step(3.2), 5.0);
        assert_eq!(nice_step(1.5), 2.0);
        assert_eq!(nice_step(40.0), 50.0);
        assert_eq!(nice_step(0.0), 1.0);
    }

    #[test]
    fn numbers_and_days_read_plainly() {
        assert_eq!(int(35_000), "35,000");
        assert_eq!(int(999), "999");
        assert_eq!(int(1_234_567), "1,234,567");
        assert_eq!(count(1, "week", "weeks"), "1 week");
        let d = |i: u64| NaiveDate::from_ymd_opt(2027, 3, 1).unwrap() + chrono::Days::new(i);
        assert_eq!(days(&[d(0), d(1), d(2), d(3), d(4)]), "Mon–Fri");
        assert_eq!(days(&[d(1), d(3)]), "Tue, Thu");
        assert_eq!(days(&[d(0), d(1), d(3)]), "Mon, Tue, Thu");
    }

    fn html(p: &super::super::fixture::TinyPlan) -> String {
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        String::from_utf8(render(&v, &plan).unwrap()).unwrap()
    }

    #[test]
    fn report_has_the_sections_and_no_addresses() {
        let p = tiny_plan();
        let h = html(&p);
        for needle in [
            "16 of 60 vials shipped",
            "What limits the week",
            "Supply (vials packed)",
            "Why sites got nothing",
            "vials allocated, but no route or parcel could carry them",
            "binding-constraints.csv",
            "Value of one more vial",
            "Cautions",
            ">vials</text>",
            " km</text>",
        ] {
            assert!(h.contains(needle), "missing {needle}");
        }
        for s in &p.scenario.sites {
            if let Some(r) = s.as_request() {
                assert!(!h.contains(&r.address), "address {} leaked", r.address);
            }
        }
    }

    /// Markup, ampersands and quotes in the scenario's name, the agent's name and a facility
    /// name reach the report as text.
    #[test]
    fn names_are_escaped_by_the_template() {
        let hostile = "<script>alert(\"x\")</script> & 'co'";
        let escaped = "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; 'co'";
        let mut p = tiny_plan();
        p.scenario.name = hostile.into();
        p.scenario.agent.name = hostile.into();
        p.scenario.facilities[0].name = hostile.into();
        let h = html(&p);
        assert!(!h.contains("<script>"), "{h}");
        for want in [
            format!("<title>Plan report — {escaped} — week of 2027-03-01</title>"),
            format!("<h1>Plan report: {escaped} — week of 2027-03-01</h1>"),
            format!("<p class=\"muted\">Agent {escaped} · "),
            format!("<tr><td>{escaped} (F1)</td>"),
        ] {
            assert!(h.contains(&want), "{want}");
        }
    }

    #[test]
    fn ineligible_sites_are_never_worth_a_look() {
        let p = tiny_plan();
        let h = html(&p);
        let part = &h[h.find("worth a look").unwrap()..h.find("Value of one more vial").unwrap()];
        // B3 is allocated but undeliverable; B4 has no flush and must not be listed.
        assert!(part.contains("<td>B3</td>"), "{part}");
        assert!(!part.contains("<td>B4</td>"), "{part}");
    }

    #[test]
    fn the_headline_names_the_main_reason() {
        let mut p = tiny_plan();
        // Every candidate eligible and unserved below the cutoff: supply is the reason.
        for o in &mut p.allocation.sites {
            if o.vials == 0 && o.reason.is_none() {
                o.reason = Some(crate::eligibility::Reason::BelowCutoff);
            }
        }
        let h = html(&p);
        assert!(
            h.contains("Delivery failed")
                || h.contains("Supply ran out")
                || h.contains("got nothing"),
            "{h}"
        );
        p.allocation.sites[2].vials = 0;
        p.allocation.sites[2].reason = Some(crate::eligibility::Reason::OutOfReach);
        let h = html(&p);
        assert!(
            h.contains("Out of reach: 1 eligible site got nothing"),
            "{h}"
        );
    }

    #[test]
    fn a_large_week_is_drawn_as_cells() {
        let mut p = tiny_plan();
        let h = html(&p);
        assert!(!h.contains("drawn as cells"));
        let base = p.scenario.sites.clone();
        while p.scenario.sites.len() <= MAP_MARKERS_MAX {
            let mut s = base[p.scenario.sites.len() % base.len()].clone();
            s.id = crate::scenario::SiteId(format!("X{}", p.scenario.sites.len()));
            p.scenario.sites.push(s);
        }
        let h = html(&p);
        assert!(h.contains("drawn as cells"), "gridded past the limit");
        assert!(h.matches("<circle").count() < 10, "no per-site markers");
    }
}
