//! Moves between two routes: relocate 1–3 consecutive customers (Or-opt, either
//! orientation), exchange two customers, and 2-opt* (tail exchange). Each new route is judged
//! with the vehicle that will drive it ([`State::assign2`]): its own, the other route's, or an
//! unused vehicle of another kind.

use super::segment::{EPS, Seg};
use super::state::{Move, State};

/// Whether a change with drive delta `delta` that leaves a route empty improves.
pub(super) fn improves(delta: f64, emptied: bool) -> bool {
    delta < -EPS || (delta <= EPS && emptied)
}

impl State<'_> {
    /// First improving move of customer u (route ru, position pu) against customer v on
    /// another route, if any. O(1) per candidate.
    pub(super) fn between(
        &self,
        ru: usize,
        pu: usize,
        cut: &[(Seg, Seg, Seg); 3],
        v: usize,
    ) -> Option<Move> {
        let d = self.data;
        let (rv, pv) = self.at[v]?;
        let a = &self.routes[ru];
        let b = &self.routes[rv];
        let (la, lb) = (a.nodes.len(), b.nodes.len());
        let base = self.route_dist(ru) + self.route_dist(rv);
        // Penalty of the two routes as they stand: the new routes' drive must beat `base`
        // by more than this before their own penalty (never negative) is worth computing.
        let old_pen = self.route_pen(ru) + self.route_pen(rv);
        let u = a.nodes[pu];
        let service = |node: usize| d.customer(node).service_minutes;
        // Relocate 1–3 customers starting at u, either orientation, before or after v.
        let mut moved_service = 0.0;
        for len in 1..=3 {
            if pu + len > la {
                break;
            }
            moved_service += service(a.nodes[pu + len - 1]);
            let (fwd, rev, new_a) = &cut[len - 1];
            let emptied = la == len;
            let dist_new_a = d.drive(new_a);
            // Floors under the new routes' penalties (`State::pen_floor`): a candidate they
            // rule out is dropped before its windows are checked.
            let floor_a = self.pen_floor(dist_new_a, a.service() - moved_service);
            for k in [pv, pv + 1] {
                for (s, reversed) in [(fwd, false), (rev, true)] {
                    let parts = [&b.pre[k], s, &b.suf[k]];
                    let dist_new_b = d.drive_cat(&parts);
                    let delta = dist_new_a + dist_new_b - base;
                    if !improves(delta - old_pen, emptied)
                        || !improves(
                            delta
                                + floor_a
                                + self.pen_floor(dist_new_b, b.service() + moved_service)
                                - old_pen,
                            emptied,
                        )
                    {
                        continue;
                    }
                    let new_b = d.cat_all(&parts);
                    let Some((who, pen)) = self.assign2(ru, new_a, rv, &new_b) else {
                        continue;
                    };
                    if !improves(delta + pen - old_pen, emptied) {
                        continue;
                    }
                    let mut an = a.nodes.clone();
                    let mut ins: Vec<usize> = an.drain(pu..pu + len).collect();
                    if reversed {
                        ins.reverse();
                    }
                    let mut bn = b.nodes.clone();
                    bn.splice(k..k, ins);
                    return Some(Self::move2(ru, rv, who, an, bn));
                }
            }
        }
        // Exchange u and v.
        {
            let (sv, su) = (d.node_seg(v), d.node_seg(u));
            let parts_a = [&a.pre[pu], &sv, &a.suf[pu + 1]];
            let parts_b = [&b.pre[pv], &su, &b.suf[pv + 1]];
            let (dist_new_a, dist_new_b) = (d.drive_cat(&parts_a), d.drive_cat(&parts_b));
            let delta = dist_new_a + dist_new_b - base;
            let swapped = service(v) - service(u);
            if improves(delta - old_pen, false)
                && improves(
                    delta
                        + self.pen_floor(dist_new_a, a.service() + swapped)
                        + self.pen_floor(dist_new_b, b.service() - swapped)
                        - old_pen,
                    false,
                )
                && let Some((who, pen)) =
                    self.assign2(ru, &d.cat_all(&parts_a), rv, &d.cat_all(&parts_b))
                && improves(delta + pen - old_pen, false)
            {
                let mut an = a.nodes.clone();
                let mut bn = b.nodes.clone();
                an[pu] = v;
                bn[pv] = u;
                return Some(Self::move2(ru, rv, who, an, bn));
            }
        }
        // 2-opt*: a's head to u then v's tail, and v's head then u's tail; or a's head before
        // u then v onwards. Each new route keeps or changes vehicle through `assign2`.
        for (ka, kb) in [(pu + 1, pv), (pu, pv + 1)] {
            let (pa, pb) = ([&a.pre[ka], &b.suf[kb]], [&b.pre[kb], &a.suf[ka]]);
            let emptied = (ka == 0 && kb == lb) || (kb == 0 && ka == la);
            let (dist_new_a, dist_new_b) = (d.drive_cat(&pa), d.drive_cat(&pb));
            let delta = dist_new_a + dist_new_b - base;
            if !improves(delta - old_pen, emptied)
                || !improves(
                    delta
                        + self.pen_floor(dist_new_a, a.service_before[ka] + b.service_from(kb))
                        + self.pen_floor(dist_new_b, b.service_before[kb] + a.service_from(ka))
                        - old_pen,
                    emptied,
                )
            {
                continue;
            }
            let (new_a, new_b) = (d.cat(pa[0], pa[1]), d.cat(pb[0], pb[1]));
            if let Some((who, pen)) = self.assign2(ru, &new_a, rv, &new_b)
                && improves(delta + pen - old_pen, emptied)
            {
                let mut an = a.nodes[..ka].to_vec();
                an.extend_from_slice(&b.nodes[kb..]);
                let mut bn = b.nodes[..kb].to_vec();
                bn.extend_from_slice(&a.nodes[ka..]);
                debug_assert_eq!((an.len(), bn.len()), (ka + lb - kb, kb + la - ka));
                return Some(Self::move2(ru, rv, who, an, bn));
            }
        }
        None
    }
}
