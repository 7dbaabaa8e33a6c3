//! `route-sheets.html`: one printed page per route for the driver, and a parcel hand-over
//! list for the dispatcher (the labels themselves are `labels.html`). Print-ready on the one page size of every HTML output
//! ([`super::PAGE_SIZE`]), a page break before every sheet. A route of up to
//! [`ONE_PAGE_STOPS`] stops prints on one page: the map shrinks as the stop list grows. The
//! cautions sit under each sheet's heading, so they never stand alone on a page and always
//! carry the route id; the stop table's heading, with the route id, repeats on every page of a
//! longer route.
//!
//! Each stop line carries the shipment id (the key of `confirmations.csv`, so the "Done"
//! ticks go back into `ledger confirm` without the manifest) and a `geo:` link (RFC 5870) to
//! the stop. The map draws the route's driven path with numbered labels set off their stops
//! ([`label_layout`]) so that clustered stops stay readable.
//!
//! One of the driver's documents, the only outputs that carry a request's street address
//! ([`super::carries_addresses`]): a driver needs it to find a dooryard. Blocks are found by
//! their block id and access point.
//!
//! The sheets are a `maud` template: every value spliced into them is HTML-escaped, so no
//! name, address or id can become markup. The page head is the shared one
//! (`super::week_page_head`); the route map is SVG written by hand (its ids escaped with
//! [`super::esc`]) and enters the template as it is.

use std::fmt::Write;

use chrono::{NaiveDate, NaiveDateTime};
use maud::{Markup, PreEscaped, html};

use super::map_layer::{self, LEGEND_H, Occupied};
use super::svg::{Frame, f1};
use super::{CAUTIONS, Delivered, OutputError, PlanView, bad_site, esc, fixed, hhmm};
use crate::dispatch::Route;
use crate::scenario::{LonLat, Scenario, SiteDetail};

/// Print stylesheet shared by the sheets. Sizes in mm and pt so the page prints the same on
/// any screen.
const CSS: &str = r#"
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9.5pt; color: #000; margin: 0; }
.sheet { break-before: page; }
.sheet:first-of-type { break-before: auto; }
h1 { font-size: 15pt; margin: 0 0 2mm 0; }
h2 { font-size: 11pt; margin: 3mm 0 1mm 0; }
table { border-collapse: collapse; width: 100%; }
table.meta td { padding: 0.6mm 2mm 0.6mm 0; vertical-align: top; }
table.meta td.k { color: #444; white-space: nowrap; }
table.meta td.v { font-weight: bold; }
table.meta td.d { white-space: nowrap; }
table.stops th, table.stops td { border: 0.3mm solid #777; padding: 1mm 1.2mm; text-align: left; vertical-align: top; }
table.stops th { background: #eee; font-size: 8.5pt; white-space: nowrap; }
table.stops tr { break-inside: avoid; }
td.num { text-align: right; white-space: nowrap; }
td.seq { font-weight: bold; text-align: center; width: 8mm; }
td.find { font-size: 8pt; }
td.tick { width: 9mm; text-align: center; }
td.notes { width: 30mm; }
table.route { table-layout: fixed; }
table.route .c-seq { width: 8mm; }
table.route .c-site { width: 29mm; }
.ship { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 6.5pt; line-height: 1.15; color: #333; white-space: nowrap; display: block; }
a.geo { color: #000; text-decoration: underline; }
table.route .c-arr { width: 20mm; }
.wait { font-size: 7.5pt; }
table.route .c-vials { width: 11mm; }
table.route .c-by { width: 20mm; }
table.route .c-done { width: 11mm; }
table.route .c-notes { width: 14mm; }
.box { display: inline-block; width: 4.5mm; height: 4.5mm; border: 0.4mm solid #000; }
.map { width: 100%; height: auto; border: 0.3mm solid #999; margin: 2mm 0; }
.cautions { margin: 1.5mm 0; border: 0.3mm solid #000; padding: 1mm 2mm; font-size: 7.5pt; break-inside: avoid; }
.cautions ul { margin: 0.3mm 0 0 4mm; padding: 0; columns: 2; column-gap: 6mm; }
.muted { color: #555; }
.nw { white-space: nowrap; }
table.stops th.cont { background: #fff; font-weight: normal; color: #444; border-left: none; border-right: none; border-top: none; }
"#;

/// Map canvas width, SVG user units (scaled to the sheet's width, 186 mm: 3.66 units per mm).
const MAP_W: f64 = 680.0;
/// Tallest map, SVG user units (90 mm printed), for routes of a few stops.
const MAP_H_MAX: f64 = 330.0;
/// Shortest map, SVG user units (45 mm printed), for routes that fill the page.
const MAP_H_MIN: f64 = 165.0;
/// Most stops whose sheet prints on one page (measured in headless Chromium on Letter and
/// on A4, `tests/it/outputs.rs`): the map shrinks to its smallest height to make room.
pub const ONE_PAGE_STOPS: usize = 14;

/// Map height for a route of `stops` stops: full height up to 7 stops, then 9 mm less per
/// stop down to [`MAP_H_MIN`] (each stop row prints about 9 mm tall).
fn map_height(stops: usize) -> f64 {
    const UNITS_PER_MM: f64 = MAP_W / 186.0;
    let extra = stops.saturating_sub(7) as f64;
    (MAP_H_MAX - extra * 9.0 * UNITS_PER_MM).clamp(MAP_H_MIN, MAP_H_MAX)
}

/// What a redacted sheet prints instead of a street address.
pub(crate) const WITHHELD: &str = "address withheld";

/// Renders the sheets; `redact` replaces every request address by [`WITHHELD`], the request
/// id and its coordinates (the driver can still navigate by coordinates).
pub(crate) fn render(
    view: &PlanView,
    plan: &Delivered,
    redact: bool,
) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let mut h = super::week_page_head(sc, "Route sheets", redact, CSS);
    if view.dispatch.routes.is_empty() && view.dispatch.parcels.is_empty() {
        let empty = html! {
            section.sheet { h1 { "No routes or parcels this week" } (cautions()) } "\n"
        };
        h.push_str(&empty.into_string());
    }
    for route in &view.dispatch.routes {
        h.push_str(&sheet(sc, plan, route, redact)?.into_string());
    }
    if !view.dispatch.parcels.is_empty() {
        h.push_str(&parcel_page(view, redact)?.into_string());
    }
    h.push_str("</body>\n</html>\n");
    Ok(h.into_bytes())
}

fn cautions() -> Markup {
    html! {
        footer.cautions {
            strong { "Cautions" }
            ul { @for c in CAUTIONS { li { (c) } } }
        }
    }
}

/// `Tue 2027-03-02`.
fn day(d: NaiveDate) -> String {
    d.format("%a %Y-%m-%d").to_string()
}

/// Time of day, with the weekday when it is not on `base` (release-by is often days later).
fn time_on(t: NaiveDateTime, base: NaiveDate) -> String {
    if t.date() == base {
        hhmm(t)
    } else {
        t.format("%a %H:%M").to_string()
    }
}

/// `1 h 05 min` from minutes.
pub(crate) fn duration(minutes: f64) -> String {
    let m = if minutes.is_finite() {
        minutes.max(0.0).round() as u64
    } else {
        0
    };
    if m >= 60 {
        format!("{} h {:02} min", m / 60, m % 60)
    } else {
        format!("{m} min")
    }
}

/// The line under a redacted sheet's title.
fn redaction_note(redact: bool) -> Markup {
    html! {
        @if redact {
            p.muted { "Addresses withheld for sharing: dooryard stops are given by request id and coordinates." } "\n"
        }
    }
}

/// A `geo:` URI (RFC 5870, WGS 84, latitude first) as a link reading `lat, lon`: tapped on a
/// phone it opens the map app at the stop.
fn geo_link(p: LonLat) -> Markup {
    let (lat, lon) = (fixed(p.lat, 6), fixed(p.lon, 6));
    html! { a class="geo nw" href={ "geo:" (lat) "," (lon) } { (lat) ", " (lon) } }
}

fn sheet(sc: &Scenario, plan: &Delivered, r: &Route, redact: bool) -> Result<Markup, OutputError> {
    let (depot, vehicle) = super::route_depot_vehicle(sc, r)?;
    let wasps: f64 = r.stops.iter().map(|s| s.wasps_expected_alive).sum();
    // Written by hand as SVG (`<rect/>` and friends), escaped with `esc`; it enters the
    // template as it is.
    let map = route_map(sc, r, depot.location, depot.id.as_str())?;
    Ok(html! {
        section.sheet {
            "\n"
            h1 { "Route " (r.id) } "\n"
            (redaction_note(redact))
            table.meta {
                tr {
                    td.k { "Date" } td class="v d" { (day(r.date)) }
                    td.k { "Vehicle" } td.v { (vehicle.id.as_str()) }
                    td.k { "Depot" } td.v { (depot.name) " (" (depot.id.as_str()) ")" }
                }
                "\n"
                tr {
                    td.k { "Leave depot" } td.v { (time_on(r.depart, r.date)) }
                    td.k { "Back at depot" } td.v { (time_on(r.return_at, r.date)) }
                    td.k { "Drive time" } td.v { (duration(r.drive_minutes)) }
                }
                "\n"
                tr {
                    td.k { "Stops" } td.v { (r.stops.len()) }
                    td.k { "Vials on board" } td.v { (r.vials()) }
                    td.k { "Expected live wasps" } td.v { (fixed(wasps, 0)) }
                }
            }
            "\n" (cautions()) "\n"
            (PreEscaped(map))
            // The route line inside <thead> repeats on every printed page of a long route, so
            // a loose second page still says which run it belongs to.
            table class="stops route" {
                colgroup {
                    col.c-seq; col.c-site; col; col.c-arr; col.c-vials; col.c-by; col.c-done; col.c-notes;
                }
                thead {
                    tr { th colspan="8" class="cont" { "Route " (r.id) " · " (day(r.date)) " · " (r.stops.len()) " stops" } }
                    tr {
                        th { "#" } th { "Site · shipment" } th { "How to find it" } th { "Arrive" }
                        th { "Vials" } th { "Release by" } th { "Done" } th { "Notes" }
                    }
                }
                tbody {
                    "\n"
                    @for (i, st) in r.stops.iter().enumerate() {
                        @let site = sc.sites.get(st.site).ok_or_else(|| bad_site(st.site))?;
                        @let shipment = plan.row_of(st.shipment)?;
                        tr {
                            td.seq { (i + 1) }
                            td { (site.id.as_str()) span.ship { (shipment.shipment_id) } }
                            td.find {
                                @match &site.detail {
                                    SiteDetail::Dooryard(_) if redact => {
                                        "Dooryard: " em { (WITHHELD) } " (request " (site.id.as_str()) ")"
                                        br; (geo_link(site.location))
                                    }
                                    SiteDetail::Dooryard(req) => {
                                        "Dooryard: " (req.address) br; (geo_link(site.location))
                                    }
                                    SiteDetail::Block(b) => {
                                        "Block " (site.id.as_str()) " · " (b.crop) ", " (fixed(b.area_ha, 1))
                                        " ha · open " (b.access_start.format("%H:%M")) "–" (b.access_end.format("%H:%M"))
                                        br; "access point " (geo_link(site.location))
                                    }
                                }
                            }
                            td.num {
                                (time_on(st.arrival, r.date))
                                @if st.service_start > st.arrival {
                                    br; span class="muted wait" { "release " (time_on(st.service_start, r.date)) }
                                }
                            }
                            td.num { (st.vials) }
                            td.num { (time_on(st.release_by, r.date)) }
                            td.tick { span.box {} }
                            td.notes {}
                        }
                        "\n"
                    }
                }
            }
            "\n"
        }
        "\n"
    })
}

/// The map shows the stops only when that draws them at least this many times larger than a
/// map that also holds the depot (a cluster far from its depot).
const ZOOM_FACTOR: f64 = 4.0;

/// Radius of a stop-number label on the map, SVG user units (about 4.6 mm across printed).
const LABEL_R: f64 = 8.5;

/// Where each stop's number goes: a greedy offset layout with leader lines. Stop `i` (in
/// visiting order) takes the first free spot on rings of growing radius around its dot (16
/// bearings a ring), where free means inside the canvas and off the north arrow (top right)
/// and the scale bar (bottom left), clear of every label already placed (centres at least
/// `2 × LABEL_R + 1` apart), of every stop dot and of the depot. Labels
/// never sit on their own dot, so the dot and the block outline under it stay visible; when
/// no ring has room (not met on the demo), the spot with the fewest clashes is taken.
/// Deterministic. O(k² · c) for k stops and c = 16 × 12 candidate spots.
pub(crate) fn label_layout(
    dots: &[(f64, f64)],
    depot: (f64, f64),
    w: f64,
    h: f64,
) -> Vec<(f64, f64)> {
    const RINGS: [f64; 12] = [
        15.0, 24.0, 34.0, 45.0, 57.0, 70.0, 84.0, 99.0, 115.0, 132.0, 150.0, 170.0,
    ];
    let min_gap = 2.0 * LABEL_R + 1.0;
    let mut placed: Vec<(f64, f64)> = Vec::with_capacity(dots.len());
    for &(x, y) in dots {
        let mut best: Option<((usize, f64), (f64, f64))> = None;
        'rings: for &rad in &RINGS {
            for k in 0..16 {
                // Start up-right (a label reads best there), then go round.
                let a = std::f64::consts::PI * (0.25 - f64::from(k) / 8.0);
                let c = (x + rad * a.cos(), y - rad * a.sin());
                let inside = c.0 >= LABEL_R + 2.0
                    && c.0 <= w - LABEL_R - 2.0
                    && c.1 >= LABEL_R + 2.0
                    && c.1 <= h - LABEL_R - 2.0;
                if !inside {
                    continue;
                }
                let on_furniture = (c.0 > w - 36.0 - LABEL_R && c.1 < 56.0 + LABEL_R)
                    || (c.0 < w * 0.25 + 72.0 + LABEL_R && c.1 > h - 32.0 - LABEL_R);
                if on_furniture {
                    continue;
                }
                let d = |p: (f64, f64)| (p.0 - c.0).hypot(p.1 - c.1);
                let clashes = placed.iter().filter(|&&p| d(p) < min_gap).count()
                    + dots.iter().filter(|&&p| d(p) < LABEL_R + 3.0).count()
                    + usize::from(d(depot) < LABEL_R + 12.0);
                let key = (clashes, rad);
                if best.is_none_or(|(b, _)| key.0 < b.0) {
                    best = Some((key, c));
                }
                if clashes == 0 {
                    break 'rings;
                }
            }
        }
        placed.push(best.map_or((x, y), |(_, c)| c));
    }
    placed
}

/// Index into `path` where the drive home starts: the last point nearest to the last stop.
fn home_start(path: &[(f64, f64)], last_stop: (f64, f64)) -> usize {
    let mut best = (f64::INFINITY, 0);
    for (i, p) in path.iter().enumerate() {
        let d = (p.0 - last_stop.0).hypot(p.1 - last_stop.1);
        if d <= best.0 {
            best = (d, i);
        }
    }
    best.1
}

fn polyline(points: &[(f64, f64)]) -> String {
    points
        .iter()
        .map(|p| format!("{},{}", f1(p.0), f1(p.1)))
        .collect::<Vec<_>>()
        .join(" ")
}

/// The route's map: the driven path ([`Route::path`], or straight legs when the travel
/// model has none; the drive home dashed, arrows every 90 units along the way out), block
/// outlines drawn over the path, small stop dots, numbered labels offset with leader lines
/// ([`label_layout`]), the depot square, scale bar and north arrow. O(p + k² + v) for p path
/// points, k stops and v block vertices.
fn route_map(
    sc: &Scenario,
    r: &Route,
    depot: LonLat,
    depot_id: &str,
) -> Result<String, OutputError> {
    let mut pts = vec![depot];
    for st in &r.stops {
        pts.push(
            sc.sites
                .get(st.site)
                .ok_or_else(|| bad_site(st.site))?
                .location,
        );
    }
    let drive: Vec<LonLat> = if r.path.len() >= 2 {
        r.path.clone()
    } else {
        pts.iter().copied().chain(std::iter::once(depot)).collect()
    };
    let map_h = map_height(r.stops.len());
    // The data fill the canvas above the legend strip.
    let data_h = map_h - LEGEND_H;
    let mut extent = pts.clone();
    extent.extend_from_slice(&drive);
    let whole = Frame::fit(&extent, MAP_W, data_h, 34.0, 1.0);
    // A cluster of stops far from the depot would be a knot at one end of a long line: then
    // the map shows the stops (and the path among them) only, and the depot sits on the map's
    // edge in its direction with its distance.
    let near = Frame::fit(&pts[1..], MAP_W, data_h, 34.0, 1.0);
    let zoomed = pts.len() > 2 && near.px_per_km() > ZOOM_FACTOR * whole.px_per_km();
    let frame = if zoomed { near } else { whole };
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"map\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {hh}\" role=\"img\" aria-label=\"Map of route {id}\">\
<rect width=\"{w}\" height=\"{hh}\" fill=\"#fbfbf7\"/>",
        w = MAP_W,
        hh = f1(map_h),
        id = esc(&r.id)
    );
    let px: Vec<(f64, f64)> = drive.iter().map(|p| frame.px(*p)).collect();
    let stop_px: Vec<(f64, f64)> = pts[1..].iter().map(|p| frame.px(*p)).collect();
    let home = stop_px.last().map_or(px.len() - 1, |&l| home_start(&px, l));
    let (mut dx, mut dy) = frame.px(depot);
    let mut depot_label = esc(depot_id);
    if zoomed {
        // Onto the edge, along the line from the map's centre to the depot.
        let (cx, cy) = (MAP_W / 2.0, data_h / 2.0);
        let (vx, vy) = (dx - cx, dy - cy);
        let t = ((cx - 14.0) / vx.abs().max(1e-9))
            .min((cy - 14.0) / vy.abs().max(1e-9))
            .min(1.0);
        (dx, dy) = (cx + vx * t, cy + vy * t);
        let centre = LonLat {
            lon: pts[1..].iter().map(|p| p.lon).sum::<f64>() / (pts.len() - 1) as f64,
            lat: pts[1..].iter().map(|p| p.lat).sum::<f64>() / (pts.len() - 1) as f64,
        };
        depot_label = format!(
            "{depot_label} off map, {} km",
            fixed(crate::geodesy::distance_m(centre, depot) / 1000.0, 1)
        );
    }
    let right = dx > MAP_W - 130.0;
    let labels = label_layout(&stop_px, (dx, dy), MAP_W, data_h);
    // Roads and place names under everything else; names keep clear of the route's marks.
    let roads = sc.travel.road_network.as_ref().map(|net| {
        let mut occ = Occupied::default();
        for &p in &stop_px {
            occ.circle(p, 4.0);
        }
        for &l in &labels {
            occ.circle(l, LABEL_R + 1.0);
        }
        occ.rect([dx - 10.0, dy - 10.0, dx + 10.0, dy + 10.0]);
        let lw = depot_label.chars().count() as f64 * 6.5;
        occ.rect(if right {
            [dx - 11.0 - lw, dy - 8.0, dx - 11.0, dy + 6.0]
        } else {
            [dx + 11.0, dy - 8.0, dx + 11.0 + lw, dy + 6.0]
        });
        // The north arrow and the scale bar (as `Frame::furniture` draws them).
        occ.rect([MAP_W - 36.0, 0.0, MAP_W, 56.0]);
        occ.rect([0.0, data_h - 32.0, MAP_W * 0.25 + 72.0, data_h]);
        occ.line(px.clone());
        map_layer::layer(&net.graph, &frame, MAP_W, data_h, &mut occ)
    });
    if let Some((roads_svg, names)) = &roads {
        s.push_str(roads_svg);
        s.push_str(names);
    }
    let _ = write!(
        s,
        "<polyline class=\"path\" points=\"{}\" fill=\"none\" stroke=\"#1f4e9c\" stroke-width=\"2.2\" stroke-linejoin=\"round\"/>",
        polyline(&px[..=home])
    );
    if home + 1 < px.len() {
        let _ = write!(
            s,
            "<polyline class=\"path home\" points=\"{}\" fill=\"none\" stroke=\"#1f4e9c\" stroke-width=\"2\" stroke-dasharray=\"6 4\" stroke-opacity=\"0.7\"/>",
            polyline(&px[home..])
        );
    }
    // Direction arrows every 90 units along the way out, so the order reads where the path
    // doubles back.
    let mut since = 45.0;
    for w in px[..=home].windows(2) {
        let (a, b) = (w[0], w[1]);
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let len = dx.hypot(dy);
        if len <= 0.0 {
            continue;
        }
        let mut t = 90.0 - since;
        while t <= len {
            let (ux, uy) = (dx / len, dy / len);
            let (mx, my) = (a.0 + ux * t, a.1 + uy * t);
            let tip = (mx + ux * 6.0, my + uy * 6.0);
            let l = (mx - ux * 5.0 - uy * 5.0, my - uy * 5.0 + ux * 5.0);
            let rr = (mx - ux * 5.0 + uy * 5.0, my - uy * 5.0 - ux * 5.0);
            let _ = write!(
                s,
                "<path d=\"M{} {}L{} {}L{} {}Z\" fill=\"#1f4e9c\"/>",
                f1(tip.0),
                f1(tip.1),
                f1(l.0),
                f1(l.1),
                f1(rr.0),
                f1(rr.1)
            );
            t += 90.0;
        }
        since = len - (t - 90.0);
    }
    // Block outlines over the path and under nothing else: a stop's label is set off its dot.
    for st in &r.stops {
        if let Some(SiteDetail::Block(b)) = sc.sites.get(st.site).map(|s| &s.detail) {
            for poly in &b.geometry.0 {
                let d: Vec<(f64, f64)> = poly
                    .exterior()
                    .coords()
                    .map(|c| frame.px(LonLat { lon: c.x, lat: c.y }))
                    .collect();
                let _ = write!(
                    s,
                    "<polygon class=\"block\" points=\"{}\" fill=\"#cfe8c4\" fill-opacity=\"0.55\" stroke=\"#2f6a1f\" stroke-width=\"1.4\"/>",
                    polyline(&d)
                );
            }
        }
    }
    let _ = write!(
        s,
        "<rect x=\"{}\" y=\"{}\" width=\"16\" height=\"16\" fill=\"#000\"/><text x=\"{}\" y=\"{}\" fill=\"#fff\" font-size=\"11\" font-weight=\"bold\" text-anchor=\"middle\">D</text><text class=\"depot\" x=\"{}\" y=\"{}\" font-size=\"10\" font-weight=\"bold\" stroke=\"#fff\" stroke-width=\"3\" paint-order=\"stroke\"{}>{}</text>",
        f1(dx - 8.0),
        f1(dy - 8.0),
        f1(dx),
        f1(dy + 4.0),
        f1(if right { dx - 11.0 } else { dx + 11.0 }),
        f1(dy + 4.0),
        if right { " text-anchor=\"end\"" } else { "" },
        depot_label
    );
    for (&(x, y), _) in stop_px.iter().zip(&labels) {
        let _ = write!(
            s,
            "<circle class=\"dot\" cx=\"{}\" cy=\"{}\" r=\"3.2\" fill=\"#fff\" stroke=\"#000\" stroke-width=\"1.3\"/>",
            f1(x),
            f1(y)
        );
    }
    for (i, (&(x, y), &(lx, ly))) in stop_px.iter().zip(&labels).enumerate() {
        let (ddx, ddy) = (lx - x, ly - y);
        let d = ddx.hypot(ddy);
        if d > LABEL_R {
            let k = (d - LABEL_R) / d;
            let _ = write!(
                s,
                "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"#555\" stroke-width=\"0.8\"/>",
                f1(x),
                f1(y),
                f1(x + ddx * k),
                f1(y + ddy * k)
            );
        }
        let _ = write!(
            s,
            "<circle class=\"label\" cx=\"{lx}\" cy=\"{ly}\" r=\"{LABEL_R}\" fill=\"#fff\" stroke=\"#1f4e9c\" stroke-width=\"1.6\"/>\
<text x=\"{lx}\" y=\"{ty}\" font-size=\"{fs}\" font-weight=\"bold\" text-anchor=\"middle\">{n}</text>",
            lx = f1(lx),
            ly = f1(ly),
            ty = f1(ly + 3.6),
            fs = if i + 1 >= 10 { "9" } else { "10.5" },
            n = i + 1,
        );
    }
    s.push_str(&frame.furniture());
    s.push_str(&map_layer::legend(MAP_W, data_h, roads.is_some()));
    s.push_str("</svg>\n");
    Ok(s)
}

fn parcel_page(view: &PlanView, redact: bool) -> Result<Markup, OutputError> {
    let sc = view.scenario;
    Ok(html! {
        section.sheet {
            "\n"
            h1 { "Parcel hand-over — week of " (sc.week_start) } "\n"
            (redaction_note(redact))
            p.muted { "Dispatcher's list: one line per parcel; the labels to cut are in labels.html. Pack with a cool pack, out of the sun." } "\n"
            (cautions())
            table.stops {
                thead {
                    tr {
                        th { "#" } th { "Request" } th { "Address" } th { "From" } th { "Hand over" }
                        th { "Delivery (est.)" } th { "Vials" } th { "Release by" } th { "Packed" }
                    }
                }
                tbody {
                    "\n"
                    @for (i, p) in view.dispatch.parcels.iter().enumerate() {
                        @let site = sc.sites.get(p.site).ok_or_else(|| bad_site(p.site))?;
                        @let from = view
                            .allocation
                            .shipments
                            .get(p.shipment)
                            .and_then(|s| sc.facilities.get(s.arc.facility))
                            .ok_or_else(|| {
                                OutputError::Inconsistent(format!("parcel shipment {} is out of range", p.shipment))
                            })?;
                        @let base = p.ship_at.date();
                        tr {
                            td.seq { (i + 1) }
                            td { (site.id.as_str()) }
                            td.find {
                                @match &site.detail {
                                    SiteDetail::Dooryard(_) if redact => {
                                        em { (WITHHELD) } br;
                                        span class="muted nw" { (fixed(site.location.lat, 6)) ", " (fixed(site.location.lon, 6)) }
                                    }
                                    SiteDetail::Dooryard(r) => { (r.address) }
                                    SiteDetail::Block(_) => { "block " (site.id.as_str()) }
                                }
                            }
                            td { (from.name) " (" (from.id.as_str()) ")" }
                            td.num { (p.ship_at.format("%a %H:%M")) }
                            td.num { (time_on(p.eta, base)) }
                            td.num { (p.vials) }
                            td.num { (time_on(p.release_by, base)) }
                            td.tick { span.box {} }
                        }
                        "\n"
                    }
                }
            }
            "\n"
        }
        "\n"
    })
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    fn html_with(redact: bool) -> String {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        String::from_utf8(render(&v, &plan, redact).unwrap()).unwrap()
    }

    fn html() -> String {
        html_with(false)
    }

    #[test]
    fn redacted_sheets_keep_the_layout_and_drop_every_address() {
        let (full, red) = (html(), html_with(true));
        for a in ["12 Palm Row", "3 Grove Lane", "88 Canal Street"] {
            assert!(full.contains(a) && !red.contains(a), "{a}");
        }
        // Same pages, maps, stops and cautions; R1, R2 by id on routes, R3 on the labels.
        for marker in [
            "<section class=\"sheet\">",
            "<svg class=\"map\"",
            "<tr><td class=\"seq\">",
            "<footer class=\"cautions\">",
        ] {
            assert_eq!(
                full.matches(marker).count(),
                red.matches(marker).count(),
                "{marker}"
            );
        }
        assert_eq!(red.matches("address withheld</em> (request R").count(), 2);
        assert_eq!(
            red.matches("<em>address withheld</em><br>").count(),
            1,
            "the parcel"
        );
        assert!(
            red.contains("26.990000, 80.010000"),
            "R1 still has its coordinates"
        );
    }

    /// Markup, ampersands and quotes in a facility name, an address and a crop reach the
    /// sheets as text, on route sheets and on the parcel page alike.
    #[test]
    fn names_and_addresses_are_escaped_by_the_template() {
        let hostile = "<script>alert(\"x\")</script> & 'co'";
        let escaped = "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; 'co'";
        let mut p = tiny_plan();
        // F1 runs route 1; F2 sends the R3 parcel.
        p.scenario.facilities[0].name = hostile.into();
        p.scenario.facilities[1].name = hostile.into();
        for site in &mut p.scenario.sites {
            let id = site.id.as_str().to_owned();
            match &mut site.detail {
                SiteDetail::Dooryard(r) => r.address = format!("{id} {hostile}"),
                SiteDetail::Block(b) => b.crop = hostile.into(),
            }
        }
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let h = String::from_utf8(render(&v, &plan, false).unwrap()).unwrap();
        assert!(!h.contains("<script>"), "{h}");
        for want in [
            format!("<td class=\"k\">Depot</td><td class=\"v\">{escaped} (F1)</td>"),
            format!("Dooryard: R1 {escaped}<br>"),
            format!("Block B1 · {escaped}, "),
            format!("<td class=\"find\">R3 {escaped}</td><td>{escaped} (F2)</td>"),
        ] {
            assert!(h.contains(&want), "{want}");
        }
    }

    #[test]
    fn one_sheet_per_route_plus_the_parcel_page() {
        let h = html();
        assert_eq!(h.matches("<section class=\"sheet\">").count(), 3);
        assert_eq!(h.matches("<svg class=\"map\"").count(), 2);
        assert_eq!(
            h.matches("<footer class=\"cautions\">").count(),
            3,
            "cautions on every page"
        );
        assert!(h.contains("Route R-F1-20270302-1"));
        assert!(h.contains("North insectary (F1)"));
    }

    #[test]
    fn dooryards_by_address_blocks_by_access_point() {
        let h = html();
        assert!(h.contains("12 Palm Row"), "R1 is on route 1");
        assert!(h.contains("3 Grove Lane"), "R2 is on route 2");
        assert!(h.contains("88 Canal Street"), "R3 is the parcel");
        assert!(!h.contains("5 Dune Court"), "R4 is not served");
        assert!(h.contains(
            "access point <a class=\"geo nw\" href=\"geo:26.980000,80.020000\">26.980000, 80.020000</a>"
        ));
        assert!(
            h.contains("release 08:00"),
            "R1 waits for the dooryard window"
        );
    }

    #[test]
    fn every_stop_line_carries_its_shipment_id_and_a_geo_link() {
        let h = html();
        let rows: Vec<&str> = h.split("<tr><td class=\"seq\">").skip(1).collect();
        // Three stops, two stops, one parcel line.
        assert_eq!(rows.len(), 6);
        for (row, ship) in rows.iter().zip([
            "S-F1-20270302-B1",
            "S-F1-20270302-R1",
            "S-F1-20270302-B2",
            "S-F2-20270304-B6",
            "S-F2-20270304-R2",
        ]) {
            assert!(
                row.contains(&format!("<span class=\"ship\">{ship}</span>")),
                "{row}"
            );
            assert_eq!(row.matches("href=\"geo:").count(), 1, "{row}");
        }
    }

    #[test]
    fn the_map_draws_the_driven_path() {
        let p = tiny_plan();
        let h = html();
        let first = &h[..h.find("</svg>").unwrap()];
        let points: usize = first
            .split("<polyline class=\"path")
            .skip(1)
            .map(|l| {
                let l = &l[l.find("points=\"").unwrap() + 8..];
                l[..l.find('"').unwrap()].split(' ').count()
            })
            .sum();
        // Out and home share the last stop's point.
        assert_eq!(points, p.dispatch.routes[0].path.len() + 1);
        assert_eq!(
            first.matches("<polygon class=\"block\"").count(),
            2,
            "B1, B2"
        );
    }

    /// Twenty-eight stops within a few units of each other (a cluster of dooryards on one
    /// street at map scale): every label finds its own spot, none on a dot or on another.
    #[test]
    fn clustered_stops_get_labels_that_do_not_overlap() {
        let dots: Vec<(f64, f64)> = (0..28)
            .map(|i| {
                let i = f64::from(i);
                (300.0 + (i * 1.7) % 9.0, 120.0 + (i * 2.3) % 7.0)
            })
            .collect();
        let labels = label_layout(&dots, (40.0, 150.0), MAP_W, MAP_H_MIN);
        // The same cluster in the top-right corner, under the north arrow.
        let corner: Vec<(f64, f64)> = dots.iter().map(|&(x, y)| (x + 350.0, y - 100.0)).collect();
        for (x, y) in label_layout(&corner, (40.0, 150.0), MAP_W, MAP_H_MIN) {
            assert!(
                !(x > MAP_W - 36.0 && y < 56.0),
                "({x}, {y}) on the north arrow"
            );
        }
        assert_eq!(labels.len(), dots.len());
        let d = |a: (f64, f64), b: (f64, f64)| (a.0 - b.0).hypot(a.1 - b.1);
        for (i, &a) in labels.iter().enumerate() {
            for &b in &labels[i + 1..] {
                assert!(d(a, b) >= 2.0 * LABEL_R, "{a:?} {b:?}");
            }
            for &p in &dots {
                assert!(d(a, p) >= LABEL_R, "label {a:?} covers dot {p:?}");
            }
            assert!(a.0 >= LABEL_R && a.0 <= MAP_W - LABEL_R);
            assert!(a.1 >= LABEL_R && a.1 <= MAP_H_MIN - LABEL_R);
            assert!(
                !(a.0 > MAP_W - 36.0 && a.1 < 56.0),
                "{a:?} on the north arrow"
            );
        }
    }

    /// Stops 30 km from their depot: the map shows the stops, and the depot sits on the edge
    /// towards it with its distance; a depot among its stops stays where it is.
    #[test]
    fn a_far_depot_goes_on_the_edge_of_a_map_of_the_stops() {
        let mut p = tiny_plan();
        let near = html();
        assert!(!near.contains("off map"), "F1 is near its stops");
        p.scenario.facilities[0].location.lat += 0.27;
        p.dispatch.routes[0].path.clear();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let far = String::from_utf8(render(&v, &plan, false).unwrap()).unwrap();
        let map = &far[..far.find("</svg>").unwrap()];
        let depot = &map[map.find("<text class=\"depot\"").unwrap()..];
        let depot = &depot[..depot.find("</text>").unwrap()];
        assert!(depot.ends_with("F1 off map, 33.0 km"), "{depot}");
        // The depot square is on the top edge (the depot is due north).
        let y: f64 = map[map.find("<rect x=\"").unwrap()..]
            .split("y=\"")
            .nth(1)
            .and_then(|t| t.split('"').next())
            .unwrap()
            .parse()
            .unwrap();
        assert!(y < 10.0, "{y}");
    }

    #[test]
    fn durations_read_as_hours_and_minutes() {
        assert_eq!(duration(65.4), "1 h 05 min");
        assert_eq!(duration(42.0), "42 min");
        assert_eq!(duration(f64::NAN), "0 min");
    }
}
