//! Perturbation for the iterated local search: ruin a neighbourhood, recreate with a choice of
//! vehicle.
//!
//! Three ruins, chosen at random each round:
//! * **radial** — a customer and its nearest served neighbours (3–15 customers);
//! * **strings** — 1–3 runs of consecutive customers, each from a different route, met while
//!   walking out from a random customer through its neighbours (the string removal of
//!   Christiaens & Vanden Berghe 2020, "Slack induction by string removals for vehicle routing
//!   problems", Transportation Science 54(2)). Removing whole stretches frees the time between
//!   them, which a radial ruin on wide windows rarely does;
//! * **route** (one round in ten, when two or more routes run) — every customer of the
//!   shorter-listed of two random routes. They are put back first onto the other routes only
//!   (a route may still move to an unused vehicle of another kind), and only those that fit
//!   nowhere may open a vehicle; so the search can reach a solution with one vehicle fewer
//!   that no single move reaches, e.g. two nearly full vehicles where it had three.
//!
//! Two recreates, also at random:
//! * **greedy** — customers one at a time in a random, far-first, tightest-window-first or
//!   largest-demand-first order, each at its cheapest feasible place;
//! * **regret** — repeatedly the customer whose cheapest place beats its cheapest place on any
//!   *other* route by the most (regret-2 insertion, Potvin & Rousseau 1993, "A parallel route
//!   building algorithm for the vehicle routing and scheduling problem with time windows",
//!   EJOR 66), so customers with few good options are placed before those options fill up.
//!
//! Every insertion may move a route to an unused vehicle of another kind or open one unused
//! vehicle of each kind.

use super::segment::EPS;
use super::state::{Move, State};

/// One round in this many first splits the centre's route onto an unused vehicle.
const SPLIT_ONE_IN: usize = 10;

/// One place for a customer: (added drive, route, position, vehicle that will drive it).
type Place = (f64, usize, usize, usize);

impl State<'_> {
    /// Ruins and recreates (see the module doc). Returns which routes changed.
    pub(super) fn ruin_and_recreate(&mut self, rng: &mut fastrand::Rng) -> Vec<bool> {
        let mut changed = vec![false; self.routes.len()];
        let served: Vec<usize> = (1..self.data.n).filter(|&u| self.at[u].is_some()).collect();
        if served.is_empty() {
            return changed;
        }
        let centre = served[rng.usize(..served.len())];
        let used: Vec<usize> = (0..self.routes.len())
            .filter(|&r| !self.routes[r].nodes.is_empty())
            .collect();
        let whole_route = used.len() >= 2 && rng.usize(..10) == 0;
        if !whole_route && rng.usize(..SPLIT_ONE_IN) == 0 {
            self.split(centre, &mut changed);
        }
        let removed = if whole_route {
            let (a, b) = (used[rng.usize(..used.len())], used[rng.usize(..used.len())]);
            let r = if self.routes[b].nodes.len() < self.routes[a].nodes.len() {
                b
            } else {
                a
            };
            self.routes[r].nodes.clone()
        } else if rng.bool() {
            self.radial(centre, rng.usize(3..=15).min(served.len()))
        } else {
            self.strings(centre, rng)
        };
        self.remove_all(&removed, &mut changed);
        let mut pending: Vec<usize> = removed;
        pending.append(&mut self.unserved);
        rng.shuffle(&mut pending);
        let regret = rng.usize(..4) == 0;
        let order = rng.usize(..4);
        let mut left = self.recreate(pending, regret, order, !whole_route, &mut changed);
        if whole_route && !left.is_empty() {
            left = self.recreate(left, regret, order, true, &mut changed);
        }
        self.unserved = left;
        changed
    }

    /// Regret or greedy (in `order`, see [`State::order_pending`]) insertion of `pending`;
    /// `open`: unused vehicles may be opened. Returns those that fit nowhere, ascending.
    fn recreate(
        &mut self,
        mut pending: Vec<usize>,
        regret: bool,
        order: usize,
        open: bool,
        changed: &mut [bool],
    ) -> Vec<usize> {
        if regret {
            self.recreate_regret(pending, open, changed)
        } else {
            self.order_pending(&mut pending, order);
            self.recreate_greedy(pending, open, changed)
        }
    }

    /// Splits `centre`'s route before `centre`: the tail from `centre` on moves to an unused
    /// vehicle that can drive it (one of each kind tried), when the head still fits its own.
    pub(super) fn split(&mut self, centre: usize, changed: &mut [bool]) {
        let d = self.data;
        let Some((r, p)) = self.at[centre] else {
            return;
        };
        if p == 0 {
            return;
        }
        let route = &self.routes[r];
        if !d.fits(r, &route.pre[p]) {
            return;
        }
        let tail = route.suf[p];
        let Some(w) = self
            .empty_kinds(&[])
            .into_iter()
            .find(|&w| d.fits(w, &tail))
        else {
            return;
        };
        let head = route.nodes[..p].to_vec();
        let tail = route.nodes[p..].to_vec();
        changed[r] = true;
        changed[w] = true;
        self.apply(Move(vec![(r, head), (w, tail)]));
    }

    /// `centre` and its nearest served neighbours, `want` in all (fewer when it has fewer).
    fn radial(&self, centre: usize, want: usize) -> Vec<usize> {
        let mut removed = vec![centre];
        for &v in &self.data.neigh[centre] {
            if removed.len() >= want {
                break;
            }
            if self.at[v].is_some() {
                removed.push(v);
            }
        }
        removed
    }

    /// 1–3 strings of 1–10 consecutive customers, each from a different route, each through
    /// `centre` or one of its neighbours, at a random offset.
    fn strings(&self, centre: usize, rng: &mut fastrand::Rng) -> Vec<usize> {
        let d = self.data;
        let count = rng.usize(1..=3);
        let longest = rng.usize(1..=10);
        let mut done: Vec<usize> = Vec::new();
        let mut removed = Vec::new();
        for v in std::iter::once(centre).chain(d.neigh[centre].iter().copied()) {
            if done.len() >= count {
                break;
            }
            let Some((r, p)) = self.at[v] else { continue };
            if done.contains(&r) {
                continue;
            }
            done.push(r);
            let nodes = &self.routes[r].nodes;
            let len = rng.usize(1..=longest).min(nodes.len());
            let first = p.saturating_sub(rng.usize(..len)).min(nodes.len() - len);
            removed.extend_from_slice(&nodes[first..first + len]);
        }
        removed
    }

    /// Takes `removed` off their routes and marks those routes changed.
    fn remove_all(&mut self, removed: &[usize], changed: &mut [bool]) {
        let mut touched: Vec<usize> = removed
            .iter()
            .filter_map(|&u| self.at[u])
            .map(|(r, _)| r)
            .collect();
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
    }

    /// Sorts `pending` (already shuffled) for a greedy recreate: 0 random (as is), 1 far from
    /// the depot first, 2 earliest latest-start first, 3 largest demand first. Common
    /// recreate orders (common practice in ruin-and-recreate; Christiaens & Vanden Berghe 2020
    /// use random, demand, far and close).
    fn order_pending(&self, pending: &mut [usize], how: usize) {
        let d = self.data;
        match how {
            1 => pending.sort_by(|&a, &b| d.c(0, b).total_cmp(&d.c(0, a)).then(a.cmp(&b))),
            2 => pending.sort_by(|&a, &b| {
                let (x, y) = (d.customer(a), d.customer(b));
                x.latest_start()
                    .total_cmp(&y.latest_start())
                    .then(a.cmp(&b))
            }),
            3 => pending.sort_by(|&a, &b| {
                let (x, y) = (d.customer(a), d.customer(b));
                y.demand_vials.cmp(&x.demand_vials).then(a.cmp(&b))
            }),
            _ => {}
        }
    }

    /// Inserts `pending` in order, each at its cheapest place (`open`: unused vehicles may be
    /// opened); returns those that fit nowhere.
    fn recreate_greedy(
        &mut self,
        pending: Vec<usize>,
        open: bool,
        changed: &mut [bool],
    ) -> Vec<usize> {
        let mut left = Vec::new();
        for u in pending {
            match self.cheapest_place(u, open) {
                Some((_, r, k, v)) => self.place(u, (0.0, r, k, v), changed),
                None => left.push(u),
            }
        }
        left.sort_unstable();
        left
    }

    /// Regret-2 insertion of `pending` (see the module doc; `open`: unused vehicles may be
    /// opened); returns those that fit nowhere.
    ///
    /// Each pending customer's cheapest place per route is kept between steps: a placement
    /// changes one route, and a route's places depend only on its own stops and on which
    /// vehicles are unused, so only that route is priced again, unless the placement opened a
    /// vehicle or moved a route to another one (then every route is). The same places, in the
    /// same order, as pricing every route at every step.
    /// O(p · (routes + kinds) · L + p² · L) for p pending customers (O(p² · (routes + kinds)
    /// · L) when every step opens or moves a vehicle).
    fn recreate_regret(
        &mut self,
        mut pending: Vec<usize>,
        open: bool,
        changed: &mut [bool],
    ) -> Vec<usize> {
        let mut left = Vec::new();
        let mut places: Vec<Vec<Option<Place>>> =
            pending.iter().map(|&u| self.places(u, open)).collect();
        while !pending.is_empty() {
            // (regret, cheapest place, index in pending); a customer with one place has
            // infinite regret.
            let mut pick: Option<(f64, Place, usize)> = None;
            let mut stuck = Vec::new();
            for (i, at) in places.iter().enumerate() {
                let (mut first, mut second): (Option<Place>, f64) = (None, f64::INFINITY);
                for &p in at.iter().flatten() {
                    match first {
                        Some(f) if p.0 < f.0 - EPS => {
                            second = f.0;
                            first = Some(p);
                        }
                        Some(_) => second = second.min(p.0),
                        None => first = Some(p),
                    }
                }
                let Some(f) = first else {
                    stuck.push(i);
                    continue;
                };
                let regret = second - f.0;
                let better = pick.is_none_or(|(br, bp, _)| {
                    regret > br + EPS || (regret >= br - EPS && f.0 < bp.0 - EPS)
                });
                if better {
                    pick = Some((regret, f, i));
                }
            }
            for &i in stuck.iter().rev() {
                left.push(pending.remove(i));
                places.remove(i);
            }
            let Some((_, place, i)) = pick else { break };
            let i = i - stuck.iter().filter(|&&s| s < i).count();
            let u = pending.remove(i);
            places.remove(i);
            let unused: Vec<bool> = self.routes.iter().map(|r| r.nodes.is_empty()).collect();
            self.place(u, place, changed);
            let same_unused = self
                .routes
                .iter()
                .zip(&unused)
                .all(|(r, &was)| r.nodes.is_empty() == was);
            for (at, &w) in places.iter_mut().zip(&pending) {
                if same_unused {
                    // The placement stayed on route place.1, which was in use.
                    at[place.1] = self.place_on(place.1, w);
                } else {
                    *at = self.places(w, open);
                }
            }
        }
        left.sort_unstable();
        left
    }

    /// The cheapest place for `u` on each route and, when `open`, each kind of unused vehicle,
    /// by route index (None: no place there, or an unused vehicle not tried).
    fn places(&self, u: usize, open: bool) -> Vec<Option<Place>> {
        let fresh = if open {
            self.empty_kinds(&[])
        } else {
            Vec::new()
        };
        (0..self.routes.len())
            .map(|r| {
                if self.routes[r].nodes.is_empty() && !fresh.contains(&r) {
                    None
                } else {
                    self.place_on(r, u)
                }
            })
            .collect()
    }

    /// The cheapest place for `u` on route `r` (see [`State::best_insert`]).
    fn place_on(&self, r: usize, u: usize) -> Option<Place> {
        self.best_insert(r, u).map(|(add, k, v)| (add, r, k, v))
    }

    fn place(&mut self, u: usize, (_, r, k, v): Place, changed: &mut [bool]) {
        changed[r] = true;
        changed[v] = true;
        self.insert(r, k, u, v);
    }
}
