//! Extreme inputs through the binary, one table: each either plans (exit 0, objective ≤ bound
//! ≤ lp_bound, finite numbers, no vial more than packed, no note saying "infeasible") or stops
//! at load (exit 2, the file, place, field and value named, nothing written). Never exit 1 or
//! a panic. The limits are in docs/formats.md ("Limits").

use std::fs;
use std::path::Path;

use proptest::prelude::*;

use crate::util::{self, replace};

/// What a case must do.
enum Expect {
    /// Exit 0; the summary's notes hold this text when given.
    Plans(Option<&'static str>),
    /// Exit 2; stderr holds this text (file, place, field, value).
    Refused(&'static str),
}

struct Case {
    name: &'static str,
    edit: fn(&Path),
    expect: Expect,
}

/// Sets `key` (dotted) of scenario.json to `value`.
fn set_key(d: &Path, key: &str, value: serde_json::Value) {
    let path = d.join("scenario.json");
    let mut v: serde_json::Value =
        serde_json::from_slice(&fs::read(&path).expect("read")).expect("JSON");
    let mut o = &mut v;
    let parts: Vec<&str> = key.split('.').collect();
    for p in &parts[..parts.len() - 1] {
        o = o
            .as_object_mut()
            .expect("object")
            .entry(p.to_string())
            .or_insert_with(|| serde_json::json!({}));
    }
    o[parts[parts.len() - 1]] = value;
    fs::write(&path, v.to_string()).expect("write");
}

/// Rewrites the last cell of every data row of `file` with `f(row index, old value)`.
fn set_last_cells(d: &Path, file: &str, f: impl Fn(usize, &str) -> String) {
    let path = d.join(file);
    let text = fs::read_to_string(&path).expect("read");
    let mut out = String::new();
    for (i, line) in text.lines().enumerate() {
        if i == 0 || line.is_empty() {
            out.push_str(line);
        } else {
            let (head, last) = line.rsplit_once(',').expect("a CSV row");
            out.push_str(&format!("{head},{}", f(i - 1, last)));
        }
        out.push('\n');
    }
    fs::write(&path, out).expect("write");
}

/// Sets the capacity of every vehicle in fleet.csv (fourth column).
fn set_capacity(d: &Path, vials: &str) {
    let path = d.join("fleet.csv");
    let text = fs::read_to_string(&path).expect("read");
    let out: Vec<String> = text
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 || l.is_empty() {
                return l.to_string();
            }
            let mut c: Vec<&str> = l.split(',').collect();
            c[3] = vials;
            c.join(",")
        })
        .collect();
    fs::write(&path, out.join("\n") + "\n").expect("write");
}

fn cases() -> Vec<Case> {
    use serde_json::json;
    vec![
        Case {
            name: "supply and capacity at the limit (a hundred million vials)",
            edit: |d| {
                set_last_cells(d, "supply.csv", |_, _| "100000000".into());
                set_capacity(d, "100000000");
            },
            expect: Expect::Plans(None),
        },
        Case {
            name: "releases at the limit with supply at the limit",
            edit: |d| {
                set_last_cells(d, "supply.csv", |_, _| "100000000".into());
                set_capacity(d, "100000000");
                set_key(d, "agent.min_release_wasps", json!(0));
                set_key(d, "agent.target_release_wasps", json!(1e6));
                set_key(d, "agent.max_release_wasps", json!(1e6));
            },
            expect: Expect::Plans(None),
        },
        Case {
            name: "a force of 4294967295 vials",
            edit: |d| replace(d, "overrides.csv", "B2,force,", "B2,force,4294967295"),
            expect: Expect::Plans(Some("the force is trimmed to")),
        },
        Case {
            name: "scouting counts of 0 and of the limit side by side",
            edit: |d| {
                set_last_cells(d, "scouting.csv", |i, _| {
                    if i % 2 == 0 { "1000000" } else { "0" }.into()
                })
            },
            expect: Expect::Plans(None),
        },
        Case {
            name: "every scouting value 0",
            edit: |d| set_last_cells(d, "scouting.csv", |_, _| "0".into()),
            expect: Expect::Plans(None),
        },
        Case {
            name: "every scouting value tiny",
            edit: |d| set_last_cells(d, "scouting.csv", |_, _| "1e-300".into()),
            expect: Expect::Plans(None),
        },
        Case {
            name: "min = target = max release",
            edit: |d| {
                set_key(d, "agent.min_release_wasps", json!(400));
                set_key(d, "agent.max_release_wasps", json!(400));
            },
            expect: Expect::Plans(None),
        },
        Case {
            name: "releases of zero wasps",
            edit: |d| {
                set_key(d, "agent.min_release_wasps", json!(0));
                set_key(d, "agent.target_release_wasps", json!(0));
                set_key(d, "agent.max_release_wasps", json!(0));
            },
            expect: Expect::Plans(None),
        },
        Case {
            name: "a vial of 4294967295 wasps",
            edit: |d| set_last_cells(d, "facilities.csv", |_, _| "4294967295".into()),
            expect: Expect::Plans(None),
        },
        Case {
            name: "a shelf life of 3.6 seconds",
            edit: |d| set_key(d, "agent.shelf_life_hours", json!(0.001)),
            expect: Expect::Plans(None),
        },
        Case {
            name: "a half-life of 1e-300 hours",
            edit: |d| set_key(d, "agent.survival.half_life_hours", json!(1e-300)),
            expect: Expect::Plans(None),
        },
        Case {
            name: "travel cost at its limit",
            edit: |d| set_key(d, "policy.travel_cost_per_hour", json!(1e4)),
            expect: Expect::Plans(None),
        },
        Case {
            name: "every vial to requests",
            edit: |d| set_key(d, "policy.dooryard_share_min", json!(1.0)),
            expect: Expect::Plans(None),
        },
        Case {
            name: "ten thousand vials a request",
            // 10,000 vials of 100 wasps are past the 800-wasp maximum: no request can be
            // served, so the share floor is dropped rather than holding every vial at home.
            edit: |d| set_key(d, "policy.dooryard_vials_per_request", json!(10_000)),
            expect: Expect::Plans(Some("dooryard share 0.10 dropped")),
        },
        Case {
            name: "seven releases a site",
            edit: |d| set_key(d, "policy.releases_per_site_week", json!(7)),
            expect: Expect::Plans(None),
        },
        Case {
            name: "no vehicle capacity, parcels only",
            edit: |d| set_capacity(d, "0"),
            expect: Expect::Plans(None),
        },
        Case {
            name: "a scouting count of 1e308",
            edit: |d| replace(d, "scouting.csv", "tap_adults,2", "tap_adults,1e308"),
            expect: Expect::Refused("scouting.csv:2: field 'value': value '1e308'"),
        },
        Case {
            name: "a greening count past the limit",
            edit: |d| {
                replace(
                    d,
                    "scouting.csv",
                    "greening_positive,1",
                    "greening_positive,1000001",
                )
            },
            expect: Expect::Refused("scouting.csv:4: field 'value': value '1000001'"),
        },
        Case {
            name: "a scouting value NaN",
            edit: |d| replace(d, "scouting.csv", "tap_adults,0.5", "tap_adults,NaN"),
            expect: Expect::Refused("scouting.csv:5: field 'value': value 'NaN'"),
        },
        Case {
            name: "supply of 4294967295 vials a day",
            edit: |d| {
                replace(
                    d,
                    "supply.csv",
                    "F1,2027-03-01,10",
                    "F1,2027-03-01,4294967295",
                )
            },
            expect: Expect::Refused("supply.csv:2: field 'vials': value '4294967295'"),
        },
        Case {
            name: "two supply rows adding up past the limit",
            edit: |d| {
                replace(
                    d,
                    "supply.csv",
                    "F1,2027-03-01,10",
                    "F1,2027-03-01,60000000",
                );
                replace(
                    d,
                    "supply.csv",
                    "F1,2027-03-03,10",
                    "F1,2027-03-01,60000000",
                );
            },
            expect: Expect::Refused("supply.csv:3: field 'vials': value '60000000'"),
        },
        Case {
            name: "a vehicle carrying 4000000000 vials",
            edit: |d| {
                replace(
                    d,
                    "fleet.csv",
                    "V1,F1,mon;wed;fri,20,",
                    "V1,F1,mon;wed;fri,4000000000,",
                )
            },
            expect: Expect::Refused("fleet.csv:2: field 'capacity_vials': value '4000000000'"),
        },
        Case {
            name: "travel cost past its limit",
            edit: |d| set_key(d, "policy.travel_cost_per_hour", json!(1e5)),
            expect: Expect::Refused("key 'policy.travel_cost_per_hour': value '100000.0'"),
        },
        Case {
            name: "a release of a billion wasps",
            edit: |d| set_key(d, "agent.max_release_wasps", json!(1e9)),
            expect: Expect::Refused("key 'agent.max_release_wasps': value '1000000000.0'"),
        },
    ]
}

#[test]
fn extreme_inputs_plan_soundly_or_stop_at_load() {
    let (mut planned, mut refused) = (0, 0);
    for case in cases() {
        let dir = util::copy_minimal();
        (case.edit)(dir.path());
        let out = tempfile::tempdir().expect("temp dir");
        let target = out.path().join("plan");
        let o = util::run(&[
            "plan",
            dir.path().to_str().expect("utf-8"),
            "-q",
            "--out",
            target.to_str().expect("utf-8"),
        ]);
        let stderr = String::from_utf8_lossy(&o.stderr);
        let name = case.name;
        match case.expect {
            Expect::Plans(note) => {
                assert_eq!(o.status.code(), Some(0), "{name}: {stderr}");
                let s: serde_json::Value = serde_json::from_slice(
                    &fs::read(target.join("summary.json")).expect("summary.json"),
                )
                .expect("JSON");
                let num = |k: &str| s[k].as_f64().unwrap_or(f64::NAN);
                let (obj, bound, lp) = (num("objective"), num("bound"), num("lp_bound"));
                assert!(
                    obj.is_finite() && bound.is_finite() && lp.is_finite(),
                    "{name}: {obj} {bound} {lp}"
                );
                let t = |x: f64| 1e-6 * x.abs().max(1.0);
                assert!(
                    obj <= bound + t(bound),
                    "{name}: objective {obj} > bound {bound}"
                );
                assert!(bound <= lp + t(lp), "{name}: bound {bound} > lp_bound {lp}");
                assert!(num("shipped_vials") <= num("supply_vials"), "{name}");
                let notes = s["notes"].to_string();
                assert!(!notes.contains("infeasible"), "{name}: {notes}");
                if let Some(n) = note {
                    assert!(notes.contains(n), "{name}: no note {n:?} in {notes}");
                }
                planned += 1;
            }
            Expect::Refused(text) => {
                assert_eq!(o.status.code(), Some(2), "{name}: {stderr}");
                assert!(stderr.contains(text), "{name}: {text:?} not in {stderr}");
                assert!(!target.exists(), "{name}: output written");
                refused += 1;
            }
        }
    }
    eprintln!("{planned} planned, {refused} refused at load");
}

/// Scenario.json keys the property test throws numbers at.
const KEYS: [&str; 12] = [
    "agent.min_release_wasps",
    "agent.target_release_wasps",
    "agent.max_release_wasps",
    "agent.shelf_life_hours",
    "agent.survival.half_life_hours",
    "agent.above_target_weight",
    "policy.dooryard_share_min",
    "policy.dooryard_vials_per_request",
    "policy.travel_cost_per_hour",
    "policy.releases_per_site_week",
    "parcel.max_vials_per_day",
    "parcel.transit_hours",
];

/// CSV cells the property test rewrites: (file, text before the cell, the cell as written).
const CELLS: [(&str, &str, &str); 5] = [
    ("supply.csv", "F1,2027-03-01,", "10"),
    ("fleet.csv", "V1,F1,mon;wed;fri,", "20"),
    ("facilities.csv", "80.000,", "100"),
    ("scouting.csv", "tap_adults,", "2"),
    ("overrides.csv", "B2,force,", ""),
];

/// Numbers for scenario.json (NaN and infinities as text, which JSON cannot hold otherwise).
fn json_value() -> impl Strategy<Value = serde_json::Value> {
    prop::sample::select(vec![
        "0", "-1", "1e-300", "1e-9", "0.5", "1", "3", "150", "800", "1000000", "1000001", "1e9",
        "1e308", "\"NaN\"", "\"inf\"", "\"12\"",
    ])
    .prop_map(|s| serde_json::from_str(s).expect("JSON literal"))
}

/// Cell texts for the CSV files.
fn cell_value() -> impl Strategy<Value = &'static str> {
    prop::sample::select(vec![
        "0",
        "1",
        "7",
        "1000",
        "100000000",
        "100000001",
        "4294967295",
        "4294967296",
        "-1",
        "NaN",
        "1e308",
        "1e-300",
        "0.5",
        "",
        "inf",
    ])
}

/// The minimal scenario's files in memory, with `keys` set in scenario.json and `cells` rewritten.
fn files_with(
    keys: &[(usize, serde_json::Value)],
    cells: &[(usize, &str)],
) -> Vec<(String, Vec<u8>)> {
    let mut files = Vec::new();
    for entry in fs::read_dir(util::minimal_dir()).expect("read minimal") {
        let entry = entry.expect("entry");
        let name = entry.file_name().to_string_lossy().into_owned();
        let mut text = fs::read_to_string(entry.path()).expect("read");
        if name == "scenario.json" {
            let mut v: serde_json::Value = serde_json::from_str(&text).expect("JSON");
            for (k, value) in keys {
                let parts: Vec<&str> = KEYS[*k].split('.').collect();
                let mut o = &mut v;
                for p in &parts[..parts.len() - 1] {
                    o = &mut o[*p];
                }
                o[parts[parts.len() - 1]] = value.clone();
            }
            text = v.to_string();
        }
        for &(c, cell) in cells {
            let (file, before, old) = CELLS[c];
            if file == name {
                text = text.replacen(&format!("{before}{old}"), &format!("{before}{cell}"), 1);
            }
        }
        files.push((name, text.into_bytes()));
    }
    files
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// Whatever numbers the configuration holds, the library either refuses the scenario with
    /// problems naming a file (exit 2 in the binary) or plans it (never an allocation error,
    /// exit 1, nor a panic, 101) with objective ≤ bound ≤ lp_bound, every whole-vial limit
    /// kept (util::check_whole_vial_limits: min and max live wasps at arrival, supply per pack
    /// day, vehicle and parcel capacity), at most the allowed releases per site, and the share
    /// floor the allocation reports.
    #[test]
    fn random_configuration_numbers_never_break_the_plan(
        keys in prop::collection::vec((0..KEYS.len(), json_value()), 1..4),
        cells in prop::collection::vec((0..CELLS.len(), cell_value()), 0..3),
    ) {
        let files = files_with(&keys, &cells);
        let borrowed: Vec<(&str, &[u8])> =
            files.iter().map(|(n, b)| (n.as_str(), b.as_slice())).collect();
        let s = match broodcast::scenario::load_files(&borrowed) {
            Err(e) => {
                prop_assert!(!e.problems.is_empty());
                prop_assert!(e.problems.iter().all(|p| !p.file.is_empty()));
                return Ok(());
            }
            Ok(s) => s,
        };
        let opts = broodcast::plan::PlanOptions::default();
        let p = broodcast::plan::plan(s, &opts)
            .map_err(|e| TestCaseError::fail(format!("allocation error (exit 1): {e}")))?;
        let a = &p.allocation;
        broodcast::allocate::check_bound_order("prop", a.objective, a.bound, a.lp_bound)
            .map_err(|e| TestCaseError::fail(e.to_string()))?;
        let (door, total) = util::check_whole_vial_limits(&p.scenario, a);
        let floor = broodcast::allocate::share_floor(&p.scenario, &p.priority, &p.arcs, &opts.alloc)
            .map_err(|e| TestCaseError::fail(e.to_string()))?
            .unwrap_or(0.0);
        prop_assert!(f64::from(door) >= floor * f64::from(total) - 1e-9, "share floor");
        let mut releases = std::collections::BTreeMap::<usize, u32>::new();
        for sh in &a.shipments {
            *releases.entry(sh.arc.site).or_default() += 1;
        }
        let allowed = p.scenario.policy.releases_per_site_week.max(1);
        prop_assert!(releases.values().all(|&r| r <= allowed), "releases per site");
    }
}

/// Runs `plan` on `dir` and returns summary.json's lp_bound.
fn lp_bound_of(dir: &Path) -> f64 {
    let out = tempfile::tempdir().expect("temp dir");
    let target = out.path().join("plan");
    util::run_ok(&[
        "plan",
        dir.to_str().expect("utf-8"),
        "-q",
        "--out",
        target.to_str().expect("utf-8"),
    ]);
    let s: serde_json::Value =
        serde_json::from_slice(&fs::read(target.join("summary.json")).expect("summary.json"))
            .expect("JSON");
    s["lp_bound"].as_f64().expect("lp_bound")
}

/// Supply and vehicles of a hundred million vials a day and of a thousand (already more than
/// the minimal week's eight sites can take within max_release_wasps) are the same LP: the
/// rows the allocation clips to what their arcs can carry never bind.
#[test]
fn supply_in_the_hundred_millions_gives_the_lp_bound_of_ample_supply() {
    let bound = |vials: &str| {
        let dir = util::copy_minimal();
        set_last_cells(dir.path(), "supply.csv", |_, _| vials.into());
        set_capacity(dir.path(), vials);
        replace(
            dir.path(),
            "scenario.json",
            "\"max_vials_per_day\": 10",
            &format!("\"max_vials_per_day\": {vials}"),
        );
        lp_bound_of(dir.path())
    };
    let (ample, huge) = (bound("1000"), bound("100000000"));
    eprintln!("lp_bound with 1000 vials a day {ample}, with 100000000 {huge}");
    assert!(ample > 0.0);
    assert!(
        (ample - huge).abs() <= 1e-6 * ample,
        "1000 vials: {ample}; 100000000 vials: {huge}"
    );
}

/// The demo with scouting counts of 0 and of the limit (10⁶) side by side: priorities a
/// million times apart. Before the allocation scaled its objective for the solve, clarabel
/// stopped far from the optimum here (an LP value of 568.6 against a plan worth 5.3 × 10¹¹,
/// exit 1).
#[test]
fn demo_with_priorities_a_million_apart_plans_in_order() {
    let work = tempfile::tempdir().expect("temp dir");
    let dir = work.path().join("demo");
    util::run_ok(&["demo", "--out", dir.to_str().expect("utf-8")]);
    // Every other tap count 10⁶, the rest 0.
    let path = dir.join("scouting.csv");
    let text = fs::read_to_string(&path).expect("read");
    let mut taps = 0;
    let lines: Vec<String> = text
        .lines()
        .map(|l| match l.split_once(",tap_adults,") {
            Some((head, _)) => {
                taps += 1;
                let v = if taps % 2 == 0 { "1000000" } else { "0" };
                format!("{head},tap_adults,{v}")
            }
            None => l.to_string(),
        })
        .collect();
    assert!(taps > 10, "the demo has tap counts");
    fs::write(&path, lines.join("\n") + "\n").expect("write");
    let out = work.path().join("plan");
    util::run_ok(&[
        "plan",
        dir.to_str().expect("utf-8"),
        "-q",
        "--out",
        out.to_str().expect("utf-8"),
    ]);
    let s: serde_json::Value =
        serde_json::from_slice(&fs::read(out.join("summary.json")).expect("summary.json"))
            .expect("JSON");
    let num = |k: &str| s[k].as_f64().expect("a number");
    let (obj, bound, lp) = (num("objective"), num("bound"), num("lp_bound"));
    eprintln!("objective {obj}, bound {bound}, lp_bound {lp}");
    assert!(
        obj > 1e9,
        "the high-pressure sites are worth far more: {obj}"
    );
    assert!(obj <= bound + 1e-6 * bound && bound <= lp + 1e-6 * lp);
}
