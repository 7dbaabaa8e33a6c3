//! `summary.json`: the week's headline figures for the coordinator and for scenario sweeps.

use std::collections::BTreeMap;

use serde::Serialize;

use super::{Delivered, OutputError, PlanView, round_to};
use crate::scenario::SiteKind;

#[derive(Serialize)]
struct BindingOut<'a> {
    name: &'a str,
    dual: f64,
}

/// The week planned by hand ([`crate::baseline`]), valued by the same objective.
#[derive(Serialize)]
struct BaselineOut {
    objective: f64,
    shipped_vials: u64,
    unshipped_vials: u64,
    wasps_expected_alive: f64,
    top_quarter_wasps: f64,
    blocks_served: usize,
    requests_served: usize,
}

/// Field order is the file's order; every number is rounded to fixed decimals.
#[derive(Serialize)]
struct Summary<'a> {
    scenario: &'a str,
    week_start: String,
    /// Priority-weighted benefit of the whole-vial plan.
    objective: f64,
    /// LP relaxation optimum, an upper bound on `objective`.
    lp_bound: f64,
    /// Whole-vial upper bound on `objective` (≤ `lp_bound`): the LP duals' Lagrangian bound
    /// with whole-vial site subproblems.
    bound: f64,
    /// 1 − objective / bound.
    gap: f64,
    supply_vials: u64,
    allocated_vials: u64,
    /// Vials on a route stop or a parcel.
    shipped_vials: u64,
    /// Vials packed and not shipped: they die at the facilities.
    unshipped_vials: u64,
    undeliverable_shipments: usize,
    /// Objective per extra vial, by facility id.
    marginal_value_per_vial: BTreeMap<&'a str, f64>,
    sites_served: usize,
    blocks_served: usize,
    requests_served: usize,
    wasps_expected_alive: f64,
    /// Expected live wasps delivered to the top priority quarter of eligible sites.
    top_quarter_wasps: f64,
    routes: usize,
    parcels: usize,
    binding_constraints: Vec<BindingOut<'a>>,
    /// Allocation notes, then route-search notes.
    notes: Vec<&'a str>,
    moved: &'a [String],
    /// The hand plan of the same week; left out when the view has none.
    #[serde(skip_serializing_if = "Option::is_none")]
    baseline: Option<BaselineOut>,
}

/// Renders `summary.json`. Served counts are of delivered vials, not allocated ones. O(S).
pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let al = view.allocation;
    let served_of = |kind: SiteKind| {
        sc.sites
            .iter()
            .enumerate()
            .filter(|(i, s)| s.kind() == kind && plan.served(*i))
            .count()
    };
    let mut mv = BTreeMap::new();
    for (f, v) in sc.facilities.iter().zip(&al.marginal_value_per_vial) {
        mv.insert(f.id.as_str(), round_to(*v, 6));
    }
    let blocks_served = served_of(SiteKind::Block);
    let requests_served = served_of(SiteKind::Dooryard);
    let doc = Summary {
        scenario: &sc.name,
        week_start: sc.week_start.to_string(),
        objective: round_to(al.objective, 6),
        lp_bound: round_to(al.lp_bound, 6),
        bound: round_to(al.bound, 6),
        gap: round_to(al.gap, 6),
        supply_vials: sc.total_supply_vials(),
        allocated_vials: al.shipments.iter().map(|s| u64::from(s.vials)).sum(),
        shipped_vials: plan.shipped_vials(),
        unshipped_vials: sc.total_supply_vials().saturating_sub(plan.shipped_vials()),
        undeliverable_shipments: view.dispatch.undeliverable.len(),
        marginal_value_per_vial: mv,
        sites_served: blocks_served + requests_served,
        blocks_served,
        requests_served,
        wasps_expected_alive: round_to(plan.wasps_expected_alive(), 1),
        top_quarter_wasps: round_to(plan.top_quarter_wasps(view), 1),
        routes: view.dispatch.routes.len(),
        parcels: view.dispatch.parcels.len(),
        binding_constraints: al
            .binding
            .iter()
            .map(|b| BindingOut {
                name: &b.name,
                dual: round_to(b.dual, 6),
            })
            .collect(),
        notes: view.notes().map(String::as_str).collect(),
        moved: view.moved,
        baseline: view.baseline.map(|b| BaselineOut {
            objective: round_to(b.objective, 6),
            shipped_vials: b.shipped_vials,
            unshipped_vials: b.unshipped_vials(),
            wasps_expected_alive: round_to(b.wasps_expected_alive, 1),
            top_quarter_wasps: round_to(b.top_quarter_wasps, 1),
            blocks_served: b.blocks_served,
            requests_served: b.requests_served,
        }),
    };
    let mut bytes = serde_json::to_vec_pretty(&doc)?;
    bytes.push(b'\n');
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    #[test]
    fn counts_delivered_not_allocated() {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let j: serde_json::Value = serde_json::from_slice(&render(&v, &plan).unwrap()).unwrap();
        assert_eq!(j["supply_vials"], 60);
        assert_eq!(j["allocated_vials"], 19);
        assert_eq!(j["shipped_vials"], 16, "B3's 3 vials are undeliverable");
        assert_eq!(j["sites_served"], 6);
        assert_eq!(j["requests_served"], 3);
        assert_eq!(j["marginal_value_per_vial"]["F2"], 8.0);
        assert_eq!(j["routes"], 2);
        assert_eq!(j["parcels"], 1);
        assert_eq!(j["binding_constraints"][0]["name"], "supply_F1_2027-03-02");
    }
}
