//! Segment algebra (Vidal et al. 2013) and the instance in solver form.
//!
//! A [`Seg`] summarises a run of consecutive customers with no depot in it. The only way to
//! judge a route is [`Data::fits`], which puts *the judged vehicle's own* departure and end of
//! shift around the run: a cached head or tail of one route can never carry another vehicle's
//! shift into a verdict. (An earlier design cached route tails with the owner's return
//! included, so a tail exchange checked route a's return against vehicle b's end of shift.)

use super::{Customer, Instance};

/// Time-window tolerance, minutes: a route is feasible when its time warp is at most this, so
/// float rounding in sums does not reject exactly-tight routes.
pub(super) const FEAS_EPS: f64 = 1e-7;
/// Improvements smaller than this (minutes) are ties.
pub(super) const EPS: f64 = 1e-9;

/// Summary of a run of customers: `dur` minutes from the first service start to the end of the
/// last service when starting at `e`; `e`/`l` earliest/latest start of the first service; `tw`
/// time warp (0 when feasible); `load` vials; `dist` drive minutes inside the run. `empty` is
/// the identity of [`Data::cat`].
#[derive(Clone, Copy, Debug)]
pub(super) struct Seg {
    pub(super) empty: bool,
    pub(super) first: usize,
    pub(super) last: usize,
    pub(super) dist: f64,
    pub(super) dur: f64,
    pub(super) e: f64,
    pub(super) l: f64,
    pub(super) tw: f64,
    pub(super) load: u64,
}

impl Seg {
    /// No customers.
    pub(super) const EMPTY: Seg = Seg {
        empty: true,
        first: 0,
        last: 0,
        dist: 0.0,
        dur: 0.0,
        e: f64::NEG_INFINITY,
        l: f64::INFINITY,
        tw: 0.0,
        load: 0,
    };
}

/// Instance data in solver-friendly form.
pub(super) struct Data<'a> {
    pub(super) inst: &'a Instance,
    /// Number of nodes including the depot.
    pub(super) n: usize,
    /// Row-major n × n minutes.
    d: Vec<f64>,
    /// Per customer node: its nearest other customers (see [`Data::new`]).
    pub(super) neigh: Vec<Vec<usize>>,
    /// Per vehicle: its kind, the index of the first vehicle with the same capacity, start and
    /// latest return (vehicles of one kind are interchangeable in every verdict).
    pub(super) kind: Vec<usize>,
    /// The longest shift of any vehicle, minutes from its start to its latest return
    /// (infinite when a vehicle's shift ends before it starts: no bound is drawn from it).
    pub(super) longest_shift: f64,
    /// Every entry finite and d(i, j) equal to d(j, i) to the last bit (geodesic travel, where
    /// one inverse gives both directions): reversing a stretch then leaves its drive unchanged
    /// exactly, and the search need not sum it.
    pub(super) symmetric: bool,
}

impl<'a> Data<'a> {
    /// Matrix, `k` neighbours per customer and the vehicle kinds. Neighbours are ranked by
    /// d(i,j) + d(j,i) plus the least waiting the pair forces in either order (a stop that opens
    /// hours after the other closes is a poor neighbour even when close by; minutes).
    pub(super) fn new(inst: &'a Instance, k: usize) -> Self {
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
        // Least wait (or lateness) when j follows i: service at i starts at its earliest,
        // then drive; wait if j is not open yet, lateness if it has closed.
        let gap = |i: usize, j: usize| -> f64 {
            let (a, b) = (&inst.customers[i - 1], &inst.customers[j - 1]);
            let reach = a.earliest + a.service_minutes + d[i * n + j];
            if reach > b.latest_start() {
                reach - b.latest_start()
            } else {
                (b.earliest - (a.latest_start() + a.service_minutes + d[i * n + j])).max(0.0)
            }
        };
        let neigh = (0..n)
            .map(|i| {
                if i == 0 {
                    return Vec::new();
                }
                let score = |j: usize| {
                    let w = gap(i, j).min(gap(j, i));
                    let w = if w.is_finite() { w } else { 0.0 };
                    d[i * n + j] + d[j * n + i] + w
                };
                let mut o: Vec<(f64, usize)> =
                    (1..n).filter(|&j| j != i).map(|j| (score(j), j)).collect();
                o.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
                o.truncate(k);
                o.into_iter().map(|(_, j)| j).collect()
            })
            .collect();
        let kind = (0..inst.vehicles.len())
            .map(|v| {
                let me = &inst.vehicles[v];
                inst.vehicles
                    .iter()
                    .position(|o| {
                        o.capacity_vials == me.capacity_vials
                            && o.start.total_cmp(&me.start).is_eq()
                            && o.latest_return.total_cmp(&me.latest_return).is_eq()
                    })
                    .unwrap_or(v)
            })
            .collect();
        let longest_shift = inst
            .vehicles
            .iter()
            .map(|v| {
                let shift = v.latest_return - v.start;
                if shift >= 0.0 { shift } else { f64::INFINITY }
            })
            .fold(0.0, f64::max);
        let symmetric = (0..n).all(|i| {
            (0..n).all(|j| {
                let (a, b) = (d[i * n + j], d[j * n + i]);
                a.is_finite() && a.to_bits() == b.to_bits()
            })
        });
        Data {
            inst,
            n,
            d,
            neigh,
            kind,
            longest_shift,
            symmetric,
        }
    }

    /// Drive minutes from node i to node j.
    pub(super) fn c(&self, i: usize, j: usize) -> f64 {
        self.d[i * self.n + j]
    }

    pub(super) fn customer(&self, node: usize) -> &Customer {
        &self.inst.customers[node - 1]
    }

    /// One customer.
    pub(super) fn node_seg(&self, node: usize) -> Seg {
        let c = self.customer(node);
        let (e, l) = (c.earliest, c.latest_start());
        Seg {
            empty: false,
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

    /// Customers in this order.
    pub(super) fn seq(&self, nodes: impl IntoIterator<Item = usize>) -> Seg {
        nodes
            .into_iter()
            .fold(Seg::EMPTY, |s, v| self.cat(&s, &self.node_seg(v)))
    }

    /// a followed by b, O(1).
    pub(super) fn cat(&self, a: &Seg, b: &Seg) -> Seg {
        if a.empty {
            return *b;
        }
        if b.empty {
            return *a;
        }
        let t = self.c(a.last, b.first);
        let delta = a.dur - a.tw + t;
        let wt = (b.e - delta - a.l).max(0.0);
        let tw = (a.e + delta - b.l).max(0.0);
        Seg {
            empty: false,
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

    /// `parts` concatenated, O(parts).
    pub(super) fn cat_all(&self, parts: &[&Seg]) -> Seg {
        parts.iter().fold(Seg::EMPTY, |s, p| self.cat(&s, p))
    }

    /// Drive minutes of `parts` concatenated, out of the depot and back, without the time
    /// algebra of [`Data::cat`]: O(parts), the same sums in the same order as
    /// `drive(&cat_all(parts))`, so a move can be priced before its windows are checked.
    pub(super) fn drive_cat(&self, parts: &[&Seg]) -> f64 {
        let mut acc: Option<(usize, usize, f64)> = None; // (first, last, dist)
        for p in parts {
            if p.empty {
                continue;
            }
            acc = Some(match acc {
                None => (p.first, p.last, p.dist),
                Some((f, l, dist)) => (f, p.last, dist + p.dist + self.c(l, p.first)),
            });
        }
        match acc {
            None => 0.0,
            Some((f, l, dist)) => self.c(0, f) + dist + self.c(l, 0),
        }
    }

    /// The depot as a one-visit segment open from `vehicle`'s departure to its end of shift.
    #[cfg(test)]
    fn depot(&self, vehicle: usize) -> Seg {
        let v = &self.inst.vehicles[vehicle];
        Seg {
            empty: false,
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

    /// `body` driven by `vehicle` from its depot and back, O(1): the depot legs are added here,
    /// with this vehicle's own departure and end of shift. The reference [`Data::fits`] and
    /// [`Data::lateness`] are checked against (they use `depot_dist_warp`).
    #[cfg(test)]
    pub(super) fn with_depot(&self, vehicle: usize, body: &Seg) -> Seg {
        let depot = self.depot(vehicle);
        self.cat(&self.cat(&depot, body), &depot)
    }

    /// Drive minutes and time warp of `body` driven by `vehicle` from its depot and back:
    /// the `dist` and `tw` of [`Data::with_depot`], by the same operations in the same order
    /// (so bit for bit the same), without the fields no verdict reads. O(1); the route
    /// search's most frequent call.
    pub(super) fn depot_dist_warp(&self, vehicle: usize, body: &Seg) -> (f64, f64) {
        let v = &self.inst.vehicles[vehicle];
        let (de, dl) = (v.start, v.latest_return);
        let dtw = (v.start - v.latest_return).max(0.0);
        // cat(depot, body); the depot's dist and dur are 0.
        let t = self.c(0, body.first);
        let delta = 0.0 - dtw + t;
        let wt = (body.e - delta - dl).max(0.0);
        let tw = (de + delta - body.l).max(0.0);
        let dist = 0.0 + body.dist + t;
        let dur = 0.0 + body.dur + t + wt;
        let e = (body.e - delta).max(de) - wt;
        let warp = dtw + body.tw + tw;
        // cat(that, depot).
        let t2 = self.c(body.last, 0);
        let delta2 = dur - warp + t2;
        let tw2 = (e + delta2 - dl).max(0.0);
        (dist + 0.0 + t2, warp + dtw + tw2)
    }

    /// Whether `vehicle` can drive `body` (a run with no depot in it): it leaves no earlier
    /// than its start, meets every window and deadline, is back by its own end of shift and
    /// carries the load. O(1). An empty body needs no vehicle and always fits.
    pub(super) fn fits(&self, vehicle: usize, body: &Seg) -> bool {
        if body.empty {
            return true;
        }
        let (dist, tw) = self.depot_dist_warp(vehicle, body);
        dist.is_finite()
            && tw <= FEAS_EPS
            && body.load <= u64::from(self.inst.vehicles[vehicle].capacity_vials)
    }

    /// Time warp of `vehicle` driving `body`, minutes: 0 when it [fits](Data::fits), infinite
    /// when no lateness makes it drivable (load over capacity, unusable arc). O(1).
    pub(super) fn lateness(&self, vehicle: usize, body: &Seg) -> f64 {
        if body.empty {
            return 0.0;
        }
        let (dist, tw) = self.depot_dist_warp(vehicle, body);
        if !dist.is_finite() || body.load > u64::from(self.inst.vehicles[vehicle].capacity_vials) {
            f64::INFINITY
        } else if tw <= FEAS_EPS {
            0.0
        } else {
            tw
        }
    }

    /// A floor under the time warp of any vehicle driving a route of `drive` minutes (depot
    /// legs included) whose customers take `service` minutes: the route leaves no earlier
    /// than the vehicle's start and every minute it would be back after the latest return is
    /// warped, so the warp is at least drive + service − the longest shift. Lowered by a
    /// margin far above float rounding, so it never exceeds the warp [`Data::lateness`]
    /// computes for the same route. O(1).
    pub(super) fn warp_floor(&self, drive: f64, service: f64) -> f64 {
        let over = drive + service - self.longest_shift;
        (over - 1e-6 - 1e-9 * (drive.abs() + service.abs() + self.longest_shift)).max(0.0)
    }

    /// Drive minutes of `body` out of the depot and back (0 for an empty body). The same for
    /// every vehicle: all leave from and return to node 0.
    pub(super) fn drive(&self, body: &Seg) -> f64 {
        if body.empty {
            0.0
        } else {
            self.c(0, body.first) + body.dist + self.c(body.last, 0)
        }
    }
}
