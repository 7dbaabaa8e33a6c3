//! Release moves for the whole-vial rounding (`docs/model.md`, "Rounding", step 5).
//!
//! The vial moves of the local search change one vial at a time, so they cannot take a whole
//! release from one pack day to another when every row is full: moving it leaves the old row
//! short of a minimum release until some other site fills it. Where supply is scarce (a pack
//! day of two to four vials, a minimum release of two), that is the whole problem: which site
//! gets which pack day, so that no row is left with vials no release can use. These moves take
//! whole releases:
//!
//! * **relocate**: empty a served site, give it the best release on another of its arcs that
//!   fits, and refill the rows it left with the greedy fill;
//! * **swap**: two served sites trade supply rows (each takes its best release on an arc of the
//!   other's pack day, in the vials that fit), and the rows are refilled.
//!
//! A move is kept only when the objective rises; it is undone through the state's journal
//! otherwise. Every placement is within the free room of both rows of its arc and the share
//! floor is checked before a move is kept, so the plan stays feasible. Work is counted in the
//! state's move budget (deterministic, not a clock).

use super::instance::Instance;
use super::rounding::State;
use crate::scenario::SiteKind;

const EPS: f64 = 1e-9;

/// Shared lookups of one pass: the candidate sites with an arc on each resource row, and an
/// optimistic value per vial of each row (what one vial there could earn at most), used to
/// skip moves that cannot gain.
pub(super) struct Rows {
    /// Candidate site positions with an arc drawing on each resource, ascending.
    sites: Vec<Vec<usize>>,
    /// Per resource: the most any vial on it can add (priority × live wasps per vial × the
    /// steeper benefit slope − travel), ≥ 0. Objective units per vial.
    per_vial: Vec<f64>,
}

impl Rows {
    /// Lookups over the candidate site positions `cand`. O(candidate arcs).
    pub(super) fn new(inst: &Instance, cand: &[usize]) -> Self {
        let mut sites: Vec<Vec<usize>> = vec![Vec::new(); inst.resources.len()];
        let mut per_vial = vec![0.0f64; inst.resources.len()];
        let slope = if inst.target > 0.0 {
            inst.weight2.max(1.0)
        } else {
            inst.weight2
        };
        for &sp in cand {
            let site = &inst.sites[sp];
            for &a in &site.arcs {
                let v = site.priority * slope * inst.arcs[a].wasps_alive_per_vial - inst.cost[a];
                for &r in &inst.arc_res[a] {
                    if sites[r].last() != Some(&sp) {
                        sites[r].push(sp);
                    }
                    per_vial[r] = per_vial[r].max(v);
                }
            }
        }
        Rows { sites, per_vial }
    }
}

/// What site position `sp` adds now: its value less the travel of its vials.
fn contribution(st: &State, sp: usize) -> f64 {
    let inst = st.inst;
    let travel: f64 = inst.sites[sp]
        .arcs
        .iter()
        .map(|&a| f64::from(st.x[a]) * inst.cost[a])
        .sum();
    st.site_value(sp, st.site_e[sp], st.site_v[sp]) - travel
}

/// The best single release of the empty site position `sp` on one of `arcs` within their free
/// room now: (arc, vials, what it adds). Only releases that add more than 0. A block's value
/// less travel is concave in its vials (concave benefit and force terms, linear travel), so
/// only the ends of its range and the counts around the target and a force's need are tried.
pub(super) fn best_release(
    st: &mut State,
    sp: usize,
    arcs: impl Iterator<Item = usize>,
) -> Option<(usize, u32, f64)> {
    let inst = st.inst;
    let site = &inst.sites[sp];
    let mut best: Option<(usize, u32, f64)> = None;
    for b in arcs {
        st.work += 1;
        let alive = inst.arcs[b].wasps_alive_per_vial;
        let room = st.free(b);
        let counts: Vec<u32> = match site.kind {
            SiteKind::Dooryard => vec![inst.per_request],
            SiteKind::Block if alive > 0.0 => {
                let lo = ((inst.min * (1.0 - EPS) / alive).ceil() as u32).max(1);
                let hi = room.min((inst.max * (1.0 + EPS) / alive).floor() as u32);
                if hi < lo {
                    continue;
                }
                let t = inst.target / alive;
                let mut c = vec![lo, hi, t.floor() as u32, t.ceil() as u32];
                match site.force {
                    Some(super::instance::Force::Vials(v)) => c.push(v.ceil() as u32),
                    Some(super::instance::Force::Wasps(w)) => c.push((w / alive).ceil() as u32),
                    None => {}
                }
                c.into_iter().map(|k| k.clamp(lo, hi)).collect()
            }
            SiteKind::Block => continue,
        };
        for k in counts {
            if k == 0 || k > room {
                continue;
            }
            let e = f64::from(k) * alive;
            if !st.release_ok(sp, e, k) {
                continue;
            }
            let v = st.site_value(sp, e, k) - f64::from(k) * inst.cost[b];
            if v > EPS && best.is_none_or(|x| v > x.2) {
                best = Some((b, k, v));
            }
        }
    }
    best
}

/// Refills the rows of `freed` (arcs whose vials were taken off) with the greedy fill over the
/// candidate sites that draw on them.
fn refill(st: &mut State, rows: &Rows, freed: &[usize], budget: u64) {
    let inst = st.inst;
    let mut list: Vec<usize> = freed
        .iter()
        .flat_map(|&a| inst.arc_res[a])
        .flat_map(|r| rows.sites[r].iter().copied())
        .collect();
    list.sort_unstable();
    list.dedup();
    st.greedy(&list, None, budget);
}

/// Keeps the moves committed since the checkpoint when the plan is feasible and the objective
/// rose above `before`; undoes them otherwise. Returns whether they were kept.
fn settle(st: &mut State, before: f64, touched: &[usize]) -> bool {
    let gain = st.obj > before + EPS * before.abs().max(1.0);
    if gain && st.share_ok() && touched.iter().all(|&sp| st.site_ok(sp)) {
        st.keep();
        true
    } else {
        st.rollback();
        false
    }
}

/// Relocate: empty served site `sp`, put its best release on another arc (tried one arc at a
/// time, in the site's arc order), refill the rows it left; kept at the first arc that gains.
pub(super) fn relocate(st: &mut State, rows: &Rows, sp: usize, budget: u64) -> bool {
    let inst = st.inst;
    let empty = st.emptying(sp);
    if empty.is_empty() {
        return false;
    }
    let here = contribution(st, sp);
    let freed: Vec<usize> = empty.iter().map(|m| m.0).collect();
    // What the vials it leaves could earn at most, for the skip test.
    let refill_most: f64 = empty
        .iter()
        .map(|&(a, d)| {
            let r = inst.arc_res[a];
            (-d) as f64 * rows.per_vial[r[0]].min(rows.per_vial[r[1]])
        })
        .sum();
    for &b in &inst.sites[sp].arcs {
        if st.work >= budget {
            return false;
        }
        if st.x[b] > 0 {
            continue;
        }
        let before = st.obj;
        st.checkpoint();
        st.commit(&empty);
        match best_release(st, sp, std::iter::once(b)) {
            Some((_, k, v)) if v + refill_most > here + EPS * here.abs().max(1.0) => {
                st.commit(&[(b, i64::from(k))]);
                refill(st, rows, &freed, budget);
                if settle(st, before, &[sp]) {
                    return true;
                }
            }
            _ => st.rollback(),
        }
    }
    false
}

/// Swap: served sites `s` and `t` trade supply rows. Each is emptied and given its best
/// release on its arcs that draw on the other's supply row, `s` first; the rows both left are
/// refilled. Kept when the objective rises.
pub(super) fn swap(st: &mut State, rows: &Rows, s: usize, t: usize, budget: u64) -> bool {
    let inst = st.inst;
    let (es, et) = (st.emptying(s), st.emptying(t));
    if es.is_empty() || et.is_empty() || s == t {
        return false;
    }
    let supply_of = |moves: &[(usize, i64)]| -> Vec<usize> {
        let mut r: Vec<usize> = moves.iter().map(|m| inst.arc_res[m.0][0]).collect();
        r.sort_unstable();
        r.dedup();
        r
    };
    let (rs, rt) = (supply_of(&es), supply_of(&et));
    let s_arcs: Vec<usize> = inst.sites[s]
        .arcs
        .iter()
        .copied()
        .filter(|&a| rt.contains(&inst.arc_res[a][0]) && st.x[a] == 0)
        .collect();
    let t_arcs: Vec<usize> = inst.sites[t]
        .arcs
        .iter()
        .copied()
        .filter(|&a| rs.contains(&inst.arc_res[a][0]) && st.x[a] == 0)
        .collect();
    if s_arcs.is_empty() || t_arcs.is_empty() {
        return false;
    }
    let before = st.obj;
    st.checkpoint();
    st.commit(&es);
    st.commit(&et);
    if let Some((a, k, _)) = best_release(st, s, s_arcs.into_iter()) {
        st.commit(&[(a, i64::from(k))]);
    }
    if let Some((a, k, _)) = best_release(st, t, t_arcs.into_iter()) {
        st.commit(&[(a, i64::from(k))]);
    }
    let freed: Vec<usize> = es.iter().chain(&et).map(|m| m.0).collect();
    refill(st, rows, &freed, budget);
    settle(st, before, &[s, t])
}

/// Work (moves evaluated) one pass of release moves may use, besides 64 per candidate site.
const PASS_WORK: u64 = 400_000;

/// Most releases a supply row may hold now to take part in the row assignment.
const ASSIGN_MAX_RELEASES: usize = 2;

/// Unserved candidate sites offered to the row assignment per row taking part.
const ASSIGN_NEW_PER_ROW: usize = 3;

/// Row assignment: the supply rows that hold at most [`ASSIGN_MAX_RELEASES`] releases (rows
/// of a few vials, where a release takes a whole row) are emptied, and the sites that left
/// them, with the best unserved candidates, are matched to the rows one release per row by an
/// exact maximum-weight assignment (Hungarian method), each site's weight on a row being its
/// best release there within the row's room. Rows the matching leaves room on are refilled
/// greedily. The share floor enters as a price λ per dooryard vial (less the share of every
/// vial), raised until the floor holds. Kept when the objective rises. One release per site
/// only (`releases_per_site` = 1). O(k · n² · m) for n sites, m rows and k prices tried.
pub(super) fn assign_rows(st: &mut State, rows: &Rows, cand: &[usize], budget: u64) -> bool {
    let inst = st.inst;
    if inst.releases_per_site != 1 {
        return false;
    }
    let mut releases: Vec<usize> = vec![0; inst.resources.len()];
    let mut on_row: Vec<Vec<usize>> = vec![Vec::new(); inst.resources.len()];
    for &sp in cand {
        for &a in &inst.sites[sp].arcs {
            if st.x[a] > 0 {
                let r = inst.arc_res[a][0];
                releases[r] += 1;
                on_row[r].push(sp);
            }
        }
    }
    let set: Vec<usize> = (0..inst.resources.len())
        .filter(|&r| {
            matches!(inst.resources[r], super::instance::Resource::Supply(..))
                && releases[r] <= ASSIGN_MAX_RELEASES
                && inst.res_rhs[r] >= 1.0
                && !rows.sites[r].is_empty()
        })
        .collect();
    if set.len() < 2 {
        return false;
    }
    let in_set = |r: usize| set.binary_search(&r).is_ok();
    let mut sites: Vec<usize> = set
        .iter()
        .flat_map(|&r| on_row[r].iter().copied())
        .collect();
    sites.sort_unstable();
    sites.dedup();
    // A site served on a row outside the set stays where it is.
    let fixed_elsewhere = |st: &State, sp: usize| {
        inst.sites[sp]
            .arcs
            .iter()
            .any(|&a| st.x[a] > 0 && !in_set(inst.arc_res[a][0]))
    };
    sites.retain(|&sp| !fixed_elsewhere(st, sp));
    let before = st.obj;
    let mut lambda = 0.0f64;
    for attempt in 0..6 {
        if st.work >= budget {
            return false;
        }
        st.checkpoint();
        for &sp in &sites {
            let empty = st.emptying(sp);
            st.commit(&empty);
        }
        // Unserved candidates: the best by their best release on a row of the set.
        // Any reachable site may join, not only the rounding's candidates: where supply is
        // scarce the LP's support is about as small as the plan.
        let mut fresh: Vec<(f64, usize)> = (0..inst.arcs.len())
            .filter(|&a| in_set(inst.arc_res[a][0]))
            .map(|a| inst.arc_site[a])
            .filter(|&sp| st.site_v[sp] == 0 && sites.binary_search(&sp).is_err())
            .map(|sp| (0.0, sp))
            .collect();
        st.work += inst.arcs.len() as u64 / 16;
        fresh.dedup_by_key(|f| f.1);
        for f in &mut fresh {
            let sp = f.1;
            let arcs: Vec<usize> = inst.sites[sp]
                .arcs
                .iter()
                .copied()
                .filter(|&a| in_set(inst.arc_res[a][0]))
                .collect();
            f.0 = best_release(st, sp, arcs.into_iter()).map_or(0.0, |b| b.2);
        }
        fresh.retain(|f| f.0 > 0.0);
        fresh.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1)));
        fresh.truncate(ASSIGN_NEW_PER_ROW * set.len());
        let mut all: Vec<usize> = sites.clone();
        all.extend(fresh.iter().map(|f| f.1));
        // Weights: best release of each site on each row of the set, with the share price.
        let share = inst.share.unwrap_or(0.0);
        let mut choice: Vec<Vec<Option<(usize, u32)>>> = vec![vec![None; all.len()]; set.len()];
        let mut weight = vec![vec![0.0f64; all.len()]; set.len()];
        for (i, &r) in set.iter().enumerate() {
            for (j, &sp) in all.iter().enumerate() {
                let arcs: Vec<usize> = inst.sites[sp]
                    .arcs
                    .iter()
                    .copied()
                    .filter(|&a| inst.arc_res[a][0] == r)
                    .collect();
                if let Some((a, k, v)) = best_release(st, sp, arcs.into_iter()) {
                    let door = f64::from(u8::from(inst.sites[sp].kind == SiteKind::Dooryard));
                    let w = v + lambda * f64::from(k) * (door - share);
                    if w > 0.0 {
                        weight[i][j] = w;
                        choice[i][j] = Some((a, k));
                    }
                }
            }
        }
        st.work += (set.len() * all.len()) as u64;
        let matched = max_weight_assignment(&weight);
        let mut touched: Vec<usize> = sites.clone();
        for (i, j) in matched.into_iter().enumerate() {
            let Some(j) = j else { continue };
            let Some((a, k)) = choice[i][j] else { continue };
            let sp = all[j];
            if st.free(a) >= k && st.site_v[sp] == 0 {
                st.commit(&[(a, i64::from(k))]);
                touched.push(sp);
            }
        }
        let mut list: Vec<usize> = set
            .iter()
            .flat_map(|&r| rows.sites[r].iter().copied())
            .chain(all.iter().copied())
            .collect();
        list.sort_unstable();
        list.dedup();
        st.greedy(&list, None, budget);
        let share_held = st.share_ok();
        if settle(st, before, &touched) {
            return true;
        }
        if share_held {
            return false;
        }
        // The floor failed: price dooryard vials higher and match again.
        let typical = rows.per_vial.iter().copied().fold(0.0f64, f64::max);
        lambda = raised_share_price(attempt, lambda, typical);
    }
    false
}

/// The price per dooryard vial (less the share of every vial) for the next try of a move
/// whose plan broke the share floor at `lambda` on try `attempt`: 1/16 of `per_vial` (the
/// most one vial of the move adds) after the first, unpriced try, then ×4 each time.
pub(super) fn raised_share_price(attempt: usize, lambda: f64, per_vial: f64) -> f64 {
    if attempt == 0 {
        per_vial / 16.0
    } else {
        lambda * 4.0
    }
}

/// Maximum-weight assignment of rows to columns (`weight[i][j]` ≥ 0; each row to at most one
/// column and each column to at most one row; a pair of weight 0 is as good as none): the
/// Hungarian method with potentials on the square cost matrix padded with zero-weight
/// columns. Returns each row's column, or None. O(n² m) for m rows and n ≥ m columns.
pub(super) fn max_weight_assignment(weight: &[Vec<f64>]) -> Vec<Option<usize>> {
    let m = weight.len();
    if m == 0 {
        return Vec::new();
    }
    let real = weight[0].len();
    // Columns: the real ones and one dummy per row (weight 0: the row stays empty).
    let n = real + m;
    let cost = |i: usize, j: usize| -> f64 { if j < real { -weight[i][j] } else { 0.0 } };
    // e-maxx formulation, 1-based: u (rows), v (columns), p[j] = row matched to column j.
    let mut u = vec![0.0f64; m + 1];
    let mut v = vec![0.0f64; n + 1];
    let mut p = vec![0usize; n + 1];
    let mut way = vec![0usize; n + 1];
    for i in 1..=m {
        p[0] = i;
        let mut j0 = 0usize;
        let mut minv = vec![f64::INFINITY; n + 1];
        let mut used = vec![false; n + 1];
        loop {
            used[j0] = true;
            let i0 = p[j0];
            let mut delta = f64::INFINITY;
            let mut j1 = 0usize;
            for j in 1..=n {
                if !used[j] {
                    let cur = cost(i0 - 1, j - 1) - u[i0] - v[j];
                    if cur < minv[j] {
                        minv[j] = cur;
                        way[j] = j0;
                    }
                    if minv[j] < delta {
                        delta = minv[j];
                        j1 = j;
                    }
                }
            }
            for j in 0..=n {
                if used[j] {
                    u[p[j]] += delta;
                    v[j] -= delta;
                } else {
                    minv[j] -= delta;
                }
            }
            j0 = j1;
            if p[j0] == 0 {
                break;
            }
        }
        loop {
            let j1 = way[j0];
            p[j0] = p[j1];
            j0 = j1;
            if j0 == 0 {
                break;
            }
        }
    }
    let mut out = vec![None; m];
    for j in 1..=real {
        if p[j] > 0 && weight[p[j] - 1][j - 1] > 0.0 {
            out[p[j] - 1] = Some(j - 1);
        }
    }
    out
}

/// One pass of release moves over the served candidate sites: for each, a relocation, else
/// a swap with a served site on one of its other supply rows that has an arc on its own.
/// Returns whether the plan improved. Work: at most [`PASS_WORK`] + 64 per candidate site.
pub(super) fn release_moves(st: &mut State, cand: &[usize], budget: u64) -> bool {
    let inst = st.inst;
    // Each pass has its own share of the budget, so that weeks of large rows (where whole
    // releases rarely need to move) do not spend the vial search's budget on it.
    let budget = budget.min(st.work.saturating_add(PASS_WORK + 64 * cand.len() as u64));
    let rows = Rows::new(inst, cand);
    let mut improved = assign_rows(st, &rows, cand, budget);
    let served: Vec<usize> = cand
        .iter()
        .copied()
        .filter(|&sp| st.site_v[sp] > 0)
        .collect();
    for &s in &served {
        if st.work >= budget {
            break;
        }
        if st.site_v[s] == 0 {
            continue;
        }
        if relocate(st, &rows, s, budget) {
            improved = true;
            continue;
        }
        // Partners: served sites drawing on a supply row that `s` could use instead of its
        // own, with an arc on one of `s`'s rows.
        let own: Vec<usize> = inst.sites[s]
            .arcs
            .iter()
            .filter(|&&a| st.x[a] > 0)
            .map(|&a| inst.arc_res[a][0])
            .collect();
        let mut other_rows: Vec<usize> = inst.sites[s]
            .arcs
            .iter()
            .map(|&a| inst.arc_res[a][0])
            .filter(|r| !own.contains(r))
            .collect();
        other_rows.sort_unstable();
        other_rows.dedup();
        'rows: for r in other_rows {
            for i in 0..rows.sites[r].len() {
                let t = rows.sites[r][i];
                if st.work >= budget {
                    break 'rows;
                }
                st.work += 1;
                if t == s || st.site_v[t] == 0 {
                    continue;
                }
                let on_r = inst.sites[t]
                    .arcs
                    .iter()
                    .any(|&a| st.x[a] > 0 && inst.arc_res[a][0] == r);
                let reaches_own = inst.sites[t]
                    .arcs
                    .iter()
                    .any(|&a| own.contains(&inst.arc_res[a][0]));
                if on_r && reaches_own && swap(st, &rows, s, t, budget) {
                    improved = true;
                    break 'rows;
                }
            }
        }
    }
    improved
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;
    use crate::allocate::AllocOptions;
    use crate::arcs::{Arc, Arcs};
    use crate::scenario::fixture::tiny;
    use crate::scenario::{Scenario, SiteIdx};

    fn arc(s: &Scenario, site: SiteIdx, day: u64) -> Arc {
        Arc {
            drive_minutes: 0.0,
            ..crate::scenario::fixture::route_arc(s, site, 0, day, 100.0)
        }
    }

    /// The fixture with F1 packing `monday` vials on Monday and `tuesday` on Tuesday, nothing
    /// else, and `arcs` (site, day) from F1; every site's priority 1. A release needs 2 vials
    /// (minimum 150 wasps, 100 a vial); a request takes 2.
    pub(in crate::allocate) fn week(
        monday: u32,
        tuesday: u32,
        arcs: &[(SiteIdx, u64)],
    ) -> (Scenario, Vec<f64>, Arcs) {
        let mut s = tiny();
        s.policy.dooryard_share_min = 0.0;
        for sup in &mut s.supply {
            let day = (sup.date - s.week_start).num_days();
            sup.vials = match (sup.facility, day) {
                (0, 0) => monday,
                (0, 1) => tuesday,
                _ => 0,
            };
        }
        let arcs = Arcs {
            arcs: arcs.iter().map(|&(site, day)| arc(&s, site, day)).collect(),
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        (s, priority, arcs)
    }

    pub(in crate::allocate) fn opts() -> AllocOptions {
        AllocOptions {
            pricing: false,
            ..AllocOptions::default()
        }
    }

    /// Block B1 (site 0) and request R1 (site 6) can each use Monday (3 vials) or Tuesday (2).
    /// Start: the request on Monday, the block on Tuesday (4 vials, one left over). Best: the
    /// block takes Monday's 3, the request Tuesday's 2.
    fn crossed() -> (Scenario, Vec<f64>, Arcs) {
        week(3, 2, &[(0, 0), (0, 1), (6, 0), (6, 1)])
    }

    fn start_crossed(st: &mut State) {
        // Arcs in order: B1 Monday, B1 Tuesday, R1 Monday, R1 Tuesday.
        st.commit(&[(1, 2), (2, 2)]);
        assert_eq!(st.x, vec![0, 2, 2, 0]);
    }

    #[test]
    fn swap_trades_pack_days_so_no_vial_is_left() {
        let (s, p, a) = crossed();
        let inst = Instance::new(&s, &p, &a, &opts()).expect("valid");
        let mut st = State::new(&inst);
        start_crossed(&mut st);
        let rows = Rows::new(&inst, &[0, 1]);
        let before = st.obj;
        assert!(swap(&mut st, &rows, 0, 1, u64::MAX));
        assert_eq!(st.x, vec![3, 0, 0, 2]);
        assert!(
            (st.obj - before - 100.0).abs() < 1e-9,
            "{} {before}",
            st.obj
        );
        // Nothing better is left: a second swap is refused and leaves the plan as it is.
        assert!(!swap(&mut st, &rows, 0, 1, u64::MAX));
        assert_eq!(st.x, vec![3, 0, 0, 2]);
    }

    #[test]
    fn row_assignment_matches_sites_to_pack_days() {
        let (s, p, a) = crossed();
        let inst = Instance::new(&s, &p, &a, &opts()).expect("valid");
        let mut st = State::new(&inst);
        start_crossed(&mut st);
        let rows = Rows::new(&inst, &[0, 1]);
        assert!(assign_rows(&mut st, &rows, &[0, 1], u64::MAX));
        assert_eq!(st.x, vec![3, 0, 0, 2]);
        assert!(!assign_rows(&mut st, &rows, &[0, 1], u64::MAX));
    }

    #[test]
    fn relocate_frees_a_pack_day_for_a_site_that_has_no_other() {
        // B1 (site 0) reaches Monday and Tuesday, B2 (site 1) only Monday; 2 vials each day.
        let (s, p, a) = week(2, 2, &[(0, 0), (0, 1), (1, 0)]);
        let inst = Instance::new(&s, &p, &a, &opts()).expect("valid");
        let mut st = State::new(&inst);
        st.commit(&[(0, 2)]);
        let rows = Rows::new(&inst, &[0, 1]);
        assert!(relocate(&mut st, &rows, 0, u64::MAX));
        assert_eq!(st.x, vec![0, 2, 2]);
        assert!(!relocate(&mut st, &rows, 0, u64::MAX));
    }

    #[test]
    fn assignment_is_the_best_matching_on_random_weights() {
        let mut rng = crate::allocate::synthetic::Rng(7);
        for trial in 0..200 {
            let m = 1 + rng.below(4) as usize;
            let n = 1 + rng.below(5) as usize;
            let w: Vec<Vec<f64>> = (0..m)
                .map(|_| {
                    (0..n)
                        .map(|_| {
                            if rng.below(4) == 0 {
                                0.0
                            } else {
                                (rng.below(20)) as f64
                            }
                        })
                        .collect()
                })
                .collect();
            let got = max_weight_assignment(&w);
            let mut cols: Vec<usize> = got.iter().flatten().copied().collect();
            let value: f64 = got
                .iter()
                .enumerate()
                .filter_map(|(i, j)| j.map(|j| w[i][j]))
                .sum();
            cols.sort_unstable();
            let len = cols.len();
            cols.dedup();
            assert_eq!(cols.len(), len, "a column used twice");
            // Brute force: every row takes one unused column or none.
            fn best(w: &[Vec<f64>], i: usize, used: &mut Vec<bool>) -> f64 {
                if i == w.len() {
                    return 0.0;
                }
                let mut b = best(w, i + 1, used);
                for j in 0..used.len() {
                    if !used[j] {
                        used[j] = true;
                        b = b.max(w[i][j] + best(w, i + 1, used));
                        used[j] = false;
                    }
                }
                b
            }
            let want = best(&w, 0, &mut vec![false; n]);
            assert!(
                (value - want).abs() < 1e-9,
                "trial {trial}: {value} vs {want} on {w:?}"
            );
        }
    }
}
