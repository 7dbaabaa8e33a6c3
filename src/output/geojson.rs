//! `plan.geojson`: an RFC 7946 FeatureCollection for GIS (QGIS opens it as is): every
//! candidate site (blocks as polygons, requests as points), every facility as a point, and
//! every route as a LineString of its driven path (`kind` = `route`, with vehicle, date,
//! depot and the stop order as site ids).
//!
//! Longitude first, 6 decimals (about 0.1 m), exterior rings counter-clockwise and holes
//! clockwise (RFC 7946 §3.1.6), no `crs` member (§4: WGS 84 is implied), every number finite.
//! No address, name, phone or e-mail: requests are placed by their coordinates only.

use geo::{LineString, MultiPolygon, Orient, orient::Direction};
use rayon::prelude::*;
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

/// A route as a LineString feature: its driven path, or (when the travel model gave no
/// geometry) straight legs depot → stops → depot, so that the line always has the two
/// positions RFC 7946 §3.1.4 asks for. Site ids only: no address.
fn route_line(view: &PlanView, r: &crate::dispatch::Route) -> Result<Value, OutputError> {
    let sc = view.scenario;
    let (depot, vehicle) = super::route_depot_vehicle(sc, r)?;
    let mut order = Vec::with_capacity(r.stops.len());
    let mut straight = vec![depot.location];
    for st in &r.stops {
        let site = sc
            .sites
            .get(st.site)
            .ok_or_else(|| super::bad_site(st.site))?;
        order.push(site.id.as_str().to_string());
        straight.push(site.location);
    }
    straight.push(depot.location);
    let line = if r.path.len() >= 2 {
        &r.path
    } else {
        &straight
    };
    let coords: Vec<Value> = line.iter().map(|p| pos(p.lon, p.lat)).collect();
    let mut props = Map::new();
    props.insert("id".into(), json!(r.id));
    props.insert("kind".into(), json!("route"));
    props.insert("vehicle_id".into(), json!(vehicle.id.as_str()));
    props.insert("date".into(), json!(r.date.to_string()));
    props.insert("facility_id".into(), json!(depot.id.as_str()));
    props.insert("stops".into(), json!(r.stops.len()));
    props.insert("stop_order".into(), json!(order.join(";")));
    props.insert("vials".into(), json!(r.vials()));
    props.insert("drive_minutes".into(), json!(round_to(r.drive_minutes, 1)));
    Ok(json!({
        "type": "Feature",
        "geometry": {"type": "LineString", "coordinates": coords},
        "properties": props
    }))
}

/// Property order is fixed by insertion into a `serde_json::Map` (sorted keys without the
/// `preserve_order` feature; insertion order with it): deterministic either way. O(S + F).
pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    // Each site's feature is built and written on its own, in parallel (the 35,000 block
    // polygons of a large week took 0.3-0.5 s on one core), then joined in site order: the
    // same bytes as writing the whole collection at once.
    let site_feature = |(i, site): (usize, &crate::scenario::Site)| -> serde_json::Result<Vec<u8>> {
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
        serde_json::to_vec(&json!({"type": "Feature", "geometry": geometry, "properties": props}))
    };
    let mut features: Vec<Vec<u8>> = sc
        .sites
        .par_iter()
        .enumerate()
        .map(site_feature)
        .collect::<serde_json::Result<_>>()?;
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
        features.push(serde_json::to_vec(
            &json!({"type": "Feature", "geometry": point(f.location), "properties": props}),
        )?);
    }
    for r in &view.dispatch.routes {
        features.push(serde_json::to_vec(&route_line(view, r)?)?);
    }
    // {"features":[...],"type":"FeatureCollection"}: serde_json writes object keys sorted.
    let mut bytes = Vec::with_capacity(features.iter().map(|f| f.len() + 1).sum::<usize>() + 64);
    bytes.extend_from_slice(b"{\"features\":[");
    for (k, f) in features.iter().enumerate() {
        if k > 0 {
            bytes.push(b',');
        }
        bytes.extend_from_slice(f);
    }
    bytes.extend_from_slice(b"],\"type\":\"FeatureCollection\"}\n");
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
        assert_eq!(feats.len(), 10 + 2 + 2);
        for f in feats.iter().filter(|f| f["properties"]["kind"] != "route") {
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
        assert_eq!(r3["geometry"]["coordinates"][0], 79.99, "lon first");
        assert_eq!(r3["properties"]["route_id"], Value::Null, "parcel");
        assert!(j.get("crs").is_none());
    }

    #[test]
    fn routes_are_lines_along_their_path_with_the_stop_order() {
        let mut p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let j: Value = serde_json::from_slice(&render(&v, &plan).unwrap()).unwrap();
        let routes: Vec<&Value> = j["features"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|f| f["properties"]["kind"] == "route")
            .collect();
        assert_eq!(routes.len(), 2);
        let r1 = routes[0];
        assert_eq!(r1["geometry"]["type"], "LineString");
        let path = &p.dispatch.routes[0].path;
        let coords = r1["geometry"]["coordinates"].as_array().unwrap();
        assert_eq!(coords.len(), path.len());
        assert_eq!(coords[1][0], round_to(path[1].lon, 6), "lon first");
        assert_eq!(coords[1][1], round_to(path[1].lat, 6));
        let props = &r1["properties"];
        assert_eq!(props["id"], "R-F1-20270302-1");
        assert_eq!(props["vehicle_id"], "V1");
        assert_eq!(props["date"], "2027-03-02");
        assert_eq!(props["facility_id"], "F1");
        assert_eq!(props["stop_order"], "B1;R1;B2");
        // Without geometry from the travel model: straight legs, depot to depot.
        p.dispatch.routes[0].path.clear();
        let v = p.view();
        let j: Value = serde_json::from_slice(&render(&v, &plan).unwrap()).unwrap();
        let line = j["features"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["properties"]["id"] == "R-F1-20270302-1")
            .unwrap();
        assert_eq!(line["geometry"]["coordinates"].as_array().unwrap().len(), 5);
    }
}
