//! A vehicle-routing engine with time windows (VRPTW) on an abstract instance.
//!
//! Node 0 is the depot, nodes 1..=n the customers. Each customer has a demand (vials), a
//! service time (minutes), a window for the *start* of service (arriving early means waiting)
//! and a hard deadline (the start of service must not be later; the effective latest start is
//! `min(latest, deadline)`). Every vehicle has its own capacity, start time and latest return.
//! All times are minutes from a common origin.
//!
//! Objective, lexicographic: serve as many customers as possible (a customer is left out only
//! when no route can take it, and is then reported with a reason), then minimise total drive
//! minutes, then the number of vehicles used.
//!
//! Method:
//! * **Feasibility in O(1)**: every route keeps, for each prefix and suffix, the segment summary
//!   of Vidal et al. (2013, "A hybrid genetic algorithm with adaptive diversity management for
//!   a large class of vehicle routing problems with time-windows", Computers & OR 40) —
//!   duration, earliest and latest feasible start of the first service, time warp, load and
//!   drive minutes. Two summaries concatenate in O(1), so an insertion, a move between routes
//!   or a tail exchange is checked in O(1); a move inside one route is checked in O(route).
//!   This is the forward-time-slack test of Savelsbergh (1992) in segment form.
//! * **Construction**: sequential insertion with Solomon's (1987) I1 criteria (α1 = 1, μ = 1,
//!   λ = 1: cheapest position by added drive, customer chosen by λ·d(0,u) − added drive),
//!   seeded with the farthest unrouted customer; O(n² · (n + V)) worst case.
//! * **Local search** (first improvement over each customer's `neighbours` nearest):
//!   relocate of 1–3 consecutive customers (Or-opt, both orientations, within and between
//!   routes), exchange of two customers, 2-opt inside a route, 2-opt* (tail exchange) between
//!   routes, and moving a customer to an unused vehicle. One pass is O(n · k · L) for route
//!   length L (O(n · k) for moves between routes).
//! * **Perturbation** (iterated local search): remove a customer and its nearest served
//!   neighbours (3–15), re-insert them and any unserved customer at the cheapest feasible
//!   place, run the local search, keep the result under a record-to-record rule (accept if at
//!   most 1 % worse than the best, falling to 0 over the run), always keeping the best.
//!
//! The number of perturbation rounds is capped by `max_iterations`; `time_limit`, when set,
//! also stops the run, and a binding time limit makes results depend on machine speed (tests
//! set it to `None`).

use std::time::{Duration, Instant};

/// Time-window and load tolerance: a route is feasible when its time warp is at most this
/// many minutes, so float rounding in sums does not reject exactly-tight routes.
const FEAS_EPS: f64 = 1e-7;
/// Improvements smaller than this (minutes) are ties.
const EPS: f64 = 1e-9;

/// One customer (node i ≥ 1) of an [`Instance`].
#[derive(Clone, Debug, PartialEq)]
pub struct Customer {
    /// Vials to deliver.
    pub demand_vials: u32,
    /// Minutes spent at the customer.
    pub service_minutes: f64,
    /// Earliest start of service, minutes (arriving earlier waits).
    pub earliest: f64,
    /// Latest start of service by the time window, minutes.
    pub latest: f64,
    /// Hard deadline for the start of service, minutes (e.g. the vials' release-by time).
    pub deadline: f64,
}

impl Customer {
    fn latest_start(&self) -> f64 {
        self.latest.min(self.deadline)
    }
}

/// One vehicle of an [`Instance`].
#[derive(Clone, Debug, PartialEq)]
pub struct VehicleSpec {
    /// Most vials on board.
    pub capacity_vials: u32,
    /// Departure from the depot, minutes.
    pub start: f64,
    /// Latest return to the depot, minutes (end of shift).
    pub latest_return: f64,
}

/// An abstract VRPTW instance.
#[derive(Clone, Debug, PartialEq)]
pub struct Instance {
    /// Customers; `customers[i - 1]` is node i.
    pub customers: Vec<Customer>,
    /// `minutes[i][j]`: drive from node i to node j (node 0 = depot), square with
    /// `customers.len() + 1` rows; need not be symmetric. Short rows or non-finite values make
    /// the arc unusable.
    pub minutes: Vec<Vec<f64>>,
    /// The fleet; route `vehicle` fields index this.
    pub vehicles: Vec<VehicleSpec>,
}

/// Search settings for [`solve`].
#[derive(Clone, Debug, PartialEq)]
pub struct SolveOptions {
    /// Seed for the perturbation choices.
    pub seed: u64,
    /// Wall-clock budget; `None` for the iteration cap only. A binding limit makes the result
    /// depend on the machine's speed.
    pub time_limit: Option<Duration>,
    /// Most perturbation rounds after the first local optimum.
    pub max_iterations: u32,
    /// Nearest neighbours per customer considered by the local search (≥ 1).
    pub neighbours: usize,
    /// Stop after this many perturbation rounds in a row without a new best solution
    /// (`u32::MAX`: never). Small depot-days converge long before `max_iterations`.
    pub stall_rounds: u32,
}

impl Default for SolveOptions {
    /// Seed 1, 2 s, 3,000 rounds, 12 neighbours, stop after 1,000 rounds without a new best.
    fn default() -> Self {
        SolveOptions {
            seed: 1,
            time_limit: Some(Duration::from_secs(2)),
            max_iterations: 3_000,
            neighbours: 12,
            stall_rounds: 1_000,
        }
    }
}

/// Why a customer could not be placed on any route.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Infeasibility {
    /// Its demand exceeds every vehicle's free capacity.
    Capacity,
    /// No vehicle can reach it and be back inside its shift.
    Shift,
    /// Service could not start by its deadline.
    Deadline,
    /// Service could not start inside its time window.
    Window,
}

impl Infeasibility {
    /// `capacity`, `shift`, `deadline` or `window`.
    pub fn as_str(self) -> &'static str {
        match self {
            Infeasibility::Capacity => "capacity",
            Infeasibility::Shift => "shift",
            Infeasibility::Deadline => "deadline",
            Infeasibility::Window => "window",
        }
    }
}

/// One vehicle's route in a [`Solution`].
#[derive(Clone, Debug, PartialEq)]
pub struct RoutePlan {
    /// Index into `Instance::vehicles`.
    pub vehicle: usize,
    /// Customer nodes (1-based) in visiting order.
    pub customers: Vec<usize>,
    /// Arrival at each customer, minutes.
    pub arrival: Vec<f64>,
    /// Start of service at each customer (arrival or window opening), minutes.
    pub service_start: Vec<f64>,
    /// Departure from the depot (the vehicle's start), minutes.
    pub depart: f64,
    /// Return to the depot, minutes.
    pub return_at: f64,
    /// Drive minutes (excluding service and waiting).
    pub drive_minutes: f64,
    /// Vials on board at departure.
    pub load_vials: u32,
}

/// The routes found and the customers left out.
#[derive(Clone, Debug, PartialEq)]
pub struct Solution {
    /// Non-empty routes in vehicle order.
    pub routes: Vec<RoutePlan>,
    /// Customers (1-based) no route could take, ascending, with the most telling reason.
    pub unserved: Vec<(usize, Infeasibility)>,
    /// Sum of the routes' drive minutes.
    pub total_drive_minutes: f64,
    /// Whether `time_limit` stopped the search before its round limits: then another run may
    /// give other routes.
    pub time_limited: bool,
}

impl Solution {
    /// Vehicles used (non-empty routes).
    pub fn vehicles_used(&self) -> usize {
        self.routes.len()
    }
}

/// Solves `inst` (see the module doc for method and complexity). Deterministic for a given
/// `opts.seed` unless `opts.time_limit` binds. Never panics on odd input: customers that no
/// vehicle can serve alone are reported as unserved.
///
/// ```
/// use broodcast::dispatch::vrptw::{Customer, Instance, SolveOptions, VehicleSpec, solve};
/// let stop = |earliest: f64, latest: f64| Customer {
///     demand_vials: 2,
///     service_minutes: 5.0,
///     earliest,
///     latest,
///     deadline: 600.0,
/// };
/// let inst = Instance {
///     // Two stops 10 minutes from the depot and 10 apart; the second only opens at 100.
///     customers: vec![stop(0.0, 600.0), stop(100.0, 200.0)],
///     minutes: vec![
///         vec![0.0, 10.0, 10.0],
///         vec![10.0, 0.0, 10.0],
///         vec![10.0, 10.0, 0.0],
///     ],
///     vehicles: vec![VehicleSpec { capacity_vials: 3, start: 0.0, latest_return: 480.0 }; 2],
/// };
/// let opts = SolveOptions { time_limit: None, ..SolveOptions::default() };
/// let sol = solve(&inst, &opts);
/// // 4 vials do not fit one 3-vial van: two routes, each out and back.
/// assert_eq!(sol.vehicles_used(), 2);
/// assert_eq!(sol.total_drive_minutes, 40.0);
/// assert_eq!(sol.routes[1].service_start, vec![100.0]); // waited for the window
/// ```
pub fn solve(inst: &Instance, opts: &SolveOptions) -> Solution {
    let started = Instant::now();
    let data = Data::new(inst, opts.neighbours.max(1));
    let mut cur = State::empty(&data);
    cur.construct();
    cur.local_search(None);
    let mut best = cur.clone();
    let mut rng = fastrand::Rng::with_seed(opts.seed);
    let served = data.n - 1;
    let mut time_limited = false;
    if served > 1 {
        let mut last_best = 0u32;
        for it in 0..opts.max_iterations {
            if it - last_best >= opts.stall_rounds {
                break;
            }
            if let Some(limit) = opts.time_limit
                && started.elapsed() >= limit
            {
                time_limited = true;
                break;
            }
            let mut cand = cur.clone();
            let dirty = cand.ruin_and_recreate(&mut rng);
            cand.local_search(Some(dirty));
            let threshold = 0.01 * (1.0 - f64::from(it) / f64::from(opts.max_iterations));
            let (bu, bd, _) = best.key();
            let (cu, cd, _) = cand.key();
            if cand.key_lt(&best) {
                last_best = it;
                best = cand.clone();
                cur = cand;
            } else if cu <= bu && cd <= bd * (1.0 + threshold) + EPS {
                cur = cand;
            }
        }
    }
    Solution {
        time_limited,
        ..best.into_solution()
    }
}

/// Instance data in solver-friendly form.
struct Data<'a> {
    inst: &'a Instance,
    /// Number of nodes including the depot.
    n: usize,
    /// Row-major n × n minutes.
    d: Vec<f64>,
    /// Per customer node: nearest other customers by d(i,j) + d(j,i).
    neigh: Vec<Vec<usize>>,
}

impl<'a> Data<'a> {
    fn new(inst: &'a Instance, k: usize) -> Self {
        let n = inst.customers.len() + 1;
        let mut d = vec![f64::INFINITY; n * n];
        for i in 0..n {
            for j in 0..n {
                d[i * n + j] = if i == j {
                    0.0
                } else {
                    match inst.minutes.get(i).and_then(|r| r.get(j)) {
                        Some(&m) if m.is_finite() && m >= 0.0 => m,
                        _ => f64::INFINITY,
                    }
                };
            }
        }
        let neigh = (0..n)
            .map(|i| {
                if i == 0 {
                    return Vec::new();
                }
                let mut o: Vec<usize> = (1..n).filter(|&j| j != i).collect();
                o.sort_by(|&a, &b| {
                    (d[i * n + a] + d[a * n + i])
                        .total_cmp(&(d[i * n + b] + d[b * n + i]))
                        .then(a.cmp(&b))
                });
                o.truncate(k);
                o
            })
            .collect();
        Data { inst, n, d, neigh }
    }

    fn c(&self, i: usize, j: usize) -> f64 {
        self.d[i * self.n + j]
    }

    fn customer(&self, node: usize) -> &Customer {
        &self.inst.customers[node - 1]
    }

    fn node_seg(&self, node: usize) -> Seg {
        let c = self.customer(node);
        let (e, l) = (c.earliest, c.latest_start());
        Seg {
            first: node,
            last: node,
            dist: 0.0,
            dur: c.service_minutes,
            e,
            l,
            tw: (e - l).max(0.0),
            load: u64::from(c.demand_vials),
        }
    }

    fn depot_seg(&self, vehicle: usize) -> Seg {
        let v = &self.inst.vehicles[vehicle];
        Seg {
            first: 0,
            last: 0,
            dist: 0.0,
            dur: 0.0,
            e: v.start,
            l: v.latest_return,
            tw: (v.start - v.latest_return).max(0.0),
            load: 0,
        }
    }

    /// a followed by b, O(1).
    fn cat(&self, a: &Seg, b: &Seg) -> Seg {
        let t = self.c(a.last, b.first);
        let delta = a.dur - a.tw + t;
        let wt = (b.e - delta - a.l).max(0.0);
        let tw = (a.e + delta - b.l).max(0.0);
        Seg {
            first: a.first,
            last: b.last,
            dist: a.dist + b.dist + t,
            dur: a.dur + b.dur + t + wt,
            e: (b.e - delta).max(a.e) - wt,
            l: (b.l - delta).min(a.l) + tw,
            tw: a.tw + b.tw + tw,
            load: a.load + b.load,
        }
    }

    fn feasible(&self, s: &Seg, vehicle: usize) -> bool {
        s.dist.is_finite()
            && s.tw <= FEAS_EPS
            && s.load <= u64::from(self.inst.vehicles[vehicle].capacity_vials)
    }

    /// Full route summary for `vehicle` visiting `nodes`, O(len).
    fn route_seg(&self, vehicle: usize, nodes: impl IntoIterator<Item = usize>) -> Seg {
        let mut s = self.depot_seg(vehicle);
        for v in nodes {
            s = self.cat(&s, &self.node_seg(v));
        }
        self.cat(&s, &self.depot_seg(vehicle))
    }
}

/// Summary of a sequence of visits (Vidal et al. 2013): `dur` minutes from the first service
/// start to the end of the last service when starting at `e`; `e`/`l` earliest/latest start of
/// the first service; `tw` time warp (0 when feasible); `load` vials; `dist` drive minutes.
#[derive(Clone, Copy, Debug)]
struct Seg {
    first: usize,
    last: usize,
    dist: f64,
    dur: f64,
    e: f64,
    l: f64,
    tw: f64,
    load: u64,
}

#[derive(Clone)]
struct Route {
    vehicle: usize,
    nodes: Vec<usize>,
    /// `pre[k]`: depot then nodes[..k].
    pre: Vec<Seg>,
    /// `suf[k]`: nodes[k..] then depot.
    suf: Vec<Seg>,
}

#[derive(Clone)]
struct State<'a> {
    data: &'a Data<'a>,
    /// One route per vehicle, index = vehicle.
    routes: Vec<Route>,
    /// Per node: (route, position) when routed.
    at: Vec<Option<(usize, usize)>>,
    unserved: Vec<usize>,
}

/// A candidate change to at most two routes.
struct Move {
    a: usize,
    a_nodes: Vec<usize>,
    b: Option<(usize, Vec<usize>)>,
}

impl<'a> State<'a> {
    fn empty(data: &'a Data<'a>) -> Self {
        let mut s = State {
            data,
            routes: (0..data.inst.vehicles.len())
                .map(|v| Route {
                    vehicle: v,
                    nodes: Vec::new(),
                    pre: Vec::new(),
                    suf: Vec::new(),
                })
                .collect(),
            at: vec![None; data.n],
            unserved: Vec::new(),
        };
        for r in 0..s.routes.len() {
            s.refresh(r);
        }
        s
    }

    fn refresh(&mut self, r: usize) {
        let d = self.data;
        let route = &mut self.routes[r];
        let v = route.vehicle;
        let len = route.nodes.len();
        route.pre.clear();
        route.pre.push(d.depot_seg(v));
        for k in 0..len {
            let next = d.cat(&route.pre[k], &d.node_seg(route.nodes[k]));
            route.pre.push(next);
        }
        route.suf.clear();
        route.suf.resize(len + 1, d.depot_seg(v));
        for k in (0..len).rev() {
            route.suf[k] = d.cat(&d.node_seg(route.nodes[k]), &route.suf[k + 1]);
        }
        for (p, &node) in route.nodes.iter().enumerate() {
            self.at[node] = Some((r, p));
        }
    }

    /// Drive minutes of route r.
    fn route_dist(&self, r: usize) -> f64 {
        let route = &self.routes[r];
        if route.nodes.is_empty() {
            0.0
        } else {
            self.data.cat(&route.pre[0], &route.suf[0]).dist
        }
    }

    fn total_dist(&self) -> f64 {
        (0..self.routes.len()).map(|r| self.route_dist(r)).sum()
    }

    /// (unserved, drive, vehicles): smaller is better, lexicographically.
    fn key(&self) -> (usize, f64, usize) {
        (
            self.unserved.len(),
            self.total_dist(),
            self.routes.iter().filter(|r| !r.nodes.is_empty()).count(),
        )
    }

    fn key_lt(&self, other: &Self) -> bool {
        let (a, b) = (self.key(), other.key());
        a.0 < b.0 || (a.0 == b.0 && (a.1 < b.1 - EPS || (a.1 <= b.1 + EPS && a.2 < b.2)))
    }

    /// Cheapest feasible insertion of `u` into route r: (added drive, position). O(len).
    fn best_insert(&self, r: usize, u: usize) -> Option<(f64, usize)> {
        let d = self.data;
        let route = &self.routes[r];
        let us = d.node_seg(u);
        let before = self.route_dist(r);
        let mut best: Option<(f64, usize)> = None;
        for k in 0..=route.nodes.len() {
            let s = d.cat(&d.cat(&route.pre[k], &us), &route.suf[k]);
            if d.feasible(&s, route.vehicle) {
                let add = s.dist - before;
                if best.is_none_or(|(b, _)| add < b - EPS) {
                    best = Some((add, k));
                }
            }
        }
        best
    }

    fn insert(&mut self, r: usize, k: usize, u: usize) {
        self.routes[r].nodes.insert(k, u);
        self.refresh(r);
    }

    /// Solomon I1, sequential: fill the open routes, open the next vehicle with the farthest
    /// customer it can serve alone.
    fn construct(&mut self) {
        let d = self.data;
        let mut left: Vec<usize> = (1..d.n).collect();
        let mut next_vehicle = 0;
        while !left.is_empty() {
            // Best (criterion, customer index in `left`, route, position) over open routes.
            let mut pick: Option<(f64, usize, usize, usize)> = None;
            for (li, &u) in left.iter().enumerate() {
                let mut best_u: Option<(f64, usize, usize)> = None;
                for r in 0..next_vehicle {
                    if let Some((add, k)) = self.best_insert(r, u)
                        && best_u.is_none_or(|(b, _, _)| add < b - EPS)
                    {
                        best_u = Some((add, r, k));
                    }
                }
                if let Some((add, r, k)) = best_u {
                    let crit = d.c(0, u) - add;
                    if pick.is_none_or(|(b, ..)| crit > b + EPS) {
                        pick = Some((crit, li, r, k));
                    }
                }
            }
            if let Some((_, li, r, k)) = pick {
                let u = left.remove(li);
                self.insert(r, k, u);
                continue;
            }
            // Open the next vehicle that can serve someone alone, with its farthest such customer.
            let mut opened = false;
            while next_vehicle < self.routes.len() && !opened {
                let r = next_vehicle;
                next_vehicle += 1;
                let mut seed: Option<(f64, usize)> = None;
                for (li, &u) in left.iter().enumerate() {
                    if self.best_insert(r, u).is_some() {
                        let far = d.c(0, u);
                        if seed.is_none_or(|(b, _)| far > b + EPS) {
                            seed = Some((far, li));
                        }
                    }
                }
                if let Some((_, li)) = seed {
                    let u = left.remove(li);
                    self.insert(r, 0, u);
                    opened = true;
                }
            }
            if !opened {
                break;
            }
        }
        self.unserved = left;
    }

    fn apply(&mut self, m: Move) {
        let Move { a, a_nodes, b } = m;
        for &node in &self.routes[a].nodes {
            self.at[node] = None;
        }
        if let Some((b, _)) = &b {
            for &node in &self.routes[*b].nodes {
                self.at[node] = None;
            }
        }
        self.routes[a].nodes = a_nodes;
        self.refresh(a);
        if let Some((b, nodes)) = b {
            self.routes[b].nodes = nodes;
            self.refresh(b);
        }
    }

    /// Whether a change with drive delta `delta` that leaves `emptied` routes empty improves.
    fn improves(delta: f64, emptied: bool) -> bool {
        delta < -EPS || (delta <= EPS && emptied)
    }

    /// One full local search to a local optimum.
    ///
    /// Passes look only at customers on routes changed in the previous pass (all routes in the
    /// first when `dirty` is `None`), a don't-look rule at route level: a move from a clean
    /// route into a changed one is still found from the changed route's side when it is a
    /// relocate/exchange/tail swap of that route's customers.
    fn local_search(&mut self, dirty: Option<Vec<bool>>) {
        let d = self.data;
        let mut dirty = dirty.unwrap_or_else(|| vec![true; self.routes.len()]);
        let mut guard = 0usize;
        while dirty.iter().any(|&x| x) && guard < 10_000 {
            guard += 1;
            let mut next = vec![false; self.routes.len()];
            for u in 1..d.n {
                let Some((r, _)) = self.at[u] else { continue };
                if !dirty[r] {
                    continue;
                }
                if let Some(m) = self.find_move(u) {
                    next[m.a] = true;
                    dirty[m.a] = true;
                    if let Some((b, _)) = &m.b {
                        next[*b] = true;
                        dirty[*b] = true;
                    }
                    #[cfg(debug_assertions)]
                    let before = self.total_dist();
                    self.apply(m);
                    #[cfg(debug_assertions)]
                    debug_assert!(self.total_dist() <= before + 1e-6, "move lengthened routes");
                }
            }
            dirty = next;
        }
    }

    /// First improving move involving customer u, if any.
    fn find_move(&self, u: usize) -> Option<Move> {
        let d = self.data;
        let (ru, pu) = self.at[u]?;
        let a = &self.routes[ru];
        let va = a.vehicle;
        let la = a.nodes.len();
        let dist_a = self.route_dist(ru);
        // Summaries of the 1–3 customers from u (both ways) and of route a without them.
        let cut: [(Seg, Seg, Seg); 3] = std::array::from_fn(|k| {
            let len = (k + 1).min(la - pu);
            let seg = &a.nodes[pu..pu + len];
            (
                seg_of(d, seg.iter().copied()),
                seg_of(d, seg.iter().rev().copied()),
                d.cat(&a.pre[pu], &a.suf[pu + len]),
            )
        });
        for &v in &d.neigh[u] {
            let Some((rv, pv)) = self.at[v] else { continue };
            if rv == ru {
                if let Some(m) = self.intra(ru, pu, pv) {
                    return Some(m);
                }
                continue;
            }
            let b = &self.routes[rv];
            let vb = b.vehicle;
            let lb = b.nodes.len();
            let dist_b = self.route_dist(rv);
            let base = dist_a + dist_b;
            // Relocate 1–3 customers starting at u, either orientation, before or after v.
            for len in 1..=3 {
                if pu + len > la {
                    break;
                }
                let seg = &a.nodes[pu..pu + len];
                let (fwd, rev, new_a) = cut[len - 1];
                if !d.feasible(&new_a, va) {
                    continue;
                }
                let emptied = la == len;
                let dist_new_a = if emptied { 0.0 } else { new_a.dist };
                for k in [pv, pv + 1] {
                    for (s, reversed) in [(&fwd, false), (&rev, true)] {
                        let new_b = d.cat(&d.cat(&b.pre[k], s), &b.suf[k]);
                        if !d.feasible(&new_b, vb) {
                            continue;
                        }
                        if Self::improves(dist_new_a + new_b.dist - base, emptied) {
                            let mut an = a.nodes.clone();
                            an.drain(pu..pu + len);
                            let mut bn = b.nodes.clone();
                            let mut ins = seg.to_vec();
                            if reversed {
                                ins.reverse();
                            }
                            bn.splice(k..k, ins);
                            return Some(Move {
                                a: ru,
                                a_nodes: an,
                                b: Some((rv, bn)),
                            });
                        }
                    }
                }
            }
            // Exchange u and v.
            {
                let new_a = d.cat(&d.cat(&a.pre[pu], &d.node_seg(v)), &a.suf[pu + 1]);
                let new_b = d.cat(&d.cat(&b.pre[pv], &d.node_seg(u)), &b.suf[pv + 1]);
                if d.feasible(&new_a, va)
                    && d.feasible(&new_b, vb)
                    && Self::improves(new_a.dist + new_b.dist - base, false)
                {
                    let mut an = a.nodes.clone();
                    let mut bn = b.nodes.clone();
                    an[pu] = v;
                    bn[pv] = u;
                    return Some(Move {
                        a: ru,
                        a_nodes: an,
                        b: Some((rv, bn)),
                    });
                }
            }
            // 2-opt*: u then v's tail; v's head then u's tail. Also v's head then u (u's
            // tail after v's head, i.e. edge pred… covered by symmetry from v's side).
            for (ka, kb) in [(pu + 1, pv), (pu, pv + 1)] {
                let new_a = d.cat(&a.pre[ka], &b.suf[kb]);
                let new_b = d.cat(&b.pre[kb], &a.suf[ka]);
                if !d.feasible(&new_a, va) || !d.feasible(&new_b, vb) {
                    continue;
                }
                let na = ka + (lb - kb);
                let nb = kb + (la - ka);
                let da = if na == 0 { 0.0 } else { new_a.dist };
                let db = if nb == 0 { 0.0 } else { new_b.dist };
                if Self::improves(da + db - base, na == 0 || nb == 0) {
                    let mut an = a.nodes[..ka].to_vec();
                    an.extend_from_slice(&b.nodes[kb..]);
                    let mut bn = b.nodes[..kb].to_vec();
                    bn.extend_from_slice(&a.nodes[ka..]);
                    return Some(Move {
                        a: ru,
                        a_nodes: an,
                        b: Some((rv, bn)),
                    });
                }
            }
        }
        // Move u alone to the first unused vehicle that can take it.
        if la > 1 {
            let new_a = d.cat(&a.pre[pu], &a.suf[pu + 1]);
            if d.feasible(&new_a, va)
                && let Some(r) = self.routes.iter().position(|r| r.nodes.is_empty())
            {
                let alone = d.route_seg(r, [u]);
                if d.feasible(&alone, r) && Self::improves(new_a.dist + alone.dist - dist_a, false)
                {
                    let mut an = a.nodes.clone();
                    an.remove(pu);
                    return Some(Move {
                        a: ru,
                        a_nodes: an,
                        b: Some((r, vec![u])),
                    });
                }
            }
        }
        None
    }

    /// Improving move inside route r between positions pu and pv: Or-opt of 1–3 from pu to
    /// next to pv, exchange, 2-opt. The drive change is priced first from the few edges that
    /// change (O(1), O(stretch) for a reversal); only improving candidates get the O(stretch)
    /// time-window check.
    fn intra(&self, r: usize, pu: usize, pv: usize) -> Option<Move> {
        let d = self.data;
        let route = &self.routes[r];
        let veh = route.vehicle;
        let nodes = &route.nodes;
        let len_r = nodes.len();
        // Node at position k, the depot just outside either end.
        let x = |k: isize| -> usize {
            if k < 0 || k as usize >= len_r {
                0
            } else {
                nodes[k as usize]
            }
        };
        let c = |i: usize, j: usize| d.c(i, j);
        // Feasibility of a candidate that differs from `nodes` only inside lo..hi.
        let check = |cand: &[usize], lo: usize, hi: usize| -> Option<Move> {
            let mut s = route.pre[lo];
            for &v in &cand[lo..hi] {
                s = d.cat(&s, &d.node_seg(v));
            }
            let s = d.cat(&s, &route.suf[hi]);
            d.feasible(&s, veh).then(|| Move {
                a: r,
                a_nodes: cand.to_vec(),
                b: None,
            })
        };
        let mut cand: Vec<usize> = Vec::with_capacity(len_r);
        let (pu_i, pv_i) = (pu as isize, pv as isize);
        // Or-opt: cut nodes[pu..pu+len] and put it before or after v, either way round.
        for len in 1..=3usize {
            if pu + len > len_r || (pv >= pu && pv < pu + len) {
                break;
            }
            let seg = &nodes[pu..pu + len];
            let (s0, sl) = (seg[0], seg[len - 1]);
            let (before, after) = (x(pu_i - 1), x(pu_i + len as isize));
            let removed = c(before, s0) + c(sl, after) - c(before, after);
            let inner_fwd: f64 = seg.windows(2).map(|w| c(w[0], w[1])).sum();
            let inner_rev: f64 = seg.windows(2).map(|w| c(w[1], w[0])).sum();
            // Insert between (a, b) = (pred v, v) or (v, succ v) in the route without the cut.
            let skip = |k: isize| -> isize {
                if k >= pu_i && k < pu_i + len as isize {
                    if k < pv_i {
                        pu_i - 1
                    } else {
                        pu_i + len as isize
                    }
                } else {
                    k
                }
            };
            for (ka, kb) in [(skip(pv_i - 1), pv_i), (pv_i, skip(pv_i + 1))] {
                let (na, nb) = (x(ka), x(kb));
                for reversed in [false, true] {
                    let (f, l, inner) = if reversed {
                        (sl, s0, inner_rev - inner_fwd)
                    } else {
                        (s0, sl, 0.0)
                    };
                    let delta = c(na, f) + c(l, nb) - c(na, nb) + inner - removed;
                    if delta >= -EPS {
                        continue;
                    }
                    // Insert index in the list without the cut: after position ka.
                    let k = if ka < pu_i {
                        ka + 1
                    } else {
                        ka + 1 - len as isize
                    } as usize;
                    cand.clear();
                    let mut rest = nodes[..pu].iter().chain(&nodes[pu + len..]).copied();
                    cand.extend(rest.by_ref().take(k));
                    if reversed {
                        cand.extend(seg.iter().rev());
                    } else {
                        cand.extend(seg.iter());
                    }
                    cand.extend(rest);
                    let lo = pu.min(k);
                    let hi = (pu + len).max(k + len);
                    if let Some(m) = check(&cand, lo, hi.min(len_r)) {
                        return Some(m);
                    }
                }
            }
        }
        let (i, j) = if pu < pv { (pu, pv) } else { (pv, pu) };
        let (ii, ji) = (i as isize, j as isize);
        // Exchange.
        {
            let (u, v) = (nodes[i], nodes[j]);
            let delta = if j == i + 1 {
                let (p, n) = (x(ii - 1), x(ji + 1));
                c(p, v) + c(v, u) + c(u, n) - c(p, u) - c(u, v) - c(v, n)
            } else {
                let (pi, ni, pj, nj) = (x(ii - 1), x(ii + 1), x(ji - 1), x(ji + 1));
                c(pi, v) + c(v, ni) + c(pj, u) + c(u, nj)
                    - c(pi, u)
                    - c(u, ni)
                    - c(pj, v)
                    - c(v, nj)
            };
            if delta < -EPS {
                cand.clear();
                cand.extend_from_slice(nodes);
                cand.swap(i, j);
                if let Some(m) = check(&cand, i, j + 1) {
                    return Some(m);
                }
            }
        }
        // 2-opt: make u and v adjacent by reversing the stretch between.
        for (p, q) in [(i + 1, j), (i, j.saturating_sub(1))] {
            if p < q {
                let stretch = &nodes[p..=q];
                let inner: f64 = stretch
                    .windows(2)
                    .map(|w| c(w[1], w[0]) - c(w[0], w[1]))
                    .sum();
                let (a, b) = (x(p as isize - 1), x(q as isize + 1));
                let delta =
                    c(a, nodes[q]) + c(nodes[p], b) - c(a, nodes[p]) - c(nodes[q], b) + inner;
                if delta < -EPS {
                    cand.clear();
                    cand.extend_from_slice(nodes);
                    cand[p..=q].reverse();
                    if let Some(m) = check(&cand, p, q + 1) {
                        return Some(m);
                    }
                }
            }
        }
        None
    }

    /// Removes a customer and some of its nearest served neighbours, then re-inserts them and
    /// any unserved customer at the cheapest feasible place (empty vehicles included).
    /// Returns which routes changed.
    fn ruin_and_recreate(&mut self, rng: &mut fastrand::Rng) -> Vec<bool> {
        let d = self.data;
        let mut changed = vec![false; self.routes.len()];
        let served: Vec<usize> = (1..d.n).filter(|&u| self.at[u].is_some()).collect();
        if served.is_empty() {
            return changed;
        }
        let centre = served[rng.usize(..served.len())];
        let want = rng.usize(3..=15).min(served.len());
        let mut removed = vec![centre];
        for &v in &d.neigh[centre] {
            if removed.len() >= want {
                break;
            }
            if self.at[v].is_some() {
                removed.push(v);
            }
        }
        let mut touched: Vec<usize> = Vec::new();
        for &u in &removed {
            if let Some((r, _)) = self.at[u] {
                touched.push(r);
            }
        }
        touched.sort_unstable();
        touched.dedup();
        for &r in &touched {
            changed[r] = true;
            let keep: Vec<usize> = self.routes[r]
                .nodes
                .iter()
                .copied()
                .filter(|x| !removed.contains(x))
                .collect();
            for &node in &self.routes[r].nodes {
                self.at[node] = None;
            }
            self.routes[r].nodes = keep;
            self.refresh(r);
        }
        let mut pending: Vec<usize> = removed;
        pending.append(&mut self.unserved);
        rng.shuffle(&mut pending);
        // Order by a random key mixed with distance to the depot (far first), a common
        // recreate order (common practice: "sort by distance / random" in ruin-and-recreate).
        if rng.bool() {
            pending.sort_by(|&a, &b| d.c(0, b).total_cmp(&d.c(0, a)).then(a.cmp(&b)));
        }
        let mut left = Vec::new();
        for u in pending {
            let mut best: Option<(f64, usize, usize)> = None;
            let mut tried_empty = false;
            for r in 0..self.routes.len() {
                let empty = self.routes[r].nodes.is_empty();
                if empty && tried_empty {
                    continue;
                }
                if let Some((add, k)) = self.best_insert(r, u) {
                    if empty {
                        tried_empty = true;
                    }
                    if best.is_none_or(|(b, _, _)| add < b - EPS) {
                        best = Some((add, r, k));
                    }
                }
            }
            match best {
                Some((_, r, k)) => {
                    changed[r] = true;
                    self.insert(r, k, u);
                }
                None => left.push(u),
            }
        }
        left.sort_unstable();
        self.unserved = left;
        changed
    }

    /// Most telling reason `u` fits nowhere.
    fn reason(&self, u: usize) -> Infeasibility {
        let d = self.data;
        let cu = d.customer(u);
        let vehicles = &d.inst.vehicles;
        if vehicles.is_empty() {
            return Infeasibility::Shift;
        }
        if vehicles
            .iter()
            .all(|v| u64::from(cu.demand_vials) > u64::from(v.capacity_vials))
        {
            return Infeasibility::Capacity;
        }
        // Alone with each vehicle that could carry it: which constraint breaks first?
        let mut alone_reason: Option<Infeasibility> = None;
        for (vi, v) in vehicles.iter().enumerate() {
            if cu.demand_vials > v.capacity_vials {
                continue;
            }
            let arrive = v.start + d.c(0, u);
            let start = arrive.max(cu.earliest);
            let why = if !arrive.is_finite() || start > cu.deadline + FEAS_EPS {
                Some(if cu.deadline < cu.latest {
                    Infeasibility::Deadline
                } else {
                    Infeasibility::Window
                })
            } else if start > cu.latest + FEAS_EPS {
                Some(Infeasibility::Window)
            } else if !d.feasible(&d.route_seg(vi, [u]), vi) {
                Some(Infeasibility::Shift)
            } else {
                None
            };
            match why {
                None => {
                    alone_reason = None;
                    break;
                }
                Some(w) => {
                    alone_reason = Some(alone_reason.map_or(w, |a: Infeasibility| a.min(w)));
                }
            }
        }
        if let Some(w) = alone_reason {
            return w;
        }
        // Servable alone: the fleet is full. Capacity if no route has room, else shift.
        let room = self.routes.iter().any(|r| {
            let load = r.suf.first().map_or(0, |s| s.load);
            load + u64::from(cu.demand_vials) <= u64::from(vehicles[r.vehicle].capacity_vials)
        });
        if room {
            Infeasibility::Shift
        } else {
            Infeasibility::Capacity
        }
    }

    fn into_solution(self) -> Solution {
        let d = self.data;
        let mut routes = Vec::new();
        for route in &self.routes {
            if route.nodes.is_empty() {
                continue;
            }
            let veh = &d.inst.vehicles[route.vehicle];
            let mut t = veh.start;
            let mut prev = 0;
            let mut arrival = Vec::with_capacity(route.nodes.len());
            let mut service_start = Vec::with_capacity(route.nodes.len());
            let mut drive = 0.0;
            for &v in &route.nodes {
                let c = d.customer(v);
                let a = t + d.c(prev, v);
                drive += d.c(prev, v);
                let s = a.max(c.earliest);
                arrival.push(a);
                service_start.push(s);
                t = s + c.service_minutes;
                prev = v;
            }
            drive += d.c(prev, 0);
            routes.push(RoutePlan {
                vehicle: route.vehicle,
                customers: route.nodes.clone(),
                arrival,
                service_start,
                depart: veh.start,
                return_at: t + d.c(prev, 0),
                drive_minutes: drive,
                load_vials: route
                    .nodes
                    .iter()
                    .map(|&v| d.customer(v).demand_vials)
                    .sum(),
            });
        }
        let mut unserved: Vec<(usize, Infeasibility)> =
            self.unserved.iter().map(|&u| (u, self.reason(u))).collect();
        unserved.sort_unstable();
        let total_drive_minutes = routes.iter().map(|r| r.drive_minutes).sum();
        Solution {
            routes,
            unserved,
            total_drive_minutes,
            time_limited: false,
        }
    }
}

fn seg_of(d: &Data<'_>, nodes: impl Iterator<Item = usize>) -> Seg {
    let mut it = nodes;
    let first = it.next().expect("segment has at least one node");
    let mut s = d.node_seg(first);
    for v in it {
        s = d.cat(&s, &d.node_seg(v));
    }
    s
}

#[cfg(test)]
mod tests {
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
                let s = d.route_seg(0, order.iter().copied());
                if d.feasible(&s, 0) {
                    *best = best.min(s.dist);
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

    #[test]
    fn segment_concatenation_matches_forward_simulation() {
        let inst = grid_instance(12, 4, 1, 100);
        let d = Data::new(&inst, 3);
        let mut rng = fastrand::Rng::with_seed(5);
        for _ in 0..200 {
            let mut order: Vec<usize> = (1..=12).collect();
            rng.shuffle(&mut order);
            order.truncate(rng.usize(1..=12));
            let s = d.route_seg(0, order.iter().copied());
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
}
