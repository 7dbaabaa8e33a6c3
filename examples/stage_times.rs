//! Times each stage of `plan` on a scenario folder (default: the built-in demo).
//! `cargo run --release --example stage_times -- [DIR] [SUPPLY_MULTIPLIER] [--solver
//! clarabel|highs]` (`-` as DIR is the demo; the multiplier scales supply as `sweep --supply`
//! does; `highs` needs `--features highs`, default clarabel; `STALL=n` sets the route search's
//! rounds without a new best).
use std::time::Instant;

use broodcast::allocate::{self, AllocOptions, Solver};
use broodcast::travel::TravelModel;
use broodcast::{arcs, dispatch, output, plan, scenario, sweep};

fn solver(name: &str) -> Solver {
    match name {
        "clarabel" => Solver::Clarabel,
        #[cfg(feature = "highs")]
        "highs" => Solver::Highs,
        other => {
            eprintln!("unknown or unavailable solver `{other}` (highs needs --features highs)");
            std::process::exit(2);
        }
    }
}

fn main() {
    let mut positional = Vec::new();
    let mut opts = AllocOptions::default();
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        if a == "--solver" {
            opts.solver = solver(&args.next().unwrap_or_default());
        } else {
            positional.push(a);
        }
    }
    let t = Instant::now();
    let s = match positional.first().filter(|d| *d != "-") {
        Some(d) => scenario::load_dir(std::path::Path::new(&d)),
        None => scenario::load_embedded_demo(),
    }
    .expect("valid scenario");
    let s = match positional.get(1) {
        Some(m) => sweep::scale_supply(&s, &sweep::Multiplier::parse(m).expect("multiplier"))
            .expect("scales"),
        None => s,
    };
    let load = t.elapsed();
    let t = Instant::now();
    let travel = TravelModel::new(&s);
    let pr = plan::priorities(&s, &Default::default());
    let prio = t.elapsed();
    let t = Instant::now();
    let a = arcs::build_arcs(&s, &travel);
    let arcs_t = t.elapsed();
    let t = Instant::now();
    let al = allocate::allocate(&s, &pr, &a, &opts).expect("allocates");
    let alloc_t = t.elapsed();
    let t = Instant::now();
    let mut dopts = dispatch::DispatchOptions::from_scenario(&s);
    if let Some(n) = std::env::var("STALL").ok().and_then(|v| v.parse().ok()) {
        dopts.stall_rounds = n;
    }
    let d = dispatch::dispatch_with(&s, &al, &travel, &dopts);
    let disp_t = t.elapsed();
    let t = Instant::now();
    let view = output::PlanView {
        scenario: &s,
        priority: &pr,
        allocation: &al,
        dispatch: &d,
        moved: &[],
        baseline: None,
    };
    let files = output::render_all(&view).expect("renders");
    let out_t = t.elapsed();
    println!(
        "sites {} arcs {} shipments {} routes {} drive {:.1} min undeliverable {} files {}",
        s.sites.len(),
        a.arcs.len(),
        al.shipments.len(),
        d.routes.len(),
        d.routes.iter().map(|r| r.drive_minutes).sum::<f64>(),
        d.undeliverable.len(),
        files.len()
    );
    println!(
        "solver {} LP bound {:.1} objective {:.1} gap {:.3} %",
        opts.solver.name(),
        al.lp_bound,
        al.objective,
        al.gap * 100.0
    );
    for (name, d) in [
        ("load", load),
        ("priority", prio),
        ("arcs", arcs_t),
        ("allocate", alloc_t),
        ("dispatch", disp_t),
        ("outputs", out_t),
    ] {
        println!("{name:>10} {:>9.3} s", d.as_secs_f64());
    }
}
