//! `plan --out DIR` killed with SIGKILL while it replaces an existing plan: DIR must always be
//! either the previous plan or the complete new one, byte for byte, and nothing else named DIR
//! may appear. The only leftovers allowed are the killed run's `.DIR.tmp-<pid>` /
//! `.DIR.old-<pid>` siblings, and the next successful run must remove them.
#![cfg(unix)]

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_broodcast")
}

/// Every file under `dir`, relative path → bytes.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    fn walk(root: &Path, dir: &Path, out: &mut BTreeMap<PathBuf, Vec<u8>>) {
        for e in fs::read_dir(dir).expect("read folder") {
            let p = e.expect("entry").path();
            if p.is_dir() {
                walk(root, &p, out);
            } else {
                let rel = p.strip_prefix(root).expect("under root").to_path_buf();
                out.insert(rel, fs::read(&p).expect("read file"));
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

fn restore(dir: &Path, snap: &BTreeMap<PathBuf, Vec<u8>>) {
    if dir.exists() {
        fs::remove_dir_all(dir).expect("clear target");
    }
    for (rel, bytes) in snap {
        let p = dir.join(rel);
        fs::create_dir_all(p.parent().expect("parent")).expect("mkdir");
        fs::write(p, bytes).expect("write");
    }
}

/// A generated scenario whose routing is bounded by its round cap, not the clock, so that
/// two complete runs write the same bytes.
fn scenario(root: &Path, name: &str, sites: u32, seed: u32) -> PathBuf {
    let dir = root.join(name);
    let o = Command::new(bin())
        .args(["generate", "--sites", &sites.to_string()])
        .args(["--seed", &seed.to_string(), "--out"])
        .arg(&dir)
        .output()
        .expect("run generate");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    dir
}

fn plan(scenario: &Path, out: &Path) -> Duration {
    let start = Instant::now();
    let o = Command::new(bin())
        .arg("plan")
        .arg(scenario)
        .arg("--out")
        .arg(out)
        .output()
        .expect("run plan");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    start.elapsed()
}

/// Names in `root` other than the scenario folders and the reference plans.
fn siblings(root: &Path) -> Vec<String> {
    let mut v: Vec<String> = fs::read_dir(root)
        .expect("read root")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .filter(|n| !["new", "old", "ref"].contains(&n.as_str()))
        .collect();
    v.sort();
    v
}

/// Delays after the temp folder appears at which the write is killed, in milliseconds.
const KILL_DELAYS_MS: [u64; 5] = [0, 1, 4, 16, 64];

#[test]
fn sigkill_during_plan_never_leaves_a_partial_output_folder() {
    let root = tempfile::tempdir().expect("temp dir");
    let root = root.path();
    // The new plan replaces one of a different scenario, so old and new bytes differ.
    // Sizes are as small as keeps the point: a plan long enough to kill mid-compute, and
    // outputs large enough that a kill can land mid-write.
    let new = scenario(root, "new", 400, 7);
    let old = scenario(root, "old", 120, 8);
    let reference = root.join("ref");
    let full = plan(&new, &reference);
    let want_new = snapshot(&reference);
    let target = root.join("plan");
    plan(&old, &target);
    let want_old = snapshot(&target);
    assert_ne!(want_old, want_new);

    // Delays as fractions of an uninterrupted run, dense near the end where files are written.
    let fractions = [0.5, 0.95, 1.02];
    let (mut saw_old, mut saw_new, mut saw_leftover) = (0, 0, 0);
    // A run killed before it tidies up keeps an earlier killed run's leftovers too.
    let mut allowed: Vec<String> = Vec::new();
    for f in fractions {
        restore(&target, &want_old);
        let mut child = Command::new(bin())
            .arg("plan")
            .arg(&new)
            .arg("--out")
            .arg(&target)
            .stdout(std::process::Stdio::null())
            .spawn()
            .expect("spawn plan");
        let pid = child.id();
        std::thread::sleep(full.mul_f64(f));
        child.kill().expect("SIGKILL"); // std sends SIGKILL on Unix
        child.wait().expect("reap");
        let got = snapshot(&target);
        if got == want_old {
            saw_old += 1;
        } else if got == want_new {
            saw_new += 1;
        } else {
            panic!("killed at {f}·T: the output folder is neither the old nor the new plan");
        }
        allowed.extend([format!(".plan.old-{pid}"), format!(".plan.tmp-{pid}")]);
        for s in siblings(root) {
            assert!(
                s == "plan" || allowed.contains(&s),
                "killed at {f}·T: unexpected {s}"
            );
            if s != "plan" {
                saw_leftover += 1;
            }
        }
    }
    eprintln!(
        "{} timed kills (uninterrupted run {:.2} s): {saw_old} left the old plan, {saw_new} \
         the new one, {saw_leftover} a temp folder",
        fractions.len(),
        full.as_secs_f64()
    );

    for s in siblings(root).into_iter().filter(|s| s != "plan") {
        fs::remove_dir_all(root.join(s)).expect("remove leftover");
    }

    // Writing takes milliseconds of the run, so timed kills rarely land in it. Here the kill
    // follows the moment the temp folder appears, by 0 to 64 ms: mid-write or mid-swap.
    let (mut mid_write, mut swapped) = (0, 0);
    for extra_ms in KILL_DELAYS_MS {
        restore(&target, &want_old);
        let mut child = Command::new(bin())
            .arg("plan")
            .arg(&new)
            .arg("--out")
            .arg(&target)
            .stdout(std::process::Stdio::null())
            .spawn()
            .expect("spawn plan");
        let pid = child.id();
        let tmp = root.join(format!(".plan.tmp-{pid}"));
        let deadline = Instant::now() + full * 5;
        while !tmp.exists() && Instant::now() < deadline {
            if child.try_wait().expect("poll").is_some() {
                break;
            }
            std::thread::sleep(Duration::from_micros(200));
        }
        std::thread::sleep(Duration::from_millis(extra_ms));
        let _ = child.kill();
        child.wait().expect("reap");
        let got = snapshot(&target);
        assert!(
            got == want_old || got == want_new,
            "killed {extra_ms} ms into the write: the output folder is neither plan"
        );
        if got == want_new {
            swapped += 1;
        }
        let leftovers: Vec<String> = siblings(root).into_iter().filter(|s| s != "plan").collect();
        let allowed = [format!(".plan.old-{pid}"), format!(".plan.tmp-{pid}")];
        assert!(
            leftovers.iter().all(|s| allowed.contains(s)),
            "killed {extra_ms} ms into the write: {leftovers:?}"
        );
        if !leftovers.is_empty() {
            mid_write += 1;
        }
        // Clear this kill's leftover so the next iteration sees only its own.
        for s in leftovers {
            fs::remove_dir_all(root.join(s)).expect("remove leftover");
        }
    }
    eprintln!(
        "{} kills after the temp folder appeared: {mid_write} left a temp folder, {swapped} \
         found the new plan in place",
        KILL_DELAYS_MS.len()
    );
    assert!(
        mid_write > 0,
        "no kill landed inside the write; the test lost its point"
    );

    // A leftover of a crashed run is cleaned by the next successful one.
    let mut c = Command::new("true").spawn().expect("spawn true");
    let dead = c.id();
    c.wait().expect("reap");
    fs::create_dir(root.join(format!(".plan.tmp-{dead}"))).expect("plant leftover");
    fs::write(root.join(format!(".plan.tmp-{dead}/manifest.csv")), "part").expect("write");
    plan(&new, &target);
    assert_eq!(snapshot(&target), want_new);
    assert_eq!(siblings(root), ["plan"], "leftovers are removed");
}
