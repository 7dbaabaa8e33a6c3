//! Unit tests of the engine.

use super::segment::{Data, FEAS_EPS};
use super::*;

fn grid_instance(n: usize, seed: u64, vehicles: usize, cap: u32) -> Instance {
    let mut rng = fastrand::Rng::with_seed(seed);
    let pts: Vec<(f64, f64)> = (0..=n)
        .map(|i| {
            if i == 0 {
                (50.0, 50.0)
            } else {
                (rng.f64() * 100.0, rng.f64() * 100.0)
            }
        })
        .collect();
    let minutes = pts
        .iter()
        .map(|a| {
            pts.iter()
                .map(|b| ((a.0 - b.0).powi(2) + (a.1 - b.1).powi(2)).sqrt())
                .collect()
        })
        .collect();
    let customers = (0..n)
        .map(|_| {
            let e = rng.f64() * 300.0;
            Customer {
                demand_vials: rng.u32(1..=5),
                service_minutes: 10.0,
                earliest: e,
                latest: e + 60.0 + rng.f64() * 200.0,
                deadline: 10_000.0,
            }
        })
        .collect();
    Instance {
        customers,
        minutes,
        vehicles: (0..vehicles)
            .map(|_| VehicleSpec {
                capacity_vials: cap,
                start: 0.0,
                latest_return: 800.0,
            })
            .collect(),
    }
}

fn opts() -> SolveOptions {
    SolveOptions {
        time_limit: None,
        max_iterations: 200,
        ..SolveOptions::default()
    }
}

/// Independent forward check of a route: arrival, wait, window, deadline, return, load.
fn check(inst: &Instance, sol: &Solution) {
    for r in &sol.routes {
        let v = &inst.vehicles[r.vehicle];
        let mut t = v.start;
        let mut prev = 0;
        let mut load = 0;
        for &c in &r.customers {
            let cu = &inst.customers[c - 1];
            t += inst.minutes[prev][c];
            t = t.max(cu.earliest);
            assert!(t <= cu.latest + 1e-6 && t <= cu.deadline + 1e-6);
            t += cu.service_minutes;
            load += cu.demand_vials;
            prev = c;
        }
        t += inst.minutes[prev][0];
        assert!(t <= v.latest_return + 1e-6);
        assert!(load <= v.capacity_vials);
        assert!((t - r.return_at).abs() < 1e-6);
    }
}

fn brute_force_single(inst: &Instance) -> f64 {
    fn rec(inst: &Instance, order: &mut Vec<usize>, left: &mut Vec<usize>, best: &mut f64) {
        if left.is_empty() {
            let d = Data::new(inst, 1);
            let s = d.seq(order.iter().copied());
            if d.fits(0, &s) {
                *best = best.min(d.drive(&s));
            }
            return;
        }
        for k in 0..left.len() {
            let v = left.remove(k);
            order.push(v);
            rec(inst, order, left, best);
            order.pop();
            left.insert(k, v);
        }
    }
    let mut best = f64::INFINITY;
    rec(
        inst,
        &mut Vec::new(),
        &mut (1..=inst.customers.len()).collect(),
        &mut best,
    );
    best
}

#[test]
fn routes_are_feasible_and_everyone_served_when_fleet_is_ample() {
    for seed in 0..5 {
        let inst = grid_instance(40, seed, 10, 30);
        let sol = solve(&inst, &opts());
        check(&inst, &sol);
        let served: usize = sol.routes.iter().map(|r| r.customers.len()).sum();
        assert_eq!(served + sol.unserved.len(), 40);
        assert!(sol.unserved.is_empty(), "seed {seed}: {:?}", sol.unserved);
    }
}

#[test]
fn single_vehicle_matches_brute_force() {
    for seed in 0..6 {
        let mut inst = grid_instance(7, seed, 1, 100);
        for c in &mut inst.customers {
            c.earliest = 0.0;
            c.latest = 1000.0;
        }
        inst.vehicles[0].latest_return = 10_000.0;
        let sol = solve(&inst, &opts());
        let opt = brute_force_single(&inst);
        assert!(
            sol.total_drive_minutes <= opt + 1e-6,
            "{} vs {opt}",
            sol.total_drive_minutes
        );
    }
}

#[test]
fn impossible_customers_are_reported_with_reasons() {
    let mut inst = grid_instance(6, 3, 1, 10);
    for c in &mut inst.customers {
        c.earliest = 0.0;
        c.latest = 1000.0;
        c.demand_vials = 1;
    }
    inst.customers[0].demand_vials = 50; // more than the vehicle holds
    inst.customers[1].deadline = -1.0; // deadline before departure
    inst.customers[2].earliest = 2000.0; // opens after the shift ends
    inst.customers[2].latest = 2100.0;
    let sol = solve(&inst, &opts());
    check(&inst, &sol);
    assert_eq!(
        sol.unserved,
        vec![
            (1, Infeasibility::Capacity),
            (2, Infeasibility::Deadline),
            (3, Infeasibility::Shift)
        ]
    );
}

#[test]
fn no_vehicles_and_no_customers() {
    let mut inst = grid_instance(3, 1, 0, 10);
    let sol = solve(&inst, &opts());
    assert_eq!(sol.unserved.len(), 3);
    assert!(sol.unserved.iter().all(|&(_, r)| r == Infeasibility::Shift));
    inst.customers.clear();
    inst.minutes = vec![vec![0.0]];
    inst.vehicles = vec![VehicleSpec {
        capacity_vials: 1,
        start: 0.0,
        latest_return: 1.0,
    }];
    let sol = solve(&inst, &opts());
    assert!(sol.routes.is_empty() && sol.unserved.is_empty());
}

#[test]
fn deterministic_for_a_seed() {
    let inst = grid_instance(60, 9, 8, 25);
    assert_eq!(solve(&inst, &opts()), solve(&inst, &opts()));
}

/// Without a wall-clock limit the starts run in parallel; with one that never binds they run in
/// turn. Both must give the same routes (each start's seed and the order of comparison are the
/// same), on instances where the starts end at different solutions.
#[test]
fn starts_in_parallel_give_the_routes_of_starts_in_turn() {
    // On seeds 2, 4 and 5 the routes depend on the second (penalised) start: a parallel path
    // that ran the first start twice went red on them (checked 2026-12-04).
    for seed in 1..=6 {
        let inst = grid_instance(40 + seed as usize, seed, 8, 15);
        let parallel = solve(&inst, &opts());
        let in_turn = solve(
            &inst,
            &SolveOptions {
                time_limit: Some(std::time::Duration::from_secs(3_600)),
                ..opts()
            },
        );
        assert!(!in_turn.time_limited);
        assert_eq!(parallel, in_turn, "seed {seed}");
    }
}

/// 1 to `n` of the customers 1..=n, in random order.
fn random_run(rng: &mut fastrand::Rng, n: usize) -> Vec<usize> {
    let mut order: Vec<usize> = (1..=n).collect();
    rng.shuffle(&mut order);
    order.truncate(rng.usize(1..=n));
    order
}

#[test]
fn segment_concatenation_matches_forward_simulation() {
    let inst = grid_instance(12, 4, 1, 100);
    let d = Data::new(&inst, 3);
    let mut rng = fastrand::Rng::with_seed(5);
    for _ in 0..200 {
        let order = random_run(&mut rng, 12);
        let s = d.with_depot(0, &d.seq(order.iter().copied()));
        // Forward: depart at start, wait when early; feasible iff no lateness.
        let mut t = 0.0;
        let mut prev = 0;
        let mut ok = true;
        for &c in &order {
            let cu = &inst.customers[c - 1];
            t = (t + inst.minutes[prev][c]).max(cu.earliest);
            ok &= t <= cu.latest + 1e-9;
            t += cu.service_minutes;
            prev = c;
        }
        t += inst.minutes[prev][0];
        ok &= t <= 800.0 + 1e-9;
        assert_eq!(ok, s.tw <= FEAS_EPS, "{order:?}");
    }
}

#[test]
fn the_depot_legs_shortcut_gives_the_full_segment_drive_and_warp_bit_for_bit() {
    // `Data::depot_dist_warp` (every fits and lateness verdict) must equal the drive and time
    // warp of the full segment algebra, `Data::with_depot`, bit for bit: the route search
    // compares them with tolerances, so a rounding difference could change routes.
    let mut inst = grid_instance(14, 7, 4, 60);
    // Vehicles with their own departure and end of shift, one whose shift ends before it
    // starts (a warp at the depot itself), and an unusable arc.
    let shifts = [(0.0, 800.0), (90.0, 400.0), (300.0, 310.0), (500.0, 450.0)];
    for (v, &(start, end)) in inst.vehicles.iter_mut().zip(&shifts) {
        v.start = start;
        v.latest_return = end;
    }
    inst.minutes[3][0] = f64::INFINITY;
    let d = Data::new(&inst, 3);
    let mut rng = fastrand::Rng::with_seed(11);
    for _ in 0..2_000 {
        let order = random_run(&mut rng, 14);
        let body = d.seq(order.iter().copied());
        for v in 0..inst.vehicles.len() {
            let full = d.with_depot(v, &body);
            let (dist, warp) = d.depot_dist_warp(v, &body);
            assert_eq!(dist.to_bits(), full.dist.to_bits(), "{order:?} on {v}");
            assert_eq!(warp.to_bits(), full.tw.to_bits(), "{order:?} on {v}");
        }
    }
}

#[test]
fn the_warp_floor_never_exceeds_the_warp_of_any_vehicle() {
    // The moves drop a candidate whose penalty floor (`Data::warp_floor`) already rules it
    // out, so the floor must never exceed the time warp the full algebra gives any vehicle
    // for the same run, or the search would lose moves it takes today. Shifts of different
    // lengths and starts, service times of 5–40 minutes and short shifts, so that most runs
    // are late on some vehicle and the floor is often positive.
    let mut inst = grid_instance(14, 21, 3, 60);
    let shifts = [(0.0, 300.0), (60.0, 260.0), (100.0, 250.0)];
    for (v, &(start, end)) in inst.vehicles.iter_mut().zip(&shifts) {
        v.start = start;
        v.latest_return = end;
    }
    let mut rng = fastrand::Rng::with_seed(23);
    for c in &mut inst.customers {
        c.service_minutes = 5.0 + rng.f64() * 35.0;
    }
    let d = Data::new(&inst, 3);
    let (mut positive, mut tight) = (0, 0);
    for _ in 0..3_000 {
        let order = random_run(&mut rng, 14);
        let body = d.seq(order.iter().copied());
        let service: f64 = order.iter().map(|&i| d.customer(i).service_minutes).sum();
        let floor = d.warp_floor(d.drive(&body), service);
        if floor > 0.0 {
            positive += 1;
        }
        for v in 0..inst.vehicles.len() {
            let (_, warp) = d.depot_dist_warp(v, &body);
            assert!(
                warp >= floor,
                "{order:?} on {v}: warp {warp} below floor {floor}"
            );
            // The longest shift (vehicle 0) with no waiting: the floor is its warp.
            if v == 0 && floor > 0.0 && warp - floor < 1e-5 {
                tight += 1;
            }
        }
    }
    assert!(
        positive > 1_000,
        "only {positive} runs with a positive floor"
    );
    assert!(tight > 20, "only {tight} runs where the floor is the warp");
}

#[test]
fn the_penalty_floor_only_drops_moves_the_full_check_would_reject() {
    // With the floor switched off (an infinite longest shift makes every floor 0) every
    // customer must find the same first improving move, every unrouted customer the same
    // cheapest place, and the descent the same local optimum: the floor may save work, never
    // change a verdict. Random routes on short shifts under a finite penalty weight, as in
    // the penalised starts, so that most routes are late; once with the grid's windows and
    // once with none, where a late route's warp is all shift and the floor is exact.
    let mut windows = grid_instance(30, 5, 6, 40);
    for (v, spec) in windows.vehicles.iter_mut().enumerate() {
        spec.start = 20.0 * v as f64;
        spec.latest_return = 380.0 + 30.0 * v as f64;
    }
    let mut open = windows.clone();
    for c in &mut open.customers {
        (c.earliest, c.latest, c.deadline) = (0.0, 10_000.0, 10_000.0);
    }
    let mut rng = fastrand::Rng::with_seed(17);
    let (mut moves, mut placed) = (0, 0);
    for inst in [&windows, &open] {
        let with = Data::new(inst, 8);
        let mut without = Data::new(inst, 8);
        without.longest_shift = f64::INFINITY;
        for _ in 0..100 {
            let mut order: Vec<usize> = (1..=30).collect();
            rng.shuffle(&mut order);
            // Four routes of random customers on random vehicles; the rest unrouted.
            let mut vehicles: Vec<usize> = (0..6).collect();
            rng.shuffle(&mut vehicles);
            let routes: Vec<(usize, Vec<usize>)> = order
                .chunks(6)
                .take(4)
                .zip(&vehicles)
                .map(|(nodes, &v)| (v, nodes.to_vec()))
                .collect();
            let weight = [0.2, 1.0, 5.0][rng.usize(0..3)];
            let state = |data| {
                let mut s = state::State::empty(data);
                s.tw_weight = weight;
                s.apply(state::Move(routes.clone()));
                s
            };
            let (mut a, mut b) = (state(&with), state(&without));
            for u in 1..=30 {
                if a.at[u].is_some() {
                    let (ma, mb) = (a.find_move(u), b.find_move(u));
                    assert_eq!(ma.as_ref().map(|m| &m.0), mb.as_ref().map(|m| &m.0), "{u}");
                    moves += usize::from(ma.is_some());
                } else {
                    for r in 0..6 {
                        let others = a.empty_kinds(&[r]);
                        let place = |s: &state::State<'_>| {
                            s.best_insert_among(r, u, &others)
                                .map(|(cost, k, v)| (cost.to_bits(), k, v))
                        };
                        assert_eq!(place(&a), place(&b), "{u} into {r}");
                        placed += usize::from(place(&a).is_some());
                    }
                }
            }
            // The whole descent to a local optimum, where the moves left are small.
            a.local_search(None);
            b.local_search(None);
            let routes =
                |s: &state::State<'_>| s.routes.iter().map(|r| r.nodes.clone()).collect::<Vec<_>>();
            assert_eq!(routes(&a), routes(&b));
        }
    }
    assert!(
        moves > 100 && placed > 100,
        "{moves} moves, {placed} places: too few"
    );
}

#[test]
fn drive_priced_without_windows_equals_drive_of_concatenation() {
    // Moves are priced by `drive_cat` before their windows are checked; it must give exactly
    // (bit for bit) the drive of the concatenated segment, or the search would change.
    let inst = grid_instance(12, 9, 1, 100);
    let d = Data::new(&inst, 3);
    let mut rng = fastrand::Rng::with_seed(6);
    for _ in 0..300 {
        let mut order: Vec<usize> = (1..=12).collect();
        rng.shuffle(&mut order);
        let cut1 = rng.usize(0..=12);
        let cut2 = rng.usize(cut1..=12);
        let parts = [
            d.seq(order[..cut1].iter().copied()),
            d.seq(order[cut1..cut2].iter().copied()),
            d.seq(order[cut2..].iter().copied()),
        ];
        let refs = [&parts[0], &parts[1], &parts[2]];
        let whole = d.drive(&d.cat_all(&refs));
        assert_eq!(d.drive_cat(&refs).to_bits(), whole.to_bits(), "{order:?}");
    }
}

#[test]
fn split_hands_the_tail_to_an_unused_vehicle() {
    // Four stops on a line, ample windows: one route 1-2-3-4 on vehicle 0.
    let stop = Customer {
        demand_vials: 1,
        service_minutes: 1.0,
        earliest: 0.0,
        latest: 500.0,
        deadline: 500.0,
    };
    let pos = [0.0, 1.0, 2.0, 3.0, 4.0];
    let inst = |vehicles: usize| Instance {
        customers: vec![stop.clone(); 4],
        minutes: pos
            .iter()
            .map(|a| pos.iter().map(|b| f64::abs(a - b)).collect())
            .collect(),
        vehicles: vec![
            VehicleSpec {
                capacity_vials: 10,
                start: 0.0,
                latest_return: 600.0,
            };
            vehicles
        ],
    };
    let two = inst(2);
    let d = Data::new(&two, 3);
    let mut s = state::State::empty(&d);
    s.insert(0, 0, 1, 0);
    s.insert(0, 1, 2, 0);
    s.insert(0, 2, 3, 0);
    s.insert(0, 3, 4, 0);
    let mut changed = vec![false; 2];
    s.split(3, &mut changed);
    assert_eq!(s.routes[0].nodes, vec![1, 2]);
    assert_eq!(s.routes[1].nodes, vec![3, 4]);
    assert_eq!(changed, vec![true, true]);
    assert_eq!(s.at[3], Some((1, 0)));
    // With no unused vehicle nothing changes.
    let one = inst(1);
    let d = Data::new(&one, 3);
    let mut s = state::State::empty(&d);
    for (k, u) in [1, 2, 3, 4].into_iter().enumerate() {
        s.insert(0, k, u, 0);
    }
    let mut changed = vec![false];
    s.split(3, &mut changed);
    assert_eq!(s.routes[0].nodes, vec![1, 2, 3, 4]);
    assert_eq!(changed, vec![false]);
}

/// Three stops on a line, the depot at 0: stop 1 at 10 (window 25–26), stop 2 at 20 (window
/// 0–1000), stop 3 at 30 (window 0–35); one vehicle, no service time.
fn line_instance() -> Instance {
    let pos = [0.0f64, 10.0, 20.0, 30.0];
    let stop = |earliest: f64, latest: f64| Customer {
        demand_vials: 1,
        service_minutes: 0.0,
        earliest,
        latest,
        deadline: 10_000.0,
    };
    Instance {
        customers: vec![stop(25.0, 26.0), stop(0.0, 1000.0), stop(0.0, 35.0)],
        minutes: pos
            .iter()
            .map(|a| pos.iter().map(|b| f64::abs(a - b)).collect())
            .collect(),
        vehicles: vec![VehicleSpec {
            capacity_vials: 10,
            start: 0.0,
            latest_return: 1000.0,
        }],
    }
}

#[test]
fn a_late_route_is_priced_by_its_time_warp_only_under_a_finite_weight() {
    let inst = line_instance();
    let d = Data::new(&inst, 2);
    // 2 then 1: at 1 by 30, 4 after its window closes. 1 then 2 waits at 1 and fits.
    let late = d.seq([2, 1]);
    let mut s = state::State::empty(&d);
    assert_eq!(s.pen(0, &late), None);
    assert_eq!(s.pen(0, &d.seq([1, 2])), Some(0.0));
    s.tw_weight = 2.0;
    assert_eq!(s.pen(0, &late), Some(8.0));
    assert_eq!(s.pen(0, &d.seq([1, 2])), Some(0.0));
    // Capacity stays hard whatever the weight.
    let mut small = inst.clone();
    small.vehicles[0].capacity_vials = 1;
    let ds = Data::new(&small, 2);
    let mut t = state::State::empty(&ds);
    t.tw_weight = 2.0;
    assert_eq!(t.pen(0, &ds.seq([1, 2])), None);
}

#[test]
fn insertion_under_a_finite_weight_takes_the_cheapest_late_place() {
    let inst = line_instance();
    let d = Data::new(&inst, 2);
    let mut s = state::State::empty(&d);
    // Route 3, 2 (at 3 by 30, at 2 by 40, back by 60). Stop 1 is late wherever it goes:
    // first, 3 is late by 10 (drive +0); after 3 or after 2, 1 is late by 24 (+20, +0).
    s.insert(0, 0, 3, 0);
    s.insert(0, 1, 2, 0);
    assert_eq!(s.routes[0].late, 0.0);
    assert_eq!(s.best_insert(0, 1), None);
    s.tw_weight = 0.5;
    assert_eq!(s.best_insert(0, 1), Some((5.0, 0, 0)));
    s.insert(0, 0, 1, 0);
    assert_eq!(s.routes[0].late, 10.0);
    assert!(!s.feasible());
    assert_eq!(s.total_cost(), 65.0);
}

#[test]
fn penalised_search_only_keeps_routes_that_fit() {
    // Tight windows (30 minutes, opening from 100 so each stop fits alone): many local optima
    // of a penalised round are late, so a best that took them would show here.
    for seed in 1..=4 {
        let mut inst = grid_instance(40, seed, 40, 30);
        for c in &mut inst.customers {
            c.earliest += 100.0;
            c.latest = c.earliest + 30.0;
        }
        let d = Data::new(&inst, 8);
        let mut first = state::State::empty(&d);
        let order: Vec<usize> = (0..inst.vehicles.len()).collect();
        first.construct(&order);
        first.local_search(None);
        assert!(first.unserved.is_empty(), "seed {seed}: the fleet is ample");
        let mut rng = fastrand::Rng::with_seed(seed);
        let best = search::ils(
            first.clone(),
            &mut rng,
            400,
            search::Stall::fresh(400),
            std::time::Instant::now(),
            &opts(),
            true,
        )
        .best;
        assert!(best.feasible(), "seed {seed}");
        assert!(
            !first.key_lt(&best),
            "seed {seed}: never worse than the start"
        );
        let sol = best.into_solution();
        assert!(sol.unserved.is_empty());
        check(&inst, &sol);
    }
}

#[test]
fn the_stall_count_carries_into_a_continued_search() {
    let inst = grid_instance(30, 3, 6, 40);
    let d = Data::new(&inst, 8);
    let mut first = state::State::empty(&d);
    let order: Vec<usize> = (0..inst.vehicles.len()).collect();
    first.construct(&order);
    first.local_search(None);
    let run = |stall: search::Stall| {
        let mut rng = fastrand::Rng::with_seed(7);
        search::ils(
            first.clone(),
            &mut rng,
            500,
            stall,
            std::time::Instant::now(),
            &opts(),
            false,
        )
    };
    // A search handed a spent count runs no round: it returns its start.
    let spent = run(search::Stall {
        limit: 40,
        without_best: 40,
    });
    assert_eq!(spent.without_best, 40);
    assert_eq!(spent.best.key(), first.key());
    // Counted afresh it runs until 40 rounds in a row found nothing new (or all 500 ran).
    let fresh = run(search::Stall::fresh(40));
    assert!(fresh.without_best <= 40);
    // Half spent, it stops after at most 20 more rounds without a new best, having run at
    // most as far as the fresh search before its first new best.
    let half = run(search::Stall {
        limit: 40,
        without_best: 20,
    });
    assert!(half.without_best <= 40);
    assert!(
        !half.best.key_lt(&fresh.best),
        "a shorter search never beats the longer one"
    );
}

#[test]
fn a_search_that_leaves_stops_out_goes_on_with_a_fresh_count() {
    // Ten stops of 30 vials and one 40-vial van: it carries one stop.
    let inst = grid_instance(10, 5, 1, 40);
    let inst = Instance {
        customers: inst
            .customers
            .iter()
            .map(|c| Customer {
                demand_vials: 30,
                ..c.clone()
            })
            .collect(),
        ..inst
    };
    let d = Data::new(&inst, 8);
    let mut short = state::State::empty(&d);
    short.construct(&[0]);
    assert!(!short.unserved.is_empty());
    assert_eq!(search::Stall::going_on(50, &short, 30).without_best, 0);
    let roomy = grid_instance(10, 5, 4, 400);
    let d = Data::new(&roomy, 8);
    let mut all = state::State::empty(&d);
    all.construct(&[0, 1, 2, 3]);
    assert!(all.unserved.is_empty());
    assert_eq!(search::Stall::going_on(50, &all, 30).without_best, 30);
}

#[test]
fn a_symmetric_matrix_skips_the_reversal_sum_and_changes_no_move() {
    // On a matrix equal to its transpose bit for bit (Euclidean here, geodesic in a plan) a
    // reversed stretch drives exactly as far as the stretch forward, so the 2-opt inside a
    // route skips that sum (`Data::symmetric`). Every first move and the whole descent must
    // be those of the sum; a matrix off by one entry, or with an unreachable pair, must not
    // count as symmetric.
    let inst = grid_instance(30, 7, 6, 40);
    let with = Data::new(&inst, 8);
    assert!(with.symmetric);
    let mut without = Data::new(&inst, 8);
    without.symmetric = false;
    let mut rng = fastrand::Rng::with_seed(29);
    let mut moves = 0;
    for _ in 0..100 {
        let mut order: Vec<usize> = (1..=30).collect();
        rng.shuffle(&mut order);
        // Three long routes of random customers: long stretches to reverse.
        let routes: Vec<(usize, Vec<usize>)> = order
            .chunks(10)
            .enumerate()
            .map(|(v, nodes)| (v, nodes.to_vec()))
            .collect();
        let state = |data| {
            let mut s = state::State::empty(data);
            s.tw_weight = 1.0;
            s.apply(state::Move(routes.clone()));
            s
        };
        let (mut a, mut b) = (state(&with), state(&without));
        for u in 1..=30 {
            let (ma, mb) = (a.find_move(u), b.find_move(u));
            assert_eq!(ma.as_ref().map(|m| &m.0), mb.as_ref().map(|m| &m.0), "{u}");
            moves += usize::from(ma.is_some());
        }
        a.local_search(None);
        b.local_search(None);
        let routes =
            |s: &state::State<'_>| s.routes.iter().map(|r| r.nodes.clone()).collect::<Vec<_>>();
        assert_eq!(routes(&a), routes(&b));
    }
    assert!(moves > 100, "{moves} moves: too few");
    let mut skewed = inst.clone();
    skewed.minutes[3][4] += 1e-9;
    assert!(!Data::new(&skewed, 8).symmetric);
    let mut cut = inst.clone();
    (cut.minutes[3][4], cut.minutes[4][3]) = (f64::INFINITY, f64::INFINITY);
    assert!(!Data::new(&cut, 8).symmetric);
}
