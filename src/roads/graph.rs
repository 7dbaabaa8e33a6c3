//! The road graph: which OpenStreetMap ways a vehicle drives, in which direction, how fast,
//! and the graph in compressed-sparse-row form both ways round.
//!
//! A way is kept when its `highway` tag is one of [`CLASSES`] and none of `access`,
//! `motor_vehicle`, `motorcar` is `no`. Its speed is `maxspeed` when that parses (a number in
//! km/h, or a number followed by `mph`), else the class default. Each pair of consecutive way
//! nodes is one [`Segment`]; its time is the WGS 84 geodesic length at that speed.

/// Drivable `highway` classes with the default speed used when `maxspeed` is absent or
/// unreadable, km/h. Common practice, from memory: these are the free-flow defaults of widely
/// used car routing profiles (e.g. OSRM's car profile), rounded; `track` (farm and grove
/// access, often unpaved) is kept at a crawl because blocks are reached by them.
pub const CLASSES: [(&str, f64); 15] = [
    ("motorway", 90.0),
    ("motorway_link", 45.0),
    ("trunk", 85.0),
    ("trunk_link", 40.0),
    ("primary", 65.0),
    ("primary_link", 30.0),
    ("secondary", 55.0),
    ("secondary_link", 25.0),
    ("tertiary", 40.0),
    ("tertiary_link", 20.0),
    ("unclassified", 25.0),
    ("residential", 25.0),
    ("living_street", 10.0),
    ("service", 15.0),
    ("track", 15.0),
];

/// Fastest speed a tagged `maxspeed` may give, km/h; a larger value is ignored as a typo.
pub const MAX_TAGGED_KMH: f64 = 150.0;

/// Default speed of a kept `highway` class, km/h; `None` for a class not driven.
pub fn class_speed_kmh(highway: &str) -> Option<f64> {
    CLASSES.iter().find(|(c, _)| *c == highway).map(|&(_, s)| s)
}

/// Reads a `maxspeed` value: `"50"` or `"50 km/h"` is 50 km/h, `"30 mph"` is 48.28 km/h.
/// Anything else (`none`, `walk`, `signals`, zone codes like `FI:urban`, lists) is `None`,
/// as is a value ≤ 0 or above [`MAX_TAGGED_KMH`].
pub fn parse_maxspeed(v: &str) -> Option<f64> {
    let v = v.trim();
    let (num, factor) = if let Some(n) = v.strip_suffix("mph") {
        (n.trim(), 1.609_344)
    } else if let Some(n) = v
        .strip_suffix("km/h")
        .or_else(|| v.strip_suffix("kmh"))
        .or_else(|| v.strip_suffix("kph"))
    {
        (n.trim(), 1.0)
    } else {
        (v, 1.0)
    };
    if num.is_empty() || !num.chars().all(|c| c.is_ascii_digit() || c == '.') {
        return None;
    }
    let kmh = num.parse::<f64>().ok()? * factor;
    (kmh > 0.0 && kmh <= MAX_TAGGED_KMH).then_some(kmh)
}

/// Direction rule of a way from its tags: (forward allowed, backward allowed).
/// `oneway=yes|true|1` forward only, `oneway=-1|reverse` backward only, `oneway=no|false|0`
/// both; untagged: forward only on `motorway` and on `junction=roundabout`, else both.
pub fn directions(highway: &str, oneway: Option<&str>, junction: Option<&str>) -> (bool, bool) {
    match oneway.map(str::trim) {
        Some("yes" | "true" | "1") => (true, false),
        Some("-1" | "reverse") => (false, true),
        Some("no" | "false" | "0") => (true, true),
        _ if highway == "motorway" || junction == Some("roundabout") => (true, false),
        _ => (true, true),
    }
}

/// One piece of road between two consecutive nodes of a way.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Segment {
    /// First node (way order), index into the graph's nodes.
    pub a: u32,
    /// Second node.
    pub b: u32,
    /// Drive minutes from end to end.
    pub minutes: f64,
    /// Whether a vehicle may drive from `a` to `b`.
    pub forward: bool,
    /// Whether a vehicle may drive from `b` to `a`.
    pub backward: bool,
}

/// Adjacency in compressed-sparse-row form: the arcs leaving node `v` are
/// `first[v]..first[v + 1]` of `head` and `minutes`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Csr {
    /// Start of each node's arcs (length nodes + 1).
    pub first: Vec<u32>,
    /// Arc heads.
    pub head: Vec<u32>,
    /// Arc drive minutes.
    pub minutes: Vec<f64>,
    /// Segment of each arc (index into [`RoadGraph::segments`]).
    pub segment: Vec<u32>,
}

impl Csr {
    fn build(n: usize, arcs: impl Iterator<Item = (u32, u32, f64, u32)> + Clone) -> Csr {
        let mut first = vec![0u32; n + 1];
        for (t, ..) in arcs.clone() {
            first[t as usize + 1] += 1;
        }
        for i in 0..n {
            first[i + 1] += first[i];
        }
        let m = first[n] as usize;
        let mut next = first.clone();
        let (mut head, mut minutes, mut segment) = (vec![0; m], vec![0.0; m], vec![0; m]);
        for (t, h, w, s) in arcs {
            let k = next[t as usize] as usize;
            next[t as usize] += 1;
            head[k] = h;
            minutes[k] = w;
            segment[k] = s;
        }
        Csr {
            first,
            head,
            minutes,
            segment,
        }
    }

    /// Arcs leaving `v`: (head, minutes, segment).
    pub fn arcs(&self, v: u32) -> impl Iterator<Item = (u32, f64, u32)> + '_ {
        let (s, e) = (
            self.first[v as usize] as usize,
            self.first[v as usize + 1] as usize,
        );
        (s..e).map(|k| (self.head[k], self.minutes[k], self.segment[k]))
    }
}

/// The drivable road network of an extract.
#[derive(Debug)]
pub struct RoadGraph {
    /// Node longitudes, degrees (WGS 84).
    pub lon: Vec<f64>,
    /// Node latitudes, degrees.
    pub lat: Vec<f64>,
    /// OpenStreetMap id of each node.
    pub osm_id: Vec<i64>,
    /// Every kept way segment, in file order.
    pub segments: Vec<Segment>,
    /// Fastest speed of any segment, km/h.
    pub fastest_kmh: f64,
    /// Arcs in driving direction.
    pub forward: Csr,
    /// Arcs reversed (head = where the arc starts), for searches towards a place.
    pub backward: Csr,
    /// Roads and named places for maps (empty unless read from an extract or its cache).
    pub layer: super::layer::MapLayer,
}

impl PartialEq for RoadGraph {
    fn eq(&self, o: &Self) -> bool {
        self.lon == o.lon
            && self.lat == o.lat
            && self.osm_id == o.osm_id
            && self.segments == o.segments
            && self.fastest_kmh == o.fastest_kmh
            && self.layer == o.layer
    }
}

impl RoadGraph {
    /// Builds the graph from nodes and segments (the arcs are derived).
    pub fn new(
        lon: Vec<f64>,
        lat: Vec<f64>,
        osm_id: Vec<i64>,
        segments: Vec<Segment>,
        fastest_kmh: f64,
    ) -> RoadGraph {
        let n = lon.len();
        let arcs = segments.iter().enumerate().flat_map(|(i, s)| {
            let i = i as u32;
            let f = s.forward.then_some((s.a, s.b, s.minutes, i));
            let b = s.backward.then_some((s.b, s.a, s.minutes, i));
            f.into_iter().chain(b)
        });
        let forward = Csr::build(n, arcs.clone());
        let backward = Csr::build(n, arcs.map(|(t, h, w, s)| (h, t, w, s)));
        RoadGraph {
            lon,
            lat,
            osm_id,
            segments,
            fastest_kmh,
            forward,
            backward,
            layer: Default::default(),
        }
    }

    /// Number of nodes.
    pub fn nodes(&self) -> usize {
        self.lon.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maxspeed_units() {
        assert_eq!(parse_maxspeed("50"), Some(50.0));
        assert_eq!(parse_maxspeed("80 km/h"), Some(80.0));
        assert!((parse_maxspeed("30 mph").unwrap() - 48.28032).abs() < 1e-9);
        for bad in ["none", "walk", "FI:urban", "50;30", "", "0", "900", "-5"] {
            assert_eq!(parse_maxspeed(bad), None, "{bad}");
        }
    }

    #[test]
    fn oneway_rules() {
        assert_eq!(directions("residential", None, None), (true, true));
        assert_eq!(directions("residential", Some("yes"), None), (true, false));
        assert_eq!(directions("residential", Some("-1"), None), (false, true));
        assert_eq!(directions("motorway", None, None), (true, false));
        assert_eq!(directions("motorway", Some("no"), None), (true, true));
        assert_eq!(
            directions("primary", None, Some("roundabout")),
            (true, false)
        );
        assert_eq!(class_speed_kmh("footway"), None);
        assert_eq!(class_speed_kmh("primary"), Some(65.0));
    }
}
