//! The fuzzing oracle, shared by the fuzz targets (`fuzz/fuzz_targets/*.rs`) and the stable
//! replay test (`tests/fuzz_corpus.rs` includes this file with `#[path]`).
//!
//! Each target replaces one file of the minimal scenario (`tests/data/minimal`) with the
//! fuzzer's bytes and loads the folder through `broodcast::scenario::load_files`; the matrix
//! target also calls `parse_travel_matrix` directly. The rest of the folder is the minimal
//! scenario rather than the demo because it has every file the loader reads (overrides and a
//! travel matrix included, which the demo lacks) and loads in microseconds instead of
//! milliseconds, so the fuzzer runs two orders of magnitude more inputs per second.
//!
//! The oracle: loading never panics (a panic aborts the fuzzer) and returns either a scenario
//! or an `InputError` with at least one problem, where every problem names a file and at least
//! one names the fuzzed file or a file whose rows refer to it (supply and fleet rows name
//! facilities; overrides name blocks and requests; supply dates depend on the week in
//! scenario.json).

use broodcast::scenario::{InputError, load_files, parse_travel_matrix};

/// The fixed scenario folder the fuzzed file is swapped into.
pub const BASE: &[(&str, &[u8])] = &[
    (
        "scenario.json",
        include_bytes!("../../tests/data/minimal/scenario.json"),
    ),
    (
        "facilities.csv",
        include_bytes!("../../tests/data/minimal/facilities.csv"),
    ),
    (
        "supply.csv",
        include_bytes!("../../tests/data/minimal/supply.csv"),
    ),
    (
        "blocks.geojson",
        include_bytes!("../../tests/data/minimal/blocks.geojson"),
    ),
    (
        "requests.csv",
        include_bytes!("../../tests/data/minimal/requests.csv"),
    ),
    (
        "scouting.csv",
        include_bytes!("../../tests/data/minimal/scouting.csv"),
    ),
    (
        "fleet.csv",
        include_bytes!("../../tests/data/minimal/fleet.csv"),
    ),
    (
        "overrides.csv",
        include_bytes!("../../tests/data/minimal/overrides.csv"),
    ),
    (
        "travel.csv",
        include_bytes!("../../tests/data/minimal/travel.csv"),
    ),
];

/// Fuzz target name → the scenario file it replaces. The corpus of target `t` is
/// `fuzz/corpus/t/`.
pub const TARGETS: &[(&str, &str)] = &[
    ("scenario_json", "scenario.json"),
    ("facilities_csv", "facilities.csv"),
    ("supply_csv", "supply.csv"),
    ("blocks_geojson", "blocks.geojson"),
    ("requests_csv", "requests.csv"),
    ("scouting_csv", "scouting.csv"),
    ("fleet_csv", "fleet.csv"),
    ("overrides_csv", "overrides.csv"),
    ("travel_matrix", "travel.csv"),
];

/// The scenario file that target `target` replaces.
pub fn file_of(target: &str) -> Option<&'static str> {
    TARGETS.iter().find(|(t, _)| *t == target).map(|(_, f)| *f)
}

/// Files whose problems may be the only ones a change to `file` causes: rows there refer to
/// `file`. For scenario.json, also any file it names as the travel matrix.
fn dependents(file: &str) -> &'static [&'static str] {
    match file {
        "scenario.json" => &["supply.csv"],
        "facilities.csv" => &["supply.csv", "fleet.csv"],
        "blocks.geojson" => &["requests.csv", "overrides.csv"],
        "requests.csv" => &["overrides.csv"],
        _ => &[],
    }
}

/// The folder with `file` replaced by `data`.
pub fn files_with<'a>(file: &str, data: &'a [u8]) -> Vec<(&'a str, &'a [u8])> {
    BASE.iter()
        .map(|&(n, b)| if n == file { (n, data) } else { (n, b) })
        .collect()
}

/// Checks an error against the oracle; `Err` says what is wrong with it.
pub fn check_error(file: &str, err: &InputError) -> Result<(), String> {
    if err.problems.is_empty() {
        return Err("an InputError with no problem".into());
    }
    let fixed = |f: &str| BASE.iter().any(|(n, _)| *n == f);
    for p in &err.problems {
        if p.file.is_empty() || !p.to_string().starts_with(&p.file) {
            return Err(format!("a problem that names no file: {p}"));
        }
    }
    let named = err.problems.iter().any(|p| {
        p.file == file
            || dependents(file).contains(&p.file.as_str())
            // scenario.json may name a new matrix file, which is then missing.
            || (file == "scenario.json" && !fixed(&p.file))
    });
    if !named {
        return Err(format!("no problem names {file}: {err}"));
    }
    let text = err.to_string();
    if !err.problems.iter().all(|p| text.contains(&p.to_string())) {
        return Err("the message leaves out a problem".into());
    }
    Ok(())
}

/// Runs target `target` on `data`. Panics propagate (that is the finding); `Err` is an oracle
/// violation.
pub fn check(target: &str, data: &[u8]) -> Result<(), String> {
    let file = file_of(target).ok_or_else(|| format!("unknown target {target}"))?;
    if target == "travel_matrix"
        && let Err(e) = parse_travel_matrix(file, data)
    {
        check_error(file, &e).map_err(|why| format!("parse_travel_matrix: {why}"))?;
    }
    match load_files(&files_with(file, data)) {
        Ok(_) => Ok(()),
        Err(e) => check_error(file, &e),
    }
}
