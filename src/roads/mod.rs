//! The road-network travel model: drive minutes along an OpenStreetMap extract's roads.
//!
//! Stages, one file each: [`read`] the extract into a [`graph::RoadGraph`], [`cache`] it,
//! [`snap`] each facility and site to its nearest road segment, and find shortest times
//! with [`paths`] (Dijkstra). Facility → site and site → facility times (what the arcs need)
//! come from one full search per facility each way, done when the model is built; site ↔ site
//! times (what a depot-day's routes need) come from a resumable search per source kept per
//! thread, so a matrix row costs one search that stops at its farthest target.
//!
//! A trip from place P to place Q: the off-road leg from P to its snap point (at
//! [`snap::OFFROAD_KMH`]), along the snapped segment to one of its ends (the share of the
//! segment's time, where the segment's direction allows), the shortest road time between
//! segment ends, and the same at Q. Two places on one segment may also drive straight along it.

pub mod cache;
pub mod graph;
pub mod layer;
pub mod paths;
pub mod read;
pub mod snap;
pub mod write;

use std::cell::RefCell;
use std::fmt;
use std::sync::Arc;

use rayon::prelude::*;

use crate::scenario::LonLat;
use crate::travel::Place;
use graph::RoadGraph;
use paths::Search;
use snap::{MAX_SNAP_M, Snap, Snapper};

/// A road network the loader read from `travel.road_network`.
#[derive(Clone)]
pub struct RoadNetwork {
    /// The extract's path as written in `scenario.json`.
    pub file: String,
    /// The drivable graph.
    pub graph: Arc<RoadGraph>,
    /// Whether the graph came from the cache rather than parsing the extract.
    pub from_cache: bool,
}

impl fmt::Debug for RoadNetwork {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "RoadNetwork({}: {} nodes, {} segments)",
            self.file,
            self.graph.nodes(),
            self.graph.segments.len()
        )
    }
}

/// Latitude the snapping projection is centred on: the middle of the graph's extent.
pub fn mid_lat(graph: &RoadGraph) -> f64 {
    let (lo, hi) = graph
        .lat
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &y| {
            (l.min(y), h.max(y))
        });
    if lo.is_finite() { (lo + hi) / 2.0 } else { 0.0 }
}

/// Where a trip starts or ends on the graph: (node, extra minutes) pairs.
#[derive(Clone, Debug, Default)]
struct Ends {
    /// Nodes a trip leaving the place enters the graph at, with the minutes to get there.
    leave: Vec<(u32, f64)>,
    /// Nodes a trip arriving at the place leaves the graph from, with the minutes from there.
    arrive: Vec<(u32, f64)>,
}

fn ends(graph: &RoadGraph, s: &Snap) -> Ends {
    let seg = graph.segments[s.segment as usize];
    let o = s.offroad_minutes();
    let mut e = Ends::default();
    if seg.forward {
        e.leave.push((seg.b, o + (1.0 - s.t) * seg.minutes));
        e.arrive.push((seg.a, s.t * seg.minutes + o));
    }
    if seg.backward {
        e.leave.push((seg.a, o + s.t * seg.minutes));
        e.arrive.push((seg.b, (1.0 - s.t) * seg.minutes + o));
    }
    e
}

/// Source of process-unique model ids: two models on one graph (e.g. sweep variants with
/// other facilities) number their places differently, so a search is reused only by its model.
static NEXT_MODEL: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(1);

thread_local! {
    /// This thread's search: (model id, source place, search).
    static SEARCH: RefCell<Option<(u64, Place, Search)>> = const { RefCell::new(None) };
}

/// Drive times along roads between a scenario's facilities and sites.
pub struct RoadModel {
    id: u64,
    graph: Arc<RoadGraph>,
    facility_snap: Vec<Option<Snap>>,
    site_snap: Vec<Option<Snap>>,
    facility_ends: Vec<Ends>,
    site_ends: Vec<Ends>,
    /// `out[f][s]`: minutes from facility f to site s.
    out: Vec<Vec<f64>>,
    /// `back[f][s]`: minutes from site s to facility f.
    back: Vec<Vec<f64>>,
}

impl fmt::Debug for RoadModel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "RoadModel({} nodes, {} facilities, {} sites)",
            self.graph.nodes(),
            self.facility_snap.len(),
            self.site_snap.len()
        )
    }
}

impl RoadModel {
    /// Snaps the places and searches from and to every facility (in parallel). A place more
    /// than [`MAX_SNAP_M`] from every road is out of reach (infinite minutes).
    pub fn new(graph: Arc<RoadGraph>, facilities: &[LonLat], sites: &[LonLat]) -> RoadModel {
        let snapper = Snapper::new(&graph, mid_lat(&graph));
        let snap_all = |pts: &[LonLat]| -> Vec<Option<Snap>> {
            pts.par_iter()
                .map(|&p| {
                    snapper
                        .snap(&graph, p)
                        .filter(|s| s.offroad_m <= MAX_SNAP_M)
                })
                .collect()
        };
        let facility_snap = snap_all(facilities);
        let site_snap = snap_all(sites);
        let ends_of = |v: &[Option<Snap>]| -> Vec<Ends> {
            v.iter()
                .map(|s| s.as_ref().map(|s| ends(&graph, s)).unwrap_or_default())
                .collect()
        };
        let facility_ends = ends_of(&facility_snap);
        let site_ends = ends_of(&site_snap);
        let (out, back): (Vec<Vec<f64>>, Vec<Vec<f64>>) = (0..facilities.len())
            .into_par_iter()
            .map(|f| {
                let mut search = Search::new(graph.nodes());
                search.start(&facility_ends[f].leave);
                search.run(&graph.forward);
                let out: Vec<f64> = site_ends.iter().map(|e| best(&search, &e.arrive)).collect();
                search.start(&facility_ends[f].arrive);
                search.run(&graph.backward);
                let back: Vec<f64> = site_ends.iter().map(|e| best(&search, &e.leave)).collect();
                (out, back)
            })
            .unzip();
        let mut model = RoadModel {
            id: NEXT_MODEL.fetch_add(1, std::sync::atomic::Ordering::Relaxed),
            graph,
            facility_snap,
            site_snap,
            facility_ends,
            site_ends,
            out,
            back,
        };
        // Along one segment without entering the graph.
        for f in 0..facilities.len() {
            for s in 0..sites.len() {
                let (fp, sp) = (Place::Facility(f), Place::Site(s));
                model.out[f][s] = model.out[f][s].min(model.along(fp, sp));
                model.back[f][s] = model.back[f][s].min(model.along(sp, fp));
            }
        }
        model
    }

    /// The graph the model drives on.
    pub fn graph(&self) -> &RoadGraph {
        &self.graph
    }

    /// Where `p` meets the roads; `None` when it is more than [`MAX_SNAP_M`] from any.
    pub fn snap_of(&self, p: Place) -> Option<&Snap> {
        match p {
            Place::Facility(i) => self.facility_snap[i].as_ref(),
            Place::Site(i) => self.site_snap[i].as_ref(),
        }
    }

    /// Where a trip from `p` enters the graph: (OpenStreetMap node id, minutes from `p` to
    /// it: off-road leg plus the share of the snapped segment). Empty when `p` is out of reach.
    pub fn leave_nodes(&self, p: Place) -> Vec<(i64, f64)> {
        let e = &self.ends_of(p).leave;
        e.iter()
            .map(|&(v, m)| (self.graph.osm_id[v as usize], m))
            .collect()
    }

    /// Where a trip to `p` leaves the graph: (OpenStreetMap node id, minutes from it to `p`).
    pub fn arrive_nodes(&self, p: Place) -> Vec<(i64, f64)> {
        let e = &self.ends_of(p).arrive;
        e.iter()
            .map(|&(v, m)| (self.graph.osm_id[v as usize], m))
            .collect()
    }

    fn ends_of(&self, p: Place) -> &Ends {
        match p {
            Place::Facility(i) => &self.facility_ends[i],
            Place::Site(i) => &self.site_ends[i],
        }
    }

    /// Minutes straight along a shared segment (infinite unless both snap to one segment
    /// and its direction allows).
    fn along(&self, from: Place, to: Place) -> f64 {
        let (Some(a), Some(b)) = (self.snap_of(from), self.snap_of(to)) else {
            return f64::INFINITY;
        };
        if a.segment != b.segment {
            return f64::INFINITY;
        }
        let seg = self.graph.segments[a.segment as usize];
        let ok = (seg.forward && b.t >= a.t) || (seg.backward && b.t <= a.t);
        if ok {
            a.offroad_minutes() + (b.t - a.t).abs() * seg.minutes + b.offroad_minutes()
        } else {
            f64::INFINITY
        }
    }

    /// Runs `f` on this thread's search from `from`, resumed when it is already from there.
    fn with_search<T>(&self, from: Place, f: impl FnOnce(&mut Search) -> T) -> T {
        SEARCH.with(|cell| {
            let mut slot = cell.borrow_mut();
            let fresh = !matches!(&*slot, Some((id, p, _)) if *id == self.id && *p == from);
            if fresh {
                let mut search = match slot.take() {
                    Some((_, _, s)) if s.nodes() == self.graph.nodes() => s,
                    _ => Search::new(self.graph.nodes()),
                };
                search.start(&self.ends_of(from).leave);
                *slot = Some((self.id, from, search));
            }
            let (_, _, search) = slot.as_mut().expect("search just set");
            f(search)
        })
    }

    /// Shortest road minutes (graph search, plus the along-segment shortcut).
    fn search_minutes(&self, from: Place, to: Place) -> f64 {
        let arrive = &self.ends_of(to).arrive;
        let by_graph = self.with_search(from, |s| s.reach(&self.graph.forward, arrive).0);
        by_graph.min(self.along(from, to))
    }

    fn snap_point(&self, p: Place) -> Option<LonLat> {
        self.snap_of(p).map(|s| s.point)
    }

    /// The driven path from `from` to `to`: the snap points and the road nodes between,
    /// longitude/latitude; empty when `to` is out of reach.
    pub fn path(&self, from: Place, to: Place, from_at: LonLat, to_at: LonLat) -> Vec<LonLat> {
        if from == to {
            return vec![from_at, to_at];
        }
        let (Some(a), Some(b)) = (self.snap_point(from), self.snap_point(to)) else {
            return Vec::new();
        };
        let arrive = &self.ends_of(to).arrive;
        let (by_graph, nodes) = self.with_search(from, |s| {
            let (m, i) = s.reach(&self.graph.forward, arrive);
            let nodes = if m.is_finite() {
                s.path_to(arrive[i].0)
            } else {
                Vec::new()
            };
            (m, nodes)
        });
        let along = self.along(from, to);
        if !by_graph.is_finite() && !along.is_finite() {
            return Vec::new();
        }
        let mut out = vec![from_at, a];
        if by_graph < along {
            out.extend(nodes.iter().map(|&v| LonLat {
                lon: self.graph.lon[v as usize],
                lat: self.graph.lat[v as usize],
            }));
        }
        out.push(b);
        out.push(to_at);
        out.dedup();
        out
    }

    /// Drive minutes from `from` to `to`; infinite when no road leads there.
    pub fn minutes(&self, from: Place, to: Place) -> f64 {
        if from == to {
            return 0.0;
        }
        match (from, to) {
            (Place::Facility(f), Place::Site(s)) => self.out[f][s],
            (Place::Site(s), Place::Facility(f)) => self.back[f][s],
            _ => self.search_minutes(from, to),
        }
    }
}

fn best(search: &Search, ends: &[(u32, f64)]) -> f64 {
    ends.iter()
        .map(|&(v, x)| search.dist(v) + x)
        .fold(f64::INFINITY, f64::min)
}

#[cfg(test)]
mod tests {
    use super::write::{OsmNode, OsmWay, write_pbf};
    use super::*;

    fn at(lon: f64, lat: f64) -> LonLat {
        LonLat { lon, lat }
    }

    fn way(id: i64, tags: &[(&str, &str)], refs: &[i64]) -> OsmWay {
        OsmWay {
            id,
            tags: tags
                .iter()
                .map(|(k, v)| (k.to_string(), v.to_string()))
                .collect(),
            refs: refs.to_vec(),
        }
    }

    /// Three nodes 0.01° apart on a line at 10° N, a residential road 1-2 and a one-way
    /// primary 2-3; a footway 3-4 that is not kept.
    fn extract() -> Vec<u8> {
        let nodes: Vec<OsmNode> = (1..=4)
            .map(|i| OsmNode {
                id: i,
                at: at(0.01 * i as f64, 10.0),
                tags: Vec::new(),
            })
            .collect();
        write_pbf(
            &nodes,
            &[
                way(10, &[("highway", "residential")], &[1, 2]),
                way(11, &[("highway", "primary"), ("oneway", "yes")], &[2, 3]),
                way(12, &[("highway", "footway")], &[3, 4]),
            ],
        )
    }

    #[test]
    fn written_extract_reads_back() {
        let g = read::parse(&extract()).unwrap();
        assert_eq!(g.osm_id, vec![1, 2, 3]);
        assert_eq!(g.segments.len(), 2);
        assert!((g.lon[2] - 0.03).abs() < 1e-9 && (g.lat[0] - 10.0).abs() < 1e-9);
        assert_eq!(
            (g.segments[1].forward, g.segments[1].backward),
            (true, false)
        );
        assert_eq!(g.fastest_kmh, 65.0);
        let km = crate::geodesy::distance_m(at(0.01, 10.0), at(0.02, 10.0)) / 1000.0;
        assert!((g.segments[0].minutes - km / 25.0 * 60.0).abs() < 1e-12);
    }

    #[test]
    fn not_pbf_and_no_roads() {
        assert!(matches!(
            read::parse(b"<osm version=\"0.6\"></osm>"),
            Err(read::ReadError::NotPbf(_))
        ));
        let full = extract();
        assert!(matches!(
            read::parse(&full[..full.len() - 7]),
            Err(read::ReadError::NotPbf(_))
        ));
        let paths_only = write_pbf(
            &[
                OsmNode {
                    id: 1,
                    at: at(0.0, 0.0),
                    tags: Vec::new(),
                },
                OsmNode {
                    id: 2,
                    at: at(0.0, 0.01),
                    tags: Vec::new(),
                },
            ],
            &[way(1, &[("highway", "footway")], &[1, 2])],
        );
        assert_eq!(read::parse(&paths_only), Err(read::ReadError::NoRoads));
    }

    #[test]
    fn one_way_times_and_path() {
        let g = Arc::new(read::parse(&extract()).unwrap());
        // A facility on node 1, sites on node 3 and halfway along 1-2.
        let m = RoadModel::new(
            Arc::clone(&g),
            &[at(0.01, 10.0)],
            &[at(0.03, 10.0), at(0.015, 10.0)],
        );
        let (s0, s1) = (g.segments[0].minutes, g.segments[1].minutes);
        let (f, a, b) = (Place::Facility(0), Place::Site(0), Place::Site(1));
        assert!((m.minutes(f, a) - (s0 + s1)).abs() < 1e-9);
        // Against the one-way primary: no road back from node 3.
        assert_eq!(m.minutes(a, f), f64::INFINITY);
        assert_eq!(m.minutes(a, b), f64::INFINITY);
        assert!((m.minutes(f, b) - s0 / 2.0).abs() < 1e-9);
        assert!((m.minutes(b, f) - s0 / 2.0).abs() < 1e-9);
        assert!((m.minutes(b, a) - (s0 / 2.0 + s1)).abs() < 1e-9);
        let p = m.path(b, a, at(0.015, 10.0), at(0.03, 10.0));
        assert_eq!(p.first(), Some(&at(0.015, 10.0)));
        assert!((p.last().unwrap().lon - 0.03).abs() < 1e-9);
        assert!(p.iter().any(|q| (q.lon - 0.02).abs() < 1e-9), "{p:?}");
        assert!(m.path(a, b, at(0.03, 10.0), at(0.015, 10.0)).is_empty());
    }

    #[test]
    fn two_models_on_one_graph_never_share_a_search() {
        let g = Arc::new(read::parse(&extract()).unwrap());
        let sites = [at(0.03, 10.0), at(0.015, 10.0)];
        // Site 0 of `a` is node 3 (no road out); site 0 of `b` is halfway along 1-2.
        let a = RoadModel::new(Arc::clone(&g), &[], &sites);
        let b = RoadModel::new(Arc::clone(&g), &[], &[sites[1], sites[0]]);
        let (s0, s1) = (Place::Site(0), Place::Site(1));
        assert_eq!(a.minutes(s0, s1), f64::INFINITY);
        let want = g.segments[0].minutes / 2.0 + g.segments[1].minutes;
        assert!((b.minutes(s0, s1) - want).abs() < 1e-9);
        assert_eq!(a.minutes(s0, s1), f64::INFINITY);
    }

    #[test]
    fn cache_round_trip_and_corruption() {
        let bytes = extract();
        let g = read::parse(&bytes).unwrap();
        let key = cache::key(&bytes);
        let enc = cache::encode(&g, key);
        assert_eq!(cache::decode(&enc, key).as_ref(), Some(&g));
        assert!(cache::decode(&enc, (key.0 ^ 1, key.1)).is_none());
        for i in [0, 20, enc.len() / 2, enc.len() - 1] {
            let mut bad = enc.clone();
            bad[i] ^= 0x10;
            assert!(cache::decode(&bad, key).is_none(), "byte {i}");
        }
        assert!(cache::decode(&enc[..enc.len() - 3], key).is_none());
    }

    #[test]
    fn cache_never_replaces_a_foreign_file() {
        let dir = tempfile::tempdir().unwrap();
        let bytes = extract();
        let g = read::parse(&bytes).unwrap();
        let key = cache::key(&bytes);
        let target = cache::path(dir.path(), key);
        std::fs::write(&target, b"my notes").unwrap();
        assert!(cache::store(dir.path(), key, &g).is_err());
        assert_eq!(std::fs::read(&target).unwrap(), b"my notes");
        // A damaged cache file of ours is replaced.
        let mut ours = cache::encode(&g, key);
        ours.truncate(40);
        std::fs::write(&target, &ours).unwrap();
        cache::store(dir.path(), key, &g).unwrap();
        assert_eq!(cache::load(dir.path(), key).as_ref(), Some(&g));
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
