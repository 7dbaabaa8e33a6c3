//! The allocation: an LP relaxation over the candidate arcs (good_lp; clarabel backend, or
//! HiGHS with the `highs` feature, see [`AllocOptions::solver`]),
//! rounded to whole vials with the LP optimum kept as a bound. Formulation: `docs/model.md`,
//! whose steps are the files here: `instance.rs` (1, with `absorb.rs`), `master.rs` (2),
//! `pricing.rs` (3), `rounding.rs` (4, with `improve.rs` and `releases.rs`), `bound.rs` (5),
//! `result.rs`, `note.rs`, `constraint.rs` and `mps.rs` (6); [`allocate`] runs them in order.

pub mod constraint;
pub mod model;
pub mod mps;
pub mod note;
pub mod result;
#[doc(hidden)]
pub mod synthetic;

mod absorb;
mod bound;
mod improve;
mod instance;
mod master;
mod pricing;
mod releases;
mod rounding;
mod windows;

pub use constraint::ConstraintKind;
pub use model::Solver;
pub use note::{Note, NoteKind, Shortfall};
pub use result::{Allocation, Binding, Shipment, SiteOutcome};

use std::collections::BTreeSet;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

use chrono::NaiveDate;

use crate::arcs::{Arcs, Mode};
use crate::eligibility::Reason;
use crate::scenario::{FacilityIdx, OverrideAction, Scenario, SiteIdx};

/// An arc as the dispatch feedback loop names it: (facility, dispatch date, site, mode).
pub type ArcKey = (FacilityIdx, NaiveDate, SiteIdx, Mode);

/// A shipment's arc as [`Shipment::order_key`] gives it: (facility, dispatch date, site, pack
/// date, mode).
pub type ShipmentKey = (FacilityIdx, NaiveDate, SiteIdx, NaiveDate, Mode);

/// Allocation settings.
#[derive(Clone, Debug)]
pub struct AllocOptions {
    /// Arcs to leave out (e.g. stops a route could not serve), by (facility, dispatch date,
    /// site, mode); every pack date of a matching arc is left out.
    pub excluded: BTreeSet<ArcKey>,
    /// Solve on a working set of promising sites and price the rest with the duals (default
    /// true). Off: one LP over every site. Both reach the same optimum.
    pub pricing: bool,
    /// With `pricing`, a pool of at most this many arcs (default 4,500) whose first working
    /// set holds at least a twentieth of it is solved in one LP over every arc instead: there one
    /// interior-point solve costs less than the rounds of pricing (measured in
    /// `docs/performance-allocate.md`). 0 always prices.
    pub direct_max_arcs: usize,
    /// Most rounding moves evaluated (default 20 million): a work budget, not a time limit,
    /// so the plan does not depend on machine speed.
    pub rounding_budget: u64,
    /// Most subgradient steps that tighten the whole-vial bound from the LP's duals (default
    /// 1,000; fewer on large weeks, down to 40, so the steps evaluate at most 50 million arcs
    /// in all): a work limit; 0 keeps the bound at the LP duals.
    pub bound_steps: usize,
    /// Arcs (indices into `Arcs::arcs`) to put in the LP's first working set besides the
    /// usual choice, e.g. [`Allocation::working_set`] of an earlier solve of the same week.
    /// Pricing still certifies the bound over every arc, so the optimum is the same.
    pub warm_start: BTreeSet<usize>,
    /// Vials per shipment of an earlier plan of the same week (e.g. [`Allocation::shipments`]
    /// before the route feedback removed a few arcs). When given, the rounding starts from
    /// this plan instead of the LP's vials (shipments on arcs no longer usable are dropped,
    /// and its sites join the candidates), and the wider and guided roundings are skipped:
    /// the earlier plan already holds what they found. On the generated 35,000-site and
    /// 20,000-site (2× supply) weeks, the feedback's re-solve this way gave +0.02 % and
    /// +0.30 % in 0.77× and 0.87× the `plan` time. Empty (the default): round from the LP.
    pub warm_plan: std::collections::BTreeMap<ShipmentKey, u32>,
    /// Most vials the routes of a depot-day, by (facility, dispatch date), may carry: a lower
    /// limit than its vehicles' summed capacity, e.g. what the routes delivered when they
    /// could not serve every stop (set by the route feedback, so that the re-plan sends the
    /// stops it takes away elsewhere, not back to a depot-day whose shift is already full).
    /// Empty (the default): the fleet's capacity.
    pub route_vials_cap: std::collections::BTreeMap<(FacilityIdx, NaiveDate), u32>,
    /// Stops a depot-day, by (facility, dispatch date), may keep by route: its route arcs to
    /// every other site are left out. Set by the route feedback for a depot-day whose routes
    /// left stops out, to the sites they served, so that the re-plan does not fill the same
    /// shifts with new stops (fewer vials in more, smaller stops can take longer than the
    /// shifts allow). Empty (the default): no such limit.
    pub route_stops_only: std::collections::BTreeMap<(FacilityIdx, NaiveDate), BTreeSet<SiteIdx>>,
    /// Solver of the LP relaxation (default clarabel; HiGHS with the `highs` feature). Both
    /// reach the same bound; the LP solution, and so the rounded plan, may differ (HiGHS
    /// returns a vertex, clarabel a point inside the optimal face).
    pub solver: model::Solver,
    /// Where each LP round and the whole-vial step are reported (default: nowhere).
    pub progress: crate::progress::Progress,
}

impl Default for AllocOptions {
    fn default() -> Self {
        AllocOptions {
            excluded: BTreeSet::new(),
            pricing: true,
            direct_max_arcs: 4_500,
            rounding_budget: 20_000_000,
            bound_steps: 1000,
            warm_start: BTreeSet::new(),
            warm_plan: std::collections::BTreeMap::new(),
            route_vials_cap: std::collections::BTreeMap::new(),
            route_stops_only: std::collections::BTreeMap::new(),
            solver: model::Solver::default(),
            progress: crate::progress::Progress::default(),
        }
    }
}

/// Allocation errors. Infeasible policies are not errors: they are relaxed and explained in
/// [`Allocation::notes`].
#[derive(Debug, thiserror::Error)]
pub enum AllocError {
    /// `priority` must have one value per site.
    #[error("scenario `{scenario}`: {got} priorities for {sites} sites")]
    PriorityLength {
        /// Scenario name.
        scenario: String,
        /// Priorities given.
        got: usize,
        /// Sites in the scenario.
        sites: usize,
    },
    /// A priority is negative or not finite.
    #[error(
        "scenario `{scenario}`: site {site} has priority {value}; priorities must be finite and ≥ 0"
    )]
    BadPriority {
        /// Scenario name.
        scenario: String,
        /// Site id.
        site: String,
        /// The value.
        value: f64,
    },
    /// The arcs do not belong to this scenario.
    #[error("scenario `{scenario}`: arcs do not match the scenario: {message}")]
    ArcsMismatch {
        /// Scenario name.
        scenario: String,
        /// What does not match.
        message: String,
    },
    /// The LP solver failed (numerical trouble); the model is always feasible by
    /// construction.
    #[error("scenario `{scenario}`: {source}")]
    Solver {
        /// Scenario name.
        scenario: String,
        /// Solver error.
        source: model::ModelError,
    },
    /// The bounds do not order as they must (objective ≤ bound ≤ lp_bound beyond solver
    /// tolerance): a defect or numerical failure, never printed as a gap.
    #[error(
        "scenario `{scenario}`: the plan's objective {objective} and bounds {bound} ≤ {lp_bound} \
         do not order (objective ≤ whole-vial bound ≤ LP bound); this is a defect, please report it"
    )]
    BoundOrder {
        /// Scenario name.
        scenario: String,
        /// Whole-vial objective.
        objective: f64,
        /// Whole-vial bound.
        bound: f64,
        /// LP bound.
        lp_bound: f64,
    },
}

/// The dooryard share floor the allocation keeps for these inputs: `None` when the policy
/// sets none or no request can be reached (the row is dropped), else the policy's share,
/// lowered to what the reachable requests can absorb of the week's usable supply
/// (`docs/model.md`, "Dooryard share"). Dooryard vials ≥ floor × vials shipped in every plan.
///
/// # Errors
/// As [`allocate`] for inputs that do not belong together.
pub fn share_floor(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
) -> Result<Option<f64>, AllocError> {
    Ok(instance::Instance::new(scenario, priority, arcs, opts)?.share)
}

/// Checks objective ≤ bound ≤ lp_bound up to a relative 1e-6 (interior-point tolerance).
///
/// # Errors
/// [`AllocError::BoundOrder`] when they do not order, or any of them is not finite.
pub fn check_bound_order(
    scenario: &str,
    objective: f64,
    bound: f64,
    lp_bound: f64,
) -> Result<(), AllocError> {
    let tol = |x: f64| 1e-6 * x.abs().max(1.0);
    let ok = objective.is_finite()
        && bound.is_finite()
        && lp_bound.is_finite()
        && objective <= bound + tol(bound)
        && bound <= lp_bound + tol(lp_bound);
    if ok {
        Ok(())
    } else {
        Err(AllocError::BoundOrder {
            scenario: scenario.to_string(),
            objective,
            bound,
            lp_bound,
        })
    }
}

/// The objective of a whole-vial plan, recomputed from its shipments alone: Σ_s priority_s ·
/// benefit(wasps alive at s) − Σ travel cost per vial × vials − force shortfall penalties
/// (objective units: priority-weighted wasps). See `docs/model.md`.
pub fn plan_objective(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
    shipments: &[Shipment],
) -> Result<f64, AllocError> {
    let inst = instance::Instance::new(scenario, priority, arcs, opts)?;
    Ok(objective_of(&inst, scenario, shipments))
}

fn objective_of(inst: &instance::Instance, scenario: &Scenario, shipments: &[Shipment]) -> f64 {
    let n = scenario.sites.len();
    let mut e = vec![0.0; n];
    let mut v = vec![0u32; n];
    let mut cost = 0.0;
    for sh in shipments {
        if sh.arc.site < n {
            e[sh.arc.site] += sh.wasps_expected_alive();
            v[sh.arc.site] += sh.vials;
        }
        cost += scenario.policy.travel_cost_per_hour * sh.arc.drive_minutes.max(0.0) / 60.0
            * f64::from(sh.vials);
    }
    let mut total = -cost;
    for (sp, site) in inst.sites.iter().enumerate() {
        total += inst.site_value(sp, e[site.site], v[site.site]);
    }
    total
}

/// Arc evaluations the whole-vial bound's subgradient steps may spend in all (a work limit):
/// small weeks get up to [`AllocOptions::bound_steps`] steps, the largest at least
/// [`MIN_BOUND_STEPS`].
const BOUND_ARC_EVALUATIONS: usize = 50_000_000;

/// Fewest subgradient steps any week gets (unless `bound_steps` is smaller).
const MIN_BOUND_STEPS: usize = 40;

/// Subgradient steps for a week of `arcs` usable arcs: `BOUND_ARC_EVALUATIONS / arcs`, between
/// `MIN_BOUND_STEPS` and `most`.
fn bound_steps(most: usize, arcs: usize) -> usize {
    (BOUND_ARC_EVALUATIONS / arcs.max(1))
        .max(MIN_BOUND_STEPS)
        .min(most)
}

/// Relative gap above which a second rounding starts from the Lagrangian releases.
const GUIDE_GAP: f64 = 0.002;

/// Whether the week's pack days hold, on average, fewer vials than one target release of
/// their facility (`target_release_wasps / wasps_per_vial`): the weeks where the LP splits
/// releases that no pack day can hold whole, and so where the roundings from the Lagrangian
/// releases pay. Measured on 23 weeks (the demo and generated ones, 2026-12-03): they raised
/// the plan only on two such weeks (300 sites, 3 facilities, 0.3× supply: 1.3 vials a pack
/// day against 6–7.5 a release, +0.9 %; 700 sites, 6 facilities, 1×: 4.4 against 6–7.5,
/// +2.1 %) and never where pack days were larger (6.8 to 227 vials), where they took 30–45 %
/// of `plan`'s time (3,000 sites: 5.98 s against 3.16 s). O(supply rows).
fn small_pack_days(inst: &instance::Instance) -> bool {
    let (mut rows, mut vials, mut release) = (0usize, 0.0, 0.0);
    for (res, rhs) in inst.resources.iter().zip(&inst.res_rhs) {
        if let instance::Resource::Supply(f, _) = *res {
            rows += 1;
            vials += rhs;
            release += inst.target / f64::from(inst.scenario.facilities[f].wasps_per_vial.max(1));
        }
    }
    rows > 0 && vials < release
}

/// Relative gap (to the whole-vial bound) above which the rounding runs again from the release
/// LP (`releases.rs`), and, if the gap is still above it, again with
/// [`WIDE_CANDIDATES_PER_SUPPORT_SITE`] candidates per site of the LP's support, and the guided
/// roundings start from that wider set.
/// Measured on generated weeks (2026-12-03): the wider set gained 0.5–6.5 % where the first
/// rounding's gap was 3.6–12.6 % (300 and 700 sites at 1× supply); on the 35,000-site week
/// (gap 1.2 %) the first rounding went from 91,854,529 to 92,067,520 (+0.23 %) for 5 s more
/// per `plan`; on the 1,000- and 3,000-site weeks (gaps 2.5 % and 1.6 %) it gained nothing
/// and 0.03 % for 0.7 s and 2.5 s more. Below 1 % (every 6×-supply week) it is not tried.
const WIDEN_GAP: f64 = 0.01;

/// Candidate sites per LP support site in the widened rounding (near misses first, then the
/// sites whose best first vial comes closest to paying for the duals). Measured on the
/// generated 1×-supply weeks: 2 lifts the 700-site, 6-facility week by 6.5 % and the
/// 5-facility one by 3.4 % over near misses alone; 1.25 and 1.5 lift them by about half that.
/// Not the default rounding: at 6× supply the wider set adds 2–5 s to a 1-second rounding
/// (every extra site is a failed open-and-refill in the local search) and gains nothing.
const WIDE_CANDIDATES_PER_SUPPORT_SITE: f64 = 2.0;

/// The candidate sites `cand` (by site position) and every site with vials in `start` (vials
/// per arc): the candidates of a rounding that starts from `start`.
fn with_sites_of(inst: &instance::Instance, cand: &[bool], start: &[f64]) -> Vec<bool> {
    (0..inst.sites.len())
        .map(|sp| cand[sp] || inst.sites[sp].arcs.iter().any(|&a| start[a] > 0.0))
        .collect()
}

/// Keeps the whole-vial plan `other` in `x` (and its objective in `lower`) when it is worth
/// more than `lower` by more than 1e-9 relative.
fn keep_better(
    inst: &instance::Instance,
    scenario: &Scenario,
    other: Vec<u32>,
    x: &mut Vec<u32>,
    lower: &mut f64,
) {
    let value = objective_of(inst, scenario, &shipments_of(inst, &other));
    if value > *lower + 1e-9 * lower.abs().max(1.0) {
        *x = other;
        *lower = value;
    }
}

/// The shipments of whole vials `x` per arc of `inst`, in [`Shipment::order_key`] order.
fn shipments_of(inst: &instance::Instance, x: &[u32]) -> Vec<Shipment> {
    let mut shipments: Vec<Shipment> = x
        .iter()
        .enumerate()
        .filter(|(_, v)| **v > 0)
        .map(|(a, &v)| Shipment {
            arc: inst.arcs[a].clone(),
            vials: v,
        })
        .collect();
    shipments.sort_by_key(Shipment::order_key);
    shipments
}

/// The LP relaxation over every usable arc, as free MPS (maximisation, `OBJSENSE MAX`), with
/// columns and rows named after domain ids. Its optimum is [`Allocation::lp_bound`] (the
/// working set of `allocate` reaches the same optimum; pricing certifies it).
pub fn export_mps(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
) -> Result<String, AllocError> {
    let inst = instance::Instance::new(scenario, priority, arcs, opts)?;
    let built = master::build_model(&inst, &vec![true; inst.arcs.len()]);
    Ok(mps::write_mps(&built.model))
}

/// How far a plan worth `objective` can be from the best whole-vial plan, given an upper
/// `bound` on it: `1 − objective / bound`, at least 0, and 0 when the bound is 0 (nothing to
/// allocate).
pub fn gap(objective: f64, bound: f64) -> f64 {
    if bound.abs() > 1e-12 {
        (1.0 - objective / bound).max(0.0)
    } else {
        0.0
    }
}

/// Plans the week in whole vials: LP relaxation (`opts.solver`) with working-set pricing, then
/// rounding and repair (see `docs/model.md`).
///
/// Complexity: each LP round is an interior-point solve over the working set (roughly
/// O(nnz^1.2) in practice); pricing is O(arcs) per round; rounding is O(budget).
pub fn allocate(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
) -> Result<Allocation, AllocError> {
    run(scenario, priority, arcs, opts, None, false).map(|(a, _)| a)
}

/// [`allocate`], also returning what its LP solved (`None` when no arc is usable), for an
/// [`allocate_from`] of the same week with some arcs excluded.
pub fn allocate_keeping_lp(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
) -> Result<(Allocation, Option<LpSolve>), AllocError> {
    run(scenario, priority, arcs, opts, None, true)
}

/// Plans the week again without solving the LP, for `opts.excluded` arcs left out of an
/// earlier solve (the route feedback): the rounding starts from `opts.warm_plan` (else the
/// earlier LP's vials) with candidates from the earlier LP's vials and duals, and `lp_bound`,
/// `bound`, the marginal values and the binding rows are the earlier solve's. Leaving arcs out
/// only shrinks the set of plans, so the earlier bounds stay upper bounds, and they are the
/// optimum of the model `export-model` writes. When leaving the arcs out changed the share
/// floor or a force (either can loosen the problem), the LP is solved again instead.
pub fn allocate_from(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
    earlier: &LpSolve,
) -> Result<Allocation, AllocError> {
    run(scenario, priority, arcs, opts, Some(earlier), false).map(|(a, _)| a)
}

/// What an LP solve of a week leaves for [`allocate_from`]: its vials and duals, bounds,
/// marginal values, binding rows, notes and working set, and the share floor and forces it
/// was solved with.
#[derive(Clone, Debug)]
pub struct LpSolve {
    /// LP vials by arc (index into `Arcs::arcs`), the positive ones.
    x: std::collections::BTreeMap<usize, f64>,
    res_dual: std::collections::BTreeMap<instance::Resource, f64>,
    share_dual: f64,
    lp_bound: f64,
    bound: f64,
    marginal: Vec<f64>,
    binding: Vec<Binding>,
    /// The notes the LP step wrote (pricing, shortfalls, the share floor's dual).
    notes: Vec<Note>,
    working_set: Vec<usize>,
    share: Option<f64>,
    forces: Vec<(SiteIdx, Option<instance::Force>)>,
}

/// The share floor and forces of an instance, as [`LpSolve`] keeps them.
fn floor_and_forces(
    inst: &instance::Instance,
) -> (Option<f64>, Vec<(SiteIdx, Option<instance::Force>)>) {
    (
        inst.share,
        inst.sites
            .iter()
            .filter(|s| s.force.is_some())
            .map(|s| (s.site, s.force))
            .collect(),
    )
}

/// The rounding's start from an earlier plan's vials per shipment (0 on arcs it did not use or
/// that are no longer usable); its sites join the candidates.
fn start_from_plan(
    inst: &instance::Instance,
    plan: &std::collections::BTreeMap<ShipmentKey, u32>,
    cand: &mut [bool],
) -> Vec<f64> {
    let start: Vec<f64> = inst
        .arcs
        .iter()
        .map(|a| {
            plan.get(&result::order_key(a))
                .map_or(0.0, |&v| f64::from(v))
        })
        .collect();
    for (c, site) in cand.iter_mut().zip(&inst.sites) {
        *c = *c || site.arcs.iter().any(|&a| start[a] > 0.0);
    }
    start
}

fn run(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
    earlier: Option<&LpSolve>,
    keep_lp: bool,
) -> Result<(Allocation, Option<LpSolve>), AllocError> {
    let inst = instance::Instance::new(scenario, priority, arcs, opts)?;
    let mut notes = inst.notes.clone();
    let n = scenario.sites.len();
    let mut working_set = Vec::new();
    let mut kept = None;
    let (share, forces) = floor_and_forces(&inst);
    let earlier = earlier.filter(|e| e.share == share && e.forces == forces);
    let (x, lp_bound, bound, marginal, binding) = if inst.arcs.is_empty() {
        notes.push(Note::new(if scenario.total_supply_vials() == 0 {
            NoteKind::NoSupply
        } else {
            NoteKind::NothingReachable
        }));
        (
            Vec::new(),
            0.0,
            0.0,
            vec![0.0; scenario.facilities.len()],
            Vec::new(),
        )
    } else if let Some(e) = earlier {
        let lp_x: Vec<f64> = inst
            .source
            .iter()
            .map(|src| e.x.get(src).copied().unwrap_or(0.0))
            .collect();
        let res_dual: Vec<f64> = inst
            .resources
            .iter()
            .map(|r| e.res_dual.get(r).copied().unwrap_or(0.0))
            .collect();
        notes.extend(e.notes.iter().cloned());
        let mut cand = rounding::candidates(&inst, &lp_x, &res_dual, e.share_dual, 0.0);
        let start = if opts.warm_plan.is_empty() {
            lp_x
        } else {
            start_from_plan(&inst, &opts.warm_plan, &mut cand)
        };
        let x = rounding::round(&inst, &start, &cand, opts.rounding_budget);
        let x = rounding::polish_windows(&inst, &x, &cand);
        working_set = e.working_set.clone();
        (
            x,
            e.lp_bound,
            e.bound,
            e.marginal.clone(),
            e.binding.clone(),
        )
    } else {
        let lp_notes = notes.len();
        let relax = master::solve_relaxation(&inst, opts).map_err(|source| AllocError::Solver {
            scenario: scenario.name.clone(),
            source,
        })?;
        opts.progress.report(crate::progress::Step::WholeVials);
        if relax.priced {
            notes.push(Note::new(NoteKind::LpPriced {
                working_arcs: relax.working_set.len(),
                arcs: inst.arcs.len(),
                working_sites: relax.in_set.iter().filter(|b| **b).count(),
                sites: inst.sites.len(),
                rounds: relax.rounds,
            }));
        } else if opts.pricing {
            notes.push(Note::new(NoteKind::LpWhole {
                arcs: inst.arcs.len(),
            }));
        }
        let scale = inst.force_penalty_per_vial / 10.0;
        let tol = 1e-6 * scale.max(1e-9);
        let sol = &relax.solution;
        for &(sp, slack, _) in &relax.built.force_rows {
            let short = sol.values[slack];
            if short > 1e-6 {
                notes.push(Note::new(NoteKind::ForceShort {
                    site: scenario.sites[inst.sites[sp].site].id.clone(),
                    shortfall: match inst.sites[sp].force {
                        Some(instance::Force::Wasps(_)) => Shortfall::Wasps(short),
                        _ => Shortfall::Vials(short),
                    },
                    penalty_per_vial: inst.force_penalty_per_vial,
                }));
            }
        }
        let mut marginal = vec![0.0f64; scenario.facilities.len()];
        for (r, res) in inst.resources.iter().enumerate() {
            if let instance::Resource::Supply(f, _) = res {
                marginal[*f] = marginal[*f].max(relax.res_dual[r].max(0.0));
            }
        }
        let mut binding: Vec<Binding> = relax
            .built
            .model
            .rows
            .iter()
            .zip(&relax.built.row_kind)
            .zip(&sol.duals)
            .filter(|(_, d)| d.abs() > tol)
            .map(|((r, kind), d)| Binding {
                name: r.name.clone(),
                kind: kind.clone(),
                dual: *d,
            })
            .collect();
        binding.sort_by(|a, b| {
            b.dual
                .abs()
                .total_cmp(&a.dual.abs())
                .then(a.name.cmp(&b.name))
        });
        if let Some(s) = inst.share
            && relax.share_dual.abs() > tol
        {
            let requests = inst
                .sites
                .iter()
                .filter(|s| s.kind == crate::scenario::SiteKind::Dooryard)
                .count() as u64;
            notes.push(Note::new(NoteKind::ShareBinds {
                share: s,
                requests,
                per_request: inst.per_request,
                cost_per_vial: -relax.share_dual,
            }));
        }
        let mut cand =
            rounding::candidates(&inst, &relax.x, &relax.res_dual, relax.share_dual, 0.0);
        // A re-solve rounds from the earlier plan (`AllocOptions::warm_plan`), else from the LP.
        let warm = !opts.warm_plan.is_empty();
        let from_plan = warm.then(|| start_from_plan(&inst, &opts.warm_plan, &mut cand));
        let start = from_plan.as_deref().unwrap_or(&relax.x);
        let mut x = rounding::round(&inst, start, &cand, opts.rounding_budget);
        let mut lower = objective_of(&inst, scenario, &shipments_of(&inst, &x));
        // The release LP below runs only when the plan ends more than `WIDEN_GAP` below the
        // bound, which the bound's descent decides. When it may (the plan is that far below
        // the LP bound, which the bound never exceeds), it starts on a thread of its own beside
        // the descent and is stopped when the descent rules it out: the same plan, with the
        // descent's time taken off the LP's (docs/performance.md, fifteenth session). Only
        // with clarabel, whose solve can be stopped; with HiGHS it runs after the descent.
        let release_lp = |stop: Option<&Arc<AtomicBool>>| {
            releases::release_lp_start(
                &inst,
                &relax.res_dual,
                relax.share_dual,
                &cand,
                &x,
                opts.solver,
                stop,
            )
        };
        let stop = Arc::new(AtomicBool::new(false));
        let ((bound, guides, mut descent), early) = std::thread::scope(|scope| {
            let early = (!warm
                && opts.solver == model::Solver::Clarabel
                && gap(lower, sol.objective) > WIDEN_GAP)
                .then(|| scope.spawn(|| release_lp(Some(&stop))));
            let descent = bound::whole_vial_bound(
                &inst,
                &relax.res_dual,
                relax.share_dual,
                lower,
                bound_steps(opts.bound_steps, inst.arcs.len()),
            );
            if gap(lower, descent.0.min(sol.objective)) <= WIDEN_GAP {
                stop.store(true, Ordering::Relaxed);
            }
            let early = early.map(|h| h.join().unwrap_or_else(|p| std::panic::resume_unwind(p)));
            (descent, early)
        });
        let bound = bound.min(sol.objective);
        // Far from the bound: round again from the release LP (`releases.rs`), whose columns
        // are whole releases rather than arc flows. A heuristic start: when its LP cannot be
        // solved, the plan so far stands.
        if !warm
            && gap(lower, bound) > WIDEN_GAP
            && let Ok(Some((start, _))) = early.unwrap_or_else(|| release_lp(None))
        {
            let x2 = rounding::round(
                &inst,
                &start,
                &with_sites_of(&inst, &cand, &start),
                opts.rounding_budget,
            );
            keep_better(&inst, scenario, x2, &mut x, &mut lower);
        }
        // Still far from the bound: round again from the LP's vials with a wider set of
        // alternates (`WIDEN_GAP`), which the guided roundings below then also start from.
        if !warm && gap(lower, bound) > WIDEN_GAP {
            let wide = rounding::candidates(
                &inst,
                &relax.x,
                &relax.res_dual,
                relax.share_dual,
                WIDE_CANDIDATES_PER_SUPPORT_SITE,
            );
            if wide != cand {
                let x2 = rounding::round(&inst, &relax.x, &wide, opts.rounding_budget);
                keep_better(&inst, scenario, x2, &mut x, &mut lower);
                cand = wide;
            }
        }
        // More roundings from the Lagrangian releases (at the LP's duals and at the best
        // prices), the best kept: where the LP spreads vials that whole releases cannot
        // split, they start from whole releases.
        let guided = if !warm && small_pack_days(&inst) {
            &guides[..]
        } else {
            &[]
        };
        for guide in guided {
            if gap(lower, bound) <= GUIDE_GAP {
                break;
            }
            let x2 = rounding::round(
                &inst,
                guide,
                &with_sites_of(&inst, &cand, guide),
                opts.rounding_budget,
            );
            keep_better(&inst, scenario, x2, &mut x, &mut lower);
        }
        // Still above the gap the roundings aim for: the bound's descent goes on under a finer
        // progress rule from where it stopped. Only the bound moves; the plan is final.
        let bound = if gap(lower, bound) > WIDEN_GAP {
            bound.min(bound::tighten(&inst, &mut descent, lower))
        } else {
            bound
        };
        let x = rounding::polish_windows(&inst, &x, &cand);
        working_set = relax.working_set.clone();
        kept = keep_lp.then(|| LpSolve {
            x: inst
                .source
                .iter()
                .zip(&relax.x)
                .filter(|(_, v)| **v > 0.0)
                .map(|(&src, &v)| (src, v))
                .collect(),
            res_dual: inst
                .resources
                .iter()
                .cloned()
                .zip(relax.res_dual.iter().copied())
                .collect(),
            share_dual: relax.share_dual,
            lp_bound: sol.objective,
            bound,
            marginal: marginal.clone(),
            binding: binding.clone(),
            notes: notes[lp_notes..].to_vec(),
            working_set: working_set.clone(),
            share,
            forces,
        });
        (x, sol.objective, bound, marginal, binding)
    };
    let shipments = shipments_of(&inst, &x);
    let objective = objective_of(&inst, scenario, &shipments);
    let mut vials = vec![0u32; n];
    let mut alive = vec![0.0; n];
    for sh in &shipments {
        vials[sh.arc.site] += sh.vials;
        alive[sh.arc.site] += sh.wasps_expected_alive();
    }
    let forbidden: BTreeSet<SiteIdx> = scenario
        .overrides
        .iter()
        .filter(|o| o.action == OverrideAction::Forbid)
        .map(|o| o.site)
        .collect();
    let has_usable: BTreeSet<SiteIdx> = inst.sites.iter().map(|s| s.site).collect();
    let sites = (0..n)
        .map(|s| {
            let reason = if vials[s] > 0 {
                None
            } else if forbidden.contains(&s) {
                Some(Reason::Forbidden)
            } else if let Some(r) = arcs.no_arc_reason[s] {
                Some(r)
            } else if priority[s] == 0.0 {
                Some(Reason::LowPriority)
            } else if !has_usable.contains(&s) {
                // Every arc was excluded by dispatch (a stop no route served, or a new stop
                // on a depot-day whose routes were full), or none has supply or capacity.
                Some(
                    if opts.excluded.iter().any(|k| k.2 == s)
                        || inst.kept_off_full_days.contains(&s)
                    {
                        Reason::Undeliverable
                    } else {
                        Reason::OutOfReach
                    },
                )
            } else {
                Some(Reason::BelowCutoff)
            };
            SiteOutcome {
                site: s,
                priority: priority[s],
                eligible: arcs.no_arc_reason[s].is_none() && !forbidden.contains(&s),
                reason,
                vials: vials[s],
                wasps_expected_alive: alive[s],
            }
        })
        .collect();
    let supply = scenario.total_supply_vials();
    let shipped: u64 = shipments.iter().map(|s| u64::from(s.vials)).sum();
    if supply > 0 && shipped < supply && !inst.arcs.is_empty() {
        notes.push(Note::new(NoteKind::SupplyUnused { shipped, supply }));
    }
    check_bound_order(&scenario.name, objective, bound, lp_bound)?;
    let gap = gap(objective, bound);
    Ok((
        Allocation {
            shipments,
            sites,
            lp_bound,
            bound,
            objective,
            gap,
            marginal_value_per_vial: marginal,
            binding,
            notes,
            working_set,
        },
        kept,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::arcs::Arc;
    use crate::scenario::fixture::tiny;

    #[test]
    fn small_pack_days_compare_a_pack_day_with_one_target_release() {
        let s = tiny();
        let arcs = Arcs {
            arcs: vec![
                synthetic::same_day_arc(&s, 0, 0, Mode::Route),
                synthetic::same_day_arc(&s, 0, 1, Mode::Route),
            ],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let small = |vials: u32| {
            let mut s2 = s.clone();
            for sup in &mut s2.supply {
                sup.vials = vials;
            }
            let inst = instance::Instance::new(&s2, &priority, &arcs, &AllocOptions::default())
                .expect("valid");
            small_pack_days(&inst)
        };
        // Target 400 wasps: 4 vials at F1 (100 a vial), 3.33 at F2 (120): 7.33 over the two
        // Monday rows the arcs draw on, against 2 × the pack day's vials.
        assert!(small(3));
        assert!(!small(4));
        assert!(!small(6));
    }

    #[test]
    fn an_arc_that_cannot_carry_one_whole_release_is_left_out() {
        // tiny(): minimum release 150 wasps, maximum 800, 2 vials a request; the arcs carry
        // 90 live wasps a vial, so a block release needs 2 vials, like a request.
        let s = tiny();
        let block = synthetic::same_day_arc(&s, 0, 0, Mode::Route);
        let request = synthetic::same_day_arc(&s, 6, 0, Mode::Route);
        let mut strong = synthetic::same_day_arc(&s, 1, 0, Mode::Route);
        strong.wasps_alive_per_vial = 900.0; // one vial is over the maximum release
        let arcs = Arcs {
            arcs: vec![block, request, strong],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let usable = |monday: u32| {
            let mut s2 = s.clone();
            for sup in &mut s2.supply {
                if sup.date == s2.week_start {
                    sup.vials = monday;
                }
            }
            let inst = instance::Instance::new(&s2, &priority, &arcs, &AllocOptions::default())
                .expect("valid");
            let left_out = inst.notes.iter().find_map(|n| match n.kind {
                NoteKind::ArcsWithoutWholeRelease { arcs } => Some(arcs),
                _ => None,
            });
            (inst.arcs.len(), left_out)
        };
        assert_eq!(usable(1), (0, Some(3)));
        assert_eq!(usable(2), (2, Some(1)));
        assert_eq!(usable(6), (2, Some(1)));
    }

    #[test]
    fn tiny_fixture_plan_is_whole_and_explained() {
        let s = tiny();
        let d = s.week_start;
        let mk = |site: SiteIdx, mode: Mode| Arc {
            facility: 0,
            pack_date: d,
            dispatch_date: d,
            site,
            mode,
            eta: d.and_hms_opt(9, 0, 0).expect("valid"),
            release_by: d.and_hms_opt(23, 0, 0).expect("valid"),
            survival: 0.95,
            wasps_alive_per_vial: 95.0,
            drive_minutes: 20.0,
        };
        let mut no_arc_reason = vec![Some(Reason::OutOfReach); s.sites.len()];
        for i in [0, 1, 7] {
            no_arc_reason[i] = None;
        }
        let arcs = Arcs {
            arcs: vec![mk(0, Mode::Route), mk(1, Mode::Route), mk(7, Mode::Parcel)],
            no_arc_reason,
        };
        let mut priority = vec![1.0; s.sites.len()];
        priority[1] = 0.0;
        let a = allocate(&s, &priority, &arcs, &AllocOptions::default()).expect("valid");
        // F1 packs 6 vials on Monday: 2 to request R2 (share ≥ 0.1), 4 to block B1.
        assert_eq!(a.sites[7].vials, 2);
        assert_eq!(a.sites[0].vials, 4);
        assert_eq!(a.sites[1].reason, Some(Reason::LowPriority));
        assert_eq!(a.sites[2].reason, Some(Reason::OutOfReach));
        let again = plan_objective(&s, &priority, &arcs, &AllocOptions::default(), &a.shipments)
            .expect("valid");
        assert!((again - a.objective).abs() < 1e-9);
        assert!(a.objective <= a.lp_bound + 1e-6);
        assert!(a.marginal_value_per_vial[0] > 0.0);
        assert!(a.binding.iter().any(|b| b.name == "supply_F1_2027-03-01"));
    }
}
