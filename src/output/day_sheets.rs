//! `day-sheets.html`: one printed page per depot and day for whoever loads the vehicles: what
//! goes on each vehicle (vials by pack day, per route), what goes to the carrier, and each
//! route's load list in reverse stop order (the last stop's vials go in first). Ids, times and
//! counts only: no address (the route sheets carry those). Same page size as every HTML output
//! ([`super::PAGE_SIZE`]).
//!
//! The body is a `maud` template: every value spliced into it is HTML-escaped. The page head is
//! the shared one (`super::week_page_head`).

use std::collections::{BTreeMap, BTreeSet};

use chrono::NaiveDate;
use maud::{Markup, html};

use super::{Delivered, ManifestRow, OutputError, PlanView, hhmm};
use crate::arcs::Mode;
use crate::scenario::FacilityIdx;

const CSS: &str = r#"
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9pt; color: #000; margin: 0; }
.day { break-before: page; }
.day:first-of-type { break-before: auto; }
h1 { font-size: 14pt; margin: 0 0 1mm 0; }
h2 { font-size: 10.5pt; margin: 4mm 0 1mm 0; }
p.sub { margin: 0 0 2mm 0; color: #444; }
table { border-collapse: collapse; width: 100%; }
th, td { border: 0.3mm solid #777; padding: 0.8mm 1.2mm; text-align: left; vertical-align: top; }
th { background: #eee; font-size: 8pt; white-space: nowrap; }
tr { break-inside: avoid; }
td.num, th.num { text-align: right; white-space: nowrap; }
tr.total td { font-weight: bold; border-top: 0.6mm solid #000; }
.box { display: inline-block; width: 4mm; height: 4mm; border: 0.4mm solid #000; }
td.tick { width: 8mm; text-align: center; }
.mono { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 8pt; }
.lists { columns: 2; column-gap: 5mm; }
.lists section { break-inside: avoid; margin-bottom: 3mm; }
"#;

/// `Tue 2027-03-02`.
fn day(d: NaiveDate) -> String {
    d.format("%a %Y-%m-%d").to_string()
}

/// Renders one page per (dispatch day, facility) that sends anything. O(n log n) in rows.
pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let mut days: BTreeMap<(NaiveDate, FacilityIdx), Vec<&ManifestRow>> = BTreeMap::new();
    for r in &plan.rows {
        days.entry((r.dispatch_date, r.facility))
            .or_default()
            .push(r);
    }
    let mut h = super::week_page_head(sc, "Day sheets", false, CSS);
    if days.is_empty() {
        let empty = html! {
            section.day { h1 { "Nothing to load this week" } } "\n"
        };
        h.push_str(&empty.into_string());
    }
    for ((date, facility), rows) in &days {
        h.push_str(&page(view, *date, *facility, rows)?.into_string());
    }
    h.push_str("</body>\n</html>\n");
    Ok(h.into_bytes())
}

/// Vials per pack day of the rows `sel` picks, and their total.
fn by_pack(
    rows: &[&ManifestRow],
    sel: impl Fn(&ManifestRow) -> bool,
) -> (BTreeMap<NaiveDate, u64>, u64) {
    let mut m = BTreeMap::new();
    let mut t = 0;
    for r in rows.iter().filter(|r| sel(r)) {
        *m.entry(r.pack_date).or_insert(0) += u64::from(r.vials);
        t += u64::from(r.vials);
    }
    (m, t)
}

/// The vials-by-pack-day cells of one row of "What to load", then its total.
fn cells(packs: &BTreeSet<NaiveDate>, (m, t): (BTreeMap<NaiveDate, u64>, u64)) -> Markup {
    html! {
        @for p in packs {
            @match m.get(p) {
                Some(v) => { td.num { (v) } }
                None => { td.num { "–" } }
            }
        }
        td.num { (t) }
    }
}

fn page(
    view: &PlanView,
    date: NaiveDate,
    facility: FacilityIdx,
    rows: &[&ManifestRow],
) -> Result<Markup, OutputError> {
    let sc = view.scenario;
    let f = sc.facilities.get(facility).ok_or_else(|| {
        OutputError::Inconsistent(format!("facility index {facility} is out of range"))
    })?;
    let packs: BTreeSet<NaiveDate> = rows.iter().map(|r| r.pack_date).collect();
    let vials: u64 = rows.iter().map(|r| u64::from(r.vials)).sum();
    let routes: Vec<&crate::dispatch::Route> = view
        .dispatch
        .routes
        .iter()
        .filter(|r| r.depot == facility && r.date == date)
        .collect();
    let parcels = rows.iter().filter(|r| r.mode == Mode::Parcel).count();
    let tick = html! { td.tick { span.box {} } };
    Ok(html! {
        section.day {
            "\n"
            h1 { "Day sheet — " (f.name) " (" (f.id.as_str()) ") — " (day(date)) } "\n"
            p.sub { (vials) " vials in " (rows.len()) " shipments. Load from the oldest pack day first; keep vials shaded and cool." } "\n"
            // What goes on each vehicle, vials by pack day.
            h2 { "What to load" } "\n"
            table {
                thead {
                    tr {
                        th { "Route" } th { "Vehicle" } th { "Leave" } th { "Back" } th.num { "Stops" }
                        @for p in &packs { th.num { "Packed " (p.format("%a %m-%d")) } }
                        th.num { "Vials" } th { "Loaded" }
                    }
                }
                tbody {
                    "\n"
                    @for r in &routes {
                        @let (_, vehicle) = super::route_depot_vehicle(sc, r)?;
                        tr {
                            td.mono { (r.id) } td { (vehicle.id.as_str()) } td { (hhmm(r.depart)) }
                            td { (hhmm(r.return_at)) } td.num { (r.stops.len()) }
                            (cells(&packs, by_pack(rows, |x| x.route_id.as_deref() == Some(r.id.as_str()))))
                            (tick)
                        }
                        "\n"
                    }
                    @if parcels > 0 {
                        tr {
                            td { "Parcels" } td { "carrier" } td colspan="2" { "see labels.html" }
                            td.num { (parcels) }
                            (cells(&packs, by_pack(rows, |x| x.mode == Mode::Parcel)))
                            (tick)
                        }
                        "\n"
                    }
                    tr.total {
                        td colspan="4" { "Total" } td.num { (rows.len()) }
                        (cells(&packs, by_pack(rows, |_| true)))
                        td {}
                    }
                    "\n"
                }
            }
            "\n"
            // Each route's load list, last stop first.
            @if !routes.is_empty() {
                h2 { "Load lists (last stop first)" } "\n"
                div.lists {
                    "\n"
                    @for r in &routes {
                        @let mut list: Vec<&&ManifestRow> = rows
                            .iter()
                            .filter(|x| x.route_id.as_deref() == Some(r.id.as_str()))
                            .collect();
                        @let () = list.sort_by_key(|x| std::cmp::Reverse(x.stop_seq));
                        section {
                            table {
                                thead {
                                    tr { th colspan="5" class="mono" { (r.id) } }
                                    tr { th { "#" } th { "Shipment" } th { "Packed" } th.num { "Vials" } th { "✓" } }
                                }
                                tbody {
                                    "\n"
                                    @for x in list {
                                        tr {
                                            td.num { (x.stop_seq.unwrap_or(0)) } td.mono { (x.shipment_id) }
                                            td { (x.pack_date.format("%a %m-%d")) } td.num { (x.vials) }
                                            (tick)
                                        }
                                        "\n"
                                    }
                                }
                            }
                        }
                        "\n"
                    }
                }
                "\n"
            }
        }
        "\n"
    })
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    fn html() -> String {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        String::from_utf8(render(&v, &plan).unwrap()).unwrap()
    }

    #[test]
    fn one_page_per_depot_day_with_vials_by_pack_day() {
        let h = html();
        // F2 sends the R3 parcel on Monday; F1 runs Tuesday; F2 runs Thursday.
        assert_eq!(h.matches("<section class=\"day\">").count(), 3);
        assert!(h.contains("Day sheet — North insectary (F1) — Tue 2027-03-02"));
        // Route 1 carries B1 and R1 packed Tuesday (3 + 2) and B2 packed Monday (4).
        let start = h.find("Day sheet — North insectary").unwrap();
        let f1 = &h[start..];
        let f1 = &f1[..f1.find("</section>").unwrap()];
        assert!(f1.contains(
            "<th class=\"num\">Packed Mon 03-01</th><th class=\"num\">Packed Tue 03-02</th>"
        ));
        assert!(f1.contains("<td class=\"num\">3</td><td class=\"num\">4</td><td class=\"num\">5</td><td class=\"num\">9</td>"), "{f1}");
        // Load list: stop 3 first.
        let list = &f1[f1.find("Load lists").unwrap()..];
        let (s3, s1) = (
            list.find("S-F1-20270302-B2").unwrap(),
            list.find("S-F1-20270302-B1").unwrap(),
        );
        assert!(s3 < s1);
    }

    #[test]
    fn names_are_escaped_by_the_template_and_an_empty_week_says_so() {
        let mut p = tiny_plan();
        p.scenario.facilities[0].name = "<b>North</b> & \"co\"".into();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let h = String::from_utf8(render(&v, &plan).unwrap()).unwrap();
        assert!(!h.contains("<b>North"), "{h}");
        assert!(
            h.contains("Day sheet — &lt;b&gt;North&lt;/b&gt; &amp; &quot;co&quot; (F1)"),
            "{h}"
        );
        let mut empty = tiny_plan();
        empty.dispatch.routes.clear();
        empty.dispatch.parcels.clear();
        empty.allocation.shipments.clear();
        let v = empty.view();
        let plan = Delivered::build(&v).unwrap();
        let h = String::from_utf8(render(&v, &plan).unwrap()).unwrap();
        assert!(
            h.contains(
                "<section class=\"day\"><h1>Nothing to load this week</h1></section>\n</body>"
            ),
            "{h}"
        );
    }

    #[test]
    fn no_address_on_day_sheets() {
        let h = html();
        for a in ["12 Palm Row", "3 Grove Lane", "88 Canal Street"] {
            assert!(!h.contains(a), "{a}");
        }
    }
}
