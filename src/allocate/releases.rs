//! The release LP: a start for the rounding built from whole releases instead of arc flows
//! (method and measurements: `docs/model.md`, "Step 4. Rounding to whole vials").
//!
//! The arc LP splits a site's vials over several arcs and fills a release to exactly the
//! target or the maximum with a fraction of a vial, which no whole release reaches. Here each
//! column is one whole release of one candidate site: an arc a and a vial count k, worth
//! B_s(k α_a) − k c_a, drawing k vials from each shared row of a. The LP over these columns
//! (at most one release per site, the shared rows, the dooryard share) chooses, per site, the
//! arc whose vials make a good whole release, and its solution, read back as vials per arc, is
//! where the rounding starts. It is a heuristic start, not a bound: each site gets only its
//! best [`COLUMNS_PER_SITE`] releases under the arc LP's duals (and its release in the plan so
//! far).

use super::instance::{Instance, arc_room, share_coef, whole_vials};
use super::model::{LinearModel, ModelError, Sense, Solver};
use crate::scenario::SiteKind;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

/// Releases per candidate site in the release LP: its best ones by value less the arc LP's
/// prices of the vials. Measured on the generated 20,000-site week at 2× supply
/// (`broodcast generate --sites 20000 --seed 3 --supply 2`, 2026-12-04): the rounding from
/// the release LP reached 56,043,495 with 3 columns per site, 56,596,769 with 8, 56,782,602
/// with 16 and 56,889,840 with 40, against 55,627,030 from the arc LP, for 0.2, 0.5, 1.4 and
/// 4.3 s of interior point.
pub(crate) const COLUMNS_PER_SITE: usize = 16;

/// Most vials one release may hold for the release LP to be built (it lists every vial count
/// of every arc of a candidate site); beyond it, e.g. with a maximum release of millions of
/// wasps, the rounding starts from the arc LP alone.
const MAX_VIALS_PER_RELEASE: f64 = 1_000.0;

/// Vials per arc of the release LP's optimum, and that optimum (objective units), over the
/// candidate sites (`cand`, by site position) and the sites `plan` serves; `None` when the
/// policy allows more than one release per site (a site's benefit is not additive over its
/// releases), a site has a force (its shortfall penalty is not in the columns), a release
/// could hold more than [`MAX_VIALS_PER_RELEASE`] vials, or no site is in it. `res_dual` and
/// `share_dual` are the arc LP's duals (the share dual ≤ 0 for its ≥ row); `plan` is a
/// whole-vial plan (vials per arc) whose releases join the columns, so the release LP is at
/// least as good as it.
///
/// With `stop` (clarabel only), the solve ends early once `stop` is set, and the answer is
/// then `None` too: for a caller that starts it beside other work before it knows whether it
/// needs it.
///
/// Cost: O(Σ over the sites' arcs of the vials one release can hold) to build, one LP solve
/// of about `COLUMNS_PER_SITE` columns per site.
pub(crate) fn release_lp_start(
    inst: &Instance,
    res_dual: &[f64],
    share_dual: f64,
    cand: &[bool],
    plan: &[u32],
    solver: Solver,
    stop: Option<&Arc<AtomicBool>>,
) -> Result<Option<(Vec<f64>, f64)>, ModelError> {
    // A site's benefit is concave in its week's live wasps, so with several releases allowed
    // the value of a site's releases is not the sum of each one's: not modelled here.
    if inst.releases_per_site != 1 {
        return Ok(None);
    }
    let lambda = (-share_dual).max(0.0);
    let mut m = LinearModel::new("releases");
    // (arc, vials) of each column.
    let mut cols: Vec<(usize, u32)> = Vec::new();
    let mut site_rows: Vec<Vec<(usize, f64)>> = Vec::new();
    let mut res_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); inst.resources.len()];
    let mut share_terms: Vec<(usize, f64)> = Vec::new();
    for (sp, site) in inst.sites.iter().enumerate() {
        let served = site.arcs.iter().any(|&a| plan[a] > 0);
        if !cand[sp] && !served {
            continue;
        }
        if site.force.is_some() {
            return Ok(None);
        }
        // (value less the arc LP's prices, arc, vials, value) of every whole release of the
        // site; value = B_s(k α_a) − k c_a, objective units.
        let mut options: Vec<(f64, usize, u32, f64)> = Vec::new();
        for &a in &site.arcs {
            let alive = inst.arcs[a].wasps_alive_per_vial;
            let price = inst.cost[a]
                + inst.arc_res[a]
                    .iter()
                    .map(|&r| res_dual[r].max(0.0))
                    .sum::<f64>()
                - lambda * share_coef(inst, a);
            // No release takes more vials than a row of its arc holds.
            let cap = arc_room(inst, a);
            let most = (inst.max / alive.max(1e-12)).floor().min(cap).max(0.0);
            if most > MAX_VIALS_PER_RELEASE {
                return Ok(None);
            }
            let (lo, hi) = match site.kind {
                SiteKind::Dooryard => (inst.per_request, inst.per_request),
                SiteKind::Block => (1, most as u32),
            };
            for k in lo..=hi {
                let e = f64::from(k) * alive;
                if f64::from(k) > cap || !inst.release_ok(sp, e, k) {
                    continue;
                }
                let worth = inst.site_value(sp, e, k);
                let kf = f64::from(k);
                options.push((worth - kf * price, a, k, worth - kf * inst.cost[a]));
            }
        }
        options.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1)).then(x.2.cmp(&y.2)));
        options.truncate(COLUMNS_PER_SITE);
        for &a in &site.arcs {
            let k = plan[a];
            if k > 0 && !options.iter().any(|o| o.1 == a && o.2 == k) {
                let kf = f64::from(k);
                let value = inst.site_value(sp, kf * inst.arcs[a].wasps_alive_per_vial, k)
                    - kf * inst.cost[a];
                options.push((0.0, a, k, value));
            }
        }
        let mut terms = Vec::with_capacity(options.len());
        for &(_, a, k, value) in &options {
            let kf = f64::from(k);
            // No upper bound: the site's one-release row already holds z ≤ 1, and clarabel
            // turns each finite bound into a row of its cone (on the 35,000-site week 20,702
            // rows of 42,748; the LP 0.89 → 0.64 s, same optimum).
            let c = m.add_column(
                &format!("z{}", cols.len()),
                0.0,
                f64::INFINITY,
                value,
                false,
            );
            cols.push((a, k));
            terms.push((c, 1.0));
            for &r in &inst.arc_res[a] {
                res_terms[r].push((c, kf));
            }
            share_terms.push((c, kf * share_coef(inst, a)));
        }
        site_rows.push(terms);
    }
    if cols.is_empty() {
        return Ok(None);
    }
    for (i, terms) in site_rows.iter().enumerate() {
        m.add_row(&format!("one_release_{i}"), terms, Sense::Le, 1.0);
    }
    for (r, terms) in res_terms.iter().enumerate() {
        if !terms.is_empty() {
            m.add_row(
                &format!("row_{r}"),
                terms,
                Sense::Le,
                whole_vials(inst.res_rhs[r]),
            );
        }
    }
    if inst.share.is_some() {
        m.add_row("dooryard_share", &share_terms, Sense::Ge, 0.0);
    }
    let values = match stop {
        Some(stop) if solver == Solver::Clarabel => match m.solve_relaxation_until(stop)? {
            Some(values) => values,
            None => return Ok(None),
        },
        _ => m.solve_relaxation_with(solver)?.values,
    };
    let mut x = vec![0.0; inst.arcs.len()];
    for (&(a, k), &z) in cols.iter().zip(&values) {
        x[a] += z.clamp(0.0, 1.0) * f64::from(k);
    }
    Ok(Some((x, m.objective_of(&values))))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::{AllocOptions, rounding};
    use crate::arcs::Arcs;
    use crate::scenario::fixture::{route_arc, tiny};

    #[test]
    fn a_site_takes_the_arc_whose_whole_vials_reach_the_maximum() {
        // One block, two arcs, nothing shared binds. The maximum release is 500 live wasps:
        // five vials of 100 reach it, while of 120 four give 480 and five are too many. The
        // arc LP may take 500 on either (4.17 vials of 120); the release LP must take the
        // first arc's five whole vials.
        let mut s = tiny();
        s.policy.dooryard_share_min = 0.0;
        s.agent.target_release_wasps = 500.0;
        s.agent.max_release_wasps = 500.0;
        let arcs = Arcs {
            arcs: vec![route_arc(&s, 0, 1, 0, 120.0), route_arc(&s, 0, 0, 0, 100.0)],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let inst = Instance::new(&s, &priority, &arcs, &AllocOptions::default()).expect("valid");
        let duals = vec![0.0; inst.resources.len()];
        let (x, objective) =
            release_lp_start(&inst, &duals, 0.0, &[true], &[0, 0], Solver::Clarabel, None)
                .expect("solved")
                .expect("built");
        let on = |alive: f64| -> f64 {
            (0..inst.arcs.len())
                .filter(|&a| inst.arcs[a].wasps_alive_per_vial == alive)
                .map(|a| x[a])
                .sum()
        };
        assert!((on(100.0) - 5.0).abs() < 1e-4, "{x:?}");
        assert!(on(120.0).abs() < 1e-4, "{x:?}");
        let cost: f64 = (0..inst.arcs.len()).map(|a| inst.cost[a] * x[a]).sum();
        assert!((objective - (500.0 - cost)).abs() < 1e-3, "{objective}");
    }

    #[test]
    fn the_start_keeps_every_shared_row_and_beats_the_plan_it_is_given() {
        // The fixture's week with every arc, the rounding's plan from the arc LP as the plan.
        let s = tiny();
        let arcs = crate::arcs::build_arcs(&s, &crate::travel::TravelModel::new(&s));
        let priority: Vec<f64> = (0..s.sites.len()).map(|i| 1.0 + i as f64 / 3.0).collect();
        let opts = AllocOptions::default();
        let inst = Instance::new(&s, &priority, &arcs, &opts).expect("valid");
        let relax = crate::allocate::master::solve_relaxation(&inst, &opts).expect("solved");
        let cand = vec![true; inst.sites.len()];
        let plan = rounding::round(&inst, &relax.x, &cand, opts.rounding_budget);
        let plan_value =
            crate::allocate::objective_of(&inst, &s, &crate::allocate::shipments_of(&inst, &plan));
        // No stop flag (None), or one already set (Some(true)) or never set (Some(false)).
        let start = |stop: Option<bool>| {
            release_lp_start(
                &inst,
                &relax.res_dual,
                relax.share_dual,
                &cand,
                &plan,
                Solver::Clarabel,
                stop.map(|s| Arc::new(AtomicBool::new(s))).as_ref(),
            )
            .expect("solved")
        };
        let (x, objective) = start(None).expect("built");
        assert!(objective >= plan_value - 1e-6 * plan_value.abs().max(1.0));
        assert!(x.iter().any(|&v| v > 0.5), "{x:?}");
        let mut used = vec![0.0; inst.resources.len()];
        for (a, &v) in x.iter().enumerate() {
            for &r in &inst.arc_res[a] {
                used[r] += v;
            }
        }
        for (r, u) in used.iter().enumerate() {
            assert!(*u <= whole_vials(inst.res_rhs[r]) + 1e-6, "row {r}: {u}");
        }
        // A stop flag never set gives the same start to the last bit (the plan must not
        // depend on whether the release LP was started early); a flag set before it starts
        // gives no start.
        let (x2, objective2) = start(Some(false)).expect("built");
        assert_eq!(
            x.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
            x2.iter().map(|v| v.to_bits()).collect::<Vec<_>>()
        );
        assert_eq!(objective.to_bits(), objective2.to_bits());
        assert!(start(Some(true)).is_none());
    }

    #[test]
    fn no_start_when_a_site_may_take_several_releases() {
        let mut s = tiny();
        s.policy.releases_per_site_week = 2;
        let arcs = crate::arcs::build_arcs(&s, &crate::travel::TravelModel::new(&s));
        let priority = vec![1.0; s.sites.len()];
        let inst = Instance::new(&s, &priority, &arcs, &AllocOptions::default()).expect("valid");
        let duals = vec![0.0; inst.resources.len()];
        let cand = vec![true; inst.sites.len()];
        let plan = vec![0; inst.arcs.len()];
        let start = release_lp_start(&inst, &duals, 0.0, &cand, &plan, Solver::Clarabel, None);
        assert!(matches!(start, Ok(None)));
    }
}
