//! `labels.html`: parcel labels laid out to cut, [`LABELS_PER_PAGE`] to a printed page
//! (two columns of four, 90 mm × 58 mm, dashed cut lines), on the one page size of every HTML
//! output ([`super::PAGE_SIZE`]; the grid keeps to the A4 text width).
//!
//! Each label carries the recipient (request id and street address, or "address withheld"
//! with the coordinates when redacted), the shipment id, the release-by time, the sending
//! facility, vials and hand-over, and the cautions ([`super::CAUTIONS`]). A driver's
//! document: with the route sheets and the GPX files, the only outputs that carry an address.
//!
//! The body is a `maud` template: every value spliced into it is HTML-escaped, so no name,
//! address or id can become markup. The page head is the shared one
//! (`super::week_page_head`), escaped with [`super::esc`].

use maud::html;

use super::route_sheets::WITHHELD;
use super::{CAUTIONS, Delivered, OutputError, PlanView, bad_site, fixed};
use crate::scenario::SiteDetail;

/// Labels on one printed page (2 columns × 4 rows; measured in headless Chromium on Letter
/// and A4, `tests/it/paperwork.rs`).
pub const LABELS_PER_PAGE: usize = 8;

const CSS: &str = r#"
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9pt; color: #000; margin: 0; }
.page { break-before: page; display: grid; grid-template-columns: 90mm 90mm; grid-auto-rows: 58mm; gap: 0; width: 180mm; }
.page:first-of-type { break-before: auto; }
h1 { font-size: 12pt; margin: 0 0 2mm 0; }
.intro { font-size: 8pt; color: #444; margin: 0 0 2mm 0; }
.label { border: 0.3mm dashed #777; padding: 2.5mm 3mm; overflow: hidden; display: flex; flex-direction: column; gap: 0.7mm; }
.top { display: flex; justify-content: space-between; font-size: 7.5pt; color: #333; }
.to { font-size: 10.5pt; line-height: 1.15; min-height: 11mm; }
.to .k { font-size: 7pt; color: #555; display: block; }
.ship { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 10pt; font-weight: bold; }
.by { font-size: 10pt; font-weight: bold; border: 0.4mm solid #000; padding: 0.5mm 1.5mm; align-self: flex-start; }
.live { font-size: 7.5pt; font-weight: bold; }
.label > * { flex-shrink: 0; }
.cautions { font-size: 6pt; line-height: 1.2; color: #222; margin: 0; padding-left: 3mm; flex-shrink: 1; min-height: 0; overflow: hidden; }
.muted { color: #555; }
"#;

/// One page of labels per [`LABELS_PER_PAGE`] parcels, in the dispatch's parcel order
/// (hand-over time, then site). O(P).
pub(crate) fn render(
    view: &PlanView,
    plan: &Delivered,
    redact: bool,
) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let parcels = &view.dispatch.parcels;
    let body = html! {
        @if parcels.is_empty() {
            h1 { "Parcel labels — week of " (sc.week_start) }
            p.intro { "No parcels this week." } "\n"
        }
        @for (page, chunk) in parcels.chunks(LABELS_PER_PAGE).enumerate() {
            @if page == 0 {
                h1 { "Parcel labels — week of " (sc.week_start) }
                p.intro {
                    (parcels.len()) " parcels; cut along the dashed lines."
                    @if redact {
                        " Addresses withheld for sharing: recipients are given by request id and coordinates."
                    }
                }
                "\n"
            }
            section.page {
                "\n"
                @for p in chunk {
                    @let site = sc.sites.get(p.site).ok_or_else(|| bad_site(p.site))?;
                    @let row = plan.row_of(p.shipment)?;
                    @let coords = format!("{}, {}", fixed(site.location.lat, 6), fixed(site.location.lon, 6));
                    @let f = sc.facilities.get(row.facility).ok_or_else(|| {
                        OutputError::Inconsistent("parcel facility out of range".into())
                    })?;
                    div.label {
                        div.top {
                            span { "From " (f.name) " (" (f.id.as_str()) ")" }
                            span { (p.vials) " vials · hand over " (p.ship_at.format("%a %Y-%m-%d %H:%M")) }
                        }
                        div.to {
                            span.k { "To" }
                            @match &site.detail {
                                SiteDetail::Dooryard(_) if redact => {
                                    "Request " (site.id.as_str()) br; em { (WITHHELD) } br; span.muted { (coords) }
                                }
                                SiteDetail::Dooryard(req) => { "Request " (site.id.as_str()) br; (req.address) }
                                SiteDetail::Block(_) => {
                                    "Block " (site.id.as_str()) br; span.muted { "access point " (coords) }
                                }
                            }
                        }
                        div.ship { (row.shipment_id) }
                        div.by { "Release by " (p.release_by.format("%a %Y-%m-%d %H:%M")) }
                        div.live { "LIVE INSECTS — keep cool and shaded, do not freeze" }
                        ul.cautions { @for c in CAUTIONS { li { (c) } } }
                    }
                    "\n"
                }
            }
            "\n"
        }
    };
    let mut h = super::week_page_head(sc, "Parcel labels", redact, CSS);
    h.push_str(&body.into_string());
    h.push_str("</body>\n</html>\n");
    Ok(h.into_bytes())
}

#[cfg(test)]
mod tests {
    use super::super::esc;
    use super::super::fixture::tiny_plan;
    use super::*;

    fn html(p: &super::super::fixture::TinyPlan, redact: bool) -> String {
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        String::from_utf8(render(&v, &plan, redact).unwrap()).unwrap()
    }

    #[test]
    fn a_label_per_parcel_with_address_shipment_release_by_facility_and_cautions() {
        let p = tiny_plan();
        let h = html(&p, false);
        assert_eq!(h.matches("<div class=\"label\">").count(), 1);
        assert!(h.contains("Request R3<br>88 Canal Street"));
        assert!(h.contains("S-F2-20270301-R3"));
        assert!(h.contains("Release by "));
        assert!(h.contains("From South insectary (F2)"));
        for c in CAUTIONS {
            assert!(h.contains(&esc(c)), "{c}");
        }
        let red = html(&p, true);
        assert!(!red.contains("88 Canal Street"));
        assert!(red.contains("<em>address withheld</em>"));
    }

    #[test]
    fn labels_fill_pages_of_eight() {
        let mut p = tiny_plan();
        let one = p.dispatch.parcels[0].clone();
        p.dispatch.parcels = vec![one; 17];
        let h = html(&p, false);
        assert_eq!(h.matches("<section class=\"page\">").count(), 3);
        assert_eq!(h.matches("<div class=\"label\">").count(), 17);
    }

    #[test]
    fn names_and_addresses_are_escaped_by_the_template() {
        let mut p = tiny_plan();
        p.scenario.facilities[1].name = "<b>South</b> & \"co\"".into();
        for s in &mut p.scenario.sites {
            if let SiteDetail::Dooryard(r) = &mut s.detail {
                r.address = "1 <i>Evil</i> Way".into();
            }
        }
        let h = html(&p, false);
        assert!(!h.contains("<b>South") && !h.contains("<i>Evil"), "{h}");
        assert!(
            h.contains("From &lt;b&gt;South&lt;/b&gt; &amp; &quot;co&quot; (F2)"),
            "{h}"
        );
        assert!(
            h.contains("Request R3<br>1 &lt;i&gt;Evil&lt;/i&gt; Way"),
            "{h}"
        );
    }
}
