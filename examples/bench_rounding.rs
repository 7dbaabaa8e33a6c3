//! Whole-vial rounding benchmark: `allocate` time, objective and gap on the demo at several
//! supply multipliers and on generated weeks (`GenParams::sized`), one line each.
//!
//! Run: `cargo run --release --example bench_rounding [sizes...]` (default 1000 5000; the
//! demo at 0.25, 0.5, 1, 2 and 4× supply always runs first). Prints a Markdown table.
use std::time::Instant;

use broodcast::allocate::{AllocOptions, allocate};
use broodcast::generate::{self, GenParams};
use broodcast::scenario::{self, Scenario};
use broodcast::sweep::{Multiplier, scale_supply};
use broodcast::travel::TravelModel;
use broodcast::{arcs, plan};

fn row(label: &str, s: &Scenario) {
    let travel = TravelModel::new(s);
    let priority = plan::priorities(s, &Default::default());
    let a = arcs::build_arcs(s, &travel);
    let t = Instant::now();
    let opts = AllocOptions {
        pricing: std::env::var_os("NO_PRICING").is_none(),
        ..AllocOptions::default()
    };
    let al = allocate(s, &priority, &a, &opts).expect("allocates");
    let secs = t.elapsed().as_secs_f64();
    let shipped: u32 = al.shipments.iter().map(|x| x.vials).sum();
    println!(
        "| {label} | {} | {shipped} | {secs:.3} | {:.1} | {:.1} | {:.1} | {:.3} % | {:.3} % |",
        s.sites.len(),
        al.objective,
        al.lp_bound,
        al.bound,
        100.0 * (1.0 - al.objective / al.lp_bound),
        100.0 * al.gap
    );
}

fn main() {
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .filter_map(|a| a.parse().ok())
        .collect();
    let sizes = if sizes.is_empty() {
        vec![1000, 5000]
    } else {
        sizes
    };
    println!(
        "| scenario | sites | shipped vials | allocate s | objective | LP bound | whole-vial bound | gap to LP | gap |"
    );
    println!("|---|---:|---:|---:|---:|---:|---:|---:|---:|");
    let only_dirs = std::env::var_os("ONLY_DIRS").is_some();
    let demo = scenario::load_embedded_demo().expect("demo loads");
    for m in if only_dirs {
        &[][..]
    } else {
        &["0.25", "0.5", "1", "2", "4"][..]
    } {
        let mult = Multiplier::parse(m).expect("multiplier");
        row(
            &format!("demo {m}×"),
            &scale_supply(&demo, &mult).expect("scales"),
        );
    }
    // Extra folders: BENCH_DIRS=dir1:dir2 (e.g. the state-scale week from `generate`).
    for d in std::env::var("BENCH_DIRS")
        .unwrap_or_default()
        .split(':')
        .filter(|d| !d.is_empty())
    {
        let s = scenario::load_dir(std::path::Path::new(d)).expect("folder loads");
        row(d, &s);
    }
    for n in sizes.into_iter().filter(|_| !only_dirs) {
        let s = generate::load(&GenParams::sized(n, 1)).expect("generated week loads");
        row(&format!("generated {n}"), &s);
    }
}
