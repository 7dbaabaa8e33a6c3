//! Step 1 of the allocation: the instance (formulation and symbols: `docs/model.md`).
//!
//! [`Instance`] gathers, once, everything the LP, the pricing, the rounding and the bound
//! share: the usable arcs (excluded, forbidden and worthless arcs removed, each class counted
//! in a note), the shared resources each arc draws on (supply per facility and pack day;
//! vehicle capacity per depot and day, or the parcel cap per day), the site release limits,
//! the forces and the dooryard share floor as kept (lowered or dropped with a note).

use std::collections::{BTreeMap, BTreeSet, HashMap};

use chrono::NaiveDate;

use super::constraint::ConstraintKind;
use super::note::{Note, NoteKind};
use super::{AllocError, AllocOptions};
use crate::arcs::{Arc, Arcs, Mode};
use crate::scenario::{FacilityIdx, OverrideAction, Scenario, SiteIdx, SiteKind};

/// A shared resource row.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) enum Resource {
    /// Vials packed at a facility on a day.
    Supply(FacilityIdx, NaiveDate),
    /// Vials the depot's vehicles carry on a dispatch day.
    Capacity(FacilityIdx, NaiveDate),
    /// Vials the parcel service takes on a dispatch day.
    Parcel(NaiveDate),
}

/// What a force override asks of a site, in the LP's units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum Force {
    /// Σ vials ≥ this many vials.
    Vials(f64),
    /// Σ expected live wasps ≥ this many wasps (a block forced without a count: the minimum).
    Wasps(f64),
}

/// One site's data for the model.
#[derive(Clone, Debug)]
pub(crate) struct SiteData {
    pub site: SiteIdx,
    pub kind: SiteKind,
    pub priority: f64,
    /// Usable arc indices (into `Instance::arcs`).
    pub arcs: Vec<usize>,
    pub force: Option<Force>,
}

/// Everything the LP and the rounding share.
#[derive(Clone, Debug)]
pub(crate) struct Instance<'a> {
    pub scenario: &'a Scenario,
    /// Usable arcs, in `Arcs` order.
    pub arcs: Vec<&'a Arc>,
    /// Index into `Arcs::arcs` of each usable arc.
    pub source: Vec<usize>,
    /// Travel cost per vial on each usable arc, objective units.
    pub cost: Vec<f64>,
    /// Resource indices each usable arc draws one vial from: supply, then capacity or parcel.
    pub arc_res: Vec<[usize; 2]>,
    pub resources: Vec<Resource>,
    /// Vials available per resource.
    pub res_rhs: Vec<f64>,
    /// Right-hand side of each resource row as the LP and the exported model hold it, vials:
    /// `res_rhs` clipped where it can never bind ([`resource_rhs_in_lp`]).
    pub lp_rhs: Vec<f64>,
    /// Sites with at least one usable arc (or a force), by ascending `SiteIdx`.
    pub sites: Vec<SiteData>,
    /// Position in `sites` of each usable arc's site.
    pub arc_site: Vec<usize>,
    /// Dooryard share floor when the row is kept.
    pub share: Option<f64>,
    /// Objective penalty per vial (per wasp for `Force::Wasps`, divided by the best wasps per
    /// vial) of shortfall on a force row.
    pub force_penalty_per_vial: f64,
    pub best_alive_per_vial: f64,
    pub target: f64,
    pub max: f64,
    pub min: f64,
    pub weight2: f64,
    pub per_request: u32,
    /// Releases (arcs with vials) a site may get this week, ≥ 1
    /// (`policy.releases_per_site_week`).
    pub releases_per_site: u32,
    /// Sites with a route arc left out by `AllocOptions::route_stops_only` (a new stop on a
    /// depot-day whose routes were full).
    pub kept_off_full_days: BTreeSet<SiteIdx>,
    pub notes: Vec<Note>,
}

fn date(d: NaiveDate) -> String {
    d.format("%Y-%m-%d").to_string()
}

impl<'a> Instance<'a> {
    /// Checks inputs and gathers the instance. O(A log A) for A arcs.
    pub fn new(
        scenario: &'a Scenario,
        priority: &[f64],
        arcs: &'a Arcs,
        opts: &AllocOptions,
    ) -> Result<Self, AllocError> {
        let n = scenario.sites.len();
        if priority.len() != n {
            return Err(AllocError::PriorityLength {
                scenario: scenario.name.clone(),
                got: priority.len(),
                sites: n,
            });
        }
        if let Some((i, p)) = priority
            .iter()
            .enumerate()
            .find(|(_, p)| !p.is_finite() || **p < 0.0)
        {
            return Err(AllocError::BadPriority {
                scenario: scenario.name.clone(),
                site: scenario.sites[i].id.to_string(),
                value: *p,
            });
        }
        if arcs.no_arc_reason.len() != n {
            return Err(AllocError::ArcsMismatch {
                scenario: scenario.name.clone(),
                message: format!(
                    "no_arc_reason has {} entries for {n} sites",
                    arcs.no_arc_reason.len()
                ),
            });
        }
        let mut notes = Vec::new();
        let agent = &scenario.agent;
        let policy = &scenario.policy;
        let mut forbidden = vec![false; n];
        let mut force: BTreeMap<SiteIdx, Force> = BTreeMap::new();
        for o in &scenario.overrides {
            if o.site >= n {
                continue;
            }
            match o.action {
                OverrideAction::Forbid => forbidden[o.site] = true,
                OverrideAction::Force { vials } => {
                    let f = match (scenario.sites[o.site].kind(), vials) {
                        (SiteKind::Dooryard, _) => {
                            Force::Vials(f64::from(policy.dooryard_vials_per_request))
                        }
                        (SiteKind::Block, Some(v)) => Force::Vials(f64::from(v)),
                        (SiteKind::Block, None) => Force::Wasps(agent.min_release_wasps),
                    };
                    force.insert(o.site, f);
                }
            }
        }
        let mut supply: BTreeMap<(FacilityIdx, NaiveDate), f64> = BTreeMap::new();
        for s in &scenario.supply {
            *supply.entry((s.facility, s.date)).or_default() += f64::from(s.vials);
        }
        let mut capacity: BTreeMap<(FacilityIdx, NaiveDate), f64> = BTreeMap::new();
        for v in &scenario.fleet {
            for d in scenario.week_dates() {
                if v.runs_on(d) {
                    *capacity.entry((v.depot, d)).or_default() += f64::from(v.capacity_vials);
                }
            }
        }
        for (key, &cap) in &opts.route_vials_cap {
            if let Some(c) = capacity.get_mut(key) {
                *c = c.min(f64::from(cap));
            }
        }
        let mut res_index: BTreeMap<Resource, usize> = BTreeMap::new();
        let mut resources = Vec::new();
        let mut res_rhs = Vec::new();
        let mut res_of = |r: Resource, rhs: f64| -> usize {
            *res_index.entry(r.clone()).or_insert_with(|| {
                resources.push(r);
                res_rhs.push(rhs);
                resources.len() - 1
            })
        };
        /// An arc's pack-day supply and its vehicle-day or parcel-day row with that row's
        /// capacity (vials), and the two row indices once a usable arc draws on them.
        struct Rows {
            supply: f64,
            second: Resource,
            second_rhs: f64,
            index: Option<[usize; 2]>,
        }
        let mut rows_of: HashMap<(FacilityIdx, NaiveDate, Mode, NaiveDate), Rows> = HashMap::new();
        let mut usable: Vec<&Arc> = Vec::new();
        let mut source: Vec<usize> = Vec::new();
        let mut arc_res = Vec::new();
        let mut cost = Vec::new();
        let (mut excluded, mut dead, mut no_resource, mut too_small) =
            (0usize, 0usize, 0usize, 0usize);
        let mut no_new_stop = 0usize;
        let mut kept_off_full_days = BTreeSet::new();
        for (i, a) in arcs.arcs.iter().enumerate() {
            if a.site >= n || a.facility >= scenario.facilities.len() {
                return Err(AllocError::ArcsMismatch {
                    scenario: scenario.name.clone(),
                    message: format!(
                        "arc to site {} from facility {} is out of range",
                        a.site, a.facility
                    ),
                });
            }
            if forbidden[a.site] {
                continue;
            }
            if opts
                .excluded
                .contains(&(a.facility, a.dispatch_date, a.site, a.mode))
            {
                excluded += 1;
                continue;
            }
            if a.mode == Mode::Route
                && opts
                    .route_stops_only
                    .get(&(a.facility, a.dispatch_date))
                    .is_some_and(|stops| !stops.contains(&a.site))
            {
                kept_off_full_days.insert(a.site);
                no_new_stop += 1;
                continue;
            }
            // An arc is worth nothing when its vials arrive dead or late, or when the site
            // has no priority and no force.
            if a.wasps_alive_per_vial.is_nan()
                || a.wasps_alive_per_vial <= 0.0
                || a.eta > a.release_by
                || a.dispatch_date < a.pack_date
                || (priority[a.site] == 0.0 && !force.contains_key(&a.site))
            {
                dead += 1;
                continue;
            }
            // The rows an arc draws on, looked up once per (facility, pack day, mode,
            // dispatch day) rather than in three ordered maps per arc (millions of arcs share
            // a few hundred keys).
            let key = (a.facility, a.pack_date, a.mode, a.dispatch_date);
            let rows = rows_of.entry(key).or_insert_with(|| {
                let supply = supply
                    .get(&(a.facility, a.pack_date))
                    .copied()
                    .unwrap_or(0.0);
                let (second, second_rhs) = match a.mode {
                    Mode::Route => (
                        Resource::Capacity(a.facility, a.dispatch_date),
                        capacity
                            .get(&(a.facility, a.dispatch_date))
                            .copied()
                            .unwrap_or(0.0),
                    ),
                    Mode::Parcel => (
                        Resource::Parcel(a.dispatch_date),
                        f64::from(scenario.parcel.max_vials_per_day),
                    ),
                };
                Rows {
                    supply,
                    second,
                    second_rhs,
                    index: None,
                }
            });
            if rows.supply <= 0.0 || rows.second_rhs <= 0.0 {
                no_resource += 1;
                continue;
            }
            if !whole_release_fits(scenario, a, rows.supply, rows.second_rhs) {
                too_small += 1;
                continue;
            }
            // Rows are numbered in the order the first usable arc on them is met.
            let [r0, r1] = *rows.index.get_or_insert_with(|| {
                [
                    res_of(Resource::Supply(a.facility, a.pack_date), rows.supply),
                    res_of(rows.second.clone(), rows.second_rhs),
                ]
            });
            arc_res.push([r0, r1]);
            cost.push(policy.travel_cost_per_hour * a.drive_minutes.max(0.0) / 60.0);
            usable.push(a);
            source.push(i);
        }
        if excluded > 0 {
            notes.push(Note::new(NoteKind::ArcsExcluded { arcs: excluded }));
        }
        if no_new_stop > 0 {
            notes.push(Note::new(NoteKind::ArcsToFullDepotDays {
                arcs: no_new_stop,
            }));
        }
        if dead > 0 {
            notes.push(Note::new(NoteKind::ArcsWithoutValue { arcs: dead }));
        }
        if no_resource > 0 {
            notes.push(Note::new(NoteKind::ArcsWithoutCapacity {
                arcs: no_resource,
            }));
        }
        if too_small > 0 {
            notes.push(Note::new(NoteKind::ArcsWithoutWholeRelease {
                arcs: too_small,
            }));
        }
        // Indexed by site (a map keyed by site cost a tree search per arc: a third of this
        // function on a 35,000-site week); sites without usable arcs stay empty and are
        // skipped below, so sites come in increasing index as before.
        let mut by_site: Vec<Vec<usize>> = vec![Vec::new(); n];
        for (i, a) in usable.iter().enumerate() {
            by_site[a.site].push(i);
        }
        for &s in force.keys() {
            let site = scenario.sites[s].id.clone();
            if forbidden[s] {
                notes.push(Note::new(NoteKind::ForcedAndForbidden { site }));
            } else if by_site[s].is_empty() {
                notes.push(Note::new(NoteKind::ForceWithoutArc {
                    site,
                    reason: arcs.no_arc_reason[s],
                }));
            }
        }
        let mut sites = Vec::new();
        let mut arc_site = vec![0; usable.len()];
        for (s, list) in by_site.into_iter().enumerate() {
            if list.is_empty() {
                continue;
            }
            for &a in &list {
                arc_site[a] = sites.len();
            }
            // A force asking for more vials than the site can hold or reach is trimmed to
            // what exists, with a note, so the LP never sees a count it cannot meet.
            let force = force
                .get(&s)
                .map(|&f| trim_force(scenario, &usable, &list, &res_rhs, &arc_res, f, &mut notes));
            sites.push(SiteData {
                site: s,
                kind: scenario.sites[s].kind(),
                priority: priority[s],
                arcs: list,
                force,
            });
        }
        // A request is served with exactly its standard vials on one arc; every usable arc
        // carries them within max_release_wasps and within its pack day's, vehicle day's or
        // parcel day's whole vials (`whole_release_fits`), so a request with a usable arc can
        // count toward the share floor (e.g. 10,000 vials a request, or pack days of one
        // vial: the floor held every vial at home).
        let per_request = f64::from(policy.dooryard_vials_per_request);
        let servable = |s: &&SiteData| s.kind == SiteKind::Dooryard && !s.arcs.is_empty();
        let has_door = sites.iter().any(|s| servable(&s));
        let share = if policy.dooryard_share_min > 0.0 {
            if has_door {
                // The floor never makes vials stay home: when the requests cannot absorb the
                // share of the week's supply, it is lowered to what they can take: the most
                // requests the pack days serve at once (a matching, `absorb.rs`) × k vials
                // (docs/model.md, "Dooryard share").
                let share = policy.dooryard_share_min.min(1.0);
                let request_days: Vec<Vec<usize>> = sites
                    .iter()
                    .filter(servable)
                    .map(|s| s.arcs.iter().map(|&a| arc_res[a][0]).collect())
                    .collect();
                let per_day: Vec<u64> = resources
                    .iter()
                    .zip(&res_rhs)
                    .map(|(r, &q)| match r {
                        Resource::Supply(..) => ((q + 1e-9) / per_request).floor() as u64,
                        _ => 0,
                    })
                    .collect();
                let requests = super::absorb::most_requests_served(&request_days, &per_day) as f64;
                let absorb = requests * per_request;
                let supply: f64 = resources
                    .iter()
                    .zip(&res_rhs)
                    .filter(|(r, _)| matches!(r, Resource::Supply(..)))
                    .map(|(_, v)| *v)
                    .sum();
                if supply > 0.0 && share * supply > absorb {
                    let lowered = absorb / supply;
                    notes.push(Note::new(NoteKind::ShareLowered {
                        from: share,
                        to: lowered,
                        requests: requests as usize,
                        absorb_vials: absorb as u64,
                        supply_vials: supply as u64,
                    }));
                    Some(lowered)
                } else {
                    Some(share)
                }
            } else {
                notes.push(Note::new(NoteKind::ShareDropped {
                    share: policy.dooryard_share_min,
                }));
                None
            }
        } else {
            None
        };
        let best_alive_per_vial = usable
            .iter()
            .map(|a| a.wasps_alive_per_vial)
            .fold(0.0, f64::max);
        let pmax = sites
            .iter()
            .map(|s| s.priority)
            .fold(0.0, f64::max)
            .max(1.0);
        let mut inst = Instance {
            scenario,
            arcs: usable,
            source,
            cost,
            arc_res,
            resources,
            res_rhs,
            lp_rhs: Vec::new(),
            sites,
            arc_site,
            share,
            // Ten times what any vial can earn elsewhere: a force is met whenever it can be.
            force_penalty_per_vial: 10.0 * pmax * best_alive_per_vial.max(1.0),
            best_alive_per_vial,
            target: agent.target_release_wasps,
            max: agent.max_release_wasps,
            min: agent.min_release_wasps,
            weight2: agent.above_target_weight,
            per_request: policy.dooryard_vials_per_request,
            releases_per_site: policy.releases_per_site_week.max(1),
            kept_off_full_days,
            notes,
        };
        inst.lp_rhs = resource_rhs_in_lp(&inst);
        Ok(inst)
    }

    /// The kind (and so the model name) of a resource row.
    pub fn resource_kind(&self, r: usize) -> ConstraintKind {
        let f = |i: FacilityIdx| self.scenario.facilities[i].id.clone();
        match &self.resources[r] {
            Resource::Supply(i, d) => ConstraintKind::Supply {
                facility: f(*i),
                date: *d,
            },
            Resource::Capacity(i, d) => ConstraintKind::Vehicles {
                depot: f(*i),
                date: *d,
            },
            Resource::Parcel(d) => ConstraintKind::Parcel { date: *d },
        }
    }

    /// MPS-safe name of an arc column.
    pub fn arc_name(&self, a: usize) -> String {
        let arc = self.arcs[a];
        format!(
            "x_{}_{}_{}_{}_{}",
            self.scenario.facilities[arc.facility].id,
            date(arc.pack_date),
            date(arc.dispatch_date),
            self.scenario.sites[arc.site].id,
            arc.mode.as_str()
        )
    }

    /// Piecewise-linear benefit of `wasps` expected alive at site position `s`, objective
    /// units (priority-weighted wasps).
    pub fn benefit(&self, s: usize, wasps: f64) -> f64 {
        let e = wasps.clamp(0.0, self.max);
        let first = e.min(self.target);
        let second = (e - self.target).max(0.0);
        self.sites[s].priority * (first + self.weight2 * second)
    }

    /// Benefit less force shortfall penalties of site position `sp` holding `e` live wasps in
    /// `v` vials: a site's part of the whole-vial objective (the rounding, the whole-vial
    /// bound and `plan_objective` all value sites with it).
    pub fn site_value(&self, sp: usize, e: f64, v: u32) -> f64 {
        let mut val = self.benefit(sp, e);
        match self.sites[sp].force {
            Some(Force::Vials(need)) => {
                val -= self.force_penalty_per_vial * (need - f64::from(v)).max(0.0);
            }
            Some(Force::Wasps(need)) => {
                val -= self.force_penalty_per_vial / self.best_alive_per_vial.max(1.0)
                    * (need - e).max(0.0);
            }
            None => {}
        }
        val
    }

    /// Whether `e` live wasps in `v` vials is a valid whole-vial release at site position
    /// `sp`: nothing, or at most the maximum and, for a block, at least the minimum, for a
    /// request exactly the standard count (relative tolerance 1e-9).
    pub fn release_ok(&self, sp: usize, e: f64, v: u32) -> bool {
        const TOL: f64 = 1e-9;
        if v == 0 {
            return true;
        }
        if e > self.max * (1.0 + TOL) + TOL {
            return false;
        }
        match self.sites[sp].kind {
            SiteKind::Block => e >= self.min * (1.0 - TOL) - TOL,
            SiteKind::Dooryard => v == self.per_request,
        }
    }
}

/// Whether arc `a` can carry one whole release on its own: a request's standard vials, or a
/// block's fewest vials that reach `min_release_wasps` (at least one), within
/// `max_release_wasps` and within the whole vials of its pack day (`supply` vials) and of its
/// vehicle or parcel day (`second` vials). A release is one shipment on one arc, so an arc
/// that fails carries nothing in any whole-vial plan; leaving it out of the LP keeps every
/// whole-vial plan and tightens the relaxation (e.g. a pack day of one vial when a minimum
/// release needs two).
fn whole_release_fits(scenario: &Scenario, a: &Arc, supply: f64, second: f64) -> bool {
    const TOL: f64 = 1e-9;
    let agent = &scenario.agent;
    let alive = a.wasps_alive_per_vial;
    let vials = match scenario.sites[a.site].kind() {
        SiteKind::Dooryard => f64::from(scenario.policy.dooryard_vials_per_request),
        SiteKind::Block => (agent.min_release_wasps * (1.0 - TOL) / alive)
            .ceil()
            .max(1.0),
    };
    vials * alive <= agent.max_release_wasps * (1.0 + TOL) + TOL
        && vials <= whole_vials(supply)
        && vials <= whole_vials(second)
}

/// Whole vials of a row's right-hand side `rhs` (vials): ⌊rhs⌋, with 10⁻⁹ of slack so that a
/// right-hand side a rounding error under a whole number still counts it, and never below 0.
/// Every row's right-hand side is a sum of whole vials today (supply, vehicle capacity, the
/// parcel cap, a feedback cap), so this is the plain floor on every input.
pub(crate) fn whole_vials(rhs: f64) -> f64 {
    (rhs + 1e-9).floor().max(0.0)
}

/// The most whole vials arc `a`'s rows hold: the least [`whole_vials`] of their right-hand
/// sides (infinite for an arc on no row).
pub(crate) fn arc_room(inst: &Instance, a: usize) -> f64 {
    inst.arc_res[a]
        .iter()
        .map(|&r| whole_vials(inst.res_rhs[r]))
        .fold(f64::INFINITY, f64::min)
}

/// Coefficient of arc `a` (one vial) in the dooryard share row Σ (door − share·all) ≥ 0.
pub(crate) fn share_coef(inst: &Instance, a: usize) -> f64 {
    let s = inst.share.unwrap_or(0.0);
    if inst.sites[inst.arc_site[a]].kind == SiteKind::Dooryard {
        1.0 - s
    } else {
        -s
    }
}

/// A force of `vials` on a block trimmed to what exists: the most whole vials its allowed
/// releases (`policy.releases_per_site_week`, one arc each) can carry, each at most what one
/// release within max_release_wasps holds on every one of its arcs (max_release_wasps ÷ the
/// most live wasps a vial brings; so any arc can meet it) and the vials of the supply and
/// vehicle or parcel rows it draws on. A force of live wasps (a block forced without a count: the minimum
/// release) is never above the maximum. Pushes a note when it trims. O(k log k) for the k
/// usable arcs of the site (`list`).
fn trim_force(
    scenario: &Scenario,
    usable: &[&Arc],
    list: &[usize],
    res_rhs: &[f64],
    arc_res: &[[usize; 2]],
    force: Force,
    notes: &mut Vec<Note>,
) -> Force {
    let Force::Vials(asked) = force else {
        return force;
    };
    let max = scenario.agent.max_release_wasps;
    let richest = list
        .iter()
        .map(|&a| usable[a].wasps_alive_per_vial)
        .fold(0.0, f64::max);
    let hold = (max * (1.0 + 1e-9) / richest).floor();
    let mut per_arc: Vec<f64> = list
        .iter()
        .map(|&a| hold.min(res_rhs[arc_res[a][0]]).min(res_rhs[arc_res[a][1]]))
        .collect();
    per_arc.sort_by(|x, y| y.total_cmp(x));
    let releases = scenario.policy.releases_per_site_week.max(1) as usize;
    let most = per_arc.iter().take(releases).sum::<f64>().min(hold);
    if asked <= most {
        return force;
    }
    notes.push(Note::new(NoteKind::ForceTrimmed {
        site: scenario.sites[usable[list[0]].site].id.clone(),
        asked,
        most,
        releases,
        max_release_wasps: max,
    }));
    Force::Vials(most)
}

/// Right-hand side of each resource row as written into the LP: the vials available, clipped
/// to just above the most vials the whole pool's arcs could ever draw on the row. Each arc
/// carries at most max_release ÷ its live wasps per vial (its site's `maxrelease` row; a
/// request also at most the standard count), so a row whose vials exceed the sum over its
/// arcs can never bind: clipping its right-hand side leaves the feasible set, the optimum and
/// the duals (0 on such a row) unchanged. It keeps supply or capacity in the billions from
/// wrecking the interior-point scaling (measured: 4,294,967,295 vials a day on the demo gave a
/// clarabel "optimum" of 110.8 against a plan worth 3.2 million). The exported MPS holds the
/// same right-hand sides. O(A).
fn resource_rhs_in_lp(inst: &Instance) -> Vec<f64> {
    let mut most = vec![0.0f64; inst.resources.len()];
    for (a, arc) in inst.arcs.iter().enumerate() {
        let mut ub = inst.max.max(0.0) / arc.wasps_alive_per_vial;
        if inst.sites[inst.arc_site[a]].kind == SiteKind::Dooryard {
            ub = ub.min(f64::from(inst.per_request));
        }
        for &r in &inst.arc_res[a] {
            most[r] += ub;
        }
    }
    // One vial above the most usable (and the sum rounded up): strictly slack, never binding.
    inst.res_rhs
        .iter()
        .zip(most)
        .map(|(&rhs, most)| rhs.min(most.ceil() + 1.0))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn whole_vials_floor_a_right_hand_side_with_rounding_slack() {
        assert_eq!(whole_vials(3.0), 3.0);
        assert_eq!(whole_vials(2.5), 2.0);
        // A sum a rounding error under 3 still holds 3 whole vials.
        assert_eq!(whole_vials(0.1 + 0.2 + 2.7 - 1e-12), 3.0);
        assert_eq!(whole_vials(-0.5), 0.0);
        assert_eq!(whole_vials(4_294_967_295.0), 4_294_967_295.0);
    }
}
