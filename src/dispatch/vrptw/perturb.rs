//! Perturbation for the iterated local search: ruin a neighbourhood, recreate by cheapest
//! insertion with a choice of vehicle.

use super::state::State;

impl State<'_> {
    /// Removes a customer and some of its nearest served neighbours (3–15), then re-inserts
    /// them and any unserved customer at the cheapest feasible place: every route (which may
    /// move to an unused vehicle of another kind to take it) and one unused vehicle of each
    /// kind. Returns which routes changed.
    pub(super) fn ruin_and_recreate(&mut self, rng: &mut fastrand::Rng) -> Vec<bool> {
        let d = self.data;
        let mut changed = vec![false; self.routes.len()];
        let served: Vec<usize> = (1..d.n).filter(|&u| self.at[u].is_some()).collect();
        if served.is_empty() {
            return changed;
        }
        let centre = served[rng.usize(..served.len())];
        let want = rng.usize(3..=15).min(served.len());
        let mut removed = vec![centre];
        for &v in &d.neigh[centre] {
            if removed.len() >= want {
                break;
            }
            if self.at[v].is_some() {
                removed.push(v);
            }
        }
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
        let mut pending: Vec<usize> = removed;
        pending.append(&mut self.unserved);
        rng.shuffle(&mut pending);
        // Order by a random key mixed with distance to the depot (far first), a common
        // recreate order (common practice: "sort by distance / random" in ruin-and-recreate).
        if rng.bool() {
            pending.sort_by(|&a, &b| d.c(0, b).total_cmp(&d.c(0, a)).then(a.cmp(&b)));
        }
        let mut left = Vec::new();
        for u in pending {
            match self.cheapest_place(u) {
                Some((_, r, k, v)) => {
                    changed[r] = true;
                    changed[v] = true;
                    self.insert(r, k, u, v);
                }
                None => left.push(u),
            }
        }
        left.sort_unstable();
        self.unserved = left;
        changed
    }
}
