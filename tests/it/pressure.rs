//! The R*-tree pressure against a scan of every scouting point, and monotonicity of priority.

use broodcast::pressure::{PressureParams, pressure_brute_force, site_priority};
use broodcast::scenario::fixture::tiny;
use broodcast::scenario::{LonLat, Scenario, ScoutKind, ScoutPoint};
use geo::{Destination, Geodesic, Point};
use proptest::prelude::*;

/// Geodesic destination on WGS 84 (geo's Karney implementation), degrees and metres.
fn dest(from: LonLat, bearing_deg: f64, distance_m: f64) -> LonLat {
    let p = Geodesic.destination(Point::new(from.lon, from.lat), bearing_deg, distance_m);
    LonLat {
        lon: p.x(),
        lat: p.y(),
    }
}

fn kind_of(k: u8) -> ScoutKind {
    match k % 3 {
        0 => ScoutKind::TapAdults,
        1 => ScoutKind::FlushInfestedPct,
        _ => ScoutKind::GreeningPositive,
    }
}

/// A scenario with `sites` scattered near `centre` and scouting points at given bearings and
/// distances (as multiples of the radius) from the first site.
fn scenario(
    centre: LonLat,
    radius_km: f64,
    bandwidth_km: f64,
    site_offsets: &[(f64, f64)],
    points: &[(f64, f64, u8, f64, u8)],
) -> Scenario {
    let mut s = tiny();
    s.policy.pressure_radius_km = radius_km;
    s.policy.pressure_bandwidth_km = bandwidth_km;
    let template = s.sites[0].clone();
    let mut sites = vec![template.clone()];
    sites[0].location = centre;
    for &(bearing, dist_r) in site_offsets {
        let mut site = template.clone();
        site.location = dest(centre, bearing, dist_r * radius_km * 1000.0);
        sites.push(site);
    }
    s.sites = sites;
    s.scouting = points
        .iter()
        .enumerate()
        .map(|(i, &(bearing, dist_r, kind, value, age))| ScoutPoint {
            id: format!("P{i}"),
            date: s.week_start - chrono::Days::new(u64::from(age)),
            location: dest(centre, bearing, dist_r * radius_km * 1000.0),
            kind: kind_of(kind),
            value,
        })
        .collect();
    s
}

/// Distance as a multiple of the radius: half the time within 1e-9..1e-3 of the boundary
/// (either side), otherwise anywhere in 0..2.5 radii.
fn dist_r() -> impl Strategy<Value = f64> {
    prop_oneof![
        0.0..2.5f64,
        (1e-9..1e-3f64, any::<bool>()).prop_map(|(e, out)| if out { 1.0 + e } else { 1.0 - e }),
        Just(1.0),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn indexed_pressure_equals_brute_force(
        lat in -89.0..89.0f64,
        lon in -180.0..180.0f64,
        radius_km in 0.2..12.0f64,
        bandwidth_km in 0.1..6.0f64,
        site_offsets in prop::collection::vec((0.0..360.0f64, 0.0..2.0f64), 0..6),
        points in prop::collection::vec(
            (0.0..360.0f64, dist_r(), any::<u8>(), 0.0..50.0f64, 0u8..60),
            0..80,
        ),
    ) {
        let s = scenario(LonLat { lon, lat }, radius_km, bandwidth_km, &site_offsets, &points);
        let params = PressureParams::default();
        let fast = site_priority(&s, &params);
        let slow = pressure_brute_force(&s, &params);
        prop_assert_eq!(fast.len(), slow.len());
        for (f, b) in fast.iter().zip(&slow) {
            prop_assert!(
                (f.pressure - b).abs() <= 1e-12 * b.abs().max(f64::MIN_POSITIVE),
                "indexed {} brute {}", f.pressure, b
            );
            prop_assert!(f.priority.is_finite() && f.priority >= 0.0);
        }
    }

    #[test]
    fn closer_hot_spot_never_lowers_priority(
        lat in -60.0..60.0f64,
        bearing in 0.0..360.0f64,
        near in 0.0..1.0f64,
        extra in 0.0..1.0f64,
        value in 0.1..20.0f64,
    ) {
        let centre = LonLat { lon: 10.0, lat };
        let far = (near + extra).min(1.0);
        let a = scenario(centre, 5.0, 2.0, &[], &[(bearing, near, 0, value, 1)]);
        let b = scenario(centre, 5.0, 2.0, &[], &[(bearing, far, 0, value, 1)]);
        let params = PressureParams::default();
        let pa = site_priority(&a, &params)[0].priority;
        let pb = site_priority(&b, &params)[0].priority;
        prop_assert!(pa >= pb, "near {} far {}", pa, pb);
        prop_assert!(pa > 0.0);
    }

    #[test]
    fn older_scouting_never_counts_more(
        dist in 0.0..0.99f64,
        age in 0u8..100,
        older_by in 1u8..100,
        kind in any::<u8>(),
    ) {
        let centre = LonLat { lon: 80.0, lat: 27.0 };
        let young = scenario(centre, 5.0, 2.0, &[], &[(45.0, dist, kind, 3.0, age)]);
        let old = scenario(centre, 5.0, 2.0, &[], &[(45.0, dist, kind, 3.0, age.saturating_add(older_by))]);
        let params = PressureParams::default();
        let py = site_priority(&young, &params)[0];
        let po = site_priority(&old, &params)[0];
        prop_assert!(po.pressure < py.pressure);
        prop_assert!(po.priority < py.priority);
    }
}

#[test]
fn point_just_past_the_radius_is_excluded_and_just_inside_included() {
    // 5 km radius; points 1 mm either side of it, due east at 27° N.
    let centre = LonLat {
        lon: 80.0,
        lat: 27.0,
    };
    let inside = scenario(centre, 5.0, 2.0, &[], &[(90.0, 1.0 - 2e-7, 0, 1.0, 0)]);
    let outside = scenario(centre, 5.0, 2.0, &[], &[(90.0, 1.0 + 2e-7, 0, 1.0, 0)]);
    let params = PressureParams::default();
    let pin = site_priority(&inside, &params)[0].pressure;
    let pout = site_priority(&outside, &params)[0].pressure;
    // Kernel at d = r = 2.5 h: exp(−2.5²/2).
    assert!((pin - (-3.125f64).exp()).abs() < 1e-6, "{pin}");
    assert_eq!(pout, 0.0);
}

#[test]
fn across_the_antimeridian_and_near_the_pole() {
    // Equirectangular planes break here; the Earth-centred index must not.
    for centre in [
        LonLat {
            lon: 179.999,
            lat: -17.0,
        },
        LonLat {
            lon: 0.0,
            lat: 89.99,
        },
    ] {
        let pts: Vec<_> = (0..36)
            .map(|i| (f64::from(i) * 10.0, 0.9, 0u8, 1.0, 0u8))
            .collect();
        let s = scenario(centre, 3.0, 1.0, &[], &pts);
        let params = PressureParams::default();
        let fast = site_priority(&s, &params)[0].pressure;
        let slow = pressure_brute_force(&s, &params)[0];
        assert!(slow > 0.0);
        // All 36 points at 0.9 r = 2.7 km, kernel exp(−2.7²/2).
        assert!((slow - 36.0 * (-3.645f64).exp()).abs() < 1e-6, "{slow}");
        assert_eq!(fast, slow);
    }
}

/// `cargo test --release --test pressure timing -- --ignored --nocapture`
#[test]
#[ignore = "timing report, run by hand in release"]
fn timing_35k_sites() {
    // Invented grid of 35,000 sites over about 110 × 110 km, scouting points on a coarser
    // offset grid over the same square; fixed, so runs compare.
    let mut s = tiny();
    let template = s.sites[0].clone();
    s.sites = (0..35_000u32)
        .map(|i| {
            let mut site = template.clone();
            site.location = LonLat {
                lon: 80.5 + 0.006 * f64::from(i % 187),
                lat: 26.5 + 0.006 * f64::from(i / 187),
            };
            site
        })
        .collect();
    let week_start = s.week_start;
    for (n_points, side) in [(500u32, 23u32), (5_000, 71)] {
        let step = 1.12 / f64::from(side);
        s.scouting = (0..n_points)
            .map(|i| ScoutPoint {
                id: format!("P{i}"),
                date: week_start - chrono::Days::new(u64::from(i % 30)),
                location: LonLat {
                    lon: 80.5 + step * f64::from(i % side),
                    lat: 26.5 + step * f64::from(i / side),
                },
                kind: kind_of((i % 3) as u8),
                value: f64::from(i % 7),
            })
            .collect();
        let params = PressureParams::default();
        let t = std::time::Instant::now();
        let fast = site_priority(&s, &params);
        let t_fast = t.elapsed().as_secs_f64();
        let mut sub = s.clone();
        sub.sites.truncate(1_000);
        let t = std::time::Instant::now();
        let slow = pressure_brute_force(&sub, &params);
        let t_slow = t.elapsed().as_secs_f64() * 35.0;
        for (f, b) in fast.iter().zip(&slow) {
            assert!((f.pressure - b).abs() <= 1e-12 * b.abs().max(f64::MIN_POSITIVE));
        }
        let in_range = fast.iter().filter(|p| p.pressure > 0.0).count();
        eprintln!(
            "35000 sites, {n_points} points, radius {} km: indexed {t_fast:.3} s, brute force \
             {t_slow:.1} s (extrapolated from 1000 sites); {in_range} sites with pressure",
            s.policy.pressure_radius_km
        );
    }
}
