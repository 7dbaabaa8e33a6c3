//! The committed demo scenario is exactly what the generator makes, the binary embeds all of
//! it, and generated scenarios (the demo and a benchmark week) keep the format-v1 rules.
//!
//! The rules are checked here independently of the loader, straight from the files, so a
//! generator defect cannot hide behind a loader defect.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use broodcast::demo::FILES;
use broodcast::generate::{GenParams, generate};
use broodcast::geodesy;
use chrono::{Datelike, NaiveDate, NaiveTime, Weekday};
use geo::{Coord, LineString, MultiPolygon, Polygon, Validation};
use serde_json::Value;

fn demo_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo")
}

#[test]
fn committed_demo_files_equal_the_generator_output_byte_for_byte() {
    let generated = generate(&GenParams::demo());
    let embedded: BTreeMap<&str, &[u8]> = FILES.iter().copied().collect();
    assert_eq!(
        embedded.len(),
        FILES.len(),
        "duplicate names in demo::FILES"
    );
    for (name, bytes) in &generated {
        let on_disk = std::fs::read(demo_dir().join(name))
            .unwrap_or_else(|e| panic!("scenarios/demo/{name}: {e}"));
        assert!(
            on_disk == *bytes,
            "scenarios/demo/{name} differs from generate(&GenParams::demo()); \
             run `cargo run --example write_demo`"
        );
        assert!(
            embedded.get(name.as_str()) == Some(&bytes.as_slice()),
            "demo::FILES lacks {name} or embeds other bytes"
        );
    }
}

#[test]
fn demo_files_list_matches_the_folder() {
    let mut on_disk = BTreeSet::new();
    for entry in std::fs::read_dir(demo_dir()).expect("scenarios/demo exists") {
        let entry = entry.expect("readable entry");
        let name = entry.file_name().to_string_lossy().into_owned();
        // `plan scenarios/demo` keeps its road-network cache here; it is not a demo file.
        if name != ".broodcast-cache" {
            on_disk.insert(name);
        }
    }
    let listed: BTreeSet<String> = FILES.iter().map(|(n, _)| n.to_string()).collect();
    assert_eq!(listed, on_disk, "demo::FILES and scenarios/demo/ disagree");
    let mut expected: BTreeSet<String> = generate(&GenParams::demo())
        .into_iter()
        .map(|(n, _)| n)
        .collect();
    expected.insert("README.md".into());
    assert_eq!(listed, expected);
    let readme =
        std::str::from_utf8(broodcast::demo::file("README.md").expect("README")).expect("utf-8");
    assert!(
        readme.contains("invented"),
        "README must say the data are invented"
    );
}

/// Figures of a generated scenario, gathered while checking it.
#[derive(Debug, Default)]
struct Totals {
    week_start: Option<NaiveDate>,
    supply_vials: u64,
    supply_wasps: u64,
    blocks: usize,
    /// Flushing and no insecticide within the exclusion window of any day of the week.
    blocks_eligible_all_week: usize,
    /// Flushing, excluded early in the week but clear of the window by Sunday.
    blocks_eligible_later: usize,
    requests: usize,
    /// Host plant present and insecticide free.
    requests_eligible: usize,
    greening_positive: usize,
    target_release_wasps: f64,
    vials_per_request: u64,
    mean_wasps_per_vial: f64,
    kinds: BTreeMap<String, BTreeSet<String>>,
}

fn text<'a>(files: &'a [(String, Vec<u8>)], name: &str) -> &'a str {
    let bytes = &files
        .iter()
        .find(|(n, _)| n == name)
        .unwrap_or_else(|| panic!("{name} missing"))
        .1;
    std::str::from_utf8(bytes).unwrap_or_else(|e| panic!("{name}: {e}"))
}

fn csv_rows(files: &[(String, Vec<u8>)], name: &str, header: &[&str]) -> Vec<Vec<String>> {
    let mut r = csv::Reader::from_reader(text(files, name).as_bytes());
    let got: Vec<String> = r
        .headers()
        .expect("header")
        .iter()
        .map(String::from)
        .collect();
    assert_eq!(&got[..header.len()], header, "{name} header");
    r.records()
        .map(|rec| rec.expect("row").iter().map(String::from).collect())
        .collect()
}

fn date(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap_or_else(|e| panic!("date {s}: {e}"))
}

fn time(s: &str) -> NaiveTime {
    assert_eq!(s.len(), 5, "HH:MM: {s}");
    NaiveTime::parse_from_str(s, "%H:%M").unwrap_or_else(|e| panic!("time {s}: {e}"))
}

fn lat_lon(lat: &str, lon: &str) -> (f64, f64) {
    let (lat, lon): (f64, f64) = (lat.parse().expect("lat"), lon.parse().expect("lon"));
    assert!((-90.0..=90.0).contains(&lat) && (-180.0..=180.0).contains(&lon));
    // The demo and benchmark regions are subtropical.
    assert!((20.0..=32.0).contains(&lat), "lat {lat}");
    (lat, lon)
}

fn kind(t: &mut Totals, field: &str, value: &str, allowed: &[&str]) {
    assert!(allowed.contains(&value), "{field}: {value}");
    t.kinds
        .entry(field.into())
        .or_default()
        .insert(value.into());
}

/// Checks every format-v1 rule the generator promises and returns the scenario's figures.
fn check(files: &[(String, Vec<u8>)]) -> Totals {
    let mut t = Totals::default();
    let sc: Value = serde_json::from_str(text(files, "scenario.json")).expect("scenario.json");
    let week = date(sc["week_start"].as_str().expect("week_start"));
    assert_eq!(week.weekday(), Weekday::Mon, "week_start is a Monday");
    t.week_start = Some(week);
    let agent = &sc["agent"];
    assert_eq!(agent["survival"]["model"], "exponential");
    let (min, target, max) = (
        agent["min_release_wasps"].as_f64().expect("min"),
        agent["target_release_wasps"].as_f64().expect("target"),
        agent["max_release_wasps"].as_f64().expect("max"),
    );
    assert!(0.0 < min && min < target && target < max);
    t.target_release_wasps = target;
    let policy = &sc["policy"];
    let share = policy["dooryard_share_min"].as_f64().expect("share");
    assert!((0.0..=1.0).contains(&share));
    t.vials_per_request = policy["dooryard_vials_per_request"]
        .as_u64()
        .expect("vials per request");
    let exclusion = policy["insecticide_exclusion_days"]
        .as_i64()
        .expect("exclusion days");
    assert!(policy["require_flush"].is_boolean());
    assert!(sc["travel"]["circuity"].as_f64().expect("circuity") >= 1.0);
    assert!(sc["travel"]["speed_kmh"].as_f64().expect("speed") > 0.0);
    for d in sc["parcel"]["days"].as_array().expect("parcel days") {
        kind(&mut t, "parcel.days", d.as_str().expect("day"), DAYS);
    }
    let d = &sc["dispatch"];
    assert!(
        time(d["dooryard_window_start"].as_str().expect("window start"))
            < time(d["dooryard_window_end"].as_str().expect("window end"))
    );
    time(agent["pack_time"].as_str().expect("pack_time"));
    time(sc["parcel"]["ship_time"].as_str().expect("ship_time"));

    let mut facility_wpv = BTreeMap::new();
    for row in csv_rows(
        files,
        "facilities.csv",
        &["id", "name", "lat", "lon", "wasps_per_vial"],
    ) {
        lat_lon(&row[2], &row[3]);
        let wpv: u64 = row[4].parse().expect("wasps_per_vial");
        assert!((150..=250).contains(&wpv));
        assert!(
            facility_wpv.insert(row[0].clone(), wpv).is_none(),
            "dup facility"
        );
    }
    t.mean_wasps_per_vial = facility_wpv.values().sum::<u64>() as f64 / facility_wpv.len() as f64;
    for row in csv_rows(files, "supply.csv", &["facility_id", "date", "vials"]) {
        let wpv = facility_wpv[&row[0]];
        let day = date(&row[1]);
        assert!(
            week <= day && (day - week).num_days() < 7,
            "supply date in week"
        );
        let vials: u64 = row[2].parse().expect("vials");
        t.supply_vials += vials;
        t.supply_wasps += vials * wpv;
    }

    let mut ids = BTreeSet::new();
    let blocks: Value = serde_json::from_str(text(files, "blocks.geojson")).expect("geojson");
    assert_eq!(blocks["type"], "FeatureCollection");
    for f in blocks["features"].as_array().expect("features") {
        t.blocks += 1;
        let p = &f["properties"];
        let id = p["id"].as_str().expect("id");
        assert!(ids.insert(id.to_string()), "duplicate id {id}");
        for (field, allowed) in [
            ("management", &["conventional", "organic", "abandoned"][..]),
            ("flush", &["none", "light", "heavy"][..]),
        ] {
            kind(&mut t, field, p[field].as_str().expect(field), allowed);
        }
        assert!(p["crop"].is_string());
        let (start, end) = (
            time(p["access_start"].as_str().expect("access_start")),
            time(p["access_end"].as_str().expect("access_end")),
        );
        assert!(start < end, "{id}: access_start < access_end");
        let sprayed = match &p["last_insecticide"] {
            Value::Null => None,
            v => Some(date(v.as_str().expect("last_insecticide date"))),
        };
        if let Some(s) = sprayed {
            assert!(s < week, "{id}: sprayed before the week");
        }
        let flushing = p["flush"] != "none";
        // Clear of the window on Monday / by Sunday.
        let clear_on =
            |offset: i64| sprayed.is_none_or(|s| (week - s).num_days() + offset >= exclusion);
        if flushing && clear_on(0) {
            t.blocks_eligible_all_week += 1;
        } else if flushing && clear_on(6) {
            t.blocks_eligible_later += 1;
        }

        assert_eq!(f["geometry"]["type"], "Polygon", "{id}");
        let rings = f["geometry"]["coordinates"].as_array().expect("rings");
        assert_eq!(rings.len(), 1, "{id}: one exterior ring, no holes");
        let ring: Vec<Coord> = rings[0]
            .as_array()
            .expect("ring")
            .iter()
            .map(|pos| {
                let pos = pos.as_array().expect("position");
                assert_eq!(pos.len(), 2);
                let (lon, lat) = (pos[0].as_f64().expect("lon"), pos[1].as_f64().expect("lat"));
                lat_lon(&lat.to_string(), &lon.to_string());
                Coord { x: lon, y: lat }
            })
            .collect();
        assert!(ring.len() >= 4, "{id}: ≥ 4 positions");
        assert_eq!(ring.first(), ring.last(), "{id}: closed ring");
        // Shoelace in degrees: positive means counter-clockwise.
        let twice_area: f64 = ring
            .windows(2)
            .map(|w| w[0].x * w[1].y - w[1].x * w[0].y)
            .sum();
        assert!(twice_area > 0.0, "{id}: exterior ring counter-clockwise");
        // Strictly convex: every turn is to the left.
        let n = ring.len() - 1;
        for i in 0..n {
            let (a, b, c) = (ring[i], ring[(i + 1) % n], ring[(i + 2) % n]);
            let cross = (b.x - a.x) * (c.y - b.y) - (b.y - a.y) * (c.x - b.x);
            assert!(cross > 0.0, "{id}: convex");
        }
        let poly = Polygon::new(LineString::new(ring), vec![]);
        assert!(poly.is_valid(), "{id}: valid polygon");
        let ha = geodesy::area_ha(&MultiPolygon(vec![poly]));
        assert!((2.0..=30.0).contains(&ha), "{id}: {ha} ha");
    }

    let header = [
        "id",
        "received",
        "lat",
        "lon",
        "address",
        "host_plant",
        "insecticide_free",
        "delivery",
        "name",
        "phone",
        "email",
    ];
    for row in csv_rows(files, "requests.csv", &header) {
        t.requests += 1;
        assert!(ids.insert(row[0].clone()), "duplicate id {}", row[0]);
        let received = date(&row[1]);
        let waited = (week - received).num_days();
        assert!((1..=70).contains(&waited), "received in the past 10 weeks");
        lat_lon(&row[2], &row[3]);
        assert!(!row[4].is_empty(), "address");
        kind(
            &mut t,
            "host_plant",
            &row[5],
            &["citrus", "orange-jasmine", "none"],
        );
        kind(&mut t, "insecticide_free", &row[6], &["yes", "no"]);
        kind(&mut t, "delivery", &row[7], &["route", "parcel", "either"]);
        if row[5] != "none" && row[6] == "yes" {
            t.requests_eligible += 1;
        }
        // Obviously fake personal data: reserved fictional numbers and the .invalid TLD.
        assert!(row[8].starts_with("Resident "));
        assert!(row[9].starts_with("555-01") && row[9].len() == 8);
        assert!(row[10].ends_with("@example.invalid"));
    }

    for row in csv_rows(
        files,
        "scouting.csv",
        &["id", "date", "lat", "lon", "kind", "value"],
    ) {
        let seen = date(&row[1]);
        assert!((1..=28).contains(&(week - seen).num_days()), "past 4 weeks");
        lat_lon(&row[2], &row[3]);
        let k = row[4].as_str();
        kind(
            &mut t,
            "scouting.kind",
            k,
            &["tap_adults", "flush_infested_pct", "greening_positive"],
        );
        let v: f64 = row[5].parse().expect("value");
        assert!(v.is_finite() && v >= 0.0);
        if k == "flush_infested_pct" {
            assert!(v <= 100.0);
        }
        if k == "greening_positive" {
            t.greening_positive += 1;
            assert!(v >= 1.0);
        }
    }

    let header = [
        "vehicle_id",
        "depot_id",
        "days",
        "capacity_vials",
        "shift_start",
        "shift_hours",
    ];
    let mut vehicles = BTreeSet::new();
    for row in csv_rows(files, "fleet.csv", &header) {
        assert!(vehicles.insert(row[0].clone()), "duplicate vehicle");
        assert!(facility_wpv.contains_key(&row[1]), "depot resolves");
        for d in row[2].split(';') {
            kind(&mut t, "fleet.days", d, DAYS);
        }
        assert!(row[3].parse::<u32>().expect("capacity") > 0);
        let start = time(&row[4]);
        assert!(time("07:00") <= start && start <= time("08:00"));
        let h: f64 = row[5].parse().expect("shift_hours");
        assert!(h > 0.0 && h <= 16.0);
    }
    t
}

const DAYS: &[&str] = &["mon", "tue", "wed", "thu", "fri", "sat", "sun"];

#[test]
fn demo_keeps_the_rules_and_supply_is_scarce() {
    let t = check(&generate(&GenParams::demo()));
    assert_eq!((t.blocks, t.requests), (300, 200));
    // Every category the planner distinguishes is present.
    for (field, n) in [
        ("management", 3),
        ("flush", 3),
        ("host_plant", 3),
        ("insecticide_free", 2),
        ("delivery", 3),
        ("scouting.kind", 3),
    ] {
        assert_eq!(t.kinds[field].len(), n, "{field}: {:?}", t.kinds[field]);
    }
    assert!(
        (1..=25).contains(&t.greening_positive),
        "a few greening finds"
    );
    // Scarcity: the eligible-looking demand at the target release size is well above supply.
    let demand_wasps = t.blocks_eligible_all_week as f64 * t.target_release_wasps
        + (t.requests_eligible as u64 * t.vials_per_request) as f64 * t.mean_wasps_per_vial;
    eprintln!(
        "demo: supply {} vials, {} wasps packed; {} blocks eligible all week, {} later in the \
         week; {} requests eligible; demand at target ≈ {demand_wasps:.0} wasps",
        t.supply_vials,
        t.supply_wasps,
        t.blocks_eligible_all_week,
        t.blocks_eligible_later,
        t.requests_eligible,
    );
    assert!(
        (t.supply_wasps as f64) < 0.7 * demand_wasps,
        "supply must cover clearly less than the eligible demand"
    );
    assert!(
        (t.supply_wasps as f64) > 0.2 * demand_wasps,
        "but not trivially little"
    );
    // The README states these figures; keep it honest when the generator changes.
    let readme = std::str::from_utf8(broodcast::demo::file("README.md").expect("README"))
        .expect("utf-8")
        .replace('\n', " ");
    for figure in [
        format!("{} vials", t.supply_vials),
        format!("({} flushing", t.blocks_eligible_all_week),
        format!("{} more clear later", t.blocks_eligible_later),
        format!("({} with a host plant", t.requests_eligible),
    ] {
        assert!(readme.contains(&figure), "README lacks {figure:?}");
    }
}

/// How long generating takes is measured by `cargo run --release --example bench_generate`,
/// not here: a test's verdict must not depend on the machine's speed.
#[test]
fn state_scale_week_keeps_the_rules() {
    let p = GenParams::sized(35_000, 3);
    let files = generate(&p);
    let t = check(&files);
    assert_eq!((t.blocks, t.requests), (20_000, 15_000));
    // ~1,000 releases at the target size, give or take the survival factor.
    let releases = t.supply_wasps as f64 / t.target_release_wasps;
    assert!((800.0..=1_400.0).contains(&releases), "{releases}");
}

#[test]
fn small_benchmark_sizes_keep_the_rules() {
    for sites in [1_000, 5_000] {
        let t = check(&generate(&GenParams::sized(sites, 11)));
        assert_eq!(t.blocks + t.requests, sites);
    }
}
