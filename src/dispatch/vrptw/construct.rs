//! Construction: Solomon's (1987) I1 sequential insertion, opening vehicles by kind.

use super::segment::EPS;
use super::state::State;

impl State<'_> {
    /// Opening orders worth trying: fleet order, longest shift first, most capacity first
    /// (ties by fleet order). Orders that open the same sequence of vehicle kinds are dropped,
    /// so a homogeneous fleet gets one.
    pub(super) fn opening_orders(&self) -> Vec<Vec<usize>> {
        let vs = &self.data.inst.vehicles;
        let kind = &self.data.kind;
        let fleet: Vec<usize> = (0..vs.len()).collect();
        let mut by_shift = fleet.clone();
        by_shift.sort_by(|&a, &b| {
            let (x, y) = (&vs[a], &vs[b]);
            (y.latest_return - y.start)
                .total_cmp(&(x.latest_return - x.start))
                .then(y.latest_return.total_cmp(&x.latest_return))
                .then(y.capacity_vials.cmp(&x.capacity_vials))
                .then(a.cmp(&b))
        });
        let mut by_capacity = fleet.clone();
        by_capacity.sort_by(|&a, &b| {
            let (x, y) = (&vs[a], &vs[b]);
            y.capacity_vials
                .cmp(&x.capacity_vials)
                .then(y.latest_return.total_cmp(&x.latest_return))
                .then(a.cmp(&b))
        });
        let mut out: Vec<Vec<usize>> = Vec::new();
        for order in [fleet, by_shift, by_capacity] {
            let kinds = |o: &[usize]| o.iter().map(|&v| kind[v]).collect::<Vec<_>>();
            if out.iter().all(|o| kinds(o) != kinds(&order)) {
                out.push(order);
            }
        }
        out
    }

    /// Solomon I1 (α1 = 1, μ = 1, λ = 1: cheapest position by added drive, customer chosen by
    /// λ·d(0,u) − added drive), sequential: fill the open routes, then open the next vehicle of
    /// `order` that can serve someone alone, with the farthest such customer.
    /// O(n² · (n + V)) worst case.
    pub(super) fn construct(&mut self, order: &[usize]) {
        let d = self.data;
        let mut left: Vec<usize> = (1..d.n).collect();
        let mut opened = 0;
        while !left.is_empty() {
            // Best (criterion, customer index in `left`, route, position) over open routes.
            let mut pick: Option<(f64, usize, usize, usize)> = None;
            for (li, &u) in left.iter().enumerate() {
                let mut best_u: Option<(f64, usize, usize)> = None;
                for &r in &order[..opened] {
                    if let Some((add, k, _)) = self.best_insert_among(r, u, &[])
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
                self.insert(r, k, u, r);
                continue;
            }
            let mut seeded = false;
            while opened < order.len() && !seeded {
                let r = order[opened];
                opened += 1;
                let mut seed: Option<(f64, usize)> = None;
                for (li, &u) in left.iter().enumerate() {
                    if d.fits(r, &d.node_seg(u)) {
                        let far = d.c(0, u);
                        if seed.is_none_or(|(b, _)| far > b + EPS) {
                            seed = Some((far, li));
                        }
                    }
                }
                if let Some((_, li)) = seed {
                    let u = left.remove(li);
                    self.insert(r, 0, u, r);
                    seeded = true;
                }
            }
            if !seeded {
                break;
            }
        }
        self.unserved = left;
    }
}
