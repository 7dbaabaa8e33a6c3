//! The week's pipeline: scenario → priority → arcs → allocation → dispatch, with one round of
//! route feedback, and the same week planned by hand beside it ([`crate::baseline`]). Takes typed values, returns typed values; reads and prints nothing.

use std::collections::{BTreeMap, BTreeSet};

use chrono::NaiveDate;

use crate::allocate::{self, AllocError, AllocOptions, Allocation};
use crate::arcs::{self, Arcs, Mode};
use crate::baseline::{self, Baseline};
use crate::dispatch::{self, Dispatch};
use crate::eligibility::Reason;
use crate::pressure::{self, PressureParams};
use crate::progress::{Progress, Step};
use crate::scenario::{FacilityIdx, Scenario};
use crate::travel::TravelModel;

/// Everything `plan` computed for the week.
#[derive(Debug)]
pub struct Plan {
    /// The scenario planned.
    pub scenario: Scenario,
    /// Site priority used in the objective, indexed by `SiteIdx` (dimensionless, ≥ 0).
    pub priority: Vec<f64>,
    /// Candidate arcs (after feedback exclusions are applied by the allocation).
    pub arcs: Arcs,
    /// The final whole-vial allocation (only deliverable shipments).
    pub allocation: Allocation,
    /// Routes and parcels.
    pub dispatch: Dispatch,
    /// What the route feedback moved and why, one line each.
    pub moved: Vec<String>,
    /// The same week planned by hand ([`baseline::hand_plan`]), valued by the same objective.
    pub baseline: Baseline,
}

/// Options of the pipeline.
#[derive(Clone, Debug, Default)]
pub struct PlanOptions {
    /// Pest-pressure weights.
    pub pressure: PressureParams,
    /// Allocation options.
    pub alloc: AllocOptions,
    /// Divides the scenario's route-search rounds per depot-day (most rounds and rounds
    /// without a new best); 0 and 1 mean the full search. `sweep` uses it for every variant
    /// but 1×, whose routes nobody prints.
    pub route_rounds_divisor: u32,
    /// Where the stages report their steps (default: nowhere). `alloc.progress` is set from
    /// it by [`plan_with`].
    pub progress: Progress,
}

/// Site priority (dimensionless) for every site, in `SiteIdx` order.
pub fn priorities(scenario: &Scenario, params: &PressureParams) -> Vec<f64> {
    pressure::site_priority(scenario, params)
        .into_iter()
        .map(|p| p.priority)
        .collect()
}

/// The inputs of the allocation: the travel model, site priority and candidate arcs. Shared
/// by [`plan`] and the model export, so both solve the same LP.
pub fn prepare(scenario: &Scenario, opts: &PlanOptions) -> (TravelModel, Vec<f64>, Arcs) {
    let travel = TravelModel::new(scenario);
    let priority = priorities(scenario, &opts.pressure);
    let arcs = arcs::build_arcs(scenario, &travel);
    (travel, priority, arcs)
}

/// Plans the week.
pub fn plan(scenario: Scenario, opts: &PlanOptions) -> Result<Plan, AllocError> {
    opts.progress.report(Step::Travel);
    let travel = TravelModel::new(&scenario);
    opts.progress.report(Step::Priority {
        sites: scenario.sites.len(),
    });
    let priority = priorities(&scenario, &opts.pressure);
    plan_with(scenario, &travel, priority, opts)
}

/// Plans the week from a travel model and site priority computed beforehand (by
/// [`TravelModel::new`] and [`priorities`] on a scenario with the same facilities and sites),
/// so that several variants of one scenario (e.g. scaled supply in a sweep) share them. The
/// arcs are built here because they depend on which days each facility packs.
/// `opts.pressure` is not used: `priority` already holds its effect.
///
/// Cost: as [`plan`] less the travel model and priority.
pub fn plan_with(
    scenario: Scenario,
    travel: &TravelModel,
    priority: Vec<f64>,
    opts: &PlanOptions,
) -> Result<Plan, AllocError> {
    let progress = &opts.progress;
    progress.report(Step::Arcs {
        sites: scenario.sites.len(),
    });
    let arcs = arcs::build_arcs(&scenario, travel);
    progress.report(Step::HandPlan);
    let mut alloc_opts = opts.alloc.clone();
    alloc_opts.progress = progress.clone();
    // The hand plan and the allocation are independent, and the allocation runs mostly on one
    // core: the hand plan takes the other (about 1 s of a 35,000-site week).
    let (baseline, allocated) = rayon::join(
        || baseline::hand_plan(&scenario, &priority, &arcs, &opts.alloc),
        || allocate::allocate_keeping_lp(&scenario, &priority, &arcs, &alloc_opts),
    );
    let baseline = baseline?;
    let (first, first_lp) = allocated?;
    // The feedback rounds re-route only the depot-days whose stops changed.
    let routes = dispatch::RouteCache::new();
    let mut dispatch_opts = dispatch::DispatchOptions::from_scenario(&scenario);
    let divisor = opts.route_rounds_divisor.max(1);
    dispatch_opts.max_iterations = (dispatch_opts.max_iterations / divisor).max(1);
    dispatch_opts.stall_rounds = (dispatch_opts.stall_rounds / divisor).max(1);
    let route = |allocation: &Allocation| {
        dispatch::dispatch_cached(
            &scenario,
            allocation,
            travel,
            &dispatch_opts,
            &routes,
            progress,
        )
    };
    let first_dispatch = route(&first);
    let mut moved = Vec::new();
    if first_dispatch.undeliverable.is_empty() {
        return Ok(Plan {
            scenario,
            priority,
            arcs,
            allocation: first,
            dispatch: first_dispatch,
            moved,
            baseline,
        });
    }
    // A depot-day whose routes left stops out is full as the routes found it: the re-plan
    // may send by route from it at most the vials they delivered, so the stops it takes away
    // (and others) go to other days, facilities or parcels rather than back into the same
    // shift. A restriction of the week, so the first LP's bounds still hold. These lines come
    // first in `moved`: the report shows its first lines only.
    // (delivered, planned) vials by route, per depot-day with a stop left out.
    let mut full: BTreeMap<(FacilityIdx, NaiveDate), (u32, u32)> = BTreeMap::new();
    for u in &first_dispatch.undeliverable {
        let a = &first.shipments[u.shipment].arc;
        if a.mode == Mode::Route {
            full.insert((a.facility, a.dispatch_date), (0, 0));
        }
    }
    for r in &first_dispatch.routes {
        if let Some((delivered, _)) = full.get_mut(&(r.depot, r.date)) {
            *delivered += r.vials();
        }
    }
    for s in first.shipments.iter().filter(|s| s.arc.mode == Mode::Route) {
        if let Some((_, planned)) = full.get_mut(&(s.arc.facility, s.arc.dispatch_date)) {
            *planned += s.vials;
        }
    }
    for (&(f, date), &(delivered, planned)) in &full {
        moved.push(format!(
            "{} on {date}: its routes delivered {delivered} of {planned} planned vials; \
             the re-plan sends at most {delivered} vials by route from it that day",
            scenario.facilities[f].id
        ));
    }
    // Stops no route can serve go back to the allocation once, with those arcs removed.
    let mut removed = BTreeSet::new();
    for u in &first_dispatch.undeliverable {
        let s = &first.shipments[u.shipment];
        let a = &s.arc;
        removed.insert((a.facility, a.dispatch_date, a.site, a.mode));
        moved.push(format!(
            "{} {}: {} vials from {} on {} could not be delivered by {} ({}); re-planned without that option",
            scenario.sites[a.site].kind().as_str(),
            scenario.sites[a.site].id,
            s.vials,
            scenario.facilities[a.facility].id,
            a.dispatch_date,
            a.mode.as_str(),
            u.reason
        ));
    }
    progress.report(Step::Replan);
    alloc_opts.excluded.extend(removed);
    alloc_opts.route_vials_cap.extend(
        full.into_iter()
            .map(|(day, (delivered, _))| (day, delivered)),
    );
    alloc_opts.warm_start = first.working_set.iter().copied().collect();
    alloc_opts.warm_plan = first.planned_vials();
    // The re-plan keeps the first LP (its bounds hold with arcs left out, and they are those
    // of the exported model); it solves again when the first solve had no LP, and
    // `allocate_from` does when the exclusions loosen the share floor or a force.
    let second = match &first_lp {
        Some(lp) => allocate::allocate_from(&scenario, &priority, &arcs, &alloc_opts, lp)?,
        None => allocate::allocate(&scenario, &priority, &arcs, &alloc_opts)?,
    };
    let second_dispatch = route(&second);
    // A stop the re-planned routes cannot serve is dropped with its site; routing the smaller
    // plan can still leave a stop out (routes change when stops go), so repeat until every
    // vial the objective counts is delivered. Each pass removes at least one site, so this ends.
    let (mut allocation, mut dispatch) = (second, second_dispatch);
    let mut after = "re-planning";
    while !dispatch.undeliverable.is_empty() {
        let dropped: Vec<usize> = dispatch.undeliverable.iter().map(|u| u.shipment).collect();
        for u in &dispatch.undeliverable {
            let s = &allocation.shipments[u.shipment];
            moved.push(format!(
                "{} {}: {} vials dropped after {after} ({}); they stay at {}",
                scenario.sites[s.arc.site].kind().as_str(),
                scenario.sites[s.arc.site].id,
                s.vials,
                u.reason,
                scenario.facilities[s.arc.facility].id
            ));
        }
        allocation = drop_undeliverable(
            &scenario,
            &priority,
            &arcs,
            &alloc_opts,
            allocation,
            &dropped,
        )?;
        dispatch = route(&allocation);
        after = "re-routing";
    }
    Ok(Plan {
        scenario,
        priority,
        arcs,
        allocation,
        dispatch,
        moved,
        baseline,
    })
}

/// Removes every shipment of each site that has an undeliverable one (a block must keep its
/// minimum release or get nothing), marks those sites `undeliverable`, and recomputes the
/// objective and gap of what is left.
fn drop_undeliverable(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
    mut allocation: Allocation,
    dropped: &[usize],
) -> Result<Allocation, AllocError> {
    let sites: BTreeSet<usize> = dropped
        .iter()
        .map(|&i| allocation.shipments[i].arc.site)
        .collect();
    allocation
        .shipments
        .retain(|s| !sites.contains(&s.arc.site));
    for &s in &sites {
        let outcome = &mut allocation.sites[s];
        outcome.vials = 0;
        outcome.wasps_expected_alive = 0.0;
        outcome.reason = Some(Reason::Undeliverable);
    }
    allocation.objective =
        allocate::plan_objective(scenario, priority, arcs, opts, &allocation.shipments)?;
    allocation.gap = allocate::gap(allocation.objective, allocation.bound);
    Ok(allocation)
}
