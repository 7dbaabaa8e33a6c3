//! Reads an OpenStreetMap PBF extract into a [`RoadGraph`] (two passes over the bytes: the
//! drivable ways, then the coordinates of the nodes they use and the named places), with the
//! [`MapLayer`] the route-sheet maps draw.

use osmpbf::{Element, ElementReader};

use super::graph::{RoadGraph, Segment, class_speed_kmh, directions, parse_maxspeed};
use super::layer::{MapLayer, MapPlace, MapRoad, is_major, place_rank};
use crate::geodesy;
use crate::scenario::LonLat;

/// Why an extract cannot be used.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum ReadError {
    /// Not a readable PBF file (truncated, another format, a corrupt block).
    #[error(
        "not a readable OpenStreetMap PBF extract ({0}); download the extract again (a \
         `.osm.pbf` file, e.g. from a regional extract service) or convert it with `osmium cat`"
    )]
    NotPbf(String),
    /// A readable file without one drivable way.
    #[error(
        "the extract holds no drivable road (no way tagged highway=motorway … track with its \
         nodes); use an extract of the region's road network, not a filtered or empty one"
    )]
    NoRoads,
}

struct Way {
    refs: Vec<i64>,
    kmh: f64,
    forward: bool,
    backward: bool,
    major: bool,
    name: String,
}

/// Parses `bytes` (a whole `.osm.pbf` file). Deterministic: the graph depends only on the bytes.
pub fn parse(bytes: &[u8]) -> Result<RoadGraph, ReadError> {
    let err = |e: osmpbf::Error| ReadError::NotPbf(e.to_string());
    let mut ways: Vec<Way> = Vec::new();
    ElementReader::new(bytes)
        .for_each(|e| {
            if let Element::Way(w) = e {
                let (mut hw, mut ms, mut ow, mut junction, mut denied) =
                    (None, None, None, None, false);
                let (mut name, mut reference) = (None, None);
                for (k, v) in w.tags() {
                    match k {
                        "highway" => hw = Some(v),
                        "maxspeed" => ms = Some(v),
                        "oneway" => ow = Some(v),
                        "junction" => junction = Some(v),
                        "name" => name = Some(v),
                        "ref" => reference = Some(v),
                        "access" | "motor_vehicle" | "motorcar" if v == "no" => denied = true,
                        _ => {}
                    }
                }
                let Some(hw) = hw.filter(|_| !denied) else {
                    return;
                };
                let Some(default) = class_speed_kmh(hw) else {
                    return;
                };
                let (forward, backward) = directions(hw, ow, junction);
                ways.push(Way {
                    refs: w.refs().collect(),
                    kmh: ms.and_then(parse_maxspeed).unwrap_or(default),
                    forward,
                    backward,
                    major: is_major(hw),
                    name: name.or(reference).unwrap_or_default().to_string(),
                });
            }
        })
        .map_err(err)?;
    let mut ids: Vec<i64> = ways.iter().flat_map(|w| w.refs.iter().copied()).collect();
    ids.sort_unstable();
    ids.dedup();
    let mut lon = vec![f64::NAN; ids.len()];
    let mut lat = vec![f64::NAN; ids.len()];
    let mut put = |id: i64, x: f64, y: f64| {
        if let Ok(i) = ids.binary_search(&id) {
            lon[i] = x;
            lat[i] = y;
        }
    };
    let mut places = Vec::new();
    let mut place = |tags: &mut dyn Iterator<Item = (&str, &str)>, x: f64, y: f64| {
        let (mut rank, mut name) = (None, None);
        for (k, v) in tags {
            match k {
                "place" => rank = place_rank(v),
                "name" => name = Some(v),
                _ => {}
            }
        }
        let ok = x.is_finite() && y.is_finite() && (-180.0..=180.0).contains(&x);
        if let (Some(rank), Some(name), true) = (rank, name, ok && (-90.0..=90.0).contains(&y)) {
            places.push(MapPlace {
                name: name.to_string(),
                rank,
                at: LonLat { lon: x, lat: y },
            });
        }
    };
    ElementReader::new(bytes)
        .for_each(|e| match e {
            Element::Node(n) => {
                put(n.id(), n.lon(), n.lat());
                place(&mut n.tags(), n.lon(), n.lat());
            }
            Element::DenseNode(n) => {
                put(n.id(), n.lon(), n.lat());
                place(&mut n.tags(), n.lon(), n.lat());
            }
            _ => {}
        })
        .map_err(err)?;
    // Keep only nodes with coordinates (an extract cut at a border lists ways whose outer
    // nodes it does not hold); renumber densely in id order.
    let mut index = vec![u32::MAX; ids.len()];
    let (mut nlon, mut nlat, mut nid) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..ids.len() {
        let ok = lon[i].is_finite()
            && lat[i].is_finite()
            && (-180.0..=180.0).contains(&lon[i])
            && (-90.0..=90.0).contains(&lat[i]);
        if ok {
            index[i] = nlon.len() as u32;
            nlon.push(lon[i]);
            nlat.push(lat[i]);
            nid.push(ids[i]);
        }
    }
    let node = |id: i64| {
        ids.binary_search(&id)
            .ok()
            .map(|i| index[i])
            .filter(|&v| v != u32::MAX)
    };
    let mut segments = Vec::new();
    let mut fastest: f64 = 0.0;
    for w in &ways {
        for pair in w.refs.windows(2) {
            let (Some(a), Some(b)) = (node(pair[0]), node(pair[1])) else {
                continue;
            };
            if a == b {
                continue;
            }
            let m = geodesy::distance_m(
                LonLat {
                    lon: nlon[a as usize],
                    lat: nlat[a as usize],
                },
                LonLat {
                    lon: nlon[b as usize],
                    lat: nlat[b as usize],
                },
            );
            segments.push(Segment {
                a,
                b,
                minutes: m / 1000.0 / w.kmh * 60.0,
                forward: w.forward,
                backward: w.backward,
            });
            fastest = fastest.max(w.kmh);
        }
    }
    if segments.is_empty() {
        return Err(ReadError::NoRoads);
    }
    // The map's roads: each way split into runs of nodes the extract holds.
    let mut roads = Vec::new();
    for w in &ways {
        let mut run: Vec<u32> = Vec::new();
        for r in w.refs.iter().map(|&r| node(r)).chain(std::iter::once(None)) {
            match r {
                Some(v) if run.last() != Some(&v) => run.push(v),
                Some(_) => {}
                None => {
                    if run.len() >= 2 {
                        roads.push(MapRoad {
                            major: w.major,
                            name: w.name.clone(),
                            nodes: std::mem::take(&mut run),
                        });
                    }
                    run.clear();
                }
            }
        }
    }
    let mut graph = RoadGraph::new(nlon, nlat, nid, segments, fastest);
    graph.layer = MapLayer { roads, places };
    Ok(graph)
}
