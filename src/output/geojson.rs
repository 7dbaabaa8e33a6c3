//! `plan.geojson`: an RFC 7946 FeatureCollection for GIS (QGIS opens it as is): every
//! candidate site (blocks as polygons, requests as points) and every facility as a point.
//!
//! Longitude first, 6 decimals (about 0.1 m), exterior rings counter-clockwise and holes
//! clockwise (RFC 7946 §3.1.6), no `crs` member (§4: WGS 84 is implied), every number finite.
//! No address, name, phone or e-mail: requests are placed by their coordinates only.

use geo::{LineString, MultiPolygon, Orient, orient::Direction};
use serde_json::{Map, Value, json};

use super::{Delivered, OutputError, PlanView, priority_of, round_to};
use crate::scenario::{LonLat, SiteDetail};

fn pos(x: f64, y: f64) -> Value {
    json!([round_to(x, 6), round_to(y, 6)])
}

fn ring(ls: &LineString<f64>) -> Value {
    Value::Array(ls.coords().map(|c| pos(c.x, c.y)).collect())
}

fn multipolygon(mp: &MultiPolygon<f64>) -> Value {
    // Orient even though the loader promises CCW exteriors: this file is the one GIS users
    // open, and RFC 7946 §3.1.6 asks for the right-hand rule.
    let mp = mp.orient(Direction::Default);
    let polys: Vec<Value> =
        mp.0.iter()
            .map(|p| {
                let mut rings = vec![ring(p.exterior())];
                rings.extend(p.interiors().iter().map(ring));
                Value::Array(rings)
            })
            .collect();
    if polys.len() == 1 {
        json!({"type": "Polygon", "coordinates": polys[0]})
    } else {
        json!({"type": "MultiPolygon", "coordinates": polys})
    }
}

fn point(p: LonLat) -> Value {
    json!({"type": "Point", "coordinates": pos(p.lon, p.lat)})
}

fn joined(v: &[String]) -> Value {
    if v.is_empty() {
        Value::Null
    } else {
        Value::String(v.join(";"))
    }
}

/// Property order is fixed by insertion into a `serde_json::Map` (sorted keys without the
/// `preserve_order` feature; insertion order with it): deterministic either way. O(S + F).
pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let mut features = Vec::with_capacity(sc.sites.len() + sc.facilities.len());
    for (i, site) in sc.sites.iter().enumerate() {
        let d = plan.per_site.get(i).cloned().unwrap_or_default();
        let geometry = match &site.detail {
            SiteDetail::Block(b) if !b.geometry.0.is_empty() => multipolygon(&b.geometry),
            _ => point(site.location),
        };
        let mut props = Map::new();
        props.insert("id".into(), json!(site.id.as_str()));
        props.insert("kind".into(), json!(site.kind().as_str()));
        props.insert("priority".into(), json!(round_to(priority_of(view, i), 4)));
        props.insert("vials".into(), json!(d.vials));
        props.insert(
            "wasps_expected_alive".into(),
            json!(round_to(d.wasps_expected_alive, 1)),
        );
        props.insert("facility_id".into(), joined(&d.facilities));
        props.insert("route_id".into(), joined(&d.routes));
        props.insert(
            "reason".into(),
            plan.reason(view, i).map_or(Value::Null, |r| json!(r)),
        );
        features.push(json!({"type": "Feature", "geometry": geometry, "properties": props}));
    }
    for f in &sc.facilities {
        let mut props = Map::new();
        props.insert("id".into(), json!(f.id.as_str()));
        props.insert("kind".into(), json!("facility"));
        props.insert("priority".into(), Value::Null);
        let vials: u64 = plan
            .rows
            .iter()
            .filter(|r| r.facility_id == f.id.0)
            .map(|r| u64::from(r.vials))
            .sum();
        props.insert("vials".into(), json!(vials));
        props.insert("wasps_expected_alive".into(), Value::Null);
        props.insert("facility_id".into(), json!(f.id.as_str()));
        props.insert("route_id".into(), Value::Null);
        props.insert("reason".into(), Value::Null);
        features
            .push(json!({"type": "Feature", "geometry": point(f.location), "properties": props}));
    }
    let doc = json!({"type": "FeatureCollection", "features": features});
    let mut bytes = serde_json::to_vec(&doc)?;
    bytes.push(b'\n');
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;
    use geo::polygon;

    #[test]
    fn clockwise_input_comes_out_counter_clockwise() {
        let cw = MultiPolygon(vec![polygon![
            (x: 0.0, y: 0.0), (x: 0.0, y: 1.0), (x: 1.0, y: 1.0), (x: 1.0, y: 0.0), (x: 0.0, y: 0.0)
        ]]);
        let g = multipolygon(&cw);
        let ring: Vec<(f64, f64)> = g["coordinates"][0]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| (p[0].as_f64().unwrap(), p[1].as_f64().unwrap()))
            .collect();
        // Shoelace: positive signed area means counter-clockwise.
        let a: f64 = ring
            .windows(2)
            .map(|w| w[0].0 * w[1].1 - w[1].0 * w[0].1)
            .sum();
        assert!(a > 0.0, "{ring:?}");
    }

    #[test]
    fn sites_and_facilities_are_features_with_the_contract_properties() {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let j: Value = serde_json::from_slice(&render(&v, &plan).unwrap()).unwrap();
        let feats = j["features"].as_array().unwrap();
        assert_eq!(feats.len(), 10 + 2);
        for f in feats {
            let keys: Vec<&str> = f["properties"]
                .as_object()
                .unwrap()
                .keys()
                .map(|k| k.as_str())
                .collect();
            let mut keys = keys;
            keys.sort_unstable();
            assert_eq!(
                keys,
                [
                    "facility_id",
                    "id",
                    "kind",
                    "priority",
                    "reason",
                    "route_id",
                    "vials",
                    "wasps_expected_alive"
                ]
            );
        }
        let b1 = feats
            .iter()
            .find(|f| f["properties"]["id"] == "B1")
            .unwrap();
        assert_eq!(b1["geometry"]["type"], "Polygon");
        assert_eq!(b1["properties"]["route_id"], "R-F1-20270302-1");
        let r3 = feats
            .iter()
            .find(|f| f["properties"]["id"] == "R3")
            .unwrap();
        assert_eq!(r3["geometry"]["coordinates"][0], -79.99, "lon first");
        assert_eq!(r3["properties"]["route_id"], Value::Null, "parcel");
        assert!(j.get("crs").is_none());
    }
}
