//! No command deletes or overwrites a file it did not write: every way a user can point
//! `--out` at something of theirs ends in exit 2 with the path named, and every file of theirs
//! still there, byte for byte. `--force` moves aside, never deletes.

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Output;

use crate::util;
use util::{run, run_ok};

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// Every file under `dir`, relative path → bytes.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    fn walk(root: &Path, dir: &Path, out: &mut BTreeMap<PathBuf, Vec<u8>>) {
        for e in fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(root, &p, out);
            } else {
                out.insert(
                    p.strip_prefix(root).unwrap().to_path_buf(),
                    fs::read(&p).unwrap(),
                );
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

fn refused(o: &Output, path: &Path, words: &str) {
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "stderr: {err}");
    assert!(
        err.contains(&path.display().to_string()),
        "path not named: {err}"
    );
    assert!(err.contains(words), "want {words:?} in: {err}");
}

/// A copy of the demo scenario at `dir`.
fn demo_at(dir: &Path) {
    run_ok(&["demo", "--out", s(dir)]);
}

#[test]
fn plan_into_its_own_scenario_folder_is_refused_and_deletes_nothing() {
    let t = tempfile::tempdir().unwrap();
    let week = t.path().join("week");
    demo_at(&week);
    let before = snapshot(t.path());
    for force in [false, true] {
        let mut args = vec!["plan", s(&week), "--out", s(&week)];
        if force {
            args.push("--force");
        }
        refused(&run(&args), &week, "is an input");
        assert_eq!(snapshot(t.path()), before, "force={force}");
    }
}

#[test]
fn plan_into_a_folder_holding_the_scenario_is_refused() {
    let t = tempfile::tempdir().unwrap();
    let parent = t.path().join("parent");
    let week = parent.join("week10");
    demo_at(&week);
    fs::write(parent.join("notes.txt"), "my notes").unwrap();
    let before = snapshot(t.path());
    for force in [false, true] {
        let mut args = vec!["plan", s(&week), "--out", s(&parent)];
        if force {
            args.push("--force");
        }
        refused(&run(&args), &parent, "holds an input");
        assert_eq!(snapshot(t.path()), before);
    }
}

#[test]
fn plan_into_a_folder_of_someone_elses_files_is_refused_then_force_moves_it_aside() {
    let t = tempfile::tempdir().unwrap();
    let mine = t.path().join("anything");
    fs::create_dir_all(mine.join("deep")).unwrap();
    fs::write(mine.join("budget.xlsx"), "keep").unwrap();
    fs::write(mine.join("deep/photo.jpg"), "keep too").unwrap();
    let before = snapshot(&mine);
    refused(
        &run(&["plan", "--out", s(&mine)]),
        &mine,
        "broodcast did not write",
    );
    assert_eq!(snapshot(&mine), before);
    let text = run_ok(&["plan", "--out", s(&mine), "--force"]);
    let aside = t.path().join("anything.replaced-1");
    assert!(text.contains("anything.replaced-1"), "{text}");
    assert_eq!(snapshot(&aside), before, "moved whole, nothing lost");
    assert!(mine.join("manifest.csv").exists());
}

#[test]
fn a_file_added_to_an_earlier_plan_stops_the_next_one() {
    let t = tempfile::tempdir().unwrap();
    let out = t.path().join("out");
    run_ok(&["plan", "--out", s(&out)]);
    fs::write(out.join("driver-notes.txt"), "gate code 4411").unwrap();
    refused(
        &run(&["plan", "--out", s(&out)]),
        &out,
        "'driver-notes.txt'",
    );
    assert_eq!(
        fs::read_to_string(out.join("driver-notes.txt")).unwrap(),
        "gate code 4411"
    );
    // An edited output counts as the user's too.
    fs::remove_file(out.join("driver-notes.txt")).unwrap();
    let mut sheet = fs::read(out.join("manifest.csv")).unwrap();
    sheet.extend_from_slice(b"\n");
    fs::write(out.join("manifest.csv"), &sheet).unwrap();
    refused(&run(&["plan", "--out", s(&out)]), &out, "edited since");
}

#[test]
fn ledger_report_and_sweep_keep_an_unrelated_spreadsheet() {
    let t = tempfile::tempdir().unwrap();
    let rep = t.path().join("rep");
    fs::create_dir(&rep).unwrap();
    fs::write(rep.join("season.xlsx"), "numbers").unwrap();
    let db = t.path().join("season.sqlite");
    run_ok(&["ledger", "init", s(&db)]);
    refused(
        &run(&["ledger", "report", s(&db), "--out", s(&rep)]),
        &rep,
        "'season.xlsx'",
    );
    refused(
        &run(&["sweep", "--supply", "1", "--out", s(&rep)]),
        &rep,
        "'season.xlsx'",
    );
    assert_eq!(
        fs::read_to_string(rep.join("season.xlsx")).unwrap(),
        "numbers"
    );
    // The ledger is an input of the report: never a target.
    refused(
        &run(&[
            "ledger",
            "report",
            s(&db),
            "--out",
            t.path().to_str().unwrap(),
        ]),
        t.path(),
        "holds an input",
    );
}

#[test]
fn root_current_and_home_folders_are_never_targets() {
    let t = tempfile::tempdir().unwrap();
    for out in ["/", ".", ".."] {
        let o = util::bin();
        let o = std::process::Command::new(o)
            .current_dir(t.path())
            .args(["plan", "--out", out, "--force"])
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(2), "{out}");
    }
    let o = std::process::Command::new(util::bin())
        .env("HOME", t.path())
        .args(["plan", "--out", s(t.path()), "--force"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("home folder"));
}

#[test]
fn an_out_that_is_a_file_or_unwritable_is_refused_before_planning() {
    let t = tempfile::tempdir().unwrap();
    let f = t.path().join("plan.txt");
    fs::write(&f, "mine").unwrap();
    refused(&run(&["plan", "--out", s(&f)]), &f, "is a file");
    assert_eq!(fs::read_to_string(&f).unwrap(), "mine");
    // A folder under a file.
    let under = f.join("out");
    refused(&run(&["plan", "--out", s(&under)]), &under, "is a file");
    // /proc takes no new files, even from root: the probe finds it before any work.
    let proc_out = Path::new("/proc/broodcast-out");
    if Path::new("/proc").is_dir() {
        refused(
            &run(&["plan", "--out", s(proc_out)]),
            proc_out,
            "cannot write",
        );
    }
}

#[test]
fn export_model_overwrites_only_its_own_file() {
    let t = tempfile::tempdir().unwrap();
    let mps = t.path().join("model.mps");
    run_ok(&["export-model", "--out", s(&mps)]);
    run_ok(&["export-model", "--out", s(&mps)]);
    refused(
        &run(&["export-model", "--out", s(t.path())]),
        t.path(),
        "is a folder",
    );
    fs::write(&mps, "NAME theirs\n").unwrap();
    refused(
        &run(&["export-model", "--out", s(&mps)]),
        &mps,
        "not written by broodcast",
    );
    assert_eq!(fs::read_to_string(&mps).unwrap(), "NAME theirs\n");
    run_ok(&["export-model", "--out", s(&mps), "--force"]);
    assert_eq!(
        fs::read_to_string(t.path().join("model.mps.replaced-1")).unwrap(),
        "NAME theirs\n"
    );
}

#[test]
fn forecast_never_overwrites_an_existing_supply_file() {
    let t = tempfile::tempdir().unwrap();
    let rearing = t.path().join("rearing.csv");
    let temps = t.path().join("temps.csv");
    fs::write(
        &rearing,
        "cage_id,facility_id,wasps_added_date,expected_yield_wasps\nC1,F1,2026-03-02,5000\n",
    )
    .unwrap();
    let mut tc = String::from("facility_id,date,mean_c\n");
    for d in 2..=31 {
        tc.push_str(&format!("F1,2026-03-{d:02},25\n"));
    }
    fs::write(&temps, tc).unwrap();
    let supply = t.path().join("supply.csv");
    fs::write(&supply, "facility_id,date,vials\nF1,2026-03-16,9\n").unwrap();
    let args = |extra: &[&str]| {
        let mut v = vec![
            "forecast",
            s(&rearing),
            "--temps",
            s(&temps),
            "--wasps-per-vial",
            "200",
            "--out",
            s(&supply),
        ];
        v.extend_from_slice(extra);
        v.into_iter().map(String::from).collect::<Vec<_>>()
    };
    let a = args(&[]);
    let a: Vec<&str> = a.iter().map(String::as_str).collect();
    refused(&run(&a), &supply, "not written by broodcast");
    let a = args(&["--force"]);
    let a: Vec<&str> = a.iter().map(String::as_str).collect();
    run_ok(&a);
    assert_eq!(
        fs::read_to_string(t.path().join("supply.csv.replaced-1")).unwrap(),
        "facility_id,date,vials\nF1,2026-03-16,9\n"
    );
    // An input is never the output, even with --force.
    let a = vec![
        "forecast",
        s(&rearing),
        "--temps",
        s(&temps),
        "--wasps-per-vial",
        "200",
        "--out",
        s(&temps),
        "--force",
    ];
    refused(&run(&a), &temps, "is an input");
}

#[test]
fn demo_and_generate_write_into_an_empty_folder_but_not_over_files() {
    let t = tempfile::tempdir().unwrap();
    let empty = t.path().join("empty");
    fs::create_dir(&empty).unwrap();
    run_ok(&["demo", "--out", s(&empty)]);
    assert!(empty.join("scenario.json").exists());
    let full = t.path().join("full");
    fs::create_dir(&full).unwrap();
    fs::write(full.join("x.csv"), "x").unwrap();
    refused(&run(&["demo", "--out", s(&full)]), &full, "'x.csv'");
    refused(
        &run(&["generate", "--sites", "20", "--out", s(&full)]),
        &full,
        "'x.csv'",
    );
    // The demo folder, once edited, is the user's scenario.
    fs::write(empty.join("requests.csv"), "edited").unwrap();
    refused(&run(&["demo", "--out", s(&empty)]), &empty, "edited since");
}
