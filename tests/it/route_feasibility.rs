//! Every route feasible for the vehicle that drives it, on heterogeneous fleets.
//!
//! Two independent checkers, written here from the inputs and sharing no code with the
//! solver: one re-simulates a [`Solution`] from its [`Instance`], the other re-simulates a
//! [`Dispatch`] route sheet from the scenario (the vehicle's own shift start and shift hours,
//! its capacity and running days, each site's window, and a release-by recomputed from the
//! pack time plus the shelf life, not copied from the manifest). They are run on property
//! tests with mixed capacities, shift starts, shift lengths and running days, on planned
//! generated weeks, and on the hand-built regression case of the tail-exchange defect.

use crate::util;

use std::collections::BTreeSet;

use broodcast::allocate::{Allocation, Shipment};
use broodcast::arcs::{Arc, Mode};
use broodcast::dispatch::vrptw::{Customer, Instance, Solution, SolveOptions, VehicleSpec, solve};
use broodcast::dispatch::{Dispatch, DispatchOptions, dispatch_with};
use broodcast::plan::{self, PlanOptions};
use broodcast::scenario::{Scenario, Vehicle, VehicleId, fixture};
use broodcast::travel::{Place, TravelModel, TravelTimes};
use chrono::{Datelike, Duration, NaiveDateTime, NaiveTime, Weekday};
use proptest::prelude::*;

/// Tolerance of the re-simulation, minutes (sums of floats).
const TOL: f64 = 1e-6;

/// Re-simulates every route of `sol` from `inst`: depart at the vehicle's start, drive, wait
/// for the window, start no later than min(window close, deadline), back by the vehicle's own
/// latest return, load within its capacity; every customer served at most once and every
/// customer either routed or reported; reported times and drive match. Returns the problems
/// found (empty when all is well).
fn problems_in_solution(inst: &Instance, sol: &Solution) -> Vec<String> {
    let mut out = Vec::new();
    let mut seen = BTreeSet::new();
    let mut used = BTreeSet::new();
    let mut total = 0.0;
    for (ri, r) in sol.routes.iter().enumerate() {
        let Some(v) = inst.vehicles.get(r.vehicle) else {
            out.push(format!("route {ri}: no vehicle {}", r.vehicle));
            continue;
        };
        if !used.insert(r.vehicle) {
            out.push(format!("route {ri}: vehicle {} drives twice", r.vehicle));
        }
        if r.depart < v.start - TOL {
            out.push(format!(
                "route {ri}: leaves {} before start {}",
                r.depart, v.start
            ));
        }
        let (mut t, mut prev, mut load, mut drive) = (v.start, 0usize, 0u64, 0.0);
        for &c in &r.customers {
            if !seen.insert(c) {
                out.push(format!("customer {c} twice"));
            }
            let cu = &inst.customers[c - 1];
            drive += inst.minutes[prev][c];
            t = (t + inst.minutes[prev][c]).max(cu.earliest);
            if t > cu.latest + TOL || t > cu.deadline + TOL {
                out.push(format!(
                    "route {ri}: customer {c} starts at {t}, window ends {} deadline {}",
                    cu.latest, cu.deadline
                ));
            }
            t += cu.service_minutes;
            load += u64::from(cu.demand_vials);
            prev = c;
        }
        drive += inst.minutes[prev][0];
        t += inst.minutes[prev][0];
        total += drive;
        if t > v.latest_return + TOL {
            out.push(format!(
                "route {ri}: vehicle {} back at {t}, its shift ends {}",
                r.vehicle, v.latest_return
            ));
        }
        if load > u64::from(v.capacity_vials) {
            out.push(format!(
                "route {ri}: {load} vials on vehicle {} of {}",
                r.vehicle, v.capacity_vials
            ));
        }
        if (t - r.return_at).abs() > TOL || (drive - r.drive_minutes).abs() > TOL {
            out.push(format!("route {ri}: reported return or drive differs"));
        }
    }
    for &(c, _) in &sol.unserved {
        if !seen.insert(c) {
            out.push(format!("customer {c} routed and unserved"));
        }
    }
    if seen.len() != inst.customers.len() {
        out.push("a customer is neither routed nor reported".into());
    }
    if (total - sol.total_drive_minutes).abs() > 1e-6 * total.max(1.0) {
        out.push("total drive differs".into());
    }
    out
}

/// Release-by recomputed from the scenario: pack day at the pack time, plus the shelf life.
fn release_by(s: &Scenario, sh: &Shipment) -> NaiveDateTime {
    sh.arc.pack_date.and_time(s.agent.pack_time)
        + Duration::milliseconds((s.agent.shelf_life_hours * 3_600_000.0).round() as i64)
}

fn minutes(a: NaiveDateTime, b: NaiveDateTime) -> f64 {
    (b - a).num_milliseconds() as f64 / 60_000.0
}

/// Re-simulates every route sheet of `d` from the scenario and the travel model. Per route:
/// the vehicle exists, belongs to the depot and runs that weekday; it leaves no earlier than
/// its shift start; it is back by its own shift start + shift hours; vials within its
/// capacity. Per visit: arrival by the travel model, service inside the site's window and no
/// later than the recomputed release-by. Every shipment at most once. Returns the problems.
fn problems_in_dispatch(s: &Scenario, alloc: &Allocation, d: &Dispatch) -> Vec<String> {
    let travel = TravelModel::new(s);
    let mut out = Vec::new();
    let mut seen = BTreeSet::new();
    let mut driving = BTreeSet::new();
    for r in &d.routes {
        let Some(v) = s.fleet.get(r.vehicle) else {
            out.push(format!("{}: no vehicle {}", r.id, r.vehicle));
            continue;
        };
        if !driving.insert((r.vehicle, r.date)) {
            out.push(format!(
                "{}: vehicle {} drives twice that day",
                r.id, v.id.0
            ));
        }
        if v.depot != r.depot {
            out.push(format!(
                "{}: vehicle {} belongs to another depot",
                r.id, v.id.0
            ));
        }
        if !v.days.contains(&r.date.weekday()) {
            out.push(format!(
                "{}: vehicle {} does not run on {}",
                r.id, v.id.0, r.date
            ));
        }
        let shift_start = r.date.and_time(v.shift_start);
        let shift_end = shift_start + ms(v.shift_hours * 60.0);
        if r.depart < shift_start {
            out.push(format!(
                "{}: leaves {} before {shift_start}",
                r.id, r.depart
            ));
        }
        let vials: u64 = r.stops.iter().map(|st| u64::from(st.vials)).sum();
        if vials > u64::from(v.capacity_vials) {
            out.push(format!(
                "{}: {vials} vials on {} of {}",
                r.id, v.id.0, v.capacity_vials
            ));
        }
        // t: end of the last service (departure at first); a second shipment to the same
        // site is the same visit.
        let mut t = r.depart;
        let mut prev = Place::Facility(r.depot);
        let mut last_site = None;
        for st in &r.stops {
            let sh = &alloc.shipments[st.shipment];
            if !seen.insert(st.shipment) {
                out.push(format!("{}: shipment {} twice", r.id, st.shipment));
            }
            if sh.arc.mode != Mode::Route || sh.arc.site != st.site || sh.vials != st.vials {
                out.push(format!("{}: stop does not match its shipment", r.id));
            }
            let site = &s.sites[st.site];
            let (open, close, svc) = match site.as_block() {
                Some(b) => (
                    b.access_start,
                    b.access_end,
                    s.dispatch.service_minutes_block,
                ),
                None => (
                    s.dispatch.dooryard_window_start,
                    s.dispatch.dooryard_window_end,
                    s.dispatch.service_minutes_dooryard,
                ),
            };
            let (open, close) = (r.date.and_time(open), r.date.and_time(close));
            if last_site != Some(st.site) {
                let arrival = t + ms(travel.minutes(prev, Place::Site(st.site)));
                let start = arrival.max(open);
                if minutes(arrival, st.arrival).abs() > 0.01
                    || minutes(start, st.service_start).abs() > 0.01
                {
                    out.push(format!("{}: times at {} differ", r.id, site.id));
                }
                if start > close {
                    out.push(format!("{}: {} served after its window", r.id, site.id));
                }
                t = start + ms(svc);
                prev = Place::Site(st.site);
                last_site = Some(st.site);
            }
            let by = release_by(s, sh);
            if st.service_start > by + Duration::milliseconds(1) {
                out.push(format!(
                    "{}: {} served {} after release-by {by}",
                    r.id, site.id, st.service_start
                ));
            }
        }
        let back = t + ms(travel.minutes(prev, Place::Facility(r.depot)));
        if minutes(back, r.return_at).abs() > 0.01 {
            out.push(format!(
                "{}: return {} differs from {back}",
                r.id, r.return_at
            ));
        }
        if back > shift_end + Duration::seconds(1) {
            out.push(format!(
                "{}: vehicle {} back at {back}, its shift ends {shift_end}",
                r.id, v.id.0
            ));
        }
    }
    for p in &d.parcels {
        if !seen.insert(p.shipment) {
            out.push(format!("parcel shipment {} twice", p.shipment));
        }
    }
    for u in &d.undeliverable {
        if !seen.insert(u.shipment) {
            out.push(format!("undeliverable shipment {} twice", u.shipment));
        }
    }
    if seen.len() != alloc.shipments.len() {
        out.push("a shipment is neither routed, mailed nor reported".into());
    }
    out
}

fn ms(minutes: f64) -> Duration {
    Duration::milliseconds((minutes * 60_000.0).round() as i64)
}

// ---------------------------------------------------------------------------------------------
// Regression: the tail exchange judged route a with vehicle b's end of shift

/// The smallest case the property test below found with the defect put back (integer
/// times): vehicle 0 leaves at 30 and must be back by 120, vehicle 1 leaves at 60 and must be
/// back by 240. The defective tail exchange put customers 3 then 1 on vehicle 0, back at 227,
/// because the new route's return was judged by vehicle 1's end of shift. The only feasible
/// answer: customer 3 alone on vehicle 0 (back at 119), customer 1 alone on vehicle 1 (back
/// at 201), customer 2 unserved (its window closes at 54, before either vehicle can arrive).
#[test]
fn tail_exchange_route_is_back_by_its_own_vehicles_shift_end() {
    let stop = |demand_vials, service_minutes, earliest, latest, deadline| Customer {
        demand_vials,
        service_minutes,
        earliest,
        latest,
        deadline,
    };
    let inst = Instance {
        customers: vec![
            stop(3, 14.0, 140.0, 200.0, 184.0),
            stop(8, 7.0, 44.0, 54.0, f64::INFINITY),
            stop(2, 3.0, 64.0, 124.0, 128.0),
        ],
        minutes: vec![
            vec![0.0, 47.0, 35.0, 43.0],
            vec![47.0, 0.0, 73.0, 90.0],
            vec![35.0, 73.0, 0.0, 40.0],
            vec![43.0, 90.0, 40.0, 0.0],
        ],
        vehicles: vec![
            VehicleSpec {
                capacity_vials: 12,
                start: 30.0,
                latest_return: 120.0,
            },
            VehicleSpec {
                capacity_vials: 35,
                start: 60.0,
                latest_return: 240.0,
            },
        ],
    };
    for (seed, rounds) in [(1, 0), (1, 50), (7, 50)] {
        let sol = solve(
            &inst,
            &SolveOptions {
                seed,
                max_iterations: rounds,
                ..SolveOptions::default()
            },
        );
        let p = problems_in_solution(&inst, &sol);
        assert!(p.is_empty(), "seed {seed}, {rounds} rounds: {p:?}");
        let routes: Vec<(usize, Vec<usize>)> = sol
            .routes
            .iter()
            .map(|r| (r.vehicle, r.customers.clone()))
            .collect();
        assert_eq!(routes, vec![(0, vec![3]), (1, vec![1])]);
        assert_eq!(
            sol.unserved.iter().map(|u| u.0).collect::<Vec<_>>(),
            vec![2]
        );
    }
}

// ---------------------------------------------------------------------------------------------
// Property tests on abstract instances with mixed fleets

/// A random instance: points on a 100 × 100 grid (drive = distance), windows from tight to
/// the whole day, some deadlines, and vehicles of mixed capacity, start and shift length.
fn mixed_instance(seed: u64, n: usize, fleet: usize) -> Instance {
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
        .map(|a| pts.iter().map(|b| (a.0 - b.0).hypot(a.1 - b.1)).collect())
        .collect();
    let customers = (0..n)
        .map(|_| {
            let e = rng.f64() * 400.0;
            Customer {
                demand_vials: rng.u32(1..=8),
                service_minutes: f64::from(rng.u32(2..=15)),
                earliest: e,
                latest: e + [10.0, 60.0, 240.0, 600.0][rng.usize(..4)],
                deadline: if rng.u8(..4) == 0 {
                    e + rng.f64() * 200.0
                } else {
                    f64::INFINITY
                },
            }
        })
        .collect();
    let vehicles = (0..fleet)
        .map(|_| {
            let start = [0.0, 30.0, 60.0, 120.0][rng.usize(..4)];
            VehicleSpec {
                capacity_vials: [6, 12, 20, 35][rng.usize(..4)],
                start,
                latest_return: start + [90.0, 180.0, 300.0, 480.0][rng.usize(..4)],
            }
        })
        .collect();
    Instance {
        customers,
        minutes,
        vehicles,
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn mixed_fleet_routes_fit_their_own_vehicles(
        seed in any::<u64>(),
        n in 2usize..45,
        fleet in 1usize..7,
        search in any::<u64>(),
    ) {
        let inst = mixed_instance(seed, n, fleet);
        let sol = solve(&inst, &SolveOptions {
            seed: search,
            max_iterations: 40,
            ..SolveOptions::default()
        });
        let p = problems_in_solution(&inst, &sol);
        prop_assert!(p.is_empty(), "{:?}", p);
    }
}

// ---------------------------------------------------------------------------------------------
// Property tests on route sheets: the fixture scenario with a random mixed fleet

fn random_fleet(rng: &mut fastrand::Rng) -> Vec<Vehicle> {
    let all = [
        Weekday::Mon,
        Weekday::Tue,
        Weekday::Wed,
        Weekday::Thu,
        Weekday::Fri,
    ];
    (0..rng.usize(3..=8))
        .map(|i| Vehicle {
            id: VehicleId(format!("V{}", i + 1)),
            depot: rng.usize(0..2),
            days: all.iter().copied().filter(|_| rng.u8(..3) > 0).collect(),
            capacity_vials: rng.u32(4..=30),
            shift_start: NaiveTime::from_hms_opt(rng.u32(6..=11), 30 * rng.u32(0..2), 0)
                .expect("time"),
            shift_hours: [0.75, 1.0, 1.5, 2.0, 3.0, 6.0][rng.usize(..6)],
        })
        .collect()
}

fn random_allocation(s: &Scenario, rng: &mut fastrand::Rng) -> Allocation {
    let sites = ["B1", "B2", "B3", "B4", "B6", "R1", "R2", "R4"];
    let mut shipments: Vec<Shipment> = (0..rng.usize(1..=16))
        .map(|_| {
            let facility = rng.usize(0..2);
            let date = s.week_start + chrono::Days::new(rng.u64(0..5));
            let pack_date = date - chrono::Days::new(rng.u64(0..=3));
            let site = s.site_idx(sites[rng.usize(..sites.len())]).expect("site");
            let packed = pack_date.and_time(s.agent.pack_time);
            Shipment {
                arc: Arc {
                    facility,
                    pack_date,
                    dispatch_date: date,
                    site,
                    mode: Mode::Route,
                    eta: packed,
                    release_by: packed
                        + Duration::milliseconds(
                            (s.agent.shelf_life_hours * 3_600_000.0).round() as i64
                        ),
                    survival: 1.0,
                    wasps_alive_per_vial: 100.0,
                    drive_minutes: 0.0,
                },
                vials: rng.u32(1..=9),
            }
        })
        .collect();
    shipments.sort_by_key(Shipment::order_key);
    shipments.dedup_by_key(|sh| sh.order_key());
    Allocation {
        shipments,
        sites: Vec::new(),
        lp_bound: 0.0,
        bound: 0.0,
        objective: 0.0,
        gap: 0.0,
        marginal_value_per_vial: Vec::new(),
        binding: Vec::new(),
        notes: Vec::new(),
        working_set: Vec::new(),
    }
}

#[test]
fn route_sheets_fit_mixed_fleets_with_mixed_days_shifts_and_capacities() {
    let mut rng = fastrand::Rng::with_seed(13);
    let (mut routes, mut undeliverable) = (0usize, 0usize);
    let mut mixed_days = 0;
    for round in 0..80 {
        let mut s = fixture::tiny();
        s.fleet = random_fleet(&mut rng);
        let alloc = random_allocation(&s, &mut rng);
        let travel = TravelModel::new(&s);
        let d = dispatch_with(
            &s,
            &alloc,
            &travel,
            &DispatchOptions {
                seed: round,
                time_limit: None,
                max_iterations: 40,
                stall_rounds: u32::MAX,
            },
        );
        let p = problems_in_dispatch(&s, &alloc, &d);
        assert!(p.is_empty(), "round {round}: {p:?}");
        routes += d.routes.len();
        undeliverable += d.undeliverable.len();
        // Depot-days where two routes have different shift ends: the case the defect needed.
        for w in d.routes.windows(2) {
            if (w[0].date, w[0].depot) == (w[1].date, w[1].depot) {
                let (a, b) = (&s.fleet[w[0].vehicle], &s.fleet[w[1].vehicle]);
                mixed_days += usize::from(
                    a.shift_on(w[0].date).1 != b.shift_on(w[1].date).1
                        || a.capacity_vials != b.capacity_vials,
                );
            }
        }
    }
    eprintln!("{routes} routes, {undeliverable} undeliverable, {mixed_days} mixed pairs");
    // Not vacuous: routes were built, some shipments could not be, and mixed fleets shared days.
    assert!(routes > 80 && undeliverable > 0 && mixed_days >= 8);
}

// ---------------------------------------------------------------------------------------------
// Planned generated weeks (mixed fleets from the generator)

#[test]
fn planned_generated_weeks_have_no_route_past_its_own_limits() {
    for (sites, seed) in [(1500, 1), (1500, 2)] {
        let s = util::generated(sites, seed);
        let opts = PlanOptions {
            route_rounds_divisor: 10,
            ..PlanOptions::default()
        };
        let p = plan::plan(s, &opts).expect("generated week plans");
        assert!(!p.dispatch.routes.is_empty());
        let problems = problems_in_dispatch(&p.scenario, &p.allocation, &p.dispatch);
        assert!(problems.is_empty(), "week {sites}/{seed}: {problems:?}");
        eprintln!(
            "week {sites}/{seed}: {} routes on {} vehicles checked",
            p.dispatch.routes.len(),
            p.scenario.fleet.len()
        );
    }
}
