//! From an allocation to routes and parcels: one VRPTW per (depot, dispatch day), solved by
//! [`super::vrptw::solve`], and the parcel batches checked against the carrier's days, the
//! daily parcel cap and the vials' release-by times.

use std::collections::BTreeMap;
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Duration;

use chrono::{Datelike, NaiveDate, NaiveDateTime, NaiveTime};
use rayon::prelude::*;

use super::vrptw::{self, Customer, Instance, SolveOptions, VehicleSpec};
use super::{Dispatch, ParcelShipment, Route, Stop, Undeliverable};
use crate::allocate::Allocation;
use crate::arcs::Mode;
use crate::progress::{Progress, Step};
use crate::scenario::{FacilityIdx, LonLat, Scenario, SiteIdx};
use crate::travel::{Place, TravelTimes};

/// Route-search settings for [`dispatch_with`].
#[derive(Clone, Debug, PartialEq)]
pub struct DispatchOptions {
    /// Base seed; each depot-day mixes in its depot and date.
    pub seed: u64,
    /// Wall-clock budget per depot-day; `None` (the default) for the round limits only. Set
    /// only on the user's request: a binding limit makes routes depend on the machine's speed,
    /// and its use is reported in [`Dispatch::notes`].
    pub time_limit: Option<Duration>,
    /// Most perturbation rounds per depot-day.
    pub max_iterations: u32,
    /// A depot-day's search stops after this many rounds in a row without a new best.
    pub stall_rounds: u32,
}

impl DispatchOptions {
    /// `dispatch.seed` and, only when the scenario sets it, `dispatch.time_limit_seconds`;
    /// 12,000 rounds, stop after 3,000 without a new best (30 per customer when fewer).
    pub fn from_scenario(scenario: &Scenario) -> Self {
        DispatchOptions {
            seed: scenario.dispatch.seed,
            time_limit: scenario
                .dispatch
                .time_limit_seconds
                .filter(|s| s.is_finite() && *s > 0.0)
                .map(|s| Duration::from_secs_f64(s.min(86_400.0))),
            max_iterations: SolveOptions::default().max_iterations,
            stall_rounds: SolveOptions::default().stall_rounds,
        }
    }
}

/// Depot-day route solutions already found, so that routing a changed allocation of the same
/// week (the route feedback round of `plan`) searches again only the depot-days whose stops
/// changed. Reuse gives what a new search would: a depot-day's routes depend only on its
/// instance and search settings (unless a time limit binds).
#[derive(Debug, Default)]
pub struct RouteCache {
    solved: Mutex<Vec<(SolveOptions, Instance, vrptw::Solution)>>,
}

impl RouteCache {
    /// An empty cache.
    pub fn new() -> Self {
        Self::default()
    }

    /// Depot-days held.
    pub fn len(&self) -> usize {
        self.solved.lock().map(|s| s.len()).unwrap_or(0)
    }

    /// Whether no depot-day is held.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The stored solution of `inst` under `opts`, or a new search (then stored). O(size of
    /// the instances held) to look up.
    fn solve(&self, inst: &Instance, opts: &SolveOptions) -> vrptw::Solution {
        let found = self.solved.lock().ok().and_then(|s| {
            s.iter()
                .find(|(o, i, _)| o == opts && i == inst)
                .map(|(_, _, sol)| sol.clone())
        });
        if let Some(sol) = found {
            return sol;
        }
        let sol = vrptw::solve(inst, opts);
        if let Ok(mut s) = self.solved.lock() {
            s.push((opts.clone(), inst.clone(), sol.clone()));
        }
        sol
    }
}

/// Routes and parcels for `allocation`, with the scenario's search settings
/// ([`DispatchOptions::from_scenario`]). See [`dispatch_with`].
pub fn dispatch(
    scenario: &Scenario,
    allocation: &Allocation,
    travel: &(impl TravelTimes + Sync),
) -> Dispatch {
    dispatch_with(
        scenario,
        allocation,
        travel,
        &DispatchOptions::from_scenario(scenario),
    )
}

/// Routes and parcels for `allocation`.
///
/// Route shipments are grouped by (facility, dispatch date); shipments to the same site that
/// day become one visit (their vials add up, the earliest release-by is the deadline) written
/// as consecutive [`Stop`]s with the same times. Each group is one VRPTW over the depot's
/// vehicles running that day: capacity in vials, departure at shift start, return by shift
/// end, service start inside the block's access hours or the dooryard window and no later than
/// release-by. Visits no route can take are [`Undeliverable`] with the solver's reason.
/// Parcel shipments are handed over at `parcel.ship_time` on the dispatch date and must fall on
/// a parcel day (`window` otherwise), fit the daily cap over all facilities (`capacity`,
/// filled earliest release-by first) and arrive by release-by (`deadline`).
///
/// Cost: one [`vrptw::solve`] per depot-day plus O(p log p) for p parcels. Deterministic for
/// the same inputs unless `opts.time_limit` binds.
pub fn dispatch_with(
    scenario: &Scenario,
    allocation: &Allocation,
    travel: &(impl TravelTimes + Sync),
    opts: &DispatchOptions,
) -> Dispatch {
    dispatch_cached(
        scenario,
        allocation,
        travel,
        opts,
        &RouteCache::new(),
        &Progress::default(),
    )
}

/// As [`dispatch_with`], taking a depot-day's routes from `cache` when the same depot-day
/// (same stops, windows, vials, fleet and settings) was routed before, and storing the new
/// ones, and reporting to `progress` how many depot-days are routed (at the start and after
/// each one, from the threads that route them). The result is the same as without the cache
/// or a listener.
pub fn dispatch_cached(
    scenario: &Scenario,
    allocation: &Allocation,
    travel: &(impl TravelTimes + Sync),
    opts: &DispatchOptions,
    cache: &RouteCache,
    progress: &Progress,
) -> Dispatch {
    let mut out = Dispatch::default();
    let mut groups: BTreeMap<(FacilityIdx, NaiveDate), BTreeMap<SiteIdx, Vec<usize>>> =
        BTreeMap::new();
    let mut parcels: Vec<usize> = Vec::new();
    for (i, sh) in allocation.shipments.iter().enumerate() {
        match sh.arc.mode {
            Mode::Route => groups
                .entry((sh.arc.facility, sh.arc.dispatch_date))
                .or_default()
                .entry(sh.arc.site)
                .or_default()
                .push(i),
            Mode::Parcel => parcels.push(i),
        }
    }
    // Depot-days are independent VRPTWs with their own seeds: solved in parallel, merged in
    // key order, so the result does not depend on the number of threads or their order.
    let groups: Vec<_> = groups.into_iter().collect();
    let total = groups.len();
    // Counted and reported under one lock, so the reports never go backwards.
    let done = Mutex::new(0);
    progress.report(Step::Routes { done: 0, total });
    // The largest depot-days start first (longest processing time first), so that a long
    // search does not start last and leave the other core idle. Each worker takes the next
    // depot-day in that order from a shared counter: a plain parallel iterator over the order
    // splits it in halves, and the second core then starts on the small half's largest. On
    // the generated 35,000-site week (32 depot-days, the largest of 148 stops) the first
    // dispatch took 5.55–5.68 s before and 4.88–5.01 s after (four alternating runs), with
    // the same routes: each depot-day is solved alone with its own seed, whichever worker
    // takes it, and the parts are merged in key order.
    let mut order: Vec<usize> = (0..groups.len()).collect();
    order.sort_by_key(|&i| (std::cmp::Reverse(groups[i].1.len()), i));
    let next = AtomicUsize::new(0);
    let workers = rayon::current_num_threads().clamp(1, order.len().max(1));
    let mut parts: Vec<(usize, Dispatch)> = (0..workers)
        .into_par_iter()
        .flat_map_iter(|_| {
            let mut mine = Vec::new();
            while let Some(&i) = order.get(next.fetch_add(1, Ordering::Relaxed)) {
                let ((facility, date), visits) = &groups[i];
                let mut part = Dispatch::default();
                route_depot_day(
                    scenario, allocation, travel, opts, cache, *facility, *date, visits, &mut part,
                );
                if let Ok(mut done) = done.lock() {
                    *done += 1;
                    progress.report(Step::Routes { done: *done, total });
                }
                mine.push((i, part));
            }
            mine
        })
        .collect();
    parts.sort_by_key(|&(i, _)| i);
    for (_, part) in parts {
        out.routes.extend(part.routes);
        out.undeliverable.extend(part.undeliverable);
        out.notes.extend(part.notes);
    }
    if let Some(limit) = opts.time_limit
        && out.notes.is_empty()
        && !groups.is_empty()
    {
        out.notes.push(format!(
            "route search ran with a wall-clock limit of {} s per depot-day \
             (dispatch.time_limit_seconds); it stopped none this time, but under load it may: \
             leave it unset for routes that repeat on any machine",
            limit.as_secs_f64()
        ));
    }
    dispatch_parcels(scenario, allocation, &parcels, &mut out);
    out.routes.sort_by(|a, b| {
        (a.date, a.depot, route_number(&a.id)).cmp(&(b.date, b.depot, route_number(&b.id)))
    });
    out.parcels.sort_by_key(|p| (p.ship_at, p.site, p.shipment));
    out.undeliverable.sort_by_key(|u| u.shipment);
    out
}

/// The trailing `<n>` of a route id, so route 10 sorts after route 9.
fn route_number(id: &str) -> u64 {
    id.rsplit('-')
        .next()
        .and_then(|n| n.parse().ok())
        .unwrap_or(0)
}

fn minutes_since(base: NaiveDateTime, t: NaiveDateTime) -> f64 {
    (t - base).num_milliseconds() as f64 / 60_000.0
}

fn at_minutes(base: NaiveDateTime, minutes: f64) -> NaiveDateTime {
    // Clamp keeps the conversion total for absurd inputs (a year either way).
    let ms = (minutes.clamp(-525_600.0, 525_600.0) * 60_000.0).round() as i64;
    base + chrono::Duration::milliseconds(ms)
}

fn hours_between(from: NaiveDateTime, to: NaiveDateTime) -> f64 {
    (to - from).num_milliseconds() as f64 / 3_600_000.0
}

#[expect(
    clippy::too_many_arguments,
    reason = "one depot-day needs the scenario, the plan, travel, settings, the cache, its key, its visits and the output"
)]
fn route_depot_day(
    scenario: &Scenario,
    allocation: &Allocation,
    travel: &(impl TravelTimes + Sync),
    opts: &DispatchOptions,
    cache: &RouteCache,
    facility: FacilityIdx,
    date: NaiveDate,
    visits: &BTreeMap<SiteIdx, Vec<usize>>,
    out: &mut Dispatch,
) {
    let base = date.and_time(NaiveTime::MIN);
    let visit_list: Vec<(SiteIdx, &Vec<usize>)> = visits.iter().map(|(s, v)| (*s, v)).collect();
    let (inst, fleet) =
        depot_day_instance(scenario, allocation, travel, facility, date, &visit_list);
    let seed = opts.seed
        ^ (facility as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15)
        ^ (date.num_days_from_ce() as u64).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    let sol = cache.solve(
        &inst,
        &SolveOptions {
            seed,
            time_limit: opts.time_limit,
            max_iterations: opts.max_iterations,
            stall_rounds: opts.stall_rounds,
            ..SolveOptions::default()
        },
    );
    let depot_id = &scenario.facilities[facility].id;
    if sol.time_limited {
        out.notes.push(format!(
            "route search for {depot_id} on {date} stopped at its time limit of {} s \
             (dispatch.time_limit_seconds) before its round limits: another run may give other \
             routes; leave the limit unset for routes that repeat on any machine",
            opts.time_limit.map(|t| t.as_secs_f64()).unwrap_or(0.0)
        ));
    }
    let pack_time = scenario.agent.pack_time;
    let wasps_per_vial = f64::from(scenario.facilities[facility].wasps_per_vial);
    for (n, plan) in sol.routes.iter().enumerate() {
        let mut stops = Vec::new();
        for (k, &node) in plan.customers.iter().enumerate() {
            let (site, ships) = visit_list[node - 1];
            let arrival = at_minutes(base, plan.arrival[k]);
            let service_start = at_minutes(base, plan.service_start[k]);
            for &i in ships {
                let sh = &allocation.shipments[i];
                let packed = sh.arc.pack_date.and_time(pack_time);
                let alive = scenario
                    .agent
                    .survival_at(hours_between(packed, service_start));
                stops.push(Stop {
                    shipment: i,
                    site,
                    arrival,
                    service_start,
                    vials: sh.vials,
                    wasps_expected_alive: wasps_per_vial * alive * f64::from(sh.vials),
                    release_by: sh.arc.release_by,
                });
            }
        }
        let path = route_path(travel, facility, &plan.customers, &visit_list);
        out.routes.push(Route {
            id: format!("R-{}-{}-{}", depot_id, date.format("%Y%m%d"), n + 1),
            vehicle: fleet[plan.vehicle],
            depot: facility,
            date,
            depart: at_minutes(base, plan.depart),
            return_at: at_minutes(base, plan.return_at),
            stops,
            drive_minutes: plan.drive_minutes,
            path,
        });
    }
    for &(node, why) in &sol.unserved {
        for &i in visit_list[node - 1].1 {
            out.undeliverable.push(Undeliverable {
                shipment: i,
                reason: why.as_str(),
            });
        }
    }
}

/// The VRPTW of one depot-day: node 0 the depot, node k the k-th of `visits` (one visit per
/// site, vials added up, the earliest release-by as deadline), minutes from midnight of
/// `date`; and the fleet indices of the instance's vehicles (the depot's vehicles running that
/// day, in fleet order).
fn depot_day_instance(
    scenario: &Scenario,
    allocation: &Allocation,
    travel: &impl TravelTimes,
    facility: FacilityIdx,
    date: NaiveDate,
    visit_list: &[(SiteIdx, &Vec<usize>)],
) -> (Instance, Vec<usize>) {
    let base = date.and_time(NaiveTime::MIN);
    let settings = &scenario.dispatch;
    let customers: Vec<Customer> = visit_list
        .iter()
        .map(|(site, ships)| {
            let s = &scenario.sites[*site];
            let (service, open, close) = match s.as_block() {
                Some(b) => (settings.service_minutes_block, b.access_start, b.access_end),
                None => (
                    settings.service_minutes_dooryard,
                    settings.dooryard_window_start,
                    settings.dooryard_window_end,
                ),
            };
            let deadline = ships
                .iter()
                .map(|&i| minutes_since(base, allocation.shipments[i].arc.release_by))
                .fold(f64::INFINITY, f64::min);
            Customer {
                demand_vials: ships
                    .iter()
                    .map(|&i| allocation.shipments[i].vials)
                    .fold(0u32, u32::saturating_add),
                service_minutes: service,
                earliest: minutes_since(base, date.and_time(open)),
                latest: minutes_since(base, date.and_time(close)),
                deadline,
            }
        })
        .collect();
    let fleet: Vec<usize> = scenario
        .fleet
        .iter()
        .enumerate()
        .filter(|(_, v)| v.depot == facility && v.runs_on(date))
        .map(|(i, _)| i)
        .collect();
    let vehicles: Vec<VehicleSpec> = fleet
        .iter()
        .map(|&i| {
            let v = &scenario.fleet[i];
            let (start, end) = v.shift_on(date);
            VehicleSpec {
                capacity_vials: v.capacity_vials,
                start: minutes_since(base, start),
                latest_return: minutes_since(base, end),
            }
        })
        .collect();
    let places: Vec<Place> = std::iter::once(Place::Facility(facility))
        .chain(visit_list.iter().map(|(s, _)| Place::Site(*s)))
        .collect();
    // Both directions of each pair at once (one geodesic inverse where the model is symmetric).
    let n = places.len();
    let mut minutes = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in i + 1..n {
            let (there, back) = travel.round_trip(places[i], places[j]);
            minutes[i][j] = there;
            minutes[j][i] = back;
        }
    }
    (
        Instance {
            customers,
            minutes,
            vehicles,
        },
        fleet,
    )
}

/// Every route depot-day of `allocation` as the VRPTW [`dispatch`] solves for it, keyed by
/// (depot, date), in key order: for benchmarks against other solvers on the same instances.
pub fn depot_day_instances(
    scenario: &Scenario,
    allocation: &Allocation,
    travel: &impl TravelTimes,
) -> Vec<(FacilityIdx, NaiveDate, Instance)> {
    let mut groups: BTreeMap<(FacilityIdx, NaiveDate), BTreeMap<SiteIdx, Vec<usize>>> =
        BTreeMap::new();
    for (i, sh) in allocation.shipments.iter().enumerate() {
        if sh.arc.mode == Mode::Route {
            groups
                .entry((sh.arc.facility, sh.arc.dispatch_date))
                .or_default()
                .entry(sh.arc.site)
                .or_default()
                .push(i);
        }
    }
    groups
        .into_iter()
        .map(|((f, date), visits)| {
            let list: Vec<(SiteIdx, &Vec<usize>)> = visits.iter().map(|(s, v)| (*s, v)).collect();
            let (inst, _) = depot_day_instance(scenario, allocation, travel, f, date, &list);
            (f, date, inst)
        })
        .collect()
}

fn dispatch_parcels(
    scenario: &Scenario,
    allocation: &Allocation,
    parcels: &[usize],
    out: &mut Dispatch,
) {
    let p = &scenario.parcel;
    let mut order: Vec<usize> = parcels.to_vec();
    order.sort_by_key(|&i| {
        let a = &allocation.shipments[i].arc;
        (a.dispatch_date, a.release_by, a.site, i)
    });
    let transit =
        chrono::Duration::milliseconds((p.transit_hours.clamp(0.0, 8_760.0) * 3_600_000.0) as i64);
    let mut used: BTreeMap<NaiveDate, u32> = BTreeMap::new();
    for i in order {
        let sh = &allocation.shipments[i];
        let a = &sh.arc;
        let ship_at = a.dispatch_date.and_time(p.ship_time);
        let eta = ship_at + transit;
        let day_used = used.entry(a.dispatch_date).or_insert(0);
        let reason = if !p.days.contains(&a.dispatch_date.weekday()) {
            Some("window")
        } else if eta > a.release_by {
            Some("deadline")
        } else if day_used.saturating_add(sh.vials) > p.max_vials_per_day {
            Some("capacity")
        } else {
            None
        };
        if let Some(reason) = reason {
            out.undeliverable.push(Undeliverable {
                shipment: i,
                reason,
            });
            continue;
        }
        *day_used += sh.vials;
        let packed = a.pack_date.and_time(scenario.agent.pack_time);
        let alive = scenario.agent.survival_at(hours_between(packed, eta));
        let wasps_per_vial = f64::from(scenario.facilities[a.facility].wasps_per_vial);
        out.parcels.push(ParcelShipment {
            shipment: i,
            site: a.site,
            ship_at,
            eta,
            vials: sh.vials,
            wasps_expected_alive: wasps_per_vial * alive * f64::from(sh.vials),
            release_by: a.release_by,
        });
    }
}

/// The driven path of one route: the travel model's leg paths from the depot through the
/// stops (`customers` are 1-based nodes into `visit_list`) and back, joined without repeating
/// the shared end points. Empty when any leg has no geometry.
fn route_path(
    travel: &impl TravelTimes,
    depot: FacilityIdx,
    customers: &[usize],
    visit_list: &[(SiteIdx, &Vec<usize>)],
) -> Vec<LonLat> {
    let places: Vec<Place> = std::iter::once(Place::Facility(depot))
        .chain(
            customers
                .iter()
                .map(|&node| Place::Site(visit_list[node - 1].0)),
        )
        .chain(std::iter::once(Place::Facility(depot)))
        .collect();
    let mut path: Vec<LonLat> = Vec::new();
    for leg in places.windows(2) {
        let points = travel.leg_path(leg[0], leg[1]);
        if points.is_empty() {
            return Vec::new();
        }
        for p in points {
            if path.last() != Some(&p) {
                path.push(p);
            }
        }
    }
    path
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::Shipment;
    use crate::arcs::Arc;
    use crate::scenario::fixture::tiny;
    use crate::travel::TravelModel;

    fn ship(
        s: &Scenario,
        facility: usize,
        day: u64,
        site: &str,
        mode: Mode,
        vials: u32,
    ) -> Shipment {
        let date = s.week_start + chrono::Days::new(day);
        let packed = date.and_time(s.agent.pack_time);
        Shipment {
            arc: Arc {
                facility,
                pack_date: date,
                dispatch_date: date,
                site: s.site_idx(site).expect("fixture site"),
                mode,
                eta: packed,
                release_by: packed + chrono::Duration::hours(72),
                survival: 1.0,
                wasps_alive_per_vial: 100.0,
                drive_minutes: 0.0,
            },
            vials,
        }
    }

    fn allocation(shipments: Vec<Shipment>) -> Allocation {
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

    fn opts() -> DispatchOptions {
        DispatchOptions {
            seed: 1,
            time_limit: None,
            max_iterations: 100,
            stall_rounds: u32::MAX,
        }
    }

    #[test]
    fn same_site_same_day_is_one_visit_with_two_stops() {
        let s = tiny();
        let mut a = ship(&s, 0, 0, "B1", Mode::Route, 3);
        let mut b = a.clone();
        b.arc.pack_date = a.arc.pack_date - chrono::Days::new(1);
        b.vials = 2;
        a.arc.release_by -= chrono::Duration::hours(1);
        let alloc = allocation(vec![a, b, ship(&s, 0, 0, "B2", Mode::Route, 4)]);
        let d = dispatch_with(&s, &alloc, &TravelModel::new(&s), &opts());
        assert_eq!(d.routes.len(), 1);
        let r = &d.routes[0];
        assert_eq!(r.id, "R-F1-20270301-1");
        assert_eq!(r.vials(), 9);
        let b1: Vec<&Stop> = r.stops.iter().filter(|st| st.site == 0).collect();
        assert_eq!(b1.len(), 2);
        assert_eq!(b1[0].service_start, b1[1].service_start);
        // The older vial has aged a day more, so fewer wasps per vial are alive.
        assert!(b1[1].wasps_expected_alive / 2.0 < b1[0].wasps_expected_alive / 3.0);
    }

    #[test]
    fn a_time_limit_is_noted_and_round_limits_are_not() {
        let s = tiny();
        let alloc = allocation(vec![
            ship(&s, 0, 0, "B1", Mode::Route, 3),
            ship(&s, 0, 0, "B2", Mode::Route, 4),
        ]);
        let travel = TravelModel::new(&s);
        let by_rounds = dispatch_with(&s, &alloc, &travel, &opts());
        assert!(by_rounds.notes.is_empty(), "{:?}", by_rounds.notes);
        // A zero limit stops the perturbation rounds before the first one.
        let limited = DispatchOptions {
            time_limit: Some(Duration::ZERO),
            ..opts()
        };
        let by_time = dispatch_with(&s, &alloc, &travel, &limited);
        assert_eq!(by_time.notes.len(), 1, "{:?}", by_time.notes);
        let note = &by_time.notes[0];
        assert!(
            note.contains("F1 on 2027-03-01") && note.contains("dispatch.time_limit_seconds"),
            "{note}"
        );
        // The first local optimum is still a complete plan.
        assert_eq!(by_time.routes.len(), by_rounds.routes.len());
        // A limit that is set but stops nothing is still reported, once.
        let loose = DispatchOptions {
            time_limit: Some(Duration::from_secs(3_600)),
            ..opts()
        };
        let by_loose = dispatch_with(&s, &alloc, &travel, &loose);
        assert_eq!(by_loose.notes.len(), 1, "{:?}", by_loose.notes);
        assert!(by_loose.notes[0].contains("wall-clock limit of 3600 s"));
        assert_eq!(
            format!("{:?}", by_loose.routes),
            format!("{:?}", by_rounds.routes)
        );
    }

    #[test]
    fn no_vehicle_that_day_is_a_shift_problem_and_over_capacity_is_capacity() {
        let s = tiny();
        // F2's vehicle runs only Tuesday and Thursday; Monday has none.
        let alloc = allocation(vec![
            ship(&s, 1, 0, "B6", Mode::Route, 2),
            ship(&s, 0, 1, "B1", Mode::Route, 25),
        ]);
        let d = dispatch_with(&s, &alloc, &TravelModel::new(&s), &opts());
        assert!(d.routes.is_empty());
        assert_eq!(
            d.undeliverable,
            vec![
                Undeliverable {
                    shipment: 0,
                    reason: "shift"
                },
                Undeliverable {
                    shipment: 1,
                    reason: "capacity"
                }
            ]
        );
    }

    #[test]
    fn parcels_respect_days_cap_and_deadline() {
        let s = tiny();
        let mut late = ship(&s, 0, 0, "R3", Mode::Parcel, 1);
        late.arc.release_by = late.arc.dispatch_date.and_time(s.parcel.ship_time);
        let alloc = allocation(vec![
            ship(&s, 0, 0, "R2", Mode::Parcel, 6),
            ship(&s, 1, 0, "R3", Mode::Parcel, 6), // Monday cap 10 reached by the first
            ship(&s, 0, 1, "R3", Mode::Parcel, 2), // Tuesday is no parcel day
            late,
        ]);
        let d = dispatch_with(&s, &alloc, &TravelModel::new(&s), &opts());
        assert_eq!(d.parcels.len(), 1);
        let p = &d.parcels[0];
        assert_eq!(p.shipment, 0);
        assert_eq!(p.eta - p.ship_at, chrono::Duration::hours(24));
        let reasons: Vec<(usize, &str)> = d
            .undeliverable
            .iter()
            .map(|u| (u.shipment, u.reason))
            .collect();
        assert_eq!(
            reasons,
            vec![(1, "capacity"), (2, "window"), (3, "deadline")]
        );
    }
}
