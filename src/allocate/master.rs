//! Step 2 of the allocation: the restricted master LP (formulation: `docs/model.md`, "Rows"
//! and "Working-set pricing").
//!
//! [`build_model`] writes the LP over a working set of arc columns, each row named by its
//! [`ConstraintKind`]; [`solve_relaxation`] solves it, prices the other arcs with the duals
//! (`pricing.rs`) and grows the set until none has a positive reduced cost, which certifies the
//! full-pool optimum, then hands back the primal, the duals and the final working set.

use super::AllocOptions;
use super::constraint::ConstraintKind;
use super::instance::{Force, Instance, share_coef};
use super::model::{LinearModel, ModelError, ModelSolution, Sense};
use super::pricing::{
    MAX_PRICING_ROUNDS, add_priced_arcs, arc_reduced_cost, initial_arcs, use_pricing,
};
use crate::progress::Step;
use crate::scenario::SiteKind;

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
    /// What each row of `model` limits, by row index.
    pub row_kind: Vec<ConstraintKind>,
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

/// Adds a row named after `kind` to `m` and records the kind in `kinds` (by row index).
fn add_row(
    m: &mut LinearModel,
    kinds: &mut Vec<ConstraintKind>,
    kind: ConstraintKind,
    terms: &[(usize, f64)],
    sense: Sense,
    rhs: f64,
) -> usize {
    let r = m.add_row(&kind.to_string(), terms, sense, rhs);
    debug_assert_eq!(r, kinds.len(), "every row of the model has its kind");
    kinds.push(kind);
    r
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
    let mut row_kind = Vec::new();
    let span = (inst.max - inst.target).max(0.0);
    let target = inst.target.min(inst.max).max(0.0);
    for (sp, site) in inst.sites.iter().enumerate() {
        if !site.arcs.iter().any(|&a| arc_in[a]) {
            continue;
        }
        let site_id = &inst.scenario.sites[site.site].id;
        let id = site_id.as_str();
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
        let benefit = add_row(
            &mut m,
            &mut row_kind,
            ConstraintKind::Benefit {
                site: site_id.clone(),
            },
            &b,
            Sense::Le,
            0.0,
        );
        let max_release = add_row(
            &mut m,
            &mut row_kind,
            ConstraintKind::MaxRelease {
                site: site_id.clone(),
            },
            &alive_terms,
            Sense::Le,
            inst.max,
        );
        let request = (site.kind == SiteKind::Dooryard).then(|| {
            add_row(
                &mut m,
                &mut row_kind,
                ConstraintKind::Request {
                    site: site_id.clone(),
                },
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
            let r = add_row(
                &mut m,
                &mut row_kind,
                ConstraintKind::Force {
                    site: site_id.clone(),
                },
                &t,
                Sense::Ge,
                rhs,
            );
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
    for (r, terms) in res_terms.iter().enumerate() {
        if !terms.is_empty() {
            res_row[r] = Some(add_row(
                &mut m,
                &mut row_kind,
                inst.resource_kind(r),
                terms,
                Sense::Le,
                inst.lp_rhs[r],
            ));
        }
    }
    let share_row = match inst.share {
        Some(_) if !share_terms.is_empty() => Some(add_row(
            &mut m,
            &mut row_kind,
            ConstraintKind::DooryardShare,
            &share_terms,
            Sense::Ge,
            0.0,
        )),
        _ => None,
    };
    Built {
        model: m,
        row_kind,
        arc_col,
        site_rows,
        res_row,
        share_row,
        force_rows,
    }
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

/// Solves the LP, with working-set pricing when [`use_pricing`] says so.
///
/// The working set is a set of arc columns ([`initial_arcs`]). Each round solves it, prices
/// every other arc with the exact reduced cost against the round's duals (O(A)) and adds the
/// arcs with a positive one; when none remains the working-set optimum is the full-pool
/// optimum (LP duality: the set's duals, extended to the missing rows as in
/// [`arc_reduced_cost`](super::pricing::arc_reduced_cost), are feasible for the full dual). After 30 rounds every arc is added.
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
    // starts this one close to its end: fewer pricing rounds, the same optimum. It replaces
    // the first set (but for the forced sites' arcs), which would only make the first LP
    // larger: on the generated 35,000-site week the route feedback's re-solve took one round
    // of 38,529 arcs with both.
    if priced && inst.source.iter().any(|src| opts.warm_start.contains(src)) {
        for (a, (inn, src)) in arc_in.iter_mut().zip(&inst.source).enumerate() {
            *inn = opts.warm_start.contains(src) || inst.sites[inst.arc_site[a]].force.is_some();
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
    let mut dropped = vec![false; na];
    loop {
        rounds += 1;
        opts.progress.report(Step::LpRound {
            round: rounds,
            working_arcs: arc_in.iter().filter(|b| **b).count(),
            arcs: na,
        });
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
                if added > 0 {
                    drop_priced_out(
                        inst,
                        &built,
                        &solution,
                        DROP_BELOW * scale,
                        &mut arc_in,
                        &mut dropped,
                    );
                }
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

/// Reduced cost (as a fraction of the objective's scale, the largest value of a vial) below
/// which an unused arc leaves the working set. Measured on the generated 35,000-site week:
/// after the first round 25,888 of its 37,096 arcs are below −10⁻⁴ and the second round's LP
/// is a third of the first one's size, with no arc priced back in.
const DROP_BELOW: f64 = 1e-4;

/// Takes out of `arc_in` the arcs that carry no vials in `solution` and whose reduced cost is
/// below −`tol`, each at most once (`dropped`), so the next round's interior-point solve is
/// smaller. It does not touch the certificate: every arc outside the set is priced again
/// against the next round's duals, and an arc that pays again comes back. At most once per arc,
/// so the rounds still end. O(working set).
fn drop_priced_out(
    inst: &Instance,
    built: &Built,
    solution: &ModelSolution,
    tol: f64,
    arc_in: &mut [bool],
    dropped: &mut [bool],
) {
    for a in 0..inst.arcs.len() {
        let Some(c) = built.arc_col[a] else { continue };
        if dropped[a] || !arc_in[a] || solution.values[c] > 1e-6 {
            continue;
        }
        if arc_reduced_cost(inst, built, &solution.duals, a) < -tol {
            arc_in[a] = false;
            dropped[a] = true;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::synthetic::same_day_arc as arc;
    use crate::arcs::{Arcs, Mode};
    use crate::scenario::fixture::tiny;

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
}
