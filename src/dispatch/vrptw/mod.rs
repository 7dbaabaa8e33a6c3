//! A vehicle-routing engine with time windows (VRPTW) on an abstract instance.
//!
//! Node 0 is the depot, nodes 1..=n the customers. Each customer has a demand (vials), a
//! service time (minutes), a window for the *start* of service (arriving early means waiting)
//! and a hard deadline (the start of service must not be later; the effective latest start is
//! `min(latest, deadline)`). Every vehicle has its own capacity, start time and latest return;
//! all leave from and return to node 0. All times are minutes from a common origin.
//!
//! Objective, lexicographic: serve as many customers as possible (a customer is left out only
//! when no route can take it, and is then reported with a reason), then minimise total drive
//! minutes, then the number of vehicles used.
//!
//! One file per concern:
//! * `segment.rs` — **feasibility in O(1)**: every route keeps, for each
//!   prefix and suffix, the segment summary of Vidal et al. (2013, "A hybrid genetic algorithm
//!   with adaptive diversity management for a large class of vehicle routing problems with
//!   time-windows", Computers & OR 40) — duration, earliest and latest feasible start of the
//!   first service, time warp, load and drive minutes — *without* the depot. A route is judged
//!   only by putting the judged vehicle's own departure and end of shift around a run, so a
//!   move that hands customers from one vehicle to another checks each new route against the
//!   vehicle that will drive it. This is the forward-time-slack test of Savelsbergh (1992) in
//!   segment form.
//! * `construct.rs` — Solomon's (1987) I1 sequential insertion (α1 = 1, μ = 1, λ = 1), once
//!   per distinct opening order of vehicle kinds (fleet order, longest shift first, most
//!   capacity first); O(n² · (n + V)) each.
//! * `state.rs` — the solution under search: one route slot per vehicle, cheapest insertion
//!   (with a choice of vehicle), the reason a customer fits nowhere.
//! * `moves_within.rs`, `moves_between.rs`, `moves_vehicle.rs` — first-improvement local
//!   search over each customer's `neighbours` nearest (ranked by drive both ways plus the
//!   waiting the pair forces): relocate of 1–3 consecutive customers (both orientations,
//!   within and between routes), exchange, 2-opt inside a route, 2-opt* between routes, and a
//!   customer alone onto an unused vehicle. Wherever a new route does not fit its vehicle, the
//!   two vehicles may swap or one route may move to an unused vehicle of another kind (one of
//!   each distinct capacity, start and latest return is tried). One pass is O(n · k · L) for
//!   route length L (O(n · k) for moves between routes, times the kinds tried on a failure).
//! * `perturb.rs` — the perturbation: one round in ten first splits a route onto an unused
//!   vehicle (the only step that adds a vehicle, since splitting never shortens drive by
//!   itself); then ruin a customer's neighbourhood (3–15 nearest), 1–3 strings of
//!   consecutive customers from different routes (string removal) or, one round in ten, a
//!   whole route; then recreate greedily in one of four orders or by regret-2
//!   insertion; routes may move to an unused vehicle of another kind, and one unused vehicle
//!   of each kind is tried (after a whole-route ruin, only for customers no route can take).
//! * `search.rs` — the driver: the best construction, then two independent searches with
//!   their own seeds, then the better of them goes on; each round perturbs and runs the local
//!   search from the customers the perturbation moved or gave new neighbours (a don't-look
//!   rule at customer level; a new best gets one full pass), and a late-acceptance rule (Burke & Bykov 2017, "The late acceptance
//!   hill-climbing heuristic", EJOR 258) keeps the candidate when it is no longer than the
//!   current solution or than the current solution of 300 rounds ago, always keeping the best.
//!   The second start searches *penalised*, as PyVRP's search does (Wouda, Lan & Kool 2024,
//!   "PyVRP: a high-performance VRP solver package", INFORMS J. Computing 36(4); reference
//!   from memory): its rounds
//!   may recreate and move through routes that arrive after a window closes or return after
//!   the end of shift, priced at drive plus a weight times the time warp, the weight adapting
//!   so that about 65 % of rounds end feasible and a late round being re-searched half the
//!   time under ten times the weight; only routes that fit become the best, so every returned
//!   route fits its vehicle. Tight windows wall a feasible-only search into local optima
//!   (Solomon RC101: 1,638–1,652 with 16 vehicles; penalised 1,624–1,635 with 15). The
//!   last stretch searches feasible-only again (on wide windows the penalised search settles on
//!   fewer, longer routes).
//!
//! Work limits end the search: `max_iterations` perturbation rounds in all, or `stall_rounds`
//! in a row without a new best (30 per customer when that is fewer), counted across the
//! starts and the rounds the better start goes on for when that start serves everyone. The
//! same instance and seed give the same routes on any machine. A wall-clock `time_limit` exists only as an
//! explicit option (default `None`); when it binds, [`Solution::time_limited`] says so.

use std::time::Duration;

mod construct;
mod moves_between;
mod moves_vehicle;
mod moves_within;
mod perturb;
mod search;
mod segment;
mod state;

#[cfg(test)]
mod tests;

/// One customer (node i ≥ 1) of an [`Instance`].
#[derive(Clone, Debug, PartialEq)]
pub struct Customer {
    /// Vials to deliver.
    pub demand_vials: u32,
    /// Minutes spent at the customer.
    pub service_minutes: f64,
    /// Earliest start of service, minutes (arriving earlier waits).
    pub earliest: f64,
    /// Latest start of service by the time window, minutes.
    pub latest: f64,
    /// Hard deadline for the start of service, minutes (e.g. the vials' release-by time).
    pub deadline: f64,
}

impl Customer {
    /// min(latest, deadline), minutes.
    pub(crate) fn latest_start(&self) -> f64 {
        self.latest.min(self.deadline)
    }
}

/// One vehicle of an [`Instance`].
#[derive(Clone, Debug, PartialEq)]
pub struct VehicleSpec {
    /// Most vials on board.
    pub capacity_vials: u32,
    /// Departure from the depot, minutes.
    pub start: f64,
    /// Latest return to the depot, minutes (end of shift).
    pub latest_return: f64,
}

/// An abstract VRPTW instance.
#[derive(Clone, Debug, PartialEq)]
pub struct Instance {
    /// Customers; `customers[i - 1]` is node i.
    pub customers: Vec<Customer>,
    /// `minutes[i][j]`: drive from node i to node j (node 0 = depot), square with
    /// `customers.len() + 1` rows; need not be symmetric. Short rows or non-finite values make
    /// the arc unusable.
    pub minutes: Vec<Vec<f64>>,
    /// The fleet; route `vehicle` fields index this.
    pub vehicles: Vec<VehicleSpec>,
}

/// Search settings for [`solve`].
#[derive(Clone, Debug, PartialEq)]
pub struct SolveOptions {
    /// Seed for the perturbation choices.
    pub seed: u64,
    /// Wall-clock budget; `None` for the iteration cap only. A binding limit makes the result
    /// depend on the machine's speed.
    pub time_limit: Option<Duration>,
    /// Most perturbation rounds after the first local optimum.
    pub max_iterations: u32,
    /// Nearest neighbours per customer considered by the local search (≥ 1).
    pub neighbours: usize,
    /// Stop after this many perturbation rounds in a row without a new best solution, or 30
    /// per customer when that is fewer (`u32::MAX`: 30 per customer). Small depot-days
    /// converge long before `max_iterations`.
    pub stall_rounds: u32,
}

impl Default for SolveOptions {
    /// Seed 1, no time limit, 12,000 rounds, 12 neighbours, stop after 3,000 rounds without a
    /// new best (30 per customer when that is fewer).
    fn default() -> Self {
        SolveOptions {
            seed: 1,
            time_limit: None,
            max_iterations: 12_000,
            neighbours: 12,
            stall_rounds: 3_000,
        }
    }
}

/// Why a customer could not be placed on any route.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Infeasibility {
    /// Its demand exceeds every vehicle's free capacity.
    Capacity,
    /// No vehicle can reach it and be back inside its shift.
    Shift,
    /// Service could not start by its deadline.
    Deadline,
    /// Service could not start inside its time window.
    Window,
}

impl Infeasibility {
    /// `capacity`, `shift`, `deadline` or `window`.
    pub fn as_str(self) -> &'static str {
        match self {
            Infeasibility::Capacity => "capacity",
            Infeasibility::Shift => "shift",
            Infeasibility::Deadline => "deadline",
            Infeasibility::Window => "window",
        }
    }
}

/// One vehicle's route in a [`Solution`].
#[derive(Clone, Debug, PartialEq)]
pub struct RoutePlan {
    /// Index into `Instance::vehicles`.
    pub vehicle: usize,
    /// Customer nodes (1-based) in visiting order.
    pub customers: Vec<usize>,
    /// Arrival at each customer, minutes.
    pub arrival: Vec<f64>,
    /// Start of service at each customer (arrival or window opening), minutes.
    pub service_start: Vec<f64>,
    /// Departure from the depot (the vehicle's start), minutes.
    pub depart: f64,
    /// Return to the depot, minutes.
    pub return_at: f64,
    /// Drive minutes (excluding service and waiting).
    pub drive_minutes: f64,
    /// Vials on board at departure.
    pub load_vials: u32,
}

/// The routes found and the customers left out.
#[derive(Clone, Debug, PartialEq)]
pub struct Solution {
    /// Non-empty routes in vehicle order.
    pub routes: Vec<RoutePlan>,
    /// Customers (1-based) no route could take, ascending, with the most telling reason.
    pub unserved: Vec<(usize, Infeasibility)>,
    /// Sum of the routes' drive minutes.
    pub total_drive_minutes: f64,
    /// Whether `time_limit` stopped the search before its round limits: then another run may
    /// give other routes.
    pub time_limited: bool,
}

impl Solution {
    /// Vehicles used (non-empty routes).
    pub fn vehicles_used(&self) -> usize {
        self.routes.len()
    }
}

/// Solves `inst` (see the module doc for method and complexity). Deterministic for a given
/// `opts.seed` unless `opts.time_limit` binds. Never panics on odd input: customers that no
/// vehicle can serve alone are reported as unserved.
///
/// ```
/// use broodcast::dispatch::vrptw::{Customer, Instance, SolveOptions, VehicleSpec, solve};
/// let stop = |earliest: f64, latest: f64| Customer {
///     demand_vials: 2,
///     service_minutes: 5.0,
///     earliest,
///     latest,
///     deadline: 600.0,
/// };
/// let inst = Instance {
///     // Two stops 10 minutes from the depot and 10 apart; the second only opens at 100.
///     customers: vec![stop(0.0, 600.0), stop(100.0, 200.0)],
///     minutes: vec![
///         vec![0.0, 10.0, 10.0],
///         vec![10.0, 0.0, 10.0],
///         vec![10.0, 10.0, 0.0],
///     ],
///     vehicles: vec![VehicleSpec { capacity_vials: 3, start: 0.0, latest_return: 480.0 }; 2],
/// };
/// let opts = SolveOptions { time_limit: None, ..SolveOptions::default() };
/// let sol = solve(&inst, &opts);
/// // 4 vials do not fit one 3-vial van: two routes, each out and back.
/// assert_eq!(sol.vehicles_used(), 2);
/// assert_eq!(sol.total_drive_minutes, 40.0);
/// assert_eq!(sol.routes[1].service_start, vec![100.0]); // waited for the window
/// ```
pub fn solve(inst: &Instance, opts: &SolveOptions) -> Solution {
    let data = segment::Data::new(inst, opts.neighbours.max(1));
    search::run(&data, opts)
}
