//! Moves onto unused vehicles: a customer alone on an unused vehicle of each kind, and a whole
//! route handed to an unused vehicle of another kind when that lets a neighbour join it.

use super::moves_between::improves;
use super::state::{Move, State};

impl State<'_> {
    /// Moves u (route ru, position pu) alone to an unused vehicle, trying one of each kind.
    pub(super) fn to_unused(&self, ru: usize, pu: usize) -> Option<Move> {
        let d = self.data;
        let a = &self.routes[ru];
        if a.nodes.len() < 2 {
            return None;
        }
        let u = a.nodes[pu];
        let new_a = d.cat(&a.pre[pu], &a.suf[pu + 1]);
        let alone = d.node_seg(u);
        if !d.fits(ru, &new_a)
            || !improves(
                d.drive(&new_a) + d.drive(&alone) - self.route_dist(ru),
                false,
            )
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
