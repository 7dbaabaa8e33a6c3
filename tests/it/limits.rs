//! Inputs past the documented limits (docs/formats.md, "Limits") fail fast through the binary:
//! exit 2, the file and place named, the limit stated with the fix, nothing written.

use crate::util;

use std::fs::{self, File};
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

use broodcast::scenario::limits;

/// Runs `plan` on `dir`; returns stderr after checking exit 2 and that nothing was written.
fn rejected(dir: &Path) -> (String, Duration) {
    let out = tempfile::tempdir().unwrap();
    let start = Instant::now();
    let o = Command::new(env!("CARGO_BIN_EXE_broodcast"))
        .arg("plan")
        .arg(dir)
        .arg("--out")
        .arg(out.path().join("plan"))
        .output()
        .unwrap();
    let took = start.elapsed();
    let stderr = String::from_utf8_lossy(&o.stderr).into_owned();
    assert_eq!(o.status.code(), Some(2), "{stderr}");
    assert_eq!(fs::read_dir(out.path()).unwrap().count(), 0, "written");
    (stderr, took)
}

fn line_with<'a>(stderr: &'a str, needle: &str) -> &'a str {
    stderr
        .lines()
        .find(|l| l.contains(needle))
        .unwrap_or_else(|| panic!("no line holds {needle:?}:\n{stderr}"))
}

#[test]
fn a_file_past_256_mib_is_refused_from_its_size_before_reading() {
    let dir = util::copy_minimal();
    // A sparse file: the size is set without writing a byte, so the test is instant.
    let f = File::create(dir.path().join("scouting.csv")).unwrap();
    f.set_len(limits::MAX_FILE_BYTES + 1).unwrap();
    let (stderr, took) = rejected(dir.path());
    let l = line_with(&stderr, "scouting.csv:");
    assert!(l.contains("256.0 MiB") || l.contains("256 MiB"), "{l}");
    assert!(
        l.contains("limit of 256 MiB") && l.contains("right file"),
        "{l}"
    );
    // Reading 256 MiB of zeros and decoding them would take seconds; the metadata check not.
    assert!(took < Duration::from_secs(20), "{took:?}");
}

#[test]
fn a_csv_past_the_row_limit_is_refused_with_the_line_and_limit() {
    let dir = util::copy_minimal();
    let mut text = String::from("facility_id,date,vials\n");
    text.push_str(&"F1,2027-03-01,1\n".repeat(limits::MAX_CSV_ROWS + 1));
    fs::write(dir.path().join("supply.csv"), text).unwrap();
    let (stderr, _) = rejected(dir.path());
    let line = limits::MAX_CSV_ROWS + 2; // header is line 1
    let l = line_with(&stderr, &format!("supply.csv:{line}:"));
    assert!(l.contains("more than 1000000 data rows"), "{l}");
}

#[test]
fn too_many_features_are_refused_before_any_is_checked() {
    let dir = util::copy_minimal();
    let features = vec![r#"{"type":"Feature"}"#; limits::MAX_FEATURES + 1].join(",");
    let text = format!(r#"{{"type":"FeatureCollection","features":[{features}]}}"#);
    fs::write(dir.path().join("blocks.geojson"), text).unwrap();
    let (stderr, _) = rejected(dir.path());
    let l = line_with(&stderr, "blocks.geojson: key 'features'");
    assert!(
        l.contains("200001 features") && l.contains("limit of 200000"),
        "{l}"
    );
    assert_eq!(
        stderr.matches("blocks.geojson").count(),
        1,
        "one problem, not one per feature:\n{stderr}"
    );
}

#[test]
fn a_polygon_with_too_many_vertices_is_named_with_the_limit_and_the_fix() {
    let dir = util::copy_minimal();
    let path = dir.path().join("blocks.geojson");
    let mut gj: serde_json::Value = serde_json::from_slice(&fs::read(&path).unwrap()).unwrap();
    // A circle of radius ~200 m around the first block, just past the limit.
    let n = limits::MAX_POLYGON_VERTICES + 1;
    let mut ring: Vec<serde_json::Value> = (0..n - 1)
        .map(|k| {
            let a = std::f64::consts::TAU * k as f64 / (n - 1) as f64;
            serde_json::json!([80.03 + 0.002 * a.cos(), 26.75 + 0.002 * a.sin()])
        })
        .collect();
    ring.push(ring[0].clone());
    gj["features"][0]["geometry"] = serde_json::json!({"type": "Polygon", "coordinates": [ring]});
    let id = gj["features"][0]["properties"]["id"]
        .as_str()
        .unwrap()
        .to_string();
    fs::write(&path, gj.to_string()).unwrap();
    let (stderr, _) = rejected(dir.path());
    let l = line_with(&stderr, &format!("feature 0 (id '{id}'): field 'geometry'"));
    assert!(
        l.contains(&format!("{n} positions"))
            && l.contains(&format!("limit of {}", limits::MAX_POLYGON_VERTICES)),
        "{l}"
    );
    assert!(l.contains("simplify"), "{l}");
}

#[test]
fn a_matrix_with_too_many_ids_is_refused_at_its_header() {
    let dir = util::copy_minimal();
    let ids: Vec<String> = (0..=limits::MAX_MATRIX_IDS)
        .map(|i| format!("X{i}"))
        .collect();
    fs::write(
        dir.path().join("travel.csv"),
        format!("id,{}\n", ids.join(",")),
    )
    .unwrap();
    let (stderr, _) = rejected(dir.path());
    let l = line_with(&stderr, "travel.csv:1:");
    assert!(
        l.contains("5001 location ids") && l.contains("limit of 5000"),
        "{l}"
    );
}

#[test]
fn bytes_given_in_memory_past_the_size_limit_are_refused_too() {
    // Zeroed allocations are mapped lazily: this costs no 256 MiB of writes.
    let big = vec![0u8; usize::try_from(limits::MAX_FILE_BYTES).unwrap() + 1];
    let files = [("supply.csv", big.as_slice())];
    let err = broodcast::scenario::load_files(&files).unwrap_err();
    let p = err
        .problems
        .iter()
        .find(|p| p.file == "supply.csv")
        .expect("supply.csv named");
    assert!(p.message.contains("limit of 256 MiB"), "{p}");
}
