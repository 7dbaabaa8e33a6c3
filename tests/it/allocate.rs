//! Integration tests of the allocation stage: the LP builder against a published textbook
//! optimum, the exported MPS against HiGHS, whole-vial plans against brute force, and
//! invariants on generated inputs (proptest).

use std::collections::BTreeMap;

use broodcast::allocate::model::{LinearModel, Sense};
use broodcast::allocate::{
    AllocOptions, Allocation, ArcKey, NoteKind, allocate, export_mps, plan_objective, synthetic,
};

use broodcast::arcs::{Arc, Arcs, Mode};
use broodcast::eligibility::Reason;
use broodcast::scenario::{Override, OverrideAction, Scenario, SiteKind, Supply};
use proptest::prelude::*;

use crate::util;

/// Hillier & Lieberman, *Introduction to Operations Research* (transportation-problem
/// chapter, the P&T Company canneries-to-warehouses worked example; 7th ed. and later),
/// stated from memory: supplies 75/125/100 truckloads, demands 80/65/70/85, unit costs below,
/// published optimal total cost $152,535.
#[test]
fn textbook_transportation_problem_matches_published_optimum() {
    let supply = [75.0, 125.0, 100.0];
    let demand = [80.0, 65.0, 70.0, 85.0];
    let cost = [
        [464.0, 513.0, 654.0, 867.0],
        [352.0, 416.0, 690.0, 791.0],
        [995.0, 682.0, 388.0, 685.0],
    ];
    for integer in [false, true] {
        let mut m = LinearModel::new("p_and_t");
        let mut x = [[0usize; 4]; 3];
        for i in 0..3 {
            for j in 0..4 {
                // The builder maximises: minimise cost as maximise −cost.
                x[i][j] = m.add_column(
                    &format!("x_{i}_{j}"),
                    0.0,
                    f64::INFINITY,
                    -cost[i][j],
                    integer,
                );
            }
        }
        for i in 0..3 {
            let t: Vec<_> = (0..4).map(|j| (x[i][j], 1.0)).collect();
            m.add_row(&format!("supply_{i}"), &t, Sense::Eq, supply[i]);
        }
        for j in 0..4 {
            let t: Vec<_> = (0..3).map(|i| (x[i][j], 1.0)).collect();
            m.add_row(&format!("demand_{j}"), &t, Sense::Eq, demand[j]);
        }
        let sol = if integer {
            m.solve_integer(0.0, 100_000)
                .expect("balanced transportation problem")
        } else {
            m.solve_relaxation()
                .expect("balanced transportation problem")
        };
        assert!(
            (-sol.objective - 152_535.0).abs() < 1e-6 * 152_535.0,
            "integer={integer}: cost {}",
            -sol.objective
        );
        assert!(m.max_violation(&sol.values) < 1e-6);
    }
}

fn python_has(module: &str) -> bool {
    std::process::Command::new("python3")
        .args(["-c", &format!("import {module}")])
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

/// HiGHS (highspy, PyPI) solves the exported MPS; its optimum must equal our LP bound (clarabel
/// with working-set pricing) to 1e-6 relative.
#[test]
fn lp_bound_matches_highs_on_exported_mps() {
    if !python_has("highspy") {
        util::skip(
            "lp_bound_matches_highs_on_exported_mps",
            "python3 cannot import highspy (pip install highspy)",
        );
        return;
    }
    let dir = tempfile::tempdir().expect("temp dir");
    let mut paths = Vec::new();
    let mut bounds = Vec::new();
    for (seed, n, supply, share) in [
        (1u64, 40usize, 60u32, 0.1),
        (2, 120, 200, 0.0),
        (3, 300, 600, 0.25),
        (4, 500, 800, 0.1),
        (5, 80, 2000, 0.1),
    ] {
        let (mut s, p, arcs) = synthetic::generate(seed, n, supply);
        s.policy.dooryard_share_min = share;
        let opts = AllocOptions::default();
        let mps = export_mps(&s, &p, &arcs, &opts).expect("valid");
        let path = dir.path().join(format!("m{seed}.mps"));
        std::fs::write(&path, mps).expect("write mps");
        paths.push(path);
        bounds.push(allocate(&s, &p, &arcs, &opts).expect("valid").lp_bound);
    }
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/py/highs_objective.py");
    let out = std::process::Command::new("python3")
        .arg(script)
        .args(&paths)
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    // HiGHS prints a banner first; keep the result lines.
    let lines: Vec<&str> = text
        .lines()
        .filter(|l| l.contains("ObjSense") || l.starts_with("status"))
        .collect();
    assert_eq!(lines.len(), bounds.len(), "{text}");
    for (line, ours) in lines.iter().zip(&bounds) {
        let highs: f64 = line
            .split_whitespace()
            .next()
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("HiGHS did not solve: {line}"));
        let rel = (highs - ours).abs() / highs.abs().max(1.0);
        eprintln!("HiGHS {highs:.6} ours {ours:.6} relative difference {rel:.2e}");
        assert!(rel <= 1e-6, "HiGHS {highs} vs ours {ours} ({line})");
    }
}

/// A tiny instance built by hand: `n` sites with one or two route arcs each on two pack days.
fn tiny_instance(seed: u64, n: usize) -> (Scenario, Vec<f64>, Arcs) {
    let mut rng = synthetic::Rng(seed);
    let (mut s, _, _) = synthetic::generate(seed, n, 0);
    let d0 = s.week_start;
    let d1 = s.week_start + chrono::Days::new(1);
    s.supply = vec![
        Supply {
            facility: 0,
            date: d0,
            vials: 2 + rng.below(4) as u32,
        },
        Supply {
            facility: 1,
            date: d1,
            vials: 2 + rng.below(4) as u32,
        },
    ];
    s.fleet[0].capacity_vials = 20;
    s.fleet[1].capacity_vials = 20; // V2 runs Tue (d1) and Thu.
    s.agent.max_release_wasps = 450.0;
    s.agent.target_release_wasps = 250.0;
    s.policy.dooryard_share_min = if rng.below(2) == 0 { 0.0 } else { 0.2 };
    let priority: Vec<f64> = (0..n).map(|_| 0.2 + rng.unit() * 3.0).collect();
    let mut arcs = Vec::new();
    for site in 0..n {
        for (f, d) in [(0usize, d0), (1usize, d1)] {
            if rng.below(3) == 0 {
                continue;
            }
            let alive = f64::from(s.facilities[f].wasps_per_vial) * (0.7 + 0.3 * rng.unit());
            arcs.push(Arc {
                facility: f,
                pack_date: d,
                dispatch_date: d,
                site,
                mode: Mode::Route,
                eta: d.and_hms_opt(10, 0, 0).expect("valid"),
                release_by: d.and_hms_opt(23, 0, 0).expect("valid"),
                survival: alive / f64::from(s.facilities[f].wasps_per_vial),
                wasps_alive_per_vial: alive,
                drive_minutes: 15.0 + 60.0 * rng.unit(),
            });
        }
    }
    let no_arc_reason = (0..n)
        .map(|i| (!arcs.iter().any(|a| a.site == i)).then_some(Reason::OutOfReach))
        .collect();
    (
        s,
        priority,
        Arcs {
            arcs,
            no_arc_reason,
        },
    )
}

/// Benefit formula of docs/model.md, written out again here so the check is independent.
fn reference_objective(s: &Scenario, p: &[f64], arcs: &Arcs, x: &[u32]) -> Option<f64> {
    let ag = &s.agent;
    let n = s.sites.len();
    let mut e = vec![0.0; n];
    let mut v = vec![0u32; n];
    // Releases per site: each arc with vials is one shipment, hence one release.
    let mut releases = vec![0u32; n];
    let mut used: BTreeMap<(usize, chrono::NaiveDate), u32> = BTreeMap::new();
    let mut cost = 0.0;
    for (a, &k) in arcs.arcs.iter().zip(x) {
        if k > 0 {
            releases[a.site] += 1;
            // With several releases allowed, each must reach the minimum on its own.
            if s.policy.releases_per_site_week > 1
                && s.sites[a.site].kind() == SiteKind::Block
                && a.wasps_alive_per_vial * f64::from(k) < ag.min_release_wasps - 1e-9
            {
                return None;
            }
        }
        e[a.site] += a.wasps_alive_per_vial * f64::from(k);
        v[a.site] += k;
        *used.entry((a.facility, a.pack_date)).or_default() += k;
        cost += s.policy.travel_cost_per_hour * a.drive_minutes / 60.0 * f64::from(k);
    }
    for ((f, d), u) in &used {
        if *u > s.supply_vials(*f, *d) {
            return None;
        }
    }
    let (mut door, mut total) = (0u32, 0u32);
    let mut value = -cost;
    for i in 0..n {
        total += v[i];
        if v[i] == 0 {
            continue;
        }
        if releases[i] > s.policy.releases_per_site_week {
            return None;
        }
        if e[i] > ag.max_release_wasps + 1e-9 {
            return None;
        }
        match s.sites[i].kind() {
            SiteKind::Block if e[i] < ag.min_release_wasps - 1e-9 => return None,
            SiteKind::Dooryard if v[i] != s.policy.dooryard_vials_per_request => return None,
            SiteKind::Dooryard => door += v[i],
            SiteKind::Block => {}
        }
        let first = e[i].min(ag.target_release_wasps);
        let second = (e[i] - ag.target_release_wasps).max(0.0);
        value += p[i] * (first + ag.above_target_weight * second);
    }
    if f64::from(door) < effective_share(s, arcs) * f64::from(total) - 1e-9 {
        return None;
    }
    Some(value)
}

/// The share floor as the model keeps it: dropped (with a note) when no request has an arc.
fn effective_share(s: &Scenario, arcs: &Arcs) -> f64 {
    if arcs
        .arcs
        .iter()
        .any(|a| s.sites[a.site].kind() == SiteKind::Dooryard)
    {
        s.policy.dooryard_share_min
    } else {
        0.0
    }
}

fn brute_force(s: &Scenario, p: &[f64], arcs: &Arcs) -> f64 {
    let m = arcs.arcs.len();
    let cap: Vec<u32> = arcs
        .arcs
        .iter()
        .map(|a| s.supply_vials(a.facility, a.pack_date))
        .collect();
    let mut x = vec![0u32; m];
    let mut best = f64::NEG_INFINITY;
    // Odometer over vials per arc, each 0..=its pack day's supply.
    loop {
        if let Some(v) = reference_objective(s, p, arcs, &x) {
            best = best.max(v);
        }
        let mut i = 0;
        loop {
            if i == m {
                return best;
            }
            if x[i] < cap[i] {
                x[i] += 1;
                break;
            }
            x[i] = 0;
            i += 1;
        }
    }
}

#[test]
fn whole_vial_plan_is_between_brute_force_and_both_bounds_on_tiny_instances() {
    let mut worst = 0.0f64;
    let mut tested = 0;
    let mut tighter = 0;
    let mut optimal = 0;
    let mut bound_exact = 0;
    for seed in 0..40u64 {
        let (mut s, p, arcs) = tiny_instance(seed, 3 + (seed % 3) as usize);
        // One release per site (the default) on most; two on every fourth instance.
        s.policy.releases_per_site_week = if seed % 4 == 3 { 2 } else { 1 };
        let states: f64 = arcs
            .arcs
            .iter()
            .map(|a| f64::from(s.supply_vials(a.facility, a.pack_date) + 1))
            .product();
        if states > 3e5 {
            continue;
        }
        let alloc = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
        let best = brute_force(&s, &p, &arcs);
        let ours = plan_x(&alloc, &arcs);
        let check = reference_objective(&s, &p, &arcs, &ours).expect("plan is feasible");
        assert!((check - alloc.objective).abs() < 1e-6 * check.abs().max(1.0));
        let recomputed = plan_objective(&s, &p, &arcs, &AllocOptions::default(), &alloc.shipments)
            .expect("valid");
        assert!((recomputed - alloc.objective).abs() < 1e-9 * check.abs().max(1.0));
        assert!(
            alloc.objective <= best + 1e-6,
            "seed {seed}: {} > brute {best}",
            alloc.objective
        );
        assert!(
            best <= alloc.lp_bound + 1e-5 * best.abs().max(1.0),
            "seed {seed}: brute {best} > lp {}",
            alloc.lp_bound
        );
        // The whole-vial (Lagrangian) bound is still a bound, and never above the LP's.
        assert!(
            best <= alloc.bound + 1e-6 * best.abs().max(1.0),
            "seed {seed}: brute {best} > whole-vial bound {}",
            alloc.bound
        );
        assert!(alloc.bound <= alloc.lp_bound + 1e-9 * alloc.lp_bound.abs().max(1.0));
        if alloc.bound < alloc.lp_bound - 1e-6 * alloc.lp_bound.abs().max(1.0) {
            tighter += 1;
        }
        if best > 0.0 {
            worst = worst.max(1.0 - alloc.objective / best);
        }
        if alloc.objective >= best - 1e-6 * best.abs().max(1.0) {
            optimal += 1;
        }
        if alloc.bound <= best + 1e-6 * best.abs().max(1.0) {
            bound_exact += 1;
        }
        tested += 1;
    }
    eprintln!(
        "{tested} tiny instances; plan = brute-force optimum on {optimal}; worst shortfall: \
         {:.2} %; whole-vial bound below the LP bound on {tighter}, equal to the optimum on \
         {bound_exact}",
        worst * 100.0
    );
    assert!(tested >= 20);
    // Most tiny plans are optimal (measured: see docs/model.md, "Rounding").
    assert!(optimal * 10 >= tested * 8, "{optimal} of {tested} optimal");
    // The subgradient reaches the brute-force optimum itself on most (measured 2026-12-03:
    // 26 of 40; 23 when it halves its step after 3 stalled steps instead of 20, which fails).
    assert!(
        bound_exact * 10 >= tested * 6,
        "whole-vial bound equals the optimum on only {bound_exact} of {tested}"
    );
}

fn plan_x(alloc: &Allocation, arcs: &Arcs) -> Vec<u32> {
    arcs.arcs
        .iter()
        .map(|a| {
            alloc
                .shipments
                .iter()
                .filter(|s| s.arc == *a)
                .map(|s| s.vials)
                .sum()
        })
        .collect()
}

#[test]
fn demo_sized_scenarios_round_within_one_percent() {
    for seed in [11u64, 12, 13] {
        let (s, p, arcs) = synthetic::generate(seed, 500, 800);
        let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
        eprintln!(
            "seed {seed}: lp {:.1} plan {:.1} gap {:.3} %",
            a.lp_bound,
            a.objective,
            a.gap * 100.0
        );
        assert!(a.gap <= 0.01, "gap {}", a.gap);
        assert!(a.objective <= a.lp_bound * (1.0 + 1e-9));
    }
}

/// Working-set pricing whatever the pool's size.
fn always_priced() -> AllocOptions {
    AllocOptions {
        direct_max_arcs: 0,
        ..Default::default()
    }
}

#[test]
fn a_small_pool_is_solved_whole_with_the_priced_optimum() {
    // 600 sites give about 1,500 arcs, under the default `direct_max_arcs`, and 300 vials a
    // first working set of more than a twentieth of them.
    let (s, p, arcs) = synthetic::generate(5, 600, 300);
    assert!(arcs.arcs.len() <= AllocOptions::default().direct_max_arcs);
    let whole = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    assert!(
        whole
            .notes
            .iter()
            .any(|n| matches!(n.kind, NoteKind::LpWhole { .. })),
        "{:?}",
        whole.notes
    );
    let priced = allocate(&s, &p, &arcs, &always_priced()).expect("valid");
    assert!(priced.working_set.len() < whole.working_set.len());
    let rel = (whole.lp_bound - priced.lp_bound).abs() / priced.lp_bound;
    assert!(rel < 1e-6, "{} vs {}", whole.lp_bound, priced.lp_bound);
}

#[test]
fn pricing_reaches_the_full_pool_optimum() {
    let (s, p, arcs) = synthetic::generate(7, 2000, 400);
    let with = allocate(&s, &p, &arcs, &always_priced()).expect("valid");
    assert!(
        with.notes
            .iter()
            .any(|n| matches!(n.kind, NoteKind::LpPriced { .. })),
        "priced: {:?}",
        with.notes
    );
    let without = allocate(
        &s,
        &p,
        &arcs,
        &AllocOptions {
            pricing: false,
            ..Default::default()
        },
    )
    .expect("valid");
    let rel = (with.lp_bound - without.lp_bound).abs() / without.lp_bound;
    assert!(rel < 1e-6, "{} vs {}", with.lp_bound, without.lp_bound);
}

/// The arcs of the first `n` shipments of `plan`, as the route feedback excludes them.
fn first_arcs(plan: &Allocation, n: usize) -> std::collections::BTreeSet<ArcKey> {
    plan.shipments
        .iter()
        .take(n)
        .map(|sh| {
            let a = &sh.arc;
            (a.facility, a.dispatch_date, a.site, a.mode)
        })
        .collect()
}

#[test]
fn a_warm_started_resolve_reaches_the_same_optimum() {
    // As plan's route feedback does: drop a few served arcs, solve again from the first
    // solve's working set.
    let (s, p, arcs) = synthetic::generate(11, 2000, 400);
    let first = allocate(&s, &p, &arcs, &always_priced()).expect("valid");
    let excluded = first_arcs(&first, 3);
    assert!(!first.working_set.is_empty());
    let cold = AllocOptions {
        excluded,
        ..always_priced()
    };
    let warm = AllocOptions {
        warm_start: first.working_set.iter().copied().collect(),
        ..cold.clone()
    };
    let a = allocate(&s, &p, &arcs, &cold).expect("valid");
    let b = allocate(&s, &p, &arcs, &warm).expect("valid");
    let rel = (a.lp_bound - b.lp_bound).abs() / a.lp_bound;
    assert!(rel < 1e-6, "cold {} vs warm {}", a.lp_bound, b.lp_bound);
    assert!(b.lp_bound <= first.lp_bound * (1.0 + 1e-9));
    assert!(b.gap <= 0.01, "gap {}", b.gap);
}

#[test]
fn a_resolve_from_the_earlier_plan_keeps_its_value_and_every_limit() {
    // As plan's route feedback does: the re-solve rounds from the first plan.
    let (s, p, arcs) = synthetic::generate(13, 2000, 400);
    let first = allocate(&s, &p, &arcs, &always_priced()).expect("valid");
    let warm_plan = first.planned_vials();
    // Nothing removed: the rounding starts from the first plan and only keeps improvements.
    let same = AllocOptions {
        warm_plan: warm_plan.clone(),
        warm_start: first.working_set.iter().copied().collect(),
        ..always_priced()
    };
    let again = allocate(&s, &p, &arcs, &same).expect("valid");
    check_invariants(&s, &p, &arcs, &again);
    assert!(
        again.objective >= first.objective - 1e-9 * first.objective.abs(),
        "{} from {}",
        again.objective,
        first.objective
    );
    // Three served arcs removed: none is used, and every limit holds.
    let excluded = first_arcs(&first, 3);
    let resolve = AllocOptions {
        excluded: excluded.clone(),
        ..same
    };
    let b = allocate(&s, &p, &arcs, &resolve).expect("valid");
    check_invariants(&s, &p, &arcs, &b);
    for sh in &b.shipments {
        let a = &sh.arc;
        assert!(!excluded.contains(&(a.facility, a.dispatch_date, a.site, a.mode)));
    }
    assert!(b.gap <= 0.01, "gap {}", b.gap);
}

/// The week's first plan and its LP, as plan's route feedback starts from them.
fn first_plan_keeping_lp(
    s: &Scenario,
    p: &[f64],
    arcs: &Arcs,
) -> (Allocation, broodcast::allocate::LpSolve) {
    let (first, lp) =
        broodcast::allocate::allocate_keeping_lp(s, p, arcs, &always_priced()).expect("valid");
    (first, lp.expect("the week has usable arcs"))
}

#[test]
fn a_replan_from_the_first_lp_keeps_its_bounds_and_every_limit() {
    // As plan's route feedback does: three served arcs removed, no second LP.
    let (s, p, arcs) = synthetic::generate(13, 2000, 400);
    let (first, lp) = first_plan_keeping_lp(&s, &p, &arcs);
    let excluded = first_arcs(&first, 3);
    let opts = AllocOptions {
        excluded: excluded.clone(),
        warm_plan: first.planned_vials(),
        ..always_priced()
    };
    let b = broodcast::allocate::allocate_from(&s, &p, &arcs, &opts, &lp).expect("valid");
    check_invariants(&s, &p, &arcs, &b);
    for sh in &b.shipments {
        let a = &sh.arc;
        assert!(!excluded.contains(&(a.facility, a.dispatch_date, a.site, a.mode)));
    }
    // The first solve's bounds: upper bounds still (arcs were only removed), and those of the
    // model export-model writes.
    assert_eq!(b.lp_bound, first.lp_bound);
    assert_eq!(b.bound, first.bound);
    // As good as solving the LP again, within the gap the re-solve itself reports.
    let again = allocate(&s, &p, &arcs, &opts).expect("valid");
    assert!(
        b.objective >= again.objective * (1.0 - 0.01),
        "{} against a re-solve's {}",
        b.objective,
        again.objective
    );
    assert!(b.gap <= 0.01, "gap {}", b.gap);
}

#[test]
fn a_replan_with_a_full_depot_day_sends_at_most_its_cap_by_route() {
    // As plan's route feedback does when a depot-day's routes leave stops out: the re-plan
    // may send by route from that depot-day at most what the routes delivered.
    let (s, p, arcs) = synthetic::generate(13, 2000, 400);
    let (first, lp) = first_plan_keeping_lp(&s, &p, &arcs);
    let mut by_day: BTreeMap<_, u32> = BTreeMap::new();
    for sh in first
        .shipments
        .iter()
        .filter(|sh| sh.arc.mode == Mode::Route)
    {
        *by_day
            .entry((sh.arc.facility, sh.arc.dispatch_date))
            .or_default() += sh.vials;
    }
    // The busiest depot-day, capped at two thirds of what the first plan sent from it.
    let (&day, &planned) = by_day
        .iter()
        .max_by_key(|(k, v)| (**v, std::cmp::Reverse(**k)))
        .expect("the first plan uses a route");
    let cap = planned * 2 / 3;
    assert!(cap < planned);
    let opts = AllocOptions {
        route_vials_cap: [(day, cap)].into_iter().collect(),
        warm_plan: first.planned_vials(),
        ..always_priced()
    };
    for b in [
        broodcast::allocate::allocate_from(&s, &p, &arcs, &opts, &lp).expect("valid"),
        allocate(&s, &p, &arcs, &opts).expect("valid"),
    ] {
        check_invariants(&s, &p, &arcs, &b);
        let sent: u32 = b
            .shipments
            .iter()
            .filter(|sh| {
                sh.arc.mode == Mode::Route && (sh.arc.facility, sh.arc.dispatch_date) == day
            })
            .map(|sh| sh.vials)
            .sum();
        assert!(
            sent <= cap,
            "{sent} vials by route from a depot-day capped at {cap}"
        );
        // A restriction of the week: the first LP's bound still holds.
        assert!(b.objective <= first.lp_bound + 1e-6 * first.lp_bound.abs());
    }
}

#[test]
fn a_site_kept_off_full_depot_days_reads_undeliverable_not_out_of_reach() {
    // Every depot-day kept to no stop (as the route feedback keeps a full one to the stops
    // its routes served): a site whose only arcs are by route has no usable arc left, and the
    // reason is that no route could take it, not that no facility reaches it.
    let (s, p, arcs) = synthetic::generate(13, 2000, 400);
    let days: BTreeMap<_, std::collections::BTreeSet<usize>> = arcs
        .arcs
        .iter()
        .filter(|a| a.mode == Mode::Route)
        .map(|a| ((a.facility, a.dispatch_date), Default::default()))
        .collect();
    let route_only: Vec<usize> = (0..s.sites.len())
        .filter(|&i| {
            let mut own = arcs.arcs.iter().filter(|a| a.site == i).peekable();
            own.peek().is_some() && own.all(|a| a.mode == Mode::Route)
        })
        .collect();
    assert!(!route_only.is_empty());
    let opts = AllocOptions {
        route_stops_only: days,
        ..always_priced()
    };
    let b = allocate(&s, &p, &arcs, &opts).expect("valid");
    assert!(b.shipments.iter().all(|sh| sh.arc.mode == Mode::Parcel));
    for &i in &route_only {
        if p[i] > 0.0 && arcs.no_arc_reason[i].is_none() {
            assert_eq!(b.sites[i].reason, Some(Reason::Undeliverable), "site {i}");
        }
    }
}

#[test]
fn a_replan_that_loosens_the_share_floor_solves_the_lp_again() {
    // Every request's arcs removed: the share floor is dropped, a looser problem than the
    // first LP's, whose bounds may then be too low; the re-plan must solve again.
    let (mut s, mut p, arcs) = synthetic::generate(13, 400, 300);
    s.policy.dooryard_share_min = 0.3;
    // Requests worth little: the floor costs the first plan value.
    for (i, site) in s.sites.iter().enumerate() {
        if site.kind() == SiteKind::Dooryard {
            p[i] *= 0.01;
        }
    }
    let (first, lp) = first_plan_keeping_lp(&s, &p, &arcs);
    let excluded: std::collections::BTreeSet<ArcKey> = arcs
        .arcs
        .iter()
        .filter(|a| s.sites[a.site].kind() == SiteKind::Dooryard)
        .map(|a| (a.facility, a.dispatch_date, a.site, a.mode))
        .collect();
    assert!(!excluded.is_empty());
    let opts = AllocOptions {
        excluded,
        ..always_priced()
    };
    let b = broodcast::allocate::allocate_from(&s, &p, &arcs, &opts, &lp).expect("valid");
    let fresh = allocate(&s, &p, &arcs, &opts).expect("valid");
    assert_eq!(b.lp_bound, fresh.lp_bound);
    assert_eq!(b.bound, fresh.bound);
    assert_eq!(b.objective, fresh.objective);
    // Without the floor the blocks take what the requests held: the bound rises.
    assert!(
        b.lp_bound > first.lp_bound,
        "{} against {}",
        b.lp_bound,
        first.lp_bound
    );
    util::check_whole_vial_limits(&s, &b);
    assert!(b.objective <= b.bound + 1e-6 * b.bound.abs().max(1.0));
}

fn check_invariants(s: &Scenario, p: &[f64], arcs: &Arcs, a: &Allocation) {
    let (door, total) = util::check_whole_vial_limits(s, a);
    // The floor as the model keeps it (typed, not read from a note): dropped when no request
    // is reachable, lowered to what reachable requests can absorb.
    let floor = broodcast::allocate::share_floor(s, p, arcs, &AllocOptions::default())
        .expect("valid")
        .unwrap_or(0.0);
    assert!(floor <= s.policy.dooryard_share_min + 1e-12);
    assert!(
        f64::from(door) >= floor * f64::from(total) - 1e-9,
        "share floor {floor}: {door} of {total}"
    );
    assert!(a.objective <= a.bound + 1e-6 * a.bound.abs().max(1.0));
    assert!(a.bound <= a.lp_bound + 1e-6 * a.lp_bound.abs().max(1.0));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    #[test]
    fn plans_respect_every_limit(seed in 0u64..10_000, n in 1usize..80, supply in 0u32..300, share in prop::sample::select(vec![0.0, 0.1, 0.3, 0.9])) {
        let (mut s, p, mut arcs) = synthetic::generate(seed, n, supply);
        s.policy.dooryard_share_min = share;
        // Every seventh arc arrives an hour after its release-by: allocate must never use it.
        for a in arcs.arcs.iter_mut().step_by(7) {
            a.eta = a.release_by + chrono::Duration::hours(1);
        }
        let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("never an error on valid inputs");
        check_invariants(&s, &p, &arcs, &a);
    }
}

#[test]
fn zero_supply_gives_an_empty_plan_and_a_note() {
    let (s, p, arcs) = synthetic::generate(3, 50, 0);
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    assert!(a.shipments.is_empty());
    assert_eq!(a.lp_bound, 0.0);
    assert!(
        a.notes.iter().any(|n| n.kind == NoteKind::NoSupply),
        "{:?}",
        a.notes
    );
    assert!(a.sites.iter().all(|o| o.reason.is_some()));
}

#[test]
fn no_eligible_site_gives_an_empty_plan() {
    let (s, p, mut arcs) = synthetic::generate(3, 50, 100);
    arcs.arcs.clear();
    arcs.no_arc_reason = vec![Some(Reason::NoFlush); 50];
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    assert!(a.shipments.is_empty());
    assert!(
        a.sites
            .iter()
            .all(|o| o.reason == Some(Reason::NoFlush) && !o.eligible)
    );
}

#[test]
fn supply_far_above_demand_stops_at_max_release() {
    let (s, p, arcs) = synthetic::generate(5, 20, 5000);
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    check_invariants(&s, &p, &arcs, &a);
    let shipped: u32 = a.shipments.iter().map(|x| x.vials).sum();
    assert!(shipped < 5000);
    assert!(
        a.notes.iter().any(
            |n| matches!(n.kind, NoteKind::SupplyUnused { shipped, supply: 5000 } if shipped < 5000)
        ),
        "{:?}",
        a.notes
    );
    assert!(
        a.marginal_value_per_vial.iter().all(|m| *m < 1e-3),
        "{:?}",
        a.marginal_value_per_vial
    );
}

#[test]
fn a_share_floor_requests_cannot_absorb_is_lowered_so_no_vial_stays_home() {
    let (mut s, p, arcs) = synthetic::generate(8, 200, 400);
    s.policy.dooryard_share_min = 0.9;
    let opts = AllocOptions::default();
    let a = allocate(&s, &p, &arcs, &opts).expect("valid");
    check_invariants(&s, &p, &arcs, &a);
    // 0.9 of the week's vials is more than the reachable requests can take: the floor is
    // lowered to exactly what they can (k vials each over the usable supply), still binds,
    // and more vials ship than 0.9 would allow.
    let floor = broodcast::allocate::share_floor(&s, &p, &arcs, &opts)
        .expect("valid")
        .expect("kept");
    assert!(floor < 0.9, "{floor}");
    assert!(a.binding.iter().any(|b| b.name == "dooryard_share"));
    let (door, total) = util::check_whole_vial_limits(&s, &a);
    assert!(
        f64::from(total) > f64::from(door) / 0.9 + 1.0,
        "{door} dooryard vials of {total}: the 0.9 floor would have held the rest back"
    );
}

#[test]
fn share_floor_with_no_reachable_request_is_dropped_with_a_note() {
    let (mut s, p, mut arcs) = synthetic::generate(8, 100, 200);
    s.policy.dooryard_share_min = 0.2;
    let doors: Vec<bool> = s
        .sites
        .iter()
        .map(|x| x.kind() == SiteKind::Dooryard)
        .collect();
    arcs.arcs.retain(|a| !doors[a.site]);
    for (i, d) in doors.iter().enumerate() {
        if *d {
            arcs.no_arc_reason[i] = Some(Reason::OutOfReach);
        }
    }
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    assert!(
        a.notes
            .iter()
            .any(|n| n.kind == NoteKind::ShareDropped { share: 0.2 }),
        "{:?}",
        a.notes
    );
    assert!(!a.shipments.is_empty());
}

#[test]
fn facility_with_no_reachable_site_gets_zero_marginal_value() {
    let (s, p, mut arcs) = synthetic::generate(9, 100, 300);
    arcs.arcs.retain(|a| a.facility == 0);
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    check_invariants(&s, &p, &arcs, &a);
    assert!(a.shipments.iter().all(|x| x.arc.facility == 0));
    assert_eq!(a.marginal_value_per_vial[1], 0.0);
}

#[test]
fn force_forbid_and_exclusions_are_honoured() {
    let (mut s, p, arcs) = synthetic::generate(10, 150, 200);
    let base = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    // Forbid the most valuable served site; force an unserved block with arcs and priority.
    let served = base
        .sites
        .iter()
        .find(|o| o.vials > 0)
        .expect("something served")
        .site;
    let unserved = base
        .sites
        .iter()
        .find(|o| {
            o.reason == Some(Reason::BelowCutoff) && s.sites[o.site].kind() == SiteKind::Block
        })
        .expect("a block below the cutoff")
        .site;
    s.overrides = vec![
        Override {
            site: served,
            action: OverrideAction::Forbid,
        },
        Override {
            site: unserved,
            action: OverrideAction::Force { vials: None },
        },
    ];
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    check_invariants(&s, &p, &arcs, &a);
    assert_eq!(a.sites[served].vials, 0);
    assert_eq!(a.sites[served].reason, Some(Reason::Forbidden));
    assert!(a.sites[unserved].wasps_expected_alive >= s.agent.min_release_wasps);
    // Exclude every arc of one served site: it must not get those arcs again.
    let victim = a.shipments[0].arc.clone();
    let mut opts = AllocOptions::default();
    opts.excluded.insert((
        victim.facility,
        victim.dispatch_date,
        victim.site,
        victim.mode,
    ));
    let b = allocate(&s, &p, &arcs, &opts).expect("valid");
    assert!(
        b.shipments
            .iter()
            .all(|x| !(x.arc.facility == victim.facility
                && x.arc.dispatch_date == victim.dispatch_date
                && x.arc.site == victim.site
                && x.arc.mode == victim.mode))
    );
}

#[test]
fn unmeetable_force_is_relaxed_and_explained() {
    let (mut s, p, arcs) = synthetic::generate(12, 60, 30);
    let site = arcs.arcs[0].site;
    s.overrides = vec![Override {
        site,
        action: OverrideAction::Force { vials: Some(500) },
    }];
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    check_invariants(&s, &p, &arcs, &a);
    // 500 vials are more than one release within the maximum holds: the force is trimmed to
    // what exists, and what is still short (supply, capacity) is explained, never "infeasible".
    assert!(
        a.notes.iter().any(|n| matches!(
            &n.kind,
            NoteKind::ForceTrimmed { site: id, asked, most, .. }
                if *id == s.sites[site].id && *asked == 500.0 && *most < 500.0
        )),
        "{:?}",
        a.notes
    );
    assert!(!a.notes.iter().any(|n| n.text.contains("infeasible")));
}

#[test]
fn same_inputs_give_identical_plans() {
    let (s, p, arcs) = synthetic::generate(21, 300, 500);
    let a = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    let b = allocate(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    assert_eq!(a.shipments, b.shipments);
    assert_eq!(a.objective.to_bits(), b.objective.to_bits());
    assert_eq!(
        export_mps(&s, &p, &arcs, &AllocOptions::default()).expect("valid"),
        export_mps(&s, &p, &arcs, &AllocOptions::default()).expect("valid")
    );
}

#[test]
fn exported_names_follow_domain_ids() {
    let (s, p, arcs) = synthetic::generate(1, 10, 50);
    let mps = export_mps(&s, &p, &arcs, &AllocOptions::default()).expect("valid");
    assert!(mps.contains("OBJSENSE\n    MAX"));
    assert!(mps.contains(" L supply_F1_2027-03-0"));
    assert!(
        mps.lines()
            .any(|l| l.trim_start().starts_with("x_F") && l.contains("_route "))
    );
    assert!(!mps.lines().any(|l| l.contains('\t')));
}
