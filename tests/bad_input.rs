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
