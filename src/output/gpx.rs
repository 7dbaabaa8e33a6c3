//! `routes/<route id>.gpx`: one GPX 1.1 file per route (the open exchange format of
//! navigation devices and phone apps, <https://www.topografix.com/GPX/1/1/>), so a driver can
//! load the run onto a device.
//!
//! Each file holds the depot and the stops as waypoints in visiting order (`name` = stop
//! number and site id, `desc` = shipment id, vials and release-by, `cmt` = the request's
//! street address for a dooryard stop, or "address withheld" when redacted), the same places
//! as a `rte` for apps that navigate a route point by point, and the driven path
//! ([`Route::path`]) as the track. Times are local and the scenario names no time zone, so
//! no `time` element is written (GPX times are UTC). Hand-written XML: every value from the
//! input is escaped and characters XML 1.0 forbids are dropped.

use std::fmt::Write;

use super::route_sheets::WITHHELD;
use super::{Delivered, OutputError, PlanView, ROUTES_DIR, bad_site, fixed, iso_minutes};
use crate::dispatch::Route;
use crate::scenario::{LonLat, SiteDetail};

/// One `(file name, bytes)` per route, in route order. File names are the route ids with
/// characters other than ASCII letters, digits, `-` and `_` written as `_`; a name already
/// taken gets `-2`, `-3`… O(total path points + stops).
pub(crate) fn render_all(
    view: &PlanView,
    plan: &Delivered,
    redact: bool,
) -> Result<Vec<(String, Vec<u8>)>, OutputError> {
    let mut out: Vec<(String, Vec<u8>)> = Vec::new();
    let mut taken = std::collections::BTreeSet::new();
    for r in &view.dispatch.routes {
        let stem: String =
            r.id.chars()
                .map(|c| {
                    if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                        c
                    } else {
                        '_'
                    }
                })
                .collect();
        let mut name = format!("{ROUTES_DIR}/{stem}.gpx");
        let mut k = 2;
        while !taken.insert(name.clone()) {
            name = format!("{ROUTES_DIR}/{stem}-{k}.gpx");
            k += 1;
        }
        out.push((name, route(view, plan, r, redact)?.into_bytes()));
    }
    Ok(out)
}

/// Escapes text for XML element content and attribute values, dropping the control
/// characters XML 1.0 does not allow (§2.2).
pub(crate) fn xml(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&apos;"),
            '\t' | '\n' | '\r' => o.push(c),
            c if (c as u32) < 0x20 || c == '\u{FFFE}' || c == '\u{FFFF}' => {}
            c => o.push(c),
        }
    }
    o
}

/// `lat="…" lon="…"`, 6 decimals (about 0.1 m).
fn at(p: LonLat) -> String {
    format!("lat=\"{}\" lon=\"{}\"", fixed(p.lat, 6), fixed(p.lon, 6))
}

/// A waypoint (`wpt` or `rtept`): the children in the order the schema's `wptType` fixes
/// (name, cmt, desc, …, type).
fn point(tag: &str, p: LonLat, name: &str, cmt: Option<&str>, desc: &str, kind: &str) -> String {
    let mut s = format!("<{tag} {}><name>{}</name>", at(p), xml(name));
    if let Some(c) = cmt {
        let _ = write!(s, "<cmt>{}</cmt>", xml(c));
    }
    let _ = writeln!(
        s,
        "<desc>{}</desc><type>{}</type></{tag}>",
        xml(desc),
        xml(kind)
    );
    s
}

fn route(
    view: &PlanView,
    plan: &Delivered,
    r: &Route,
    redact: bool,
) -> Result<String, OutputError> {
    let sc = view.scenario;
    let depot = sc
        .facilities
        .get(r.depot)
        .ok_or_else(|| OutputError::Inconsistent(format!("route {}: no depot", r.id)))?;
    let vehicle = sc
        .fleet
        .get(r.vehicle)
        .ok_or_else(|| OutputError::Inconsistent(format!("route {}: no vehicle", r.id)))?;
    let mut places = vec![point(
        "wpt",
        depot.location,
        &format!("Depot {}", depot.id.as_str()),
        None,
        &format!(
            "{}; leave {}, back {}",
            depot.name,
            iso_minutes(r.depart),
            iso_minutes(r.return_at)
        ),
        "depot",
    )];
    for (i, st) in r.stops.iter().enumerate() {
        let site = sc.sites.get(st.site).ok_or_else(|| bad_site(st.site))?;
        let row = plan.row_of(st.shipment)?;
        let cmt = match &site.detail {
            SiteDetail::Dooryard(_) if redact => Some(WITHHELD.to_string()),
            SiteDetail::Dooryard(req) => Some(req.address.clone()),
            SiteDetail::Block(b) => Some(format!("block access point; {}", b.crop)),
        };
        places.push(point(
            "wpt",
            site.location,
            &format!("{:02} {}", i + 1, site.id.as_str()),
            cmt.as_deref(),
            &format!(
                "shipment {}; {} vials; release by {}",
                row.shipment_id,
                st.vials,
                iso_minutes(st.release_by)
            ),
            site.kind().as_str(),
        ));
    }
    let mut s = format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n\
<gpx version=\"1.1\" creator=\"broodcast\" xmlns=\"http://www.topografix.com/GPX/1/1\" \
xmlns:xsi=\"http://www.w3.org/2001/XMLSchema-instance\" \
xsi:schemaLocation=\"http://www.topografix.com/GPX/1/1 http://www.topografix.com/GPX/1/1/gpx.xsd\">\n\
<metadata><name>Route {id}</name><desc>{date}, vehicle {veh}, depot {did}, {n} stops, {vials} vials{red}</desc></metadata>\n",
        id = xml(&r.id),
        date = r.date,
        veh = xml(vehicle.id.as_str()),
        did = xml(depot.id.as_str()),
        n = r.stops.len(),
        vials = r.vials(),
        red = if redact { "; addresses withheld" } else { "" },
    );
    for p in &places {
        s.push_str(p);
    }
    // The same places as a route, depot to depot, for apps that navigate point by point.
    let _ = writeln!(s, "<rte><name>Route {}</name>", xml(&r.id));
    for p in places.iter().chain(places.first()) {
        s.push_str(
            &p.replacen("<wpt ", "<rtept ", 1)
                .replace("</wpt>", "</rtept>"),
        );
    }
    s.push_str("</rte>\n");
    let _ = write!(s, "<trk><name>Route {} driven path</name>", xml(&r.id));
    if r.path.len() >= 2 {
        s.push_str("<trkseg>\n");
        for p in &r.path {
            let _ = writeln!(s, "<trkpt {}/>", at(*p));
        }
        s.push_str("</trkseg>");
    }
    s.push_str("</trk>\n</gpx>\n");
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    fn files(redact: bool) -> Vec<(String, String)> {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        render_all(&v, &plan, redact)
            .unwrap()
            .into_iter()
            .map(|(n, b)| (n, String::from_utf8(b).unwrap()))
            .collect()
    }

    #[test]
    fn one_file_per_route_with_stops_in_order_and_the_path_as_track() {
        let f = files(false);
        assert_eq!(f.len(), 2);
        let (name, g) = &f[0];
        assert_eq!(name, "routes/R-F1-20270302-1.gpx");
        let names: Vec<&str> = g
            .match_indices("<wpt ")
            .map(|(i, _)| {
                let n = &g[i..];
                &n[n.find("<name>").unwrap() + 6..n.find("</name>").unwrap()]
            })
            .collect();
        assert_eq!(names, ["Depot F1", "01 B1", "02 R1", "03 B2"]);
        assert!(g.contains("<cmt>12 Palm Row</cmt>"), "R1's address");
        let p = tiny_plan();
        let path = &p.dispatch.routes[0].path;
        assert_eq!(g.matches("<trkpt ").count(), path.len());
        assert_eq!(g.matches("<rtept ").count(), 5, "depot, 3 stops, depot");
        assert!(g.contains("shipment S-F1-20270302-B1; 3 vials; release by "));
    }

    #[test]
    fn redacted_files_hold_no_address() {
        let f = files(true);
        assert!(
            f.iter()
                .all(|(_, g)| !g.contains("Palm Row") && !g.contains("Grove Lane"))
        );
        // R1 as a waypoint and as a route point.
        assert_eq!(f[0].1.matches("<cmt>address withheld</cmt>").count(), 2);
    }

    /// A route id from hostile facility ids never names a file outside `routes/`, and two ids
    /// that clean up the same get distinct names.
    #[test]
    fn file_names_stay_in_the_routes_folder_and_are_unique() {
        let mut p = tiny_plan();
        p.dispatch.routes[0].id = "R-../../etc/x".into();
        p.dispatch.routes[1].id = "R-..\\..\\etc\\x".into();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let names: Vec<String> = render_all(&v, &plan, false)
            .unwrap()
            .into_iter()
            .map(|(n, _)| n)
            .collect();
        assert_eq!(
            names,
            ["routes/R-______etc_x.gpx", "routes/R-______etc_x-2.gpx"]
        );
    }

    #[test]
    fn hostile_text_is_escaped_and_forbidden_characters_dropped() {
        assert_eq!(
            xml("<a b=\"c\">&'\u{1}x"),
            "&lt;a b=&quot;c&quot;&gt;&amp;&apos;x"
        );
    }
}
