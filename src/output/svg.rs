//! Small hand-written SVG for the route-sheet and report maps: an equirectangular projection
//! at the map's mean latitude (distortion under 0.1 % across a county-sized map), a scale bar
//! with a round distance and a north arrow.
//!
//! Hand-written rather than a plotting crate: the maps are a few dozen markers and lines, the
//! output must be byte-stable and print crisply as vector graphics inside the HTML, and a
//! plotting crate would add a font stack and a large dependency tree for no gain here.

use std::fmt::Write;

use crate::scenario::LonLat;

/// Mean Earth radius, km (IUGG R1; from memory).
const EARTH_RADIUS_KM: f64 = 6371.0088;

/// Maps lon/lat to SVG pixels, north up.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Frame {
    lon0: f64,
    lat0: f64,
    cos_lat0: f64,
    /// Pixels per km.
    px_per_km: f64,
    /// Pixel position of (lon0, lat0).
    cx: f64,
    cy: f64,
    /// Canvas size, px.
    pub width: f64,
    pub height: f64,
}

impl Frame {
    /// Fits `points` into a `width`×`height` canvas with `pad` pixels of margin. The extent
    /// is at least `min_extent_km` on each side so one point still gets a scale.
    /// O(n).
    pub fn fit(points: &[LonLat], width: f64, height: f64, pad: f64, min_extent_km: f64) -> Self {
        let finite: Vec<LonLat> = points
            .iter()
            .copied()
            .filter(|p| p.lon.is_finite() && p.lat.is_finite())
            .collect();
        let (mut lo_lon, mut hi_lon, mut lo_lat, mut hi_lat) =
            (180.0f64, -180.0f64, 90.0f64, -90.0f64);
        for p in &finite {
            lo_lon = lo_lon.min(p.lon);
            hi_lon = hi_lon.max(p.lon);
            lo_lat = lo_lat.min(p.lat);
            hi_lat = hi_lat.max(p.lat);
        }
        if finite.is_empty() {
            (lo_lon, hi_lon, lo_lat, hi_lat) = (0.0, 0.0, 0.0, 0.0);
        }
        let lon0 = (lo_lon + hi_lon) / 2.0;
        let lat0 = (lo_lat + hi_lat) / 2.0;
        let cos_lat0 = lat0.to_radians().cos().max(0.01);
        let km = |deg: f64| deg.to_radians() * EARTH_RADIUS_KM;
        let ext_x = (km(hi_lon - lo_lon) * cos_lat0)
            .max(min_extent_km)
            .max(1e-3);
        let ext_y = km(hi_lat - lo_lat).max(min_extent_km).max(1e-3);
        let px_per_km = ((width - 2.0 * pad) / ext_x).min((height - 2.0 * pad) / ext_y);
        Frame {
            lon0,
            lat0,
            cos_lat0,
            px_per_km,
            cx: width / 2.0,
            cy: height / 2.0,
            width,
            height,
        }
    }

    /// Scale, SVG units per km.
    pub fn px_per_km(&self) -> f64 {
        self.px_per_km
    }

    /// Pixel position of a point.
    pub fn px(&self, p: LonLat) -> (f64, f64) {
        let x_km = (p.lon - self.lon0).to_radians() * EARTH_RADIUS_KM * self.cos_lat0;
        let y_km = (p.lat - self.lat0).to_radians() * EARTH_RADIUS_KM;
        (
            self.cx + x_km * self.px_per_km,
            self.cy - y_km * self.px_per_km,
        )
    }

    /// Scale bar and north arrow, bottom-left and top-right.
    pub fn furniture(&self) -> String {
        let (km, label) = round_scale_km(self.width * 0.25 / self.px_per_km);
        let len = km * self.px_per_km;
        let (x, y) = (12.0, self.height - 14.0);
        let mut s = String::new();
        let _ = write!(
            s,
            r##"<g class="scale"><rect x="{x0}" y="{y0}" width="{w}" height="22" fill="#fff" fill-opacity="0.8"/><path d="M{x} {yt}V{y}H{x2}V{yt}" fill="none" stroke="#000" stroke-width="1.5"/><path d="M{xm} {y}V{ym}" stroke="#000"/><text x="{x2t}" y="{ty}" font-size="11">{label}</text></g>"##,
            x0 = f1(x - 6.0),
            y0 = f1(y - 14.0),
            w = f1(len + 60.0),
            yt = f1(y - 6.0),
            y = f1(y),
            x = f1(x),
            x2 = f1(x + len),
            xm = f1(x + len / 2.0),
            ym = f1(y - 3.0),
            x2t = f1(x + len + 5.0),
            ty = f1(y),
        );
        let (nx, ny) = (self.width - 22.0, 14.0);
        let _ = write!(
            s,
            r##"<g class="north"><path d="M{nx} {ny}L{l} {b}L{nx} {m}L{r} {b}Z" fill="#000"/><text x="{nx}" y="{t}" font-size="11" text-anchor="middle" font-weight="bold">N</text></g>"##,
            nx = f1(nx),
            ny = f1(ny),
            l = f1(nx - 7.0),
            r = f1(nx + 7.0),
            b = f1(ny + 22.0),
            m = f1(ny + 16.0),
            t = f1(ny + 35.0),
        );
        s
    }
}

/// The largest 1-2-5 × 10ⁿ distance not above `max_km`, and its label (`500 m`, `2 km`).
pub(crate) fn round_scale_km(max_km: f64) -> (f64, String) {
    let max_km = if max_km.is_finite() && max_km > 0.0 {
        max_km
    } else {
        1.0
    };
    let exp = max_km.log10().floor();
    let base = 10f64.powf(exp);
    let step = [5.0, 2.0, 1.0]
        .into_iter()
        .find(|m| m * base <= max_km * (1.0 + 1e-9))
        .unwrap_or(1.0);
    let km = step * base;
    let label = if km < 1.0 {
        format!("{} m", (km * 1000.0).round())
    } else {
        format!("{} km", km.round())
    };
    (km, label)
}

/// One decimal, for SVG coordinates.
pub(crate) fn f1(x: f64) -> String {
    super::fixed(x, 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_bar_picks_round_values() {
        assert_eq!(round_scale_km(7.3), (5.0, "5 km".to_string()));
        assert_eq!(round_scale_km(2.5), (2.0, "2 km".to_string()));
        assert_eq!(round_scale_km(19.9).1, "10 km");
        assert_eq!(round_scale_km(0.3).1, "200 m");
        assert_eq!(round_scale_km(f64::NAN).1, "1 km");
    }

    #[test]
    fn projection_keeps_north_up_and_distances_true() {
        let a = LonLat {
            lon: 80.0,
            lat: 27.0,
        };
        let b = LonLat {
            lon: 80.0,
            lat: 26.9,
        };
        let c = LonLat {
            lon: 80.1,
            lat: 26.9,
        };
        let f = Frame::fit(&[a, b, c], 400.0, 400.0, 20.0, 1.0);
        let (pa, pb, pc) = (f.px(a), f.px(b), f.px(c));
        assert!(pa.1 < pb.1, "north is up");
        assert!(pc.0 > pb.0, "east is right");
        // 0.1° of latitude ≈ 11.1 km; 0.1° of longitude at 26.95° ≈ 9.91 km.
        let ns = (pb.1 - pa.1) / f.px_per_km;
        let ew = (pc.0 - pb.0) / f.px_per_km;
        assert!((ns - 11.12).abs() < 0.05, "{ns}");
        assert!((ew - 9.91).abs() < 0.05, "{ew}");
        for p in [pa, pb, pc] {
            assert!(
                p.0 >= 19.9 && p.0 <= 380.1 && p.1 >= 19.9 && p.1 <= 380.1,
                "{p:?}"
            );
        }
    }

    #[test]
    fn one_point_still_gets_a_finite_frame() {
        let a = LonLat {
            lon: 10.0,
            lat: 50.0,
        };
        let f = Frame::fit(&[a], 300.0, 200.0, 10.0, 2.0);
        let p = f.px(a);
        assert!(p.0.is_finite() && p.1.is_finite() && f.px_per_km.is_finite());
        assert!(f.furniture().contains(" km<") || f.furniture().contains(" m<"));
    }
}
