//! Snapping a place to the nearest road segment (R*-tree over the segments in a local
//! equirectangular projection; the off-road distance itself is geodesic), preferring the main
//! network over a disconnected piece of road close by ([`PREFER_MAIN_M`]).

use rstar::RTree;
use rstar::primitives::{GeomWithData, Line};

use super::graph::RoadGraph;
use crate::geodesy;
use crate::scenario::LonLat;

/// Speed of the off-road leg between a place and its snap point, km/h. Common practice, from
/// memory: a walk or a crawl along a grove row, about 5 km/h.
pub const OFFROAD_KMH: f64 = 5.0;

/// Snap distance above which the scenario gets a warning, metres: more than a short walk
/// from a road suggests wrong coordinates or an extract that misses the place's roads.
pub const WARN_SNAP_M: f64 = 500.0;

/// Snap distance above which a place is out of reach by road, metres: the extract does not
/// cover it (the off-road leg alone would take over 2 hours).
pub const MAX_SNAP_M: f64 = 10_000.0;

/// A place whose nearest road is on a piece of the network not connected to its main part
/// (the largest connected set of nodes, directions ignored) snaps to the main part instead
/// when a road of it lies within this distance of the place, metres: the same as
/// [`WARN_SNAP_M`]. A piece cut off by the extract's edge or a mapping gap would otherwise
/// leave the place out of reach; a walk of up to 500 m (6 minutes at [`OFFROAD_KMH`]) costs
/// less. Farther than this, the place keeps its nearest road (and may be out of reach).
pub const PREFER_MAIN_M: f64 = WARN_SNAP_M;

/// Lower bound on metres per unit of the snapping projection (a degree of latitude is
/// 110,574–111,694 m; a longitude unit is scaled to match at the projection's latitude), with
/// a margin for longitudes scaled at another latitude within an extract.
const MIN_M_PER_UNIT: f64 = 100_000.0;

/// Whether each segment of `graph` belongs to its main part: the connected component (union
/// of segments, directions ignored) with the most nodes; ties go to the one holding the lowest
/// node index. O(m α(n)).
pub fn main_part(graph: &RoadGraph) -> Vec<bool> {
    let n = graph.nodes();
    let mut parent: Vec<u32> = (0..n as u32).collect();
    fn find(parent: &mut [u32], mut v: u32) -> u32 {
        while parent[v as usize] != v {
            let up = parent[parent[v as usize] as usize];
            parent[v as usize] = up;
            v = up;
        }
        v
    }
    for s in &graph.segments {
        let (a, b) = (find(&mut parent, s.a), find(&mut parent, s.b));
        if a != b {
            let (lo, hi) = (a.min(b), a.max(b));
            parent[hi as usize] = lo;
        }
    }
    let mut size = vec![0u32; n];
    let roots: Vec<u32> = (0..n as u32).map(|v| find(&mut parent, v)).collect();
    for &r in &roots {
        size[r as usize] += 1;
    }
    // The first root (lowest node index) of the greatest size.
    let main = (0..n)
        .max_by(|&x, &y| size[x].cmp(&size[y]).then(y.cmp(&x)))
        .unwrap_or(0) as u32;
    graph
        .segments
        .iter()
        .map(|s| roots[s.a as usize] == main)
        .collect()
}

/// Where a place meets the road network.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Snap {
    /// Index of the segment in [`RoadGraph::segments`].
    pub segment: u32,
    /// Position of the snap point along the segment from `a` (0) to `b` (1).
    pub t: f64,
    /// The snap point.
    pub point: LonLat,
    /// Geodesic distance from the place to the snap point, metres.
    pub offroad_m: f64,
}

impl Snap {
    /// Minutes of the off-road leg.
    pub fn offroad_minutes(&self) -> f64 {
        self.offroad_m / 1000.0 / OFFROAD_KMH * 60.0
    }
}

/// An R*-tree over a graph's segments.
pub struct Snapper {
    tree: RTree<GeomWithData<Line<[f64; 2]>, u32>>,
    lat0_cos: f64,
    /// Per segment: whether it is on the main part ([`main_part`]).
    main: Vec<bool>,
}

impl Snapper {
    /// Indexes every segment of `graph`, projected around latitude `lat0` (degrees).
    pub fn new(graph: &RoadGraph, lat0: f64) -> Snapper {
        let c = lat0.to_radians().cos().max(0.01);
        let p = |v: u32| [graph.lon[v as usize] * c, graph.lat[v as usize]];
        let items = graph
            .segments
            .iter()
            .enumerate()
            .map(|(i, s)| GeomWithData::new(Line::new(p(s.a), p(s.b)), i as u32))
            .collect();
        Snapper {
            tree: RTree::bulk_load(items),
            lat0_cos: c,
            main: main_part(graph),
        }
    }

    /// The nearest segment to `at` (planar nearest in the projection); when it is off the
    /// main part, the nearest segment of the main part instead if that lies within
    /// [`PREFER_MAIN_M`] of `at`.
    pub fn snap(&self, graph: &RoadGraph, at: LonLat) -> Option<Snap> {
        let q = [at.lon * self.lat0_cos, at.lat];
        let mut hits = self.tree.nearest_neighbor_iter_with_distance_2(q);
        let (first, _) = hits.next()?;
        let nearest = self.snap_to(graph, first, q, at);
        if self.main[first.data as usize] {
            return Some(nearest);
        }
        for (hit, d2) in hits {
            if d2.sqrt() * MIN_M_PER_UNIT > PREFER_MAIN_M {
                break;
            }
            if self.main[hit.data as usize] {
                let s = self.snap_to(graph, hit, q, at);
                if s.offroad_m <= PREFER_MAIN_M {
                    return Some(s);
                }
            }
        }
        Some(nearest)
    }

    fn snap_to(
        &self,
        graph: &RoadGraph,
        hit: &GeomWithData<Line<[f64; 2]>, u32>,
        q: [f64; 2],
        at: LonLat,
    ) -> Snap {
        let seg = graph.segments[hit.data as usize];
        let (a, b) = (hit.geom().from, hit.geom().to);
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let len2 = dx * dx + dy * dy;
        let t = if len2 > 0.0 {
            (((q[0] - a[0]) * dx + (q[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
        } else {
            0.0
        };
        let (la, lb) = (seg.a as usize, seg.b as usize);
        let point = LonLat {
            lon: graph.lon[la] + t * (graph.lon[lb] - graph.lon[la]),
            lat: graph.lat[la] + t * (graph.lat[lb] - graph.lat[la]),
        };
        Snap {
            segment: hit.data,
            t,
            point,
            offroad_m: geodesy::distance_m(at, point),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::roads::graph::Segment;

    /// A main road of 5 nodes along latitude 0 (0.00–0.04° E) and a one-segment island at
    /// latitude `island_lat` over 0.018–0.022° E.
    fn graph(island_lat: f64) -> RoadGraph {
        let mut lon: Vec<f64> = (0..5).map(|i| 0.01 * f64::from(i)).collect();
        let mut lat = vec![0.0; 5];
        lon.extend([0.018, 0.022]);
        lat.extend([island_lat, island_lat]);
        let seg = |a, b| Segment {
            a,
            b,
            minutes: 1.0,
            forward: true,
            backward: true,
        };
        let segments = vec![seg(0, 1), seg(1, 2), seg(2, 3), seg(3, 4), seg(5, 6)];
        RoadGraph::new(lon, lat, (1..=7).collect(), segments, 50.0)
    }

    #[test]
    fn the_main_part_is_the_largest_component() {
        assert_eq!(
            main_part(&graph(0.003)),
            vec![true, true, true, true, false]
        );
    }

    /// A place 50 m from the island: with the main road 283 m away it snaps to the main road;
    /// with the main road 617 m away (beyond [`PREFER_MAIN_M`]) it keeps the island.
    #[test]
    fn a_near_island_gives_way_to_the_main_road_within_the_limit() {
        // 0.003° of latitude ≈ 332 m; the place sits 0.00045° (≈ 50 m) below the island.
        let g = graph(0.003);
        let at = LonLat {
            lon: 0.02,
            lat: 0.003 - 0.00045,
        };
        let s = Snapper::new(&g, 0.0).snap(&g, at).unwrap();
        assert!(s.segment < 4, "snapped to the island: {s:?}");
        assert!((s.offroad_m - 282.8).abs() < 1.0, "{}", s.offroad_m);
        let far = graph(0.006);
        let at = LonLat {
            lon: 0.02,
            lat: 0.006 - 0.00045,
        };
        let s = Snapper::new(&far, 0.0).snap(&far, at).unwrap();
        assert_eq!(s.segment, 4, "{s:?}");
        assert!((s.offroad_m - 49.8).abs() < 1.0, "{}", s.offroad_m);
    }
}
