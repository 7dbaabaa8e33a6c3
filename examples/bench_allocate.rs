//! Allocation benchmark on seeded synthetic scenarios (`broodcast::allocate::synthetic`):
//! model build, LP solve (with and without working-set pricing), rounding, gap and peak memory.
//!
//! Run: `cargo run --release --example bench_allocate [--no-pricing] [sizes...]` (default 500
//! 1000 5000 20000 35000). Prints a Markdown table (the one in `docs/performance-allocate.md`).
//! Each size runs in the same process, so peak memory is cumulative (the largest size's).

use std::time::Instant;

use broodcast::allocate::{AllocOptions, NoteKind, allocate, export_mps, synthetic};

/// Peak resident set of this process so far, MB (Linux `/proc/self/status` VmHWM; 0 elsewhere).
fn peak_mb() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1).map(str::to_string))
        })
        .and_then(|kb| kb.parse::<f64>().ok())
        .map(|kb| kb / 1024.0)
        .unwrap_or(0.0)
}

fn main() {
    let pricing = !std::env::args().any(|a| a == "--no-pricing");
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .filter_map(|a| a.parse().ok())
        .collect();
    let sizes = if sizes.is_empty() {
        vec![500, 1000, 5000, 20000, 35000]
    } else {
        sizes
    };
    println!(
        "| sites | arcs | supply vials | full model build + MPS s | LP + seed s | allocate total s | rounding s | pricing | gap | shipped vials | peak MB |"
    );
    println!("|---:|---:|---:|---:|---:|---:|---:|---|---:|---:|---:|");
    for &n in &sizes {
        let supply = if n <= 1000 { 800 } else { 1000 };
        let (s, p, arcs) = synthetic::generate(42 + n as u64, n, supply);
        let opts = AllocOptions {
            pricing,
            ..AllocOptions::default()
        };
        let t = Instant::now();
        let mps = export_mps(&s, &p, &arcs, &opts).expect("synthetic inputs are valid");
        let build = t.elapsed().as_secs_f64();
        drop(mps);
        // Rounding budget 0: the LP rounds plus the seed step only.
        let t = Instant::now();
        let lp_only = AllocOptions {
            rounding_budget: 0,
            ..opts.clone()
        };
        allocate(&s, &p, &arcs, &lp_only).expect("synthetic inputs are valid");
        let lp = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let a = allocate(&s, &p, &arcs, &opts).expect("synthetic inputs are valid");
        let solve = t.elapsed().as_secs_f64();
        let rounds = a
            .notes
            .iter()
            .find_map(|n| match n.kind {
                NoteKind::LpPriced {
                    working_sites,
                    sites,
                    rounds,
                    ..
                } => Some(format!(
                    "{working_sites} of {sites} sites, {rounds} round(s)"
                )),
                NoteKind::LpWhole { arcs } => Some(format!("whole ({arcs} arcs at once)")),
                _ => None,
            })
            .unwrap_or_else(|| "off (one LP over all sites)".to_string());
        let shipped: u32 = a.shipments.iter().map(|s| s.vials).sum();
        println!(
            "| {n} | {} | {supply} | {build:.2} | {lp:.2} | {solve:.2} | {:.2} | {rounds} | {:.3} % | {shipped} | {:.0} |",
            arcs.arcs.len(),
            (solve - lp).max(0.0),
            a.gap * 100.0,
            peak_mb()
        );
    }
}
