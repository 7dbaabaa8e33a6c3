//! Output files of `plan`, checked as data: manifest and allocation CSV parse back, the
//! GeoJSON parses with the `geojson` crate, addresses stay on route sheets, bytes are
//! deterministic, hostile ids are escaped, and route sheets print one page per route in
//! Chromium (skipped when Chromium or poppler's `pdfinfo` is absent).

use crate::util;

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

use broodcast::output::fixture::{TinyPlan, tiny_plan};
use broodcast::output::{
    FILE_NAMES, ONE_PAGE_STOPS, ROUTES_DIR, RenderOptions, carries_addresses, render_all,
    render_all_with, write_dir_atomically,
};
use broodcast::scenario::SiteDetail;
use chrono::NaiveDateTime;

fn files(p: &TinyPlan) -> BTreeMap<String, String> {
    render_all(&p.view())
        .expect("renders")
        .into_iter()
        .map(|(n, b)| (n, String::from_utf8(b).expect("UTF-8")))
        .collect()
}

fn ts(s: &str) -> NaiveDateTime {
    NaiveDateTime::parse_from_str(s, "%Y-%m-%dT%H:%M").unwrap_or_else(|e| panic!("{s:?}: {e}"))
}

#[test]
fn manifest_csv_has_the_contract_columns_and_values_parse_back() {
    let p = tiny_plan();
    let f = files(&p);
    let mut r = csv::Reader::from_reader(f["manifest.csv"].as_bytes());
    assert_eq!(
        r.headers().unwrap().iter().collect::<Vec<_>>(),
        "shipment_id,facility_id,dispatch_date,mode,route_id,stop_seq,site_id,site_kind,lat,lon,vials,wasps_packed,wasps_expected_alive,eta,release_by"
            .split(',')
            .collect::<Vec<_>>()
    );
    let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
    // 3 + 2 route stops and 1 parcel; the undeliverable B3 shipment is not a row.
    assert_eq!(rows.len(), 6);
    let mut ids = std::collections::BTreeSet::new();
    for row in &rows {
        assert!(
            ids.insert(row[0].to_string()),
            "duplicate shipment id {}",
            &row[0]
        );
        let site = &row[6];
        assert_ne!(site, "B3");
        let idx = p.scenario.site_idx(site).expect("site exists");
        let s = &p.scenario.sites[idx];
        let lat: f64 = row[8].parse().unwrap();
        let lon: f64 = row[9].parse().unwrap();
        assert!((lat - s.location.lat).abs() < 1e-6 && (lon - s.location.lon).abs() < 1e-6);
        assert_eq!(
            row[8].split('.').nth(1).map(str::len),
            Some(6),
            "6 decimals"
        );
        let vials: u64 = row[10].parse().unwrap();
        let fac = p.scenario.facility_idx(&row[1]).expect("facility exists");
        let packed: u64 = row[11].parse().unwrap();
        assert_eq!(
            packed,
            vials * u64::from(p.scenario.facilities[fac].wasps_per_vial)
        );
        let alive: f64 = row[12].parse().unwrap();
        assert!(alive > 0.0 && alive <= packed as f64, "{alive} of {packed}");
        let (eta, by) = (ts(&row[13]), ts(&row[14]));
        assert!(eta <= by, "eta {eta} after release-by {by}");
        assert!(row[0].starts_with(&format!(
            "S-{}-{}-{}",
            &row[1],
            row[2].replace('-', ""),
            site
        )));
        match &row[3] {
            "route" => {
                assert!(row[4].starts_with("R-"));
                let seq: u32 = row[5].parse().unwrap();
                let route = p.dispatch.routes.iter().find(|r| r.id == row[4]).unwrap();
                let stop = &route.stops[seq as usize - 1];
                assert_eq!(stop.site, idx);
                assert!((stop.wasps_expected_alive - alive).abs() < 0.05 + 1e-9);
                assert_eq!(eta, stop.arrival);
            }
            "parcel" => {
                assert_eq!((&row[4], &row[5]), ("", ""));
                assert_eq!(site, "R3");
            }
            m => panic!("mode {m}"),
        }
    }
}

#[test]
fn manifest_json_rows_match_csv_and_route_totals_add_up() {
    let p = tiny_plan();
    let f = files(&p);
    let j: serde_json::Value = serde_json::from_str(&f["manifest.json"]).unwrap();
    let rows = j["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 6);
    let routes = j["routes"].as_array().unwrap();
    assert_eq!(routes.len(), 2);
    for rt in routes {
        let id = rt["route_id"].as_str().unwrap();
        let from_rows: u64 = rows
            .iter()
            .filter(|r| r["route_id"] == id)
            .map(|r| r["vials"].as_u64().unwrap())
            .sum();
        assert_eq!(rt["vials"].as_u64().unwrap(), from_rows, "{id}");
        assert!(ts(rt["depart"].as_str().unwrap()) < ts(rt["return"].as_str().unwrap()));
    }
    assert_eq!(routes[0]["vehicle_id"], "V1");
    assert_eq!(routes[0]["drive_minutes"], 60.0);
    let parcels = j["parcels_per_day"].as_array().unwrap();
    assert_eq!(parcels.len(), 1);
    assert_eq!(parcels[0]["date"], "2027-03-01");
    assert_eq!(parcels[0]["vials"], 2);
    // Sorted by dispatch date: Monday's parcel comes before Tuesday's route.
    assert_eq!(rows[0]["mode"], "parcel");
    assert_eq!(
        (&rows[1]["route_id"], &rows[1]["stop_seq"]),
        (&"R-F1-20270302-1".into(), &1.into())
    );
    let parcel_row = rows.iter().find(|r| r["mode"] == "parcel").unwrap();
    assert!(parcel_row["route_id"].is_null() && parcel_row["stop_seq"].is_null());
}

#[test]
fn geojson_parses_with_the_geojson_crate_and_holds_no_address() {
    let p = tiny_plan();
    let f = files(&p);
    let text = &f["plan.geojson"];
    let gj: geojson::GeoJson = text.parse().expect("valid GeoJSON");
    let geojson::GeoJson::FeatureCollection(fc) = gj else {
        panic!("not a FeatureCollection")
    };
    assert_eq!(
        fc.features.len(),
        p.scenario.sites.len() + p.scenario.facilities.len() + p.dispatch.routes.len()
    );
    assert!(!text.to_lowercase().contains("address"));
    for s in &p.scenario.sites {
        if let Some(r) = s.as_request() {
            assert!(!text.contains(&r.address));
        }
    }
    let raw: serde_json::Value = serde_json::from_str(text).unwrap();
    assert!(raw.get("crs").is_none(), "RFC 7946 §4: no crs member");
    let mut polygons = 0;
    let mut lines = 0;
    for feat in &fc.features {
        let props = feat.properties.as_ref().expect("properties");
        if props["kind"] == "route" {
            lines += 1;
            let g: geo::Geometry<f64> = feat.geometry.clone().unwrap().try_into().unwrap();
            assert!(
                matches!(g, geo::Geometry::LineString(_)),
                "a route is a line"
            );
            continue;
        }
        for key in [
            "id",
            "kind",
            "priority",
            "vials",
            "wasps_expected_alive",
            "facility_id",
            "route_id",
            "reason",
        ] {
            assert!(props.contains_key(key), "missing {key}");
        }
        let geom = feat.geometry.as_ref().expect("geometry");
        let g: geo::Geometry<f64> = geom.clone().try_into().expect("converts to geo");
        if let geo::Geometry::Polygon(poly) = g {
            polygons += 1;
            use geo::Winding;
            assert!(
                poly.exterior().is_ccw(),
                "right-hand rule: exterior counter-clockwise"
            );
            // lon first: the tiny fixture is near lon -80, lat 27.
            let c = poly.exterior().0[0];
            assert!(c.x > 79.0 && c.y > 26.0);
        }
    }
    assert_eq!(polygons, 6, "every block is a polygon");
    assert_eq!(lines, 2, "every route is a line");
}

#[test]
fn request_addresses_appear_on_driver_documents_and_nowhere_else() {
    let p = tiny_plan();
    let f = files(&p);
    let served = ["12 Palm Row", "3 Grove Lane", "88 Canal Street"];
    for a in served {
        assert!(
            f["route-sheets.html"].contains(a),
            "{a} missing from route sheets"
        );
    }
    assert!(
        f["labels.html"].contains("88 Canal Street"),
        "R3's parcel label"
    );
    assert!(f["routes/R-F1-20270302-1.gpx"].contains("12 Palm Row"));
    assert!(f["routes/R-F2-20270304-1.gpx"].contains("3 Grove Lane"));
    for s in &p.scenario.sites {
        let SiteDetail::Dooryard(r) = &s.detail else {
            continue;
        };
        for (name, body) in &f {
            if !carries_addresses(name) {
                assert!(
                    !body.contains(&r.address),
                    "{} leaks into {name}",
                    r.address
                );
            }
        }
    }
}

#[test]
fn redacted_driver_documents_hold_no_address_and_the_rest_is_unchanged() {
    let p = tiny_plan();
    let full = render_all(&p.view()).unwrap();
    let red = render_all_with(&p.view(), &RenderOptions { redact: true }).unwrap();
    assert_eq!(full.len(), red.len());
    for ((n, a), (m, b)) in full.iter().zip(&red) {
        assert_eq!(n, m);
        if !carries_addresses(n) {
            assert_eq!(a, b, "{n} must not change with --redact");
            continue;
        }
        let text = String::from_utf8(b.clone()).unwrap();
        for s in &p.scenario.sites {
            if let Some(r) = s.as_request() {
                assert!(!text.contains(&r.address), "{} in redacted {n}", r.address);
            }
        }
        assert!(text.contains("address withheld"), "{n}");
    }
}

/// Through the binary on the demo: the raw demo `requests.csv` has fake name, phone and
/// e-mail columns. No output holds any of them; no analyst output holds an address (raw or
/// HTML-escaped); the route sheets hold the addresses of the requests they serve, and with
/// `--redact` none at all. Nor does the terminal output.
#[test]
fn demo_outputs_keep_personal_data_where_the_table_in_docs_outputs_says() {
    let bin = env!("CARGO_BIN_EXE_broodcast");
    let raw = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo/requests.csv");
    let mut reader = csv::Reader::from_path(&raw).unwrap();
    let headers = reader.headers().unwrap().clone();
    let col = |name: &str| {
        headers
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("the demo requests.csv needs a {name} column"))
    };
    let (id, address) = (col("id"), col("address"));
    let personal_cols = [col("name"), col("phone"), col("email")];
    let mut requests = Vec::new();
    for rec in reader.records() {
        let rec = rec.unwrap();
        let personal: Vec<String> = personal_cols.iter().map(|&i| rec[i].to_string()).collect();
        assert!(personal.iter().all(|v| !v.is_empty()));
        requests.push((rec[id].to_string(), rec[address].to_string(), personal));
    }
    assert!(
        requests.len() > 50,
        "the demo has {} requests",
        requests.len()
    );

    let tmp = tempfile::tempdir().unwrap();
    let mut outputs = Vec::new();
    for redact in [false, true] {
        let out = tmp.path().join(if redact { "redacted" } else { "full" });
        let mut cmd = Command::new(bin);
        cmd.args(["plan", "--out"]).arg(&out);
        if redact {
            cmd.arg("--redact");
        }
        let o = cmd.output().unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let mut files: BTreeMap<String, String> = BTreeMap::new();
        for name in FILE_NAMES {
            files.insert(
                name.into(),
                std::fs::read_to_string(out.join(name)).unwrap(),
            );
        }
        for e in std::fs::read_dir(out.join(ROUTES_DIR)).unwrap() {
            let e = e.unwrap();
            let name = format!("{ROUTES_DIR}/{}", e.file_name().to_string_lossy());
            files.insert(name, std::fs::read_to_string(e.path()).unwrap());
        }
        assert!(files.keys().any(|n| n.ends_with(".gpx")));
        let mut log = String::from_utf8_lossy(&o.stdout).into_owned();
        log.push_str(&String::from_utf8_lossy(&o.stderr));
        files.insert("(terminal)".into(), log);
        outputs.push(files);
    }
    let escaped = |a: &str| html_escape::encode_quoted_attribute(a).into_owned();
    let mut on_sheets = 0;
    for (req_id, addr, personal) in &requests {
        for (files, redact) in outputs.iter().zip([false, true]) {
            for (name, text) in files {
                for v in personal {
                    assert!(!text.contains(v.as_str()), "{name} holds '{v}' of {req_id}");
                }
                if !carries_addresses(name) || redact {
                    for form in [addr.clone(), escaped(addr)] {
                        assert!(
                            !text.contains(&form),
                            "{name} (redact {redact}) holds the address of {req_id}"
                        );
                    }
                }
            }
        }
        let manifest = &outputs[0]["manifest.csv"];
        if manifest.contains(&format!(",{req_id},dooryard,")) {
            assert!(
                outputs[0]["route-sheets.html"].contains(&escaped(addr)),
                "{req_id} is delivered but its address is not on the route sheets"
            );
            on_sheets += 1;
        }
    }
    assert!(
        on_sheets > 0,
        "no request is served in the demo; nothing was checked"
    );
    // One withheld address per dooryard stop or parcel label, i.e. per dooryard manifest row.
    let mut m = csv::Reader::from_reader(outputs[0]["manifest.csv"].as_bytes());
    let kind = m
        .headers()
        .unwrap()
        .iter()
        .position(|h| h == "site_kind")
        .unwrap();
    let dooryard_rows = m
        .records()
        .filter(|r| &r.as_ref().unwrap()[kind] == "dooryard")
        .count();
    let withheld = outputs[1]["route-sheets.html"]
        .matches("address withheld</em>")
        .count();
    assert_eq!(withheld, dooryard_rows);
}

#[test]
fn rendering_twice_gives_identical_bytes_and_the_folder_holds_them() {
    let p = tiny_plan();
    let a = render_all(&p.view()).unwrap();
    let b = render_all(&p.view()).unwrap();
    assert_eq!(a, b);
    let names: Vec<&str> = a.iter().map(|(n, _)| n.as_str()).collect();
    assert_eq!(names[..FILE_NAMES.len()], FILE_NAMES);
    assert!(
        names[FILE_NAMES.len()..]
            .iter()
            .all(|n| n.ends_with(".gpx"))
    );
    let root = tempfile::tempdir().unwrap();
    let out = root.path().join("out");
    write_dir_atomically(&out, &a).unwrap();
    write_dir_atomically(&out, &b).unwrap();
    for (n, bytes) in &a {
        assert_eq!(&std::fs::read(out.join(n)).unwrap(), bytes, "{n}");
    }
}

#[test]
fn hostile_ids_are_escaped_in_html_and_survive_csv_and_json() {
    let mut p = tiny_plan();
    let evil = "<script>alert(1)</script>";
    p.scenario.sites[0].id.0 = evil.into(); // B1, on route 1
    p.scenario.sites[3].id.0 = "\"><img src=x onerror=alert(2)>".into(); // B4, unserved
    p.scenario.facilities[0].name = "<b>North</b> & co".into();
    if let SiteDetail::Dooryard(r) = &mut p.scenario.sites[6].detail {
        r.address = "1 <i>Evil</i> Way".into();
    }
    p.moved.push("<script>moved</script>".into());
    let f = files(&p);
    for name in ["route-sheets.html", "report.html"] {
        let h = &f[name];
        assert!(!h.contains("<script"), "{name} holds a raw script tag");
        assert!(!h.contains("<img src=x"), "{name} holds a raw img tag");
        assert!(
            !h.contains("<b>North"),
            "{name} holds raw markup from a name"
        );
    }
    assert!(f["route-sheets.html"].contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(f["route-sheets.html"].contains("1 &lt;i&gt;Evil&lt;/i&gt; Way"));
    assert!(f["report.html"].contains("&lt;script&gt;moved&lt;/script&gt;"));
    let mut r = csv::Reader::from_reader(f["allocation.csv"].as_bytes());
    let ids: Vec<String> = r.records().map(|x| x.unwrap()[0].to_string()).collect();
    assert!(ids.contains(&evil.to_string()), "CSV keeps the id as data");
    let gj: geojson::GeoJson = f["plan.geojson"].parse().unwrap();
    assert!(gj.to_string().contains("alert(1)"));
}

pub(crate) fn have(cmd: &str) -> bool {
    Command::new("sh")
        .arg("-c")
        .arg(format!("command -v {cmd}"))
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

pub(crate) fn print_pdf(html: &Path, pdf: &Path) {
    let profile = tempfile::tempdir().unwrap();
    let status = Command::new("timeout")
        .arg("120")
        .arg("chromium")
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg(format!("--print-to-pdf={}", pdf.display()))
        .arg("--no-pdf-header-footer")
        .arg(format!("file://{}", html.display()))
        .output()
        .expect("chromium runs");
    assert!(
        status.status.success() && pdf.exists(),
        "chromium failed: {}",
        String::from_utf8_lossy(&status.stderr)
    );
}

pub(crate) fn pdf_pages(pdf: &Path) -> u32 {
    let out = Command::new("pdfinfo")
        .arg(pdf)
        .output()
        .expect("pdfinfo runs");
    String::from_utf8_lossy(&out.stdout)
        .lines()
        .find_map(|l| l.strip_prefix("Pages:").map(|v| v.trim().parse().unwrap()))
        .expect("pdfinfo prints Pages:")
}

/// Text of page `page` (1-based) of a PDF, by poppler's `pdftotext`.
pub(crate) fn pdf_page_text(pdf: &Path, page: u32) -> String {
    let out = Command::new("pdftotext")
        .args(["-f", &page.to_string(), "-l", &page.to_string()])
        .arg(pdf)
        .arg("-")
        .output()
        .expect("pdftotext runs");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

pub(crate) fn printing_tools() -> bool {
    let ok = have("chromium") && have("pdfinfo") && have("pdftotext");
    if !ok {
        util::skip(
            "printing tests",
            "chromium, pdfinfo or pdftotext not on PATH (apt-get install chromium poppler-utils)",
        );
    }
    ok
}

/// With `BROODCAST_DOCS_IMG=DIR`, writes PNGs of pages `1..=last` of `pdf` (pdftoppm) for
/// docs/img.
pub(crate) fn screenshots(pdf: &Path, name: &str, last: u32) {
    if let Ok(img) = std::env::var("BROODCAST_DOCS_IMG") {
        std::fs::create_dir_all(&img).unwrap();
        let st = Command::new("pdftoppm")
            .args(["-png", "-r", "70", "-f", "1", "-l", &last.to_string()])
            .arg(pdf)
            .arg(Path::new(&img).join(name))
            .status()
            .expect("pdftoppm runs");
        assert!(st.success());
    }
}

/// Route sheets of the fixture in Chromium: a route of `ONE_PAGE_STOPS` stops stays on one
/// page, a longer one spills and the next route still starts on its own page.
#[test]
fn route_sheets_print_one_page_per_route_that_fits() {
    if !printing_tools() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let print = |p: &TinyPlan, name: &str| {
        let out = dir.path().join(name);
        write_dir_atomically(&out, &render_all(&p.view()).unwrap()).unwrap();
        let pdf = dir.path().join(format!("{name}.pdf"));
        print_pdf(&out.join("route-sheets.html"), &pdf);
        pdf
    };
    let p = tiny_plan();
    let pdf = print(&p, "short");
    assert_eq!(pdf_pages(&pdf), 3, "one page per route and one parcel page");
    let with_stops = |n: usize| {
        let mut long = tiny_plan();
        let base = long.dispatch.routes[0].stops.clone();
        long.dispatch.routes[0].stops = (0..n).map(|i| base[i % base.len()].clone()).collect();
        long
    };
    let full = print(&with_stops(ONE_PAGE_STOPS), "full");
    assert_eq!(
        pdf_pages(&full),
        3,
        "{ONE_PAGE_STOPS} stops still fit one page"
    );
    let long = print(&with_stops(30), "long");
    let pages = pdf_pages(&long);
    assert!(
        pages >= 4,
        "30 stops need 2 pages, then route 2 and parcels: {pages}"
    );
    for page in 1..=pages {
        let text = pdf_page_text(&long, page);
        assert!(
            text.contains("Route R-") || text.contains("Parcel hand-over"),
            "page {page} says which route it belongs to: {text}"
        );
    }
    screenshots(&long, "long-route", 2);
}

/// The demo through the binary, printed in Chromium: the report fits 3 pages, each route
/// that fits a page prints on exactly one, every page names its route, and the cautions
/// never stand alone.
#[test]
fn demo_report_fits_three_pages_and_route_sheets_one_page_per_route() {
    if !printing_tools() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let out = util::demo_plan();

    let report = dir.path().join("report.pdf");
    print_pdf(&out.join("report.html"), &report);
    let pages = pdf_pages(&report);
    assert!(pages <= 3, "the report prints on {pages} pages");
    screenshots(&report, "demo-report", pages);

    // Stops per route, from the manifest.
    let mut stops: BTreeMap<String, usize> = BTreeMap::new();
    let mut r = csv::Reader::from_path(out.join("manifest.csv")).unwrap();
    let route_col = r
        .headers()
        .unwrap()
        .iter()
        .position(|h| h == "route_id")
        .unwrap();
    for rec in r.records() {
        let rec = rec.unwrap();
        if !rec[route_col].is_empty() {
            *stops.entry(rec[route_col].to_string()).or_insert(0) += 1;
        }
    }
    let sheets = dir.path().join("route-sheets.pdf");
    print_pdf(&out.join("route-sheets.html"), &sheets);
    let n = pdf_pages(&sheets);
    let mut pages_of: BTreeMap<&str, u32> = BTreeMap::new();
    for page in 1..=n {
        let text = pdf_page_text(&sheets, page);
        let route = stops
            .keys()
            .find(|id| text.contains(&format!("Route {id}")));
        match route {
            Some(id) => *pages_of.entry(id.as_str()).or_insert(0) += 1,
            None => assert!(
                text.contains("Parcel hand-over"),
                "page {page} names no route: {text}"
            ),
        }
    }
    let mut fitting = 0;
    for (id, k) in &stops {
        let p = pages_of.get(id.as_str()).copied().unwrap_or(0);
        if *k <= ONE_PAGE_STOPS {
            fitting += 1;
            assert_eq!(p, 1, "route {id} of {k} stops prints on {p} pages");
        } else {
            // A longer route may still fit (narrow rows); it must print, with its id on
            // every page (checked above).
            assert!(p >= 1, "route {id} of {k} stops prints on {p} pages");
        }
    }
    assert!(
        fitting >= 10,
        "the demo has {fitting} routes that fit a page"
    );
    screenshots(&sheets, "demo-route-sheet", 2);
}

#[test]
fn summary_geojson_and_manifest_agree_on_what_was_delivered() {
    let p = tiny_plan();
    let f = files(&p);
    let mut r = csv::Reader::from_reader(f["manifest.csv"].as_bytes());
    let mut per_site: BTreeMap<String, u64> = BTreeMap::new();
    let mut alive = 0.0;
    for row in r.records() {
        let row = row.unwrap();
        *per_site.entry(row[6].to_string()).or_default() += row[10].parse::<u64>().unwrap();
        alive += row[12].parse::<f64>().unwrap();
    }
    let s: serde_json::Value = serde_json::from_str(&f["summary.json"]).unwrap();
    assert_eq!(
        s["shipped_vials"].as_u64().unwrap(),
        per_site.values().sum::<u64>()
    );
    assert_eq!(s["sites_served"].as_u64().unwrap(), per_site.len() as u64);
    // Rows round to 0.1 wasps each; the summary rounds the exact sum.
    assert!((s["wasps_expected_alive"].as_f64().unwrap() - alive).abs() < 0.05 * 6.0 + 0.1);
    let gj: serde_json::Value = serde_json::from_str(&f["plan.geojson"]).unwrap();
    for feat in gj["features"].as_array().unwrap() {
        let props = &feat["properties"];
        if props["kind"] == "facility" || props["kind"] == "route" {
            continue;
        }
        let id = props["id"].as_str().unwrap();
        let vials = props["vials"].as_u64().unwrap();
        assert_eq!(vials, per_site.get(id).copied().unwrap_or(0), "{id}");
        assert_eq!(
            props["reason"].is_null(),
            vials > 0,
            "{id}: reason iff unserved"
        );
    }
}

/// `plan --set` and `--without` plan one what-if: the facility's supply is gone, the key is
/// applied, the summary says so; a bad key or facility exits 2 and writes nothing. Progress
/// never reaches a piped standard error, and `--quiet` prints nothing at all.
#[test]
fn plan_what_if_with_set_and_without() {
    let bin = env!("CARGO_BIN_EXE_broodcast");
    let dir = tempfile::tempdir().unwrap();
    let run = |args: &[&str]| Command::new(bin).args(args).output().unwrap();
    let base = dir.path().join("base");
    let what_if = dir.path().join("what-if");
    let o = run(&["plan", "--out", base.to_str().unwrap()]);
    assert!(o.status.success());
    assert!(
        o.stderr.is_empty(),
        "no progress on a piped stderr: {:?}",
        String::from_utf8_lossy(&o.stderr)
    );
    let o = run(&[
        "plan",
        "--out",
        what_if.to_str().unwrap(),
        "--without",
        "F2",
        "--set",
        "policy.rerelease_interval_days=14",
        "--set",
        "policy.dooryard_share_min=0.3",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("what-if: --set policy.rerelease_interval_days=14 --set policy.dooryard_share_min=0.3 --without F2"), "{text}");
    let summary = |d: &Path| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(d.join("summary.json")).unwrap()).unwrap()
    };
    let f2: u64 = broodcast::scenario::load_embedded_demo()
        .unwrap()
        .supply
        .iter()
        .filter(|s| s.facility == 1)
        .map(|s| u64::from(s.vials))
        .sum();
    assert!(f2 > 0);
    assert_eq!(
        summary(&base)["supply_vials"].as_u64().unwrap() - f2,
        summary(&what_if)["supply_vials"].as_u64().unwrap()
    );
    let manifest = std::fs::read_to_string(what_if.join("manifest.csv")).unwrap();
    assert!(!manifest.contains(",F2,"), "nothing leaves F2");
    let q = dir.path().join("quiet");
    let o = run(&["plan", "--quiet", "--out", q.to_str().unwrap()]);
    assert!(o.status.success() && o.stdout.is_empty() && o.stderr.is_empty());
    for (args, needle) in [
        (vec!["--set", "policy.nope=1"], "policy.nope"),
        (vec!["--without", "F9"], "F9"),
        (
            vec!["--set", "policy.dooryard_share_min=3"],
            "dooryard_share_min",
        ),
    ] {
        let bad = dir.path().join("bad");
        let mut all = vec!["plan", "--out", bad.to_str().unwrap()];
        all.extend(args);
        let o = run(&all);
        assert_eq!(o.status.code(), Some(2), "{all:?}");
        assert!(String::from_utf8_lossy(&o.stderr).contains(needle));
        assert!(!bad.exists(), "{all:?} wrote nothing");
    }
}
