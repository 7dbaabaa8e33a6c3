//! Same inputs, same bytes, whatever the thread count: `plan` on the demo with
//! `RAYON_NUM_THREADS=1` and `=2` writes identical files. Pest pressure, the arcs, the hand
//! plan, the bound's descent and the route search (depot-days, and a depot-day's two starts)
//! run in parallel; each collects in a fixed order, and this pins it (a parallel reduction
//! that sums floats in a thread-dependent order, or a depot-day's result that depends on the
//! worker that took it, would show up here first).

use std::collections::BTreeMap;
use std::fs;
use std::path::Path;
use std::process::Command;

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_broodcast")
}

/// Every file under `dir`, by path relative to it (`routes/…` for the GPX files).
fn files(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for e in fs::read_dir(&d).expect("read output") {
            let p = e.expect("entry").path();
            if p.is_dir() {
                todo.push(p);
            } else {
                let name = p.strip_prefix(dir).unwrap().to_string_lossy().into_owned();
                out.insert(name, fs::read(&p).expect("read output file"));
            }
        }
    }
    out
}

#[test]
fn plan_writes_the_same_bytes_on_one_and_two_threads() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let scen = tmp.path().join("demo");
    let o = Command::new(bin())
        .args(["demo", "--out"])
        .arg(&scen)
        .output()
        .expect("run demo");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // The route search stops at round limits only (no wall-clock limit unless the scenario
    // sets one), so the number of threads is the only thing that differs between the runs.
    let text = fs::read_to_string(scen.join("scenario.json")).expect("scenario.json");
    assert!(!text.contains("time_limit_seconds"), "{text}");

    let mut runs = Vec::new();
    for threads in ["1", "2"] {
        let out = tmp.path().join(format!("out-{threads}"));
        let o = Command::new(bin())
            .arg("plan")
            .arg(&scen)
            .arg("--out")
            .arg(&out)
            .env("RAYON_NUM_THREADS", threads)
            .output()
            .expect("run plan");
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        runs.push((files(&out), o.stdout));
    }
    let (one, two) = (&runs[0], &runs[1]);
    assert_eq!(
        one.0.keys().collect::<Vec<_>>(),
        two.0.keys().collect::<Vec<_>>()
    );
    // The contract's files, a GPX file per route and the marker that lets the next run
    // replace the folder.
    let gpx = one.0.keys().filter(|n| n.starts_with("routes/")).count();
    assert!(gpx > 0);
    assert_eq!(one.0.len(), broodcast::output::FILE_NAMES.len() + gpx + 1);
    assert!(one.0.contains_key(broodcast::output::target::MARKER));
    for (name, bytes) in &one.0 {
        assert!(!bytes.is_empty(), "{name} is empty");
        assert!(
            bytes == &two.0[name],
            "{name} differs between 1 and 2 threads"
        );
    }
    // stdout names the output folder, which differs; everything else must match.
    let strip = |s: &[u8]| {
        String::from_utf8_lossy(s)
            .lines()
            .filter(|l| !l.starts_with("wrote "))
            .collect::<Vec<_>>()
            .join("\n")
    };
    assert_eq!(strip(&one.1), strip(&two.1));
}
