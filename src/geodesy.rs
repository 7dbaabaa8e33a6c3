//! Geodesy on the WGS 84 ellipsoid (Karney's algorithms through geo's `Geodesic`).

use geo::{Centroid, ClosestPoint, Distance, Geodesic, GeodesicArea, MultiPolygon, Point};

use crate::scenario::LonLat;

/// Geodesic distance between two positions on WGS 84, metres.
pub fn distance_m(a: LonLat, b: LonLat) -> f64 {
    Geodesic.distance(Point::new(a.lon, a.lat), Point::new(b.lon, b.lat))
}

/// Geodesic area of a (multi)polygon on WGS 84, square metres (holes subtracted).
pub fn area_m2(shape: &MultiPolygon<f64>) -> f64 {
    shape.geodesic_area_unsigned()
}

/// Geodesic area, hectares.
pub fn area_ha(shape: &MultiPolygon<f64>) -> f64 {
    area_m2(shape) / 10_000.0
}

/// Where a vehicle stops for a block without an explicit access point: its centroid when
/// that lies inside the block, otherwise the point of the outline nearest the centroid
/// (planar in degrees, which is fine at block scale).
pub fn default_access_point(shape: &MultiPolygon<f64>) -> Option<LonLat> {
    let c = shape.centroid()?;
    let p = match shape.closest_point(&c) {
        geo::Closest::Intersection(p) | geo::Closest::SinglePoint(p) => p,
        geo::Closest::Indeterminate => c,
    };
    (p.x().is_finite() && p.y().is_finite()).then(|| LonLat {
        lon: p.x(),
        lat: p.y(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::polygon;

    #[test]
    fn one_degree_of_latitude_near_equator_is_about_110_6_km() {
        // Textbook value for a meridian degree at the equator on WGS 84: 110.574 km
        // (from memory; the GeographicLib comparison in tests/ checks it exactly).
        let d = distance_m(LonLat { lon: 0.0, lat: 0.0 }, LonLat { lon: 0.0, lat: 1.0 });
        assert!((d - 110_574.0).abs() < 5.0, "{d}");
    }

    #[test]
    fn access_point_is_centroid_for_a_square() {
        let sq = MultiPolygon(vec![polygon![
            (x: 0.0, y: 0.0), (x: 0.01, y: 0.0), (x: 0.01, y: 0.01), (x: 0.0, y: 0.01), (x: 0.0, y: 0.0)
        ]]);
        let p = default_access_point(&sq).unwrap();
        assert!((p.lon - 0.005).abs() < 1e-12 && (p.lat - 0.005).abs() < 1e-12);
        assert!(area_ha(&sq) > 100.0 && area_ha(&sq) < 130.0);
    }
}
