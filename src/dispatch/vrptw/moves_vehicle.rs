//! Vehicle choice: the unused vehicles worth trying (one of each kind), the vehicles for the
//! two new routes of a move (own, swapped, or one handed to an unused vehicle of another kind),
//! and the move of a customer alone onto an unused vehicle.

use super::moves_between::improves;
use super::segment::Seg;
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
    /// one kind give the same verdict, so a homogeneous fleet costs one check per run.
    pub(super) fn assign2(
        &self,
        va: usize,
        a: &Seg,
        vb: usize,
        b: &Seg,
    ) -> Option<(Option<usize>, Option<usize>)> {
        let d = self.data;
        let pick = |v: usize, s: &Seg| (!s.empty).then_some(v);
        if d.fits(va, a) && d.fits(vb, b) {
            return Some((pick(va, a), pick(vb, b)));
        }
        if d.kind[va] != d.kind[vb] && d.fits(vb, a) && d.fits(va, b) {
            return Some((pick(vb, a), pick(va, b)));
        }
        for w in self.empty_kinds(&[]) {
            if d.kind[w] == d.kind[va] && d.kind[w] == d.kind[vb] {
                continue; // same verdicts as the two checks above
            }
            // One run on w, the other on either of the two vehicles it frees.
            if !b.empty && d.fits(w, b) {
                for keep in [va, vb] {
                    if d.fits(keep, a) {
                        return Some((pick(keep, a), Some(w)));
                    }
                }
            }
            if !a.empty && d.fits(w, a) {
                for keep in [va, vb] {
                    if d.fits(keep, b) {
                        return Some((Some(w), pick(keep, b)));
                    }
                }
            }
        }
        None
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
        if !improves(
            d.drive_cat(&parts) + d.drive(&alone) - self.route_dist(ru),
            false,
        ) || !d.fits(ru, &d.cat(parts[0], parts[1]))
        {
            return None;
        }
        let w = self
            .empty_kinds(&[])
            .into_iter()
            .find(|&w| d.fits(w, &alone))?;
        let mut an = a.nodes.clone();
        an.remove(pu);
        Some(Move(vec![(ru, an), (w, vec![u])]))
    }
}
