//! `broodcast::geodesy` against outside references.
//!
//! Reference library: GeographicLib's Python package (PyPI `geographiclib`; C. F. F. Karney,
//! "Algorithms for geodesics", Journal of Geodesy 87:43–55, 2013), driven through
//! `tests/py/geodesy_ref.py` with one python invocation per test (inputs as JSON on stdin).
//! CI installs it with `pip install geographiclib`; without it those checks are skipped with a
//! message. Published check value: Vincenty's inverse worked example, Flinders Peak to
//! Buninyong.

use crate::util;

use std::io::Write;
use std::path::PathBuf;
use std::process::{Command, Stdio};

use broodcast::geodesy::{area_m2, distance_m};
use broodcast::scenario::LonLat;
use geo::{Destination, Geodesic, LineString, MultiPolygon, Point, Polygon};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::{Value, json};

/// Whether `python3 -c 'import geographiclib'` works; says why not when it does not.
fn have_geographiclib(test: &str) -> bool {
    let ok = Command::new("python3")
        .args(["-c", "import geographiclib"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    if !ok {
        util::skip(
            test,
            "python3 -c 'import geographiclib' failed; install it with `python3 -m pip install \
             geographiclib`",
        );
    }
    ok
}

/// Runs the reference script on `job` and returns its JSON answer.
fn geographiclib(job: &Value) -> Value {
    let script = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/py/geodesy_ref.py");
    let mut child = Command::new("python3")
        .arg(&script)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("python3 runs");
    child
        .stdin
        .take()
        .expect("piped stdin")
        .write_all(job.to_string().as_bytes())
        .expect("write job to python");
    let out = child.wait_with_output().expect("python finishes");
    assert!(
        out.status.success(),
        "geodesy_ref.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("python writes JSON")
}

fn numbers(v: &Value, key: &str) -> Vec<f64> {
    v[key]
        .as_array()
        .unwrap_or_else(|| panic!("{key} missing"))
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

fn ll(lat: f64, lon: f64) -> LonLat {
    LonLat { lon, lat }
}

fn dms(deg: f64, min: f64, sec: f64) -> f64 {
    deg + min / 60.0 + sec / 3600.0
}

#[test]
fn distances_match_geographiclib_to_a_millimetre_in_the_demo_band() {
    if !have_geographiclib("distances_match_geographiclib") {
        return;
    }
    let mut rng = ChaCha8Rng::seed_from_u64(27);
    let mut pairs = Vec::new();
    while pairs.len() < 400 {
        let a = ll(
            rng.random_range(20.0..32.0),
            rng.random_range(-100.0..-60.0),
        );
        // Log-uniform 0.1–300 km, so short block-scale lines are as well covered as long ones.
        let km = 10f64.powf(rng.random_range(-1.0..300f64.log10()));
        let bearing = rng.random_range(0.0..360.0);
        let b = Geodesic.destination(Point::new(a.lon, a.lat), bearing, km * 1000.0);
        if !(20.0..=32.0).contains(&b.y()) {
            continue;
        }
        pairs.push((a, ll(b.y(), b.x())));
    }
    let job = json!({
        "pairs": pairs.iter().map(|(a, b)| [a.lat, a.lon, b.lat, b.lon]).collect::<Vec<_>>()
    });
    let reference = numbers(&geographiclib(&job), "distances_m");
    assert_eq!(reference.len(), pairs.len());
    let mut worst = 0.0f64;
    let (mut shortest, mut longest) = (f64::INFINITY, 0.0f64);
    for ((a, b), want) in pairs.iter().zip(&reference) {
        let got = distance_m(*a, *b);
        let err = (got - want).abs();
        worst = worst.max(err);
        shortest = shortest.min(*want);
        longest = longest.max(*want);
        assert!(
            err <= 1e-3,
            "{a:?} → {b:?}: {got} m vs GeographicLib {want} m"
        );
    }
    // The sample really spans the range it claims.
    assert!(
        shortest < 200.0 && longest > 200_000.0,
        "{shortest}..{longest}"
    );
    eprintln!(
        "{} pairs, {shortest:.1}–{longest:.0} m: worst |Δ| {worst:.2e} m",
        pairs.len()
    );
}

#[test]
fn polygon_areas_match_geographiclib_to_a_hundredth_of_a_percent() {
    if !have_geographiclib("polygon_areas_match_geographiclib") {
        return;
    }
    let mut rng = ChaCha8Rng::seed_from_u64(1975);
    let mut rings: Vec<Vec<LonLat>> = Vec::new();
    for _ in 0..300 {
        let c = Point::new(
            rng.random_range(-100.0..-60.0),
            rng.random_range(20.0..32.0),
        );
        let n = rng.random_range(4..=8usize);
        let ha = 10f64.powf(rng.random_range(0.0..3.0));
        // Circumradius of the regular n-gon of that area; the jittered one is somewhat smaller.
        let step = std::f64::consts::TAU / n as f64;
        let r_m = (ha * 10_000.0 / (n as f64 / 2.0 * step.sin())).sqrt();
        // Vertices on a circle at increasing angles with gaps < π: convex, counter-clockwise.
        let ring = (0..n)
            .map(|k| {
                let theta = (k as f64 + rng.random_range(0.2..0.8)) * step;
                let bearing = 90.0 - theta.to_degrees();
                let p = Geodesic.destination(c, bearing, r_m);
                ll(p.y(), p.x())
            })
            .collect();
        rings.push(ring);
    }
    let job = json!({
        "polygons": rings
            .iter()
            .map(|r| r.iter().map(|p| [p.lat, p.lon]).collect::<Vec<_>>())
            .collect::<Vec<_>>()
    });
    let reference = numbers(&geographiclib(&job), "areas_m2");
    assert_eq!(reference.len(), rings.len());
    let mut worst = 0.0f64;
    let (mut smallest, mut largest) = (f64::INFINITY, 0.0f64);
    for (ring, want) in rings.iter().zip(&reference) {
        let mut coords: Vec<(f64, f64)> = ring.iter().map(|p| (p.lon, p.lat)).collect();
        coords.push(coords[0]);
        let shape = MultiPolygon(vec![Polygon::new(LineString::from(coords), vec![])]);
        let got = area_m2(&shape);
        let rel = (got - want).abs() / want;
        worst = worst.max(rel);
        smallest = smallest.min(*want);
        largest = largest.max(*want);
        assert!(rel <= 1e-4, "{ring:?}: {got} m² vs GeographicLib {want} m²");
    }
    assert!(
        smallest < 20_000.0 && largest > 5_000_000.0,
        "{smallest}..{largest} m²"
    );
    eprintln!(
        "{} polygons, {:.2}–{:.0} ha: worst relative |Δ| {worst:.2e}",
        rings.len(),
        smallest / 1e4,
        largest / 1e4
    );
}

#[test]
fn flinders_peak_to_buninyong_matches_the_published_worked_example() {
    // Vincenty's inverse worked example, Flinders Peak (37°57′03.72030″S, 144°25′29.52440″E)
    // to Buninyong (37°39′10.15610″S, 143°55′35.38390″E): 54 972.271 m on GRS80. The figure
    // is from memory: the method is Vincenty's 1975 paper (Survey Review 23(176)); this line
    // is the worked example commonly published with it (e.g. in Geoscience Australia's
    // geodetic datum technical manual). GRS80 and WGS 84 differ in flattening by ~1e-11,
    // far below a millimetre on this line.
    let flinders = ll(-dms(37.0, 57.0, 3.72030), dms(144.0, 25.0, 29.52440));
    let buninyong = ll(-dms(37.0, 39.0, 10.15610), dms(143.0, 55.0, 35.38390));
    let got = distance_m(flinders, buninyong);
    assert!((got - 54_972.271).abs() <= 1e-3, "{got} m");
    if !have_geographiclib("flinders_peak_to_buninyong (GeographicLib part)") {
        return;
    }
    let job = json!({ "pairs": [[flinders.lat, flinders.lon, buninyong.lat, buninyong.lon]] });
    let want = numbers(&geographiclib(&job), "distances_m")[0];
    assert!(
        (got - want).abs() <= 1e-3,
        "{got} m vs GeographicLib {want} m"
    );
}
