//! Times loading a scenario whose block is one polygon of n positions, for the vertex limit
//! in `broodcast::scenario::limits::MAX_POLYGON_VERTICES` (geo's OGC validity check grows with
//! the square of n). `cargo run --release --example bench_polygon -- [RUNS]` prints a markdown
//! table: fastest and median of RUNS (default 3) and the median relative to 5,000 positions,
//! measured in the same run. Larger polygons are refused before validation, so the table stops
//! at the limit.
use std::time::Instant;

use broodcast::scenario::{self, limits::MAX_POLYGON_VERTICES};

/// The minimal test scenario with block B4 replaced by a star-shaped ring of `n` positions.
fn files(n: usize) -> Vec<(String, Vec<u8>)> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/minimal");
    let mut out = Vec::new();
    for e in std::fs::read_dir(&dir).expect("tests/data/minimal") {
        let e = e.expect("entry");
        let name = e.file_name().to_string_lossy().into_owned();
        let mut bytes = std::fs::read(e.path()).expect("read");
        if name == "blocks.geojson" {
            let mut g: serde_json::Value = serde_json::from_slice(&bytes).expect("json");
            let mut ring: Vec<[f64; 2]> = (0..n - 1)
                .map(|k| {
                    let a = std::f64::consts::TAU * k as f64 / (n - 1) as f64;
                    let r = 0.002 * if k % 2 == 0 { 1.0 } else { 1.1 };
                    [80.03 + r * a.cos(), 26.75 + r * a.sin()]
                })
                .collect();
            ring.push(ring[0]);
            g["features"][3]["geometry"] =
                serde_json::json!({"type": "Polygon", "coordinates": [ring]});
            bytes = g.to_string().into_bytes();
        }
        out.push((name, bytes));
    }
    out
}

fn main() {
    let runs: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(3)
        .max(1);
    println!("| positions | fastest s | median s | median / 5,000 positions |");
    println!("|---|---|---|---|");
    let mut base = None;
    for n in [1_000, 2_500, 5_000, 7_500, MAX_POLYGON_VERTICES] {
        let f = files(n);
        let view: Vec<(&str, &[u8])> = f.iter().map(|(a, b)| (a.as_str(), b.as_slice())).collect();
        let mut times = Vec::with_capacity(runs);
        for _ in 0..runs {
            let t = Instant::now();
            scenario::load_files(&view).expect("the scenario loads");
            times.push(t.elapsed().as_secs_f64());
        }
        times.sort_by(f64::total_cmp);
        let median = times[times.len() / 2];
        if n == 5_000 {
            base = Some(median);
        }
        let rel = base.map_or("".to_string(), |b| format!("{:.2}", median / b));
        println!("| {n} | {:.3} | {median:.3} | {rel} |", times[0]);
    }
}
