//! Sweeps and comparisons: properties of the LP value over supply, outages, reproduction of
//! `plan`, determinism across thread counts, and the `sweep`/`compare` binaries end to end.

use std::path::Path;
use std::process::Command;

use broodcast::plan::{self, PlanOptions};
use broodcast::scenario::{self, Scenario};
use broodcast::sweep::{self, Multiplier, Sweep, SweepSpec};

use crate::util;
use util::{generated, run, run_ok};

fn spec(supply: &str, without: &[&str]) -> SweepSpec {
    SweepSpec {
        supply: Multiplier::parse_list(supply).unwrap(),
        without: without.iter().map(|s| s.to_string()).collect(),
        settings: Vec::new(),
        saturation_fraction: 0.25,
        full_routes: false,
    }
}

fn run_sweep(sc: &Scenario, supply: &str, without: &[&str]) -> Sweep {
    sweep::sweep(sc, &spec(supply, without), &PlanOptions::default(), &|| {}).unwrap()
}

/// Allocation options for checks of `lp_bound` alone: no subgradient steps on the whole-vial
/// bound and a small rounding budget, neither of which changes the LP.
fn lp_only() -> broodcast::allocate::AllocOptions {
    broodcast::allocate::AllocOptions {
        bound_steps: 0,
        rounding_budget: 100_000,
        ..Default::default()
    }
}

/// As [`run_sweep`] with [`lp_only`] allocation options.
fn run_sweep_lp(sc: &Scenario, supply: &str, without: &[&str]) -> Sweep {
    let opts = PlanOptions {
        alloc: lp_only(),
        ..PlanOptions::default()
    };
    sweep::sweep(sc, &spec(supply, without), &opts, &|| {}).unwrap()
}

/// The LP optimum is a concave, non-decreasing function of the supply right-hand sides (LP
/// duality: the optimal value of a maximisation is concave in its RHS, and the supply rows
/// are ≤ rows, so more supply never hurts). Along m ↦ m·supply that holds exactly; whole-vial
/// rounding of each facility-day moves every RHS by at most 0.5 vial, which moves the value by
/// at most 0.5 × (supply rows) × (largest per-vial dual), the stated tolerance. Non-decreasing
/// holds exactly (half-even rounding is monotone), up to the solver's 1e-6 relative accuracy.
fn assert_concave_non_decreasing(s: &Sweep, rows: usize) {
    let pts: Vec<(f64, f64)> = s
        .variants
        .iter()
        .map(|v| (v.multiplier.value(), v.lp_bound))
        .collect();
    let dual_max = s
        .variants
        .iter()
        .flat_map(|v| v.marginal_by_facility.iter().map(|(_, m)| *m))
        .fold(0.0f64, f64::max);
    let rounding = 0.5 * rows as f64 * dual_max;
    for w in pts.windows(2) {
        let tol = 1e-6 * w[1].1.abs().max(1.0);
        assert!(
            w[1].1 >= w[0].1 - tol,
            "LP bound falls from {:?} to {:?}: {pts:?}",
            w[0],
            w[1]
        );
    }
    for w in pts.windows(3) {
        let ((x0, y0), (x1, y1), (x2, y2)) = (w[0], w[1], w[2]);
        let chord = ((x2 - x1) * y0 + (x1 - x0) * y2) / (x2 - x0);
        let tol = rounding + 1e-6 * chord.abs().max(1.0);
        assert!(
            y1 >= chord - tol,
            "LP bound not concave at {x1}: {y1} below the chord {chord} (tolerance {tol}): \
             {pts:?}"
        );
    }
}

#[test]
fn demo_lp_bound_is_concave_and_non_decreasing_in_supply_and_outages_never_raise_it() {
    let demo = scenario::load_embedded_demo().unwrap();
    let rows = demo.supply.len();
    let s = run_sweep(&demo, "0.25,0.5,1,1.5,2,4", &[]);
    let names: Vec<&str> = s.variants.iter().map(|v| v.name.as_str()).collect();
    assert_eq!(names, ["x0.25", "x0.5", "x1", "x1.5", "x2", "x4"]);
    assert_concave_non_decreasing(&s, rows);
    // The marginal value at 1× is positive in the demo: supply is scarce this week.
    let one = s.reference().unwrap();
    assert!(one.marginal_value_per_vial > 0.0);
    assert_eq!(one.supply_vials, demo.total_supply_vials());
    // The 1× variant is exactly plan's summary.
    let p = plan::plan(demo.clone(), &PlanOptions::default()).unwrap();
    let files = broodcast::output::render_all_with(
        &broodcast::output::PlanView::of(&p),
        &broodcast::output::RenderOptions { redact: true },
    )
    .unwrap();
    // Every file of the 1× variant's folder is exactly `plan --redact`'s.
    let swept = broodcast::output::sweep_report::render(&s).unwrap();
    for (name, bytes) in &files {
        let path = format!("variants/x1/{name}");
        let (_, got) = swept
            .iter()
            .find(|(n, _)| *n == path)
            .unwrap_or_else(|| panic!("{path} missing"));
        assert!(got == bytes, "{path} differs from plan's {name}");
    }
    // The variant's typed totals are the ones its summary.json writes.
    let summary: serde_json::Value =
        serde_json::from_slice(&files.iter().find(|(n, _)| n == "summary.json").unwrap().1)
            .unwrap();
    assert_eq!(summary["shipped_vials"], one.shipped_vials);
    assert_eq!(summary["sites_served"], one.sites_served);
    assert_eq!(summary["blocks_served"], one.blocks_served);
    assert_eq!(summary["requests_served"], one.requests_served);
    // Taking a facility out removes supply and options: the bound may not rise.
    for f in &demo.facilities {
        let w = run_sweep_lp(&demo, "1", &[f.id.as_str()]);
        let lp = w.reference().unwrap().lp_bound;
        assert!(
            lp <= one.lp_bound * (1.0 + 1e-6),
            "without {}: LP bound {lp} above {} with every facility",
            f.id,
            one.lp_bound
        );
        assert!(w.reference().unwrap().supply_vials < one.supply_vials);
    }
}

#[test]
fn generated_lp_bound_is_concave_and_non_decreasing_in_supply() {
    let sc = generated(180, 11);
    let s = run_sweep_lp(&sc, "0.25,0.5,1,2,4", &[]);
    assert_concave_non_decreasing(&s, sc.supply.len());
}

/// The LP over every facility's arcs: removing a facility removes columns and supply and adds
/// nothing, so the optimum cannot rise.
#[test]
fn removing_a_facility_never_raises_the_full_model_lp_bound() {
    use broodcast::allocate::allocate;
    use broodcast::arcs::{ArcOptions, build_arcs_with};
    use broodcast::travel::TravelModel;
    let sc = generated(180, 11);
    let lp = |s: &Scenario| {
        let arcs = build_arcs_with(
            s,
            &TravelModel::new(s),
            &ArcOptions {
                max_facilities_per_site: usize::MAX,
                ..ArcOptions::default()
            },
        );
        let pr = plan::priorities(s, &Default::default());
        allocate(s, &pr, &arcs, &lp_only()).unwrap().lp_bound
    };
    for m in ["0.5", "1"] {
        let scaled = sweep::scale_supply(&sc, &Multiplier::parse(m).unwrap()).unwrap();
        let full = lp(&scaled);
        for f in &sc.facilities {
            let w = sweep::without_facilities(&scaled, &[f.id.to_string()]).unwrap();
            let without = lp(&w);
            assert!(
                without <= full * (1.0 + 1e-6),
                "x{m} without {}: {without} > {full}",
                f.id
            );
        }
    }
}

/// The same through `sweep`, with the default arc pool. Once a defect: when a site got arcs
/// from its two nearest facilities only, removing a facility handed its sites arcs from their
/// third-nearest, which the full plan never offered, and the bound rose (generated(180, 11)
/// at 0.5× without F1: 52,228.8 against 42,465.4). The default pool now holds every
/// facility's arcs, so an outage cannot add options.
#[test]
fn removing_a_facility_never_raises_the_sweep_lp_bound_on_a_generated_scenario() {
    let sc = generated(180, 11);
    let s = run_sweep_lp(&sc, "0.5,1", &[]);
    let first = sc.facilities[0].id.to_string();
    let w = run_sweep_lp(&sc, "0.5,1", &[first.as_str()]);
    for (v, full) in w.variants.iter().zip(&s.variants) {
        assert!(
            v.lp_bound <= full.lp_bound * (1.0 + 1e-6),
            "{}: without {first}: {} > {}",
            v.name,
            v.lp_bound,
            full.lp_bound
        );
    }
}

#[test]
fn sweep_outputs_are_identical_on_one_and_two_threads() {
    let sc = generated(120, 5);
    let render = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        let s = pool.install(|| run_sweep(&sc, "0.5,1,2", &[]));
        broodcast::output::sweep_report::render(&s).unwrap()
    };
    let one = render(1);
    let two = render(2);
    let gpx = one.iter().filter(|(n, _)| n.ends_with(".gpx")).count();
    assert!(gpx > 0, "each variant has its routes' GPX files");
    assert_eq!(
        one.len(),
        2 + 4 + 3 * broodcast::output::FILE_NAMES.len() + gpx,
        "csv, html, 4 charts, 3 full plan folders with their GPX files"
    );
    for ((n1, b1), (n2, b2)) in one.iter().zip(&two) {
        assert_eq!(n1, n2);
        assert!(b1 == b2, "{n1} differs between 1 and 2 threads");
    }
}

fn read(p: &Path) -> String {
    std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

/// Served sites (vials > 0) and vials per (facility, date), counted straight from a manifest.
fn recount(manifest: &Path) -> (Vec<String>, Vec<(String, String, u64)>) {
    let mut r = csv::Reader::from_path(manifest).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (site, fac, date, vials) = (
        col("site_id"),
        col("facility_id"),
        col("dispatch_date"),
        col("vials"),
    );
    let mut sites = std::collections::BTreeMap::<String, u64>::new();
    let mut days = std::collections::BTreeMap::<(String, String), u64>::new();
    for rec in r.records() {
        let rec = rec.unwrap();
        let v: u64 = rec[vials].parse().unwrap();
        *sites.entry(rec[site].to_string()).or_default() += v;
        *days
            .entry((rec[fac].to_string(), rec[date].to_string()))
            .or_default() += v;
    }
    (
        sites
            .into_iter()
            .filter(|(_, v)| *v > 0)
            .map(|(k, _)| k)
            .collect(),
        days.into_iter().map(|((f, d), v)| (f, d, v)).collect(),
    )
}

#[test]
fn sweep_binary_reproduces_plan_and_keeps_addresses_out() {
    let tmp = tempfile::tempdir().unwrap();
    let (plan_out, sweep_out) = (tmp.path().join("plan"), tmp.path().join("sweep"));
    run_ok(&["plan", "--out", plan_out.to_str().unwrap()]);
    let text = run_ok(&[
        "sweep",
        "--supply",
        "0.5,1",
        "--out",
        sweep_out.to_str().unwrap(),
    ]);
    assert!(text.contains("x0.5") && text.contains("x1"), "{text}");
    let a = std::fs::read(plan_out.join("summary.json")).unwrap();
    let b = std::fs::read(sweep_out.join("variants/x1/summary.json")).unwrap();
    assert!(a == b, "sweep's 1× summary.json differs from plan's");
    let csv = read(&sweep_out.join("sweep.csv"));
    let header = csv.lines().next().unwrap();
    assert!(header.starts_with(
        "variant,supply_multiplier,lp_bound,objective,gap,shipped_vials,supply_vials,\
         sites_served,requests_served,wasps_expected_alive,marginal_value_per_vial"
    ));
    assert_eq!(csv.lines().count(), 3);
    let summary: serde_json::Value = serde_json::from_slice(&a).unwrap();
    let one = csv.lines().find(|l| l.starts_with("x1,")).unwrap();
    let fields: Vec<&str> = one.split(',').collect();
    assert_eq!(fields[5], summary["shipped_vials"].to_string());
    assert_eq!(fields[7], summary["sites_served"].to_string());
    // No address (nor any other request text) in any sweep output.
    let mut r = csv::Reader::from_reader(broodcast::demo::file("requests.csv").unwrap());
    let h = r.headers().unwrap().clone();
    let addr = h.iter().position(|x| x == "address").unwrap();
    let addresses: Vec<String> = r.records().map(|x| x.unwrap()[addr].to_string()).collect();
    assert!(!addresses.is_empty());
    for f in [
        "sweep.csv",
        "sweep.html",
        "sweep-shipped.svg",
        "sweep-value.svg",
        "sweep-marginal.svg",
        "sweep-served.svg",
        "variants/x0.5/summary.json",
        "variants/x0.5/route-sheets.html",
        "variants/x0.5/labels.html",
        "variants/x0.5/manifest.csv",
        "variants/x1/report.html",
    ] {
        let t = read(&sweep_out.join(f));
        for a in &addresses {
            assert!(!t.contains(a.as_str()), "{f} contains the address '{a}'");
        }
    }
    let html = read(&sweep_out.join("sweep.html"));
    assert_eq!(html.matches("<svg").count(), 4);
}

fn assert_input_error_writes_nothing(args: &[&str], out: &Path, needle: &str) {
    let o = run(args);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
    assert!(err.contains(needle), "{args:?}: '{needle}' not in: {err}");
    assert!(!out.exists(), "{args:?} wrote {}", out.display());
}

#[test]
fn bad_sweep_arguments_exit_2_and_write_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    let o = out.to_str().unwrap();
    assert_input_error_writes_nothing(
        &["sweep", "--set", "policy.dooryard_shar=0.3", "--out", o],
        &out,
        "'policy.dooryard_shar' is not a scenario.json key that can be set; use one of: \
         policy.dooryard_share_min",
    );
    assert_input_error_writes_nothing(
        &[
            "sweep",
            "--set",
            "policy.dooryard_share_min=1.5",
            "--out",
            o,
        ],
        &out,
        "scenario.json: key 'policy.dooryard_share_min': value '1.5': a share must be between 0 and 1",
    );
    assert_input_error_writes_nothing(
        &["sweep", "--without", "F9", "--out", o],
        &out,
        "--without F9: no facility has that id",
    );
    assert_input_error_writes_nothing(
        &["sweep", "--supply", "0.5,two", "--out", o],
        &out,
        "--supply value 'two'",
    );
    assert_input_error_writes_nothing(
        &["sweep", "--saturation", "1.5", "--out", o],
        &out,
        "--saturation 1.5",
    );
}

#[test]
fn sweep_of_a_folder_applies_settings_and_outages() {
    let tmp = tempfile::tempdir().unwrap();
    let scen = tmp.path().join("scen");
    let out = tmp.path().join("out");
    run_ok(&["demo", "--out", scen.to_str().unwrap()]);
    let text = run_ok(&[
        "sweep",
        scen.to_str().unwrap(),
        "--supply",
        "1",
        "--without",
        "F3",
        "--set",
        "policy.dooryard_share_min=0.5",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(
        text.contains("without F3") && text.contains("policy.dooryard_share_min=0.5"),
        "{text}"
    );
    let s: serde_json::Value =
        serde_json::from_str(&read(&out.join("variants/x1/summary.json"))).unwrap();
    let mv = s["marginal_value_per_vial"].as_object().unwrap();
    // F3 is down: it stays listed, but packs nothing, so an extra vial there is worth 0.
    assert_eq!(mv["F3"].as_f64(), Some(0.0), "{mv:?}");
    let html = read(&out.join("sweep.html"));
    assert!(html.contains("<code>F3</code>") && html.contains("policy.dooryard_share_min=0.5"));
}

#[test]
fn compare_sees_no_change_twice_and_the_lost_sites_of_half_supply() {
    let tmp = tempfile::tempdir().unwrap();
    let p = |n: &str| tmp.path().join(n);
    run_ok(&["plan", "--out", p("a").to_str().unwrap()]);
    run_ok(&["plan", "--out", p("b").to_str().unwrap()]);
    let same = run_ok(&[
        "compare",
        p("a").to_str().unwrap(),
        p("b").to_str().unwrap(),
    ]);
    assert!(same.contains("no change"), "{same}");
    // Half supply: the demo as files, every supply.csv row's vials halved (rounded down).
    run_ok(&["demo", "--out", p("half-scen").to_str().unwrap()]);
    let supply = read(&p("half-scen").join("supply.csv"));
    let mut lines = supply.lines();
    let header = lines.next().unwrap();
    let vcol = header.split(',').position(|h| h == "vials").unwrap();
    let mut halved = format!("{header}\n");
    for l in lines.filter(|l| !l.trim().is_empty()) {
        let mut f: Vec<String> = l.split(',').map(str::to_string).collect();
        f[vcol] = (f[vcol].trim().parse::<u64>().unwrap() / 2).to_string();
        halved.push_str(&f.join(","));
        halved.push('\n');
    }
    std::fs::write(p("half-scen").join("supply.csv"), halved).unwrap();
    run_ok(&[
        "plan",
        p("half-scen").to_str().unwrap(),
        "--out",
        p("half").to_str().unwrap(),
    ]);
    let json = run_ok(&[
        "compare",
        p("a").to_str().unwrap(),
        p("half").to_str().unwrap(),
        "--json",
    ]);
    let c: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(c["no_change"], false);
    let (sites_a, days_a) = recount(&p("a").join("manifest.csv"));
    let (sites_b, days_b) = recount(&p("half").join("manifest.csv"));
    let lost: Vec<String> = sites_a
        .iter()
        .filter(|s| !sites_b.contains(s))
        .cloned()
        .collect();
    let gained: Vec<String> = sites_b
        .iter()
        .filter(|s| !sites_a.contains(s))
        .cloned()
        .collect();
    let ids = |k: &str| -> Vec<String> {
        c[k].as_array()
            .unwrap()
            .iter()
            .map(|x| x["site_id"].as_str().unwrap().to_string())
            .collect()
    };
    assert!(!lost.is_empty(), "half the supply must lose sites");
    assert_eq!(ids("sites_lost"), lost);
    assert_eq!(ids("sites_gained"), gained);
    for d in c["vials_by_facility_day"].as_array().unwrap() {
        let key = (
            d["facility_id"].as_str().unwrap(),
            d["dispatch_date"].as_str().unwrap(),
        );
        let find = |v: &[(String, String, u64)]| {
            v.iter()
                .find(|(f, dd, _)| (f.as_str(), dd.as_str()) == key)
                .map_or(0, |x| x.2)
        };
        assert_eq!(d["vials_a"].as_u64().unwrap(), find(&days_a), "{key:?}");
        assert_eq!(d["vials_b"].as_u64().unwrap(), find(&days_b), "{key:?}");
    }
    let text = run_ok(&[
        "compare",
        p("a").to_str().unwrap(),
        p("half").to_str().unwrap(),
    ]);
    assert!(text.contains(&format!(
        "sites lost (served in A, not in B): {}",
        lost.len()
    )));
    assert!(text.contains(lost[0].as_str()));
    // A folder that is not a plan: exit 2, naming the file and the fix.
    let o = run(&[
        "compare",
        p("a").to_str().unwrap(),
        p("half-scen").to_str().unwrap(),
    ]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(
            "summary.json: file is missing; give a folder written by `broodcast plan --out DIR`"
        ),
        "{err}"
    );
    let mut bad = read(&p("b").join("manifest.csv"));
    bad.push_str("S-X,F1,2027-13-01,route,R,1,B1,block,0,0,1,1,1,x,y\n");
    std::fs::write(p("b").join("manifest.csv"), bad).unwrap();
    let o = run(&[
        "compare",
        p("a").to_str().unwrap(),
        p("b").to_str().unwrap(),
    ]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("manifest.csv:") && err.contains("field 'dispatch_date': value '2027-13-01'"),
        "{err}"
    );
}

fn have(cmd: &str) -> bool {
    Command::new("sh")
        .arg("-c")
        .arg(format!("command -v {cmd}"))
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

fn chromium(args: &[String]) {
    let profile = tempfile::tempdir().unwrap();
    let out = Command::new("timeout")
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
        .args(args)
        .output()
        .expect("chromium runs");
    assert!(
        out.status.success(),
        "chromium failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Share of non-white pixels of a binary PPM (P6) image.
fn ink_share(ppm: &[u8]) -> f64 {
    let mut fields = Vec::new();
    let mut i = 0;
    while fields.len() < 4 {
        while ppm[i].is_ascii_whitespace() {
            i += 1;
        }
        let start = i;
        while !ppm[i].is_ascii_whitespace() {
            i += 1;
        }
        fields.push(String::from_utf8_lossy(&ppm[start..i]).to_string());
    }
    assert_eq!(fields[0], "P6");
    let pixels = &ppm[i + 1..];
    let inked = pixels
        .chunks(3)
        .filter(|p| p.iter().any(|&c| c < 200))
        .count();
    inked as f64 / (pixels.len() / 3).max(1) as f64
}

/// The report prints with Chromium: the charts' labels come out as text (vector, with units)
/// and the first page carries ink, i.e. the SVG rendered.
#[test]
fn sweep_report_prints_with_its_charts_in_chromium() {
    if !have("chromium") || !have("pdftotext") || !have("pdftoppm") {
        util::skip(
            "sweep_report_prints_with_its_charts_in_chromium",
            "chromium, pdftotext or pdftoppm not on PATH (apt-get install chromium poppler-utils)",
        );
        return;
    }
    let sc = generated(120, 5);
    let s = run_sweep(&sc, "0.5,2", &[]);
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    broodcast::output::write_dir_atomically(
        &out,
        &broodcast::output::sweep_report::render(&s).unwrap(),
    )
    .unwrap();
    let pdf = dir.path().join("sweep.pdf");
    chromium(&[
        format!("--print-to-pdf={}", pdf.display()),
        "--no-pdf-header-footer".into(),
        format!("file://{}", out.join("sweep.html").display()),
    ]);
    let text = Command::new("pdftotext")
        .arg(&pdf)
        .arg("-")
        .output()
        .expect("pdftotext runs");
    let text = String::from_utf8_lossy(&text.stdout);
    for label in [
        "Value vs supply",
        "supply multiplier",
        "priority-weighted live wasps",
        "weighted live wasps per vial",
        "sites served (count)",
        "Saturation",
    ] {
        assert!(
            text.contains(label),
            "'{label}' missing from the printed report"
        );
    }
    // A standalone chart renders on its own: its labels print as text and its lines and
    // points put ink on the page (a blank or unparsable SVG prints neither).
    let chart_pdf = dir.path().join("chart.pdf");
    chromium(&[
        format!("--print-to-pdf={}", chart_pdf.display()),
        "--no-pdf-header-footer".into(),
        format!("file://{}", out.join("sweep-marginal.svg").display()),
    ]);
    let text = Command::new("pdftotext")
        .arg(&chart_pdf)
        .arg("-")
        .output()
        .expect("pdftotext runs");
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains("Marginal value of one more vial vs supply")
            && text.contains("supply multiplier"),
        "{text}"
    );
    let img = dir.path().join("chart");
    let st = Command::new("pdftoppm")
        .args(["-r", "40", "-f", "1", "-l", "1"])
        .arg(&chart_pdf)
        .arg(&img)
        .status()
        .expect("pdftoppm runs");
    assert!(st.success());
    let ppm = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|e| e == "ppm"))
        .expect("a page image");
    let ink = ink_share(&std::fs::read(ppm).unwrap());
    assert!(ink > 0.005, "the chart page is blank: {ink}");
}

/// The keys `--set` takes are the loader's own list, and that list is what the loader reads:
/// every listed key set to a JSON object (the wrong type for every scenario.json value) makes
/// the loader report that key, and every key of the demo's scenario.json is listed.
#[test]
fn settable_keys_are_the_keys_the_loader_reads() {
    let files: Vec<(String, Vec<u8>)> = broodcast::demo::FILES
        .iter()
        .map(|(n, b)| (n.to_string(), b.to_vec()))
        .collect();
    for key in scenario::SCENARIO_KEYS {
        let mut settings = vec![sweep::Setting {
            key: key.to_string(),
            value: serde_json::json!({"wrong": 1}),
            arg: format!("{key}={{...}}"),
        }];
        if key == "agent.survival.points" {
            // Read only for a table model.
            settings.insert(
                0,
                sweep::Setting::parse("agent.survival.model=table").unwrap(),
            );
        }
        let err = match sweep::load_with_settings(&files, &settings) {
            Ok(_) => panic!("{key}: loaded without a problem, so the loader does not read it"),
            Err(e) => e.to_string(),
        };
        let leaf = key.rsplit('.').next().unwrap();
        assert!(
            err.contains(leaf),
            "{key}: the loader's message names it: {err}"
        );
    }
    let settable = sweep::settable_keys();
    assert_eq!(settable.len(), scenario::SCENARIO_KEYS.len() - 2);
    assert!(settable.contains(&"policy.rerelease_interval_days"));
    for key in &settable {
        assert!(sweep::Setting::parse(&format!("{key}=1")).is_ok(), "{key}");
    }
    // Every leaf of the demo's scenario.json is a listed key.
    let json: serde_json::Value =
        serde_json::from_slice(broodcast::demo::file("scenario.json").unwrap()).unwrap();
    fn leaves(v: &serde_json::Value, path: String, out: &mut Vec<String>) {
        match v {
            serde_json::Value::Object(m) => {
                for (k, x) in m {
                    let p = if path.is_empty() {
                        k.clone()
                    } else {
                        format!("{path}.{k}")
                    };
                    leaves(x, p, out);
                }
            }
            _ => out.push(path),
        }
    }
    let mut found = Vec::new();
    leaves(&json, String::new(), &mut found);
    assert!(found.len() > 20, "{found:?}");
    for k in found {
        assert!(
            scenario::SCENARIO_KEYS.contains(&k.as_str()),
            "scenario.json key {k} is not in SCENARIO_KEYS"
        );
    }
}

/// `v × m` rounded half to even, in floats: exact for the multipliers used below (powers of
/// two) and the fixture's vial counts. The rule `sweep` documents for scaled supply.
fn half_even(v: u32, m: f64) -> u64 {
    let x = f64::from(v) * m;
    let f = x.floor();
    let up = match (x - f).partial_cmp(&0.5) {
        Some(std::cmp::Ordering::Greater) => true,
        Some(std::cmp::Ordering::Equal) => f % 2.0 == 1.0,
        _ => false,
    };
    (if up { f + 1.0 } else { f }) as u64
}

#[test]
fn sweep_csv_reads_back_as_typed_rows_that_agree_with_the_variant_folders() {
    use broodcast::csvread;
    use broodcast::output::ManifestRecord;
    use broodcast::output::sweep_report::SweepRecord;

    let fixture = util::copy_minimal();
    let out = fixture.path().join("out");
    let multipliers = ["0.25", "0.5", "1", "2", "4"];
    run_ok(&[
        "sweep",
        fixture.path().to_str().unwrap(),
        "--supply",
        &multipliers.join(","),
        "--out",
        out.to_str().unwrap(),
    ]);
    let got = csvread::read::<SweepRecord>("sweep.csv", read(&out.join("sweep.csv")).as_bytes());
    assert!(got.problems.is_empty(), "{:?}", got.problems);
    let rows: Vec<SweepRecord> = got.rows.into_iter().map(|(_, r)| r).collect();
    let names: Vec<&str> = rows.iter().map(|r| r.variant.as_str()).collect();
    assert_eq!(
        names,
        multipliers.map(|m| format!("x{m}")),
        "one row per variant, in order"
    );

    let sc = scenario::load_dir(&util::minimal_dir()).unwrap();
    for r in &rows {
        let m = r.supply_multiplier.value();
        let supply: u64 = sc.supply.iter().map(|s| half_even(s.vials, m)).sum();
        assert_eq!(r.supply_vials, supply, "{}: supply × {m}", r.variant);
        assert!(
            r.shipped_vials <= r.supply_vials,
            "{}: shipped > supply",
            r.variant
        );
        assert!(r.hand_unshipped_vials <= r.supply_vials, "{}", r.variant);
        assert_eq!(
            r.blocks_served + r.requests_served,
            r.sites_served,
            "{}",
            r.variant
        );
        // Written with 3 decimals: allow their rounding.
        assert!(
            r.objective <= r.bound + 1e-3 && r.bound <= r.lp_bound + 1e-3,
            "{r:?}"
        );
        assert!(
            (r.gap - (1.0 - r.objective / r.bound)).abs() < 1e-5,
            "{r:?}"
        );
        // The row is the variant's plan: its folder's summary and manifest say the same.
        let dir = out.join("variants").join(&r.variant);
        let summary: serde_json::Value =
            serde_json::from_str(&read(&dir.join("summary.json"))).unwrap();
        assert_eq!(summary["shipped_vials"], r.shipped_vials, "{}", r.variant);
        assert_eq!(summary["supply_vials"], r.supply_vials, "{}", r.variant);
        let manifest = csvread::read::<ManifestRecord>(
            "manifest.csv",
            read(&dir.join("manifest.csv")).as_bytes(),
        );
        assert!(manifest.problems.is_empty(), "{:?}", manifest.problems);
        let shipped: u64 = manifest.rows.iter().map(|(_, s)| u64::from(s.vials)).sum();
        assert_eq!(shipped, r.shipped_vials, "{}: manifest vials", r.variant);
        let sites: std::collections::BTreeSet<&str> = manifest
            .rows
            .iter()
            .map(|(_, s)| s.site_id.as_str())
            .collect();
        assert_eq!(
            sites.len() as u64,
            r.sites_served,
            "{}: manifest sites",
            r.variant
        );
        let alive: f64 = manifest
            .rows
            .iter()
            .map(|(_, s)| s.wasps_expected_alive)
            .sum();
        let slack = 0.05 * (manifest.rows.len() as f64 + 1.0);
        assert!(
            (alive - r.wasps_expected_alive).abs() <= slack,
            "{}",
            r.variant
        );
    }
    for w in rows.windows(2) {
        assert!(
            w[0].supply_vials < w[1].supply_vials,
            "supply rises with the multiplier"
        );
        // More supply never lowers the LP optimum (its supply rows are ≤ rows).
        assert!(
            w[0].lp_bound <= w[1].lp_bound + 1e-3,
            "{} > {}",
            w[0].variant,
            w[1].variant
        );
    }
    // The fixture's week runs short of supply at a quarter and has more than it can use at 4×.
    assert_eq!(rows[0].shipped_vials, rows[0].supply_vials);
    assert!(rows[4].shipped_vials < rows[4].supply_vials);
}
