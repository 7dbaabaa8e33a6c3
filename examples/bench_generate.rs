//! Times the seeded scenario generator at benchmark sizes and prints a markdown table.
//! `cargo run --release --example bench_generate -- [RUNS]` (default 3 runs per size; the
//! table gives the fastest and the median, and each size's time relative to 1,000 sites,
//! measured in the same run). This replaces a timed assertion that was in tests/it/demo_files.rs:
//! a test's verdict must not depend on the machine's speed.
use std::time::Instant;

use broodcast::generate::{GenParams, generate};

fn main() {
    let runs: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(3)
        .max(1);
    println!("| sites | files MB | fastest s | median s | median / 1,000 sites |");
    println!("|---|---|---|---|---|");
    let mut base = None;
    for sites in [1_000usize, 5_000, 35_000] {
        let p = GenParams::sized(sites, 3);
        let mut times = Vec::with_capacity(runs);
        let mut bytes = 0usize;
        for _ in 0..runs {
            let t = Instant::now();
            let files = generate(&p);
            times.push(t.elapsed().as_secs_f64());
            bytes = files.iter().map(|(_, b)| b.len()).sum();
        }
        times.sort_by(f64::total_cmp);
        let median = times[times.len() / 2];
        let b = *base.get_or_insert(median);
        println!(
            "| {sites} | {:.1} | {:.3} | {median:.3} | {:.1} |",
            bytes as f64 / 1e6,
            times[0],
            median / b
        );
    }
}
