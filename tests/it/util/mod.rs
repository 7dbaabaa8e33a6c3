//! Shared test helpers: a copy of the minimal scenario in a temp dir, and a table of input
//! defects, each with the file and location its problem must name. Reused by the loader tests
//! and by binary-level tests (exit code 2, nothing written). Also a generated week and the
//! limits every whole-vial plan must keep, for the allocation tests.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use broodcast::allocate::Allocation;
use broodcast::arcs::Mode;
use broodcast::generate::{self, GenParams};
use broodcast::scenario::{Scenario, SiteKind};

/// The week `broodcast generate --sites SITES --seed SEED` writes, loaded.
pub fn generated(sites: usize, seed: u64) -> Scenario {
    generate::load(&GenParams::sized(sites, seed)).expect("generated scenario is valid")
}

/// Asserts the limits every whole-vial plan keeps, recounted from its shipments: at least one
/// vial a shipment, no arc past its release-by (recomputed: pack day at pack time plus the
/// shelf life), supply per (facility, pack day), vehicle
/// capacity per (depot, day), the daily parcel cap, each served block within the minimum and
/// maximum release, each served request at the standard count, and each site's reported
/// vials. Returns (dooryard vials, all vials) for the caller's share-floor check.
pub fn check_whole_vial_limits(s: &Scenario, a: &Allocation) -> (u32, u32) {
    let mut supply: BTreeMap<(usize, chrono::NaiveDate), u32> = BTreeMap::new();
    let mut depot: BTreeMap<(usize, chrono::NaiveDate), u32> = BTreeMap::new();
    let mut parcel: BTreeMap<chrono::NaiveDate, u32> = BTreeMap::new();
    let n = s.sites.len();
    let (mut e, mut v) = (vec![0.0; n], vec![0u32; n]);
    for sh in &a.shipments {
        let x = &sh.arc;
        assert!(sh.vials >= 1);
        // Release-by recomputed from the pack moment and the shelf life, not read from the arc.
        let release_by = x.pack_date.and_time(s.agent.pack_time)
            + chrono::Duration::seconds((s.agent.shelf_life_hours * 3600.0).round() as i64);
        assert!(
            x.pack_date <= x.dispatch_date,
            "arc dispatched before its pack day"
        );
        assert!(x.eta <= release_by, "arc past its release-by used");
        assert_eq!(
            x.release_by, release_by,
            "arc's release-by is not pack + shelf life"
        );
        *supply.entry((x.facility, x.pack_date)).or_default() += sh.vials;
        match x.mode {
            Mode::Route => *depot.entry((x.facility, x.dispatch_date)).or_default() += sh.vials,
            Mode::Parcel => *parcel.entry(x.dispatch_date).or_default() += sh.vials,
        }
        e[x.site] += sh.wasps_expected_alive();
        v[x.site] += sh.vials;
    }
    for ((f, d), u) in &supply {
        assert!(
            *u <= s.supply_vials(*f, *d),
            "supply of {f} on {d} exceeded"
        );
    }
    for ((f, d), u) in &depot {
        let cap: u32 = s
            .fleet
            .iter()
            .filter(|x| x.depot == *f && x.runs_on(*d))
            .map(|x| x.capacity_vials)
            .sum();
        assert!(*u <= cap, "vehicle capacity of depot {f} on {d} exceeded");
    }
    for (d, u) in &parcel {
        assert!(
            *u <= s.parcel.max_vials_per_day,
            "parcel cap on {d} exceeded"
        );
    }
    let (mut door, mut total) = (0u32, 0u32);
    for i in 0..n {
        assert_eq!(a.sites[i].vials, v[i]);
        total += v[i];
        if v[i] == 0 {
            continue;
        }
        assert!(e[i] <= s.agent.max_release_wasps + 1e-6, "max release");
        match s.sites[i].kind() {
            SiteKind::Block => assert!(e[i] >= s.agent.min_release_wasps - 1e-6, "min release"),
            SiteKind::Dooryard => {
                assert_eq!(v[i], s.policy.dooryard_vials_per_request);
                door += v[i];
            }
        }
    }
    (door, total)
}

/// Environment variable that turns a missing reference tool (Python with geographiclib or
/// highspy, Chromium, poppler) from a skip into a failure; `.ci/run` sets it so that CI can
/// never pass by skipping.
pub const REQUIRE_TOOLS: &str = "BROODCAST_REQUIRE_REFERENCE_TOOLS";

/// Called by a test whose reference tool is missing, just before it returns early: on a bare
/// machine it prints `SKIPPED test: why`; with [`REQUIRE_TOOLS`]`=1` it fails the test.
pub fn skip(test: &str, why: &str) {
    if std::env::var(REQUIRE_TOOLS).is_ok_and(|v| v == "1") {
        panic!("{test}: {why}, and {REQUIRE_TOOLS}=1 forbids skipping");
    }
    eprintln!("SKIPPED {test}: {why}");
}

/// The map SVGs of a route-sheets page, each from after its `<svg class="map"` to before
/// its `</svg>`, in page order.
pub fn route_sheet_maps(html: &str) -> Vec<&str> {
    html.split("<svg class=\"map\"")
        .skip(1)
        .map(|m| &m[..m.find("</svg>").expect("every map closes")])
        .collect()
}

/// The broodcast binary built for these tests.
pub fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_broodcast"))
}

/// Runs the binary with `args`.
pub fn run(args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .output()
        .expect("run broodcast")
}

/// Runs the binary, asserts it succeeded, returns its stdout.
pub fn run_ok(args: &[&str]) -> String {
    let out = run(args);
    assert!(
        out.status.success(),
        "broodcast {args:?} failed: {}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).expect("utf-8 stdout")
}

/// The built-in demo planned once per test run (`plan --out`, default options), for the tests
/// that only read its outputs: never write into it. The folder sits in Cargo's scratch
/// directory for integration tests and is replaced by the next run's plan.
pub fn demo_plan() -> &'static Path {
    static DIR: std::sync::OnceLock<PathBuf> = std::sync::OnceLock::new();
    DIR.get_or_init(|| {
        let out = Path::new(env!("CARGO_TARGET_TMPDIR")).join("shared-demo-plan");
        run_ok(&["plan", "--out", out.to_str().expect("UTF-8 path")]);
        out
    })
}

/// The hand-written valid scenario folder.
pub fn minimal_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/minimal")
}

/// Copies tests/data/minimal to a fresh temp dir (deleted when dropped).
pub fn copy_minimal() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("create temp dir");
    for entry in fs::read_dir(minimal_dir()).expect("read tests/data/minimal") {
        let entry = entry.expect("dir entry");
        fs::copy(entry.path(), tmp.path().join(entry.file_name())).expect("copy fixture file");
    }
    tmp
}

/// Replaces the first occurrence of `from` in `dir/file` with `to`; panics if absent so a
/// stale case cannot pass silently.
pub fn replace(dir: &Path, file: &str, from: &str, to: &str) {
    let path = dir.join(file);
    let text = fs::read_to_string(&path).expect("read fixture file");
    assert!(text.contains(from), "{file} does not contain {from:?}");
    fs::write(&path, text.replacen(from, to, 1)).expect("write fixture file");
}

/// Writes `dir/file` with `bytes`.
pub fn write(dir: &Path, file: &str, bytes: &[u8]) {
    fs::write(dir.join(file), bytes).expect("write fixture file");
}

/// One input defect.
pub struct Case {
    /// What is wrong, for failure messages.
    pub name: &'static str,
    /// File the defect is put in.
    pub file: &'static str,
    /// Applies the defect to a copy of the minimal folder.
    pub edit: fn(&Path),
    /// File the problem must name.
    pub expect_file: &'static str,
    /// Text naming the place in that file: ":7" (CSV line), "feature 2", "key 'a.b'".
    pub expect_location: &'static str,
}

macro_rules! case {
    ($name:expr, $file:expr, $edit:expr, $loc:expr) => {
        Case {
            name: $name,
            file: $file,
            edit: $edit,
            expect_file: $file,
            expect_location: $loc,
        }
    };
}

const BOWTIE: &str = r#"[[[80.032, 26.748], [80.028, 26.752], [80.028, 26.748], [80.032, 26.752], [80.032, 26.748]]]"#;
const B4_RING: &str = r#"[[[80.032, 26.748], [80.032, 26.752], [80.028, 26.752], [80.028, 26.748], [80.032, 26.748]]]"#;

/// Every defect the loader must catch, one per case.
pub fn cases() -> Vec<Case> {
    vec![
        // Required columns and keys.
        case!(
            "missing column",
            "facilities.csv",
            |d| replace(d, "facilities.csv", ",wasps_per_vial", ""),
            ":1"
        ),
        case!(
            "missing required key",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""name": "psyllid nymph parasitoid","#,
                ""
            ),
            "key 'agent.name'"
        ),
        case!(
            "missing required file",
            "fleet.csv",
            |d| fs::remove_file(d.join("fleet.csv")).expect("remove"),
            "missing"
        ),
        case!(
            "row with too few fields",
            "requests.csv",
            |d| replace(d, "requests.csv", "26.850,80.040,", "26.850,"),
            ":3"
        ),
        // Encoding and emptiness.
        case!(
            "invalid UTF-8",
            "facilities.csv",
            |d| replace_bytes(d, "facilities.csv", b"Orrin Point", b"Orrin \xffPoint"),
            ":3"
        ),
        case!(
            "empty file",
            "supply.csv",
            |d| write(d, "supply.csv", b""),
            "empty"
        ),
        case!(
            "no facilities",
            "facilities.csv",
            |d| write(d, "facilities.csv", b"id,name,lat,lon,wasps_per_vial\n"),
            "no facilities"
        ),
        case!(
            "binary garbage",
            "requests.csv",
            |d| write(d, "requests.csv", &[0xff, 0xfe, 0x00, 0x81, 0x0a, 0xc3]),
            ":1"
        ),
        case!(
            "truncated JSON",
            "scenario.json",
            |d| {
                let t = fs::read_to_string(d.join("scenario.json")).expect("read");
                write(d, "scenario.json", &t.as_bytes()[..t.len() / 2]);
            },
            "not valid JSON"
        ),
        // Ids.
        case!(
            "duplicate facility id",
            "facilities.csv",
            |d| replace(d, "facilities.csv", "F2,Orrin", "F1,Orrin"),
            ":3"
        ),
        case!(
            "duplicate block id",
            "blocks.geojson",
            |d| replace(d, "blocks.geojson", r#""id": "B2""#, r#""id": "B1""#),
            "feature 1"
        ),
        case!(
            "request id equals a block id",
            "requests.csv",
            |d| replace(d, "requests.csv", "R2,2027", "B1,2027"),
            ":3"
        ),
        case!(
            "empty scouting id",
            "scouting.csv",
            |d| replace(d, "scouting.csv", "S3,", ","),
            ":4"
        ),
        // References.
        case!(
            "supply names an unknown facility",
            "supply.csv",
            |d| replace(d, "supply.csv", "F2,2027-03-02", "F9,2027-03-02"),
            ":4"
        ),
        case!(
            "fleet names an unknown depot",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "V1,F1", "V1,F9"),
            ":2"
        ),
        case!(
            "override names an unknown site",
            "overrides.csv",
            |d| replace(d, "overrides.csv", "R4,forbid", "R9,forbid"),
            ":3"
        ),
        // Coordinates.
        case!(
            "latitude out of range",
            "facilities.csv",
            |d| replace(d, "facilities.csv", "27.000,80.000", "97.000,80.000"),
            ":2"
        ),
        case!(
            "longitude not finite",
            "requests.csv",
            |d| replace(d, "requests.csv", "26.710,79.990", "26.710,NaN"),
            ":4"
        ),
        case!(
            "huge longitude",
            "scouting.csv",
            |d| replace(d, "scouting.csv", "26.800,80.010", "26.800,-1e400"),
            ":5"
        ),
        // Dates and times.
        case!(
            "date not ISO",
            "scouting.csv",
            |d| replace(d, "scouting.csv", "2027-02-26", "02/26/2027"),
            ":2"
        ),
        case!(
            "week_start not a Monday",
            "scenario.json",
            |d| replace(d, "scenario.json", "2027-03-01", "2027-03-02"),
            "key 'week_start'"
        ),
        case!(
            "supply date outside the week",
            "supply.csv",
            |d| replace(d, "supply.csv", "F2,2027-03-04", "F2,2027-03-09"),
            ":5"
        ),
        case!(
            "time not HH:MM",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "07:30", "7:30"),
            ":2"
        ),
        case!(
            "access_start after access_end",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""access_start": "07:00", "access_end": "17:00""#,
                r#""access_start": "17:00", "access_end": "07:00""#
            ),
            "feature 0"
        ),
        case!(
            "last_insecticide not a date",
            "blocks.geojson",
            |d| replace(d, "blocks.geojson", "2027-02-20", "last week"),
            "feature 3"
        ),
        case!(
            "pack_time out of range",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""max_release_wasps": 800"#,
                r#""max_release_wasps": 800, "pack_time": "25:00""#
            ),
            "key 'agent.pack_time'"
        ),
        case!(
            "dooryard window ends before it starts",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""parcel":"#,
                r#""dispatch": {"dooryard_window_start": "18:00", "dooryard_window_end": "08:00"}, "parcel":"#
            ),
            "key 'dispatch.dooryard_window_end'"
        ),
        // Counts.
        case!(
            "negative vials",
            "supply.csv",
            |d| replace(d, "supply.csv", "F1,2027-03-01,10", "F1,2027-03-01,-5"),
            ":2"
        ),
        case!(
            "vials too large",
            "supply.csv",
            |d| replace(
                d,
                "supply.csv",
                "F1,2027-03-03,10",
                "F1,2027-03-03,99999999999"
            ),
            ":3"
        ),
        case!(
            "fractional capacity",
            "fleet.csv",
            |d| replace(d, "fleet.csv", ",15,", ",1.5,"),
            ":3"
        ),
        case!(
            "zero wasps per vial",
            "facilities.csv",
            |d| replace(d, "facilities.csv", "80.000,100", "80.000,0"),
            ":2"
        ),
        case!(
            "zero vials per request",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""dooryard_vials_per_request": 2"#,
                r#""dooryard_vials_per_request": 0"#
            ),
            "key 'policy.dooryard_vials_per_request'"
        ),
        case!(
            "shift too long",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "08:00,6", "08:00,17"),
            ":3"
        ),
        case!(
            "zero shift",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "07:30,8", "07:30,0"),
            ":2"
        ),
        // Day lists.
        case!(
            "day not lowercase",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "mon;wed;fri", "Mon;wed;fri"),
            ":2"
        ),
        case!(
            "day listed twice",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "tue;thu", "tue;tue"),
            ":3"
        ),
        case!(
            "parcel day unknown",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#"["mon", "wed"]"#,
                r#"["mon", "funday"]"#
            ),
            "key 'parcel.days'"
        ),
        // Agent and policy numbers.
        case!(
            "min release above target",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""min_release_wasps": 150"#,
                r#""min_release_wasps": 500"#
            ),
            "key 'agent.min_release_wasps'"
        ),
        case!(
            "target above max",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""max_release_wasps": 800"#,
                r#""max_release_wasps": 300"#
            ),
            "key 'agent.target_release_wasps'"
        ),
        case!(
            "share above 1",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""dooryard_share_min": 0.1"#,
                r#""dooryard_share_min": 1.5"#
            ),
            "key 'policy.dooryard_share_min'"
        ),
        case!(
            "above-target weight above 1",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""max_release_wasps": 800"#,
                r#""max_release_wasps": 800, "above_target_weight": 2"#
            ),
            "key 'agent.above_target_weight'"
        ),
        case!(
            "zero shelf life",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""shelf_life_hours": 72"#,
                r#""shelf_life_hours": 0"#
            ),
            "key 'agent.shelf_life_hours'"
        ),
        case!(
            "negative half-life",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""half_life_hours": 96"#,
                r#""half_life_hours": -1"#
            ),
            "key 'agent.survival.half_life_hours'"
        ),
        case!(
            "survival table rising",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#"{ "model": "exponential", "half_life_hours": 96 }"#,
                r#"{ "model": "table", "points": [[0, 0.8], [24, 0.9]] }"#
            ),
            "key 'agent.survival.points'"
        ),
        case!(
            "unknown survival model",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""model": "exponential""#,
                r#""model": "weibull""#
            ),
            "key 'agent.survival.model'"
        ),
        case!(
            "circuity below 1",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""circuity": 1.3"#,
                r#""circuity": 0.9"#
            ),
            "key 'travel.circuity'"
        ),
        case!(
            "zero speed",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""speed_kmh": 50"#,
                r#""speed_kmh": 0"#
            ),
            "key 'travel.speed_kmh'"
        ),
        case!(
            "zero pressure radius",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""pressure_radius_km": 5"#,
                r#""pressure_radius_km": 0"#
            ),
            "key 'policy.pressure_radius_km'"
        ),
        case!(
            "negative bandwidth",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""pressure_bandwidth_km": 2"#,
                r#""pressure_bandwidth_km": -2"#
            ),
            "key 'policy.pressure_bandwidth_km'"
        ),
        case!(
            "require_flush not a boolean",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""require_flush": true"#,
                r#""require_flush": "yes""#
            ),
            "key 'policy.require_flush'"
        ),
        // Enums.
        case!(
            "flush capitalised",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""flush": "heavy""#,
                r#""flush": "Heavy""#
            ),
            "feature 0"
        ),
        case!(
            "management unknown",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""management": "organic""#,
                r#""management": "sprayed""#
            ),
            "feature 1"
        ),
        case!(
            "host plant unknown",
            "requests.csv",
            |d| replace(d, "requests.csv", ",citrus,yes,route,", ",lemon,yes,route,"),
            ":2"
        ),
        case!(
            "insecticide_free not yes/no",
            "requests.csv",
            |d| replace(
                d,
                "requests.csv",
                ",orange-jasmine,yes,",
                ",orange-jasmine,true,"
            ),
            ":3"
        ),
        case!(
            "delivery unknown",
            "requests.csv",
            |d| replace(d, "requests.csv", ",citrus,no,parcel,", ",citrus,no,mail,"),
            ":4"
        ),
        case!(
            "scouting kind unknown",
            "scouting.csv",
            |d| replace(d, "scouting.csv", "flush_infested_pct,40", "sticky_trap,40"),
            ":3"
        ),
        case!(
            "negative scouting value",
            "scouting.csv",
            |d| replace(d, "scouting.csv", "tap_adults,2", "tap_adults,-1"),
            ":2"
        ),
        case!(
            "flush percent above 100",
            "scouting.csv",
            |d| replace(
                d,
                "scouting.csv",
                "flush_infested_pct,40",
                "flush_infested_pct,140"
            ),
            ":3"
        ),
        case!(
            "override action unknown",
            "overrides.csv",
            |d| replace(d, "overrides.csv", "R4,forbid", "R4,allow"),
            ":3"
        ),
        case!(
            "override zero vials",
            "overrides.csv",
            |d| replace(d, "overrides.csv", "B2,force,", "B2,force,0"),
            ":2"
        ),
        case!(
            "request without address",
            "requests.csv",
            |d| replace(d, "requests.csv", "12 Palm Row", ""),
            ":2"
        ),
        // GeoJSON.
        case!(
            "not a FeatureCollection",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""type": "FeatureCollection""#,
                r#""type": "Feature""#
            ),
            "key 'type'"
        ),
        case!(
            "point geometry",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""type": "MultiPolygon""#,
                r#""type": "Point""#
            ),
            "feature 2"
        ),
        case!(
            "ring not closed",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                "[80.022, 26.982], [80.022, 26.978]]]",
                "[80.022, 26.982], [80.0221, 26.978]]]"
            ),
            "feature 0"
        ),
        case!(
            "ring too short",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                "[[[80.052, 26.948], [80.048, 26.948], [80.048, 26.952], [80.052, 26.952], [80.052, 26.948]]]",
                "[[[80.052, 26.948], [80.048, 26.948], [80.052, 26.948]]]"
            ),
            "feature 1"
        ),
        case!(
            "self-intersecting ring",
            "blocks.geojson",
            |d| replace(d, "blocks.geojson", B4_RING, BOWTIE),
            "feature 3"
        ),
        case!(
            "coordinate out of range",
            "blocks.geojson",
            |d| replace(d, "blocks.geojson", "[80.018, 26.978]", "[200.018, 26.978]"),
            "feature 0"
        ),
        case!(
            "access_lon without access_lat",
            "blocks.geojson",
            |d| replace(d, "blocks.geojson", r#", "access_lat": 26.947"#, ""),
            "feature 1"
        ),
        case!(
            "forbid with vials",
            "overrides.csv",
            |d| replace(d, "overrides.csv", "R4,forbid,", "R4,forbid,3"),
            ":3"
        ),
        case!(
            "two overrides for one site",
            "overrides.csv",
            |d| replace(d, "overrides.csv", "R4,forbid,", "B2,forbid,"),
            ":3"
        ),
        case!(
            "duplicate request id",
            "requests.csv",
            |d| replace(d, "requests.csv", "R3,2027", "R1,2027"),
            ":4"
        ),
        case!(
            "duplicate vehicle id",
            "fleet.csv",
            |d| replace(d, "fleet.csv", "V2,F2", "V1,F2"),
            ":3"
        ),
        case!(
            "received not a date",
            "requests.csv",
            |d| replace(d, "requests.csv", "2027-02-25", "2027-02-29"),
            ":5"
        ),
        case!(
            "invalid UTF-8 in JSON",
            "scenario.json",
            |d| replace_bytes(d, "scenario.json", b"Marrow", b"M\xe9rrow"),
            ":2"
        ),
        case!(
            "access_lat out of range",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""access_lat": 26.947"#,
                r#""access_lat": 126.947"#
            ),
            "feature 1"
        ),
        case!(
            "hole outside its outline",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                B4_RING,
                r#"[[[80.032, 26.748], [80.032, 26.752], [80.028, 26.752], [80.028, 26.748], [80.032, 26.748]], [[80.02, 26.70], [80.01, 26.70], [80.01, 26.71], [80.02, 26.70]]]"#
            ),
            "feature 3"
        ),
        // Travel matrix.
        case!(
            "matrix not square",
            "travel.csv",
            |d| replace(d, "travel.csv", "R1,3,4,0\n", ""),
            ":3"
        ),
        case!(
            "matrix duplicate id",
            "travel.csv",
            |d| replace(d, "travel.csv", "id,F1,B1,R1", "id,F1,B1,F1"),
            ":1"
        ),
        case!(
            "matrix negative minutes",
            "travel.csv",
            |d| replace(d, "travel.csv", "B1,6.5,0,4", "B1,6.5,0,-4"),
            ":3"
        ),
        case!(
            "matrix non-zero diagonal",
            "travel.csv",
            |d| replace(d, "travel.csv", "F1,0,6.5,3", "F1,1,6.5,3"),
            ":2"
        ),
        case!(
            "matrix file missing",
            "travel.csv",
            |d| fs::remove_file(d.join("travel.csv")).expect("remove"),
            "missing"
        ),
        // Office inputs (issue: every office mistake is a clear exit 2).
        case!(
            "huge insecticide_exclusion_days",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""insecticide_exclusion_days": 21"#,
                r#""insecticide_exclusion_days": 4000000000"#
            ),
            "key 'policy.insecticide_exclusion_days'"
        ),
        case!(
            "week in year 9999",
            "scenario.json",
            |d| replace(d, "scenario.json", "2027-03-01", "9999-12-27"),
            "key 'week_start'"
        ),
        case!(
            "shelf life of a century",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""shelf_life_hours": 72"#,
                r#""shelf_life_hours": 876000"#
            ),
            "key 'agent.shelf_life_hours'"
        ),
        case!(
            "travel cost that breaks the LP",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""pressure_bandwidth_km": 2"#,
                r#""pressure_bandwidth_km": 2, "travel_cost_per_hour": 1e300"#
            ),
            "key 'policy.travel_cost_per_hour'"
        ),
        case!(
            "duplicate key in scenario.json",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""insecticide_exclusion_days": 21,"#,
                r#""insecticide_exclusion_days": 21, "insecticide_exclusion_days": 5,"#
            ),
            "key 'policy.insecticide_exclusion_days'"
        ),
        case!(
            "insecticide window under both its names",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""insecticide_exclusion_days": 21,"#,
                r#""insecticide_exclusion_days": 21, "pesticide_exclusion_days": 5,"#
            ),
            "key 'policy.pesticide_exclusion_days'"
        ),
        case!(
            "duplicate key in a block's properties",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""flush": "light""#,
                r#""flush": "light", "flush": "none""#
            ),
            "key 'features[1].properties.flush'"
        ),
        case!(
            "matrix path climbing out of the folder",
            "scenario.json",
            |d| replace(
                d,
                "scenario.json",
                r#""travel.csv""#,
                r#""../../etc/passwd""#
            ),
            "key 'travel.matrix'"
        ),
        case!(
            "matrix path absolute",
            "scenario.json",
            |d| replace(d, "scenario.json", r#""travel.csv""#, r#""/etc/passwd""#),
            "key 'travel.matrix'"
        ),
        case!(
            "matrix is a link to a file outside the folder",
            "scenario.json",
            |d| {
                #[cfg(unix)]
                std::os::unix::fs::symlink("/etc/passwd", d.join("pw.csv")).expect("symlink");
                #[cfg(not(unix))]
                write(d, "pw.csv", b"..");
                replace(d, "scenario.json", r#""travel.csv""#, r#""pw.csv""#)
            },
            "key 'travel.matrix'"
        ),
        case!(
            "matrix pointed at requests.csv",
            "requests.csv",
            |d| replace(d, "scenario.json", r#""travel.csv""#, r#""requests.csv""#),
            ":1"
        ),
        case!(
            "matrix id both a facility and a site",
            "travel.csv",
            |d| {
                replace(d, "requests.csv", "R1,2027", "F2,2027");
                write(d, "travel.csv", b"id,F1,F2\nF1,0,6.5\nF2,6.5,0\n");
            },
            ":1: field 'column 3': value 'F2'"
        ),
        case!(
            "open quote swallows the next row",
            "requests.csv",
            |d| {
                replace(d, "requests.csv", "B. Sample", "\"B. Sample");
                replace(d, "requests.csv", "C. Sample", "C.\" Sample");
            },
            ":3: field 'name'"
        ),
        case!(
            "bad date on a CRLF file names the physical line",
            "requests.csv",
            |d| {
                let t = fs::read_to_string(d.join("requests.csv")).expect("read");
                let t = t
                    .replace('\n', "\r\n")
                    .replace("R3,2027-02-20", "R3,2027-02-30");
                write(d, "requests.csv", t.as_bytes());
            },
            ":4: field 'received'"
        ),
        case!(
            "NUL inside an address",
            "requests.csv",
            |d| replace(d, "requests.csv", "12 Palm Row", "12 Palm\u{0} Row"),
            ":2: field 'address': value '12 Palm\\u{0} Row'"
        ),
        case!(
            "control character in a block's crop",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                r#""crop": "grapefruit""#,
                r#""crop": "grape\u0007fruit""#
            ),
            "feature 1 (id 'B2'): field 'crop'"
        ),
        case!(
            "byte-order mark inside an id",
            "supply.csv",
            |d| replace(d, "supply.csv", "F1,2027-03-01", "\u{feff}F1,2027-03-01"),
            ":2: field 'facility_id': value '\\u{feff}F1'"
        ),
        case!(
            "zero-width space inside a request id",
            "requests.csv",
            |d| replace(d, "requests.csv", "R2,2027", "R\u{200b}2,2027"),
            ":3: field 'id': value 'R\\u{200b}2'"
        ),
        case!(
            "polygon crossing the antimeridian",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                B4_RING,
                "[[[179.99, 26.75], [-179.99, 26.75], [-179.99, 26.76], [179.99, 26.76], [179.99, 26.75]]]"
            ),
            "feature 3 (id 'B4'): field 'geometry'"
        ),
        case!(
            "zero-area ring",
            "blocks.geojson",
            |d| replace(
                d,
                "blocks.geojson",
                B4_RING,
                "[[[80.032, 26.748], [80.030, 26.748], [80.028, 26.748], [80.032, 26.748]]]"
            ),
            "feature 3 (id 'B4'): field 'geometry'"
        ),
    ]
}

/// An office input that must plan (exit 0) with a warning naming the place.
pub struct WarnCase {
    /// What is odd, for failure messages.
    pub name: &'static str,
    /// Applies it to a copy of the minimal folder.
    pub edit: fn(&Path),
    /// Text the warning line must hold: file and place.
    pub expect: &'static str,
}

/// Inputs a careful tool plans with a warning rather than rejects.
pub fn warning_cases() -> Vec<WarnCase> {
    vec![
        WarnCase {
            name: "empty rows left by a spreadsheet export",
            edit: |d| {
                let mut t = fs::read(d.join("requests.csv")).expect("read");
                t.extend_from_slice(b",,,,,,,,,,\n,,,,,,,,,,\n");
                write(d, "requests.csv", &t);
            },
            expect: "requests.csv:6: 2 row(s) with every cell empty",
        },
        WarnCase {
            name: "empty rows at the end of the matrix",
            edit: |d| {
                let mut t = fs::read(d.join("travel.csv")).expect("read");
                t.extend_from_slice(b",,,\n");
                write(d, "travel.csv", &t);
            },
            expect: "travel.csv:5: 1 row(s) with every cell empty",
        },
        WarnCase {
            name: "a block of a quarter million hectares",
            edit: |d| {
                replace(
                    d,
                    "blocks.geojson",
                    B4_RING,
                    "[[[80.5, 26.5], [80.0, 26.5], [80.0, 27.0], [80.5, 27.0], [80.5, 26.5]]]",
                )
            },
            expect: "blocks.geojson: feature 3 (id 'B4'): the block covers",
        },
        WarnCase {
            name: "the insecticide window under its earlier name",
            edit: |d| {
                replace(
                    d,
                    "scenario.json",
                    r#""insecticide_exclusion_days""#,
                    r#""pesticide_exclusion_days""#,
                )
            },
            expect: "scenario.json: key 'policy.pesticide_exclusion_days': `policy.pesticide_exclusion_days` is the earlier name",
        },
    ]
}

/// Replaces the first occurrence of `from` in `dir/file` with raw bytes `to`.
pub fn replace_bytes(dir: &Path, file: &str, from: &[u8], to: &[u8]) {
    let path = dir.join(file);
    let bytes = fs::read(&path).expect("read fixture file");
    let pos = bytes
        .windows(from.len())
        .position(|w| w == from)
        .unwrap_or_else(|| panic!("{file} does not contain {from:?}"));
    let mut out = bytes[..pos].to_vec();
    out.extend_from_slice(to);
    out.extend_from_slice(&bytes[pos + from.len()..]);
    fs::write(&path, out).expect("write fixture file");
}
