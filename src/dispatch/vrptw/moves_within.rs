//! Moves inside one route: Or-opt of 1–3 customers (either orientation), exchange, 2-opt.
//! The drive change is priced first from the few edges that change (O(1), O(stretch) for a
//! reversal); only improving candidates get the O(stretch) time-window check.

use super::segment::{EPS, FEAS_EPS, Seg};
use super::state::{Move, State};

impl State<'_> {
    /// Improving move inside route r between positions pu and pv: Or-opt of 1–3 from pu to
    /// next to pv, exchange, 2-opt. The drive change is priced first from the few edges that
    /// change (O(1), O(stretch) for a reversal); only improving candidates get the O(stretch)
    /// time-window check.
    pub(super) fn intra(&self, r: usize, pu: usize, pv: usize) -> Option<Move> {
        let d = self.data;
        let route = &self.routes[r];
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
        // Penalty of the route as it stands: a candidate whose drive change `delta` is not
        // below it cannot improve, whatever its own penalty (never negative).
        let old_pen = self.route_pen(r);
        // A candidate keeps the route's customers, so its drive gives a floor under its
        // penalty on any vehicle (`State::pen_floor`): a candidate that floor rules out is
        // dropped before its windows are checked. It rejects only candidates the full check
        // would reject; on a route late because it is too long for the shift, that is every
        // candidate that does not shorten the drive.
        let (old_drive, service) = (self.route_dist(r), route.service());
        let ruled_out =
            |delta: f64| delta + self.pen_floor(old_drive + delta, service) - old_pen >= -EPS;
        // A candidate that differs from `nodes` only inside lo..hi, on r's own vehicle or an
        // unused vehicle of another kind (the route moves to it), when drive plus penalty
        // falls.
        //
        // A lower bound on any vehicle's time warp lets a hopeless candidate go early: the
        // warp inside the unchanged tail plus the warp of the stretch so far (warp only grows
        // as customers are appended: every term of `Data::cat`'s warp is non-negative). The
        // stretch is abandoned as soon as the weight times that bound outweighs the drive
        // saved; it rejects only candidates the full check would reject.
        let check = |cand: &[usize], lo: usize, hi: usize, delta: f64| -> Option<Move> {
            let tail_tw = route.suf[hi].tw;
            let hopeless = |s: &Seg| {
                let tw = s.tw + tail_tw;
                tw > FEAS_EPS && delta + self.tw_weight * tw - old_pen >= -EPS
            };
            let mut s = route.pre[lo];
            if hopeless(&s) {
                return None;
            }
            for &v in &cand[lo..hi] {
                s = d.cat(&s, &d.node_seg(v));
                if hopeless(&s) {
                    return None;
                }
            }
            let s = d.cat(&s, &route.suf[hi]);
            let own_late = d.lateness(r, &s);
            let (w, pen) = if own_late == 0.0 {
                (r, 0.0)
            } else {
                self.choose_late(r, own_late, &s, &self.empty_kinds(&[r]))?
            };
            if delta + pen - old_pen >= -EPS {
                return None;
            }
            if w == r {
                Some(Move(vec![(r, cand.to_vec())]))
            } else {
                Some(Move(vec![(r, Vec::new()), (w, cand.to_vec())]))
            }
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
                    if delta - old_pen >= -EPS || ruled_out(delta) {
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
                    if let Some(m) = check(&cand, lo, hi.min(len_r), delta) {
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
            if delta - old_pen < -EPS && !ruled_out(delta) {
                cand.clear();
                cand.extend_from_slice(nodes);
                cand.swap(i, j);
                if let Some(m) = check(&cand, i, j + 1, delta) {
                    return Some(m);
                }
            }
        }
        // 2-opt: make u and v adjacent by reversing the stretch between.
        for (p, q) in [(i + 1, j), (i, j.saturating_sub(1))] {
            if p < q {
                // The reversed stretch's drive less its drive forward: every term is exactly
                // 0 on a symmetric matrix (`Data::symmetric`), so the O(stretch) sum is
                // skipped there.
                let inner: f64 = if d.symmetric {
                    0.0
                } else {
                    nodes[p..=q]
                        .windows(2)
                        .map(|w| c(w[1], w[0]) - c(w[0], w[1]))
                        .sum()
                };
                let (a, b) = (x(p as isize - 1), x(q as isize + 1));
                let delta =
                    c(a, nodes[q]) + c(nodes[p], b) - c(a, nodes[p]) - c(nodes[q], b) + inner;
                if delta - old_pen < -EPS && !ruled_out(delta) {
                    cand.clear();
                    cand.extend_from_slice(nodes);
                    cand[p..=q].reverse();
                    if let Some(m) = check(&cand, p, q + 1, delta) {
                        return Some(m);
                    }
                }
            }
        }
        None
    }
}
