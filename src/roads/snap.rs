//! Snapping a place to the nearest road segment (R*-tree over the segments in a local
//! equirectangular projection; the off-road distance itself is geodesic).

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
        }
    }

    /// The nearest segment to `at` (planar nearest in the projection).
    pub fn snap(&self, graph: &RoadGraph, at: LonLat) -> Option<Snap> {
        let q = [at.lon * self.lat0_cos, at.lat];
        let hit = self.tree.nearest_neighbor(q)?;
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
        Some(Snap {
            segment: hit.data,
            t,
            point,
            offroad_m: geodesy::distance_m(at, point),
        })
    }
}
