//! The optional HiGHS backend (`--features highs`) against the default clarabel one: on the
//! demo and on generated weeks both reach the same LP bound (1e-6 relative), and the
//! whole-vial plan rounded from HiGHS's (vertex) LP solution keeps every limit.
//!
//! Run with `cargo test --release --features highs --test highs`; without the feature this
//! file compiles to nothing, and `cli.rs` checks that `--solver highs` is refused.
#![cfg(feature = "highs")]

use std::collections::BTreeSet;
use std::process::Command;

use broodcast::allocate::{AllocOptions, Allocation, Solver, allocate, plan_objective};
use broodcast::arcs::Arcs;
use broodcast::plan::{self, PlanOptions};
use broodcast::scenario::{self, Scenario};

use crate::util;
use util::generated;

fn with(solver: Solver) -> AllocOptions {
    AllocOptions {
        solver,
        ..AllocOptions::default()
    }
}

/// Every limit a whole-vial plan must keep, re-checked from its shipments.
fn assert_valid(s: &Scenario, prio: &[f64], arcs: &Arcs, opts: &AllocOptions, a: &Allocation) {
    let known: BTreeSet<_> = arcs
        .arcs
        .iter()
        .map(|x| (x.facility, x.pack_date, x.dispatch_date, x.site, x.mode))
        .collect();
    for sh in &a.shipments {
        let x = &sh.arc;
        assert!(
            known.contains(&(x.facility, x.pack_date, x.dispatch_date, x.site, x.mode)),
            "shipment on an arc that is not a candidate"
        );
    }
    let (door, total) = util::check_whole_vial_limits(s, a);
    // The floor the model keeps (typed): dropped without reachable requests, lowered to what
    // they can absorb.
    let share = broodcast::allocate::share_floor(s, prio, arcs, opts)
        .expect("valid")
        .unwrap_or(0.0);
    assert!(
        f64::from(door) >= share * f64::from(total) - 1e-9,
        "share floor"
    );
    let again = plan_objective(s, prio, arcs, opts, &a.shipments).expect("valid");
    assert!((again - a.objective).abs() <= 1e-9 * a.objective.abs().max(1.0));
    assert!(a.objective <= a.lp_bound + 1e-6 * a.lp_bound.abs().max(1.0));
    assert!((0.0..=1.0).contains(&a.gap), "gap {}", a.gap);
}

/// Allocates `s` with both solvers; the bounds agree and both plans are valid.
fn compare(label: &str, s: &Scenario) {
    let (_, prio, arcs) = plan::prepare(s, &PlanOptions::default());
    let c_opts = with(Solver::Clarabel);
    let h_opts = with(Solver::Highs);
    let c = allocate(s, &prio, &arcs, &c_opts).expect("clarabel allocates");
    let h = allocate(s, &prio, &arcs, &h_opts).expect("highs allocates");
    let rel = (c.lp_bound - h.lp_bound).abs() / c.lp_bound.abs().max(1.0);
    eprintln!(
        "{label}: LP bound clarabel {:.6} highs {:.6} (rel {rel:.2e}); objective {:.1} vs {:.1}; \
         gap {:.3} % vs {:.3} %",
        c.lp_bound,
        h.lp_bound,
        c.objective,
        h.objective,
        c.gap * 100.0,
        h.gap * 100.0
    );
    assert!(c.lp_bound > 0.0, "{label}: a week with nothing to plan");
    assert!(rel <= 1e-6, "{label}: {} vs {}", c.lp_bound, h.lp_bound);
    assert_valid(s, &prio, &arcs, &c_opts, &c);
    assert_valid(s, &prio, &arcs, &h_opts, &h);
    // The supply marginal values come from the duals: same sign convention (≥ 0).
    assert!(h.marginal_value_per_vial.iter().all(|m| *m >= 0.0));
}

#[test]
fn demo_bounds_agree_and_highs_plan_is_valid() {
    let s = scenario::load_embedded_demo().expect("demo loads");
    compare("demo", &s);
}

#[test]
fn generated_week_bounds_agree_and_highs_plans_are_valid() {
    for (n, seed) in [(400, 2), (1_000, 1), (3_000, 5)] {
        compare(&format!("generated {n} seed {seed}"), &generated(n, seed));
    }
}

#[test]
fn pricing_reaches_the_full_pool_optimum_with_highs() {
    let s = generated(1_000, 3);
    let (_, prio, arcs) = plan::prepare(&s, &PlanOptions::default());
    let priced = allocate(&s, &prio, &arcs, &with(Solver::Highs)).expect("valid");
    let full = allocate(
        &s,
        &prio,
        &arcs,
        &AllocOptions {
            pricing: false,
            ..with(Solver::Highs)
        },
    )
    .expect("valid");
    let rel = (priced.lp_bound - full.lp_bound).abs() / full.lp_bound.abs().max(1.0);
    assert!(rel <= 1e-9, "{} vs {}", priced.lp_bound, full.lp_bound);
}

#[test]
fn plan_cli_with_highs_writes_a_plan() {
    let out = tempfile::tempdir().expect("temp dir");
    let run = |solver: &str, dir: &str| {
        let o = Command::new(env!("CARGO_BIN_EXE_broodcast"))
            .args(["plan", "--solver", solver, "--out"])
            .arg(out.path().join(dir))
            .output()
            .expect("run broodcast");
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        String::from_utf8_lossy(&o.stdout).into_owned()
    };
    let h = run("highs", "h");
    let c = run("clarabel", "c");
    assert!(h.contains("LP solver: highs"), "{h}");
    assert!(!c.contains("LP solver"), "{c}");
    let bound = |text: &str| -> f64 {
        let after = text.split("LP bound ").nth(1).expect("LP bound line");
        after
            .split([',', ')'])
            .next()
            .and_then(|v| v.trim().parse().ok())
            .expect("a number")
    };
    assert!((bound(&h) - bound(&c)).abs() <= 0.05 + 1e-6 * bound(&c));
    assert!(out.path().join("h").join("manifest.csv").exists());
}
