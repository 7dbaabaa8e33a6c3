//! Window polish for the whole-vial plan (`docs/model.md`, "Step 4. Rounding to whole vials",
//! "The window polish"): one to three small supply rows at a time are re-packed exactly.
//!
//! Where pack days hold a handful of vials, the local search's moves (a vial, a release, a
//! swap of two sites) can leave a vial or two on several pack days that no release can use:
//! filling them means moving several sites between pack days at once. Here a small supply
//! row, or two or three that share a candidate site, form a window; every site whose release
//! is on it (or that is unserved and has an arc on it) is taken off, and a dynamic programme
//! over the vials used on each row chooses, site by site, no release or one release (an arc
//! on one of the rows and a vial count) so that their value less travel is the largest the
//! rows' free room allows. The other sites stay as they are, so the window's optimum is exact for them; the
//! second row of each arc (vehicle or parcel capacity) and the dooryard share floor are
//! checked on the result, and the window is kept only when the plan gains.

use std::collections::BTreeSet;

use super::improve::raised_share_price;
use super::instance::Resource;
use super::rounding::State;
use crate::scenario::SiteKind;

/// Supply rows of at most this many vials take part: the programme's states are the vials
/// used on each of the two rows.
const WINDOW_MAX_VIALS: f64 = 24.0;

/// Rows of at most this many vials also form windows of three, tried once the windows of one
/// and two rows keep no more: on the generated 700-site 5-facility 1× week they raised the plan
/// 958,953.1 → 963,158.9 (HiGHS's optimum of that week: 963,554.9); tried among the pairs
/// instead, they spent the work limit and three weeks ended lower.
const TRIPLE_MAX_VIALS: f64 = 12.0;

/// Passes over the windows, each after one that kept a window: a work limit.
const MAX_PASSES: usize = 4;

/// Most windows one pass tries (in row order): a work limit.
const MAX_WINDOWS: usize = 600;

/// Most (site × state × release) steps of the programme in one polish, over every window and
/// pass: a work limit, so the plan never depends on the machine. Measured on the generated
/// 3,000-site week (`broodcast generate --sites 3000 --seed 1`), where 300 windows take
/// about 160 million steps a pass: with no limit four passes gave +0.36 % for about 1.2 s more
/// per `plan`; with this limit +0.23 % for 0.35 s (100 million: +0.18 %).
const WORK_LIMIT: usize = 200_000_000;

/// Most (site × state × release) steps one window may take: a work limit per window.
const MAX_WINDOW_STEPS: usize = 4_000_000;

/// One release a site may take in a window: arc, vials, which of the two rows, and what it
/// adds to the objective over leaving the site unserved.
#[derive(Clone, Copy)]
struct Release {
    arc: usize,
    vials: u32,
    row: usize,
    gain: f64,
}

/// Re-packs every window of two small supply rows that share a site of `cand` (site
/// positions), and every such row alone, in row order, keeping each window that raises the
/// objective; again while a pass keeps one (at most [`MAX_PASSES`]); then the same with
/// windows of three rows of at most [`TRIPLE_MAX_VIALS`]. Returns whether any window was kept.
/// One release per site only.
pub(super) fn polish(st: &mut State, cand: &[usize]) -> bool {
    let inst = st.inst;
    if inst.releases_per_site != 1 {
        return false;
    }
    let small = |r: usize| {
        matches!(inst.resources[r], Resource::Supply(..))
            && inst.res_rhs[r] >= 1.0
            && inst.res_rhs[r] <= WINDOW_MAX_VIALS
    };
    let mut pairs: BTreeSet<Vec<usize>> = BTreeSet::new();
    let mut triples: BTreeSet<Vec<usize>> = BTreeSet::new();
    for &sp in cand {
        let mut rows: Vec<usize> = inst.sites[sp]
            .arcs
            .iter()
            .map(|&a| inst.arc_res[a][0])
            .filter(|&r| small(r))
            .collect();
        rows.sort_unstable();
        rows.dedup();
        // Each row alone too (a window of one row): rows no site shares are re-packed.
        for (i, &r1) in rows.iter().enumerate() {
            pairs.insert(vec![r1]);
            for (j, &r2) in rows.iter().enumerate().skip(i + 1) {
                pairs.insert(vec![r1, r2]);
                for &r3 in &rows[j + 1..] {
                    if [r1, r2, r3]
                        .iter()
                        .all(|&r| inst.res_rhs[r] <= TRIPLE_MAX_VIALS)
                    {
                        triples.insert(vec![r1, r2, r3]);
                    }
                }
            }
        }
    }
    let mut work = 0usize;
    let improved = passes(st, cand, &pairs, &mut work);
    passes(st, cand, &triples, &mut work) || improved
}

/// Passes over `windows` (each a list of rows) until one keeps none, at most [`MAX_PASSES`],
/// adding the programme's steps to `work` and stopping at [`WORK_LIMIT`].
fn passes(
    st: &mut State,
    cand: &[usize],
    windows: &BTreeSet<Vec<usize>>,
    work: &mut usize,
) -> bool {
    let mut improved = false;
    // Rows a kept window changed: a later pass looks only at the windows with one of them.
    let mut changed: Option<BTreeSet<usize>> = None;
    for _ in 0..MAX_PASSES {
        let mut any = false;
        let mut now = BTreeSet::new();
        for rows in windows.iter().take(MAX_WINDOWS) {
            if changed
                .as_ref()
                .is_some_and(|c| !rows.iter().any(|r| c.contains(r)))
            {
                continue;
            }
            if *work < WORK_LIMIT && window(st, cand, rows, work) {
                any = true;
                now.extend(rows.iter().copied());
            }
        }
        improved |= any;
        if !any {
            break;
        }
        changed = Some(now);
    }
    improved
}

/// Tries per window: the first without a price on the share floor, then with a price per
/// dooryard vial raised until the floor holds.
const SHARE_ATTEMPTS: usize = 4;

/// The exact re-packing of rows `rows` over the sites of `cand` that can use them; kept when
/// the plan gains and stays feasible. Returns whether it was kept.
///
/// The sites are taken off and their releases listed once; the programme then runs up to
/// [`SHARE_ATTEMPTS`] times, first without a price on the share floor, then, while its best
/// packing breaks only the floor, with each dooryard vial worth `lambda` more and every vial
/// `lambda · share` less. Each run adds its steps to `work`; a run after the first starts
/// only below [`WORK_LIMIT`].
fn window(st: &mut State, cand: &[usize], rows: &[usize], work: &mut usize) -> bool {
    let inst = st.inst;
    let in_window = |a: usize| rows.contains(&inst.arc_res[a][0]);
    // Sites with an arc on the window and no release outside it.
    let sites: Vec<usize> = cand
        .iter()
        .copied()
        .filter(|&sp| {
            let arcs = &inst.sites[sp].arcs;
            arcs.iter().any(|&a| in_window(a))
                && !arcs.iter().any(|&a| st.x[a] > 0 && !in_window(a))
        })
        .collect();
    if sites.is_empty() {
        return false;
    }
    let before = st.obj;
    st.checkpoint();
    for &sp in &sites {
        let empty = st.emptying(sp);
        st.commit(&empty);
    }
    // Mixed radix: s = Σ_i u_i · stride_i for u_i vials used on row i.
    let cap: Vec<usize> = rows.iter().map(|&r| st.res_free[r] as usize).collect();
    let mut stride = Vec::with_capacity(rows.len());
    let mut states = 1usize;
    for &c in &cap {
        stride.push(states);
        states *= c + 1;
    }
    let options: Vec<Vec<Release>> = sites.iter().map(|&sp| releases(st, sp, rows)).collect();
    let steps: usize = options.iter().map(|o| o.len() * states).sum();
    *work += steps + sites.len();
    if steps > MAX_WINDOW_STEPS || options.iter().all(Vec::is_empty) {
        st.rollback();
        return false;
    }
    // The window emptied: each try re-packs from here.
    let emptied = st.journal_len();
    let packing = Packing {
        sites: &sites,
        options: &options,
        cap: &cap,
        stride: &stride,
        states,
    };
    let mut lambda = 0.0;
    for attempt in 0..SHARE_ATTEMPTS {
        if attempt > 0 {
            if *work >= WORK_LIMIT {
                break;
            }
            *work += steps + sites.len();
        }
        let chosen = packing.best(inst, lambda);
        st.commit(&chosen);
        let rows_hold = chosen.iter().all(|&(a, _)| {
            inst.arc_res[a]
                .iter()
                .all(|&r| st.used[r] <= inst.res_rhs[r] + 1e-7)
        });
        let gain = st.obj > before + 1e-9 * before.abs().max(1.0);
        let valid = gain && rows_hold && sites.iter().all(|&sp| st.site_ok(sp));
        if valid && st.share_ok() {
            st.keep();
            return true;
        }
        if !valid {
            break;
        }
        // Only the share floor broke: price it and pack again.
        st.rollback_to(emptied);
        let per_vial = options
            .iter()
            .flatten()
            .map(|o| o.gain / f64::from(o.vials.max(1)))
            .fold(0.0, f64::max);
        lambda = raised_share_price(attempt, lambda, per_vial);
    }
    st.rollback();
    false
}

/// A window's programme: its sites, their releases and the rows' free room as a mixed radix.
struct Packing<'a> {
    sites: &'a [usize],
    options: &'a [Vec<Release>],
    cap: &'a [usize],
    stride: &'a [usize],
    states: usize,
}

impl Packing<'_> {
    /// The releases (arc, vials) of the packing with the most value, each dooryard vial worth
    /// `lambda` more and every vial `lambda · share` less. O(states × releases).
    fn best(&self, inst: &super::instance::Instance, lambda: f64) -> Vec<(usize, i64)> {
        let Packing {
            sites,
            options,
            cap,
            stride,
            states,
        } = *self;
        let share = inst.share.unwrap_or(0.0);
        let priced = |sp: usize, opt: &Release| {
            let door = f64::from(u8::from(inst.sites[sp].kind == SiteKind::Dooryard));
            opt.gain + lambda * f64::from(opt.vials) * (door - share)
        };
        // best[s]: the most the sites so far add with the vials s stands for used on the rows;
        // came[j][s]: the release site j took to reach s, and the state before it.
        let mut best = vec![f64::NEG_INFINITY; states];
        best[0] = 0.0;
        let mut came: Vec<Vec<Option<(u32, u32)>>> = Vec::with_capacity(sites.len());
        for (opts, &sp) in options.iter().zip(sites) {
            let mut next = best.clone();
            let mut from: Vec<Option<(u32, u32)>> = vec![None; states];
            for (s, &here) in best.iter().enumerate() {
                if here == f64::NEG_INFINITY {
                    continue;
                }
                for (o, opt) in opts.iter().enumerate() {
                    let (k, i) = (opt.vials as usize, opt.row);
                    if (s / stride[i]) % (cap[i] + 1) + k > cap[i] {
                        continue;
                    }
                    let t = s + k * stride[i];
                    let v = here + priced(sp, opt);
                    if v > next[t] {
                        next[t] = v;
                        from[t] = Some((o as u32, s as u32));
                    }
                }
            }
            best = next;
            came.push(from);
        }
        let mut s = (0..states)
            .max_by(|&x, &y| best[x].total_cmp(&best[y]).then(y.cmp(&x)))
            .unwrap_or(0);
        let mut chosen: Vec<(usize, i64)> = Vec::new();
        for (j, from) in came.iter().enumerate().rev() {
            if let Some((o, prev)) = from[s] {
                let opt = options[j][o as usize];
                chosen.push((opt.arc, i64::from(opt.vials)));
                s = prev as usize;
            }
        }
        chosen.reverse();
        chosen
    }
}

/// Every single release of the empty site position `sp` on an arc of the window's rows within
/// the arc's free room now, with what it adds over leaving the site unserved (only those that
/// add more than 0).
fn releases(st: &State, sp: usize, rows: &[usize]) -> Vec<Release> {
    let inst = st.inst;
    let site = &inst.sites[sp];
    let unserved = st.site_value(sp, 0.0, 0);
    let mut out = Vec::new();
    for &a in &site.arcs {
        let Some(row) = rows.iter().position(|&r| r == inst.arc_res[a][0]) else {
            continue;
        };
        let alive = inst.arcs[a].wasps_alive_per_vial;
        let room = st.free(a);
        let (lo, hi) = match site.kind {
            SiteKind::Dooryard => (inst.per_request, inst.per_request),
            SiteKind::Block => (1, room),
        };
        for k in lo..=hi.min(room) {
            let e = f64::from(k) * alive;
            if !st.release_ok(sp, e, k) {
                continue;
            }
            let gain = st.site_value(sp, e, k) - f64::from(k) * inst.cost[a] - unserved;
            if gain > 1e-9 {
                out.push(Release {
                    arc: a,
                    vials: k,
                    row,
                    gain,
                });
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::improve::tests::{opts, week};
    use crate::allocate::instance::Instance;

    #[test]
    fn two_pack_days_are_repacked_so_no_vial_is_left() {
        // Block B1 (site 0) and request R1 (site 6) can each use Monday (3 vials) or Tuesday
        // (2); the request on Monday and the block on Tuesday leave Monday's third vial
        // unused. The window gives the block Monday's 3 and the request Tuesday's 2.
        let (s, p, a) = week(3, 2, &[(0, 0), (0, 1), (6, 0), (6, 1)]);
        let inst = Instance::new(&s, &p, &a, &opts()).expect("valid");
        let mut st = State::new(&inst);
        st.commit(&[(1, 2), (2, 2)]);
        let before = st.obj;
        assert!(polish(&mut st, &[0, 1]));
        assert_eq!(st.x, vec![3, 0, 0, 2]);
        assert!(st.obj > before);
        assert!(!polish(&mut st, &[0, 1]), "nothing better is left");
        assert_eq!(st.x, vec![3, 0, 0, 2]);
    }

    #[test]
    fn a_window_whose_best_packing_breaks_the_share_floor_is_priced_and_packed_again() {
        // Monday holds 4 vials; blocks B1, B2 (sites 0, 1, priority 1.5) and request R1 (site
        // 6, priority 1) can use it, and the dooryard share floor is 0.3. Start: R1's 2 vials. The window's best
        // packing without a price gives both blocks 2 vials each, which leaves no dooryard
        // vial; priced, it keeps R1 and adds a block.
        let (mut s, mut p, a) = week(4, 0, &[(0, 0), (1, 0), (6, 0)]);
        s.policy.dooryard_share_min = 0.3;
        // The blocks' pest pressure is higher than the request's.
        p[0] = 1.5;
        p[1] = 1.5;
        let inst = Instance::new(&s, &p, &a, &opts()).expect("valid");
        let value = |x: &[(usize, i64)]| {
            let mut st = State::new(&inst);
            st.commit(x);
            (st.obj, st.share_ok())
        };
        // Arcs in order: B1, B2, R1 on Monday.
        let (blocks, blocks_ok) = value(&[(0, 2), (1, 2)]);
        let (mixed, mixed_ok) = value(&[(0, 2), (2, 2)]);
        let (start, start_ok) = value(&[(2, 2)]);
        assert!(blocks > mixed && mixed > start, "{blocks} {mixed} {start}");
        assert!(!blocks_ok && mixed_ok && start_ok);
        let mut st = State::new(&inst);
        st.commit(&[(2, 2)]);
        assert!(polish(&mut st, &[0, 1, 2]));
        assert_eq!(st.x[2], 2, "the request keeps its vials: {:?}", st.x);
        assert_eq!(st.x[0] + st.x[1], 2, "{:?}", st.x);
        assert!(st.share_ok());
    }

    /// Every plan of one release (or none) per site on the arcs, by brute force: the best
    /// objective of those that keep every row, site rule and the share floor.
    fn brute_force(inst: &Instance) -> f64 {
        let mut st = State::new(inst);
        let mut options: Vec<Vec<Option<(usize, u32)>>> = Vec::new();
        for sp in 0..inst.sites.len() {
            let mut o = vec![None];
            for &a in &inst.sites[sp].arcs {
                for k in 1..=8 {
                    o.push(Some((a, k)));
                }
            }
            options.push(o);
        }
        let mut best = st.obj;
        let mut pick = vec![0usize; options.len()];
        loop {
            let moves: Vec<(usize, i64)> = pick
                .iter()
                .zip(&options)
                .filter_map(|(&i, o)| o[i].map(|(a, k)| (a, i64::from(k))))
                .collect();
            st.commit(&moves);
            let ok = (0..inst.resources.len()).all(|r| st.used[r] <= inst.res_rhs[r] + 1e-7)
                && st.share_ok()
                && (0..inst.sites.len()).all(|sp| st.site_ok(sp));
            if ok && st.obj > best {
                best = st.obj;
            }
            let back: Vec<(usize, i64)> = moves.iter().map(|&(a, k)| (a, -k)).collect();
            st.commit(&back);
            // Next combination.
            let mut j = 0;
            while j < pick.len() {
                pick[j] += 1;
                if pick[j] < options[j].len() {
                    break;
                }
                pick[j] = 0;
                j += 1;
            }
            if j == pick.len() {
                return best;
            }
        }
    }

    #[test]
    fn a_window_over_every_site_reaches_the_brute_force_optimum() {
        // Blocks B1, B2 and request R1 on Monday and Tuesday from F1, with 1-7 vials a day.
        let mut rng = crate::allocate::synthetic::Rng(11);
        for trial in 0..40 {
            let (mon, tue) = (1 + rng.below(7) as u32, 1 + rng.below(7) as u32);
            let mut arcs = Vec::new();
            for site in [0, 1, 6] {
                for day in [0, 1] {
                    if rng.below(4) > 0 {
                        arcs.push((site, day));
                    }
                }
            }
            let (s, p, a) = week(mon, tue, &arcs);
            let inst = Instance::new(&s, &p, &a, &opts()).expect("valid");
            let rows: BTreeSet<usize> = (0..inst.arcs.len()).map(|a| inst.arc_res[a][0]).collect();
            let mut st = State::new(&inst);
            let all: Vec<usize> = (0..inst.sites.len()).collect();
            polish(&mut st, &all);
            let best = brute_force(&inst);
            if rows.len() == 2 {
                assert!(
                    (st.obj - best).abs() <= 1e-9 * best.abs().max(1.0),
                    "trial {trial}: window {} brute force {best} ({mon}, {tue}, {arcs:?})",
                    st.obj
                );
            } else {
                assert!(st.obj <= best + 1e-9, "trial {trial}");
            }
        }
    }
}
