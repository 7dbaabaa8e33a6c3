//! How many dooryard requests the week's pack days can serve at once: the cap of the dooryard
//! share floor (`docs/model.md`, "Dooryard share").
//!
//! A request takes its standard k vials in one shipment from one pack day, so a pack day of Q
//! vials serves at most ⌊Q / k⌋ requests, and a request can only go to a pack day one of its
//! arcs draws on. The most requests served at once is a maximum flow from the requests through
//! their pack days (a bipartite b-matching). Requests with the same set of pack days are one
//! node carrying their count, so the graph has at most (requests + pack days + 2) nodes and is
//! usually much smaller.

use std::collections::BTreeMap;

/// Most requests served at once. `requests` lists, per request, the pack-day indices it can
/// draw on (any order, repeats allowed); `per_day[p]` is how many requests pack day `p` can
/// serve (⌊vials / k⌋). O(F · E) for F the returned flow's augmentations on E edges (Dinic's
/// phases on a graph of grouped requests).
pub(crate) fn most_requests_served(requests: &[Vec<usize>], per_day: &[u64]) -> u64 {
    let mut groups: BTreeMap<Vec<usize>, u64> = BTreeMap::new();
    for days in requests {
        let mut key: Vec<usize> = days
            .iter()
            .copied()
            .filter(|&p| per_day.get(p).is_some_and(|&c| c > 0))
            .collect();
        key.sort_unstable();
        key.dedup();
        if !key.is_empty() {
            *groups.entry(key).or_default() += 1;
        }
    }
    // Nodes: 0 source, 1 sink, then the groups, then the pack days.
    let g0 = 2;
    let d0 = g0 + groups.len();
    let mut net = Flow::new(d0 + per_day.len());
    for (i, (days, &count)) in groups.iter().enumerate() {
        net.edge(0, g0 + i, count);
        for &p in days {
            net.edge(g0 + i, d0 + p, count);
        }
    }
    for (p, &c) in per_day.iter().enumerate() {
        if c > 0 {
            net.edge(d0 + p, 1, c);
        }
    }
    net.max_flow(0, 1)
}

/// A residual network for Dinic's maximum flow; edges in pairs (forward, reverse).
struct Flow {
    /// Edge indices leaving each node.
    out: Vec<Vec<usize>>,
    to: Vec<usize>,
    cap: Vec<u64>,
}

impl Flow {
    fn new(nodes: usize) -> Self {
        Self {
            out: vec![Vec::new(); nodes],
            to: Vec::new(),
            cap: Vec::new(),
        }
    }

    fn edge(&mut self, from: usize, to: usize, cap: u64) {
        self.out[from].push(self.to.len());
        self.to.push(to);
        self.cap.push(cap);
        self.out[to].push(self.to.len());
        self.to.push(from);
        self.cap.push(0);
    }

    fn max_flow(&mut self, s: usize, t: usize) -> u64 {
        let n = self.out.len();
        let mut total = 0u64;
        loop {
            // Levels by breadth-first search over edges with room.
            let mut level = vec![usize::MAX; n];
            level[s] = 0;
            let mut queue = std::collections::VecDeque::from([s]);
            while let Some(v) = queue.pop_front() {
                for &e in &self.out[v] {
                    let w = self.to[e];
                    if self.cap[e] > 0 && level[w] == usize::MAX {
                        level[w] = level[v] + 1;
                        queue.push_back(w);
                    }
                }
            }
            if level[t] == usize::MAX {
                return total;
            }
            let mut next = vec![0usize; n];
            loop {
                let pushed = self.push(s, t, u64::MAX, &level, &mut next);
                if pushed == 0 {
                    break;
                }
                total = total.saturating_add(pushed);
            }
        }
    }

    /// One blocking-flow path from `v` to `t` along increasing levels, at most `limit`.
    fn push(&mut self, v: usize, t: usize, limit: u64, level: &[usize], next: &mut [usize]) -> u64 {
        if v == t {
            return limit;
        }
        while next[v] < self.out[v].len() {
            let e = self.out[v][next[v]];
            let w = self.to[e];
            if self.cap[e] > 0 && level[w] == level[v].wrapping_add(1) {
                let got = self.push(w, t, limit.min(self.cap[e]), level, next);
                if got > 0 {
                    self.cap[e] -= got;
                    self.cap[e ^ 1] += got;
                    return got;
                }
            }
            next[v] += 1;
        }
        0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Brute force: every assignment of each request to one of its pack days or to none.
    fn brute(requests: &[Vec<usize>], per_day: &[u64]) -> u64 {
        fn go(i: usize, requests: &[Vec<usize>], left: &mut [u64]) -> u64 {
            if i == requests.len() {
                return 0;
            }
            let mut best = go(i + 1, requests, left);
            for &p in &requests[i] {
                if left[p] > 0 {
                    left[p] -= 1;
                    best = best.max(1 + go(i + 1, requests, left));
                    left[p] += 1;
                }
            }
            best
        }
        go(0, requests, &mut per_day.to_vec())
    }

    #[test]
    fn a_pack_day_smaller_than_one_request_serves_none() {
        // Three requests, pack days of ⌊1/2⌋ = 0 requests each: nothing can be served.
        assert_eq!(
            most_requests_served(&[vec![0, 1], vec![1], vec![0]], &[0, 0]),
            0
        );
    }

    #[test]
    fn a_request_moves_to_make_room() {
        // Request 0 can use day 0 or 1, request 1 only day 0: both served only if request 0
        // takes day 1 (a greedy first-fit on request order would serve one).
        assert_eq!(most_requests_served(&[vec![0, 1], vec![0]], &[1, 1]), 2);
    }

    #[test]
    fn matches_brute_force_on_seeded_small_cases() {
        let mut rng = fastrand::Rng::with_seed(7);
        for _ in 0..300 {
            let days = rng.usize(1..5);
            let per_day: Vec<u64> = (0..days).map(|_| rng.u64(0..3)).collect();
            let requests: Vec<Vec<usize>> = (0..rng.usize(0..8))
                .map(|_| (0..rng.usize(0..4)).map(|_| rng.usize(0..days)).collect())
                .collect();
            assert_eq!(
                most_requests_served(&requests, &per_day),
                brute(&requests, &per_day),
                "{requests:?} {per_day:?}"
            );
        }
    }
}
