//! The allocation LP (formulation and symbols: `docs/model.md`).
//!
//! [`Instance`] gathers, once, everything both the LP and the rounding need: the usable arcs
//! (excluded, forbidden and worthless arcs removed), the shared resources each arc draws on
//! (supply per facility and pack day; vehicle capacity per depot and day, or the parcel cap per
//! day), the site release limits and the forces. [`build_model`] writes the LP over a working
//! set of sites; [`solve_relaxation`] grows that set by pricing the other sites with the duals
//! until none has a positive reduced cost, which certifies the full-pool optimum.

use std::collections::BTreeMap;

use chrono::NaiveDate;

use super::model::{LinearModel, ModelError, ModelSolution, Sense};
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
    pub notes: Vec<String>,
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
        let mut usable: Vec<&Arc> = Vec::new();
        let mut source: Vec<usize> = Vec::new();
        let mut arc_res = Vec::new();
        let mut cost = Vec::new();
        let (mut excluded, mut dead, mut no_resource) = (0usize, 0usize, 0usize);
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
            let sup = supply
                .get(&(a.facility, a.pack_date))
                .copied()
                .unwrap_or(0.0);
            let second = match a.mode {
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
            if sup <= 0.0 || second.1 <= 0.0 {
                no_resource += 1;
                continue;
            }
            let r0 = res_of(Resource::Supply(a.facility, a.pack_date), sup);
            let r1 = res_of(second.0, second.1);
            arc_res.push([r0, r1]);
            cost.push(policy.travel_cost_per_hour * a.drive_minutes.max(0.0) / 60.0);
            usable.push(a);
            source.push(i);
        }
        if excluded > 0 {
            notes.push(format!(
                "{excluded} arc(s) excluded by request (dispatch could not serve them)"
            ));
        }
        if dead > 0 {
            notes.push(format!(
                "{dead} arc(s) left out: no live wasps on arrival, past release-by, or a site \
                 with priority 0"
            ));
        }
        if no_resource > 0 {
            notes.push(format!(
                "{no_resource} arc(s) left out: no vials packed that day, or no vehicle/parcel \
                 capacity on the dispatch day"
            ));
        }
        let mut by_site: BTreeMap<SiteIdx, Vec<usize>> = BTreeMap::new();
        for (i, a) in usable.iter().enumerate() {
            by_site.entry(a.site).or_default().push(i);
        }
        for &s in force.keys() {
            if forbidden[s] {
                notes.push(format!(
                    "site {} is both forced and forbidden: forbid wins",
                    scenario.sites[s].id
                ));
            } else if !by_site.contains_key(&s) {
                let why = arcs.no_arc_reason[s]
                    .map(|r| r.code())
                    .unwrap_or("every arc was excluded or carries no live wasps");
                notes.push(format!(
                    "force of site {} cannot be met: no usable arc ({why})",
                    scenario.sites[s].id
                ));
            }
        }
        let mut sites = Vec::new();
        let mut arc_site = vec![0; usable.len()];
        for (s, list) in by_site {
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
        // A request is served with exactly its standard vials on one arc, so one whose every
        // arc would carry more than max_release_wasps that way can never count toward the
        // share floor (e.g. 10,000 vials a request: the floor held every vial at home).
        let servable = |s: &&SiteData| {
            s.kind == SiteKind::Dooryard
                && s.arcs.iter().any(|&a| {
                    f64::from(policy.dooryard_vials_per_request) * usable[a].wasps_alive_per_vial
                        <= agent.max_release_wasps * (1.0 + 1e-9)
                })
        };
        let has_door = sites.iter().any(|s| servable(&s));
        let share = if policy.dooryard_share_min > 0.0 {
            if has_door {
                // The floor never makes vials stay home: when the reachable requests cannot
                // absorb the share of the week's supply, it is lowered to what they can take
                // (docs/model.md, "Dooryard share").
                let share = policy.dooryard_share_min.min(1.0);
                let requests = sites.iter().filter(servable).count() as f64;
                let absorb = requests * f64::from(policy.dooryard_vials_per_request);
                let supply: f64 = resources
                    .iter()
                    .zip(&res_rhs)
                    .filter(|(r, _)| matches!(r, Resource::Supply(..)))
                    .map(|(_, v)| *v)
                    .sum();
                if supply > 0.0 && share * supply > absorb {
                    let lowered = absorb / supply;
                    notes.push(format!(
                        "dooryard share lowered from {share:.2} to {lowered:.4}: the {requests} \
                         reachable request(s) can take at most {absorb} vials, less than {share:.2} \
                         of the week's {supply} vials; the rest may go to blocks rather than \
                         stay at the facilities"
                    ));
                    Some(lowered)
                } else {
                    Some(share)
                }
            } else {
                notes.push(format!(
                    "dooryard share {:.2} dropped: no dooryard request can be reached this week \
                     with its standard vials within max_release_wasps, \
                     so keeping it would forbid every block release",
                    policy.dooryard_share_min
                ));
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
        Ok(Instance {
            scenario,
            arcs: usable,
            source,
            cost,
            arc_res,
            resources,
            res_rhs,
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
            notes,
        })
    }

    /// MPS-safe name of a resource row.
    pub fn resource_name(&self, r: usize) -> String {
        let f = |i: FacilityIdx| self.scenario.facilities[i].id.as_str().to_string();
        match &self.resources[r] {
            Resource::Supply(i, d) => format!("supply_{}_{}", f(*i), date(*d)),
            Resource::Capacity(i, d) => format!("vehicles_{}_{}", f(*i), date(*d)),
            Resource::Parcel(d) => format!("parcel_{}", date(*d)),
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
    notes: &mut Vec<String>,
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
    let id = &scenario.sites[usable[list[0]].site].id;
    notes.push(format!(
        "force of site {id} asks for {asked} vials, more than exist for it: at most {most} \
         whole vials reach it in {releases} release(s) within max_release_wasps ({max}) and \
         the vials packed and carried on its days; the force is trimmed to {most} vials"
    ));
    Force::Vials(most)
}

/// Rows of one working-set site.
#[derive(Clone, Copy, Debug)]
pub(crate) struct SiteRows {
    /// `benefit_s`: u1 + u2 − Σ alive x ≤ 0.
    pub benefit: usize,
    /// `maxrelease_s`: Σ alive x ≤ max.
    pub max_release: usize,
    /// `request_s` (dooryards): Σ x ≤ standard vials.
    pub request: Option<usize>,
    /// `force_s`: Σ x (or Σ alive x) + short ≥ rhs.
    pub force: Option<usize>,
}

/// The LP over a working set, with the map from domain objects to columns and rows.
#[derive(Clone, Debug)]
pub(crate) struct Built {
    pub model: LinearModel,
    /// Column of each usable arc (None outside the working set).
    pub arc_col: Vec<Option<usize>>,
    /// Rows of each site position (None outside the working set).
    pub site_rows: Vec<Option<SiteRows>>,
    /// Row of each resource (None when no working-set arc draws on it).
    pub res_row: Vec<Option<usize>>,
    pub share_row: Option<usize>,
    /// (site position, slack column, row) for each force in the working set.
    pub force_rows: Vec<(usize, usize, usize)>,
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

/// Builds the LP over the arcs with `arc_in[a]`; a site is in the model when one of its arcs
/// is. O(A + S) columns and rows.
pub(crate) fn build_model(inst: &Instance, arc_in: &[bool]) -> Built {
    let mut m = LinearModel::new(&format!("broodcast_{}", inst.scenario.name));
    let mut arc_col = vec![None; inst.arcs.len()];
    let mut site_rows = vec![None; inst.sites.len()];
    let mut res_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); inst.resources.len()];
    let mut share_terms = Vec::new();
    let mut force_rows = Vec::new();
    let span = (inst.max - inst.target).max(0.0);
    let target = inst.target.min(inst.max).max(0.0);
    for (sp, site) in inst.sites.iter().enumerate() {
        if !site.arcs.iter().any(|&a| arc_in[a]) {
            continue;
        }
        let id = inst.scenario.sites[site.site].id.as_str();
        let mut alive_terms = Vec::with_capacity(site.arcs.len() + 2);
        let mut vial_terms = Vec::with_capacity(site.arcs.len());
        for &a in site.arcs.iter().filter(|&&a| arc_in[a]) {
            let c = m.add_column(&inst.arc_name(a), 0.0, f64::INFINITY, -inst.cost[a], false);
            arc_col[a] = Some(c);
            alive_terms.push((c, inst.arcs[a].wasps_alive_per_vial));
            vial_terms.push((c, 1.0));
            for &r in &inst.arc_res[a] {
                res_terms[r].push((c, 1.0));
            }
            if inst.share.is_some() {
                share_terms.push((c, share_coef(inst, a)));
            }
        }
        let u1 = m.add_column(&format!("u1_{id}"), 0.0, target, site.priority, false);
        let u2 = m.add_column(
            &format!("u2_{id}"),
            0.0,
            span,
            site.priority * inst.weight2,
            false,
        );
        // benefit_s: u1 + u2 ≤ E_s = Σ alive x.
        let mut b: Vec<(usize, f64)> = alive_terms.iter().map(|&(c, v)| (c, -v)).collect();
        b.push((u1, 1.0));
        b.push((u2, 1.0));
        let benefit = m.add_row(&format!("benefit_{id}"), &b, Sense::Le, 0.0);
        let max_release = m.add_row(
            &format!("maxrelease_{id}"),
            &alive_terms,
            Sense::Le,
            inst.max,
        );
        let request = (site.kind == SiteKind::Dooryard).then(|| {
            m.add_row(
                &format!("request_{id}"),
                &vial_terms,
                Sense::Le,
                f64::from(inst.per_request),
            )
        });
        let force = site.force.map(|f| {
            let (terms, rhs, pen) = match f {
                Force::Vials(v) => (vial_terms.clone(), v, inst.force_penalty_per_vial),
                Force::Wasps(w) => (
                    alive_terms.clone(),
                    w,
                    inst.force_penalty_per_vial / inst.best_alive_per_vial.max(1.0),
                ),
            };
            let slack = m.add_column(&format!("short_{id}"), 0.0, rhs, -pen, false);
            let mut t = terms;
            t.push((slack, 1.0));
            let r = m.add_row(&format!("force_{id}"), &t, Sense::Ge, rhs);
            force_rows.push((sp, slack, r));
            r
        });
        site_rows[sp] = Some(SiteRows {
            benefit,
            max_release,
            request,
            force,
        });
    }
    let mut res_row = vec![None; inst.resources.len()];
    let rhs = resource_rhs_in_lp(inst);
    for (r, terms) in res_terms.iter().enumerate() {
        if !terms.is_empty() {
            res_row[r] = Some(m.add_row(&inst.resource_name(r), terms, Sense::Le, rhs[r]));
        }
    }
    let share_row = match inst.share {
        Some(_) if !share_terms.is_empty() => {
            Some(m.add_row("dooryard_share", &share_terms, Sense::Ge, 0.0))
        }
        _ => None,
    };
    Built {
        model: m,
        arc_col,
        site_rows,
        res_row,
        share_row,
        force_rows,
    }
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
pub(crate) fn resource_rhs_in_lp(inst: &Instance) -> Vec<f64> {
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

/// The solved relaxation over the final working set.
#[derive(Clone, Debug)]
pub(crate) struct Relaxation {
    pub built: Built,
    pub solution: ModelSolution,
    /// LP vials per usable arc (0 outside the working set).
    pub x: Vec<f64>,
    /// Site positions with at least one arc in the final working set.
    pub in_set: Vec<bool>,
    /// Dual of each resource row (0 when absent).
    pub res_dual: Vec<f64>,
    pub share_dual: f64,
    pub rounds: usize,
    /// Whether the LP was solved on a working set with pricing (else on every arc at once).
    pub priced: bool,
    /// The final working set, as indices into `Arcs::arcs`, ascending.
    pub working_set: Vec<usize>,
}

/// Reduced cost of arc `a` of a site outside the working set, per vial: the first wasps are
/// worth `priority` each, so the site is worth adding iff some arc beats the duals of the
/// shared rows it draws on.
pub(crate) fn reduced_cost(inst: &Instance, a: usize, res_dual: &[f64], share_dual: f64) -> f64 {
    let site = &inst.sites[inst.arc_site[a]];
    // The first (infinitesimal) vial earns the full weight: u1 has room whenever target > 0.
    let slope = if inst.target > 0.0 { 1.0 } else { inst.weight2 };
    let mut rc = site.priority * slope * inst.arcs[a].wasps_alive_per_vial - inst.cost[a];
    for &r in &inst.arc_res[a] {
        rc -= res_dual[r];
    }
    if inst.share.is_some() {
        rc -= share_dual * share_coef(inst, a);
    }
    rc
}

/// Exact reduced cost (objective per vial) of arc column `a` against the duals `y` of the
/// model `built`: c_a − Σ_rows coefficient × dual, with the rows the column would enter. A
/// site outside the model prices its benefit row at the first segment's weight (its u1 sits
/// at 0 with room: dual feasibility of u1 and u2 needs exactly that), and its other rows at 0
/// (they are slack at x = 0).
pub(crate) fn arc_reduced_cost(inst: &Instance, built: &Built, y: &[f64], a: usize) -> f64 {
    let sp = inst.arc_site[a];
    let site = &inst.sites[sp];
    let w = inst.arcs[a].wasps_alive_per_vial;
    let mut rc = -inst.cost[a];
    match built.site_rows[sp] {
        Some(rows) => {
            rc += w * y[rows.benefit] - w * y[rows.max_release];
            if let Some(r) = rows.request {
                rc -= y[r];
            }
            if let (Some(r), Some(f)) = (rows.force, site.force) {
                rc -= y[r]
                    * match f {
                        Force::Vials(_) => 1.0,
                        Force::Wasps(_) => w,
                    };
            }
        }
        None => {
            let slope = if inst.target > 0.0 { 1.0 } else { inst.weight2 };
            rc += site.priority * slope * w;
        }
    }
    for &r in &inst.arc_res[a] {
        if let Some(row) = built.res_row[r] {
            rc -= y[row];
        }
    }
    if let Some(row) = built.share_row {
        rc -= y[row] * share_coef(inst, a);
    }
    rc
}

/// The first working set (arc columns), each choice O(A log A):
///
/// - every arc of a forced site;
/// - per supply and parcel row, the arcs with the best value per vial (priority × live wasps
///   per vial − travel cost), one per site, until their sites' releases (target for blocks,
///   the standard count for requests) add up to twice the row's vials: every shared row then
///   has competition and a real dual in the first round;
/// - the best sites by value until their releases add up to twice the week's supply, and the
///   best dooryards until they could meet twice the share floor, each with its best arc.
fn initial_arcs(inst: &Instance) -> Vec<bool> {
    let na = inst.arcs.len();
    let mut arc_in = vec![false; na];
    let per_request = f64::from(inst.per_request);
    let value = |a: usize| {
        inst.sites[inst.arc_site[a]].priority * inst.arcs[a].wasps_alive_per_vial - inst.cost[a]
    };
    let need = |a: usize| {
        if inst.sites[inst.arc_site[a]].kind == SiteKind::Dooryard {
            per_request
        } else {
            inst.target / inst.arcs[a].wasps_alive_per_vial.max(1e-9)
        }
    };
    for site in &inst.sites {
        if site.force.is_some() {
            for &a in &site.arcs {
                arc_in[a] = true;
            }
        }
    }
    let mut order: Vec<(f64, usize)> = (0..na).map(|a| (value(a), a)).collect();
    order.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1)));
    // Per shared row (supply and parcel; vehicle rows are drawn on by the same arcs).
    let mut filled = vec![0.0; inst.resources.len()];
    let mut seen: Vec<Vec<bool>> = Vec::new();
    let mut seen_of = vec![usize::MAX; inst.resources.len()];
    for (r, res) in inst.resources.iter().enumerate() {
        if !matches!(res, Resource::Capacity(..)) {
            seen_of[r] = seen.len();
            seen.push(vec![false; inst.sites.len()]);
        }
    }
    for &(v, a) in &order {
        if v <= 0.0 {
            break;
        }
        let sp = inst.arc_site[a];
        for &r in &inst.arc_res[a] {
            let k = seen_of[r];
            if k == usize::MAX || seen[k][sp] || filled[r] > 2.0 * inst.res_rhs[r] {
                continue;
            }
            seen[k][sp] = true;
            filled[r] += need(a);
            arc_in[a] = true;
        }
    }
    // Globally best sites, and dooryards for the share floor, each with its best arc.
    let supply: f64 = inst.scenario.total_supply_vials() as f64;
    let share_vials = inst.share.unwrap_or(0.0) * supply;
    let (mut vials, mut door) = (0.0, 0.0);
    let mut site_taken = vec![false; inst.sites.len()];
    for &(v, a) in &order {
        if v <= 0.0 {
            break;
        }
        let sp = inst.arc_site[a];
        if site_taken[sp] {
            continue;
        }
        let is_door = inst.sites[sp].kind == SiteKind::Dooryard;
        let wanted = vials <= 2.0 * supply + 50.0
            || (is_door && door <= 2.0 * share_vials + 10.0 * per_request);
        if !wanted {
            continue;
        }
        site_taken[sp] = true;
        arc_in[a] = true;
        vials += need(a);
        if is_door {
            door += per_request;
        }
    }
    arc_in
}

/// Rounds of partial pricing before every remaining arc is added (a safeguard: the runs
/// measured in `docs/performance-allocate.md` need far fewer).
const MAX_PRICING_ROUNDS: usize = 30;

/// Arcs one pricing round adds at most, and per site: partial pricing keeps each round's LP
/// small, since an interior-point solve costs far more than another round of pricing.
const PRICED_ARCS_PER_ROUND: usize = 2_000;
const PRICED_ARCS_PER_SITE: usize = 2;

/// Adds to `arc_in` the arcs with a reduced cost above `tol` against the duals `y` of
/// `built`: at most [`PRICED_ARCS_PER_SITE`] per site and [`PRICED_ARCS_PER_ROUND`] in all,
/// best first. Returns how many were added; 0 certifies the working-set optimum for the full
/// pool. O(A log A).
fn add_priced_arcs(
    inst: &Instance,
    built: &Built,
    y: &[f64],
    tol: f64,
    arc_in: &mut [bool],
) -> usize {
    let mut priced: Vec<(f64, usize)> = (0..inst.arcs.len())
        .filter(|&a| !arc_in[a])
        .filter_map(|a| {
            let rc = arc_reduced_cost(inst, built, y, a);
            (rc > tol).then_some((rc, a))
        })
        .collect();
    priced.sort_by(|p, q| q.0.total_cmp(&p.0).then(p.1.cmp(&q.1)));
    let mut per_site = vec![0usize; inst.sites.len()];
    let mut added = 0;
    for &(_, a) in &priced {
        let sp = inst.arc_site[a];
        if per_site[sp] >= PRICED_ARCS_PER_SITE {
            continue;
        }
        per_site[sp] += 1;
        arc_in[a] = true;
        added += 1;
        if added >= PRICED_ARCS_PER_ROUND {
            break;
        }
    }
    added
}

/// Whether to solve on a working set with pricing rather than on the whole pool at once:
/// `opts.pricing` is set and the pool is large (over `opts.direct_max_arcs` arcs) or the first
/// working set `first` is under a twentieth of it (little supply for many sites). Each interior-
/// point solve costs about the same whatever the round, so on a small pool the 4–7 rounds of
/// pricing cost more than one solve of every arc; measured in `docs/performance-allocate.md`.
fn use_pricing(inst: &Instance, opts: &AllocOptions, first: &[bool]) -> bool {
    let na = inst.arcs.len();
    opts.pricing && (na > opts.direct_max_arcs || first.iter().filter(|b| **b).count() * 20 < na)
}

/// Solves the LP, with working-set pricing when [`use_pricing`] says so.
///
/// The working set is a set of arc columns ([`initial_arcs`]). Each round solves it, prices
/// every other arc with the exact reduced cost against the round's duals (O(A)) and adds the
/// arcs with a positive one; when none remains the working-set optimum is the full-pool
/// optimum (LP duality: the set's duals, extended to the missing rows as in
/// [`arc_reduced_cost`], are feasible for the full dual). After 30 rounds every arc is added.
pub(crate) fn solve_relaxation(
    inst: &Instance,
    opts: &AllocOptions,
) -> Result<Relaxation, ModelError> {
    let na = inst.arcs.len();
    let mut arc_in = if opts.pricing {
        initial_arcs(inst)
    } else {
        vec![true; na]
    };
    let priced = use_pricing(inst, opts, &arc_in);
    if !priced {
        arc_in.fill(true);
    }
    // A previous solve's working set (e.g. before the route feedback removed a few arcs)
    // starts this one close to its end: fewer pricing rounds, the same optimum.
    for (inn, src) in arc_in.iter_mut().zip(&inst.source) {
        if opts.warm_start.contains(src) {
            *inn = true;
        }
    }
    let scale = inst
        .sites
        .iter()
        .map(|s| s.priority)
        .fold(0.0, f64::max)
        .max(1e-12)
        * inst.best_alive_per_vial.max(1.0);
    let mut rounds = 0;
    loop {
        rounds += 1;
        let built = build_model(inst, &arc_in);
        let solution = built.model.solve_relaxation_with(opts.solver)?;
        let y = &solution.duals;
        let mut added = 0;
        if priced {
            if rounds >= MAX_PRICING_ROUNDS {
                for inn in arc_in.iter_mut().filter(|b| !**b) {
                    *inn = true;
                    added += 1;
                }
            } else {
                added = add_priced_arcs(inst, &built, y, 1e-7 * scale, &mut arc_in);
            }
        }
        if added == 0 {
            let mut res_dual = vec![0.0; inst.resources.len()];
            for (r, row) in built.res_row.iter().enumerate() {
                if let Some(row) = row {
                    res_dual[r] = y[*row];
                }
            }
            let share_dual = built.share_row.map(|r| y[r]).unwrap_or(0.0);
            let x = built
                .arc_col
                .iter()
                .map(|c| c.map(|c| solution.values[c].max(0.0)).unwrap_or(0.0))
                .collect();
            let in_set = built.site_rows.iter().map(Option::is_some).collect();
            let working_set = inst
                .source
                .iter()
                .zip(&arc_in)
                .filter(|(_, inn)| **inn)
                .map(|(&s, _)| s)
                .collect();
            return Ok(Relaxation {
                working_set,
                built,
                solution,
                x,
                in_set,
                res_dual,
                share_dual,
                rounds,
                priced,
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::arcs::Arc;
    use crate::scenario::fixture::tiny;

    fn arc(s: &Scenario, site: SiteIdx, facility: FacilityIdx, mode: Mode) -> Arc {
        let d = s.week_start;
        Arc {
            facility,
            pack_date: d,
            dispatch_date: d,
            site,
            mode,
            eta: d.and_hms_opt(9, 0, 0).expect("valid"),
            release_by: d.and_hms_opt(23, 0, 0).expect("valid"),
            survival: 0.9,
            wasps_alive_per_vial: 90.0,
            drive_minutes: 30.0,
        }
    }

    #[test]
    fn model_rows_and_names_follow_domain_ids() {
        let s = tiny();
        // B1 (site 0) by route from F1; R2 (site 7) by parcel from F1.
        let arcs = Arcs {
            arcs: vec![arc(&s, 0, 0, Mode::Route), arc(&s, 7, 0, Mode::Parcel)],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let inst = Instance::new(&s, &priority, &arcs, &AllocOptions::default()).expect("valid");
        let built = build_model(&inst, &vec![true; inst.arcs.len()]);
        let m = &built.model;
        assert!(m.column("x_F1_2027-03-01_2027-03-01_B1_route").is_some());
        assert!(m.column("x_F1_2027-03-01_2027-03-01_R2_parcel").is_some());
        for row in [
            "supply_F1_2027-03-01",
            "vehicles_F1_2027-03-01",
            "parcel_2027-03-01",
            "benefit_B1",
            "maxrelease_R2",
            "request_R2",
            "dooryard_share",
        ] {
            assert!(m.row(row).is_some(), "missing row {row}");
        }
        // Travel cost: 1 per hour × 0.5 h one way.
        let c = m
            .column("x_F1_2027-03-01_2027-03-01_B1_route")
            .expect("present");
        assert!((m.columns[c].objective + 0.5).abs() < 1e-12);
    }

    #[test]
    fn reduced_cost_charges_the_shared_row_duals() {
        let s = tiny();
        let arcs = Arcs {
            arcs: vec![arc(&s, 0, 0, Mode::Route)],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let mut priority = vec![0.0; s.sites.len()];
        priority[0] = 2.0;
        let mut s2 = s.clone();
        s2.policy.dooryard_share_min = 0.0;
        let inst = Instance::new(&s2, &priority, &arcs, &AllocOptions::default()).expect("valid");
        let mut duals = vec![0.0; inst.resources.len()];
        // 2 × 90 wasps − 0.5 travel = 179.5 per vial before duals.
        assert!((reduced_cost(&inst, 0, &duals, 0.0) - 179.5).abs() < 1e-9);
        duals[0] = 100.0;
        duals[1] = 80.0;
        assert!(reduced_cost(&inst, 0, &duals, 0.0) < 0.0);
    }
}
