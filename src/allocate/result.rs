//! What the allocation hands back: whole-vial shipments, each site's outcome, the binding
//! constraints and the [`Allocation`] that holds them with its bounds and notes.

use serde::Serialize;

use super::{ConstraintKind, Note};
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

    /// The order of `Allocation::shipments`: (facility, dispatch date, site, pack date, mode).
    pub fn order_key(&self) -> super::ShipmentKey {
        order_key(&self.arc)
    }
}

/// An arc's [`Shipment::order_key`].
pub(crate) fn order_key(a: &Arc) -> super::ShipmentKey {
    (a.facility, a.dispatch_date, a.site, a.pack_date, a.mode)
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
    /// Constraint name as in the exported model (e.g. `supply_F1_2027-03-02`): the kind's
    /// name, MPS-sanitised.
    pub name: String,
    /// What the constraint limits, with its facility, day or site.
    #[serde(skip)]
    pub kind: ConstraintKind,
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
    /// Upper bound on any whole-vial plan's objective: the smaller of `lp_bound` and the
    /// Lagrangian bound of the LP's duals with whole-vial site subproblems (`docs/model.md`,
    /// "Bounds"). At most `lp_bound`.
    pub bound: f64,
    /// `1 - objective / bound` (0 when `bound` is 0): how far the plan can be from the best
    /// whole-vial plan, at most.
    pub gap: f64,
    /// Objective gained per extra vial at each facility (indexed by `FacilityIdx`), from the
    /// supply-row duals (the best day of the week).
    pub marginal_value_per_vial: Vec<f64>,
    /// Binding constraints, largest dual first.
    pub binding: Vec<Binding>,
    /// Notes for the analyst, each a typed kind with its text (e.g. "dooryard share 0.20
    /// binds: ...").
    pub notes: Vec<Note>,
    /// The LP's final working set, as indices into `Arcs::arcs` (see
    /// [`AllocOptions::warm_start`](super::AllocOptions::warm_start)).
    pub working_set: Vec<usize>,
}

impl Allocation {
    /// Vials per shipment, by [`Shipment::order_key`]: the form
    /// [`AllocOptions::warm_plan`](super::AllocOptions::warm_plan) takes.
    pub fn planned_vials(&self) -> std::collections::BTreeMap<super::ShipmentKey, u32> {
        self.shipments
            .iter()
            .map(|s| (s.order_key(), s.vials))
            .collect()
    }
}
