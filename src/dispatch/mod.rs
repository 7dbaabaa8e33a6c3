//! Dispatch: vehicle routes per depot-day and parcel batches for the allocation's shipments.

use chrono::{NaiveDate, NaiveDateTime};

use crate::scenario::{FacilityIdx, LonLat, SiteIdx};

/// One stop on a route.
#[derive(Clone, Debug, PartialEq)]
pub struct Stop {
    /// Index into `Allocation::shipments` of the shipment delivered here.
    pub shipment: usize,
    /// The site.
    pub site: SiteIdx,
    /// Arrival at the site (before any wait for its window).
    pub arrival: NaiveDateTime,
    /// Start of release (arrival, or the window's opening if early).
    pub service_start: NaiveDateTime,
    /// Vials left here.
    pub vials: u32,
    /// Expected live wasps at `service_start`.
    pub wasps_expected_alive: f64,
    /// Latest useful release of these vials.
    pub release_by: NaiveDateTime,
}

/// One vehicle's run on one day.
#[derive(Clone, Debug, PartialEq)]
pub struct Route {
    /// `R-<depot>-<yyyymmdd>-<n>`, stable for the same inputs.
    pub id: String,
    /// Index into `Scenario::fleet`.
    pub vehicle: usize,
    /// Depot (facility) it leaves from and returns to.
    pub depot: FacilityIdx,
    /// Day of the run.
    pub date: NaiveDate,
    /// Departure from the depot.
    pub depart: NaiveDateTime,
    /// Return to the depot.
    pub return_at: NaiveDateTime,
    /// Stops in visiting order.
    pub stops: Vec<Stop>,
    /// Total driving, minutes (excluding service and waiting).
    pub drive_minutes: f64,
    /// The driven path, depot → stops in order → depot, as longitude/latitude points
    /// (degrees, WGS 84) joined from the travel model's leg paths; consecutive duplicate
    /// points are dropped. Empty when the travel model has no geometry.
    pub path: Vec<LonLat>,
}

impl Route {
    /// Vials on board at departure.
    pub fn vials(&self) -> u32 {
        self.stops.iter().map(|s| s.vials).sum()
    }
}

/// One parcel handed to the carrier.
#[derive(Clone, Debug, PartialEq)]
pub struct ParcelShipment {
    /// Index into `Allocation::shipments`.
    pub shipment: usize,
    /// The receiving request.
    pub site: SiteIdx,
    /// Hand-over to the carrier.
    pub ship_at: NaiveDateTime,
    /// Delivery = hand-over + transit hours.
    pub eta: NaiveDateTime,
    /// Vials in the parcel.
    pub vials: u32,
    /// Expected live wasps at `eta`.
    pub wasps_expected_alive: f64,
    /// Latest useful release.
    pub release_by: NaiveDateTime,
}

/// A shipment no route could serve, and why.
#[derive(Clone, Debug, PartialEq)]
pub struct Undeliverable {
    /// Index into `Allocation::shipments`.
    pub shipment: usize,
    /// `capacity`, `shift`, `deadline` or `window`.
    pub reason: &'static str,
}

/// Routes and parcels for the week.
#[derive(Clone, Debug, Default)]
pub struct Dispatch {
    /// Routes sorted by (date, depot, id).
    pub routes: Vec<Route>,
    /// Parcels sorted by (ship_at, site).
    pub parcels: Vec<ParcelShipment>,
    /// Shipments that could not be placed on any route or parcel.
    pub undeliverable: Vec<Undeliverable>,
    /// Notes on the route search, one line each in (facility, date) order: a depot-day whose
    /// search stopped at `dispatch.time_limit_seconds` rather than at its round limits, or,
    /// when that optional limit is set and stopped none, one line saying it was in effect.
    pub notes: Vec<String>,
}

mod build;
pub mod tsp;
pub mod vrptw;

pub use build::{
    DispatchOptions, RouteCache, depot_day_instances, dispatch, dispatch_cached, dispatch_with,
};
