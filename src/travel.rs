//! The travel model: drive minutes between facilities and sites.
//!
//! Minutes = geodesic distance × `circuity` ÷ `speed_kmh`; or, when `travel.road_network`
//! names an OpenStreetMap extract, the shortest drive along its roads ([`crate::roads`]);
//! unless the user travel-time matrix (`travel.matrix`) has both ends, in which case its value
//! is used as given.

use std::collections::HashMap;
use std::sync::Arc;

use crate::geodesy;
use crate::roads::RoadModel;
use crate::scenario::{FacilityIdx, LonLat, Scenario, SiteIdx};

/// A place a vehicle drives between.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Place {
    /// A facility (depot).
    Facility(FacilityIdx),
    /// A site's stop location.
    Site(SiteIdx),
}

/// Drive times between places, minutes.
pub trait TravelTimes {
    /// Drive minutes from `from` to `to` (≥ 0; 0 from a place to itself; infinite when no
    /// road leads there).
    fn minutes(&self, from: Place, to: Place) -> f64;

    /// Drive minutes `a` → `b` and `b` → `a`. Models where both are one computation (a
    /// symmetric estimate) override it to compute it once.
    fn round_trip(&self, a: Place, b: Place) -> (f64, f64) {
        (self.minutes(a, b), self.minutes(b, a))
    }

    /// The driven path from `from` to `to` as longitude/latitude points (degrees, WGS 84),
    /// for maps and navigation files. Empty when the model has no geometry; otherwise it
    /// starts at `from` and ends at `to`. The geodesic model gives the straight segment.
    fn leg_path(&self, _from: Place, _to: Place) -> Vec<LonLat> {
        Vec::new()
    }
}

/// The scenario's travel model.
#[derive(Clone, Debug)]
pub struct TravelModel {
    facilities: Vec<LonLat>,
    sites: Vec<LonLat>,
    /// Road km per geodesic km.
    circuity: f64,
    /// km/h.
    speed_kmh: f64,
    /// Matrix row/column of each facility and site, when the matrix lists it.
    facility_slot: Vec<Option<usize>>,
    site_slot: Vec<Option<usize>>,
    matrix: Vec<Vec<f64>>,
    /// Drive times along the extract's roads, when the scenario names one.
    roads: Option<Arc<RoadModel>>,
}

impl TravelModel {
    /// Builds the model for `scenario`. With a road network this snaps every facility and
    /// site and searches from and to every facility (see [`RoadModel::new`]).
    pub fn new(scenario: &Scenario) -> Self {
        let (slot_of, matrix) = match &scenario.travel.matrix {
            Some(m) => (
                m.ids
                    .iter()
                    .enumerate()
                    .map(|(i, id)| (id.as_str(), i))
                    .collect::<HashMap<_, _>>(),
                m.minutes.clone(),
            ),
            None => (HashMap::new(), Vec::new()),
        };
        TravelModel {
            facilities: scenario.facilities.iter().map(|f| f.location).collect(),
            sites: scenario.sites.iter().map(|s| s.location).collect(),
            circuity: scenario.travel.circuity,
            speed_kmh: scenario.travel.speed_kmh,
            facility_slot: scenario
                .facilities
                .iter()
                .map(|f| slot_of.get(f.id.as_str()).copied())
                .collect(),
            site_slot: scenario
                .sites
                .iter()
                .map(|s| slot_of.get(s.id.as_str()).copied())
                .collect(),
            matrix,
            roads: scenario.travel.road_network.as_ref().map(|net| {
                Arc::new(RoadModel::new(
                    Arc::clone(&net.graph),
                    &scenario
                        .facilities
                        .iter()
                        .map(|f| f.location)
                        .collect::<Vec<_>>(),
                    &scenario
                        .sites
                        .iter()
                        .map(|s| s.location)
                        .collect::<Vec<_>>(),
                ))
            }),
        }
    }

    /// The road model, when the scenario names a road network.
    pub fn roads(&self) -> Option<&RoadModel> {
        self.roads.as_deref()
    }

    fn location(&self, p: Place) -> LonLat {
        match p {
            Place::Facility(i) => self.facilities[i],
            Place::Site(i) => self.sites[i],
        }
    }

    fn slot(&self, p: Place) -> Option<usize> {
        match p {
            Place::Facility(i) => self.facility_slot[i],
            Place::Site(i) => self.site_slot[i],
        }
    }

    /// Road distance estimate, km (geodesic × circuity), whatever the matrix says.
    pub fn road_km(&self, from: Place, to: Place) -> f64 {
        geodesy::distance_m(self.location(from), self.location(to)) / 1000.0 * self.circuity
    }
}

impl TravelTimes for TravelModel {
    fn minutes(&self, from: Place, to: Place) -> f64 {
        if from == to {
            return 0.0;
        }
        if let (Some(i), Some(j)) = (self.slot(from), self.slot(to)) {
            return self.matrix[i][j];
        }
        if let Some(r) = &self.roads {
            return r.minutes(from, to);
        }
        self.road_km(from, to) / self.speed_kmh * 60.0
    }

    fn round_trip(&self, a: Place, b: Place) -> (f64, f64) {
        let matrix = self.slot(a).is_some() && self.slot(b).is_some();
        if a == b || matrix || self.roads.is_some() {
            return (self.minutes(a, b), self.minutes(b, a));
        }
        // The geodesic estimate is symmetric: one inverse problem for both directions.
        let m = self.road_km(a, b) / self.speed_kmh * 60.0;
        (m, m)
    }

    fn leg_path(&self, from: Place, to: Place) -> Vec<LonLat> {
        let (a, b) = (self.location(from), self.location(to));
        if let Some(r) = &self.roads {
            let p = r.path(from, to, a, b);
            if !p.is_empty() {
                return p;
            }
        }
        vec![a, b]
    }
}
