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

use super::instance::{Force, Instance, share_coef};
use crate::scenario::SiteKind;

const EPS: f64 = 1e-9;

/// Most partial vial assignments enumerated for one site before falling back to its
/// fractional-vial maximum (still a valid, weaker, bound).
const NODES_PER_SITE: usize = 200_000;

/// The whole-vial Lagrangian bound, tightened from the LP's duals by projected subgradient
/// steps on the prices (`docs/model.md`, "Bounds"): every iterate's value is a valid bound, so
/// the smallest one seen is returned. `res_dual` and `share_dual` are the LP's duals (the
/// share dual with the LP's sign, ≤ 0 for the ≥ row; both clamped); `lower` is the objective
/// of a known whole-vial plan (it sets the step length; any value keeps the bound valid).
/// `steps` is a work limit: at most that many re-evaluations after the first. Objective
/// units. Each evaluation is O(arcs) plus the sites' whole-vial enumerations.
///
/// Also returns the sites' maximising releases at the best prices (vials per arc; `None`
/// when an enumeration ran out of nodes): a plan that may break the shared rows, but a good
/// guide for rounding where the LP spreads vials the rows cannot split (e.g. a pack day of
/// three vials).
pub(crate) fn whole_vial_bound(
    inst: &Instance,
    res_dual: &[f64],
    share_dual: f64,
    lower: f64,
    steps: usize,
) -> (f64, Option<Vec<f64>>) {
    let mut y: Vec<f64> = (0..inst.resources.len())
        .map(|r| res_dual.get(r).copied().unwrap_or(0.0).max(0.0))
        .collect();
    let mut lambda = (-share_dual).max(0.0);
    let mut at = lagrangian(inst, &y, lambda, true);
    // The best evaluation and its prices: every step starts from `at`, and a stall goes back
    // to the best point without evaluating it again.
    let mut best = (at.clone(), y.clone(), lambda);
    // Polyak's step towards the target `lower`, with its factor halved, and the prices taken
    // back to the best point, after a few steps without a new best (the usual safeguards of
    // subgradient methods). The target is usually far below the bound, so the factor starts
    // small.
    let mut theta = 0.1;
    let mut since_best = 0;
    let mut stalls = 0;
    for _ in 0..steps {
        let Some(usage) = at.usage.as_ref() else {
            break;
        };
        let g: Vec<f64> = (0..y.len()).map(|r| inst.res_rhs[r] - usage[r]).collect();
        let g_share = if inst.share.is_some() {
            at.share_usage
        } else {
            0.0
        };
        // Components that would push a price below zero do not move it.
        let norm2: f64 = g
            .iter()
            .zip(&y)
            .filter(|(g, y)| !(**g > 0.0 && **y <= 0.0))
            .map(|(g, _)| g * g)
            .sum::<f64>()
            + if g_share > 0.0 && lambda <= 0.0 {
                0.0
            } else {
                g_share * g_share
            };
        let excess = at.value - lower.max(0.0);
        if norm2 <= 1e-12 || excess <= 1e-9 * best.0.value.abs().max(1.0) {
            break;
        }
        let t = theta * excess / norm2;
        for (yr, gr) in y.iter_mut().zip(&g) {
            *yr = (*yr - t * gr).max(0.0);
        }
        lambda = (lambda - t * g_share).max(0.0);
        at = lagrangian(inst, &y, lambda, true);
        if at.value < best.0.value - 1e-9 * best.0.value.abs().max(1.0) {
            best = (at.clone(), y.clone(), lambda);
            since_best = 0;
            stalls = 0;
        } else {
            since_best += 1;
            stalls += 1;
            if stalls >= 9 {
                // Three halvings without a new best: the prices are near their best.
                break;
            }
            if since_best >= 3 {
                theta *= 0.5;
                since_best = 0;
                at = best.0.clone();
                y.clone_from(&best.1);
                lambda = best.2;
            }
        }
    }
    (best.0.value, guide_of(inst, &best.0))
}

/// Vials per arc of the maximising releases of `at`, when complete.
fn guide_of(inst: &Instance, at: &Evaluation) -> Option<Vec<f64>> {
    at.usage.as_ref()?;
    let mut x = vec![0.0; inst.arcs.len()];
    for &(a, k) in &at.chosen {
        x[a] += f64::from(k);
    }
    Some(x)
}

/// One evaluation of the Lagrangian dual function.
#[derive(Clone)]
struct Evaluation {
    /// Σ_r y_r b_r + Σ_s (site maximum), objective units.
    value: f64,
    /// Vials each resource row's rows take in the sites' maximising releases, when every
    /// site's enumeration completed (else `None`: no subgradient).
    usage: Option<Vec<f64>>,
    /// Σ share_a x_a of the maximising releases (vials).
    share_usage: f64,
    /// The maximising releases, (arc, vials), when `usage` is known.
    chosen: Vec<(usize, u32)>,
}

/// The Lagrangian dual function at resource prices `y` (≥ 0) and share price `lambda` (≥ 0);
/// with `argmax`, also the resources the maximising releases use.
fn lagrangian(inst: &Instance, y: &[f64], lambda: f64, argmax: bool) -> Evaluation {
    let price = |a: usize| {
        let mut p = inst.cost[a];
        for &r in &inst.arc_res[a] {
            p += y[r];
        }
        if inst.share.is_some() {
            p -= lambda * share_coef(inst, a);
        }
        p
    };
    let mut value: f64 = (0..inst.resources.len())
        .map(|r| y[r] * inst.res_rhs[r])
        .sum();
    let mut usage = argmax.then(|| vec![0.0; inst.resources.len()]);
    let mut share_usage = 0.0;
    let top_slope = if inst.target > 0.0 {
        1.0f64.max(inst.weight2)
    } else {
        inst.weight2
    };
    let mut choice: Vec<(usize, u32)> = Vec::new();
    let mut chosen: Vec<(usize, u32)> = Vec::new();
    for (sp, site) in inst.sites.iter().enumerate() {
        let mut arcs: Vec<(f64, f64, usize, u32)> = site
            .arcs
            .iter()
            .map(|&a| {
                (
                    inst.arcs[a].wasps_alive_per_vial,
                    price(a),
                    a,
                    arc_cap(inst, a),
                )
            })
            .collect();
        // Of arcs with the same live wasps per vial a dearer one with no more room is never
        // needed: any release on it has the same wasps and vials on the cheaper one.
        arcs.sort_by(|x, y| {
            x.0.total_cmp(&y.0)
                .then(x.1.total_cmp(&y.1))
                .then(x.2.cmp(&y.2))
        });
        arcs.dedup_by(|later, kept| later.0 == kept.0 && later.3 <= kept.3);
        let worth = arcs
            .iter()
            .any(|&(alive, p, _, _)| site.priority * top_slope * alive - p > 0.0);
        if site.force.is_none() && !worth {
            // Every vial costs at least what its wasps could earn: nothing is the best.
            continue;
        }
        choice.clear();
        let (best, complete) = site_max(inst, sp, &arcs, &mut choice);
        value += best;
        if let Some(u) = usage.as_mut() {
            if !complete {
                usage = None;
                continue;
            }
            chosen.extend_from_slice(&choice);
            for &(a, k) in &choice {
                let k = f64::from(k);
                for &r in &inst.arc_res[a] {
                    u[r] += k;
                }
                if inst.share.is_some() {
                    share_usage += k * share_coef(inst, a);
                }
            }
        }
    }
    Evaluation {
        value,
        usage,
        share_usage,
        chosen,
    }
}

/// Most whole vials one arc can carry: no release can take more than the smallest of the rows
/// it draws on (its pack day's supply, its vehicle day's or parcel day's capacity). A valid
/// cut on every whole-vial plan that the shared-row prices alone would not see.
fn arc_cap(inst: &Instance, a: usize) -> u32 {
    inst.arc_res[a]
        .iter()
        .map(|&r| {
            (inst.res_rhs[r] + EPS)
                .floor()
                .clamp(0.0, f64::from(u32::MAX)) as u32
        })
        .min()
        .unwrap_or(u32::MAX)
}

/// max over whole-vial releases x of the site of value − Σ price·x; `arcs` holds (live wasps
/// per vial, price per vial, arc) of each of its arcs. Returns the maximum and whether the
/// enumeration completed; then `choice` holds the maximising (arc, vials).
fn site_max(
    inst: &Instance,
    sp: usize,
    arcs: &[(f64, f64, usize, u32)],
    choice: &mut Vec<(usize, u32)>,
) -> (f64, bool) {
    let site = &inst.sites[sp];
    let cap = inst.max * (1.0 + EPS) + EPS;
    let min_alive = arcs.iter().map(|a| a.0).fold(f64::INFINITY, f64::min);
    let most = match site.kind {
        SiteKind::Dooryard => inst.per_request,
        SiteKind::Block if min_alive > 0.0 => (cap / min_alive).floor().min(1e6) as u32,
        SiteKind::Block => u32::MAX,
    };
    let mut best = (inst.site_value(sp, 0.0, 0), Vec::new());
    let mut nodes = 0usize;
    let mut path = Vec::new();
    let complete = enumerate(
        inst,
        sp,
        arcs,
        (cap, most),
        (0, 0.0, 0, 0.0, inst.releases_per_site),
        &mut path,
        &mut best,
        &mut nodes,
    );
    if complete {
        *choice = best.1;
        (best.0, true)
    } else {
        (best.0.max(fractional_max(inst, sp, arcs, cap)), false)
    }
}

/// Depth-first over vials per arc from arc `i` on, with `n` vials, `e` wasps and `cost` so
/// far and `left` releases still allowed (an arc with vials is one release; with several,
/// each must be a valid release on its own); `path` holds the (arc, vials) chosen so far.
/// Updates `best` (value, releases). Returns false when the node budget ran out (then `best`
/// covers only part of the releases).
#[allow(clippy::too_many_arguments)]
fn enumerate(
    inst: &Instance,
    sp: usize,
    arcs: &[(f64, f64, usize, u32)],
    (cap, most): (f64, u32),
    (i, e, n, cost, left): (usize, f64, u32, f64, u32),
    path: &mut Vec<(usize, u32)>,
    best: &mut (f64, Vec<(usize, u32)>),
    nodes: &mut usize,
) -> bool {
    *nodes += 1;
    if *nodes > NODES_PER_SITE {
        return false;
    }
    if i == arcs.len() {
        if inst.release_ok(sp, e, n) {
            let v = inst.site_value(sp, e, n) - cost;
            if v > best.0 {
                *best = (v, path.clone());
            }
        }
        return true;
    }
    let (alive, price, arc, room) = arcs[i];
    let mut k = 0u32;
    loop {
        let e2 = e + f64::from(k) * alive;
        if e2 > cap || n + k > most || k > room || (k > 0 && left == 0) {
            return true;
        }
        let several = inst.releases_per_site > 1;
        let this_ok = k == 0 || !several || inst.release_ok(sp, f64::from(k) * alive, k);
        let left2 = if k > 0 { left - 1 } else { left };
        if this_ok {
            if k > 0 {
                path.push((arc, k));
            }
            let done = enumerate(
                inst,
                sp,
                arcs,
                (cap, most),
                (i + 1, e2, n + k, cost + f64::from(k) * price, left2),
                path,
                best,
                nodes,
            );
            if k > 0 {
                path.pop();
            }
            if !done {
                return false;
            }
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
fn fractional_max(inst: &Instance, sp: usize, arcs: &[(f64, f64, usize, u32)], cap: f64) -> f64 {
    let per_wasp = arcs
        .iter()
        .filter(|a| a.0 > 0.0)
        .map(|&(alive, p, _, _)| p / alive)
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
        let mut inst = Instance::new(&s, &priority, &arcs, &opts).expect("valid");
        let zero = vec![0.0; inst.resources.len()];
        // The fixture's pack day holds 6 vials: no release on this arc can take more (the
        // arc cap), so 6 vials = 540 wasps: 400 + 0.5 × 140 − 6/3.
        let got = whole_vial_bound(&inst, &zero, 0.0, 0.0, 0).0;
        assert!((got - 468.0).abs() < 1e-9, "{got}");
        for r in inst.arc_res[0] {
            inst.res_rhs[r] = 100.0;
        }
        // Whole vials: 8 vials = 720 wasps (9 would be 810 > 800): 400 + 0.5 × 320 − 8/3.
        let whole = 400.0 + 0.5 * 320.0 - 8.0 / 3.0;
        let got = whole_vial_bound(&inst, &zero, 0.0, 0.0, 0).0;
        assert!((got - whole).abs() < 1e-9, "{got} vs {whole}");
        // Fractional vials reach the maximum: 800/90 vials, 400 + 0.5 × 400 − 800/270.
        let fractional = fractional_max(&inst, 0, &[(90.0, 1.0 / 3.0, 0, u32::MAX)], 800.0);
        assert!((fractional - (600.0 - 800.0 / 270.0)).abs() < 1e-9);
        assert!(got < fractional);
        // A price of 50 a vial on its supply row: Σ y b plus the site's best release at
        // 50 + 1/3 a vial. 4 vials: 360 − 201.3; 5 vials: 400 + 0.5 × 50 − 251.7 = 173.3 (best);
        // 6 vials: 400 + 70 − 302.
        let mut y = zero.clone();
        y[inst.arc_res[0][0]] = 50.0;
        let supply = inst.res_rhs[inst.arc_res[0][0]];
        let got = whole_vial_bound(&inst, &y, 0.0, 0.0, 0).0;
        let best = 425.0 - 5.0 * (50.0 + 1.0 / 3.0);
        assert!((got - (50.0 * supply + best)).abs() < 1e-9, "{got}");
    }
}
