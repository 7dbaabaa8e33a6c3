//! A whole-vial upper bound from the LP's duals: a Lagrangian relaxation of the shared rows
//! with each site's subproblem solved in whole vials (`docs/model.md`, "Bounds").
//!
//! Every shared row r (a pack day's supply, a depot day's vehicle capacity, a day's parcel
//! cap) counts vials: Σ_{a ∋ r} x_a ≤ Q_r. A row holding many vials gets a price y_r ≥ 0 per
//! vial. A row of at most [`SIZE_PRICED_MAX_VIALS`] whole vials, where the lumpiness of
//! releases decides what fits (a pack day of three vials takes one two-vial release, not one
//! and a half), gets a price p_{r,k} per *release of k vials* instead, and a knapsack of its
//! own: with n_{r,k} the releases of k vials on r, every whole-vial plan has
//! Σ_k k n_{r,k} ≤ Q_r, and the plan's own counts m_{r,k} equal n_{r,k}. Relaxing that
//! equality with the free prices p (Lagrangian decomposition) and the share floor
//! Σ_a share_a x_a ≥ 0 with λ ≥ 0, every whole-vial plan x that keeps the rows has
//!
//! ```text
//! objective(x) ≤ Σ_{r per vial} y_r Q_r + Σ_{r per release} K_r(p_r)
//!              + Σ_s max_{x_s ∈ X_s} [ V_s(x_s) − Σ_{releases (a,k) of x_s} π_a(k) ],
//! π_a(k) = k (travel_a + Σ_{r ∋ a per vial} y_r − λ share_a) + Σ_{r ∋ a per release} p_{r,k},
//! K_r(p_r) = max { Σ_k p_{r,k} n_k : Σ_k k n_k ≤ ⌊Q_r⌋, n_k ≥ 0 whole },
//! ```
//!
//! (weak duality: the priced terms are ≥ 0 for such a plan), where X_s are the site's
//! whole-vial releases (nothing, or min..max live wasps for a block; nothing, or the standard
//! count within max for a request) and V_s its benefit less force penalties. With p_{r,k} =
//! y_r k the release prices are per vial again and K_r = y_r ⌊Q_r⌋, so at the LP's optimal
//! duals the bound is at most the LP optimum; whole vials can only lower each site's maximum.
//! The prices per release let the subgradient steps below reach what per-vial prices cannot:
//! on small pack days the assignment of whole releases to days.

use super::instance::{Force, Instance, arc_room, share_coef, whole_vials};
use crate::scenario::SiteKind;
use rayon::prelude::*;

const EPS: f64 = 1e-9;

/// Most partial vial assignments enumerated for one site before falling back to its
/// fractional-vial maximum (still a valid, weaker, bound).
const NODES_PER_SITE: usize = 200_000;

/// Rows holding at most this many whole vials are priced per release size rather than per
/// vial (vials). Above it a release is a small part of the row and per-vial prices lose
/// little; the knapsack of such a row costs O(Q_r × sizes) per evaluation.
pub(crate) const SIZE_PRICED_MAX_VIALS: f64 = 100.0;

/// Last step (a power of two) whose best releases are kept as a rounding guide.
const MAX_EARLY_GUIDE_STEP: usize = 8;

/// Prices of one evaluation: per vial on large rows, per release size on small ones, and the
/// share floor's.
#[derive(Clone)]
struct Prices {
    /// Price per vial of each row (objective units per vial; unused on size-priced rows).
    y: Vec<f64>,
    /// For a size-priced row, the price of a release of k vials at index k − 1.
    sized: Vec<Option<Vec<f64>>>,
    /// Price of the share floor (≥ 0).
    lambda: f64,
}

impl Prices {
    /// Prices from the LP's row duals: per vial, and y_r k per release of k vials on the small
    /// rows (the same value, so the first evaluation is the per-vial bound).
    fn from_duals(inst: &Instance, res_dual: &[f64], share_dual: f64) -> Self {
        let y: Vec<f64> = (0..inst.resources.len())
            .map(|r| res_dual.get(r).copied().unwrap_or(0.0).max(0.0))
            .collect();
        let most = most_vials_per_release(inst);
        let sized = (0..inst.resources.len())
            .map(|r| {
                let q = whole(inst.res_rhs[r]);
                (f64::from(q) <= SIZE_PRICED_MAX_VIALS)
                    .then(|| (1..=q.min(most)).map(|k| y[r] * f64::from(k)).collect())
            })
            .collect();
        Self {
            y,
            sized,
            lambda: (-share_dual).max(0.0),
        }
    }

    /// The part of an arc's release price that is per vial, objective units per vial.
    fn per_vial(&self, inst: &Instance, a: usize) -> f64 {
        let mut p = inst.cost[a];
        for &r in &inst.arc_res[a] {
            if self.sized[r].is_none() {
                p += self.y[r];
            }
        }
        if inst.share.is_some() {
            p -= self.lambda * share_coef(inst, a);
        }
        p
    }
}

/// Whole vials of a row's right-hand side ([`whole_vials`]), as a count.
fn whole(q: f64) -> u32 {
    whole_vials(q).min(f64::from(u32::MAX)) as u32
}

/// Most vials any one release can hold: a request's standard count, or a block's maximum
/// live wasps at the fewest live wasps per vial of any arc.
fn most_vials_per_release(inst: &Instance) -> u32 {
    let least_alive = inst
        .arcs
        .iter()
        .map(|a| a.wasps_alive_per_vial)
        .filter(|&w| w > 0.0)
        .fold(f64::INFINITY, f64::min);
    let block = if least_alive.is_finite() {
        (inst.max * (1.0 + EPS) / least_alive + EPS)
            .floor()
            .clamp(1.0, f64::from(u32::MAX)) as u32
    } else {
        1
    };
    block.max(inst.per_request)
}

/// Steps in a row without a new best after which the subgradient halves its step factor and
/// goes back to the best prices. Measured (2026-12-03, `plan` on the generated 300- and
/// 700-site weeks and the 1,000- and 3,000-site weeks): with 3 the subgradient often stopped
/// far from the dual optimum, e.g. the 700-site 6-facility 1× week's gap was 6.91 % with 3,
/// 1.00 % with 10 and 0.58 % with 20 for the same plan (without [`MIN_PROGRESS`]); 40 gained
/// at most a further 0.5 point for up to twice the time.
const STALL_STEPS: usize = 20;

/// The step factor's floor: below it the subgradient ends (ten halvings).
const LAST_THETA: f64 = 1.0 / 1024.0;

/// Least relative improvement of the bound over the last [`PROGRESS_WINDOW`] steps for the
/// subgradient to go on, once a step has improved on the LP duals' value. Measured
/// (2026-12-03): on the demo the bound moves by 1.4e-4 of itself over 480 steps after step
/// 140, and the rule ends it near step 200 (0.22 % gap instead of 0.20 %, a third of the
/// time); the 700-site 6-facility 1× week still improves by 2e-4 per 60 steps at step 500.
const MIN_PROGRESS: f64 = 1e-4;

/// Steps over which [`MIN_PROGRESS`] is measured: three stalls' worth.
const PROGRESS_WINDOW: usize = 3 * STALL_STEPS;

/// Arc evaluations (steps × usable arcs) after which the subgradient gives up when no step has
/// improved on the LP duals' value. On the 35,000-site week (2.1 million usable arcs) no step
/// ever improves, and this ends it after 5 steps (0.09 s each there); a week of 50,000 arcs
/// still gets 200 steps.
const GIVE_UP_ARC_EVALUATIONS: usize = 10_000_000;

/// The whole-vial Lagrangian bound, tightened from the LP's duals by projected subgradient
/// steps on the prices (`docs/model.md`, "Bounds"): every iterate's value is a valid bound, so
/// the smallest one seen is returned. `res_dual` and `share_dual` are the LP's duals (the
/// share dual with the LP's sign, ≤ 0 for the ≥ row; both clamped); `lower` is the objective
/// of a known whole-vial plan (it sets the step length; any value keeps the bound valid).
/// `steps` is a work limit: at most that many re-evaluations after the first. Objective
/// units. Each evaluation is O(arcs) plus the sites' whole-vial enumerations and the small
/// rows' knapsacks.
///
/// Also returns the sites' maximising releases at the LP's duals, at the best prices after
/// steps 1, 2, 4 and 8, and at the best prices (vials per arc; distinct ones only, none when
/// an enumeration ran out of nodes):
/// plans that may break the shared rows, but good guides for rounding where the LP spreads
/// vials the rows cannot split (e.g. a pack day of three vials). And the descent where it
/// stopped, for [`tighten`].
pub(crate) fn whole_vial_bound(
    inst: &Instance,
    res_dual: &[f64],
    share_dual: f64,
    lower: f64,
    steps: usize,
) -> (f64, Vec<Vec<f64>>, Descent) {
    let prices = Prices::from_duals(inst, res_dual, share_dual);
    let at = lagrangian(inst, &prices, true);
    let first = guide_of(inst, &at);
    let mut d = Descent {
        best: (at.clone(), prices.clone()),
        prices,
        at,
        theta: 1.0,
        since_best: 0,
        improved: false,
        trail: Vec::new(),
        done: 0,
        steps,
        slow: false,
    };
    d.trail.push(d.at.value);
    let mut guides: Vec<Vec<f64>> = first.into_iter().collect();
    descend(inst, &mut d, lower, MIN_PROGRESS, Some(&mut guides));
    if let Some(g) = guide_of(inst, &d.best.0)
        && !guides.contains(&g)
    {
        guides.push(g);
    }
    (d.best.0.value, guides, d)
}

/// Least relative improvement over [`PROGRESS_WINDOW`] steps for [`tighten`] to go on: a
/// hundredth of [`MIN_PROGRESS`]. Measured (2026-12-04, scratch builds with the rule changed
/// for the whole descent): at 1e-5 the 1,000-site week's bound did not move, at 1e-6 it fell
/// from 1,106,291 to 1,097,025 (the printed gap 2.50 → 1.67 %) and the 700-site 3-facility
/// 1× week's from 687,588 to 681,197 (3.26 → 2.35 %), for about 1.7 and 0.8 s more.
const MIN_PROGRESS_TIGHTEN: f64 = 1e-6;

/// A subgradient descent where it stopped: its prices and their evaluation, the best point,
/// and the step rule's state, so that [`tighten`] can go on from there.
pub(crate) struct Descent {
    prices: Prices,
    at: Evaluation,
    best: (Evaluation, Prices),
    theta: f64,
    since_best: usize,
    improved: bool,
    /// The best value after each step (and before the first).
    trail: Vec<f64>,
    /// Steps taken, and the most allowed in all (a work limit).
    done: usize,
    steps: usize,
    /// Whether the last stop was the progress rule (the only stop a finer rule can lift).
    slow: bool,
}

/// Goes on with the descent `d` of [`whole_vial_bound`] under the finer progress rule
/// [`MIN_PROGRESS_TIGHTEN`], within the same step limit, when it stopped for slow progress;
/// returns its best value (a valid whole-vial bound whatever the steps, objective units).
/// `lower` is the objective of a known whole-vial plan (the step length's target). It moves
/// only the bound: the rounding's guides come from the first descent.
pub(crate) fn tighten(inst: &Instance, d: &mut Descent, lower: f64) -> f64 {
    if d.slow {
        descend(inst, d, lower, MIN_PROGRESS_TIGHTEN, None);
    }
    d.best.0.value
}

/// Projected subgradient steps from where `d` stands until one of the stops in
/// [`whole_vial_bound`]'s description, with `min_progress` as the progress rule; early new
/// bests go to `guides` when given.
///
/// Polyak's step towards the target `lower`, with its factor halved, and the prices taken back
/// to the best point, after [`STALL_STEPS`] steps without a new best (the usual safeguards of
/// subgradient methods; a stall goes back to the best point without evaluating it again); it
/// stops once the factor is below [`LAST_THETA`], after [`GIVE_UP_ARC_EVALUATIONS`] when no
/// step has improved on the LP duals' value, or when the best value moves too little.
fn descend(
    inst: &Instance,
    d: &mut Descent,
    lower: f64,
    min_progress: f64,
    mut guides: Option<&mut Vec<Vec<f64>>>,
) {
    d.slow = false;
    while d.done < d.steps {
        let step = d.done;
        d.done += 1;
        // Early new bests differ most from the LP duals' releases: they guide roundings too.
        if let Some(guides) = guides.as_deref_mut()
            && step.is_power_of_two()
            && step <= MAX_EARLY_GUIDE_STEP
            && d.since_best == 0
            && let Some(g) = guide_of(inst, &d.best.0)
            && !guides.contains(&g)
        {
            guides.push(g);
        }
        let Some(usage) = d.at.usage.as_ref() else {
            break;
        };
        let prices = &mut d.prices;
        let at = &d.at;
        // Per-vial rows: Q_r − usage; per-release rows: n_{r,k} − m_{r,k}; the share row.
        let g: Vec<f64> = (0..prices.y.len())
            .map(|r| inst.res_rhs[r] - usage[r])
            .collect();
        let g_share = if inst.share.is_some() {
            at.share_usage
        } else {
            0.0
        };
        // Components that would push a price below zero do not move it.
        let mut norm2: f64 = g
            .iter()
            .zip(&prices.y)
            .zip(&prices.sized)
            .filter(|((g, y), sized)| sized.is_none() && !(**g > 0.0 && **y <= 0.0))
            .map(|((g, _), _)| g * g)
            .sum::<f64>()
            + if g_share > 0.0 && prices.lambda <= 0.0 {
                0.0
            } else {
                g_share * g_share
            };
        for (r, sized) in prices.sized.iter().enumerate() {
            if let Some(p) = sized {
                for k in 0..p.len() {
                    let dk = at.knapsack[r][k] - at.releases[r][k];
                    norm2 += dk * dk;
                }
            }
        }
        let excess = at.value - lower.max(0.0);
        if norm2 <= 1e-12 || excess <= 1e-9 * d.best.0.value.abs().max(1.0) {
            break;
        }
        let t = d.theta * excess / norm2;
        for (r, (y, sized)) in prices.y.iter_mut().zip(&mut prices.sized).enumerate() {
            if let Some(p) = sized.as_mut() {
                for (k, pk) in p.iter_mut().enumerate() {
                    *pk -= t * (at.knapsack[r][k] - at.releases[r][k]);
                }
            } else {
                *y = (*y - t * g[r]).max(0.0);
            }
        }
        prices.lambda = (prices.lambda - t * g_share).max(0.0);
        d.at = lagrangian(inst, &d.prices, true);
        if d.at.value < d.best.0.value - 1e-9 * d.best.0.value.abs().max(1.0) {
            d.improved = true;
            d.best = (d.at.clone(), d.prices.clone());
            d.since_best = 0;
        } else {
            d.since_best += 1;
            if !d.improved && (step + 1) * inst.arcs.len().max(1) >= GIVE_UP_ARC_EVALUATIONS {
                break;
            }
            if d.since_best >= STALL_STEPS {
                d.theta *= 0.5;
                if d.theta < LAST_THETA {
                    break;
                }
                d.since_best = 0;
                d.at = d.best.0.clone();
                d.prices = d.best.1.clone();
            }
        }
        // Once some step has improved on the LP duals, the best of the last
        // `PROGRESS_WINDOW` steps moving the bound by less than `min_progress` ends it (the
        // window spans more than one stall of `STALL_STEPS` steps, which moves nothing).
        d.trail.push(d.best.0.value);
        if d.improved
            && let Some(&then) = d
                .trail
                .len()
                .checked_sub(PROGRESS_WINDOW + 1)
                .map(|i| &d.trail[i])
            && then - d.best.0.value < min_progress * d.best.0.value.abs().max(1.0)
        {
            d.slow = true;
            break;
        }
    }
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
    /// Σ_r y_r Q_r + Σ_r K_r(p_r) + Σ_s (site maximum), objective units.
    value: f64,
    /// Vials each resource row's rows take in the sites' maximising releases, when every
    /// site's enumeration completed (else `None`: no subgradient).
    usage: Option<Vec<f64>>,
    /// Σ share_a x_a of the maximising releases (vials).
    share_usage: f64,
    /// The maximising releases, (arc, vials), when `usage` is known.
    chosen: Vec<(usize, u32)>,
    /// Per size-priced row, the sites' releases of k vials at index k − 1 (m_{r,k}); empty
    /// for per-vial rows.
    releases: Vec<Vec<f64>>,
    /// Per size-priced row, the knapsack's releases of k vials at index k − 1 (n_{r,k}).
    knapsack: Vec<Vec<f64>>,
}

/// One site's subproblem at given prices: its best value, whether `choice` holds the
/// maximising releases in full, and those releases as (arc, vials).
struct SiteBest {
    best: f64,
    complete: bool,
    choice: Vec<(usize, u32)>,
}

/// The Lagrangian dual function at `prices`; with `argmax`, also what the maximising releases
/// use.
fn lagrangian(inst: &Instance, prices: &Prices, argmax: bool) -> Evaluation {
    let mut value = 0.0;
    let mut knapsack = vec![Vec::new(); inst.resources.len()];
    let mut releases = vec![Vec::new(); inst.resources.len()];
    for r in 0..inst.resources.len() {
        match &prices.sized[r] {
            None => value += prices.y[r] * inst.res_rhs[r],
            Some(p) => {
                let (v, n) = knapsack_max(p, whole(inst.res_rhs[r]));
                value += v;
                knapsack[r] = n;
                releases[r] = vec![0.0; p.len()];
            }
        }
    }
    let mut usage = argmax.then(|| vec![0.0; inst.resources.len()]);
    let mut share_usage = 0.0;
    let top_slope = if inst.target > 0.0 {
        1.0f64.max(inst.weight2)
    } else {
        inst.weight2
    };
    // Each site's subproblem is independent: solved in parallel, summed in site order (the
    // same bits as a serial pass, so the bound does not depend on the thread count).
    let per_site: Vec<Option<SiteBest>> = inst
        .sites
        .par_iter()
        .enumerate()
        .map(|(sp, site)| {
            let mut arcs: Vec<SiteArc> = site
                .arcs
                .iter()
                .map(|&a| {
                    let [r0, r1] = inst.arc_res[a];
                    SiteArc {
                        alive: inst.arcs[a].wasps_alive_per_vial,
                        per_vial: prices.per_vial(inst, a),
                        arc: a,
                        room: arc_cap(inst, a),
                        sized: [
                            prices.sized[r0].as_deref(),
                            if r1 == r0 {
                                None
                            } else {
                                prices.sized[r1].as_deref()
                            },
                        ],
                    }
                })
                .collect();
            // Of arcs with the same live wasps per vial and the same per-release prices a
            // dearer one with no more room is never needed: any release on it has the same
            // wasps and vials on the cheaper one.
            arcs.sort_by(|x, y| {
                x.alive
                    .total_cmp(&y.alive)
                    .then(x.per_vial.total_cmp(&y.per_vial))
                    .then(x.arc.cmp(&y.arc))
            });
            arcs.dedup_by(|later, kept| {
                later.alive == kept.alive && later.room <= kept.room && later.sized == kept.sized
            });
            let worth = arcs
                .iter()
                .any(|s| site.priority * top_slope * s.alive - s.least_per_vial() > 0.0);
            if site.force.is_none() && !worth {
                // Every vial costs at least what its wasps could earn: nothing is the best.
                return None;
            }
            let mut choice = Vec::new();
            let (best, complete) = site_max(inst, sp, &arcs, &mut choice);
            Some(SiteBest {
                best,
                complete,
                choice,
            })
        })
        .collect();
    let mut chosen: Vec<(usize, u32)> = Vec::new();
    for SiteBest {
        best,
        complete,
        choice,
    } in per_site.into_iter().flatten()
    {
        value += best;
        if let Some(u) = usage.as_mut() {
            if !complete {
                usage = None;
                continue;
            }
            chosen.extend_from_slice(&choice);
            for &(a, k) in &choice {
                let kf = f64::from(k);
                for &r in &inst.arc_res[a] {
                    u[r] += kf;
                    if prices.sized[r].is_some() {
                        releases[r][k as usize - 1] += 1.0;
                    }
                }
                if inst.share.is_some() {
                    share_usage += kf * share_coef(inst, a);
                }
            }
        }
    }
    Evaluation {
        value,
        usage,
        share_usage,
        chosen,
        releases,
        knapsack,
    }
}

/// max Σ_k p[k−1] n_k over whole n_k ≥ 0 with Σ_k k n_k ≤ `q` (an unbounded knapsack by
/// dynamic programming, O(q × sizes)); returns the maximum and the maximising n_k at index
/// k − 1 (ties to fewer, smaller releases, so equal inputs give equal counts).
fn knapsack_max(p: &[f64], q: u32) -> (f64, Vec<f64>) {
    let q = q as usize;
    let mut best = vec![0.0f64; q + 1];
    let mut take = vec![0usize; q + 1];
    for c in 1..=q {
        best[c] = best[c - 1];
        take[c] = 0;
        for (i, &pk) in p.iter().enumerate() {
            let k = i + 1;
            if k <= c && best[c - k] + pk > best[c] + EPS {
                best[c] = best[c - k] + pk;
                take[c] = k;
            }
        }
    }
    let mut n = vec![0.0; p.len()];
    let mut c = q;
    while c > 0 {
        if take[c] == 0 {
            c -= 1;
        } else {
            n[take[c] - 1] += 1.0;
            c -= take[c];
        }
    }
    (best[q], n)
}

/// One of a site's arcs as the site's subproblem sees it.
#[derive(Clone, Copy)]
struct SiteArc<'p> {
    /// Live wasps per vial at arrival.
    alive: f64,
    /// The per-vial part of a release's price, objective units per vial.
    per_vial: f64,
    arc: usize,
    /// Most whole vials the arc can carry ([`arc_cap`]).
    room: u32,
    /// Per-release prices of the arc's size-priced rows (at most two).
    sized: [Option<&'p [f64]>; 2],
}

impl SiteArc<'_> {
    /// Price of a release of `k` ≥ 1 vials on the arc, objective units. Every release a whole
    /// plan can hold has a size within the priced sizes (at most the row's vials and the most
    /// vials of one release).
    fn release_price(&self, k: u32) -> f64 {
        let mut p = f64::from(k) * self.per_vial;
        for s in self.sized.iter().flatten() {
            p += s.get(k as usize - 1).copied().unwrap_or(f64::INFINITY);
        }
        p
    }

    /// The least price per vial of any release on the arc, objective units per vial.
    fn least_per_vial(&self) -> f64 {
        if self.sized.iter().all(Option::is_none) {
            return self.per_vial;
        }
        let sizes = self
            .sized
            .iter()
            .flatten()
            .map(|s| s.len() as u32)
            .min()
            .unwrap_or(0)
            .min(self.room);
        (1..=sizes)
            .map(|k| self.release_price(k) / f64::from(k))
            .fold(f64::INFINITY, f64::min)
    }
}

/// Most whole vials one arc can carry: no release can take more than the smallest of the rows
/// it draws on (its pack day's supply, its vehicle day's or parcel day's capacity). A valid
/// cut on every whole-vial plan that the shared-row prices alone would not see.
fn arc_cap(inst: &Instance, a: usize) -> u32 {
    arc_room(inst, a).min(f64::from(u32::MAX)) as u32
}

/// max over whole-vial releases x of the site of value − Σ release prices. Returns the maximum
/// and whether the enumeration completed; then `choice` holds the maximising (arc, vials).
fn site_max(
    inst: &Instance,
    sp: usize,
    arcs: &[SiteArc],
    choice: &mut Vec<(usize, u32)>,
) -> (f64, bool) {
    let site = &inst.sites[sp];
    let cap = inst.max * (1.0 + EPS) + EPS;
    let min_alive = arcs.iter().map(|a| a.alive).fold(f64::INFINITY, f64::min);
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
    arcs: &[SiteArc],
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
    // With no release left, every further arc can only take 0 vials: the leaf is the same.
    if i == arcs.len() || left == 0 {
        if inst.release_ok(sp, e, n) {
            let v = inst.site_value(sp, e, n) - cost;
            if v > best.0 {
                *best = (v, path.clone());
            }
        }
        return true;
    }
    let arc = arcs[i];
    let mut k = 0u32;
    loop {
        let e2 = e + f64::from(k) * arc.alive;
        if e2 > cap || n + k > most || k > arc.room || (k > 0 && left == 0) {
            return true;
        }
        let several = inst.releases_per_site > 1;
        let this_ok = k == 0 || !several || inst.release_ok(sp, f64::from(k) * arc.alive, k);
        let left2 = if k > 0 { left - 1 } else { left };
        if this_ok {
            let price = if k > 0 { arc.release_price(k) } else { 0.0 };
            if k > 0 {
                path.push((arc.arc, k));
            }
            let done = enumerate(
                inst,
                sp,
                arcs,
                (cap, most),
                (i + 1, e2, n + k, cost + price, left2),
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
        if arc.alive <= 0.0 && arc.per_vial >= 0.0 && arc.sized.iter().all(Option::is_none) {
            // More of a vial that adds no wasps only costs.
            return true;
        }
        k += 1;
    }
}

/// An upper bound on the site's maximum with fractional vials and no release rules but the
/// cap: every wasp costs at least the least price per live wasp of any release, and the
/// benefit is concave and piecewise linear in wasps, so the best is at 0, the target, a
/// force's need or the cap. Force penalties per vial are left out (they only lower the value).
fn fractional_max(inst: &Instance, sp: usize, arcs: &[SiteArc], cap: f64) -> f64 {
    let per_wasp = arcs
        .iter()
        .filter(|a| a.alive > 0.0)
        .map(|a| a.least_per_vial() / a.alive)
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
    fn a_small_row_takes_its_best_whole_releases() {
        // Releases of 2 vials worth 10 and of 3 vials worth 14 in 7 vials: 2 + 2 + 3 = 34
        // beats 3 + 3 (28, one vial left) and 2 + 2 + 2 (30).
        let (v, n) = knapsack_max(&[-1.0, 10.0, 14.0], 7);
        assert!((v - 34.0).abs() < 1e-12, "{v}");
        assert_eq!(n, vec![0.0, 2.0, 1.0]);
        // Per-vial prices (y k) give y Q, the per-vial bound's term.
        let (v, _) = knapsack_max(&[2.5, 5.0, 7.5], 3);
        assert!((v - 7.5).abs() < 1e-12);
        // Nothing worth taking, or no room.
        assert_eq!(knapsack_max(&[-1.0, -2.0], 5).0, 0.0);
        assert_eq!(knapsack_max(&[4.0], 0).0, 0.0);
    }

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
        let fractional = fractional_max(
            &inst,
            0,
            &[SiteArc {
                alive: 90.0,
                per_vial: 1.0 / 3.0,
                arc: 0,
                room: u32::MAX,
                sized: [None, None],
            }],
            800.0,
        );
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
