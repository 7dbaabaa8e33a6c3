//! What the two-nearest-facility arc rule costs: LP bound and whole-vial objective with the
//! default arcs and with every facility serving every site (`max_facilities_per_site =
//! usize::MAX`), on the demo and on generated weeks, at 0.5, 1 and 2× supply.
//!
//! Run: `cargo run --release --example arc_reach [sizes...]` (default 180 1000; the demo
//! always runs first). Prints a Markdown table.
use broodcast::allocate::{AllocOptions, allocate};
use broodcast::arcs::{ArcOptions, build_arcs_with};
use broodcast::generate::{self, GenParams};
use broodcast::plan;
use broodcast::scenario::{self, Scenario};
use broodcast::sweep::{Multiplier, scale_supply};
use broodcast::travel::TravelModel;

fn row(label: &str, s: &Scenario) {
    let travel = TravelModel::new(s);
    let priority = plan::priorities(s, &Default::default());
    let mut cells = Vec::new();
    for max in [2, usize::MAX] {
        let opts = ArcOptions {
            max_facilities_per_site: max,
            ..ArcOptions::default()
        };
        let a = build_arcs_with(s, &travel, &opts);
        let al = allocate(s, &priority, &a, &AllocOptions::default()).expect("allocates");
        let shipped: u32 = al.shipments.iter().map(|x| x.vials).sum();
        cells.push((a.arcs.len(), al.lp_bound, al.objective, shipped));
    }
    let (d, f) = (cells[0], cells[1]);
    println!(
        "| {label} | {} | {} | {:.1} | {} | {} | {:.1} | {} | {:.3} |",
        s.facilities.len(),
        d.0,
        d.1,
        d.3,
        f.0,
        f.1,
        f.3,
        d.1 / f.1
    );
}

fn main() {
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .map(|a| a.parse().expect("sizes are whole numbers"))
        .collect();
    let sizes = if sizes.is_empty() {
        vec![180, 1000]
    } else {
        sizes
    };
    println!(
        "| scenario | facilities | arcs (2 nearest) | LP bound | shipped | arcs (all) | LP bound | shipped | bound ratio |"
    );
    println!("|---|---:|---:|---:|---:|---:|---:|---:|---:|");
    let mut cases = vec![(
        "demo".to_string(),
        scenario::load_embedded_demo().expect("demo"),
    )];
    for n in sizes {
        let seed = if n == 180 { 11 } else { 1 };
        cases.push((
            format!("generated {n} (seed {seed})"),
            generate::load(&GenParams::sized(n, seed)).expect("generated week loads"),
        ));
    }
    for (name, s) in &cases {
        for m in ["0.5", "1", "2"] {
            let scaled = scale_supply(s, &Multiplier::parse(m).expect("m")).expect("scales");
            row(&format!("{name} ×{m}"), &scaled);
        }
    }
}
