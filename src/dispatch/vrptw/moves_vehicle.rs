//! Vehicle choice: the unused vehicles worth trying (one of each kind), the vehicles for the
//! two new routes of a move (own, swapped, or one handed to an unused vehicle of another kind),
//! and the move of a customer alone onto an unused vehicle.

use super::moves_between::improves;
use super::segment::{FEAS_EPS, Seg};
use super::state::{Move, State};

impl State<'_> {
    /// One unused vehicle of each kind other than those of `except`, lowest index first.
    /// O(vehicles).
    pub(super) fn empty_kinds(&self, except: &[usize]) -> Vec<usize> {
        let d = self.data;
        let mut out: Vec<usize> = Vec::new();
        for (v, r) in self.routes.iter().enumerate() {
            if r.nodes.is_empty()
                && except.iter().all(|&x| d.kind[x] != d.kind[v])
                && out.iter().all(|&o| d.kind[o] != d.kind[v])
            {
                out.push(v);
            }
        }
        out
    }

    /// Vehicles for two new runs that replace the routes of vehicles `va` and `vb`: `a` (if
    /// not empty) and `b` (if not empty) each get a vehicle that [`Data::fits`] them — their own
    /// first, then swapped, then one freed for an unused vehicle of another kind. Vehicles of
    /// one kind give the same verdict, so a homogeneous fleet costs one check per run. When
    /// none fits both and [`State::tw_weight`] is finite, the own or swapped pair with the
    /// smaller penalty. Returns the vehicles and the penalty of the two runs.
    ///
    /// [`Data::fits`]: super::segment::Data::fits
    #[expect(
        clippy::type_complexity,
        reason = "the vehicle of each run and their penalty, read once by the caller"
    )]
    pub(super) fn assign2(
        &self,
        va: usize,
        a: &Seg,
        vb: usize,
        b: &Seg,
    ) -> Option<((Option<usize>, Option<usize>), f64)> {
        let d = self.data;
        // A run whose own warp is above the tolerance fits no vehicle (the depot legs only add
        // warp): with an infinite weight nothing can be chosen.
        if !self.tw_weight.is_finite() && (a.tw > FEAS_EPS || b.tw > FEAS_EPS) {
            return None;
        }
        let pick = |v: usize, s: &Seg| (!s.empty).then_some(v);
        if d.fits(va, a) && d.fits(vb, b) {
            return Some(((pick(va, a), pick(vb, b)), 0.0));
        }
        if d.kind[va] != d.kind[vb] && d.fits(vb, a) && d.fits(va, b) {
            return Some(((pick(vb, a), pick(va, b)), 0.0));
        }
        for w in self.empty_kinds(&[]) {
            if d.kind[w] == d.kind[va] && d.kind[w] == d.kind[vb] {
                continue; // same verdicts as the two checks above
            }
            // One run on w, the other on either of the two vehicles it frees.
            if !b.empty && d.fits(w, b) {
                for keep in [va, vb] {
                    if d.fits(keep, a) {
                        return Some(((pick(keep, a), Some(w)), 0.0));
                    }
                }
            }
            if !a.empty && d.fits(w, a) {
                for keep in [va, vb] {
                    if d.fits(keep, b) {
                        return Some(((Some(w), pick(keep, b)), 0.0));
                    }
                }
            }
        }
        if !self.tw_weight.is_finite() {
            return None;
        }
        let pair = |x: usize, y: usize| Some((self.pen(x, a)? + self.pen(y, b)?, x, y));
        let own = pair(va, vb);
        let swapped = if d.kind[va] != d.kind[vb] {
            pair(vb, va)
        } else {
            None
        };
        [own, swapped]
            .into_iter()
            .flatten()
            .min_by(|p, q| p.0.total_cmp(&q.0))
            .map(|(pen, x, y)| ((pick(x, a), pick(y, b)), pen))
    }

    /// The move giving `a_nodes` and `b_nodes` the vehicles `assign2` chose; vehicles va and vb
    /// are emptied unless reused.
    pub(super) fn move2(
        va: usize,
        vb: usize,
        (ga, gb): (Option<usize>, Option<usize>),
        a_nodes: Vec<usize>,
        b_nodes: Vec<usize>,
    ) -> Move {
        let mut m: Vec<(usize, Vec<usize>)> = vec![(va, Vec::new()), (vb, Vec::new())];
        for (g, nodes) in [(ga, a_nodes), (gb, b_nodes)] {
            if let Some(v) = g {
                match m.iter_mut().find(|(x, _)| *x == v) {
                    Some(slot) => slot.1 = nodes,
                    None => m.push((v, nodes)),
                }
            }
        }
        Move(m)
    }

    /// Moves u (route ru, position pu) alone to an unused vehicle, trying one of each kind.
    pub(super) fn to_unused(&self, ru: usize, pu: usize) -> Option<Move> {
        let d = self.data;
        let a = &self.routes[ru];
        if a.nodes.len() < 2 {
            return None;
        }
        let u = a.nodes[pu];
        let alone = d.node_seg(u);
        let parts = [&a.pre[pu], &a.suf[pu + 1]];
        let old_pen = self.route_pen(ru);
        let delta = d.drive_cat(&parts) + d.drive(&alone) - self.route_dist(ru);
        if !improves(delta - old_pen, false) {
            return None;
        }
        let rest = self.pen(ru, &d.cat(parts[0], parts[1]))?;
        let (w, pen) = self
            .empty_kinds(&[])
            .into_iter()
            .filter_map(|w| self.pen(w, &alone).map(|p| (w, p)))
            .min_by(|x, y| x.1.total_cmp(&y.1))?;
        if !improves(delta + rest + pen - old_pen, false) {
            return None;
        }
        let mut an = a.nodes.clone();
        an.remove(pu);
        Some(Move(vec![(ru, an), (w, vec![u])]))
    }
}
