//! `labels.html`: parcel labels laid out to cut, [`LABELS_PER_PAGE`] to a printed page
//! (two columns of four, 90 mm × 58 mm, dashed cut lines), on the one page size of every HTML
//! output ([`super::PAGE_SIZE`]; the grid keeps to the A4 text width).
//!
//! Each label carries the recipient (request id and street address, or "address withheld"
//! with the coordinates when redacted), the shipment id, the release-by time, the sending
//! facility, vials and hand-over, and the cautions ([`super::CAUTIONS`]). A driver's
//! document: with the route sheets and the GPX files, the only outputs that carry an address.

use std::fmt::Write;

use super::route_sheets::WITHHELD;
use super::{CAUTIONS, Delivered, OutputError, PlanView, bad_site, esc, fixed};
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
    let mut h = super::week_page_head(sc, "Parcel labels", redact, CSS);
    let parcels = &view.dispatch.parcels;
    if parcels.is_empty() {
        let _ = writeln!(
            h,
            "<h1>Parcel labels — week of {}</h1><p class=\"intro\">No parcels this week.</p>",
            sc.week_start
        );
    }
    let cautions: String = CAUTIONS
        .iter()
        .map(|c| format!("<li>{}</li>", esc(c)))
        .collect();
    for (page, chunk) in parcels.chunks(LABELS_PER_PAGE).enumerate() {
        if page == 0 {
            let _ = writeln!(
                h,
                "<h1>Parcel labels — week of {}</h1><p class=\"intro\">{} parcels; cut along the dashed lines.{}</p>",
                sc.week_start,
                parcels.len(),
                if redact {
                    " Addresses withheld for sharing: recipients are given by request id and coordinates."
                } else {
                    ""
                }
            );
        }
        h.push_str("<section class=\"page\">\n");
        for p in chunk {
            let site = sc.sites.get(p.site).ok_or_else(|| bad_site(p.site))?;
            let row = plan.row_of(p.shipment)?;
            let coords = format!(
                "{}, {}",
                fixed(site.location.lat, 6),
                fixed(site.location.lon, 6)
            );
            let to = match &site.detail {
                SiteDetail::Dooryard(_) if redact => format!(
                    "Request {}<br><em>{WITHHELD}</em><br><span class=\"muted\">{coords}</span>",
                    esc(site.id.as_str())
                ),
                SiteDetail::Dooryard(req) => {
                    format!("Request {}<br>{}", esc(site.id.as_str()), esc(&req.address))
                }
                SiteDetail::Block(_) => format!(
                    "Block {}<br><span class=\"muted\">access point {coords}</span>",
                    esc(site.id.as_str())
                ),
            };
            let from = sc
                .facilities
                .get(row.facility)
                .map(|f| format!("{} ({})", esc(&f.name), esc(f.id.as_str())))
                .ok_or_else(|| OutputError::Inconsistent("parcel facility out of range".into()))?;
            let _ = writeln!(
                h,
                "<div class=\"label\"><div class=\"top\"><span>From {from}</span><span>{vials} vials · hand over {ship}</span></div>\
<div class=\"to\"><span class=\"k\">To</span>{to}</div>\
<div class=\"ship\">{sid}</div>\
<div class=\"by\">Release by {by}</div>\
<div class=\"live\">LIVE INSECTS — keep cool and shaded, do not freeze</div>\
<ul class=\"cautions\">{cautions}</ul></div>",
                vials = p.vials,
                ship = p.ship_at.format("%a %Y-%m-%d %H:%M"),
                sid = esc(&row.shipment_id),
                by = p.release_by.format("%a %Y-%m-%d %H:%M"),
            );
        }
        h.push_str("</section>\n");
    }
    h.push_str("</body>\n</html>\n");
    Ok(h.into_bytes())
}

#[cfg(test)]
mod tests {
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
}
