//! A whole-vial upper bound from the LP's duals: the Lagrangian relaxation of the shared rows
//! with each site's subproblem solved in whole vials (`docs/model.md`, "Bounds").
//!
//! For prices y_r ≥ 0 on the supply, vehicle and parcel rows and λ ≥ 0 on the dooryard share
//! floor (Σ_a share_a x_a ≥ 0), every whole-vial plan x that keeps those rows satisfies
//!
//! ```text
//! objective(x) ≤ Σ_r y_r b_r + Σ_s max_{x_s ∈ X_s} [ V_s(x_s) − Σ_{a ∈ s} π_a x_a ],
//! π_a = travel_a + Σ_{r ∋ a} y_r − λ share_a,
//! ```
//!
//! (weak duality: the priced terms y_r (b_r − Σ x) and λ Σ share x are ≥ 0 for such a plan),
//! where X_s are the site's whole-vial releases (nothing, or min..max live wasps for a block;
//! nothing, or the standard count within max for a request) and V_s its benefit less force
//! penalties. With the LP's optimal duals and fractional vials in X_s the right-hand side is
//! the LP optimum; whole vials can only lower each site's maximum, so the bound is never
//! weaker than the LP bound. It is tighter where the LP fills a release to its maximum with a
//! fraction of a vial that no whole number of vials reaches.

use super::lp::{Force, Instance, share_coef};
use crate::scenario::SiteKind;

const EPS: f64 = 1e-9;

/// Most partial vial assignments enumerated for one site before falling back to its
/// fractional-vial maximum (still a valid, weaker, bound).
const NODES_PER_SITE: usize = 200_000;

/// The Lagrangian whole-vial bound for resource-row duals `res_dual` (clamped to ≥ 0) and the
/// share-row dual `share_dual` (the LP's sign: ≤ 0 for the ≥ row; clamped). Objective units.
/// O(arcs) plus, per site with a positive-value arc, an enumeration of its whole-vial
/// releases (at most `NODES_PER_SITE` nodes).
pub(crate) fn whole_vial_bound(inst: &Instance, res_dual: &[f64], share_dual: f64) -> f64 {
    let y = |r: usize| res_dual.get(r).copied().unwrap_or(0.0).max(0.0);
    let lambda = (-share_dual).max(0.0);
    let price = |a: usize| {
        let mut p = inst.cost[a];
        for &r in &inst.arc_res[a] {
            p += y(r);
        }
        if inst.share.is_some() {
            p -= lambda * share_coef(inst, a);
        }
        p
    };
    let mut total: f64 = (0..inst.resources.len())
        .map(|r| y(r) * inst.res_rhs[r])
        .sum();
    let top_slope = if inst.target > 0.0 {
        1.0f64.max(inst.weight2)
    } else {
        inst.weight2
    };
    for (sp, site) in inst.sites.iter().enumerate() {
        let mut arcs: Vec<(f64, f64)> = site
            .arcs
            .iter()
            .map(|&a| (inst.arcs[a].wasps_alive_per_vial, price(a)))
            .collect();
        // Of arcs with the same live wasps per vial only the cheapest matters: any release
        // on a dearer one has the same wasps and vials on the cheaper one.
        arcs.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.total_cmp(&y.1)));
        arcs.dedup_by(|later, first| later.0 == first.0);
        let worth = arcs
            .iter()
            .any(|&(alive, p)| site.priority * top_slope * alive - p > 0.0);
        if site.force.is_none() && !worth {
            // Every vial costs at least what its wasps could earn: nothing is the best.
            continue;
        }
        total += site_max(inst, sp, &arcs);
    }
    total
}

/// max over whole-vial releases x of the site of value − Σ price·x; `arcs` holds (live wasps
/// per vial, price per vial) of each of its arcs.
fn site_max(inst: &Instance, sp: usize, arcs: &[(f64, f64)]) -> f64 {
    let site = &inst.sites[sp];
    let cap = inst.max * (1.0 + EPS) + EPS;
    let min_alive = arcs.iter().map(|a| a.0).fold(f64::INFINITY, f64::min);
    let most = match site.kind {
        SiteKind::Dooryard => inst.per_request,
        SiteKind::Block if min_alive > 0.0 => (cap / min_alive).floor().min(1e6) as u32,
        SiteKind::Block => u32::MAX,
    };
    let mut best = inst.site_value(sp, 0.0, 0);
    let mut nodes = 0usize;
    let complete = enumerate(
        inst,
        sp,
        arcs,
        (cap, most),
        (0, 0.0, 0, 0.0, inst.releases_per_site),
        &mut best,
        &mut nodes,
    );
    if complete {
        best
    } else {
        best.max(fractional_max(inst, sp, arcs, cap))
    }
}

/// Depth-first over vials per arc from arc `i` on, with `n` vials, `e` wasps and `cost` so
/// far and `left` releases still allowed (an arc with vials is one release; with several,
/// each must be a valid release on its own); updates `best`. Returns false when the node
/// budget ran out (then `best` covers only part of the releases).
fn enumerate(
    inst: &Instance,
    sp: usize,
    arcs: &[(f64, f64)],
    (cap, most): (f64, u32),
    (i, e, n, cost, left): (usize, f64, u32, f64, u32),
    best: &mut f64,
    nodes: &mut usize,
) -> bool {
    *nodes += 1;
    if *nodes > NODES_PER_SITE {
        return false;
    }
    if i == arcs.len() {
        if inst.release_ok(sp, e, n) {
            *best = best.max(inst.site_value(sp, e, n) - cost);
        }
        return true;
    }
    let (alive, price) = arcs[i];
    let mut k = 0u32;
    loop {
        let e2 = e + f64::from(k) * alive;
        if e2 > cap || n + k > most || (k > 0 && left == 0) {
            return true;
        }
        let several = inst.releases_per_site > 1;
        let this_ok = k == 0 || !several || inst.release_ok(sp, f64::from(k) * alive, k);
        let left2 = if k > 0 { left - 1 } else { left };
        if this_ok
            && !enumerate(
                inst,
                sp,
                arcs,
                (cap, most),
                (i + 1, e2, n + k, cost + f64::from(k) * price, left2),
                best,
                nodes,
            )
        {
            return false;
        }
        if alive <= 0.0 && price >= 0.0 {
            // More of a vial that adds no wasps only costs.
            return true;
        }
        k += 1;
    }
}

/// An upper bound on the site's maximum with fractional vials and no release rules but the
/// cap: every wasp costs at least the cheapest price per live wasp, and the benefit is
/// concave and piecewise linear in wasps, so the best is at 0, the target, a force's need or
/// the cap. Force penalties per vial are left out (they only lower the value).
fn fractional_max(inst: &Instance, sp: usize, arcs: &[(f64, f64)], cap: f64) -> f64 {
    let per_wasp = arcs
        .iter()
        .filter(|a| a.0 > 0.0)
        .map(|&(alive, p)| p / alive)
        .fold(f64::INFINITY, f64::min);
    if !per_wasp.is_finite() {
        return inst.site_value(sp, 0.0, 0).max(0.0);
    }
    let need = match inst.sites[sp].force {
        Some(Force::Wasps(w)) => w.clamp(0.0, cap),
        _ => 0.0,
    };
    let site = &inst.sites[sp];
    let wasps_value = |e: f64| {
        let mut v = inst.benefit(sp, e);
        if let Some(Force::Wasps(w)) = site.force {
            v -= inst.force_penalty_per_vial / inst.best_alive_per_vial.max(1.0) * (w - e).max(0.0);
        }
        v - per_wasp * e
    };
    [0.0, inst.target.clamp(0.0, cap), need, cap]
        .into_iter()
        .map(wasps_value)
        .fold(f64::NEG_INFINITY, f64::max)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::AllocOptions;
    use crate::arcs::{Arc, Arcs, Mode};
    use crate::scenario::fixture::tiny;

    #[test]
    fn one_block_is_valued_at_its_best_whole_number_of_vials() {
        // The fixture's agent: minimum 150, target 400, maximum 800 live wasps, weight 0.5
        // above the target; travel costs 1 per hour, so a 20-minute arc costs 1/3 a vial.
        let mut s = tiny();
        s.policy.dooryard_share_min = 0.0;
        let d = s.week_start;
        let arcs = Arcs {
            arcs: vec![Arc {
                facility: 0,
                pack_date: d,
                dispatch_date: d,
                site: 0,
                mode: Mode::Route,
                eta: d.and_hms_opt(9, 0, 0).expect("valid"),
                release_by: d.and_hms_opt(23, 0, 0).expect("valid"),
                survival: 0.9,
                wasps_alive_per_vial: 90.0,
                drive_minutes: 20.0,
            }],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let opts = AllocOptions {
            pricing: false,
            ..AllocOptions::default()
        };
        let inst = Instance::new(&s, &priority, &arcs, &opts).expect("valid");
        let zero = vec![0.0; inst.resources.len()];
        // Whole vials: 8 vials = 720 wasps (9 would be 810 > 800): 400 + 0.5 × 320 − 8/3.
        let whole = 400.0 + 0.5 * 320.0 - 8.0 / 3.0;
        let got = whole_vial_bound(&inst, &zero, 0.0);
        assert!((got - whole).abs() < 1e-9, "{got} vs {whole}");
        // Fractional vials reach the maximum: 800/90 vials, 400 + 0.5 × 400 − 800/270.
        let fractional = fractional_max(&inst, 0, &[(90.0, 1.0 / 3.0)], 800.0);
        assert!((fractional - (600.0 - 800.0 / 270.0)).abs() < 1e-9);
        assert!(got < fractional);
        // A price of 50 a vial on its supply row: Σ y b plus the site's best release at
        // 50 + 1/3 a vial. 4 vials: 360 − 201.3; 5 vials: 400 + 0.5 × 50 − 251.7 = 173.3 (best);
        // 6 vials: 400 + 70 − 302.
        let mut y = zero.clone();
        y[inst.arc_res[0][0]] = 50.0;
        let supply = inst.res_rhs[inst.arc_res[0][0]];
        let got = whole_vial_bound(&inst, &y, 0.0);
        let best = 425.0 - 5.0 * (50.0 + 1.0 / 3.0);
        assert!((got - (50.0 * supply + best)).abs() < 1e-9, "{got}");
    }
}
