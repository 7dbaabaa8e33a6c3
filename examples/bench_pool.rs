//! Whole pool or pricing: `allocate` time with working-set pricing forced on
//! (`direct_max_arcs = 0`), with one LP over every arc (`pricing = false`), and with the default
//! rule, on the demo and on generated weeks at 0.25, 1 and 4× supply. The three settings
//! alternate within each row, so load on the machine hits them alike; compare within a row.
//!
//! Run: `cargo run --release --example bench_pool [sizes...]` (default 250 500 750 1000; the
//! demo always runs first). Prints a Markdown table.
use std::time::Instant;

use broodcast::allocate::{AllocOptions, Allocation, NoteKind, allocate};
use broodcast::generate::{self, GenParams};
use broodcast::scenario::{self, Scenario};
use broodcast::sweep::{Multiplier, scale_supply};
use broodcast::travel::TravelModel;
use broodcast::{arcs, plan};

/// Repetitions per setting; the table shows the fastest (least disturbed) run.
const REPEATS: usize = 3;

fn timed(s: &Scenario, p: &[f64], a: &arcs::Arcs, opts: &AllocOptions) -> (f64, Allocation) {
    let mut best = f64::INFINITY;
    let mut last = None;
    for _ in 0..REPEATS {
        let t = Instant::now();
        let al = allocate(s, p, a, opts).expect("allocates");
        best = best.min(t.elapsed().as_secs_f64());
        last = Some(al);
    }
    (best, last.expect("at least one run"))
}

fn row(label: &str, s: &Scenario) {
    let travel = TravelModel::new(s);
    let priority = plan::priorities(s, &Default::default());
    let a = arcs::build_arcs(s, &travel);
    let priced_opts = AllocOptions {
        direct_max_arcs: 0,
        ..AllocOptions::default()
    };
    let whole_opts = AllocOptions {
        pricing: false,
        ..AllocOptions::default()
    };
    let (priced_s, priced) = timed(s, &priority, &a, &priced_opts);
    let (whole_s, _) = timed(s, &priority, &a, &whole_opts);
    let (default_s, default) = timed(s, &priority, &a, &AllocOptions::default());
    let rounds = priced
        .notes
        .iter()
        .find_map(|n| match n.kind {
            NoteKind::LpPriced { rounds, .. } => Some(rounds.to_string()),
            _ => None,
        })
        .unwrap_or_else(|| "?".into());
    let chose = if default
        .notes
        .iter()
        .any(|n| matches!(n.kind, NoteKind::LpWhole { .. }))
    {
        "whole"
    } else {
        "priced"
    };
    println!(
        "| {label} | {} | {} | {rounds} | {} | {priced_s:.3} | {whole_s:.3} | {chose} | {default_s:.3} | {:.2} |",
        s.sites.len(),
        a.arcs.len(),
        priced.working_set.len(),
        default_s / priced_s.min(whole_s),
    );
}

fn main() {
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .map(|a| a.parse().expect("sizes are whole numbers"))
        .collect();
    let sizes = if sizes.is_empty() {
        vec![250, 500, 750, 1000]
    } else {
        sizes
    };
    println!(
        "| scenario | sites | arcs | priced rounds | priced final set | priced s | whole s | rule | rule s | rule / best |"
    );
    println!("|---|---:|---:|---:|---:|---:|---:|---|---:|---:|");
    let demo = scenario::load_embedded_demo().expect("demo loads");
    let mut cases = vec![("demo".to_string(), demo)];
    for n in sizes {
        let s = generate::load(&GenParams::sized(n, 1)).expect("generated week loads");
        cases.push((format!("generated {n}"), s));
    }
    for (name, s) in &cases {
        for m in ["0.25", "1", "4"] {
            let m = Multiplier::parse(m).expect("multiplier");
            let scaled = scale_supply(s, &m).expect("scales");
            row(&format!("{name} ×{m}"), &scaled);
        }
    }
}
