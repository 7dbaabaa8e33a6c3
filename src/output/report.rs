//! `report.html`: the coordinator's printable plan report. Headline figures, a map of served
//! and unserved sites, supply used per facility and day, service by priority band, why sites
//! got nothing, marginal value of supply, binding constraints, notes and the cautions.
//!
//! No homeowner personal data: requests appear by id and position only, never by address.

use std::collections::BTreeMap;
use std::fmt::Write;

use chrono::NaiveDate;

use super::svg::{Frame, f1};
use super::{CAUTIONS, Delivered, OutputError, PlanView, esc, fixed, priority_of};
use crate::scenario::SiteKind;

const CSS: &str = r#"
@page { size: portrait; margin: 12mm; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9.5pt; color: #000; margin: 0; }
h1 { font-size: 16pt; margin: 0 0 1mm 0; }
h2 { font-size: 11.5pt; margin: 5mm 0 1.5mm 0; border-bottom: 0.3mm solid #999; }
section { break-inside: avoid; }
.muted { color: #555; }
.figures { display: flex; flex-wrap: wrap; gap: 2mm; margin: 3mm 0; }
.fig { border: 0.3mm solid #999; padding: 2mm 3mm; min-width: 34mm; flex: 1; }
.fig .n { font-size: 15pt; font-weight: bold; }
.fig .l { font-size: 8pt; color: #444; }
table { border-collapse: collapse; width: 100%; }
th, td { border: 0.3mm solid #bbb; padding: 0.8mm 1.5mm; text-align: left; }
th { background: #eee; font-size: 8.5pt; }
td.num { text-align: right; white-space: nowrap; }
.bar { display: inline-block; height: 3mm; background: #3a7d2c; vertical-align: middle; }
.bar.unmet { background: #d9a441; }
svg { width: 100%; height: auto; }
.map { border: 0.3mm solid #999; }
.two { display: flex; gap: 4mm; }
.two > div { flex: 1; }
ul { margin: 1mm 0 0 5mm; padding: 0; }
"#;

/// Colours per facility for the bar chart (cycled).
const PALETTE: [&str; 6] = [
    "#1f4e9c", "#c0392b", "#2e8b57", "#8e44ad", "#d35400", "#16a085",
];

pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let al = view.allocation;
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>Plan report — {name} — week of {w}</title>\n<style>{CSS}</style>\n</head>\n<body>\n\
<h1>Plan report: {name}</h1>\n<p class=\"muted\">Week of {w} · agent {agent} · {n_sites} candidate sites · {n_fac} facilities</p>\n",
        name = esc(&sc.name),
        w = sc.week_start,
        agent = esc(&sc.agent.name),
        n_sites = sc.sites.len(),
        n_fac = sc.facilities.len(),
    );

    let supply = sc.total_supply_vials();
    let shipped = plan.shipped_vials();
    let served = |kind: SiteKind| {
        sc.sites
            .iter()
            .enumerate()
            .filter(|(i, s)| s.kind() == kind && plan.served(*i))
            .count()
    };
    let candidates = |kind: SiteKind| sc.sites.iter().filter(|s| s.kind() == kind).count();
    let pct = |a: f64, b: f64| {
        if b > 0.0 {
            fixed(100.0 * a / b, 0)
        } else {
            "0".into()
        }
    };
    h.push_str("<div class=\"figures\">");
    for (n, l) in [
        (
            format!("{shipped} / {supply}"),
            format!(
                "vials shipped of supply ({} %)",
                pct(shipped as f64, supply as f64)
            ),
        ),
        (
            served(SiteKind::Block).to_string(),
            format!("blocks served of {}", candidates(SiteKind::Block)),
        ),
        (
            served(SiteKind::Dooryard).to_string(),
            format!("requests served of {}", candidates(SiteKind::Dooryard)),
        ),
        (
            fixed(plan.wasps_expected_alive(), 0),
            "expected live wasps released".to_string(),
        ),
        (
            format!("{} %", fixed(100.0 * al.gap, 2)),
            format!(
                "gap to the whole-vial bound (objective {} of {}; LP bound {})",
                fixed(al.objective, 1),
                fixed(al.bound, 1),
                fixed(al.lp_bound, 1)
            ),
        ),
    ] {
        let _ = write!(
            h,
            "<div class=\"fig\"><div class=\"n\">{}</div><div class=\"l\">{}</div></div>",
            esc(&n),
            esc(&l)
        );
    }
    let _ = writeln!(
        h,
        "</div>\n<p class=\"muted\">{}, {}, {} allocated but undeliverable.</p>",
        count(view.dispatch.routes.len(), "route", "routes"),
        count(view.dispatch.parcels.len(), "parcel", "parcels"),
        count(view.dispatch.undeliverable.len(), "shipment", "shipments")
    );

    h.push_str("<section><h2>Map</h2>\n");
    h.push_str(&overview_map(view, plan));
    h.push_str("</section>\n");

    h.push_str("<section><h2>Supply used per facility and pack day</h2>\n");
    h.push_str(&supply_chart(view, plan));
    h.push_str("</section>\n");

    priority_bands(&mut h, view, plan);
    why_not(&mut h, view, plan);

    h.push_str("<section class=\"two\"><div><h2>Marginal value per vial</h2><table><thead><tr><th>Facility</th><th>Objective per extra vial</th></tr></thead><tbody>");
    for (f, v) in sc.facilities.iter().zip(&al.marginal_value_per_vial) {
        let _ = write!(
            h,
            "<tr><td>{} ({})</td><td class=\"num\">{}</td></tr>",
            esc(&f.name),
            esc(f.id.as_str()),
            fixed(*v, 3)
        );
    }
    h.push_str("</tbody></table></div><div><h2>Binding constraints</h2>");
    if al.binding.is_empty() {
        h.push_str("<p class=\"muted\">None.</p>");
    } else {
        h.push_str("<table><thead><tr><th>Constraint</th><th>Dual (objective per unit)</th></tr></thead><tbody>");
        for b in &al.binding {
            let _ = write!(
                h,
                "<tr><td>{}</td><td class=\"num\">{}</td></tr>",
                esc(&b.name),
                fixed(b.dual, 3)
            );
        }
        h.push_str("</tbody></table>");
    }
    h.push_str("</div></section>\n");

    let notes: Vec<String> = view.notes().cloned().collect();
    for (title, lines) in [
        ("Notes", &notes[..]),
        ("Moved by route feedback", view.moved),
    ] {
        let _ = write!(h, "<section><h2>{title}</h2>");
        if lines.is_empty() {
            h.push_str("<p class=\"muted\">None.</p>");
        } else {
            h.push_str("<ul>");
            for l in lines {
                let _ = write!(h, "<li>{}</li>", esc(l));
            }
            h.push_str("</ul>");
        }
        h.push_str("</section>\n");
    }

    h.push_str("<section><h2>Cautions</h2><ul>");
    for c in CAUTIONS {
        let _ = write!(h, "<li>{}</li>", esc(c));
    }
    h.push_str("</ul></section>\n</body>\n</html>\n");
    Ok(h.into_bytes())
}

/// Sites as markers (circle: block, diamond: request; served: filled green, unserved
/// eligible: open orange, ineligible: open grey), facilities as labelled squares, legend, scale bar, north arrow. O(S + F).
fn overview_map(view: &PlanView, plan: &Delivered) -> String {
    let sc = view.scenario;
    let (w, hgt) = (700.0, 380.0);
    let mut pts: Vec<_> = sc.sites.iter().map(|s| s.location).collect();
    pts.extend(sc.facilities.iter().map(|f| f.location));
    let frame = Frame::fit(&pts, w, hgt, 30.0, 2.0);
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"map\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {hgt}\" role=\"img\" aria-label=\"Map of sites and facilities\"><rect width=\"{w}\" height=\"{hgt}\" fill=\"#fbfbf7\"/>"
    );
    // Unserved first so served sites draw on top.
    let mut order: Vec<usize> = (0..sc.sites.len()).collect();
    order.sort_by_key(|&i| plan.served(i));
    for i in order {
        let site = &sc.sites[i];
        let (x, y) = frame.px(site.location);
        let ineligible = view.allocation.sites.get(i).is_some_and(|o| !o.eligible);
        let (fill, stroke, width) = if plan.served(i) {
            ("#3a7d2c", "#fff", 1.0)
        } else if ineligible {
            ("none", "#999", 1.2)
        } else {
            ("none", "#d9a441", 1.8)
        };
        s.push_str(&marker(site.kind(), x, y, fill, stroke, width));
    }
    for f in &sc.facilities {
        let (x, y) = frame.px(f.location);
        let _ = write!(
            s,
            "<rect x=\"{}\" y=\"{}\" width=\"12\" height=\"12\" fill=\"#000\"/><text x=\"{}\" y=\"{}\" font-size=\"12\" font-weight=\"bold\">{}</text>",
            f1(x - 6.0),
            f1(y - 6.0),
            f1(x + 9.0),
            f1(y + 4.0),
            esc(f.id.as_str())
        );
    }
    // Legend, top-left: colour says what happened, shape says what kind of site.
    let _ = write!(
        s,
        "<g class=\"legend\" font-size=\"11\"><rect x=\"8\" y=\"8\" width=\"160\" height=\"108\" fill=\"#fff\" fill-opacity=\"0.85\" stroke=\"#999\"/>"
    );
    let rows = [
        (
            marker(SiteKind::Block, 20.0, 22.0, "#3a7d2c", "#fff", 1.0),
            "served",
        ),
        (
            marker(SiteKind::Block, 20.0, 38.0, "none", "#d9a441", 1.8),
            "eligible, not served",
        ),
        (
            marker(SiteKind::Block, 20.0, 54.0, "none", "#999", 1.2),
            "ineligible",
        ),
        (
            marker(SiteKind::Block, 20.0, 70.0, "#555", "#fff", 1.0),
            "grove block",
        ),
        (
            marker(SiteKind::Dooryard, 20.0, 86.0, "#555", "#fff", 1.0),
            "dooryard request",
        ),
        (
            "<rect x=\"14\" y=\"96\" width=\"12\" height=\"12\" fill=\"#000\"/>".to_string(),
            "facility",
        ),
    ];
    for (k, (m, label)) in rows.iter().enumerate() {
        let _ = write!(
            s,
            "{m}<text x=\"32\" y=\"{}\">{label}</text>",
            f1(26.0 + 16.0 * k as f64)
        );
    }
    s.push_str("</g>");
    s.push_str(&frame.furniture());
    s.push_str("</svg>\n");
    s
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
    format!("{n} {}", if n == 1 { one } else { many })
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

/// Priority quartiles by rank among sites that had an arc (eligible), highest first. O(S log S).
fn priority_bands(h: &mut String, view: &PlanView, plan: &Delivered) {
    let mut ranked: Vec<(usize, f64)> = view
        .allocation
        .sites
        .iter()
        .filter(|o| o.eligible)
        .map(|o| (o.site, priority_of(view, o.site)))
        .collect();
    ranked.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    h.push_str("<section><h2>Served and unmet by priority band</h2>\
<p class=\"muted\">Eligible sites ranked by priority and split into quartiles (Q1 = highest).</p>\
<table><thead><tr><th>Band</th><th>Priority range</th><th>Sites</th><th>Served</th><th>Unmet</th><th>Share served</th></tr></thead><tbody>");
    let n = ranked.len();
    for q in 0..4 {
        let band = &ranked[n * q / 4..n * (q + 1) / 4];
        if band.is_empty() {
            continue;
        }
        let served = band.iter().filter(|(i, _)| plan.served(*i)).count();
        let unmet = band.len() - served;
        let share = served as f64 / band.len() as f64;
        let _ = write!(
            h,
            "<tr><td>Q{}</td><td class=\"num\">{} – {}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
<td><span class=\"bar\" style=\"width:{}mm\"></span><span class=\"bar unmet\" style=\"width:{}mm\"></span> {} %</td></tr>",
            q + 1,
            fixed(band.last().map_or(0.0, |b| b.1), 3),
            fixed(band[0].1, 3),
            band.len(),
            served,
            unmet,
            fixed(40.0 * share, 1),
            fixed(40.0 * (1.0 - share), 1),
            fixed(100.0 * share, 0)
        );
    }
    h.push_str("</tbody></table></section>\n");
}

/// Counts by reason and the highest-priority unserved sites. O(S log S).
fn why_not(h: &mut String, view: &PlanView, plan: &Delivered) {
    let sc = view.scenario;
    let mut counts: BTreeMap<&str, (usize, usize)> = BTreeMap::new();
    let mut unserved: Vec<(usize, f64, &str)> = Vec::new();
    for (i, site) in sc.sites.iter().enumerate() {
        if let Some(r) = plan.reason(view, i) {
            let e = counts.entry(r).or_insert((0, 0));
            match site.kind() {
                SiteKind::Block => e.0 += 1,
                SiteKind::Dooryard => e.1 += 1,
            }
            let p = priority_of(view, i);
            unserved.push((i, p, r));
        }
    }
    unserved.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    h.push_str("<section class=\"two\"><div><h2>Why sites got nothing</h2><table><thead><tr><th>Reason</th><th>Blocks</th><th>Requests</th></tr></thead><tbody>");
    for (r, (b, d)) in &counts {
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=\"num\">{b}</td><td class=\"num\">{d}</td></tr>",
            esc(r)
        );
    }
    if counts.is_empty() {
        h.push_str("<tr><td colspan=\"3\" class=\"muted\">Every site was served.</td></tr>");
    }
    h.push_str("</tbody></table></div><div><h2>Top unserved sites by priority</h2><table><thead><tr><th>Site</th><th>Kind</th><th>Priority</th><th>Reason</th></tr></thead><tbody>");
    for (i, p, r) in unserved.iter().take(15) {
        let site = &sc.sites[*i];
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
            esc(site.id.as_str()),
            site.kind().as_str(),
            fixed(*p, 3),
            esc(r)
        );
    }
    h.push_str("</tbody></table></div></section>\n");
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
    fn report_has_the_sections_and_no_addresses() {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let h = String::from_utf8(render(&v, &plan).unwrap()).unwrap();
        for needle in [
            "16 / 60",
            "vials shipped of supply (27 %)",
            "gap to the whole-vial bound",
            "Why sites got nothing",
            "undeliverable",
            "supply_F1_2027-03-02",
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
}
