//! Routing checked against the outside world and against its own contract.
//!
//! * TSPLIB95 (G. Reinelt, "TSPLIB — A Traveling Salesman Problem Library", ORSA Journal on
//!   Computing 3(4), 1991): EUC_2D instances, nint distances, node 1 as the depot; published
//!   optimal lengths in `tests/data/tsplib/optima.csv` (sources in its `source` column).
//! * Solomon's VRPTW instances (M. M. Solomon, "Algorithms for the vehicle routing and
//!   scheduling problems with time window constraints", Operations Research 35(2), 1987), 25-
//!   and 100-customer versions; best-known / optimal values in `tests/data/solomon/bks.csv`
//!   (sources in its `source` column). Every route is re-checked by an independent checker
//!   written here from the raw file.
//! * `dispatch` on the in-code fixture scenario with a hand-built allocation.
//!
//! Search settings here have no time limit (iteration caps only) so results are reproducible
//! on any machine; timing lives in `examples/bench_routing.rs`.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use broodcast::allocate::{Allocation, Shipment};
use broodcast::arcs::{Arc, Mode};
use broodcast::dispatch::tsp::{TspOptions, best_order, tour_minutes};
use broodcast::dispatch::vrptw::{Customer, Instance, SolveOptions, VehicleSpec, solve};
use broodcast::dispatch::{DispatchOptions, RouteCache, dispatch, dispatch_cached, dispatch_with};
use broodcast::progress::Progress;
use broodcast::scenario::{Scenario, SiteKind, fixture};
use broodcast::travel::{Place, TravelModel, TravelTimes};
use chrono::{Datelike, NaiveDateTime};

fn data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

fn read(rel: &str) -> String {
    std::fs::read_to_string(data(rel)).unwrap_or_else(|e| panic!("reading {rel}: {e}"))
}

// ---------------------------------------------------------------------------------------------
// TSPLIB

/// Coordinates of a TSPLIB EUC_2D file. Handles "KEY: v" and "KEY : v", leading spaces,
/// scientific notation and a missing EOF (the quirks listed in tests/data/README.md).
fn parse_tsplib(text: &str) -> Vec<(f64, f64)> {
    let mut dim = None;
    let mut in_coords = false;
    let mut pts = Vec::new();
    for line in text.lines() {
        let line = line.trim();
        if line.is_empty() {
            continue;
        }
        if in_coords {
            if line == "EOF" {
                break;
            }
            let f: Vec<&str> = line.split_whitespace().collect();
            if f.len() == 3
                && let (Ok(x), Ok(y)) = (f[1].parse::<f64>(), f[2].parse::<f64>())
            {
                pts.push((x, y));
                continue;
            }
            // A keyword after the section ends it.
            in_coords = false;
        }
        if line.starts_with("NODE_COORD_SECTION") {
            in_coords = true;
            continue;
        }
        if let Some((key, value)) = line.split_once(':') {
            let (key, value) = (key.trim(), value.trim());
            match key {
                "DIMENSION" => dim = value.parse::<usize>().ok(),
                "EDGE_WEIGHT_TYPE" => assert_eq!(value, "EUC_2D", "only EUC_2D is used here"),
                _ => {}
            }
        }
    }
    assert_eq!(
        Some(pts.len()),
        dim,
        "DIMENSION and coordinate count differ"
    );
    pts
}

/// TSPLIB EUC_2D: nint(sqrt(dx² + dy²)), nint(x) = floor(x + 0.5) (Reinelt 1991, §2.1).
fn euc_2d(pts: &[(f64, f64)]) -> Vec<Vec<f64>> {
    pts.iter()
        .map(|a| {
            pts.iter()
                .map(|b| (((a.0 - b.0).powi(2) + (a.1 - b.1).powi(2)).sqrt() + 0.5).floor())
                .collect()
        })
        .collect()
}

fn parse_tour(text: &str) -> Vec<usize> {
    let mut in_tour = false;
    let mut out = Vec::new();
    for line in text.lines() {
        let line = line.trim();
        if line.starts_with("TOUR_SECTION") {
            in_tour = true;
            continue;
        }
        if in_tour {
            for tok in line.split_whitespace() {
                match tok.parse::<i64>() {
                    Ok(-1) => return out,
                    Ok(v) if v > 0 => out.push(v as usize - 1),
                    _ => return out,
                }
            }
        }
    }
    out
}

fn tsplib_optima() -> Vec<(String, f64)> {
    let mut rdr = csv::Reader::from_path(data("tsplib/optima.csv")).expect("optima.csv");
    rdr.records()
        .map(|r| {
            let r = r.expect("optima.csv row");
            (r[0].to_string(), r[3].parse().expect("optimal_length"))
        })
        .collect()
}

#[test]
fn tsplib_parser_and_distance_reproduce_published_optimal_tours() {
    // The optimal tours published with TSPLIB must have exactly the listed optimal length under
    // our parser and nint rule; otherwise the gap test below would measure the wrong thing.
    for (name, opt) in tsplib_optima() {
        let m = euc_2d(&parse_tsplib(&read(&format!("tsplib/{name}.tsp"))));
        let tour = parse_tour(&read(&format!("tsplib/{name}.opt.tour")));
        assert_eq!(tour.len(), m.len(), "{name}: tour length");
        let at = tour.iter().position(|&v| v == 0).expect("depot in tour");
        let order: Vec<usize> = (1..tour.len())
            .map(|k| tour[(at + k) % tour.len()])
            .collect();
        assert_eq!(tour_minutes(&m, &order), opt, "{name}");
    }
}

#[test]
fn tsplib_tours_within_two_percent_of_optimum() {
    let opts = TspOptions {
        seed: 1,
        time_limit: None,
        max_kicks: 3_000,
        neighbours: 12,
    };
    let mut gaps = Vec::new();
    for (name, opt) in tsplib_optima() {
        let m = euc_2d(&parse_tsplib(&read(&format!("tsplib/{name}.tsp"))));
        let tour = best_order(&m, &opts);
        let mut seen = tour.order.clone();
        seen.sort_unstable();
        assert_eq!(
            seen,
            (1..m.len()).collect::<Vec<_>>(),
            "{name}: not a permutation"
        );
        assert_eq!(tour.total_minutes, tour_minutes(&m, &tour.order), "{name}");
        let gap = tour.total_minutes / opt - 1.0;
        eprintln!(
            "{name}: {} vs optimum {opt} (gap {:.2} %)",
            tour.total_minutes,
            100.0 * gap
        );
        assert!(
            tour.total_minutes >= opt,
            "{name}: shorter than the proven optimum"
        );
        assert!(gap <= 0.02, "{name}: gap {:.2} % over 2 %", 100.0 * gap);
        gaps.push(gap);
    }
    eprintln!(
        "mean TSPLIB gap {:.2} %",
        100.0 * gaps.iter().sum::<f64>() / gaps.len() as f64
    );
}

// ---------------------------------------------------------------------------------------------
// Solomon

/// One Solomon instance as written in the file.
struct Solomon {
    vehicles: usize,
    capacity: u32,
    /// Row 0 is the depot: (x, y, demand, ready, due, service).
    rows: Vec<(f64, f64, u32, f64, f64, f64)>,
}

/// Parses a Solomon file: CRLF line ends, blank trailing lines, a VEHICLE block with two
/// numbers, then 7-number customer rows (the first is the depot).
fn parse_solomon(text: &str) -> Solomon {
    let mut vehicles = None;
    let mut rows = Vec::new();
    let mut section = "";
    for line in text.lines() {
        let line = line.trim();
        if line.starts_with("VEHICLE") {
            section = "vehicle";
            continue;
        }
        if line.starts_with("CUSTOMER") {
            section = "customer";
            continue;
        }
        let nums: Vec<f64> = line
            .split_whitespace()
            .map_while(|t| t.parse::<f64>().ok())
            .collect();
        match (section, nums.len()) {
            ("vehicle", 2) => vehicles = Some((nums[0] as usize, nums[1] as u32)),
            ("customer", 7) => {
                assert_eq!(nums[0] as usize, rows.len(), "customer numbers in order");
                rows.push((nums[1], nums[2], nums[3] as u32, nums[4], nums[5], nums[6]));
            }
            _ => {}
        }
    }
    let (vehicles, capacity) = vehicles.expect("VEHICLE block");
    Solomon {
        vehicles,
        capacity,
        rows,
    }
}

/// Travel time = distance. 100-customer: unrounded Euclidean. 25-customer: truncated to one
/// decimal (the convention of the 25-customer optima, bks.csv: "SCALE 10 FLOOR_2D").
fn solomon_distance(s: &Solomon, truncate: bool) -> Vec<Vec<f64>> {
    s.rows
        .iter()
        .map(|a| {
            s.rows
                .iter()
                .map(|b| {
                    let d2 = (a.0 - b.0).powi(2) + (a.1 - b.1).powi(2);
                    if truncate {
                        (100.0 * d2).sqrt().floor() / 10.0
                    } else {
                        d2.sqrt()
                    }
                })
                .collect()
        })
        .collect()
}

fn solomon_instance(s: &Solomon, m: Vec<Vec<f64>>) -> Instance {
    let depot = s.rows[0];
    Instance {
        customers: s.rows[1..]
            .iter()
            .map(|r| Customer {
                demand_vials: r.2,
                service_minutes: r.5,
                earliest: r.3,
                latest: r.4,
                deadline: f64::INFINITY,
            })
            .collect(),
        minutes: m,
        vehicles: (0..s.vehicles)
            .map(|_| VehicleSpec {
                capacity_vials: s.capacity,
                start: depot.3,
                latest_return: depot.4,
            })
            .collect(),
    }
}

/// Independent feasibility check from the raw rows: every customer exactly once, load within
/// capacity, service starts inside [ready, due] after waiting, return by the depot's due
/// time. Returns the total distance.
fn check_solomon(name: &str, s: &Solomon, m: &[Vec<f64>], routes: &[Vec<usize>]) -> f64 {
    let mut seen = BTreeSet::new();
    let mut total = 0.0;
    assert!(routes.len() <= s.vehicles, "{name}: too many vehicles");
    for route in routes {
        let mut t = s.rows[0].3;
        let mut prev = 0;
        let mut load = 0;
        for &c in route {
            assert!(seen.insert(c), "{name}: customer {c} twice");
            let r = s.rows[c];
            t += m[prev][c];
            total += m[prev][c];
            t = t.max(r.3);
            assert!(
                t <= r.4 + 1e-6,
                "{name}: customer {c} starts {t} after due {}",
                r.4
            );
            t += r.5;
            load += r.2;
            prev = c;
        }
        t += m[prev][0];
        total += m[prev][0];
        assert!(t <= s.rows[0].4 + 1e-6, "{name}: back at {t}");
        assert!(load <= s.capacity, "{name}: load {load}");
    }
    assert_eq!(
        seen.len(),
        s.rows.len() - 1,
        "{name}: not every customer served"
    );
    total
}

#[test]
fn solomon_routes_feasible_all_served_and_near_best_known() {
    let mut rdr = csv::Reader::from_path(data("solomon/bks.csv")).expect("bks.csv");
    let opts = SolveOptions {
        seed: 1,
        time_limit: None,
        max_iterations: 1_000,
        neighbours: 12,
        stall_rounds: u32::MAX,
    };
    for r in rdr.records() {
        let r = r.expect("bks.csv row");
        let name = r[0].to_string();
        let customers: usize = r[1].parse().expect("customers");
        let bks_vehicles: usize = r[2].parse().expect("vehicles");
        let bks: f64 = r[3].parse().expect("distance");
        let small = customers == 25;
        let file = if small {
            format!("solomon/{name}.25.txt")
        } else {
            format!("solomon/{name}.txt")
        };
        let s = parse_solomon(&read(&file));
        assert_eq!(s.rows.len(), customers + 1, "{file}");
        let m = solomon_distance(&s, small);
        let sol = solve(&solomon_instance(&s, m.clone()), &opts);
        assert!(
            sol.unserved.is_empty(),
            "{name}: unserved {:?}",
            sol.unserved
        );
        let routes: Vec<Vec<usize>> = sol.routes.iter().map(|r| r.customers.clone()).collect();
        let dist = check_solomon(&name, &s, &m, &routes);
        assert!(
            (dist - sol.total_drive_minutes).abs() < 1e-6,
            "{name}: reported distance"
        );
        let ratio = dist / bks;
        eprintln!(
            "{name}.{customers}: {} vehicles, {dist:.1} (best known {bks_vehicles}, {bks}; ratio {ratio:.3})",
            sol.vehicles_used()
        );
        // Our objective is distance first, so we may use more vehicles than the best known
        // (which minimises vehicles first on the 100-customer rows) and then be shorter.
        // Bounds chosen from measured runs with these settings (all ≤ 1.007 ×, figures in
        // docs/performance-routing.md), with room for small changes in the search: 1.05 × on
        // the 100-customer rows, 1.02 × on the 25-customer optima.
        let bound = if small { 1.02 } else { 1.05 };
        assert!(
            ratio <= bound,
            "{name}.{customers}: {ratio:.3} × best known"
        );
        // The 25-customer rows are proven distance optima: nothing feasible is shorter.
        if small {
            assert!(
                dist >= bks - 0.05,
                "{name}.25: {dist} below the optimum {bks}"
            );
        }
    }
}

// ---------------------------------------------------------------------------------------------
// dispatch on the fixture

fn shipment(
    s: &Scenario,
    facility: usize,
    day: u64,
    site: &str,
    mode: Mode,
    vials: u32,
) -> Shipment {
    let date = s.week_start + chrono::Days::new(day);
    let packed = date.and_time(s.agent.pack_time);
    let site = s.site_idx(site).expect("fixture site");
    let wasps = f64::from(s.facilities[facility].wasps_per_vial);
    Shipment {
        arc: Arc {
            facility,
            pack_date: date,
            dispatch_date: date,
            site,
            mode,
            eta: packed,
            release_by: packed + chrono::Duration::hours(s.agent.shelf_life_hours as i64),
            survival: 1.0,
            wasps_alive_per_vial: wasps,
            drive_minutes: 0.0,
        },
        vials,
    }
}

fn fixture_allocation(s: &Scenario) -> Allocation {
    use Mode::{Parcel, Route};
    let mut shipments = vec![
        // Monday from F1: four stops, 19 vials on a 20-vial van.
        shipment(s, 0, 0, "B1", Route, 6),
        shipment(s, 0, 0, "B2", Route, 5),
        shipment(s, 0, 0, "B3", Route, 4),
        shipment(s, 0, 0, "R1", Route, 2),
        shipment(s, 0, 0, "R4", Route, 2),
        // Tuesday from F2 (its van runs Tue/Thu, 15 vials).
        shipment(s, 1, 1, "B4", Route, 5),
        shipment(s, 1, 1, "B6", Route, 6),
        shipment(s, 1, 1, "R2", Route, 2),
        // Wednesday from F1: more than the van holds, one must be left out.
        shipment(s, 0, 2, "B1", Route, 12),
        shipment(s, 0, 2, "B6", Route, 12),
        // Parcels: Monday and Wednesday are parcel days, Tuesday is not.
        shipment(s, 0, 0, "R3", Parcel, 2),
        shipment(s, 1, 2, "R2", Parcel, 2),
        shipment(s, 0, 1, "R3", Parcel, 2),
    ];
    // Tight release-by on one Tuesday stop: it must be served early or reported.
    shipments[6].arc.release_by = shipments[6]
        .arc
        .dispatch_date
        .and_hms_opt(9, 0, 0)
        .expect("time");
    shipments.sort_by_key(Shipment::order_key);
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

fn minutes_between(a: NaiveDateTime, b: NaiveDateTime) -> f64 {
    (b - a).num_milliseconds() as f64 / 60_000.0
}

#[test]
fn fixture_dispatch_respects_window_deadline_shift_capacity_and_parcel_days() {
    let s = fixture::tiny();
    let alloc = fixture_allocation(&s);
    let travel = TravelModel::new(&s);
    let opts = DispatchOptions {
        seed: 1,
        time_limit: None,
        max_iterations: 200,
        stall_rounds: u32::MAX,
    };
    let d = dispatch_with(&s, &alloc, &travel, &opts);
    check_dispatch(&s, &alloc, &travel, &d);
    // Tuesday's non-parcel-day parcel is reported, and Wednesday's 24 vials cannot fit 20.
    let tuesday_parcel = alloc
        .shipments
        .iter()
        .position(|sh| {
            sh.arc.mode == Mode::Parcel && sh.arc.dispatch_date.weekday() == chrono::Weekday::Tue
        })
        .expect("fixture has a Tuesday parcel");
    assert!(
        d.undeliverable
            .iter()
            .any(|u| u.shipment == tuesday_parcel && u.reason == "window")
    );
    assert!(d.undeliverable.iter().any(|u| u.reason == "capacity"));
    assert!(!d.routes.is_empty() && !d.parcels.is_empty());
}

/// Re-checks a dispatch against the scenario and travel model: per stop window, release-by,
/// arrival and expected live wasps; per route shift, capacity, drive minutes; parcels on
/// parcel days and in time; every shipment accounted for exactly once; documented order.
fn check_dispatch(
    s: &Scenario,
    alloc: &Allocation,
    travel: &TravelModel,
    d: &broodcast::dispatch::Dispatch,
) {
    let mut accounted = BTreeSet::new();
    for r in &d.routes {
        let v = &s.fleet[r.vehicle];
        assert_eq!(v.depot, r.depot);
        assert!(v.runs_on(r.date), "{}: vehicle not running", r.id);
        let (start, end) = v.shift_on(r.date);
        assert_eq!(r.depart, start);
        assert!(r.vials() <= v.capacity_vials, "{}: over capacity", r.id);
        assert!(r.id.starts_with(&format!(
            "R-{}-{}-",
            s.facilities[r.depot].id,
            r.date.format("%Y%m%d")
        )));
        // Recompute times from the travel model: wait when early, never start late.
        let mut t = start;
        let mut prev = Place::Facility(r.depot);
        let mut drive = 0.0;
        let mut last_site = None;
        for st in &r.stops {
            let sh = &alloc.shipments[st.shipment];
            assert_eq!(
                (sh.arc.mode, sh.arc.site, sh.vials),
                (Mode::Route, st.site, st.vials)
            );
            assert_eq!((sh.arc.facility, sh.arc.dispatch_date), (r.depot, r.date));
            assert!(accounted.insert(st.shipment));
            let site = &s.sites[st.site];
            let (open, close, service) = match site.as_block() {
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
            if last_site == Some(st.site) {
                // A second shipment to the same site: same visit.
                continue;
            }
            let m = travel.minutes(prev, Place::Site(st.site));
            drive += m;
            let arrival = t + chrono::Duration::milliseconds((m * 60_000.0).round() as i64);
            assert!(
                (minutes_between(arrival, st.arrival)).abs() < 0.01,
                "{}: arrival",
                r.id
            );
            assert!(st.service_start >= st.arrival);
            assert!(
                st.service_start >= r.date.and_time(open),
                "{}: before window",
                r.id
            );
            assert!(
                st.service_start <= r.date.and_time(close),
                "{}: after window",
                r.id
            );
            assert!(
                st.service_start <= st.release_by,
                "{}: after release-by",
                r.id
            );
            assert_eq!(st.release_by, sh.arc.release_by);
            let hours = minutes_between(
                sh.arc.pack_date.and_time(s.agent.pack_time),
                st.service_start,
            ) / 60.0;
            let expect = f64::from(s.facilities[r.depot].wasps_per_vial)
                * s.agent.survival_at(hours)
                * f64::from(st.vials);
            assert!((st.wasps_expected_alive - expect).abs() < 1e-6);
            assert!(matches!(site.kind(), SiteKind::Block | SiteKind::Dooryard));
            t = st.service_start
                + chrono::Duration::milliseconds((service * 60_000.0).round() as i64);
            prev = Place::Site(st.site);
            last_site = Some(st.site);
        }
        let m = travel.minutes(prev, Place::Facility(r.depot));
        drive += m;
        assert!(
            (drive - r.drive_minutes).abs() < 0.01,
            "{}: drive minutes",
            r.id
        );
        let back = t + chrono::Duration::milliseconds((m * 60_000.0).round() as i64);
        assert!(minutes_between(back, r.return_at).abs() < 0.01);
        assert!(r.return_at <= end, "{}: back after the shift", r.id);
    }
    for p in &d.parcels {
        let sh = &alloc.shipments[p.shipment];
        assert_eq!(sh.arc.mode, Mode::Parcel);
        assert!(
            s.parcel.days.contains(&p.ship_at.date().weekday()),
            "parcel on a non-parcel day"
        );
        assert!(p.eta <= p.release_by);
        assert!(accounted.insert(p.shipment));
    }
    for u in &d.undeliverable {
        assert!(["capacity", "shift", "deadline", "window"].contains(&u.reason));
        assert!(
            accounted.insert(u.shipment),
            "shipment {} twice",
            u.shipment
        );
    }
    // Every shipment is routed, mailed or reported: none silently dropped.
    assert_eq!(accounted.len(), alloc.shipments.len());
    // Output order as documented on `Dispatch`.
    assert!(
        d.routes
            .windows(2)
            .all(|w| (w[0].date, w[0].depot) <= (w[1].date, w[1].depot))
    );
    assert!(
        d.parcels
            .windows(2)
            .all(|w| (w[0].ship_at, w[0].site) <= (w[1].ship_at, w[1].site))
    );
}

#[test]
fn fixture_dispatch_is_deterministic() {
    let s = fixture::tiny();
    let alloc = fixture_allocation(&s);
    let travel = TravelModel::new(&s);
    // The scenario's own settings (time limit included): the fixture is small enough that the
    // iteration cap, not the clock, ends the search.
    let a = dispatch(&s, &alloc, &travel);
    let b = dispatch(&s, &alloc, &travel);
    assert_eq!(format!("{a:?}"), format!("{b:?}"));
    assert!(!a.routes.is_empty());
}

#[test]
fn cached_depot_days_route_exactly_as_a_new_search() {
    let s = fixture::tiny();
    let alloc = fixture_allocation(&s);
    let travel = TravelModel::new(&s);
    let opts = DispatchOptions {
        seed: 3,
        time_limit: None,
        max_iterations: 200,
        stall_rounds: u32::MAX,
    };
    let cache = RouteCache::new();
    let first = dispatch_cached(&s, &alloc, &travel, &opts, &cache, &Progress::default());
    let held = cache.len();
    assert!(
        held >= 2,
        "the fixture routes several depot-days, got {held}"
    );
    // The same allocation again: every depot-day comes from the cache.
    let again = dispatch_cached(&s, &alloc, &travel, &opts, &cache, &Progress::default());
    assert_eq!(format!("{first:?}"), format!("{again:?}"));
    assert_eq!(cache.len(), held);
    // One route shipment fewer (and shipment indices shifted): only its depot-day is new,
    // and the whole dispatch equals a search without the cache.
    let mut fewer = alloc.clone();
    let drop = fewer
        .shipments
        .iter()
        .position(|sh| sh.arc.mode == Mode::Route)
        .expect("fixture has route shipments");
    fewer.shipments.remove(drop);
    let cached = dispatch_cached(&s, &fewer, &travel, &opts, &cache, &Progress::default());
    let fresh = dispatch_with(&s, &fewer, &travel, &opts);
    assert_eq!(format!("{cached:?}"), format!("{fresh:?}"));
    assert_eq!(cache.len(), held + 1);
}

#[test]
fn random_allocations_on_the_fixture_dispatch_within_every_limit() {
    // Property-style: seeded random allocations (many more vials than the vans hold, tight
    // and loose release-by times) must still give only feasible routes and full accounting.
    use Mode::{Parcel, Route};
    let s = fixture::tiny();
    let travel = TravelModel::new(&s);
    let route_sites = ["B1", "B2", "B3", "B4", "B6", "R1", "R2", "R4"];
    let parcel_sites = ["R2", "R3", "R4"];
    let mut rng = fastrand::Rng::with_seed(42);
    let (mut stops, mut parcels) = (0, 0);
    let mut reasons = std::collections::BTreeMap::new();
    for round in 0..20 {
        let mut shipments = Vec::new();
        for _ in 0..rng.usize(1..=14) {
            let facility = rng.usize(0..2);
            let day = rng.u64(0..5);
            let mut sh = if rng.u8(0..4) == 0 {
                shipment(
                    &s,
                    facility,
                    day,
                    parcel_sites[rng.usize(0..3)],
                    Parcel,
                    rng.u32(1..=6),
                )
            } else {
                shipment(
                    &s,
                    facility,
                    day,
                    route_sites[rng.usize(0..8)],
                    Route,
                    rng.u32(1..=8),
                )
            };
            if rng.bool() {
                let date = sh.arc.dispatch_date;
                sh.arc.release_by = date.and_hms_opt(rng.u32(8..=16), 0, 0).expect("time");
            }
            shipments.push(sh);
        }
        shipments.sort_by_key(Shipment::order_key);
        let mut alloc = fixture_allocation(&s);
        alloc.shipments = shipments;
        let opts = DispatchOptions {
            seed: round,
            time_limit: None,
            max_iterations: 50,
            stall_rounds: u32::MAX,
        };
        let d = dispatch_with(&s, &alloc, &travel, &opts);
        check_dispatch(&s, &alloc, &travel, &d);
        stops += d.routes.iter().map(|r| r.stops.len()).sum::<usize>();
        parcels += d.parcels.len();
        for u in &d.undeliverable {
            *reasons
                .entry((alloc.shipments[u.shipment].arc.mode.as_str(), u.reason))
                .or_insert(0usize) += 1;
        }
    }
    eprintln!("random allocations: {stops} stops, {parcels} parcels, undeliverable {reasons:?}");
    // The rounds exercise both outcomes, so the checks above are not vacuous.
    assert!(
        stops > 20 && parcels > 0 && reasons.len() >= 2,
        "{reasons:?}"
    );
}
