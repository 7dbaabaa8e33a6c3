//! Step 3 of the allocation: pricing (formulation: `docs/model.md`, "Working-set pricing").
//!
//! The first working set of arc columns ([`initial_arcs`]), the reduced cost of an arc against
//! the master LP's duals ([`arc_reduced_cost`], and [`reduced_cost`] against the shared rows
//! alone, with which `allocate` picks the rounding's near misses), the arcs each round adds
//! ([`add_priced_arcs`]), and whether to price at all or solve the whole pool at once
//! ([`use_pricing`]).

use super::AllocOptions;
use super::instance::{Force, Instance, Resource, share_coef};
use super::master::Built;
use crate::scenario::SiteKind;

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

/// How full (in vials of sites' releases, each site counted once) the first working set
/// makes every supply and parcel row. Measured on the generated 35,000-site week: at 1.0 the
/// first LP (37,096 arcs) reaches the optimum to 3e-5 and pricing ends after the second
/// round; at 0.6, four rounds; at 2.0, a first LP of 68,282 arcs that takes 2.6 × as long.
const ROW_FILL: f64 = 1.0;

/// The first working set (arc columns), each choice O(A log A):
///
/// - every arc of a forced site;
/// - per supply and parcel row, the arcs with the best value per vial (priority × live wasps
///   per vial − travel cost), one per site, until the releases (target for blocks, the
///   standard count for requests) of sites no earlier row counted add up to the row's vials
///   ([`ROW_FILL`]), and the dooryards among them to the share floor's part: every shared row
///   then has competition and a real dual in the first round;
/// - the best sites by value until their releases add up to twice the week's supply, and the
///   best dooryards until they could meet twice the share floor, each with its best arc.
pub(super) fn initial_arcs(inst: &Instance) -> Vec<bool> {
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
    // A site fills only the first row that counts it: a site near several facilities can
    // take one release, so counting it on every row left the rows short of sites (on the
    // generated 35,000-site week four of six facilities shipped nothing in the first round,
    // and the pricing took 12 rounds to find their sites). Dooryards are counted apart, up
    // to the share floor's part of the row, so that the floor does not bind for want of
    // requests in the set.
    let share = inst.share.unwrap_or(0.0);
    let mut filled_door = vec![0.0; inst.resources.len()];
    let mut counted = vec![false; inst.sites.len()];
    for &(v, a) in &order {
        if v <= 0.0 {
            break;
        }
        let sp = inst.arc_site[a];
        let is_door = inst.sites[sp].kind == SiteKind::Dooryard;
        for &r in &inst.arc_res[a] {
            let k = seen_of[r];
            if k == usize::MAX || seen[k][sp] {
                continue;
            }
            let wanted = filled[r] <= ROW_FILL * inst.res_rhs[r]
                || (is_door
                    && filled_door[r] <= ROW_FILL * share * inst.res_rhs[r] + 2.0 * per_request);
            if !wanted {
                continue;
            }
            seen[k][sp] = true;
            arc_in[a] = true;
            if !counted[sp] {
                counted[sp] = true;
                filled[r] += need(a);
                if is_door {
                    filled_door[r] += per_request;
                }
            }
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
pub(super) const MAX_PRICING_ROUNDS: usize = 30;

/// Arcs one pricing round adds at most, and per site: partial pricing keeps each round's LP
/// small, since an interior-point solve costs far more than another round of pricing.
const PRICED_ARCS_PER_ROUND: usize = 2_000;
const PRICED_ARCS_PER_SITE: usize = 2;

/// Adds to `arc_in` the arcs with a reduced cost above `tol` against the duals `y` of
/// `built`: at most [`PRICED_ARCS_PER_SITE`] per site and [`PRICED_ARCS_PER_ROUND`] in all,
/// best first. Returns how many were added; 0 certifies the working-set optimum for the full
/// pool. O(A log A).
pub(super) fn add_priced_arcs(
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
pub(super) fn use_pricing(inst: &Instance, opts: &AllocOptions, first: &[bool]) -> bool {
    let na = inst.arcs.len();
    opts.pricing && (na > opts.direct_max_arcs || first.iter().filter(|b| **b).count() * 20 < na)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::synthetic::same_day_arc as arc;
    use crate::arcs::{Arcs, Mode};
    use crate::scenario::fixture::tiny;

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
