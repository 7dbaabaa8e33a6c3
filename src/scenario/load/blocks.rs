//! `blocks.geojson`: an RFC 7946 FeatureCollection of Polygon/MultiPolygon grove blocks.
//!
//! Geometry is checked in three steps: the GeoJSON structure (through the `geojson` crate),
//! ring rules from RFC 7946 §3.1.6 (closed, at least four positions) and coordinate ranges, then
//! OGC simple-feature validity (self-intersection, holes outside, overlaps) through geo's
//! `Validation`. Complexity: validation is O(n log n) to O(n²) in ring vertices per feature
//! (geo's sweep), fine at block scale.

use std::collections::{BTreeMap, BTreeSet};

use geo::algorithm::Validation;
use geo::orient::Direction;
use geo::{Area, Coord, LineString, MultiPolygon, Orient, Polygon};
use serde_json::Value;

use super::fields::{check_lat, check_lon, parse_date, parse_enum, parse_time};
use super::limits::{
    LARGE_BLOCK_HA, MAX_FEATURES, MAX_POLYGON_VERTICES, MAX_TOTAL_VERTICES, MIN_BLOCK_M2,
};
use super::text::{Sink, duplicate_keys};
use crate::scenario::problems::Location;
use crate::scenario::{Block, Flush, LonLat, Management};

/// A block as read, before it becomes a site.
pub(super) struct BlockRow {
    pub(super) index: usize,
    pub(super) id: String,
    pub(super) location: LonLat,
    pub(super) block: Block,
}

struct Feat<'a> {
    file: &'a str,
    index: usize,
    id: Option<String>,
}

impl Feat<'_> {
    fn bad(
        &self,
        sink: &mut Sink,
        field: Option<&str>,
        value: Option<&str>,
        msg: impl Into<String>,
    ) {
        sink.problem(
            self.file,
            Location::Feature {
                index: self.index,
                id: self.id.clone(),
            },
            field,
            value,
            msg,
        );
    }
}

fn shown(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        other => other.to_string(),
    }
}

/// Size caps of one parse; [`Caps::DEFAULT`] holds the documented limits, tests use small ones.
struct Caps {
    features: usize,
    polygon_vertices: usize,
    total_vertices: usize,
}

impl Caps {
    const DEFAULT: Caps = Caps {
        features: MAX_FEATURES,
        polygon_vertices: MAX_POLYGON_VERTICES,
        total_vertices: MAX_TOTAL_VERTICES,
    };
}

/// Parses and validates every feature. Also returns every block id written in the file, valid
/// or not (`None` when the file is unusable as a whole), so that references to a block whose
/// feature already has a problem are not reported twice.
pub(super) fn parse(
    file: &str,
    text: &str,
    sink: &mut Sink,
) -> (Vec<BlockRow>, Option<BTreeSet<String>>) {
    parse_capped(file, text, sink, &Caps::DEFAULT)
}

fn parse_capped(
    file: &str,
    text: &str,
    sink: &mut Sink,
    caps: &Caps,
) -> (Vec<BlockRow>, Option<BTreeSet<String>>) {
    let root: Value = match serde_json::from_str(text) {
        Ok(v) => v,
        Err(e) => {
            sink.problem(
                file,
                Location::Line(e.line() as u64),
                None,
                None,
                format!("not valid JSON (column {}): {e}", e.column()),
            );
            return (Vec::new(), None);
        }
    };
    for path in duplicate_keys(text) {
        sink.problem(
            file,
            Location::Key(path),
            None,
            None,
            "the key is written twice in the same object; a reader would silently keep one of \
             the two values. Keep the one you mean and delete the other",
        );
    }
    if root.get("type").and_then(Value::as_str) != Some("FeatureCollection") {
        sink.problem(
            file,
            Location::Key("type".into()),
            None,
            root.get("type").map(shown).as_deref(),
            "the file must be a GeoJSON FeatureCollection: {\"type\": \"FeatureCollection\", \
             \"features\": [...]}",
        );
        return (Vec::new(), None);
    }
    let Some(features) = root.get("features").and_then(Value::as_array) else {
        sink.problem(
            file,
            Location::Key("features".into()),
            None,
            None,
            "a FeatureCollection needs a \"features\" list",
        );
        return (Vec::new(), None);
    };
    if features.len() > caps.features {
        sink.problem(
            file,
            Location::Key("features".into()),
            None,
            None,
            format!(
                "{} features, more than the limit of {}; check it is the right file (a whole \
                 parcel layer?), or keep only the blocks of this program",
                features.len(),
                caps.features
            ),
        );
        return (Vec::new(), None);
    }
    let mut out = Vec::new();
    let mut seen: BTreeMap<String, usize> = BTreeMap::new();
    let mut declared = BTreeSet::new();
    let mut vertices = 0usize;
    for (index, feature) in features.iter().enumerate() {
        let id = feature_id(feature);
        if let Some(id) = &id {
            declared.insert(id.clone());
        }
        let f = Feat {
            file,
            index,
            id: id.clone(),
        };
        let row = parse_feature(&f, feature, caps, &mut vertices, sink);
        if vertices > caps.total_vertices {
            // Reported by `geometry` at the feature that crossed the limit; stop here.
            return (Vec::new(), None);
        }
        if let Some(row) = row {
            if let Some(first) = seen.get(&row.id) {
                f.bad(
                    sink,
                    Some("id"),
                    Some(&row.id),
                    format!("duplicate id, first used by feature {first}; ids must be unique"),
                );
                continue;
            }
            seen.insert(row.id.clone(), index);
            out.push(row);
        }
    }
    (out, Some(declared))
}

/// `properties.id` as text (strings, or whole numbers written without quotes); when the
/// properties have none, the Feature's own `id` member (RFC 7946 §3.2), which many GIS
/// exports write instead.
fn feature_id(feature: &Value) -> Option<String> {
    let as_text = |v: &Value| match v {
        Value::String(s) if !s.trim().is_empty() => Some(s.trim().to_string()),
        Value::Number(n) if n.is_u64() || n.is_i64() => Some(n.to_string()),
        _ => None,
    };
    match feature.get("properties").and_then(|p| p.get("id")) {
        Some(v) if !v.is_null() => as_text(v),
        _ => feature.get("id").and_then(as_text),
    }
}

fn parse_feature(
    f: &Feat<'_>,
    feature: &Value,
    caps: &Caps,
    vertices: &mut usize,
    sink: &mut Sink,
) -> Option<BlockRow> {
    if feature.get("type").and_then(Value::as_str) != Some("Feature") {
        f.bad(
            sink,
            Some("type"),
            None,
            "each entry of \"features\" must be a GeoJSON Feature",
        );
        return None;
    }
    let Some(props) = feature.get("properties").and_then(Value::as_object) else {
        f.bad(
            sink,
            Some("properties"),
            None,
            "the feature needs a \"properties\" object",
        );
        return None;
    };
    let id = match &f.id {
        Some(id) => Some(id.clone()),
        None => {
            f.bad(
                sink,
                Some("id"),
                props.get("id").map(shown).as_deref(),
                "every block needs an \"id\" property (a non-empty string)",
            );
            None
        }
    };
    let text_prop = |key: &str, sink: &mut Sink| -> Option<String> {
        match props.get(key) {
            Some(Value::String(s)) if s.chars().any(char::is_control) => {
                f.bad(
                    sink,
                    Some(key),
                    Some(s),
                    "the text holds a control character (shown escaped, e.g. \\u{0}); retype it",
                );
                None
            }
            Some(Value::String(s)) => Some(s.trim().to_string()),
            Some(v) => {
                f.bad(sink, Some(key), Some(&shown(v)), "expected a string");
                None
            }
            None => {
                f.bad(sink, Some(key), None, "required property is missing");
                None
            }
        }
    };
    let parsed = |key: &str, sink: &mut Sink, p: &dyn Fn(&str) -> Result<_, String>| {
        let s = text_prop(key, sink)?;
        p(&s)
            .map_err(|msg| f.bad(sink, Some(key), Some(&s), msg))
            .ok()
    };
    let crop = text_prop("crop", sink);
    let management = text_prop("management", sink).and_then(|s| {
        parse_enum(
            &s,
            &[
                ("conventional", Management::Conventional),
                ("organic", Management::Organic),
                ("abandoned", Management::Abandoned),
            ],
        )
        .map_err(|msg| f.bad(sink, Some("management"), Some(&s), msg))
        .ok()
    });
    let flush = text_prop("flush", sink).and_then(|s| {
        parse_enum(
            &s,
            &[
                ("none", Flush::None),
                ("light", Flush::Light),
                ("heavy", Flush::Heavy),
            ],
        )
        .map_err(|msg| f.bad(sink, Some("flush"), Some(&s), msg))
        .ok()
    });
    let last_insecticide = match props.get("last_insecticide") {
        None | Some(Value::Null) => Some(None),
        Some(Value::String(s)) => match parse_date(s.trim()) {
            Ok(d) => Some(Some(d)),
            Err(msg) => {
                f.bad(
                    sink,
                    Some("last_insecticide"),
                    Some(s),
                    format!("{msg}, or null"),
                );
                None
            }
        },
        Some(v) => {
            f.bad(
                sink,
                Some("last_insecticide"),
                Some(&shown(v)),
                "expected a date string YYYY-MM-DD or null",
            );
            None
        }
    };
    let access_start = parsed("access_start", sink, &parse_time);
    let access_end = parsed("access_end", sink, &parse_time);
    if let (Some(s), Some(e)) = (access_start, access_end)
        && s >= e
    {
        f.bad(
            sink,
            Some("access_end"),
            Some(&e.format("%H:%M").to_string()),
            format!("access must end after it starts ({})", s.format("%H:%M")),
        );
    }
    let access = access_point(f, props, sink);
    let geometry = geometry(f, feature.get("geometry"), caps, vertices, sink);

    let (Some(id), Some(crop), Some(management), Some(flush), Some(last_insecticide)) =
        (id, crop, management, flush, last_insecticide)
    else {
        return None;
    };
    let (Some(access_start), Some(access_end), Some(access), Some((geometry, area_ha))) =
        (access_start, access_end, access, geometry)
    else {
        return None;
    };
    if access_start >= access_end {
        return None;
    }
    let location = match access {
        Some(p) => p,
        None => match crate::geodesy::default_access_point(&geometry) {
            Some(p) => p,
            None => {
                f.bad(
                    sink,
                    Some("geometry"),
                    None,
                    "no access point can be derived; give access_lon and access_lat",
                );
                return None;
            }
        },
    };
    Some(BlockRow {
        index: f.index,
        id,
        location,
        block: Block {
            crop,
            management,
            flush,
            last_insecticide,
            access_start,
            access_end,
            area_ha,
            geometry,
        },
    })
}

/// `Some(None)`: neither given; `Some(Some(p))`: both valid; `None`: a problem was recorded.
fn access_point(
    f: &Feat<'_>,
    props: &serde_json::Map<String, Value>,
    sink: &mut Sink,
) -> Option<Option<LonLat>> {
    let get = |k: &str| props.get(k).filter(|v| !v.is_null());
    match (get("access_lon"), get("access_lat")) {
        (None, None) => Some(None),
        (Some(lon), Some(lat)) => {
            let lon_ok = lon
                .as_f64()
                .ok_or_else(|| "expected a number of degrees".to_string())
                .and_then(check_lon)
                .map_err(|m| f.bad(sink, Some("access_lon"), Some(&shown(lon)), m))
                .ok();
            let lat_ok = lat
                .as_f64()
                .ok_or_else(|| "expected a number of degrees".to_string())
                .and_then(check_lat)
                .map_err(|m| f.bad(sink, Some("access_lat"), Some(&shown(lat)), m))
                .ok();
            Some(Some(LonLat {
                lon: lon_ok?,
                lat: lat_ok?,
            }))
        }
        (Some(_), None) | (None, Some(_)) => {
            f.bad(
                sink,
                Some("access_lon/access_lat"),
                None,
                "give both access_lon and access_lat, or neither",
            );
            None
        }
    }
}

/// The feature's outline, checked, and its geodesic area (ha, computed once here for the
/// check and the block). `vertices` is the running count of positions in the file;
/// past the caps a problem is recorded before any ring is converted or validated.
fn geometry(
    f: &Feat<'_>,
    geom: Option<&Value>,
    caps: &Caps,
    vertices: &mut usize,
    sink: &mut Sink,
) -> Option<(MultiPolygon<f64>, f64)> {
    let Some(geom) = geom.filter(|g| !g.is_null()) else {
        f.bad(
            sink,
            Some("geometry"),
            None,
            "the block needs a Polygon or MultiPolygon geometry",
        );
        return None;
    };
    let parsed: geojson::Geometry = match serde_json::from_value(geom.clone()) {
        Ok(g) => g,
        Err(e) => {
            f.bad(
                sink,
                Some("geometry"),
                None,
                format!("not a valid GeoJSON geometry: {e}"),
            );
            return None;
        }
    };
    let polygons: Vec<&geojson::PolygonType> = match &parsed.value {
        geojson::GeometryValue::Polygon { coordinates } => vec![coordinates],
        geojson::GeometryValue::MultiPolygon { coordinates } => coordinates.iter().collect(),
        other => {
            f.bad(
                sink,
                Some("geometry"),
                Some(other.type_name()),
                "blocks must be Polygon or MultiPolygon",
            );
            return None;
        }
    };
    for (pi, rings) in polygons.iter().enumerate() {
        let n: usize = rings.iter().map(Vec::len).sum();
        *vertices = vertices.saturating_add(n);
        if n > caps.polygon_vertices {
            f.bad(
                sink,
                Some("geometry"),
                None,
                format!(
                    "polygon {pi} has {n} positions, more than the limit of {} per polygon; \
                     simplify the outline in a GIS (a 0.5 m tolerance keeps a block's shape)",
                    caps.polygon_vertices
                ),
            );
            return None;
        }
    }
    if *vertices > caps.total_vertices {
        f.bad(
            sink,
            Some("geometry"),
            None,
            format!(
                "the polygons up to this feature have {} positions in all, more than the limit \
                 of {} per file; simplify the outlines in a GIS or split the scenario",
                *vertices, caps.total_vertices
            ),
        );
        return None;
    }
    let mut ok = true;
    let mut out = Vec::with_capacity(polygons.len());
    for (pi, rings) in polygons.iter().enumerate() {
        if rings.is_empty() {
            f.bad(
                sink,
                Some("geometry"),
                None,
                format!("polygon {pi} has no rings"),
            );
            ok = false;
            continue;
        }
        let mut geo_rings = Vec::with_capacity(rings.len());
        for (ri, ring) in rings.iter().enumerate() {
            match ring_coords(ring) {
                Ok(c) => geo_rings.push(LineString::new(c)),
                Err(msg) => {
                    f.bad(
                        sink,
                        Some("geometry"),
                        None,
                        format!("polygon {pi} ring {ri}: {msg}"),
                    );
                    ok = false;
                }
            }
        }
        if ok {
            let mut it = geo_rings.into_iter();
            if let Some(exterior) = it.next() {
                out.push(Polygon::new(exterior, it.collect()));
            }
        }
    }
    if !ok {
        return None;
    }
    let shape = MultiPolygon::new(out);
    let errors = shape.validation_errors();
    if !errors.is_empty() {
        for e in errors {
            f.bad(
                sink,
                Some("geometry"),
                None,
                format!(
                    "invalid polygon: {e}; fix the outline in a GIS (e.g. remove the crossing)"
                ),
            );
        }
        return None;
    }
    // Outlines counter-clockwise first: the geodesic area of a clockwise ring is the rest of
    // the Earth.
    let shape = shape.orient(Direction::Default);
    let area_ha = crate::geodesy::area_ha(&shape);
    // Geodesic edges between points on one parallel bulge poleward, so a flat ring still has
    // a few m² of geodesic area; the planar area in degrees (scaled to m² at the block's
    // latitude, about 111.32 km a degree) is 0 for it.
    let lat = shape
        .iter()
        .flat_map(|p| p.exterior().coords())
        .map(|c| c.y)
        .next()
        .unwrap_or(0.0);
    let planar_m2 = shape.unsigned_area() * 111_320.0 * 111_320.0 * lat.to_radians().cos();
    if !(area_ha.is_finite() && area_ha * 10_000.0 >= MIN_BLOCK_M2 && planar_m2 >= MIN_BLOCK_M2) {
        f.bad(
            sink,
            Some("geometry"),
            None,
            format!(
                "the outline encloses no area (under {MIN_BLOCK_M2} m²: its points lie on one \
                 line or on one spot); redraw the block's outline"
            ),
        );
        return None;
    }
    if area_ha > LARGE_BLOCK_HA {
        sink.warning(
            f.file,
            Location::Feature {
                index: f.index,
                id: f.id.clone(),
            },
            format!(
                "the block covers {area_ha:.0} ha, more than {LARGE_BLOCK_HA:.0} ha; check the \
                 outline (a whole farm or county drawn as one block, or a coordinate typed \
                 wrong?)"
            ),
        );
    }
    Some((shape, area_ha))
}

/// RFC 7946 ring rules and coordinate ranges.
fn ring_coords(ring: &[geojson::Position]) -> Result<Vec<Coord<f64>>, String> {
    if ring.len() < 4 {
        return Err(format!(
            "a ring needs at least 4 positions (first repeated last), found {}",
            ring.len()
        ));
    }
    let mut coords: Vec<Coord<f64>> = Vec::with_capacity(ring.len());
    for (i, p) in ring.iter().enumerate() {
        let s = p.as_slice();
        let (Some(&x), Some(&y)) = (s.first(), s.get(1)) else {
            return Err(format!("position {i} needs a longitude and a latitude"));
        };
        if !x.is_finite() || !y.is_finite() {
            return Err(format!("position {i} is not finite"));
        }
        check_lon(x).map_err(|m| format!("position {i}: {m}"))?;
        check_lat(y).map_err(|m| format!("position {i}: {m}"))?;
        if let Some(prev) = coords.last()
            && (x - prev.x).abs() > 180.0
        {
            // Read as written, the edge would go the long way round the Earth.
            return Err(format!(
                "the edge from position {} to {i} crosses the antimeridian (180° longitude); \
                 split the block into two polygons at 180° (RFC 7946 §3.1.9)",
                i - 1
            ));
        }
        coords.push(Coord { x, y });
    }
    if coords.first() != coords.last() {
        return Err("the ring is not closed; repeat the first position at the end".into());
    }
    Ok(coords)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A valid square block as GeoJSON text, `n` positions on its ring (n ≥ 5).
    fn block(id: &str, n: usize) -> String {
        // Points along the four sides of a 0.01° square, closed.
        let mut ring = Vec::with_capacity(n);
        let per_side = (n - 1).div_ceil(4);
        let corners = [
            (0.0, 0.0),
            (0.01, 0.0),
            (0.01, 0.01),
            (0.0, 0.01),
            (0.0, 0.0),
        ];
        'outer: for w in corners.windows(2) {
            for k in 0..per_side {
                if ring.len() == n - 1 {
                    break 'outer;
                }
                let t = k as f64 / per_side as f64;
                let x = 80.0 + w[0].0 + (w[1].0 - w[0].0) * t;
                let y = 27.0 + w[0].1 + (w[1].1 - w[0].1) * t;
                ring.push(format!("[{x},{y}]"));
            }
        }
        ring.push(ring[0].clone());
        format!(
            r#"{{"type":"Feature","properties":{{"id":"{id}","crop":"orange","management":"organic","flush":"light","last_insecticide":null,"access_start":"07:00","access_end":"17:00"}},"geometry":{{"type":"Polygon","coordinates":[[{}]]}}}}"#,
            ring.join(",")
        )
    }

    fn collection(features: &[String]) -> String {
        format!(
            r#"{{"type":"FeatureCollection","features":[{}]}}"#,
            features.join(",")
        )
    }

    const SMALL: Caps = Caps {
        features: 3,
        polygon_vertices: 12,
        total_vertices: 25,
    };

    #[test]
    fn blocks_within_the_caps_load() {
        let mut sink = Sink::default();
        let text = collection(&[block("B1", 12), block("B2", 12)]);
        let (rows, _) = parse_capped("b.geojson", &text, &mut sink, &SMALL);
        assert!(sink.problems.is_empty(), "{:?}", sink.problems);
        assert_eq!(rows.len(), 2);
    }

    #[test]
    fn too_many_features_fails_before_any_feature_is_read() {
        let mut sink = Sink::default();
        let text = collection(&[
            block("B1", 5),
            block("B2", 5),
            block("B3", 5),
            block("B4", 5),
        ]);
        let (rows, ids) = parse_capped("b.geojson", &text, &mut sink, &SMALL);
        assert!(rows.is_empty() && ids.is_none());
        assert_eq!(sink.problems.len(), 1);
        let msg = sink.problems[0].to_string();
        assert!(
            msg.contains("4 features") && msg.contains("limit of 3"),
            "{msg}"
        );
    }

    #[test]
    fn a_polygon_past_the_vertex_cap_is_named_with_the_cap() {
        let mut sink = Sink::default();
        let text = collection(&[block("B1", 5), block("B2", 13)]);
        let (rows, _) = parse_capped("b.geojson", &text, &mut sink, &SMALL);
        assert_eq!(rows.len(), 1, "B1 still loads");
        assert_eq!(sink.problems.len(), 1);
        let msg = sink.problems[0].to_string();
        assert!(msg.starts_with("b.geojson: feature 1 (id 'B2'): field 'geometry':"));
        assert!(
            msg.contains("13 positions") && msg.contains("limit of 12"),
            "{msg}"
        );
    }

    #[test]
    fn the_total_vertex_cap_stops_the_file_at_the_feature_that_crosses_it() {
        let mut sink = Sink::default();
        let text = collection(&[block("B1", 12), block("B2", 12), block("B3", 12)]);
        let (rows, ids) = parse_capped("b.geojson", &text, &mut sink, &SMALL);
        assert!(rows.is_empty() && ids.is_none());
        assert_eq!(sink.problems.len(), 1, "{:?}", sink.problems);
        let msg = sink.problems[0].to_string();
        assert!(
            msg.contains("feature 2") && msg.contains("36 positions in all"),
            "{msg}"
        );
        assert!(msg.contains("limit of 25"), "{msg}");
    }
}
