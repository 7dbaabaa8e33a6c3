//! The scenario: typed, validated inputs for one planning week.
//!
//! Only [`load`] reads files. Everything after it takes a [`Scenario`], whose values have
//! already passed every rule in `docs/formats.md`: ids are unique and resolve, coordinates are
//! finite and in range, dates and times parse, counts are non-negative.
//!
//! Sites (grove blocks and dooryard requests) share one index space: `Scenario::sites`, blocks
//! first in file order, then requests in file order. Later stages refer to a site by its
//! position in that list ([`SiteIdx`]) and to a facility by its position in
//! `Scenario::facilities` ([`FacilityIdx`]).

#[doc(hidden)]
pub mod fixture;
mod load;
mod problems;

use std::fmt;

use chrono::{NaiveDate, NaiveDateTime, NaiveTime, Weekday};
use geo::MultiPolygon;
use serde::{Deserialize, Serialize};

pub use load::{
    CsvLines, SCENARIO_KEYS, Source, SwallowedRow, limits, load, load_dir, load_embedded_demo,
    load_files, parse_travel_matrix, show_value, swallowed_row,
};
pub(crate) use load::{Table as CsvTable, read_csv};
pub use problems::{InputError, Location, MAX_LISTED, Problem, Warning};

macro_rules! id_type {
    ($(#[$doc:meta])* $name:ident) => {
        $(#[$doc])*
        #[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
        #[serde(transparent)]
        pub struct $name(pub String);

        impl $name {
            /// The id as written in the input.
            pub fn as_str(&self) -> &str {
                &self.0
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(&self.0)
            }
        }
    };
}

id_type!(
    /// A facility (rearing site and depot) id from `facilities.csv`.
    FacilityId
);
id_type!(
    /// A site id: a block id from `blocks.geojson` or a request id from `requests.csv`.
    SiteId
);
id_type!(
    /// A vehicle id from `fleet.csv`.
    VehicleId
);

/// Position of a facility in [`Scenario::facilities`].
pub type FacilityIdx = usize;
/// Position of a site in [`Scenario::sites`].
pub type SiteIdx = usize;

/// A WGS 84 position, longitude first as in GeoJSON (degrees).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LonLat {
    /// Longitude, degrees east, in [-180, 180].
    pub lon: f64,
    /// Latitude, degrees north, in [-90, 90].
    pub lat: f64,
}

/// One planning week and everything needed to plan it.
#[derive(Clone, Debug)]
pub struct Scenario {
    /// `scenario.json` `name`.
    pub name: String,
    /// Monday that starts the week (`week_start`). The week is this day and the six after it.
    pub week_start: NaiveDate,
    /// The biological-control agent and its release sizes.
    pub agent: Agent,
    /// Allocation policy.
    pub policy: Policy,
    /// Travel model settings and, when given, the user travel-time matrix.
    pub travel: Travel,
    /// Parcel (mail) service settings.
    pub parcel: Parcel,
    /// Route-building settings (service times, dooryard window, time limit).
    pub dispatch: DispatchSettings,
    /// Facilities in `facilities.csv` order.
    pub facilities: Vec<Facility>,
    /// Vials packed per facility and day, in `supply.csv` order.
    pub supply: Vec<Supply>,
    /// Blocks (file order) then dooryard requests (file order).
    pub sites: Vec<Site>,
    /// Scouting observations in `scouting.csv` order.
    pub scouting: Vec<ScoutPoint>,
    /// Vehicles in `fleet.csv` order.
    pub fleet: Vec<Vehicle>,
    /// Forced and forbidden sites from the optional `overrides.csv`.
    pub overrides: Vec<Override>,
    /// Things worth a look that do not stop planning (e.g. a site far from every facility).
    pub warnings: Vec<Warning>,
}

impl Scenario {
    /// The seven dates of the planning week, Monday first.
    pub fn week_dates(&self) -> [NaiveDate; 7] {
        std::array::from_fn(|i| self.week_start + chrono::Days::new(i as u64))
    }

    /// Vials packed at `facility` on `date` (0 when `supply.csv` has no row).
    pub fn supply_vials(&self, facility: FacilityIdx, date: NaiveDate) -> u32 {
        self.supply
            .iter()
            .filter(|s| s.facility == facility && s.date == date)
            .map(|s| s.vials)
            .sum()
    }

    /// Total vials packed over the week, all facilities.
    pub fn total_supply_vials(&self) -> u64 {
        self.supply.iter().map(|s| u64::from(s.vials)).sum()
    }

    /// Position of the site with this id.
    pub fn site_idx(&self, id: &str) -> Option<SiteIdx> {
        self.sites.iter().position(|s| s.id.as_str() == id)
    }

    /// Position of the facility with this id.
    pub fn facility_idx(&self, id: &str) -> Option<FacilityIdx> {
        self.facilities.iter().position(|f| f.id.as_str() == id)
    }
}

/// The biological-control agent (`scenario.json` `agent`).
#[derive(Clone, Debug)]
pub struct Agent {
    /// Agent name, e.g. the parasitoid's species.
    pub name: String,
    /// Hours after packing past which a vial is worthless (> 0).
    pub shelf_life_hours: f64,
    /// Share of wasps alive as a function of hours since packing.
    pub survival: Survival,
    /// Smallest release worth making at a block, expected live wasps.
    pub min_release_wasps: f64,
    /// Release size up to which each live wasp counts in full, wasps.
    pub target_release_wasps: f64,
    /// Release size past which more wasps add nothing, wasps.
    pub max_release_wasps: f64,
    /// Weight of a wasp between target and maximum, relative to one below target (0..=1).
    /// Optional key `agent.above_target_weight`, default 0.5 (common practice: diminishing
    /// returns, no published value).
    pub above_target_weight: f64,
    /// Local clock time at which the day's vials are packed (`agent.pack_time`, default 06:00).
    pub pack_time: NaiveTime,
}

/// Survival in the vial.
#[derive(Clone, Debug, PartialEq)]
pub enum Survival {
    /// `exp(-ln 2 · h / half_life_hours)`.
    Exponential {
        /// Hours for half the wasps to die (> 0).
        half_life_hours: f64,
    },
    /// Piecewise-linear through `(hours, share alive)` points, sorted by hours, first at 0 h.
    /// Flat after the last point (until the shelf life).
    Table(Vec<(f64, f64)>),
}

impl Survival {
    /// Share of wasps alive `hours` after packing, before the shelf-life cut (0..=1).
    pub fn share_alive(&self, hours: f64) -> f64 {
        let h = hours.max(0.0);
        match self {
            Survival::Exponential { half_life_hours } => {
                (-std::f64::consts::LN_2 * h / half_life_hours).exp()
            }
            Survival::Table(points) => {
                let Some(&(_, first)) = points.first() else {
                    return 1.0;
                };
                let mut prev = (0.0, first);
                for &(x, y) in points {
                    if h <= x {
                        if x <= prev.0 {
                            return y;
                        }
                        let t = (h - prev.0) / (x - prev.0);
                        return prev.1 + t * (y - prev.1);
                    }
                    prev = (x, y);
                }
                prev.1
            }
        }
    }
}

impl Agent {
    /// Share of wasps alive `hours` after packing; 0 at or past the shelf life.
    pub fn survival_at(&self, hours: f64) -> f64 {
        if hours > self.shelf_life_hours {
            0.0
        } else {
            self.survival.share_alive(hours)
        }
    }
}

/// Allocation policy (`scenario.json` `policy`).
#[derive(Clone, Debug)]
pub struct Policy {
    /// Least share of shipped vials that must go to dooryard requests (0..=1).
    pub dooryard_share_min: f64,
    /// Vials a served request gets, exactly (≥ 1).
    pub dooryard_vials_per_request: u32,
    /// Days after an insecticide application during which a block may not get a release.
    pub insecticide_exclusion_days: u32,
    /// Whether a block must be flushing (`flush` light or heavy) to be eligible.
    pub require_flush: bool,
    /// Scouting points farther than this from a site do not count, km (> 0).
    pub pressure_radius_km: f64,
    /// Gaussian kernel bandwidth for scouting points, km (> 0).
    pub pressure_bandwidth_km: f64,
    /// Objective cost of one hour of driving, in priority-weighted wasps (≥ 0). Optional key
    /// `policy.travel_cost_per_hour`, default 1.0: small next to the value of a release.
    pub travel_cost_per_hour: f64,
    /// Days after a release at a block before the block may get another one, when planning
    /// with a season ledger (`policy.rerelease_interval_days`, default 28; common practice: a
    /// block is revisited about once a month, roughly one flush cycle and more than one wasp
    /// generation; no published value). 0: no interval.
    pub rerelease_interval_days: u32,
    /// Releases a site may get in one week (`policy.releases_per_site_week`, 1–7, default 1).
    /// A release is one shipment: one facility, pack day, dispatch day and mode; the minimum
    /// release applies to each. Common practice: one release per site per visit cycle; a
    /// one-vial top-up days later is a second, too-small release, not part of the first.
    pub releases_per_site_week: u32,
}

/// Travel settings (`scenario.json` `travel`).
#[derive(Clone, Debug)]
pub struct Travel {
    /// Road distance over geodesic distance (≥ 1).
    pub circuity: f64,
    /// Mean driving speed, km/h (> 0).
    pub speed_kmh: f64,
    /// The user travel-time matrix, when `travel.matrix` names one.
    pub matrix: Option<TravelMatrix>,
    /// The road network read from the OpenStreetMap extract `travel.road_network` names.
    pub road_network: Option<crate::roads::RoadNetwork>,
}

/// A square travel-time matrix: `minutes[i][j]` from `ids[i]` to `ids[j]`.
#[derive(Clone, Debug, PartialEq)]
pub struct TravelMatrix {
    /// Location ids (facility, site or depot ids), header order.
    pub ids: Vec<String>,
    /// Drive minutes, row = from, column = to; finite and ≥ 0.
    pub minutes: Vec<Vec<f64>>,
}

/// Parcel service (`scenario.json` `parcel`).
#[derive(Clone, Debug)]
pub struct Parcel {
    /// Hours from hand-over to delivery.
    pub transit_hours: f64,
    /// Weekdays on which parcels are handed over.
    pub days: Vec<Weekday>,
    /// Most vials that may go by parcel on one day, all facilities together.
    pub max_vials_per_day: u32,
    /// Local time of hand-over to the carrier (`parcel.ship_time`, default 15:00).
    pub ship_time: NaiveTime,
}

/// Route-building settings (optional `scenario.json` `dispatch`).
#[derive(Clone, Debug)]
pub struct DispatchSettings {
    /// Minutes spent releasing at a block (`dispatch.service_minutes_block`, default 15;
    /// common practice).
    pub service_minutes_block: f64,
    /// Minutes spent at a dooryard (`dispatch.service_minutes_dooryard`, default 5; common
    /// practice).
    pub service_minutes_dooryard: f64,
    /// Earliest arrival at a dooryard (`dispatch.dooryard_window_start`, default 08:00).
    pub dooryard_window_start: NaiveTime,
    /// Latest arrival at a dooryard (`dispatch.dooryard_window_end`, default 18:00).
    pub dooryard_window_end: NaiveTime,
    /// Optional wall-clock budget for the route search per depot-day, seconds
    /// (`dispatch.time_limit_seconds`; default none: the search stops at its round limits, so
    /// the same inputs give the same routes on any machine).
    pub time_limit_seconds: Option<f64>,
    /// Seed for any randomised choice in route search (`dispatch.seed`, default 1).
    pub seed: u64,
}

/// A rearing facility; its vehicles leave from it (`facilities.csv`).
#[derive(Clone, Debug)]
pub struct Facility {
    /// `id`.
    pub id: FacilityId,
    /// `name`: the facility's name (not personal data).
    pub name: String,
    /// `lon`, `lat`.
    pub location: LonLat,
    /// Wasps in one vial at packing (> 0).
    pub wasps_per_vial: u32,
}

/// Vials packed at one facility on one day (`supply.csv`).
#[derive(Clone, Debug)]
pub struct Supply {
    /// The packing facility.
    pub facility: FacilityIdx,
    /// Packing date, inside the week.
    pub date: NaiveDate,
    /// Vials packed (≥ 0).
    pub vials: u32,
}

/// A candidate release site: a grove block or a dooryard request.
#[derive(Clone, Debug)]
pub struct Site {
    /// Block or request id, unique over both files.
    pub id: SiteId,
    /// Where a vehicle stops: a block's access point (explicit `access_lon`/`access_lat`, else
    /// the point of the polygon nearest its centroid) or a request's `lon`/`lat`.
    pub location: LonLat,
    /// Block or dooryard details.
    pub detail: SiteDetail,
}

impl Site {
    /// `block` or `dooryard`, as written in outputs.
    pub fn kind(&self) -> SiteKind {
        match self.detail {
            SiteDetail::Block(_) => SiteKind::Block,
            SiteDetail::Dooryard(_) => SiteKind::Dooryard,
        }
    }

    /// The block details, if this site is a block.
    pub fn as_block(&self) -> Option<&Block> {
        match &self.detail {
            SiteDetail::Block(b) => Some(b),
            SiteDetail::Dooryard(_) => None,
        }
    }

    /// The request details, if this site is a dooryard request.
    pub fn as_request(&self) -> Option<&Request> {
        match &self.detail {
            SiteDetail::Dooryard(r) => Some(r),
            SiteDetail::Block(_) => None,
        }
    }
}

/// The two kinds of site.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SiteKind {
    /// A commercial or abandoned grove block.
    Block,
    /// A homeowner's yard.
    Dooryard,
}

impl SiteKind {
    /// Name as written in outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            SiteKind::Block => "block",
            SiteKind::Dooryard => "dooryard",
        }
    }
}

/// Block or dooryard details.
#[derive(Clone, Debug)]
pub enum SiteDetail {
    /// A grove block from `blocks.geojson`.
    Block(Block),
    /// A homeowner request from `requests.csv`.
    Dooryard(Request),
}

/// A grove block (`blocks.geojson` feature properties and geometry).
#[derive(Clone, Debug)]
pub struct Block {
    /// `crop`, free text (e.g. orange, grapefruit).
    pub crop: String,
    /// `management`.
    pub management: Management,
    /// `flush`.
    pub flush: Flush,
    /// `last_insecticide`, if any.
    pub last_insecticide: Option<NaiveDate>,
    /// `access_start`: earliest arrival, local time.
    pub access_start: NaiveTime,
    /// `access_end`: latest arrival, local time (after `access_start`).
    pub access_end: NaiveTime,
    /// Geodesic area, hectares.
    pub area_ha: f64,
    /// The outline, lon/lat degrees, exterior rings counter-clockwise.
    pub geometry: MultiPolygon<f64>,
}

/// Block management (`management`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Management {
    /// Sprayed on a commercial schedule.
    Conventional,
    /// Managed without synthetic insecticides.
    Organic,
    /// No longer managed.
    Abandoned,
}

/// Flush level (`flush`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Flush {
    /// No new shoots.
    None,
    /// Some new shoots.
    Light,
    /// Much new growth.
    Heavy,
}

/// A homeowner request (`requests.csv`). Names, phones and e-mails are never loaded; the
/// address is kept only for the route sheets.
#[derive(Clone, Debug)]
pub struct Request {
    /// `received`: date the request came in.
    pub received: NaiveDate,
    /// `address`: street address, shown only on route sheets.
    pub address: String,
    /// `host_plant`.
    pub host_plant: HostPlant,
    /// `insecticide_free` = yes.
    pub insecticide_free: bool,
    /// `delivery`.
    pub delivery: Delivery,
}

/// Host plant at a dooryard (`host_plant`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum HostPlant {
    /// Any citrus tree.
    Citrus,
    /// Orange jasmine (*Murraya paniculata*), a psyllid host.
    OrangeJasmine,
    /// No host plant.
    None,
}

/// How a request wants its vials (`delivery`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Delivery {
    /// Only by a route vehicle.
    Route,
    /// Only by parcel.
    Parcel,
    /// Either.
    Either,
}

impl Delivery {
    /// Whether a route vehicle may deliver.
    pub fn allows_route(self) -> bool {
        matches!(self, Delivery::Route | Delivery::Either)
    }
    /// Whether parcel may deliver.
    pub fn allows_parcel(self) -> bool {
        matches!(self, Delivery::Parcel | Delivery::Either)
    }
}

/// One scouting observation (`scouting.csv`).
#[derive(Clone, Debug)]
pub struct ScoutPoint {
    /// `id`.
    pub id: String,
    /// `date` observed.
    pub date: NaiveDate,
    /// `lon`, `lat`.
    pub location: LonLat,
    /// `kind`.
    pub kind: ScoutKind,
    /// `value`: adults per tap, percent of flush infested, or 1 for a positive tree (≥ 0).
    pub value: f64,
}

/// What a scouting observation measured (`kind`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ScoutKind {
    /// Adult psyllids per tap sample.
    TapAdults,
    /// Percent of sampled flush shoots with eggs or nymphs (0..=100).
    FlushInfestedPct,
    /// A tree confirmed positive for greening (value: count of positive trees).
    GreeningPositive,
}

/// A delivery vehicle (`fleet.csv`).
#[derive(Clone, Debug)]
pub struct Vehicle {
    /// `vehicle_id`.
    pub id: VehicleId,
    /// `depot_id`: the facility it leaves from and returns to.
    pub depot: FacilityIdx,
    /// `days` it runs.
    pub days: Vec<Weekday>,
    /// Most vials it carries on one run.
    pub capacity_vials: u32,
    /// Local time it leaves the depot.
    pub shift_start: NaiveTime,
    /// Hours from leaving to being back, in (0, 16].
    pub shift_hours: f64,
}

impl Vehicle {
    /// Whether it runs on `date`.
    pub fn runs_on(&self, date: NaiveDate) -> bool {
        use chrono::Datelike;
        self.days.contains(&date.weekday())
    }

    /// Departure and latest return on `date`.
    pub fn shift_on(&self, date: NaiveDate) -> (NaiveDateTime, NaiveDateTime) {
        let start = date.and_time(self.shift_start);
        let end = start + chrono::Duration::seconds((self.shift_hours * 3600.0).round() as i64);
        (start, end)
    }
}

/// A coordinator's override (`overrides.csv`).
#[derive(Clone, Debug, PartialEq)]
pub struct Override {
    /// The site.
    pub site: SiteIdx,
    /// Force or forbid.
    pub action: OverrideAction,
}

/// What an override does.
#[derive(Clone, Debug, PartialEq)]
pub enum OverrideAction {
    /// The site must be served, with at least this many vials (`vials`; when empty: the
    /// minimum release for a block, the standard count for a request).
    Force {
        /// Least vials, when given.
        vials: Option<u32>,
    },
    /// The site must get nothing.
    Forbid,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exponential_halves_at_half_life() {
        let s = Survival::Exponential {
            half_life_hours: 48.0,
        };
        assert!((s.share_alive(0.0) - 1.0).abs() < 1e-12);
        assert!((s.share_alive(48.0) - 0.5).abs() < 1e-12);
        assert!((s.share_alive(96.0) - 0.25).abs() < 1e-12);
    }

    #[test]
    fn table_interpolates_and_is_flat_after_last_point() {
        let s = Survival::Table(vec![(0.0, 1.0), (24.0, 0.9), (48.0, 0.5)]);
        assert!((s.share_alive(12.0) - 0.95).abs() < 1e-12);
        assert!((s.share_alive(36.0) - 0.7).abs() < 1e-12);
        assert!((s.share_alive(100.0) - 0.5).abs() < 1e-12);
    }
}
