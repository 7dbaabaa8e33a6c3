//! Shortest drive times: Dijkstra's algorithm over a [`Csr`], resumable so that one search
//! from a source answers many targets (a depot-day's matrix row), each only as far as needed.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

use super::graph::Csr;

#[derive(Clone, Copy, Debug)]
struct Entry {
    key: f64,
    node: u32,
}

impl PartialEq for Entry {
    fn eq(&self, o: &Self) -> bool {
        self.cmp(o) == Ordering::Equal
    }
}
impl Eq for Entry {}
impl PartialOrd for Entry {
    fn partial_cmp(&self, o: &Self) -> Option<Ordering> {
        Some(self.cmp(o))
    }
}
impl Ord for Entry {
    /// Reversed: the max-heap pops the smallest key first (ties to the lower node).
    fn cmp(&self, o: &Self) -> Ordering {
        o.key.total_cmp(&self.key).then(o.node.cmp(&self.node))
    }
}

/// No predecessor (a start node or an unreached one).
const NONE: u32 = u32::MAX;

/// One Dijkstra search, kept between queries. Memory: 12 bytes per graph node.
#[derive(Debug)]
pub struct Search {
    dist: Vec<f64>,
    parent: Vec<u32>,
    touched: Vec<u32>,
    heap: BinaryHeap<Entry>,
}

impl Search {
    /// A search over a graph of `nodes` nodes, not started.
    pub fn new(nodes: usize) -> Search {
        Search {
            dist: vec![f64::INFINITY; nodes],
            parent: vec![NONE; nodes],
            touched: Vec::new(),
            heap: BinaryHeap::new(),
        }
    }

    /// Forgets the previous search and starts from `starts` (node, minutes already driven).
    pub fn start(&mut self, starts: &[(u32, f64)]) {
        for &v in &self.touched {
            self.dist[v as usize] = f64::INFINITY;
            self.parent[v as usize] = NONE;
        }
        self.touched.clear();
        self.heap.clear();
        for &(v, m) in starts {
            if m < self.dist[v as usize] {
                if self.dist[v as usize].is_infinite() {
                    self.touched.push(v);
                }
                self.dist[v as usize] = m;
                self.heap.push(Entry { key: m, node: v });
            }
        }
    }

    /// Settles the next node; false when none is left.
    fn step(&mut self, csr: &Csr) -> bool {
        while let Some(Entry { key, node }) = self.heap.pop() {
            if key > self.dist[node as usize] {
                continue;
            }
            for (h, w, _) in csr.arcs(node) {
                let nd = key + w;
                let hd = &mut self.dist[h as usize];
                if nd < *hd {
                    if hd.is_infinite() {
                        self.touched.push(h);
                    }
                    *hd = nd;
                    self.parent[h as usize] = node;
                    self.heap.push(Entry { key: nd, node: h });
                }
            }
            return true;
        }
        false
    }

    /// Runs the search to the end (every reachable node settled).
    pub fn run(&mut self, csr: &Csr) {
        while self.step(csr) {}
    }

    /// Least of `dist(node) + extra` over `ends` (node, extra minutes), searching only until it
    /// is final; `(minutes, end index)`, infinite when no end is reachable.
    pub fn reach(&mut self, csr: &Csr, ends: &[(u32, f64)]) -> (f64, usize) {
        loop {
            let best = ends
                .iter()
                .enumerate()
                .map(|(i, &(v, x))| (self.dist[v as usize] + x, i))
                .fold((f64::INFINITY, 0), |a, b| if b.0 < a.0 { b } else { a });
            match self.heap.peek() {
                Some(top) if top.key < best.0 => {
                    self.step(csr);
                }
                _ => return best,
            }
        }
    }

    /// Number of graph nodes the search was made for.
    pub fn nodes(&self) -> usize {
        self.dist.len()
    }

    /// Minutes to `v` as far as the search has gone (final once `v` is settled).
    pub fn dist(&self, v: u32) -> f64 {
        self.dist[v as usize]
    }

    /// Nodes from a start node to `v` (inclusive), following the search tree.
    pub fn path_to(&self, v: u32) -> Vec<u32> {
        let mut out = vec![v];
        let mut at = v;
        while self.parent[at as usize] != NONE {
            at = self.parent[at as usize];
            out.push(at);
        }
        out.reverse();
        out
    }
}

#[cfg(test)]
mod tests {
    use super::super::graph::{RoadGraph, Segment};
    use super::*;

    fn line() -> RoadGraph {
        // 0 -> 1 -> 2 one way, 2 - 3 both ways, 0 - 3 both ways but slow.
        let seg = |a, b, minutes, backward| Segment {
            a,
            b,
            minutes,
            forward: true,
            backward,
        };
        RoadGraph::new(
            vec![0.0; 4],
            vec![0.0; 4],
            vec![1, 2, 3, 4],
            vec![
                seg(0, 1, 1.0, false),
                seg(1, 2, 1.0, false),
                seg(2, 3, 1.0, true),
                seg(0, 3, 10.0, true),
            ],
            50.0,
        )
    }

    #[test]
    fn one_way_and_resume() {
        let g = line();
        let mut s = Search::new(4);
        s.start(&[(0, 0.0)]);
        assert_eq!(s.reach(&g.forward, &[(2, 0.0)]), (2.0, 0));
        assert_eq!(s.reach(&g.forward, &[(3, 0.5)]), (3.5, 0));
        assert_eq!(s.path_to(3), vec![0, 1, 2, 3]);
        // Against the one-way: 3 -> 0 only by the slow road.
        s.start(&[(3, 0.0)]);
        assert_eq!(s.reach(&g.forward, &[(0, 0.0)]), (10.0, 0));
        // The reversed graph gives times towards a node.
        s.start(&[(0, 0.0)]);
        s.run(&g.backward);
        assert_eq!(s.dist(3), 10.0);
        assert_eq!(s.dist(1), 12.0);
    }
}
