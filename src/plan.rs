//! The week's pipeline: scenario → priority → arcs → allocation → dispatch, with rounds of
//! route feedback, and the same week planned by hand beside it ([`crate::baseline`]). Takes typed values, returns typed values; reads and prints nothing.

use std::collections::{BTreeMap, BTreeSet};

use chrono::NaiveDate;

use crate::allocate::{self, AllocError, AllocOptions, Allocation, Note, NoteKind};
use crate::arcs::{self, Arcs, Mode};
use crate::baseline::{self, Baseline};
use crate::dispatch::{self, Dispatch};
use crate::eligibility::Reason;
use crate::pressure::{self, PressureParams};
use crate::progress::{Progress, Step};
use crate::scenario::{FacilityIdx, Scenario, SiteIdx};
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
    let (allocation, dispatch, moved) = feed_back(
        Week {
            scenario: &scenario,
            priority: &priority,
            arcs: &arcs,
            first_lp: first_lp.as_ref(),
        },
        alloc_opts,
        (first, first_dispatch),
        route,
    )?;
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

/// What a re-plan of the week needs besides the options.
struct Week<'a> {
    scenario: &'a Scenario,
    priority: &'a [f64],
    arcs: &'a Arcs,
    /// The first solve's LP, which the re-plans keep (`None`: they solve their own).
    first_lp: Option<&'a allocate::LpSolve>,
}

/// The route feedback: from the first plan and its dispatch, the final plan, its dispatch
/// and what was moved (one line each), routing each plan with `route`.
///
/// Stops no route can serve go back to the allocation with those arcs removed, and each
/// depot-day whose routes left stops out is capped at what they delivered and kept to the
/// stops they served ([`feedback`]); again while the new routes leave stops out, at most
/// [`MAX_REPLANS`] times, the caps and stop sets only ever shrinking. Each round only takes
/// options away (an arc, route vials or stops of a depot-day), so the first LP's bounds still
/// hold. A stop the last routes still leave out is then dropped with its site;
/// routing the smaller plan can still leave a stop out (routes change when stops go), so that
/// repeats until every vial the objective counts is delivered. Each pass removes at least one
/// site, so it ends.
fn feed_back(
    week: Week<'_>,
    mut alloc_opts: AllocOptions,
    (mut allocation, mut dispatch): (Allocation, Dispatch),
    route: impl Fn(&Allocation) -> Dispatch,
) -> Result<(Allocation, Dispatch, Vec<String>), AllocError> {
    let Week {
        scenario,
        priority,
        arcs,
        first_lp,
    } = week;
    let mut moved = Vec::new();
    let mut replans = 0;
    while !dispatch.undeliverable.is_empty() && replans < MAX_REPLANS {
        replans += 1;
        let (removed, caps) = feedback(scenario, &allocation, &dispatch, &mut moved);
        alloc_opts.progress.report(Step::Replan);
        alloc_opts.excluded.extend(removed);
        for (day, (delivered, served)) in caps {
            alloc_opts
                .route_vials_cap
                .entry(day)
                .and_modify(|cap| *cap = (*cap).min(delivered))
                .or_insert(delivered);
            alloc_opts
                .route_stops_only
                .entry(day)
                .and_modify(|stops| stops.retain(|s| served.contains(s)))
                .or_insert(served);
        }
        alloc_opts.warm_start = allocation.working_set.iter().copied().collect();
        alloc_opts.warm_plan = allocation.planned_vials();
        // The re-plan keeps the first LP (its bounds hold with arcs left out, and they are
        // those of the exported model); it solves again when the first solve had no LP, and
        // `allocate_from` does when the exclusions loosen the share floor or a force.
        allocation = match first_lp {
            Some(lp) => allocate::allocate_from(scenario, priority, arcs, &alloc_opts, lp)?,
            None => allocate::allocate(scenario, priority, arcs, &alloc_opts)?,
        };
        dispatch = route(&allocation);
    }
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
        allocation =
            drop_undeliverable(scenario, priority, arcs, &alloc_opts, allocation, &dropped)?;
        dispatch = route(&allocation);
        after = "re-routing";
    }
    Ok((allocation, dispatch, moved))
}

/// Most rounds of route feedback (re-plans) before stops the routes still leave out are
/// dropped: a work limit. On the generated 20,000-site week (`generate --sites 20000 --seed 3
/// --supply 2`) one round left 24 vials on five blocks of a depot-day the first routes had
/// served in full, and a second round delivered them.
const MAX_REPLANS: usize = 2;

/// Per depot-day (facility, dispatch day) whose routes were full: the vials a re-plan may send
/// by route from it, and the sites it may send them to.
type DayCaps = BTreeMap<(FacilityIdx, NaiveDate), (u32, BTreeSet<SiteIdx>)>;

/// What `dispatch`'s left-out stops take away from the next re-plan of `allocation`: the arcs
/// no route served, and for each depot-day whose routes left a stop out, the vials its routes
/// delivered and the sites they served. The re-plan may send at most that many vials by route
/// from it that day, and only to those sites, so the stops it takes away go to other days,
/// facilities or parcels rather than back into the same shift, and no new stop takes their
/// place: more, smaller stops can take longer than the shift allows (on the generated
/// 20,000-site week, capped at its vials alone, a full depot-day left stops out again after
/// the re-plan). Writes one line per capped depot-day, then one per left-out stop, to
/// `moved`.
fn feedback(
    scenario: &Scenario,
    allocation: &Allocation,
    dispatch: &Dispatch,
    moved: &mut Vec<String>,
) -> (BTreeSet<allocate::ArcKey>, DayCaps) {
    // Per depot-day with a stop left out: vials its routes delivered, vials planned by route,
    // and the sites its routes served.
    let mut full: BTreeMap<(FacilityIdx, NaiveDate), (u32, u32, BTreeSet<SiteIdx>)> =
        BTreeMap::new();
    for u in &dispatch.undeliverable {
        let a = &allocation.shipments[u.shipment].arc;
        if a.mode == Mode::Route {
            full.insert((a.facility, a.dispatch_date), Default::default());
        }
    }
    for r in &dispatch.routes {
        if let Some((delivered, _, served)) = full.get_mut(&(r.depot, r.date)) {
            *delivered += r.vials();
            served.extend(r.stops.iter().map(|s| s.site));
        }
    }
    for s in allocation
        .shipments
        .iter()
        .filter(|s| s.arc.mode == Mode::Route)
    {
        if let Some((_, planned, _)) = full.get_mut(&(s.arc.facility, s.arc.dispatch_date)) {
            *planned += s.vials;
        }
    }
    for (&(f, date), &(delivered, planned, _)) in &full {
        moved.push(format!(
            "{} on {date}: its routes delivered {delivered} of {planned} planned vials; \
             the re-plan sends at most {delivered} vials by route from it that day, only to \
             stops they served",
            scenario.facilities[f].id
        ));
    }
    let mut removed = BTreeSet::new();
    for u in &dispatch.undeliverable {
        let s = &allocation.shipments[u.shipment];
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
    let caps = full
        .into_iter()
        .map(|(day, (delivered, _, served))| (day, (delivered, served)))
        .collect();
    (removed, caps)
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
    let before: u64 = allocation
        .shipments
        .iter()
        .map(|s| u64::from(s.vials))
        .sum();
    allocation
        .shipments
        .retain(|s| !sites.contains(&s.arc.site));
    let shipped: u64 = allocation
        .shipments
        .iter()
        .map(|s| u64::from(s.vials))
        .sum();
    // The note on unshipped vials counts what is shipped now, and says why the dropped
    // vials stay.
    let supply = scenario.total_supply_vials();
    let earlier = allocation.notes.iter().find_map(|n| match n.kind {
        NoteKind::SupplyUndelivered { dropped, .. } => Some(dropped),
        _ => None,
    });
    allocation.notes.retain(|n| {
        !matches!(
            n.kind,
            NoteKind::SupplyUnused { .. } | NoteKind::SupplyUndelivered { .. }
        )
    });
    allocation
        .notes
        .push(Note::new(NoteKind::SupplyUndelivered {
            shipped,
            supply,
            dropped: earlier.unwrap_or(0) + (before - shipped),
        }));
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::synthetic;
    use crate::dispatch::{Route, Stop, Undeliverable};

    /// A stand-in for the route search whose depot-day (facility, day) serves at most
    /// `limit[day]` stops (as a shift does: every stop takes service time; no limit for a day
    /// not listed): each depot-day's first route shipments in order; the rest are left out
    /// ("shift").
    fn router(
        limit: BTreeMap<(FacilityIdx, NaiveDate), usize>,
    ) -> impl Fn(&Allocation) -> Dispatch {
        move |allocation: &Allocation| {
            let mut out = Dispatch::default();
            let mut days: BTreeMap<(FacilityIdx, NaiveDate), Route> = BTreeMap::new();
            for (i, sh) in allocation.shipments.iter().enumerate() {
                if sh.arc.mode != Mode::Route {
                    continue;
                }
                let (f, date) = (sh.arc.facility, sh.arc.dispatch_date);
                let at = date.and_hms_opt(8, 0, 0).expect("a time");
                let route = days.entry((f, date)).or_insert_with(|| Route {
                    id: format!("R-{f}-{date}"),
                    vehicle: 0,
                    depot: f,
                    date,
                    depart: at,
                    return_at: at,
                    stops: Vec::new(),
                    drive_minutes: 0.0,
                    path: Vec::new(),
                });
                if limit
                    .get(&(f, date))
                    .is_some_and(|&most| route.stops.len() >= most)
                {
                    out.undeliverable.push(Undeliverable {
                        shipment: i,
                        reason: "shift",
                    });
                } else {
                    route.stops.push(Stop {
                        shipment: i,
                        site: sh.arc.site,
                        arrival: at,
                        service_start: at,
                        vials: sh.vials,
                        wasps_expected_alive: sh.wasps_expected_alive(),
                        release_by: at,
                    });
                }
            }
            out.routes = days.into_values().collect();
            out
        }
    }

    /// Route stops per depot-day (facility, dispatch day).
    type DayStops = BTreeMap<(FacilityIdx, NaiveDate), usize>;

    /// The week, its first plan and LP, and the first plan's route stops per depot-day.
    fn first_week() -> (
        Scenario,
        Vec<f64>,
        Arcs,
        Allocation,
        allocate::LpSolve,
        DayStops,
    ) {
        let (s, p, arcs) = synthetic::generate(13, 2000, 400);
        let opts = AllocOptions {
            direct_max_arcs: 0,
            ..Default::default()
        };
        let (first, lp) =
            allocate::allocate_keeping_lp(&s, &p, &arcs, &opts).expect("a valid week");
        let mut stops = DayStops::new();
        for sh in first
            .shipments
            .iter()
            .filter(|sh| sh.arc.mode == Mode::Route)
        {
            *stops
                .entry((sh.arc.facility, sh.arc.dispatch_date))
                .or_default() += 1;
        }
        (s, p, arcs, first, lp.expect("usable arcs"), stops)
    }

    #[test]
    fn route_feedback_re_plans_again_when_the_new_routes_leave_stops_out() {
        let (s, p, arcs, first, lp, stops) = first_week();
        // The first routing serves three quarters of the busiest depot-day's stops; the
        // second (of the first re-plan) one stop fewer than planned on the second busiest;
        // the third serves every stop.
        let mut by_size: Vec<_> = stops.iter().map(|(k, v)| (*v, *k)).collect();
        by_size.sort_by_key(|&(v, k)| (std::cmp::Reverse(v), k));
        let [(most, busiest), (_, second), ..] = by_size[..] else {
            panic!("two depot-days by route")
        };
        let calls = std::cell::Cell::new(0);
        let route = |allocation: &Allocation| {
            calls.set(calls.get() + 1);
            let mut limit = BTreeMap::new();
            match calls.get() {
                1 => {
                    limit.insert(busiest, most * 3 / 4);
                }
                2 => {
                    let planned = allocation
                        .shipments
                        .iter()
                        .filter(|sh| {
                            sh.arc.mode == Mode::Route
                                && (sh.arc.facility, sh.arc.dispatch_date) == second
                        })
                        .count();
                    limit.insert(second, planned.saturating_sub(1));
                }
                _ => {}
            }
            router(limit)(allocation)
        };
        let first_dispatch = route(&first);
        assert!(!first_dispatch.undeliverable.is_empty());
        let served_first: BTreeSet<SiteIdx> = first_dispatch
            .routes
            .iter()
            .filter(|r| (r.depot, r.date) == busiest)
            .flat_map(|r| r.stops.iter().map(|st| st.site))
            .collect();
        let (allocation, dispatch, moved) = feed_back(
            Week {
                scenario: &s,
                priority: &p,
                arcs: &arcs,
                first_lp: Some(&lp),
            },
            AllocOptions {
                direct_max_arcs: 0,
                ..Default::default()
            },
            (first, first_dispatch),
            route,
        )
        .expect("a valid week");
        let capped = moved.iter().filter(|m| m.contains("planned vials")).count();
        let dropped = moved.iter().filter(|m| m.contains("dropped")).count();
        assert!(dispatch.undeliverable.is_empty());
        assert_eq!(calls.get(), 3, "two re-plans");
        assert!(allocation.shipments.iter().all(|sh| sh.vials > 0));
        // A second round was needed, and it left nothing to drop.
        assert!(
            moved
                .iter()
                .skip_while(|m| !m.contains("re-planned without"))
                .any(|m| m.contains("planned vials")),
            "{moved:#?}"
        );
        assert_eq!(dropped, 0, "{moved:#?}");
        assert!(capped >= 2);
        // The full depot-day took no new stop.
        for sh in &allocation.shipments {
            if sh.arc.mode == Mode::Route && (sh.arc.facility, sh.arc.dispatch_date) == busiest {
                assert!(
                    served_first.contains(&sh.arc.site),
                    "new stop {}",
                    sh.arc.site
                );
            }
        }
    }

    #[test]
    fn dropped_vials_are_counted_in_the_note_on_unshipped_vials() {
        let (s, p, arcs, first, _, _) = first_week();
        let opts = AllocOptions::default();
        let total = |a: &Allocation| {
            a.shipments
                .iter()
                .map(|sh| u64::from(sh.vials))
                .sum::<u64>()
        };
        let note = |a: &Allocation| {
            a.notes.iter().find_map(|n| match n.kind {
                NoteKind::SupplyUndelivered {
                    shipped, dropped, ..
                } => Some((shipped, dropped)),
                _ => None,
            })
        };
        let before = total(&first);
        let once = drop_undeliverable(&s, &p, &arcs, &opts, first, &[0]).expect("valid");
        let after_once = total(&once);
        assert!(after_once < before);
        assert_eq!(note(&once), Some((after_once, before - after_once)));
        // A second drop adds to the count; one note on unshipped vials only.
        let twice = drop_undeliverable(&s, &p, &arcs, &opts, once, &[0]).expect("valid");
        let after_twice = total(&twice);
        assert!(after_twice < after_once);
        assert_eq!(note(&twice), Some((after_twice, before - after_twice)));
        let unshipped_notes = twice
            .notes
            .iter()
            .filter(|n| {
                matches!(
                    n.kind,
                    NoteKind::SupplyUnused { .. } | NoteKind::SupplyUndelivered { .. }
                )
            })
            .count();
        assert_eq!(unshipped_notes, 1);
    }
}
