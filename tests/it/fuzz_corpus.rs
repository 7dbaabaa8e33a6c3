//! Replays the committed fuzz corpus (`fuzz/corpus/<target>/`) on stable through the same
//! entry points and oracle as the fuzz targets (`fuzz/src/oracle.rs`, included below): no
//! panic, and either a scenario or an `InputError` whose problems name the file. A sample of
//! the rejected inputs also goes through the binary: exit 2 and the file named on stderr.
//! Any input the fuzzer finds that breaks the oracle is fixed in the loader and pinned as a
//! regression case at the end of this file.

#[path = "../../fuzz/src/oracle.rs"]
#[allow(dead_code)]
mod oracle;

use std::fs;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::process::Command;

fn corpus_dir(target: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fuzz/corpus")
        .join(target)
}

/// Every corpus file of `target`, sorted by name.
fn corpus(target: &str) -> Vec<(PathBuf, Vec<u8>)> {
    let mut files: Vec<(PathBuf, Vec<u8>)> = fs::read_dir(corpus_dir(target))
        .unwrap_or_else(|e| panic!("fuzz/corpus/{target}: {e}"))
        .map(|e| {
            let path = e.expect("dir entry").path();
            let bytes = fs::read(&path).expect("read corpus file");
            (path, bytes)
        })
        .collect();
    files.sort();
    files
}

/// Runs the oracle on one input, turning a panic into a failure that names the input.
fn replay(target: &str, path: &Path, data: &[u8]) -> Result<(), String> {
    match catch_unwind(AssertUnwindSafe(|| oracle::check(target, data))) {
        Ok(r) => r.map_err(|why| format!("{}: {why}", path.display())),
        Err(_) => Err(format!("{}: the loader panicked", path.display())),
    }
}

#[test]
fn every_committed_corpus_file_loads_or_is_rejected_with_the_file_named() {
    let mut total = 0;
    let mut failures = Vec::new();
    for (target, _) in oracle::TARGETS {
        let files = corpus(target);
        assert!(
            files.len() >= 10,
            "{target}: only {} corpus files; run fuzz/run.sh",
            files.len()
        );
        for (path, data) in &files {
            if let Err(e) = replay(target, path, data) {
                failures.push(e);
            }
        }
        total += files.len();
    }
    eprintln!("replayed {total} corpus files");
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn the_corpus_stays_small() {
    for (target, _) in oracle::TARGETS {
        let files = corpus(target);
        let bytes: usize = files.iter().map(|(_, b)| b.len()).sum();
        // Minimised corpora (libFuzzer set cover) of the JSON loaders reach ~1,000 files and
        // ~1.1 MB after 15 fuzzing minutes; the replay stays about a second.
        assert!(files.len() <= 1_500, "{target}: {} files", files.len());
        assert!(bytes <= 2 << 20, "{target}: {bytes} bytes");
    }
}

/// Every `step`-th rejected input of every target, as a scenario folder on disk, through
/// `broodcast check`: exit 2 and a stderr line naming the file. Few enough to run in seconds.
#[test]
fn a_sample_of_rejected_inputs_exits_2_through_the_binary() {
    const PER_TARGET: usize = 4;
    let bin = env!("CARGO_BIN_EXE_broodcast");
    let mut checked = 0;
    for (target, file) in oracle::TARGETS {
        let rejected: Vec<(PathBuf, Vec<u8>)> = corpus(target)
            .into_iter()
            .filter(|(_, data)| {
                broodcast::scenario::load_files(&oracle::files_with(file, data)).is_err()
            })
            .collect();
        let step = (rejected.len() / PER_TARGET).max(1);
        for (path, data) in rejected.iter().step_by(step).take(PER_TARGET) {
            let dir = tempfile::tempdir().expect("temp dir");
            for (name, bytes) in oracle::files_with(file, data) {
                fs::write(dir.path().join(name), bytes).expect("write scenario file");
            }
            let o = Command::new(bin)
                .arg("check")
                .arg(dir.path())
                .output()
                .expect("run broodcast");
            let stderr = String::from_utf8_lossy(&o.stderr);
            assert_eq!(
                o.status.code(),
                Some(2),
                "{}: exit {:?}\n{stderr}",
                path.display(),
                o.status.code()
            );
            assert!(
                stderr.starts_with("error: the scenario has")
                    && stderr.lines().skip(1).all(|l| l.starts_with("  ")),
                "{}: {stderr}",
                path.display()
            );
            checked += 1;
        }
    }
    eprintln!("checked {checked} rejected corpus inputs through the binary");
    assert!(checked >= 2 * oracle::TARGETS.len());
}

// Regression cases: none yet. Two fuzz rounds (fuzz/run.sh) found no panic, hang or oracle
// violation; add each future finding here as a named test with its input inline.
