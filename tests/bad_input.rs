//! Every malformed input, through the binary: exit code 2, a message naming the file and the
//! line (or feature, or key), and nothing written. The defect table is shared with
//! `tests/loader.rs` (`tests/util`).

mod util;

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
