//! The local search to a local optimum, and the driver: starts, perturbation rounds, the
//! acceptance rule and the work limits.

use std::time::Instant;

use super::segment::{Data, EPS, Seg};
use super::state::{Move, State};
use super::{Solution, SolveOptions};

impl State<'_> {
    /// One full local search to a local optimum.
    ///
    /// Passes look only at customers on routes changed in the previous pass (all routes in the
    /// first when `dirty` is `None`), a don't-look rule at route level: a move from a clean
    /// route into a changed one is still found from the changed route's side when it is a
    /// relocate/exchange/tail swap of that route's customers.
    pub(super) fn local_search(&mut self, dirty: Option<Vec<bool>>) {
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
                    for (v, _) in &m.0 {
                        next[*v] = true;
                        dirty[*v] = true;
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

    /// First improving move involving customer u, over u's neighbours, then alone onto an
    /// unused vehicle.
    fn find_move(&self, u: usize) -> Option<Move> {
        let d = self.data;
        let (ru, pu) = self.at[u]?;
        let a = &self.routes[ru];
        let la = a.nodes.len();
        // Summaries of the 1–3 customers from u (both ways) and of route a without them.
        let cut: [(Seg, Seg, Seg); 3] = std::array::from_fn(|k| {
            let len = (k + 1).min(la - pu);
            let seg = &a.nodes[pu..pu + len];
            (
                d.seq(seg.iter().copied()),
                d.seq(seg.iter().rev().copied()),
                d.cat(&a.pre[pu], &a.suf[pu + len]),
            )
        });
        for &v in &d.neigh[u] {
            let Some((rv, pv)) = self.at[v] else { continue };
            let m = if rv == ru {
                self.intra(ru, pu, pv)
            } else {
                self.between(ru, pu, &cut, v)
            };
            if m.is_some() {
                return m;
            }
        }
        self.to_unused(ru, pu)
    }
}

/// The search of [`super::solve`].
pub(super) fn run(data: &Data<'_>, opts: &SolveOptions) -> Solution {
    let started = Instant::now();
    // One start per opening order of vehicle kinds; the best local optimum goes on.
    let empty = State::empty(data);
    let mut cur: Option<State<'_>> = None;
    for order in empty.opening_orders() {
        let mut s = empty.clone();
        s.construct(&order);
        s.local_search(None);
        if cur.as_ref().is_none_or(|c| s.key_lt(c)) {
            cur = Some(s);
        }
    }
    let mut cur = cur.unwrap_or(empty);
    let mut best = cur.clone();
    let mut rng = fastrand::Rng::with_seed(opts.seed);
    let mut time_limited = false;
    if data.n > 2 {
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
