//! The dispatcher's paperwork and route geometry through the binary on the demo: route lines
//! in `plan.geojson` valid by shapely (RFC 7946), GPX files valid by the GPX 1.1 schema
//! (`xmllint`), `confirmations.csv` accepted by `ledger confirm` once filled in, readable
//! labels on the densest route's map, and the day sheets and parcel labels printed in
//! headless Chromium. Reference tools missing → skipped (failed under
//! `BROODCAST_REQUIRE_REFERENCE_TOOLS=1`).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use broodcast::output::fixture::tiny_plan;
use broodcast::output::{
    CONFIRMATION_COLUMNS, LABELS_PER_PAGE, ROUTES_DIR, render_all, write_dir_atomically,
};
use broodcast::scenario::SiteDetail;

use crate::outputs::{have, pdf_page_text, pdf_pages, print_pdf, printing_tools, screenshots};
use crate::util::{self, run, run_ok};

fn s(p: &Path) -> &str {
    p.to_str().expect("UTF-8 path")
}

/// Plans the demo into `dir/name` (with `extra` arguments) and returns the folder.
fn plan_demo(dir: &Path, name: &str, extra: &[&str]) -> PathBuf {
    let out = dir.join(name);
    let mut args = vec!["plan", "--out", s(&out)];
    args.extend_from_slice(extra);
    run_ok(&args);
    out
}

/// Manifest rows as maps from column name to value.
fn manifest(out: &Path) -> Vec<BTreeMap<String, String>> {
    let mut r = csv::Reader::from_path(out.join("manifest.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            h.iter()
                .zip(rec.iter())
                .map(|(k, v)| (k.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

/// Site ids of each route in stop order, from the manifest.
fn stop_orders(rows: &[BTreeMap<String, String>]) -> BTreeMap<String, Vec<String>> {
    let mut by_route: BTreeMap<String, Vec<(u32, String)>> = BTreeMap::new();
    for r in rows.iter().filter(|r| !r["route_id"].is_empty()) {
        by_route
            .entry(r["route_id"].clone())
            .or_default()
            .push((r["stop_seq"].parse().unwrap(), r["site_id"].clone()));
    }
    by_route
        .into_iter()
        .map(|(k, mut v)| {
            v.sort();
            (k, v.into_iter().map(|(_, s)| s).collect())
        })
        .collect()
}

fn gpx_files(out: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(out.join(ROUTES_DIR))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    v.sort();
    v
}

fn python_with(module: &str, test: &str) -> bool {
    let ok = Command::new("python3")
        .args(["-c", &format!("import {module}")])
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        util::skip(
            test,
            &format!(
                "python3 -c 'import {module}' failed; install it with `python3 -m pip install {module}`"
            ),
        );
    }
    ok
}

/// shapely (Python bindings of GEOS) as the independent reader of `plan.geojson`: every
/// geometry valid, positions lon/lat in range, polygons' exterior rings counter-clockwise
/// (RFC 7946 §3.1.6), LineStrings of two or more positions (§3.1.4), no `crs` (§4); and each
/// route line carries its route, vehicle, date, depot and the manifest's stop order.
const GEOJSON_CHECK: &str = r#"
import json, math, sys
import shapely
from shapely.geometry import shape
doc = json.load(open(sys.argv[1]))
problems = []
if doc.get("type") != "FeatureCollection": problems.append("not a FeatureCollection")
if "crs" in doc: problems.append("crs member")
routes = {}
def positions(c):
    if isinstance(c[0], (int, float)): yield c
    else:
        for x in c: yield from positions(x)
for i, f in enumerate(doc["features"]):
    g = f["geometry"]
    try:
        geom = shape(g)
    except Exception as e:
        problems.append(f"feature {i}: {e}")
        continue
    if not geom.is_valid: problems.append(f"feature {i}: {shapely.validation.explain_validity(geom)}")
    for p in positions(g["coordinates"]):
        if len(p) != 2 or not all(math.isfinite(v) for v in p) or not (-180 <= p[0] <= 180 and -90 <= p[1] <= 90):
            problems.append(f"feature {i}: position {p}")
    if g["type"] == "Polygon" and not shapely.is_ccw(geom.exterior): problems.append(f"feature {i}: clockwise exterior")
    if g["type"] == "LineString":
        if len(g["coordinates"]) < 2: problems.append(f"feature {i}: one position")
        p = f["properties"]
        routes[p["id"]] = {"kind": p["kind"], "vehicle_id": p["vehicle_id"], "date": p["date"],
                           "facility_id": p["facility_id"], "stop_order": p["stop_order"],
                           "length_deg": geom.length}
print(json.dumps({"problems": problems, "routes": routes}))
"#;

#[test]
fn plan_geojson_route_lines_are_valid_rfc_7946_by_shapely() {
    if !python_with(
        "shapely",
        "plan_geojson_route_lines_are_valid_rfc_7946_by_shapely",
    ) {
        return;
    }
    let out = util::demo_plan();
    let o = Command::new("python3")
        .args(["-c", GEOJSON_CHECK])
        .arg(out.join("plan.geojson"))
        .output()
        .expect("python3 runs");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["problems"], serde_json::json!([]), "{}", v["problems"]);
    let rows = manifest(out);
    let orders = stop_orders(&rows);
    let routes = v["routes"].as_object().unwrap();
    assert_eq!(routes.len(), orders.len(), "one line per route");
    for (id, order) in &orders {
        let r = &routes[id.as_str()];
        assert_eq!(r["kind"], "route");
        assert_eq!(r["stop_order"], order.join(";"), "{id}");
        let first = rows.iter().find(|x| &x["route_id"] == id).unwrap();
        assert_eq!(r["facility_id"], first["facility_id"].as_str());
        assert_eq!(r["date"], first["dispatch_date"].as_str());
        assert!(r["vehicle_id"].as_str().is_some_and(|v| !v.is_empty()));
        assert!(r["length_deg"].as_f64().unwrap() > 0.0);
    }
}

/// Waypoint names (`<name>` of each `<wpt>`) of a GPX file, in file order.
fn waypoint_names(gpx: &str) -> Vec<String> {
    gpx.split("<wpt ")
        .skip(1)
        .map(|w| {
            let a = w.find("<name>").unwrap() + 6;
            w[a..w.find("</name>").unwrap()].to_string()
        })
        .collect()
}

/// Every GPX file validates against the published GPX 1.1 schema (TopoGrafix,
/// <https://www.topografix.com/GPX/1/1/gpx.xsd>, copied in tests/data/gpx), also with
/// `--redact` and with hostile text in an address; waypoints follow the manifest's stop order.
#[test]
fn gpx_files_validate_against_the_gpx_1_1_schema() {
    if !have("xmllint") {
        util::skip(
            "gpx_files_validate_against_the_gpx_1_1_schema",
            "xmllint not on PATH (apt-get install libxml2-utils)",
        );
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let full = plan_demo(dir.path(), "full", &[]);
    let red = plan_demo(dir.path(), "redacted", &["--redact"]);
    // The fixture with markup, quotes and a control character in an address.
    let mut p = tiny_plan();
    for site in &mut p.scenario.sites {
        if let SiteDetail::Dooryard(r) = &mut site.detail {
            r.address = "1 <i>Evil</i> & \"Co\" 'Way'\u{7}".into();
        }
    }
    let hostile = dir.path().join("hostile");
    write_dir_atomically(&hostile, &render_all(&p.view()).unwrap()).unwrap();
    let mut files = gpx_files(&full);
    files.extend(gpx_files(&red));
    files.extend(gpx_files(&hostile));
    let schema = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/gpx/gpx.xsd");
    let o = Command::new("xmllint")
        .args(["--noout", "--schema"])
        .arg(&schema)
        .args(&files)
        .output()
        .expect("xmllint runs");
    assert!(
        o.status.success(),
        "xmllint: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let said = String::from_utf8_lossy(&o.stderr);
    assert_eq!(said.matches(" validates").count(), files.len(), "{said}");

    let orders = stop_orders(&manifest(&full));
    assert_eq!(gpx_files(&full).len(), orders.len(), "one file per route");
    for (id, order) in &orders {
        let g = std::fs::read_to_string(full.join(ROUTES_DIR).join(format!("{id}.gpx"))).unwrap();
        let names = waypoint_names(&g);
        assert!(names[0].starts_with("Depot "), "{id}: {names:?}");
        let want: Vec<String> = order
            .iter()
            .enumerate()
            .map(|(i, site)| format!("{:02} {site}", i + 1))
            .collect();
        assert_eq!(names[1..], want, "{id}");
        assert!(g.matches("<trkpt ").count() >= 2, "{id} has a track");
    }
}

/// `confirmations.csv` has exactly the columns `ledger confirm` reads and one row per
/// shipment; as written (status blank) it is refused, naming the line and field; filled in,
/// the ledger takes every row.
#[test]
fn confirmations_csv_filled_in_is_accepted_by_ledger_confirm() {
    let dir = tempfile::tempdir().unwrap();
    let out = util::demo_plan();
    let db = dir.path().join("season.sqlite");
    run_ok(&["ledger", "init", s(&db)]);
    run_ok(&["ledger", "commit", s(&db), s(out)]);

    let form = out.join("confirmations.csv");
    let mut r = csv::Reader::from_path(&form).unwrap();
    assert_eq!(
        r.headers().unwrap().iter().collect::<Vec<_>>(),
        CONFIRMATION_COLUMNS
    );
    let ids: Vec<String> = r.records().map(|x| x.unwrap()[0].to_string()).collect();
    let rows = manifest(out);
    let want: Vec<&str> = rows.iter().map(|r| r["shipment_id"].as_str()).collect();
    assert_eq!(ids, want, "one row per shipment, manifest order");

    let unfilled = run(&["ledger", "confirm", s(&db), s(&form)]);
    assert_eq!(unfilled.status.code(), Some(2));
    let err = String::from_utf8_lossy(&unfilled.stderr);
    assert!(err.contains("confirmations.csv:2: field 'status'"), "{err}");

    // Filled in as a coordinator would: every shipment released on its dispatch day, the
    // first dooryard stop not released.
    let mut w = csv::Writer::from_path(dir.path().join("filled.csv")).unwrap();
    w.write_record(CONFIRMATION_COLUMNS).unwrap();
    let first_dooryard = rows.iter().position(|r| r["site_kind"] == "dooryard");
    for (i, row) in rows.iter().enumerate() {
        if Some(i) == first_dooryard {
            w.write_record([row["shipment_id"].as_str(), "not_released", "", "away"])
                .unwrap();
        } else {
            w.write_record([
                row["shipment_id"].as_str(),
                "released",
                row["dispatch_date"].as_str(),
                "",
            ])
            .unwrap();
        }
    }
    w.flush().unwrap();
    drop(w);
    let said = run_ok(&[
        "ledger",
        "confirm",
        s(&db),
        s(&dir.path().join("filled.csv")),
    ]);
    assert!(
        said.contains(&format!(
            "{} confirmations read, {} shipments changed",
            rows.len(),
            rows.len()
        )),
        "{said}"
    );
}

/// Centres of the SVG circles of `class` in one map.
fn circles(svg: &str, class: &str) -> Vec<(f64, f64)> {
    let tag = format!("<circle class=\"{class}\" cx=\"");
    svg.split(tag.as_str())
        .skip(1)
        .map(|c| {
            let x: f64 = c[..c.find('"').unwrap()].parse().unwrap();
            let c = &c[c.find("cy=\"").unwrap() + 4..];
            let y: f64 = c[..c.find('"').unwrap()].parse().unwrap();
            (x, y)
        })
        .collect()
}

fn pairs_closer_than(p: &[(f64, f64)], d: f64) -> usize {
    let mut n = 0;
    for (i, a) in p.iter().enumerate() {
        for b in &p[i + 1..] {
            if (a.0 - b.0).hypot(a.1 - b.1) < d {
                n += 1;
            }
        }
    }
    n
}

/// Readability on the demo's densest route: no two stop labels overlap and none covers a
/// stop; the figure for markers centred on their stops (the layout before offset labels,
/// radius 10) is printed beside it.
#[test]
fn stop_labels_on_the_demos_densest_route_do_not_overlap() {
    let out = util::demo_plan();
    let html = std::fs::read_to_string(out.join("route-sheets.html")).unwrap();
    let maps = util::route_sheet_maps(&html);
    let densest = maps
        .iter()
        .max_by_key(|m| m.matches("class=\"dot\"").count())
        .unwrap();
    let dots = circles(densest, "dot");
    let labels = circles(densest, "label");
    assert_eq!(dots.len(), labels.len());
    assert!(
        dots.len() >= 12,
        "the demo's densest route has {} stops",
        dots.len()
    );
    let centred = pairs_closer_than(&dots, 20.0);
    let overlapping = pairs_closer_than(&labels, 17.0);
    eprintln!(
        "densest demo route, {} stops: markers centred on stops would overlap in {centred} pairs; offset labels overlap in {overlapping}",
        dots.len()
    );
    assert!(
        centred > 0,
        "the densest route is a cluster: a test worth running"
    );
    assert_eq!(overlapping, 0);
    for l in &labels {
        for d in &dots {
            assert!(
                (l.0 - d.0).hypot(l.1 - d.1) >= 8.5,
                "label {l:?} on stop {d:?}"
            );
        }
    }
}

/// Day sheets: one printed page per depot-day of the demo (each fits one page), every page
/// titled. Labels: pages of [`LABELS_PER_PAGE`]; the demo's parcels and a fixture of 17
/// parcels. Screenshots for docs/img with `BROODCAST_DOCS_IMG`.
#[test]
fn day_sheets_and_labels_print_in_chromium() {
    if !printing_tools() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let out = util::demo_plan();
    let rows = manifest(out);
    let days: std::collections::BTreeSet<(&str, &str)> = rows
        .iter()
        .map(|r| (r["facility_id"].as_str(), r["dispatch_date"].as_str()))
        .collect();
    let pdf = dir.path().join("day-sheets.pdf");
    print_pdf(&out.join("day-sheets.html"), &pdf);
    let pages = pdf_pages(&pdf);
    assert_eq!(pages as usize, days.len(), "one page per depot-day");
    for page in 1..=pages {
        assert!(
            pdf_page_text(&pdf, page).contains("Day sheet —"),
            "page {page}"
        );
    }
    screenshots(&pdf, "day-sheet", 1);

    let parcels = rows.iter().filter(|r| r["mode"] == "parcel").count();
    assert!(parcels > 0, "the demo sends parcels");
    let pdf = dir.path().join("labels.pdf");
    print_pdf(&out.join("labels.html"), &pdf);
    assert_eq!(
        pdf_pages(&pdf) as usize,
        parcels.div_ceil(LABELS_PER_PAGE),
        "{parcels} labels"
    );
    let text = pdf_page_text(&pdf, 1);
    let first = rows.iter().find(|r| r["mode"] == "parcel").unwrap();
    assert!(text.contains(&first["shipment_id"]), "{text}");
    screenshots(&pdf, "labels", 1);

    let mut p = tiny_plan();
    let one = p.dispatch.parcels[0].clone();
    p.dispatch.parcels = vec![one; 17];
    let fixture = dir.path().join("fixture");
    write_dir_atomically(&fixture, &render_all(&p.view()).unwrap()).unwrap();
    let pdf = dir.path().join("labels-17.pdf");
    print_pdf(&fixture.join("labels.html"), &pdf);
    assert_eq!(pdf_pages(&pdf), 3, "17 labels, 8 a page");
}

/// The GPX files are under the plan folder's marker like every other output: a second plan
/// replaces an unchanged folder, and an edited or added file in `routes/` blocks it (exit 2,
/// nothing written).
#[test]
fn an_edited_or_added_gpx_file_blocks_replacing_the_plan_folder() {
    let dir = tempfile::tempdir().unwrap();
    let out = plan_demo(dir.path(), "out", &[]);
    let gpx = gpx_files(&out).remove(0);
    let original = std::fs::read(&gpx).unwrap();
    let mut edited = original.clone();
    edited.extend_from_slice(b"<!-- driver's note -->\n");
    std::fs::write(&gpx, &edited).unwrap();
    let o = run(&["plan", "--out", s(&out)]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("routes/") && err.contains("edited"), "{err}");
    assert_eq!(std::fs::read(&gpx).unwrap(), edited, "the edit is kept");
    // Put back (the refusal wrote nothing), then a file of the user's own in routes/: only
    // that file is in the way.
    std::fs::write(&gpx, &original).unwrap();
    let mine = out.join(ROUTES_DIR).join("mine.gpx");
    std::fs::write(&mine, b"<gpx/>").unwrap();
    let o = run(&["plan", "--out", s(&out)]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("routes/mine.gpx") && !err.contains("edited"),
        "{err}"
    );
    assert_eq!(std::fs::read(&mine).unwrap(), b"<gpx/>");
}
