//! The allocation: an LP relaxation over the candidate arcs (good_lp, clarabel backend),
//! rounded to whole vials with the LP optimum kept as a bound. Formulation: `docs/model.md`.

use serde::Serialize;

use crate::arcs::Arc;
use crate::eligibility::Reason;
use crate::scenario::SiteIdx;

/// Whole vials sent on one arc.
#[derive(Clone, Debug, PartialEq)]
pub struct Shipment {
    /// The arc (facility, pack day, dispatch day, site, mode).
    pub arc: Arc,
    /// Vials, ≥ 1.
    pub vials: u32,
}

impl Shipment {
    /// Expected live wasps at the arc's ETA.
    pub fn wasps_expected_alive(&self) -> f64 {
        self.arc.wasps_alive_per_vial * f64::from(self.vials)
    }
}

/// What one site got, and why not when it got nothing.
#[derive(Clone, Debug, PartialEq)]
pub struct SiteOutcome {
    /// The site.
    pub site: SiteIdx,
    /// Priority used in the objective (≥ 0).
    pub priority: f64,
    /// Whether the site had any arc at all.
    pub eligible: bool,
    /// Why it got nothing (`None` when served).
    pub reason: Option<Reason>,
    /// Vials it got.
    pub vials: u32,
    /// Expected live wasps it got.
    pub wasps_expected_alive: f64,
}

/// A constraint that holds with equality at the LP optimum and has a non-zero dual.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Binding {
    /// Constraint name as in the exported model (e.g. `supply_F1_2027-03-02`).
    pub name: String,
    /// Objective gained per unit of slack, from the LP dual.
    pub dual: f64,
}

/// The week's whole-vial plan.
#[derive(Clone, Debug)]
pub struct Allocation {
    /// Shipments sorted by (facility, dispatch_date, site, pack_date, mode).
    pub shipments: Vec<Shipment>,
    /// One per site, indexed by `SiteIdx`.
    pub sites: Vec<SiteOutcome>,
    /// LP relaxation optimum (an upper bound on any whole-vial plan's objective).
    pub lp_bound: f64,
    /// The whole-vial plan's objective under the same function.
    pub objective: f64,
    /// `1 - objective / lp_bound` (0 when `lp_bound` is 0).
    pub gap: f64,
    /// Objective gained per extra vial at each facility (indexed by `FacilityIdx`), from the
    /// supply-row duals (the best day of the week).
    pub marginal_value_per_vial: Vec<f64>,
    /// Binding constraints, largest dual first.
    pub binding: Vec<Binding>,
    /// Human-readable notes (e.g. "dooryard share 0.30 cannot be met: ...").
    pub notes: Vec<String>,
}
