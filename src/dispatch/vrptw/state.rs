//! A solution under search: one route slot per vehicle with cached head and tail summaries,
//! the objective, applying a move, cheapest insertion with a choice of vehicle, and the
//! conversion to a [`Solution`].

use super::segment::{Data, EPS, FEAS_EPS, Seg};
use super::{Infeasibility, RoutePlan, Solution};

/// One vehicle's route.
pub(super) struct Route {
    /// Customer nodes in visiting order.
    pub(super) nodes: Vec<usize>,
    /// `pre[k]`: nodes[..k], no depot.
    pub(super) pre: Vec<Seg>,
    /// `suf[k]`: nodes[k..], no depot.
    pub(super) suf: Vec<Seg>,
    /// Time warp of the route on its own vehicle, minutes: 0 when it fits, infinite when the
    /// vehicle cannot drive it at any lateness (load, unusable arc).
    pub(super) late: f64,
    /// `service_before[k]`: service minutes of nodes[..k], summed.
    pub(super) service_before: Vec<f64>,
}

// By hand, so that `clone_from` reuses the buffers: the search copies its current solution
// into a candidate every round.
impl Clone for Route {
    fn clone(&self) -> Self {
        Route {
            nodes: self.nodes.clone(),
            pre: self.pre.clone(),
            suf: self.suf.clone(),
            late: self.late,
            service_before: self.service_before.clone(),
        }
    }

    fn clone_from(&mut self, source: &Self) {
        // Destructured, so that a new field cannot be forgotten here.
        let Route {
            nodes,
            pre,
            suf,
            late,
            service_before,
        } = source;
        self.nodes.clone_from(nodes);
        self.pre.clone_from(pre);
        self.suf.clone_from(suf);
        self.late = *late;
        self.service_before.clone_from(service_before);
    }
}

impl Route {
    /// The whole run, no depot.
    pub(super) fn body(&self) -> &Seg {
        &self.suf[0]
    }

    /// Service minutes of all its customers.
    pub(super) fn service(&self) -> f64 {
        self.service_before.last().copied().unwrap_or(0.0)
    }

    /// Service minutes of nodes[k..].
    pub(super) fn service_from(&self, k: usize) -> f64 {
        self.service() - self.service_before[k]
    }
}

/// A change to some routes: each listed vehicle gets the listed nodes (empty: unused).
pub(super) struct Move(pub(super) Vec<(usize, Vec<usize>)>);

pub(super) struct State<'a> {
    pub(super) data: &'a Data<'a>,
    /// One route per vehicle, index = vehicle.
    pub(super) routes: Vec<Route>,
    /// Per node: (vehicle, position) when routed.
    pub(super) at: Vec<Option<(usize, usize)>>,
    pub(super) unserved: Vec<usize>,
    /// Drive minutes charged per minute of time warp (arriving after a window closes or
    /// returning after the end of shift); infinite: every route must fit its vehicle. A finite
    /// weight lets the search pass through routes that are late (see `search.rs`).
    pub(super) tw_weight: f64,
}

// By hand, as for [`Route`].
impl Clone for State<'_> {
    fn clone(&self) -> Self {
        State {
            data: self.data,
            routes: self.routes.clone(),
            at: self.at.clone(),
            unserved: self.unserved.clone(),
            tw_weight: self.tw_weight,
        }
    }

    fn clone_from(&mut self, source: &Self) {
        // Destructured, so that a new field cannot be forgotten here.
        let State {
            data,
            routes,
            at,
            unserved,
            tw_weight,
        } = source;
        self.data = data;
        self.routes.clone_from(routes);
        self.at.clone_from(at);
        self.unserved.clone_from(unserved);
        self.tw_weight = *tw_weight;
    }
}

impl<'a> State<'a> {
    pub(super) fn empty(data: &'a Data<'a>) -> Self {
        let mut s = State {
            data,
            routes: (0..data.inst.vehicles.len())
                .map(|_| Route {
                    nodes: Vec::new(),
                    pre: Vec::new(),
                    suf: Vec::new(),
                    late: 0.0,
                    service_before: Vec::new(),
                })
                .collect(),
            at: vec![None; data.n],
            unserved: Vec::new(),
            tw_weight: f64::INFINITY,
        };
        for r in 0..s.routes.len() {
            s.refresh(r);
        }
        s
    }

    /// Recomputes route r's summaries and the positions of its nodes, O(len).
    pub(super) fn refresh(&mut self, r: usize) {
        let d = self.data;
        let route = &mut self.routes[r];
        let len = route.nodes.len();
        route.pre.clear();
        route.pre.push(Seg::EMPTY);
        for k in 0..len {
            let next = d.cat(&route.pre[k], &d.node_seg(route.nodes[k]));
            route.pre.push(next);
        }
        route.suf.clear();
        route.suf.resize(len + 1, Seg::EMPTY);
        for k in (0..len).rev() {
            route.suf[k] = d.cat(&d.node_seg(route.nodes[k]), &route.suf[k + 1]);
        }
        for (p, &node) in route.nodes.iter().enumerate() {
            self.at[node] = Some((r, p));
        }
        route.late = d.lateness(r, &route.suf[0]);
        route.service_before.clear();
        route.service_before.push(0.0);
        let mut sum = 0.0;
        for &node in &route.nodes {
            sum += d.customer(node).service_minutes;
            route.service_before.push(sum);
        }
    }

    /// Drive minutes of route r.
    pub(super) fn route_dist(&self, r: usize) -> f64 {
        self.data.drive(self.routes[r].body())
    }

    /// Penalty, in drive minutes, of `vehicle` driving `body`: 0 when it fits, the time warp
    /// times [`State::tw_weight`] when only windows or the end of shift break and the weight is
    /// finite, `None` when it cannot drive it at all (load, unusable arc, or late under an
    /// infinite weight). O(1).
    pub(super) fn pen(&self, vehicle: usize, body: &Seg) -> Option<f64> {
        self.weigh(self.data.lateness(vehicle, body))
    }

    /// Penalty of `late` minutes of time warp (see [`State::pen`]).
    fn weigh(&self, late: f64) -> Option<f64> {
        if late == 0.0 {
            Some(0.0)
        } else if late.is_finite() && self.tw_weight.is_finite() {
            Some(self.tw_weight * late)
        } else {
            None
        }
    }

    /// A floor under the penalty (or infinite: no vehicle may drive it) of any vehicle
    /// driving a route of `drive` minutes whose customers take `service` minutes: the
    /// penalty rule of [`State::route_pen`] applied to [`Data::warp_floor`], a warp within
    /// the tolerance counting as none as in [`Data::lateness`]. O(1).
    pub(super) fn pen_floor(&self, drive: f64, service: f64) -> f64 {
        let floor = self.data.warp_floor(drive, service);
        let late = if floor > FEAS_EPS { floor } else { 0.0 };
        self.weigh(late).unwrap_or(f64::INFINITY)
    }

    /// Penalty of route r as it stands (0 when it fits its vehicle). O(1).
    pub(super) fn route_pen(&self, r: usize) -> f64 {
        self.weigh(self.routes[r].late).unwrap_or(f64::INFINITY)
    }

    /// Drive plus penalty over all routes.
    pub(super) fn total_cost(&self) -> f64 {
        (0..self.routes.len())
            .map(|r| self.route_dist(r) + self.route_pen(r))
            .sum()
    }

    /// Whether every route fits its own vehicle (no time warp).
    pub(super) fn feasible(&self) -> bool {
        self.routes.iter().all(|r| r.late == 0.0)
    }

    /// The vehicle for a new run `s` replacing route `own`: `own` when it fits, else the first
    /// of `others` that fits, else (finite weight only) whichever of `own` and `others` is
    /// penalised least (the first of equals). Returns the vehicle and its penalty. One
    /// [`Data::lateness`] per vehicle tried.
    pub(super) fn choose(&self, own: usize, s: &Seg, others: &[usize]) -> Option<(usize, f64)> {
        let own_late = self.data.lateness(own, s);
        if own_late == 0.0 {
            return Some((own, 0.0));
        }
        self.choose_late(own, own_late, s, others)
    }

    /// [`State::choose`] when `own` is already known to be `own_late` minutes late (> 0).
    pub(super) fn choose_late(
        &self,
        own: usize,
        own_late: f64,
        s: &Seg,
        others: &[usize],
    ) -> Option<(usize, f64)> {
        let mut least = self.weigh(own_late).map(|p| (own, p));
        for &w in others {
            let late = self.data.lateness(w, s);
            if late == 0.0 {
                return Some((w, 0.0));
            }
            if let Some(p) = self.weigh(late)
                && least.is_none_or(|(_, q)| p < q)
            {
                least = Some((w, p));
            }
        }
        // With an infinite weight `weigh` prices no lateness, so nothing late is chosen.
        least
    }

    pub(super) fn used(&self) -> usize {
        self.routes.iter().filter(|r| !r.nodes.is_empty()).count()
    }

    /// (unserved, drive plus penalty, vehicles): smaller is better, lexicographically.
    pub(super) fn key(&self) -> (usize, f64, usize) {
        (self.unserved.len(), self.total_cost(), self.used())
    }

    pub(super) fn key_lt(&self, other: &Self) -> bool {
        let (a, b) = (self.key(), other.key());
        a.0 < b.0 || (a.0 == b.0 && (a.1 < b.1 - EPS || (a.1 <= b.1 + EPS && a.2 < b.2)))
    }

    pub(super) fn apply(&mut self, m: Move) {
        for (v, _) in &m.0 {
            for &node in &self.routes[*v].nodes {
                self.at[node] = None;
            }
        }
        for (v, nodes) in m.0 {
            self.routes[v].nodes = nodes;
            self.refresh(v);
        }
    }

    /// Cheapest insertion of `u` into route r: (added drive plus penalty, position, vehicle).
    /// The vehicle is r's own or, where it cannot take the longer route, an unused vehicle of
    /// another kind that can (the route then moves to it); with a finite
    /// [`State::tw_weight`], a late route is priced with its penalty instead of refused.
    /// O(len · kinds).
    pub(super) fn best_insert(&self, r: usize, u: usize) -> Option<(f64, usize, usize)> {
        let others = if self.routes[r].nodes.is_empty() {
            Vec::new()
        } else {
            self.empty_kinds(&[r])
        };
        self.best_insert_among(r, u, &others)
    }

    /// As [`State::best_insert`] with the unused vehicles to fall back on given.
    pub(super) fn best_insert_among(
        &self,
        r: usize,
        u: usize,
        others: &[usize],
    ) -> Option<(f64, usize, usize)> {
        let d = self.data;
        let route = &self.routes[r];
        let us = d.node_seg(u);
        let before = self.route_dist(r) + self.route_pen(r);
        let service = route.service() + d.customer(u).service_minutes;
        let mut best: Option<(f64, usize, usize)> = None;
        for k in 0..=route.nodes.len() {
            let drive = d.drive_cat(&[&route.pre[k], &us, &route.suf[k]]);
            let add = drive - before;
            // The penalty is at least its floor (`State::pen_floor`; infinite: no vehicle
            // may drive the route): that alone can rule the place out.
            let floor = self.pen_floor(drive, service);
            if floor == f64::INFINITY || best.is_some_and(|(b, _, _)| add + floor >= b - EPS) {
                continue;
            }
            let s = d.cat(&d.cat(&route.pre[k], &us), &route.suf[k]);
            // Every vehicle's warp is at least the body's own (the warp terms of `Data::cat`
            // are never negative): skip the depot legs when that alone rules the place out.
            if s.tw > FEAS_EPS
                && (!self.tw_weight.is_finite()
                    || best.is_some_and(|(b, _, _)| add + self.tw_weight * s.tw >= b - EPS))
            {
                continue;
            }
            if let Some((v, p)) = self.choose(r, &s, others)
                && best.is_none_or(|(b, _, _)| add + p < b - EPS)
            {
                best = Some((add + p, k, v));
            }
        }
        best
    }

    /// Puts `u` at position k of route r and moves the route to vehicle v.
    pub(super) fn insert(&mut self, r: usize, k: usize, u: usize, v: usize) {
        let mut nodes = self.routes[r].nodes.clone();
        nodes.insert(k, u);
        if v == r {
            self.apply(Move(vec![(r, nodes)]));
        } else {
            self.apply(Move(vec![(r, Vec::new()), (v, nodes)]));
        }
    }

    /// Cheapest place for `u` over every route and, when `open`, one unused vehicle of each
    /// kind: (added drive, route, position, vehicle).
    pub(super) fn cheapest_place(
        &self,
        u: usize,
        open: bool,
    ) -> Option<(f64, usize, usize, usize)> {
        let mut best: Option<(f64, usize, usize, usize)> = None;
        let fresh = if open {
            self.empty_kinds(&[])
        } else {
            Vec::new()
        };
        for r in 0..self.routes.len() {
            if self.routes[r].nodes.is_empty() && !fresh.contains(&r) {
                continue;
            }
            if let Some((add, k, v)) = self.best_insert(r, u)
                && best.is_none_or(|(b, ..)| add < b - EPS)
            {
                best = Some((add, r, k, v));
            }
        }
        best
    }

    /// Most telling reason `u` fits nowhere.
    pub(super) fn reason(&self, u: usize) -> Infeasibility {
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
            } else if !d.fits(vi, &d.node_seg(u)) {
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
        let room = self.routes.iter().enumerate().any(|(v, r)| {
            r.body().load + u64::from(cu.demand_vials) <= u64::from(vehicles[v].capacity_vials)
        });
        if room {
            Infeasibility::Shift
        } else {
            Infeasibility::Capacity
        }
    }

    pub(super) fn into_solution(self) -> Solution {
        let d = self.data;
        let mut routes = Vec::new();
        for (vehicle, route) in self.routes.iter().enumerate() {
            if route.nodes.is_empty() {
                continue;
            }
            let veh = &d.inst.vehicles[vehicle];
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
                vehicle,
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
