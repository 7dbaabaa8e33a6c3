//! Every malformed input, through the binary: exit code 2, a message naming the file and the
//! line (or feature, or key), and nothing written. The defect table is shared with
//! `tests/loader.rs` (`tests/util`).

use crate::util;

use std::path::PathBuf;
use std::process::Command;

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_broodcast"))
}

#[test]
fn the_minimal_scenario_plans() {
    let dir = util::copy_minimal();
    let out = tempfile::tempdir().unwrap();
    let target = out.path().join("plan");
    let o = Command::new(bin())
        .args(["plan", dir.path().to_str().unwrap(), "--out"])
        .arg(&target)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(target.join("manifest.csv").exists());
}

#[test]
fn every_defect_exits_2_names_the_place_and_writes_nothing() {
    let cases = util::cases();
    assert!(cases.len() >= 25, "the table must cover every rule");
    for case in cases {
        let dir = util::copy_minimal();
        (case.edit)(dir.path());
        let out = tempfile::tempdir().unwrap();
        let target = out.path().join("plan");
        let o = Command::new(bin())
            .args(["plan", dir.path().to_str().unwrap(), "--out"])
            .arg(&target)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{}: {stderr}", case.name);
        let named = stderr
            .lines()
            .any(|l| l.contains(case.expect_file) && l.contains(case.expect_location));
        assert!(
            named,
            "{}: no line names {}{}:\n{stderr}",
            case.name, case.expect_file, case.expect_location
        );
        let left: Vec<_> = std::fs::read_dir(out.path()).unwrap().collect();
        assert!(left.is_empty(), "{}: something was written", case.name);
        // `check` must reject it the same way.
        let c = Command::new(bin())
            .args(["check", dir.path().to_str().unwrap()])
            .output()
            .unwrap();
        assert_eq!(c.status.code(), Some(2), "check on {}", case.name);
    }
}

#[test]
fn odd_office_inputs_plan_with_a_warning_naming_the_place() {
    for case in util::warning_cases() {
        let dir = util::copy_minimal();
        (case.edit)(dir.path());
        let out = tempfile::tempdir().unwrap();
        let target = out.path().join("plan");
        let o = Command::new(bin())
            .args(["plan", dir.path().to_str().unwrap(), "--out"])
            .arg(&target)
            .output()
            .unwrap();
        let text = format!(
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        );
        assert_eq!(o.status.code(), Some(0), "{}: {text}", case.name);
        assert!(
            text.lines().any(|l| l.contains(case.expect)),
            "{}: no warning line holds {:?}:\n{text}",
            case.name,
            case.expect
        );
        assert!(target.join("manifest.csv").exists(), "{}", case.name);
    }
}

/// Names, phones and e-mails of tests/data/minimal/requests.csv: none may be printed when the
/// travel matrix points at a file of people.
const PERSONAL: [&str; 6] = [
    "Sample",
    "555-01",
    "@example",
    "Palm Row",
    "Grove Lane",
    "Dune",
];

#[test]
fn a_matrix_pointed_at_a_file_of_people_prints_none_of_it() {
    type Edit = fn(&std::path::Path);
    let variants: [(&str, Edit); 4] = [
        ("requests.csv itself", |d| {
            util::replace(d, "scenario.json", r#""travel.csv""#, r#""requests.csv""#)
        }),
        ("requests.csv without its header", |d| {
            let t = std::fs::read_to_string(d.join("requests.csv")).unwrap();
            let body: String = t.lines().skip(1).map(|l| format!("{l}\n")).collect();
            util::write(d, "people.csv", body.as_bytes());
            util::replace(d, "scenario.json", r#""travel.csv""#, r#""people.csv""#);
        }),
        ("a contact list of two columns", |d| {
            util::write(
                d,
                "people.csv",
                b"A. Sample,555-0100\nB. Sample,555-0101\nC. Sample,a.sample@example.invalid\n",
            );
            util::replace(d, "scenario.json", r#""travel.csv""#, r#""people.csv""#);
        }),
        ("a square file of names", |d| {
            util::write(
                d,
                "people.csv",
                b"x,A. Sample,B. Sample\nA. Sample,0,555-0100\nB. Sample,b.sample@example.invalid,0\n",
            );
            util::replace(d, "scenario.json", r#""travel.csv""#, r#""people.csv""#);
        }),
    ];
    for (name, edit) in variants {
        let dir = util::copy_minimal();
        edit(dir.path());
        for cmd in ["check", "plan"] {
            let out = tempfile::tempdir().unwrap();
            let mut c = Command::new(bin());
            c.args([cmd, dir.path().to_str().unwrap()]);
            if cmd == "plan" {
                c.arg("--out").arg(out.path().join("plan"));
            }
            let o = c.output().unwrap();
            let text = format!(
                "{}{}",
                String::from_utf8_lossy(&o.stdout),
                String::from_utf8_lossy(&o.stderr)
            );
            assert_eq!(o.status.code(), Some(2), "{name} ({cmd}): {text}");
            for p in PERSONAL {
                assert!(!text.contains(p), "{name} ({cmd}) prints {p:?}:\n{text}");
            }
        }
    }
}

/// Numeric keys of scenario.json (path, and whether absent from the minimal file).
const NUMBER_KEYS: [&[&str]; 22] = [
    &["agent", "shelf_life_hours"],
    &["agent", "min_release_wasps"],
    &["agent", "target_release_wasps"],
    &["agent", "max_release_wasps"],
    &["agent", "above_target_weight"],
    &["agent", "survival", "half_life_hours"],
    &["policy", "dooryard_share_min"],
    &["policy", "dooryard_vials_per_request"],
    &["policy", "insecticide_exclusion_days"],
    &["policy", "pressure_radius_km"],
    &["policy", "pressure_bandwidth_km"],
    &["policy", "travel_cost_per_hour"],
    &["policy", "rerelease_interval_days"],
    &["travel", "circuity"],
    &["travel", "speed_kmh"],
    &["parcel", "transit_hours"],
    &["parcel", "max_vials_per_day"],
    &["dispatch", "service_minutes_block"],
    &["dispatch", "service_minutes_dooryard"],
    &["dispatch", "time_limit_seconds"],
    &["dispatch", "seed"],
    &["week_start"],
];

/// Raw JSON text for a configuration value: edge numbers, number-like text, wrong types.
fn raw_value() -> impl proptest::strategy::Strategy<Value = String> {
    use proptest::prelude::*;
    prop_oneof![
        Just("0".to_string()),
        Just("-0".to_string()),
        Just("-1".to_string()),
        Just("1e-300".to_string()),
        Just("1e300".to_string()),
        Just("1e400".to_string()),
        Just("1.7976931348623157e308".to_string()),
        Just("4294967295".to_string()),
        Just("4294967296".to_string()),
        Just("18446744073709551615".to_string()),
        Just("18446744073709551616".to_string()),
        Just("-9223372036854775808".to_string()),
        Just("\"NaN\"".to_string()),
        Just("\"inf\"".to_string()),
        Just("\"12\"".to_string()),
        Just("null".to_string()),
        Just("true".to_string()),
        Just("[]".to_string()),
        Just("{}".to_string()),
        Just("\"9999-12-27\"".to_string()),
        Just("\"0001-01-01\"".to_string()),
        any::<i64>().prop_map(|x| x.to_string()),
        any::<u64>().prop_map(|x| x.to_string()),
        any::<f64>()
            .prop_filter("JSON has no NaN or infinity", |x| x.is_finite())
            .prop_map(|x| format!("{x:e}")),
        (0u32..10_000).prop_map(|x| x.to_string()),
        (0.0f64..2.0).prop_map(|x| x.to_string()),
    ]
}

/// The minimal scenario.json with each (key, raw JSON value) set.
fn scenario_with(sets: &[(usize, String)]) -> String {
    let text = std::fs::read_to_string(util::minimal_dir().join("scenario.json")).unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for (i, (k, _)) in sets.iter().enumerate() {
        let path = NUMBER_KEYS[*k];
        let mut cur = &mut v;
        for p in &path[..path.len() - 1] {
            cur = cur
                .as_object_mut()
                .unwrap()
                .entry(p.to_string())
                .or_insert_with(|| serde_json::json!({}));
        }
        cur[path[path.len() - 1]] = serde_json::Value::String(format!("@@{i}@@"));
    }
    let mut out = serde_json::to_string_pretty(&v).unwrap();
    for (i, (_, raw)) in sets.iter().enumerate() {
        out = out.replace(&format!("\"@@{i}@@\""), raw);
    }
    out
}

/// Runs `cmd` on the minimal folder with `json` as scenario.json; returns the exit code and
/// the output. Exit 1 (internal error) and 101 (panic) are never right for an input.
fn run_with(cmd: &str, json: &str) -> (Option<i32>, String) {
    let dir = util::copy_minimal();
    util::write(dir.path(), "scenario.json", json.as_bytes());
    let out = tempfile::tempdir().unwrap();
    let mut c = Command::new(bin());
    c.args([cmd, dir.path().to_str().unwrap()]);
    if cmd == "plan" {
        c.arg("--out").arg(out.path().join("plan"));
    }
    let o = c.output().unwrap();
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    (o.status.code(), text)
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]

    /// Any value at any numeric key: `check` answers 0 or 2, never 1 or a panic.
    #[test]
    fn random_configuration_numbers_never_crash_check(
        sets in proptest::collection::vec((0..NUMBER_KEYS.len(), raw_value()), 1..4)
    ) {
        let json = scenario_with(&sets);
        let (code, text) = run_with("check", &json);
        proptest::prop_assert!(matches!(code, Some(0) | Some(2)), "exit {code:?}:\n{json}\n{text}");
        if code == Some(2) {
            proptest::prop_assert!(text.contains("scenario.json"), "{text}");
        }
    }
}

proptest::proptest! {
    // A plan takes seconds in a debug build: few cases, each setting several keys at once.
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(6))]

    /// The same through `plan`, which adds dates and times and solves: 0 or 2 only, and a
    /// refused scenario writes nothing.
    #[test]
    fn random_configuration_numbers_never_crash_plan(
        sets in proptest::collection::vec((0..NUMBER_KEYS.len(), raw_value()), 1..6)
    ) {
        let json = scenario_with(&sets);
        let (code, text) = run_with("plan", &json);
        proptest::prop_assert!(matches!(code, Some(0) | Some(2)), "exit {code:?}:\n{json}\n{text}");
    }
}

/// Every numeric key at the edges of its documented range (docs/formats.md) goes through
/// `plan`: accepted extremes reach the planner and must give 0 (or 2), never 1 or a panic;
/// one step past the upper limit must be refused by `check` with the key named.
#[test]
fn every_configuration_number_at_its_limit_plans_and_past_it_is_refused() {
    // (key index in NUMBER_KEYS, lowest accepted, highest accepted, first refused above)
    let edges: [(usize, &str, &str, &str); 18] = [
        (0, "1e-9", "8760", "8760.5"),
        (3, "400", "1000000", "1000001"),
        (4, "0", "1", "1.01"),
        (5, "1e-9", "8760", "8761"),
        (6, "0", "1", "1.5"),
        (7, "1", "10000", "10001"),
        (8, "0", "3660", "3661"),
        (9, "1e-9", "1000", "1000.1"),
        (10, "1e-9", "1000", "1001"),
        (11, "0", "10000", "10001"),
        (12, "0", "3660", "3661"),
        (13, "1", "10", "10.5"),
        (14, "1e-9", "200", "201"),
        (15, "0", "8760", "8761"),
        (16, "0", "100000000", "100000001"),
        (17, "0", "1440", "1441"),
        (18, "0", "1440", "1441"),
        (19, "1e-9", "86400", "86401"),
    ];
    // Every key at its lowest, then every key at its highest, in one plan each (a plan takes
    // seconds in a debug build; one key at a time measured 112 s for the 36 plans).
    for high in [false, true] {
        let sets: Vec<(usize, String)> = edges
            .iter()
            .map(|&(k, low, hi, _)| (k, if high { hi } else { low }.to_string()))
            .collect();
        let json = scenario_with(&sets);
        let (code, text) = run_with("plan", &json);
        assert_eq!(code, Some(0), "plan:\n{json}\n{text}");
    }
    for (k, _, _, past) in edges {
        let key = NUMBER_KEYS[k].join(".");
        let (code, text) = run_with("check", &scenario_with(&[(k, past.to_string())]));
        assert_eq!(code, Some(2), "check {key}={past}: {text}");
        assert!(
            text.contains(&format!("key '{key}'")),
            "{key}={past}: {text}"
        );
    }
}
