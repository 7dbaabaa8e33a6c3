//! Pest pressure and site priority from scouting, through an R*-tree.
//!
//! Each scouting point adds to the pressure of every site within `policy.pressure_radius_km`
//! (geodesic, WGS 84), weighted by a Gaussian kernel of the distance, an exponential decay of
//! its age and a weight for its kind. Priority scales pressure by what a release there is worth
//! (management, flush) and, for dooryard requests, adds a small tie-breaker for waiting time.
//! Formulas, units and defaults: `docs/model.md`.
//!
//! ## Why the index works in Earth-centred coordinates
//!
//! The tree holds each point as Earth-centred, Earth-fixed (ECEF) metres on the WGS 84
//! ellipsoid. The straight chord between two points on the surface is never longer than the
//! geodesic between them (a straight line is the shortest curve), so a ball of radius r (plus
//! 1 m for rounding) around a site's ECEF position contains every point whose geodesic
//! distance is ≤ r, at any latitude, across the antimeridian and at the poles. An
//! equirectangular plane needs a latitude-dependent pad and breaks at ±180°; this needs none.
//! The ball only narrows candidates: each one is then measured with
//! [`geodesy::distance_m`] and kept when that distance ≤ r.

use rayon::prelude::*;
use rstar::RTree;
use rstar::primitives::GeomWithData;
use thiserror::Error;

use crate::geodesy;
use crate::scenario::{Flush, LonLat, Management, Scenario, ScoutKind, ScoutPoint, SiteDetail};

/// WGS 84 semi-major axis, metres.
const WGS84_A_M: f64 = 6_378_137.0;
/// WGS 84 flattening.
const WGS84_F: f64 = 1.0 / 298.257_223_563;
/// Added to the query radius so that rounding in the ECEF conversion (nanometres at Earth
/// scale) can never drop a point that the exact geodesic test would keep, metres.
const QUERY_PAD_M: f64 = 1.0;

/// Weights and multipliers of the priority model. All dimensionless unless the name says
/// otherwise. `Default` gives the documented values (`docs/model.md`).
#[derive(Clone, Debug, PartialEq)]
pub struct PressureParams {
    /// Weight of one adult psyllid per tap sample (`tap_adults`). Default 1.0: the unit of
    /// pressure is "one adult per tap, fresh, on the spot".
    pub weight_tap_adults: f64,
    /// Weight of a fully infested flush sample (`flush_infested_pct` = 100). Default 1.0: a
    /// sample with every shoot carrying eggs or nymphs counts like one adult per tap (common
    /// practice: both sit at the usual action level of about one per sample).
    pub weight_flush_infested: f64,
    /// Weight of one greening-positive tree (`greening_positive`). Default 5.0: a confirmed
    /// infection nearby makes suppressing the vector far more urgent (common practice; programs
    /// treat around finds: a quarantine of 8 km radius and treatment within 250 m, program
    /// practice reported in trade press, 2023).
    pub weight_greening_positive: f64,
    /// Age at which a scouting observation counts half, days (> 0). Default 14: about one
    /// psyllid generation in warm weather, after which a count says little about the nymphs
    /// present now (common practice).
    pub age_half_life_days: f64,
    /// Priority of a site with no pressure in range, before multipliers (≥ 0). Default 0: an
    /// unscouted site is not known to need wasps, and gets `low-priority` unless it waited.
    pub base: f64,
    /// Management multiplier for conventional blocks. Default 1.0 (reference).
    pub conventional_multiplier: f64,
    /// Management multiplier for organic blocks. Default 1.5: no synthetic insecticide, so
    /// released wasps and their offspring survive and persist.
    pub organic_multiplier: f64,
    /// Management multiplier for abandoned blocks. Default 2.0: unsprayed refuges where the
    /// psyllid breeds unchecked and re-infests managed groves; releases there both survive and
    /// hit the source (release programs target unmanaged, abandoned and backyard citrus:
    /// Parra et al., ESA 2015 abstract).
    pub abandoned_multiplier: f64,
    /// Management multiplier for dooryard requests. Default 1.5: backyard hosts are unsprayed
    /// (only insecticide-free requests are eligible), like organic blocks.
    pub dooryard_multiplier: f64,
    /// Flush multiplier for `flush` = heavy. Default 1.0: most nymphs to parasitise.
    pub flush_heavy_multiplier: f64,
    /// Flush multiplier for `flush` = light, also used for dooryards (flush not reported).
    /// Default 0.6 (common practice).
    pub flush_light_multiplier: f64,
    /// Flush multiplier for `flush` = none, when `policy.require_flush` is off. Default 0.2:
    /// no flush means no nymphs now, only later ones (the psyllid lays eggs only on flush;
    /// common practice, from memory: a textbook fact of the pest's biology).
    pub flush_none_multiplier: f64,
    /// Priority added per whole week a request has waited since `received`. Default 0.02.
    pub wait_per_week: f64,
    /// Most priority waiting can add. Default 0.1 (reached after 5 weeks): it stays a
    /// tie-breaker next to the pressure of even one adult per tap at 2 km.
    pub wait_cap: f64,
}

impl Default for PressureParams {
    fn default() -> Self {
        PressureParams {
            weight_tap_adults: 1.0,
            weight_flush_infested: 1.0,
            weight_greening_positive: 5.0,
            age_half_life_days: 14.0,
            base: 0.0,
            conventional_multiplier: 1.0,
            organic_multiplier: 1.5,
            abandoned_multiplier: 2.0,
            dooryard_multiplier: 1.5,
            flush_heavy_multiplier: 1.0,
            flush_light_multiplier: 0.6,
            flush_none_multiplier: 0.2,
            wait_per_week: 0.02,
            wait_cap: 0.1,
        }
    }
}

/// A parameter set that cannot give finite, non-negative priorities.
#[derive(Debug, Error, PartialEq)]
pub enum PressureError {
    /// A weight, multiplier or the base is negative or not finite.
    #[error("pressure parameter `{name}` is {value}; it must be finite and 0 or more")]
    Negative {
        /// Field name in [`PressureParams`].
        name: &'static str,
        /// The value given.
        value: f64,
    },
    /// The age half-life is not a positive finite number of days.
    #[error("pressure parameter `age_half_life_days` is {0}; it must be a positive number of days")]
    HalfLife(f64),
}

impl PressureParams {
    /// Checks that every weight and multiplier is finite and ≥ 0 and the half-life is > 0.
    pub fn check(&self) -> Result<(), PressureError> {
        let fields = [
            ("weight_tap_adults", self.weight_tap_adults),
            ("weight_flush_infested", self.weight_flush_infested),
            ("weight_greening_positive", self.weight_greening_positive),
            ("base", self.base),
            ("conventional_multiplier", self.conventional_multiplier),
            ("organic_multiplier", self.organic_multiplier),
            ("abandoned_multiplier", self.abandoned_multiplier),
            ("dooryard_multiplier", self.dooryard_multiplier),
            ("flush_heavy_multiplier", self.flush_heavy_multiplier),
            ("flush_light_multiplier", self.flush_light_multiplier),
            ("flush_none_multiplier", self.flush_none_multiplier),
            ("wait_per_week", self.wait_per_week),
            ("wait_cap", self.wait_cap),
        ];
        for (name, value) in fields {
            if !(value.is_finite() && value >= 0.0) {
                return Err(PressureError::Negative { name, value });
            }
        }
        if !(self.age_half_life_days.is_finite() && self.age_half_life_days > 0.0) {
            return Err(PressureError::HalfLife(self.age_half_life_days));
        }
        Ok(())
    }
}

/// Pressure and priority of one site. Both dimensionless, finite and ≥ 0.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SitePriority {
    /// Kernel- and age-weighted scouting pressure in range (units of "one fresh adult per tap
    /// on the spot").
    pub pressure: f64,
    /// The weight of one live wasp at this site in the allocation objective.
    pub priority: f64,
}

/// Pressure and priority of every site, indexed by [`SiteIdx`](crate::scenario::SiteIdx).
///
/// Parameters should pass [`PressureParams::check`]; whatever they are, results are clamped
/// to finite values ≥ 0 so that the LP never sees NaN.
///
/// Complexity: O(P log P) to bulk-load the R*-tree over P scouting points, then
/// O(S (log P + k)) for S sites with k candidate points each (k geodesic distances per site).
///
/// ```
/// use broodcast::pressure::{PressureParams, site_priority};
/// let scenario = broodcast::scenario::fixture::tiny();
/// let pr = site_priority(&scenario, &PressureParams::default());
/// assert_eq!(pr.len(), scenario.sites.len());
/// // B1 has a tap sample of 2 adults on the spot, observed the day before the week.
/// let b1 = scenario.site_idx("B1").unwrap();
/// assert!(pr[b1].pressure > 1.9 && pr[b1].priority > 0.0);
/// ```
pub fn site_priority(scenario: &Scenario, params: &PressureParams) -> Vec<SitePriority> {
    let pressures = indexed_pressure(scenario, params);
    scenario
        .sites
        .iter()
        .zip(pressures)
        .map(|(site, pressure)| {
            let pressure = clamp(pressure);
            let (management, flush, wait) = match &site.detail {
                SiteDetail::Block(b) => (
                    match b.management {
                        Management::Conventional => params.conventional_multiplier,
                        Management::Organic => params.organic_multiplier,
                        Management::Abandoned => params.abandoned_multiplier,
                    },
                    match b.flush {
                        Flush::Heavy => params.flush_heavy_multiplier,
                        Flush::Light => params.flush_light_multiplier,
                        Flush::None => params.flush_none_multiplier,
                    },
                    0.0,
                ),
                SiteDetail::Dooryard(r) => {
                    let weeks = (scenario.week_start - r.received).num_days().max(0) / 7;
                    (
                        params.dooryard_multiplier,
                        params.flush_light_multiplier,
                        (weeks as f64 * params.wait_per_week).min(params.wait_cap),
                    )
                }
            };
            let priority = clamp((params.base + pressure) * management * flush + wait);
            SitePriority { pressure, priority }
        })
        .collect()
}

/// Pressure of every site by scanning all P scouting points for each of S sites: O(S · P)
/// geodesic distances. The reference that [`site_priority`]'s index is tested against; same
/// terms, summed in the same (input) order.
pub fn pressure_brute_force(scenario: &Scenario, params: &PressureParams) -> Vec<f64> {
    let radius_m = scenario.policy.pressure_radius_km * 1000.0;
    let terms: Vec<f64> = scenario
        .scouting
        .iter()
        .map(|p| point_weight(scenario, params, p))
        .collect();
    scenario
        .sites
        .iter()
        .map(|site| {
            let mut sum = 0.0;
            for (p, w) in scenario.scouting.iter().zip(&terms) {
                let d = geodesy::distance_m(site.location, p.location);
                if d <= radius_m {
                    sum += w * kernel(scenario, d);
                }
            }
            sum
        })
        .collect()
}

/// Per-site pressure through the R*-tree (see the module doc for why the ball query is exact).
fn indexed_pressure(scenario: &Scenario, params: &PressureParams) -> Vec<f64> {
    let terms: Vec<f64> = scenario
        .scouting
        .iter()
        .map(|p| point_weight(scenario, params, p))
        .collect();
    sum_in_range(scenario, &terms, |d| kernel(scenario, d))
}

/// The scouting count of every site, indexed by [`SiteIdx`](crate::scenario::SiteIdx): the
/// adult psyllids of every `tap_adults` observation within `policy.pressure_radius_km`
/// (geodesic) of the site, summed as written — no kernel, no age decay, no other kind. The
/// figure an office ranks blocks by when it plans by hand ([`crate::baseline`]). Same R*-tree
/// query as [`site_priority`]: O(P log P + S (log P + k)).
pub fn tap_adults_in_range(scenario: &Scenario) -> Vec<f64> {
    let terms: Vec<f64> = scenario
        .scouting
        .iter()
        .map(|p| match p.kind {
            ScoutKind::TapAdults => clamp(p.value),
            _ => 0.0,
        })
        .collect();
    sum_in_range(scenario, &terms, |_| 1.0)
}

/// Σ terms[i] · weight(d_i) over the scouting points i within `policy.pressure_radius_km` of
/// each site (d_i geodesic metres), in input order, through the R*-tree.
fn sum_in_range(
    scenario: &Scenario,
    terms: &[f64],
    weight: impl Fn(f64) -> f64 + Sync,
) -> Vec<f64> {
    let radius_m = scenario.policy.pressure_radius_km * 1000.0;
    let tree = RTree::bulk_load(
        scenario
            .scouting
            .iter()
            .enumerate()
            .map(|(i, p)| GeomWithData::new(ecef_m(p.location), i))
            .collect(),
    );
    let query_2 = (radius_m + QUERY_PAD_M).powi(2);
    // Sites are independent: one query each, in parallel, collected in site order.
    scenario
        .sites
        .par_iter()
        .map_init(Vec::new, |hits: &mut Vec<usize>, site| {
            hits.clear();
            hits.extend(
                tree.locate_within_distance(ecef_m(site.location), query_2)
                    .map(|g| g.data),
            );
            // Input order, as the brute force sums: the result does not depend on tree layout.
            hits.sort_unstable();
            let mut sum = 0.0;
            for &i in hits.iter() {
                let d = geodesy::distance_m(site.location, scenario.scouting[i].location);
                if d <= radius_m {
                    sum += terms[i] * weight(d);
                }
            }
            sum
        })
        .collect()
}

/// Kind weight × normalised value × age decay of one observation (distance aside).
fn point_weight(scenario: &Scenario, params: &PressureParams, p: &ScoutPoint) -> f64 {
    let value = match p.kind {
        ScoutKind::TapAdults => params.weight_tap_adults * p.value,
        ScoutKind::FlushInfestedPct => params.weight_flush_infested * p.value / 100.0,
        ScoutKind::GreeningPositive => params.weight_greening_positive * p.value,
    };
    // Observations dated inside the week count as fresh: the plan is made at the week start.
    let age_days = (scenario.week_start - p.date).num_days().max(0) as f64;
    let decay = 0.5_f64.powf(age_days / params.age_half_life_days);
    clamp(value * decay)
}

/// Gaussian kernel exp(−d² / (2 h²)), d and h in metres.
fn kernel(scenario: &Scenario, d_m: f64) -> f64 {
    let h_m = scenario.policy.pressure_bandwidth_km * 1000.0;
    (-(d_m * d_m) / (2.0 * h_m * h_m)).exp()
}

fn clamp(x: f64) -> f64 {
    if x.is_nan() {
        0.0
    } else {
        x.clamp(0.0, f64::MAX)
    }
}

/// WGS 84 geodetic position (height 0) to Earth-centred, Earth-fixed coordinates, metres.
fn ecef_m(p: LonLat) -> [f64; 3] {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (sin_lat, cos_lat) = p.lat.to_radians().sin_cos();
    let (sin_lon, cos_lon) = p.lon.to_radians().sin_cos();
    let n = WGS84_A_M / (1.0 - e2 * sin_lat * sin_lat).sqrt();
    [
        n * cos_lat * cos_lon,
        n * cos_lat * sin_lon,
        n * (1.0 - e2) * sin_lat,
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::SiteIdx;
    use crate::scenario::fixture::tiny;

    fn idx(s: &Scenario, id: &str) -> SiteIdx {
        s.site_idx(id).expect("fixture site")
    }

    #[test]
    fn defaults_pass_check_and_bad_values_fail() {
        assert_eq!(PressureParams::default().check(), Ok(()));
        let p = PressureParams {
            organic_multiplier: -1.0,
            ..PressureParams::default()
        };
        assert!(matches!(
            p.check(),
            Err(PressureError::Negative {
                name: "organic_multiplier",
                ..
            })
        ));
        let p = PressureParams {
            age_half_life_days: 0.0,
            ..PressureParams::default()
        };
        assert_eq!(p.check(), Err(PressureError::HalfLife(0.0)));
    }

    #[test]
    fn one_per_site_finite_and_non_negative() {
        let s = tiny();
        let pr = site_priority(&s, &PressureParams::default());
        assert_eq!(pr.len(), s.sites.len());
        for p in &pr {
            assert!(p.pressure.is_finite() && p.pressure >= 0.0);
            assert!(p.priority.is_finite() && p.priority >= 0.0);
        }
    }

    #[test]
    fn point_on_the_site_gives_its_weighted_value() {
        // B1 has a tap sample of 2 adults on the spot, 1 day old; other points are ≥ 4 km
        // away (S2 at 80.05,26.95 is ≈ 4.5 km) and add their kernel terms.
        let s = tiny();
        let params = PressureParams::default();
        let pr = site_priority(&s, &params);
        let b1 = idx(&s, "B1");
        let own = 2.0 * 0.5_f64.powf(1.0 / 14.0);
        let d2 = geodesy::distance_m(s.sites[b1].location, s.scouting[1].location);
        let s2 = 0.40 * 0.5_f64.powf(2.0 / 14.0) * (-(d2 * d2) / (2.0 * 2000.0_f64.powi(2))).exp();
        let mut expected = own;
        if d2 <= 5000.0 {
            expected += s2;
        }
        // No other fixture point lies within 5 km of B1 (nearest next: R1's area has none).
        assert!((pr[b1].pressure - expected).abs() < 1e-12, "{pr:?}");
        // Conventional × heavy flush = 1.
        assert!((pr[b1].priority - expected).abs() < 1e-12);
    }

    #[test]
    fn closer_hot_spot_raises_priority() {
        let mut s = tiny();
        s.scouting.clear();
        let params = PressureParams::default();
        let b1 = idx(&s, "B1");
        let at = |dlat: f64| ScoutPoint {
            id: "X".into(),
            date: s.week_start,
            location: LonLat {
                lon: 80.02,
                lat: 26.98 + dlat,
            },
            kind: ScoutKind::TapAdults,
            value: 3.0,
        };
        let mut far = s.clone();
        far.scouting.push(at(0.03));
        let mut near = s.clone();
        near.scouting.push(at(0.01));
        let pf = site_priority(&far, &params)[b1].priority;
        let pn = site_priority(&near, &params)[b1].priority;
        assert!(pn > pf && pf > 0.0, "near {pn} far {pf}");
    }

    #[test]
    fn older_scouting_counts_less() {
        let s = tiny();
        let params = PressureParams::default();
        let b3 = idx(&s, "B3");
        let base = site_priority(&s, &params)[b3];
        let mut older = s.clone();
        for p in &mut older.scouting {
            p.date = p.date - chrono::Days::new(10);
        }
        let aged = site_priority(&older, &params)[b3];
        assert!(aged.pressure < base.pressure && aged.priority < base.priority);
        // One half-life older halves it exactly.
        let mut half = s.clone();
        for p in &mut half.scouting {
            p.date = p.date - chrono::Days::new(14);
        }
        let h = site_priority(&half, &params)[b3];
        assert!((h.pressure - base.pressure / 2.0).abs() < 1e-12);
    }

    #[test]
    fn management_and_flush_order() {
        let mut s = tiny();
        // One greening find shared by B1 (conventional, heavy) and clones with other settings.
        s.scouting.truncate(1);
        let template = s.sites[idx(&s, "B1")].clone();
        let mut variants = Vec::new();
        for (m, f) in [
            (Management::Conventional, Flush::Heavy),
            (Management::Organic, Flush::Heavy),
            (Management::Abandoned, Flush::Heavy),
            (Management::Conventional, Flush::Light),
            (Management::Conventional, Flush::None),
        ] {
            let mut site = template.clone();
            if let SiteDetail::Block(b) = &mut site.detail {
                b.management = m;
                b.flush = f;
            }
            variants.push(site);
        }
        s.sites = variants;
        let pr = site_priority(&s, &PressureParams::default());
        assert!(pr[2].priority > pr[1].priority && pr[1].priority > pr[0].priority);
        assert!(pr[0].priority > pr[3].priority && pr[3].priority > pr[4].priority);
        assert!(pr.iter().all(|p| p.pressure == pr[0].pressure));
    }

    #[test]
    fn waiting_grows_by_week_and_is_capped() {
        let mut s = tiny();
        s.scouting.clear();
        let r1 = idx(&s, "R1");
        let params = PressureParams::default();
        let mut at = |days: u64| {
            if let SiteDetail::Dooryard(r) = &mut s.sites[r1].detail {
                r.received = s.week_start - chrono::Days::new(days);
            }
            site_priority(&s, &params)[r1].priority
        };
        assert_eq!(at(0), 0.0);
        assert_eq!(at(6), 0.0);
        assert!((at(7) - 0.02).abs() < 1e-15);
        assert!((at(20) - 0.04).abs() < 1e-15);
        assert!((at(400) - 0.1).abs() < 1e-15);
    }

    #[test]
    fn brute_force_matches_on_fixture() {
        let s = tiny();
        let params = PressureParams::default();
        let a = site_priority(&s, &params);
        let b = pressure_brute_force(&s, &params);
        for (x, y) in a.iter().zip(&b) {
            assert_eq!(x.pressure, *y);
        }
    }

    #[test]
    fn ecef_chord_never_exceeds_geodesic() {
        let pts = [
            (0.0, 0.0, 0.0, 1.0),
            (179.99, 45.0, -179.99, 45.0),
            (10.0, 89.99, -170.0, 89.99),
            (80.0, 26.0, 80.05, 26.04),
        ];
        for (lo1, la1, lo2, la2) in pts {
            let a = LonLat { lon: lo1, lat: la1 };
            let b = LonLat { lon: lo2, lat: la2 };
            let (pa, pb) = (ecef_m(a), ecef_m(b));
            let chord =
                ((pa[0] - pb[0]).powi(2) + (pa[1] - pb[1]).powi(2) + (pa[2] - pb[2]).powi(2))
                    .sqrt();
            let geo = geodesy::distance_m(a, b);
            assert!(chord <= geo + 1e-6, "{chord} > {geo}");
            assert!(chord > 0.99 * geo);
        }
    }
}
