//! Candidate arcs: (facility, pack day, dispatch day, site, mode) combinations that deliver
//! live wasps before the vial's release-by time.
//!
//! An arc exists only when the site is eligible on the dispatch date, the facility can reach it
//! that day (a route from its depot on a day its fleet runs, out and back inside a shift, inside
//! the site's access window; or a parcel on a parcel day for a request that accepts parcels),
//! and the estimated arrival is no later than `pack time + shelf_life_hours`.

use chrono::{NaiveDate, NaiveDateTime};
use serde::Serialize;

use crate::eligibility::Reason;
use crate::scenario::{FacilityIdx, SiteIdx};

/// How vials reach a site.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Mode {
    /// A vehicle from the facility's depot.
    Route,
    /// Handed to a parcel carrier.
    Parcel,
}

impl Mode {
    /// Name as written in outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            Mode::Route => "route",
            Mode::Parcel => "parcel",
        }
    }
}

/// One way of sending vials from a facility's pack day to a site.
#[derive(Clone, Debug, PartialEq)]
pub struct Arc {
    /// Packing facility (and, for routes, the depot).
    pub facility: FacilityIdx,
    /// Day the vials were packed.
    pub pack_date: NaiveDate,
    /// Day they leave the facility (≥ `pack_date`: vials may be held, aging).
    pub dispatch_date: NaiveDate,
    /// Receiving site.
    pub site: SiteIdx,
    /// Route or parcel.
    pub mode: Mode,
    /// Estimated arrival used for survival (for routes: a direct drive from the depot at the
    /// earliest shift start that day, waiting for the access window if early).
    pub eta: NaiveDateTime,
    /// Latest useful release: pack time + shelf life.
    pub release_by: NaiveDateTime,
    /// Share of packed wasps alive at `eta` (0..=1).
    pub survival: f64,
    /// Expected live wasps per vial at `eta` = wasps_per_vial × survival.
    pub wasps_alive_per_vial: f64,
    /// One-way drive from the depot to the site, minutes (0 for parcels).
    pub drive_minutes: f64,
}

/// The arcs of a week and, for each site, why it has none.
#[derive(Clone, Debug, Default)]
pub struct Arcs {
    /// All arcs, sorted by (site, facility, pack_date, dispatch_date, mode).
    pub arcs: Vec<Arc>,
    /// Per site (indexed by `SiteIdx`): `None` when the site has at least one arc, otherwise the
    /// reason it has none (an ineligibility reason or `OutOfReach`).
    pub no_arc_reason: Vec<Option<Reason>>,
}
