//! The whole week's LP through the binary, against an independent solver: `plan` on the demo
//! and on generated weeks with 3, 5 and 6 facilities at 0.3×, 1× and 6× supply, then
//! `export-model` on the same folder, solved by HiGHS. Its optimum must equal `summary.json`'s
//! `lp_bound` to 1e-6 relative, the plan must order objective ≤ bound ≤ lp_bound, and the
//! exported model must hold the rows its columns call for (one benefit and max-release row per
//! site with an arc, one request row per dooryard site with an arc). One more week checks that
//! a plan whose first rounding is short ends near its bound (the later roundings).

use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use crate::util;

/// Generated weeks: (facilities, supply multiplier). 80 sites each keeps the nine plans and
/// exports at a few seconds in a debug build.
const WEEKS: [(u32, &str); 9] = [
    (3, "0.3"),
    (3, "1"),
    (3, "6"),
    (5, "0.3"),
    (5, "1"),
    (5, "6"),
    (6, "0.3"),
    (6, "1"),
    (6, "6"),
];
const SITES: &str = "80";
const SEED: &str = "11";

fn python_has(module: &str) -> bool {
    Command::new("python3")
        .args(["-c", &format!("import {module}")])
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

/// What the check reads from one plan's `summary.json`.
struct Planned {
    label: String,
    objective: f64,
    bound: f64,
    lp_bound: f64,
    /// Route feedback happened (the re-plan left out arcs the routes could not serve, and
    /// kept the first LP's bounds).
    fed_back: bool,
    mps: PathBuf,
}

/// Plans `dir` (None: the built-in demo) into `work/label` and exports its model.
fn plan_and_export(label: &str, dir: Option<&Path>, work: &Path) -> Planned {
    let out = work.join(format!("{label}.out"));
    let mps = work.join(format!("{label}.mps"));
    let mut plan = vec!["plan".to_string()];
    let mut export = vec!["export-model".to_string()];
    if let Some(d) = dir {
        plan.push(d.display().to_string());
        export.push(d.display().to_string());
    }
    plan.extend(["-q".into(), "--out".into(), out.display().to_string()]);
    export.extend(["--out".into(), mps.display().to_string()]);
    for args in [&plan, &export] {
        util::run_ok(&args.iter().map(String::as_str).collect::<Vec<_>>());
    }
    let summary: serde_json::Value =
        serde_json::from_slice(&fs::read(out.join("summary.json")).expect("summary.json"))
            .expect("summary.json is JSON");
    let num = |k: &str| {
        summary[k]
            .as_f64()
            .unwrap_or_else(|| panic!("{label}: summary.json {k} is not a number"))
    };
    Planned {
        label: label.to_string(),
        objective: num("objective"),
        bound: num("bound"),
        lp_bound: num("lp_bound"),
        fed_back: summary["moved"].as_array().is_some_and(|m| !m.is_empty()),
        mps,
    }
}

/// Row and column names of a free MPS file: (rows by kind, arc columns).
fn mps_names(path: &Path) -> (BTreeMap<String, BTreeSet<String>>, BTreeSet<String>) {
    let text = fs::read_to_string(path).expect("read MPS");
    let mut section = "";
    let mut rows: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut arcs = BTreeSet::new();
    for line in text.lines() {
        if !line.starts_with(' ') {
            section = line.split_whitespace().next().unwrap_or("");
            continue;
        }
        let mut f = line.split_whitespace();
        match section {
            "ROWS" => {
                let (_, name) = (f.next(), f.next().expect("row name"));
                let (kind, rest) = name.split_once('_').unwrap_or((name, ""));
                rows.entry(kind.to_string())
                    .or_default()
                    .insert(rest.to_string());
            }
            "COLUMNS" => {
                let name = f.next().expect("column name");
                if name.starts_with("x_") {
                    arcs.insert(name.to_string());
                }
            }
            _ => {}
        }
    }
    (rows, arcs)
}

/// Every site with an arc column has its benefit and max-release rows, every dooryard
/// (`R…`) site its request row, and no site row is left without an arc.
fn assert_rows_match_columns(label: &str, path: &Path) {
    let (rows, arcs) = mps_names(path);
    assert!(!arcs.is_empty(), "{label}: no arc column");
    // x_FACILITY_PACK_DISPATCH_SITE_MODE: dates and mode hold no '_', nor do these ids.
    let sites: BTreeSet<String> = arcs
        .iter()
        .map(|a| {
            let p: Vec<&str> = a.split('_').collect();
            p[4..p.len() - 1].join("_")
        })
        .collect();
    let get = |k: &str| rows.get(k).cloned().unwrap_or_default();
    assert_eq!(get("benefit"), sites, "{label}: benefit rows");
    assert_eq!(get("maxrelease"), sites, "{label}: max-release rows");
    let doors: BTreeSet<String> = sites
        .iter()
        .filter(|s| s.starts_with('R'))
        .cloned()
        .collect();
    assert_eq!(get("request"), doors, "{label}: request rows");
    assert!(!get("supply").is_empty(), "{label}: no supply row");
}

#[test]
fn highs_reaches_the_lp_bound_of_the_demo_and_generated_weeks() {
    if !python_has("highspy") {
        util::skip(
            "highs_reaches_the_lp_bound_of_the_demo_and_generated_weeks",
            "python3 cannot import highspy (pip install highspy)",
        );
        return;
    }
    let work = tempfile::tempdir().expect("temp dir");
    let mut planned = vec![plan_and_export("demo", None, work.path())];
    for (facilities, supply) in WEEKS {
        let label = format!("f{facilities}x{supply}");
        let dir = work.path().join(&label);
        util::run_ok(&[
            "generate",
            "--sites",
            SITES,
            "--seed",
            SEED,
            "--facilities",
            &facilities.to_string(),
            "--supply",
            supply,
            "--out",
            dir.to_str().expect("utf-8 path"),
        ]);
        planned.push(plan_and_export(&label, Some(&dir), work.path()));
    }
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/py/highs_objective.py");
    let out = Command::new("python3")
        .arg(script)
        .args(planned.iter().map(|p| &p.mps))
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    // HiGHS prints a banner first; keep the result lines, one per model.
    let lines: Vec<&str> = text
        .lines()
        .filter(|l| l.contains("ObjSense") || l.starts_with("status"))
        .collect();
    assert_eq!(lines.len(), planned.len(), "{text}");
    let mut equal = 0;
    for (p, line) in planned.iter().zip(&lines) {
        // HiGHS 1.x (PyPI highspy), simplex at 1e-9 primal and dual feasibility tolerance:
        // an independent optimum of the exported whole-pool LP.
        let highs: f64 = line
            .split_whitespace()
            .next()
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("{}: HiGHS did not solve: {line}", p.label));
        let tol = 1e-6 * highs.abs().max(1.0);
        eprintln!(
            "{}: HiGHS {highs:.6}, lp_bound {:.6} (relative {:.1e}), bound {:.6}, objective \
             {:.6}{}",
            p.label,
            p.lp_bound,
            (highs - p.lp_bound).abs() / highs.abs().max(1.0),
            p.bound,
            p.objective,
            if p.fed_back {
                ", after route feedback"
            } else {
                ""
            }
        );
        // With or without route feedback, lp_bound is the optimum of the exported model: the
        // feedback's re-plan keeps the first LP (arcs left out only lower the optimum).
        assert!(
            (highs - p.lp_bound).abs() <= tol,
            "{}: HiGHS {highs} vs lp_bound {}",
            p.label,
            p.lp_bound
        );
        // A week where no arc can carry a whole release exports an empty model (0 = 0): no
        // evidence either way.
        equal += usize::from(highs > 0.0);
        // summary.json rounds to 6 decimals; the order holds beyond that.
        let t = |x: f64| 1e-6 * x.abs().max(1.0);
        assert!(
            p.objective <= p.bound + t(p.bound),
            "{}: objective > bound",
            p.label
        );
        assert!(
            p.bound <= p.lp_bound + t(p.lp_bound),
            "{}: bound > lp_bound",
            p.label
        );
        assert!(p.objective.is_finite() && p.lp_bound >= 0.0, "{}", p.label);
        if highs > 0.0 {
            assert_rows_match_columns(&p.label, &p.mps);
        }
    }
    // The comparison is only worth its name when most weeks have something to ship.
    assert!(
        equal >= 8,
        "only {equal} of {} compared exactly with a non-zero optimum",
        planned.len()
    );
}

/// `summary.json` of `plan` on the generated week of `sites` sites, 3 facilities and 1× supply
/// (`broodcast generate --sites N --facilities 3 --supply 1 --seed 1`).
fn plan_generated_week(sites: usize) -> serde_json::Value {
    let work = tempfile::tempdir().expect("temp dir");
    let dir = work.path().join("week");
    let out = work.path().join("out");
    let (d, o) = (
        dir.to_str().expect("utf-8 path"),
        out.to_str().expect("utf-8 path"),
    );
    util::run_ok(&[
        "generate",
        "--sites",
        &sites.to_string(),
        "--facilities",
        "3",
        "--supply",
        "1",
        "--seed",
        "1",
        "--out",
        d,
    ]);
    util::run_ok(&["plan", d, "--out", o, "-q"]);
    serde_json::from_str(&fs::read_to_string(out.join("summary.json")).expect("summary"))
        .expect("json")
}

/// A week whose first rounding is short: on the generated 300-site, 3-facility, 1×-supply
/// week the first rounding ends more than 1 % below the whole-vial bound and the LP spreads
/// releases over pack days. Measured 2026-12-04: the plan was 0.73 % below its bound without
/// the release LP (252,437.1) and 0.27 % below with it (253,608.5), and the check (0.5 %)
/// failed without it. Since the wide and guided roundings and the window polish
/// (2026-12-04) the plan is 253,836.6 (0.18 %) with or without the release LP, here and on 16
/// other generated weeks of 300–500 sites (2026-12-05, the release LP stopped before it
/// starts, scratch build); it still decides the 35,000-site week (gap 0.46 % with it, 1.14 %
/// without), too large for a test.
#[test]
fn a_week_whose_first_rounding_is_short_ends_near_its_bound() {
    let summary = plan_generated_week(300);
    let gap = summary["gap"].as_f64().expect("gap");
    assert!(gap <= 0.005, "gap {gap}");
}

/// The bound's second descent (`allocate::bound::tighten`) on a week whose plan stays more
/// than 1 % below the bound: the generated 700-site, 3-facility, 1×-supply week. Measured
/// 2026-12-04: the first descent stops at 687,587.6 and the second lowers it to 681,197.4,
/// with the same plan (665,178.5). Validity against an outside solver: HiGHS (highspy 1.16.0,
/// `scripts/release_mip.py` on this week's exported model, 120 s, one thread) found a
/// whole-vial plan worth 673,913.1, so no valid bound may be below it (its own dual bound was
/// 677,124.3). The check fails without the second descent (bound above 684,000) and with a
/// bound that cuts off HiGHS's plan.
#[test]
fn the_second_descent_tightens_the_bound_without_cutting_off_a_known_plan() {
    let summary = plan_generated_week(700);
    let bound = summary["bound"].as_f64().expect("bound");
    let objective = summary["objective"].as_f64().expect("objective");
    let highs_plan = 673_913.1;
    assert!(
        bound >= highs_plan,
        "bound {bound} below HiGHS's plan {highs_plan}"
    );
    assert!(bound <= 684_000.0, "bound {bound} not tightened");
    assert!(
        objective <= bound,
        "objective {objective} above bound {bound}"
    );
}
