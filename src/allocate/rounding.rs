//! Whole vials from the LP relaxation (method and bound: `docs/model.md`, "Rounding").
//!
//! Interior-point solutions spread a site's flow over several arcs in small fractions, so the
//! LP values are used as a guide, never rounded arc by arc:
//!
//! 1. **Seed**: sites in decreasing LP value; each gets `round(LP vials)` (requests: the
//!    standard count when the LP gave at least half of it), consolidated onto its arcs in
//!    decreasing LP flow, as far as supply and capacity allow; a block left below the minimum
//!    release (or above the maximum) is trimmed or emptied.
//! 2. **Greedy fill**: repeatedly take the feasible move with the best objective gain per vial:
//!    one more vial to a served block, or opening a block with the fewest vials that reach the
//!    minimum release, or serving a request with the standard count.
//! 3. **Local search**: move one vial between arcs (same or other site) when it gains; empty a
//!    site and refill greedily when that gains. Stops when a pass finds nothing or the work
//!    budget is spent (a count of evaluated moves, so results do not depend on machine speed).
//!
//!    When a pass finds nothing, the release moves of `improve.rs` (row assignment,
//!    relocate, swap) run, and the local search resumes if they gained.
//!
//! 4. **Exact polish** on small candidate sets (≤ 40 arcs): the whole-vial MIP over the
//!    candidate sites with microlp, kept only when it is better.
//!
//! Every step keeps every LP row satisfied (supply, vehicle and parcel capacity, dooryard
//! share, release limits), so the plan's objective is a lower bound and the LP optimum an upper
//! bound on the best whole-vial plan.

use std::collections::BTreeSet;

use super::instance::{Force, Instance};
use crate::scenario::SiteKind;

const EPS: f64 = 1e-9;

/// A growth move at one site: (objective gain per vial, arc, vials).
type Growth = (f64, usize, u32);

/// A single-vial move: (gain, receiving arc, optional reroute (from, to) of one vial of a
/// third site that makes room on the receiving arc's full row).
type VialMove = (f64, usize, Option<(usize, usize)>);

/// Integer plan under construction, with running totals so a move is checked in O(arcs it
/// touches).
pub(crate) struct State<'i, 'a> {
    pub(super) inst: &'i Instance<'a>,
    /// Vials per usable arc.
    pub x: Vec<u32>,
    pub(super) used: Vec<f64>,
    /// Whole vials left on each resource, ⌊rhs − used + 10⁻⁷⌋ ≥ 0, kept with `used` (the
    /// greedy's scans ask for it millions of times on large weeks).
    pub(super) res_free: Vec<u32>,
    pub(super) site_e: Vec<f64>,
    pub(super) site_v: Vec<u32>,
    /// Releases at each site: its arcs with vials.
    pub(super) site_n: Vec<u32>,
    pub(super) door: f64,
    pub(super) total: f64,
    /// Moves evaluated so far (the work budget's unit).
    pub(super) work: u64,
    /// Objective of the current plan (benefit − travel − force penalties), kept by `apply`.
    pub(super) obj: f64,
    /// Moves committed since the last `checkpoint`, for `rollback`; None outside one.
    pub(super) journal: Option<Vec<(usize, i64)>>,
    /// Per site position: its growth moves at its current state, best gain per vial first,
    /// ignoring supply, capacity and the share floor (checked when a move is taken). A site's
    /// moves depend only on its own vials, so only `apply` at that site makes them stale
    /// (None).
    pub(super) growth: Vec<Option<Vec<Growth>>>,
    /// Counts the commits that took vials off an arc: the only ones that give a resource
    /// free vials back (`try_moves_with` leaves every resource as it found it).
    free_epoch: u64,
    /// Per resource: the `free_epoch` of the last commit that took vials off it.
    res_up: Vec<u64>,
    /// Per site position: (`free_epoch` when last scanned, the resource that each of the
    /// first k growth moves did not fit then). A move stays shut out while its resource has
    /// had nothing taken off since, so `best_move_at` starts after them and finds the same move.
    blocked: Vec<(u64, Vec<usize>)>,
    /// While true, every share check passes: set only inside a compound move that pays for
    /// a block's vials with requests, and checked again (strictly) before it is kept.
    share_relaxed: bool,
}

impl<'i, 'a> State<'i, 'a> {
    /// The empty plan.
    pub fn new(inst: &'i Instance<'a>) -> Self {
        let mut st = State {
            inst,
            x: vec![0; inst.arcs.len()],
            used: vec![0.0; inst.resources.len()],
            res_free: (0..inst.resources.len())
                .map(|r| free_of(inst.res_rhs[r], 0.0))
                .collect(),
            site_e: vec![0.0; inst.sites.len()],
            site_v: vec![0; inst.sites.len()],
            site_n: vec![0; inst.sites.len()],
            door: 0.0,
            total: 0.0,
            work: 0,
            obj: 0.0,
            journal: None,
            growth: vec![None; inst.sites.len()],
            free_epoch: 0,
            res_up: vec![0; inst.resources.len()],
            blocked: vec![(0, Vec::new()); inst.sites.len()],
            share_relaxed: false,
        };
        st.obj = st.objective();
        st
    }

    /// See [`Instance::site_value`].
    pub(super) fn site_value(&self, sp: usize, e: f64, v: u32) -> f64 {
        self.inst.site_value(sp, e, v)
    }

    /// See [`Instance::release_ok`].
    pub(super) fn release_ok(&self, sp: usize, e: f64, v: u32) -> bool {
        self.inst.release_ok(sp, e, v)
    }

    /// Whether site position `sp` holds a valid week: at most `releases_per_site` releases,
    /// each within the release rules when there may be several (with one release the site's
    /// total is that release).
    pub(super) fn site_ok(&self, sp: usize) -> bool {
        let inst = self.inst;
        if self.site_n[sp] > inst.releases_per_site {
            return false;
        }
        if self.site_n[sp] > 1 {
            let each_ok = inst.sites[sp].arcs.iter().all(|&a| {
                let x = self.x[a];
                x == 0 || self.release_ok(sp, f64::from(x) * inst.arcs[a].wasps_alive_per_vial, x)
            });
            if !each_ok {
                return false;
            }
        }
        self.release_ok(sp, self.site_e[sp], self.site_v[sp])
    }

    /// Whether one more vial on arc `a` of a served site keeps its count of releases allowed.
    pub(super) fn release_room(&self, a: usize) -> bool {
        self.x[a] > 0 || self.site_n[self.inst.arc_site[a]] < self.inst.releases_per_site
    }

    pub(super) fn share_ok(&self) -> bool {
        self.share_ok_at(self.door, self.total)
    }

    pub(super) fn share_ok_at(&self, door: f64, total: f64) -> bool {
        self.share_relaxed || self.share_holds_at(door, total)
    }

    /// The dooryard share floor at the current plan, whatever `share_relaxed` says.
    fn share_holds(&self) -> bool {
        self.share_holds_at(self.door, self.total)
    }

    fn share_holds_at(&self, door: f64, total: f64) -> bool {
        match self.inst.share {
            Some(s) => door >= s * total - 1e-7,
            None => true,
        }
    }

    /// Changes the vials on arc `a` by `d` without bookkeeping (objective, journal, growth
    /// moves): callers restore or account for it.
    pub(super) fn apply_raw(&mut self, a: usize, d: i64) {
        let inst = self.inst;
        let sp = inst.arc_site[a];
        let df = d as f64;
        let was = self.x[a];
        self.x[a] = (i64::from(self.x[a]) + d) as u32;
        match (was, self.x[a]) {
            (0, x) if x > 0 => self.site_n[sp] += 1,
            (w, 0) if w > 0 => self.site_n[sp] -= 1,
            _ => {}
        }
        for &r in &inst.arc_res[a] {
            self.used[r] += df;
            self.res_free[r] = free_of(inst.res_rhs[r], self.used[r]);
        }
        self.site_e[sp] += df * inst.arcs[a].wasps_alive_per_vial;
        if self.site_v[sp] as i64 + d <= 0 {
            self.site_e[sp] = 0.0;
        }
        self.site_v[sp] = (i64::from(self.site_v[sp]) + d) as u32;
        self.total += df;
        if inst.sites[sp].kind == SiteKind::Dooryard {
            self.door += df;
        }
    }

    /// Changes the vials on arc `a` by `d`, keeping the objective, the journal and the site's
    /// growth moves up to date.
    pub(super) fn apply(&mut self, a: usize, d: i64) {
        let sp = self.inst.arc_site[a];
        let before = self.site_value(sp, self.site_e[sp], self.site_v[sp]);
        self.apply_raw(a, d);
        let after = self.site_value(sp, self.site_e[sp], self.site_v[sp]);
        self.obj += after - before - self.inst.cost[a] * d as f64;
        self.growth[sp] = None;
        if d < 0 {
            self.free_epoch += 1;
            for &r in &self.inst.arc_res[a] {
                self.res_up[r] = self.free_epoch;
            }
        }
        if let Some(j) = &mut self.journal {
            j.push((a, d));
        }
    }

    /// Objective gain of applying `moves` (arc, change in vials) if the result is feasible.
    pub(super) fn try_moves(&mut self, moves: &[(usize, i64)]) -> Option<f64> {
        self.try_moves_with(moves, true)
    }

    /// As `try_moves`; `check_resources` false skips supply/capacity checks (used while
    /// repairing an over-full resource by removals). Leaves the state bit for bit as it was.
    pub(super) fn try_moves_with(
        &mut self,
        moves: &[(usize, i64)],
        check_resources: bool,
    ) -> Option<f64> {
        self.work += moves.len() as u64;
        let inst = self.inst;
        for &(a, d) in moves {
            if i64::from(self.x[a]) + d < 0 {
                return None;
            }
        }
        let mut sites: Vec<usize> = moves.iter().map(|&(a, _)| inst.arc_site[a]).collect();
        sites.sort_unstable();
        sites.dedup();
        let saved_sites: Vec<(f64, u32, u32)> = sites
            .iter()
            .map(|&s| (self.site_e[s], self.site_v[s], self.site_n[s]))
            .collect();
        let saved_res: Vec<(usize, f64)> = moves
            .iter()
            .flat_map(|&(a, _)| inst.arc_res[a])
            .map(|r| (r, self.used[r]))
            .collect();
        let (door, total) = (self.door, self.total);
        let before: f64 = sites
            .iter()
            .map(|&s| self.site_value(s, self.site_e[s], self.site_v[s]))
            .sum();
        let mut cost = 0.0;
        for &(a, d) in moves {
            self.apply_raw(a, d);
            cost += inst.cost[a] * d as f64;
        }
        let mut ok = self.share_ok() && sites.iter().all(|&s| self.site_ok(s));
        if ok && check_resources {
            ok = moves.iter().all(|&(a, _)| {
                inst.arc_res[a]
                    .iter()
                    .all(|&r| self.used[r] <= inst.res_rhs[r] + 1e-7)
            });
        }
        let after: f64 = sites
            .iter()
            .map(|&s| self.site_value(s, self.site_e[s], self.site_v[s]))
            .sum();
        for &(a, d) in moves {
            self.x[a] = (i64::from(self.x[a]) - d) as u32;
        }
        for (&s, &(e, v, n)) in sites.iter().zip(&saved_sites) {
            self.site_e[s] = e;
            self.site_v[s] = v;
            self.site_n[s] = n;
        }
        for &(r, u) in saved_res.iter().rev() {
            self.used[r] = u;
            self.res_free[r] = free_of(inst.res_rhs[r], u);
        }
        (self.door, self.total) = (door, total);
        ok.then_some(after - before - cost)
    }

    pub(super) fn commit(&mut self, moves: &[(usize, i64)]) {
        for &(a, d) in moves {
            self.apply(a, d);
        }
    }

    /// Starts recording commits, so that `rollback` can undo them.
    pub(super) fn checkpoint(&mut self) {
        self.journal = Some(Vec::new());
    }

    /// Undoes every commit since `checkpoint`, and stops recording.
    pub(super) fn rollback(&mut self) {
        let journal = self.journal.take().unwrap_or_default();
        for &(a, d) in journal.iter().rev() {
            self.apply(a, -d);
        }
    }

    /// Commits recorded since `checkpoint` (a mark for `rollback_to`).
    pub(super) fn journal_len(&self) -> usize {
        self.journal.as_ref().map_or(0, Vec::len)
    }

    /// Undoes the commits recorded after `mark` and goes on recording.
    pub(super) fn rollback_to(&mut self, mark: usize) {
        let Some(mut journal) = self.journal.take() else {
            return;
        };
        let tail = journal.split_off(mark.min(journal.len()));
        for &(a, d) in tail.iter().rev() {
            self.apply(a, -d);
        }
        self.journal = Some(journal);
    }

    /// Keeps every commit since `checkpoint`, and stops recording.
    pub(super) fn keep(&mut self) {
        self.journal = None;
    }

    /// Returns to a saved plan (vials per arc). O(arcs).
    pub(super) fn restore(&mut self, saved: &[u32]) {
        for (a, &v) in saved.iter().enumerate() {
            let d = i64::from(v) - i64::from(self.x[a]);
            if d != 0 {
                self.apply(a, d);
            }
        }
    }

    /// The moves that empty site position `sp` (every arc with vials, to 0).
    pub(super) fn emptying(&self, sp: usize) -> Vec<(usize, i64)> {
        self.inst.sites[sp]
            .arcs
            .iter()
            .filter(|&&a| self.x[a] > 0)
            .map(|&a| (a, -i64::from(self.x[a])))
            .collect()
    }

    /// Pushes vials off arc `a`'s rows until both hold: each step takes, from another site
    /// on the over-full row (none in `keep`), one vial or its whole release, whichever loses
    /// least per vial and leaves that site valid. False when a row cannot be brought back.
    fn make_room(&mut self, a: usize, keep: &[usize], res_arcs: &[Vec<usize>]) -> bool {
        let inst = self.inst;
        for &r in &inst.arc_res[a] {
            while self.used[r] > inst.res_rhs[r] + 1e-7 {
                let mut best: Option<(f64, Vec<(usize, i64)>)> = None;
                for &b in &res_arcs[r] {
                    let sb = inst.arc_site[b];
                    if self.x[b] == 0 || keep.contains(&sb) {
                        continue;
                    }
                    for mv in [vec![(b, -1)], self.emptying(sb)] {
                        let k: i64 = mv.iter().map(|m| -m.1).sum();
                        if let Some(g) = self.try_moves_with(&mv, false) {
                            let per = g / k as f64;
                            if best.as_ref().is_none_or(|x| per > x.0) {
                                best = Some((per, mv));
                            }
                        }
                    }
                }
                match best {
                    Some((_, mv)) => self.commit(&mv),
                    None => return false,
                }
            }
        }
        true
    }

    /// The block at site position `sp`, just opened on arc `a`, left the dooryard share floor
    /// short: makes room on `a`'s rows and opens unserved requests until the floor holds,
    /// each time the (request, arc) pair, of the first [`SHARE_REQUEST_TRIES`] of `requests`
    /// (best standalone gain first) whose site is still unserved, that leaves the highest
    /// objective once room is made for it. The floor is not
    /// checked on the way (every vial pushed out lowers the share until a request comes in);
    /// true when it holds at the end and every row fits. Runs inside a `checkpoint`.
    fn pay_share(
        &mut self,
        a: usize,
        sp: usize,
        requests: &[(usize, usize)],
        res_arcs: &[Vec<usize>],
    ) -> bool {
        let n = i64::from(self.inst.per_request);
        self.share_relaxed = true;
        let mut opened = vec![sp];
        let mut ok = self.make_room(a, &opened, res_arcs);
        while ok && !self.share_holds() {
            let mut best: Option<(f64, usize)> = None;
            let mut tried = 0;
            for (i, &(rq, ra)) in requests.iter().enumerate() {
                if tried >= SHARE_REQUEST_TRIES {
                    break;
                }
                if self.site_v[rq] > 0 || !self.release_room(ra) {
                    continue;
                }
                tried += 1;
                let mark = self.journal_len();
                self.commit(&[(ra, n)]);
                opened.push(rq);
                if self.make_room(ra, &opened, res_arcs)
                    && best.is_none_or(|(obj, _)| self.obj > obj)
                {
                    best = Some((self.obj, i));
                }
                opened.pop();
                self.rollback_to(mark);
            }
            match best {
                Some((_, i)) => {
                    let (rq, ra) = requests[i];
                    self.commit(&[(ra, n)]);
                    opened.push(rq);
                    ok = self.make_room(ra, &opened, res_arcs);
                }
                None => ok = false,
            }
        }
        self.share_relaxed = false;
        ok
    }

    pub(super) fn free(&self, a: usize) -> u32 {
        let inst = self.inst;
        inst.arc_res[a]
            .iter()
            .map(|&r| self.res_free[r])
            .min()
            .unwrap_or(0)
    }

    /// The plan's objective (benefit − travel − force penalties), recomputed from scratch.
    /// O(sites + arcs); the search uses the running `obj`.
    pub fn objective(&self) -> f64 {
        let inst = self.inst;
        let benefit: f64 = (0..inst.sites.len())
            .map(|s| self.site_value(s, self.site_e[s], self.site_v[s]))
            .sum();
        let cost: f64 = self
            .x
            .iter()
            .zip(&inst.cost)
            .map(|(&x, c)| f64::from(x) * c)
            .sum();
        benefit - cost
    }

    /// The growth moves of site position `sp` at its current state (see `growth`): one more
    /// vial on any arc of a served block, or opening an unserved block with the fewest vials
    /// that reach the minimum release, or serving a request with the standard count. Moves
    /// that gain nothing are left out. O(arcs of the site) when stale, O(1) otherwise.
    pub(super) fn refresh_growth(&mut self, sp: usize) {
        if self.growth[sp].is_none() {
            let inst = self.inst;
            let site = &inst.sites[sp];
            let (e, v) = (self.site_e[sp], self.site_v[sp]);
            let here = self.site_value(sp, e, v);
            let mut moves: Vec<Growth> = Vec::new();
            for &a in &site.arcs {
                if v > 0 && !self.release_room(a) {
                    continue;
                }
                let alive = inst.arcs[a].wasps_alive_per_vial;
                let n: u32 = match (site.kind, v > 0) {
                    (SiteKind::Block, true) if self.x[a] == 0 => {
                        // A further release on a new arc: at least the minimum on its own.
                        ((inst.min * (1.0 - EPS) / alive).ceil() as u32).max(1)
                    }
                    (SiteKind::Dooryard, true) => break,
                    (SiteKind::Dooryard, false) => inst.per_request,
                    (SiteKind::Block, true) => 1,
                    (SiteKind::Block, false) => {
                        ((inst.min * (1.0 - EPS) / alive).ceil() as u32).max(1)
                    }
                };
                self.work += 1;
                let (e2, v2) = (e + f64::from(n) * alive, v + n);
                if !self.release_ok(sp, e2, v2) {
                    continue;
                }
                let g = self.site_value(sp, e2, v2) - here - inst.cost[a] * f64::from(n);
                let ratio = g / f64::from(n);
                if ratio > 1e-9 {
                    moves.push((ratio, a, n));
                }
            }
            // Stable: among equal gains the earlier arc comes first.
            moves.sort_by(|x, y| y.0.total_cmp(&x.0));
            self.growth[sp] = Some(moves);
            self.blocked[sp].1.clear();
        }
    }

    /// The best growth move at site position `sp` that supply, capacity and the share floor
    /// allow now: the first of its growth moves that fits them. The leading moves that did
    /// not fit a resource at the last call and still cannot (see `blocked`) are not checked
    /// again; on large weeks most moves are shut out by spent supply, and the greedy fill asks
    /// every candidate site each step.
    pub(super) fn best_move_at(&mut self, sp: usize) -> Option<Growth> {
        self.refresh_growth(sp);
        self.work += 1;
        let inst = self.inst;
        let (door, total) = (self.door, self.total);
        let (since, mut blocked) = std::mem::take(&mut self.blocked[sp]);
        let moves = self.growth[sp].as_deref().unwrap_or(&[]);
        if since != self.free_epoch {
            // Check again only the moves whose resource has had vials taken off since.
            for i in 0..blocked.len() {
                let r = blocked[i];
                let (_, a, n) = moves[i];
                // Still shut out by the same resource unless it now has room for the move.
                if self.res_up[r] > since && self.res_free[r] >= n {
                    match inst.arc_res[a].iter().find(|&&r| self.res_free[r] < n) {
                        Some(&r) => blocked[i] = r,
                        None => {
                            blocked.truncate(i);
                            break;
                        }
                    }
                }
            }
        }
        let mut found = None;
        for (i, &(g, a, n)) in moves.iter().enumerate().skip(blocked.len()) {
            let res = &inst.arc_res[a];
            if res.is_empty() {
                continue; // `free` is 0: never fits (and has no resource to watch)
            }
            if let Some(&r) = res.iter().find(|&&r| self.res_free[r] < n) {
                if blocked.len() == i {
                    blocked.push(r);
                }
                continue;
            }
            let nf = f64::from(n);
            let door_site = inst.sites[sp].kind == SiteKind::Dooryard;
            if self.share_ok_at(if door_site { door + nf } else { door }, total + nf) {
                found = Some((g, a, n));
                break;
            }
        }
        self.blocked[sp] = (self.free_epoch, blocked);
        found
    }

    /// Greedy fill over site positions `cand` (but `skip`): take the best allowed growth
    /// move per vial until none gains or the budget is spent. O(iterations × |cand|).
    pub(super) fn greedy(&mut self, cand: &[usize], skip: Option<usize>, budget: u64) {
        while self.work < budget {
            let mut best: Option<Growth> = None;
            for &sp in cand {
                if Some(sp) == skip {
                    continue;
                }
                if let Some(m) = self.best_move_at(sp)
                    && best.is_none_or(|b| m.0 > b.0)
                {
                    best = Some(m);
                }
            }
            match best {
                Some((_, a, n)) => self.commit(&[(a, i64::from(n))]),
                None => break,
            }
        }
    }

    /// Objective change of one vial more on arc `b`, whose site is served and must stay a
    /// valid release; None otherwise. Supply, capacity and share are not checked.
    pub(super) fn add_one_gain(&self, b: usize) -> Option<f64> {
        let inst = self.inst;
        let sb = inst.arc_site[b];
        let (e, v) = (self.site_e[sb], self.site_v[sb]);
        if v == 0 || self.x[b] == 0 {
            // One vial on an unused arc would be a release of its own, below any minimum
            // worth having; whole-release moves handle a change of arc.
            return None;
        }
        let e2 = e + inst.arcs[b].wasps_alive_per_vial;
        self.release_ok(sb, e2, v + 1)
            .then(|| self.site_value(sb, e2, v + 1) - self.site_value(sb, e, v) - inst.cost[b])
    }

    /// Objective change of one vial less on arc `a`, and whether its site stays valid.
    pub(super) fn remove_one_gain(&self, a: usize) -> (f64, bool) {
        let inst = self.inst;
        let sa = inst.arc_site[a];
        let (e, v) = (self.site_e[sa], self.site_v[sa]);
        let v2 = v - 1;
        let e2 = if v2 == 0 {
            0.0
        } else {
            e - inst.arcs[a].wasps_alive_per_vial
        };
        let left = self.x[a] - 1;
        let arc_ok = self.site_n[sa] <= 1
            || left == 0
            || self.release_ok(
                sa,
                f64::from(left) * inst.arcs[a].wasps_alive_per_vial,
                left,
            );
        (
            self.site_value(sa, e2, v2) - self.site_value(sa, e, v) + inst.cost[a],
            arc_ok && self.release_ok(sa, e2, v2),
        )
    }
}

/// Requests a block's compound opening may bring in to keep the dooryard share floor, per
/// request added: each is made room for and the best kept (small: a request takes the
/// standard count, so a few tries find the one whose row has the cheapest vials to push out).
const SHARE_REQUEST_TRIES: usize = 6;

/// Every (request site position, arc) among `unserved` whose standard release gains on its
/// own (benefit − travel > 0), best gain first (ties: site, arc).
fn request_openings(inst: &Instance, unserved: &[usize]) -> Vec<(usize, usize)> {
    let n = f64::from(inst.per_request);
    let mut opts: Vec<(f64, usize, usize)> = unserved
        .iter()
        .filter(|&&sp| inst.sites[sp].kind == SiteKind::Dooryard)
        .flat_map(|&sp| {
            inst.sites[sp].arcs.iter().filter_map(move |&a| {
                let gain =
                    inst.benefit(sp, n * inst.arcs[a].wasps_alive_per_vial) - n * inst.cost[a];
                (gain > 0.0).then_some((gain, sp, a))
            })
        })
        .collect();
    opts.sort_by(|p, q| q.0.total_cmp(&p.0).then(p.1.cmp(&q.1)).then(p.2.cmp(&q.2)));
    opts.into_iter().map(|(_, sp, a)| (sp, a)).collect()
}

/// Whole vials left on a resource with right-hand side `rhs` and `used` vials: ⌊rhs − used⌋
/// with 10⁻⁷ of slack, 0 when negative. The cast truncates toward zero and saturates (0 for
/// a negative or NaN value), which is that floor, without a call to libm's `floor` (the
/// rounding's most frequent arithmetic: 1.3 % of `plan`'s CPU on the 35,000-site week).
fn free_of(rhs: f64, used: f64) -> u32 {
    (rhs - used + 1e-7) as u32
}

/// Key that sorts `f64` gains in decreasing order (total order, as `f64::total_cmp`).
fn desc_key(g: f64) -> u64 {
    let b = g.to_bits();
    let ascending = if b >> 63 == 1 { !b } else { b ^ (1 << 63) };
    !ascending
}

/// Rounds LP vials `lp_x` (per usable arc; or an earlier whole-vial plan, which the seed keeps
/// where it still fits) to a whole-vial plan over the site positions with `cand[s]` (the
/// caller passes [`candidates`], and a warm start's sites: interior-point dust carries no
/// decision, and scanning the whole pool would cost time for nothing). Returns vials per
/// usable arc. `budget` caps evaluated moves (deterministic).
pub(crate) fn round(inst: &Instance, lp_x: &[f64], cand: &[bool], budget: u64) -> Vec<u32> {
    let mut st = State::new(inst);
    let cand_list: Vec<usize> = (0..inst.sites.len()).filter(|&s| cand[s]).collect();
    // 1. Seed from the LP, most valuable sites first; requests first so the share floor has
    // room for blocks.
    let mut order: Vec<(bool, f64, usize)> = cand_list
        .iter()
        .map(|&sp| {
            let e: f64 = inst.sites[sp]
                .arcs
                .iter()
                .map(|&a| lp_x[a] * inst.arcs[a].wasps_alive_per_vial)
                .sum();
            (
                inst.sites[sp].kind == SiteKind::Block,
                -inst.benefit(sp, e),
                sp,
            )
        })
        .collect();
    order.sort_by(|a, b| a.0.cmp(&b.0).then(a.1.total_cmp(&b.1)).then(a.2.cmp(&b.2)));
    for &(_, _, sp) in &order {
        let site = &inst.sites[sp];
        let v: f64 = site.arcs.iter().map(|&a| lp_x[a]).sum();
        let want = match site.kind {
            SiteKind::Dooryard if v >= 0.5 * f64::from(inst.per_request) => inst.per_request,
            SiteKind::Dooryard => 0,
            SiteKind::Block => v.round() as u32,
        };
        if want == 0 {
            continue;
        }
        let mut arcs = site.arcs.clone();
        arcs.sort_by(|&a, &b| lp_x[b].total_cmp(&lp_x[a]).then(a.cmp(&b)));
        let mut placed: Vec<(usize, i64)> = Vec::new();
        let mut left = want;
        // At most `releases_per_site` arcs: each release goes on the arc of largest LP flow
        // that takes all that is left, else on the one with the most room.
        while left > 0 && (placed.len() as u32) < inst.releases_per_site {
            let unused = arcs
                .iter()
                .copied()
                .filter(|a| !placed.iter().any(|p| p.0 == *a));
            let pick = unused
                .clone()
                .find(|&a| st.free(a) >= left)
                .or_else(|| unused.max_by_key(|&a| (st.free(a), std::cmp::Reverse(a))));
            let Some(a) = pick else { break };
            let take = left.min(st.free(a));
            if take == 0 {
                break;
            }
            st.commit(&[(a, i64::from(take))]);
            placed.push((a, i64::from(take)));
            left -= take;
        }
        // Trim while above the maximum release.
        while st.site_e[sp] > inst.max * (1.0 + EPS) + EPS {
            let Some(&(a, _)) = placed.iter().rev().find(|&&(a, _)| st.x[a] > 0) else {
                break;
            };
            st.commit(&[(a, -1)]);
        }
        if !st.site_ok(sp) || !st.share_ok() {
            for a in site.arcs.clone() {
                let x = i64::from(st.x[a]);
                if x > 0 {
                    st.commit(&[(a, -x)]);
                }
            }
        }
    }
    // Block vials seeded before the share floor had room may still break it; shed the
    // cheapest until it holds.
    while !st.share_ok() {
        let mut best: Option<(f64, Vec<(usize, i64)>)> = None;
        for a in 0..inst.arcs.len() {
            if st.x[a] == 0 || inst.sites[inst.arc_site[a]].kind != SiteKind::Block {
                continue;
            }
            let sp = inst.arc_site[a];
            for mv in [vec![(a, -1)], st.emptying(sp)] {
                let n: i64 = mv.iter().map(|m| -m.1).sum();
                let before = st.total;
                st.commit(&mv);
                let site_fine = st.site_ok(sp);
                let value = st.site_value(sp, st.site_e[sp], st.site_v[sp]);
                let rev: Vec<(usize, i64)> = mv.iter().map(|&(a, d)| (a, -d)).collect();
                st.commit(&rev);
                debug_assert!((st.total - before).abs() < 1e-9);
                if site_fine {
                    let loss = (st.site_value(sp, st.site_e[sp], st.site_v[sp]) - value) / n as f64;
                    if best.as_ref().is_none_or(|b| loss < b.0) {
                        best = Some((loss, mv));
                    }
                }
            }
        }
        match best {
            Some((_, mv)) => st.commit(&mv),
            None => break,
        }
    }
    // 2. Greedy fill.
    st.greedy(&cand_list, None, budget / 2);
    // 3. Local search.
    let cand_arcs: Vec<usize> = cand_list
        .iter()
        .flat_map(|&sp| inst.sites[sp].arcs.iter().copied())
        .collect();
    let mut cand_pos = vec![usize::MAX; inst.arcs.len()];
    for (i, &a) in cand_arcs.iter().enumerate() {
        cand_pos[a] = i;
    }
    let mut res_arcs: Vec<Vec<usize>> = vec![Vec::new(); inst.resources.len()];
    for &a in &cand_arcs {
        for &r in &inst.arc_res[a] {
            res_arcs[r].push(a);
        }
    }
    let mut improved = true;
    while improved && st.work < budget {
        improved = false;
        // Single-vial moves between arcs of served sites (a site must stay feasible). Moves to
        // another site gain (one vial less at the donor) + (one more at the recipient), so
        // recipients are kept sorted by the second term and each donor walks them best first.
        let mut recv: BTreeSet<(u64, usize)> = BTreeSet::new();
        let mut recv_gain: Vec<Option<f64>> = vec![None; cand_arcs.len()];
        for (i, &b) in cand_arcs.iter().enumerate() {
            if let Some(g) = st.add_one_gain(b) {
                recv.insert((desc_key(g), i));
                recv_gain[i] = Some(g);
            }
        }
        let donors: Vec<usize> = cand_arcs.iter().copied().filter(|&a| st.x[a] > 0).collect();
        for &a in &donors {
            if st.x[a] == 0 || st.work >= budget {
                continue;
            }
            let sa = inst.arc_site[a];
            let mut best: Option<VialMove> = None;
            for &b in &inst.sites[sa].arcs {
                if b == a {
                    continue;
                }
                if let Some(g) = st.try_moves(&[(a, -1), (b, 1)])
                    && g > 1e-9
                    && best.is_none_or(|x| g > x.0)
                {
                    best = Some((g, b, None));
                }
            }
            let (da, a_ok) = st.remove_one_gain(a);
            if a_ok {
                let ra = inst.arc_res[a];
                let door_a = f64::from(u8::from(inst.sites[sa].kind == SiteKind::Dooryard));
                let mut chains = 0;
                for &(_, i) in &recv {
                    st.work += 2;
                    let b = cand_arcs[i];
                    let g = da + recv_gain[i].unwrap_or(f64::NEG_INFINITY);
                    if g <= 1e-9 || best.is_some_and(|x| g <= x.0) {
                        break;
                    }
                    let sb = inst.arc_site[b];
                    if sb == sa {
                        continue;
                    }
                    // The recipient's rows with no room for one more vial once the donor's
                    // is freed (an arc draws on two rows).
                    let [r0, r1] = inst.arc_res[b];
                    let full = |r: usize| {
                        let freed = if ra.contains(&r) { 1.0 } else { 0.0 };
                        st.used[r] - freed + 1.0 > inst.res_rhs[r] + 1e-7
                    };
                    let r = match (full(r0), full(r1)) {
                        (false, false) => {
                            let door_b =
                                f64::from(u8::from(inst.sites[sb].kind == SiteKind::Dooryard));
                            if st.share_ok_at(st.door - door_a + door_b, st.total) {
                                best = Some((g, b, None));
                                break;
                            }
                            continue;
                        }
                        (true, false) => r0,
                        (false, true) => r1,
                        (true, true) => continue,
                    };
                    // The recipient's supply or vehicle row is full: make room by moving
                    // one vial of a third site off that row onto another of its arcs (an
                    // ejection chain of length two).
                    if chains >= MAX_CHAINS_PER_DONOR {
                        continue;
                    }
                    chains += 1;
                    let mut tried = 0;
                    for &c in &res_arcs[r] {
                        if tried >= MAX_REROUTES_PER_CHAIN {
                            break;
                        }
                        let sc = inst.arc_site[c];
                        if st.x[c] == 0 || sc == sa || sc == sb {
                            continue;
                        }
                        tried += 1;
                        for &c2 in &inst.sites[sc].arcs {
                            if c2 == c || inst.arc_res[c2].contains(&r) {
                                continue;
                            }
                            if let Some(gc) = st.try_moves(&[(a, -1), (b, 1), (c, -1), (c2, 1)])
                                && gc > 1e-9
                                && best.is_none_or(|x| gc > x.0)
                            {
                                best = Some((gc, b, Some((c, c2))));
                            }
                        }
                    }
                }
            }
            if let Some((_, b, chain)) = best {
                st.commit(&[(a, -1), (b, 1)]);
                let mut touched = vec![sa, inst.arc_site[b]];
                if let Some((c, c2)) = chain {
                    st.commit(&[(c, -1), (c2, 1)]);
                    touched.push(inst.arc_site[c]);
                }
                improved = true;
                for s2 in touched {
                    for &c in &inst.sites[s2].arcs {
                        let i = cand_pos[c];
                        if let Some(g) = recv_gain[i].take() {
                            recv.remove(&(desc_key(g), i));
                        }
                        if let Some(g) = st.add_one_gain(c) {
                            recv.insert((desc_key(g), i));
                            recv_gain[i] = Some(g);
                        }
                    }
                }
            }
        }
        // Move a whole release to another arc of its site (another facility, pack day,
        // dispatch day or mode), with the same vials or the count that keeps its live wasps.
        let served: Vec<usize> = cand_list
            .iter()
            .copied()
            .filter(|&sp| st.site_v[sp] > 0)
            .collect();
        for sp in served {
            if st.work >= budget {
                break;
            }
            let arcs = &inst.sites[sp].arcs;
            let mut best: Option<(f64, [(usize, i64); 2])> = None;
            let used: Vec<usize> = arcs.iter().copied().filter(|&a| st.x[a] > 0).collect();
            let unused: Vec<usize> = arcs.iter().copied().filter(|&a| st.x[a] == 0).collect();
            for &a in &used {
                let xa = st.x[a];
                let ea = f64::from(xa) * inst.arcs[a].wasps_alive_per_vial;
                for &b in &unused {
                    let alive_b = inst.arcs[b].wasps_alive_per_vial;
                    let same_wasps = if alive_b > 0.0 {
                        (ea / alive_b).round().max(1.0) as u32
                    } else {
                        xa
                    };
                    // Saturating: an arc with almost no live wasps a vial (a half-life of
                    // minutes) makes `same_wasps` u32::MAX, and + 1 overflowed (proptest in
                    // tests/it/extremes.rs, half_life_hours 0.5).
                    let mut counts = vec![
                        xa,
                        same_wasps,
                        same_wasps.saturating_add(1),
                        same_wasps.saturating_sub(1),
                    ];
                    if inst.sites[sp].kind == SiteKind::Dooryard {
                        counts = vec![xa];
                    }
                    counts.sort_unstable();
                    counts.dedup();
                    for n in counts.into_iter().filter(|&n| n > 0) {
                        let mv = [(a, -i64::from(xa)), (b, i64::from(n))];
                        if let Some(g) = st.try_moves(&mv)
                            && g > 1e-9
                            && best.is_none_or(|x| g > x.0)
                        {
                            best = Some((g, mv));
                        }
                    }
                }
            }
            if let Some((_, mv)) = best {
                st.commit(&mv);
                improved = true;
            }
        }
        // Open an unserved site on one arc, push out the cheapest vials that share its
        // resources, refill greedily; keep it if the plan gains. A block whose opening breaks
        // the share floor brings requests in with it (`pay_share`): on the generated 700-site
        // 3-facility 1x week, where the floor binds and every pack day holds 6-13 vials, that
        // shipped 145 of 145 vials instead of 140 (objective +0.77 %).
        let unserved: Vec<usize> = cand_list
            .iter()
            .copied()
            .filter(|&sp| st.site_v[sp] == 0)
            .collect();
        let request_opts = request_openings(inst, &unserved);
        for sp in unserved {
            if st.work >= budget {
                break;
            }
            for a in inst.sites[sp].arcs.clone() {
                if st.site_v[sp] > 0 || st.work >= budget {
                    break;
                }
                let alive = inst.arcs[a].wasps_alive_per_vial;
                let n: i64 = match inst.sites[sp].kind {
                    SiteKind::Dooryard => i64::from(inst.per_request),
                    SiteKind::Block => ((inst.min * (1.0 - EPS) / alive).ceil() as i64).max(1),
                };
                // Worth trying only if the opening alone would beat what it displaces at
                // the resources' current duals-free estimate: its own gain must be positive.
                let gain = inst.benefit(sp, n as f64 * alive) - n as f64 * inst.cost[a];
                if gain <= 0.0 || n as f64 * alive > inst.max * (1.0 + EPS) + EPS {
                    continue;
                }
                let before_obj = st.obj;
                st.checkpoint();
                st.commit(&[(a, n)]);
                let mut ok = st.share_ok();
                if ok {
                    ok = st.make_room(a, &[sp], &res_arcs);
                } else if inst.sites[sp].kind == SiteKind::Block {
                    ok = st.pay_share(a, sp, &request_opts, &res_arcs);
                }
                if ok {
                    st.greedy(&cand_list, None, budget);
                }
                if ok && st.obj > before_obj + 1e-9 * before_obj.abs().max(1.0) {
                    st.keep();
                    improved = true;
                } else {
                    st.rollback();
                }
            }
        }
        // Empty a site and refill greedily.
        let served: Vec<usize> = cand_list
            .iter()
            .copied()
            .filter(|&sp| st.site_v[sp] > 0)
            .collect();
        for sp in served {
            if st.site_v[sp] == 0 || st.work >= budget {
                continue;
            }
            let before_obj = st.obj;
            let empty = st.emptying(sp);
            if st.try_moves(&empty).is_none() {
                continue;
            }
            st.checkpoint();
            st.commit(&empty);
            st.greedy(&cand_list, Some(sp), budget);
            st.greedy(&cand_list, None, budget);
            if st.obj > before_obj + 1e-9 * before_obj.abs().max(1.0) {
                st.keep();
                improved = true;
            } else {
                st.rollback();
            }
        }
        // Whole releases between pack days, when the vial moves are done.
        if !improved && st.work < budget {
            improved = super::improve::release_moves(&mut st, &cand_list, budget);
        }
    }
    // 4. Small candidate sets: the exact whole-vial MIP over them with microlp, kept only when
    // it beats the local search (it cannot do worse than optimal over the candidates).
    if cand_arcs.len() <= MIP_POLISH_MAX_ARCS
        && !cand_arcs.is_empty()
        && let Some(x) = mip_polish(inst, &cand_list, &cand_arcs)
    {
        let current = st.objective();
        let saved = st.x.clone();
        st.restore(&x);
        let feasible = st.share_ok()
            && cand_list.iter().all(|&sp| st.site_ok(sp))
            && (0..inst.resources.len()).all(|r| st.used[r] <= inst.res_rhs[r] + 1e-7);
        if !(feasible && st.objective() > current + 1e-9 * current.abs().max(1.0)) {
            st.restore(&saved);
        }
    }
    st.x
}

/// The window polish (`windows.rs`) of the whole-vial plan `x` (vials per arc) over the
/// candidate sites `cand` (by site position) and the sites `x` serves: the plan it returns is
/// `x` or one with a higher objective.
pub(crate) fn polish_windows(inst: &Instance, x: &[u32], cand: &[bool]) -> Vec<u32> {
    let mut st = State::new(inst);
    st.restore(x);
    let list: Vec<usize> = (0..inst.sites.len())
        .filter(|&sp| cand[sp] || inst.sites[sp].arcs.iter().any(|&a| x[a] > 0))
        .collect();
    super::windows::polish(&mut st, &list);
    st.x
}

/// Largest candidate arc count for the microlp polish (microlp's branch and bound is only
/// quick on small models: measured, 32–56 arcs could take over 5 s on two busy cores).
const MIP_POLISH_MAX_ARCS: usize = 40;

/// Branch-and-bound nodes the polish may use: a work limit, so the plan never depends on the
/// machine's speed or load; the best plan found within it is kept only if it beats the local
/// search.
const MIP_POLISH_NODES: u64 = 2_000;

/// Blocked recipients per donor for which the single-vial search tries an ejection chain.
const MAX_CHAINS_PER_DONOR: usize = 8;

/// Third-site vials tried per ejection chain.
const MAX_REROUTES_PER_CHAIN: usize = 16;

/// The whole-vial problem over `cand` sites as a MIP (integer vials, a 0/1 serve flag per
/// site, a 0/1 release flag per arc), solved by microlp with a 1e-4 relative gap within
/// [`MIP_POLISH_NODES`] nodes. Returns vials
/// per usable arc, or None when microlp fails.
fn mip_polish(inst: &Instance, cand: &[usize], cand_arcs: &[usize]) -> Option<Vec<u32>> {
    use super::model::{LinearModel, Sense};
    let mut m = LinearModel::new("whole_vials");
    let mut col = vec![usize::MAX; inst.arcs.len()];
    for &a in cand_arcs {
        let ub = super::instance::arc_room(inst, a);
        col[a] = m.add_column(&format!("x{a}"), 0.0, ub, -inst.cost[a], true);
    }
    let span = (inst.max - inst.target).max(0.0);
    for &sp in cand {
        let site = &inst.sites[sp];
        let y = m.add_column(&format!("y{sp}"), 0.0, 1.0, 0.0, true);
        let u1 = m.add_column(
            &format!("u1_{sp}"),
            0.0,
            inst.target.max(0.0),
            site.priority,
            false,
        );
        let u2 = m.add_column(
            &format!("u2_{sp}"),
            0.0,
            span,
            site.priority * inst.weight2,
            false,
        );
        let alive: Vec<(usize, f64)> = site
            .arcs
            .iter()
            .map(|&a| (col[a], inst.arcs[a].wasps_alive_per_vial))
            .collect();
        // One 0/1 release flag per arc: vials only on a flagged arc, at most
        // `releases_per_site` flags, and for a block each release at least the minimum.
        let mut flags = Vec::with_capacity(site.arcs.len());
        for &a in &site.arcs {
            let z = m.add_column(&format!("z{a}"), 0.0, 1.0, 0.0, true);
            let ub = super::instance::arc_room(inst, a).min(f64::from(i32::MAX));
            m.add_row(
                &format!("use{a}"),
                &[(col[a], 1.0), (z, -ub)],
                Sense::Le,
                0.0,
            );
            if site.kind == SiteKind::Block {
                let alive_a = inst.arcs[a].wasps_alive_per_vial;
                m.add_row(
                    &format!("min{a}"),
                    &[(col[a], alive_a), (z, -inst.min)],
                    Sense::Ge,
                    0.0,
                );
            }
            flags.push((z, 1.0));
        }
        flags.push((y, -f64::from(inst.releases_per_site)));
        m.add_row(&format!("releases{sp}"), &flags, Sense::Le, 0.0);
        let vials: Vec<(usize, f64)> = site.arcs.iter().map(|&a| (col[a], 1.0)).collect();
        let mut b: Vec<(usize, f64)> = alive.iter().map(|&(c, v)| (c, -v)).collect();
        b.extend([(u1, 1.0), (u2, 1.0)]);
        m.add_row(&format!("benefit{sp}"), &b, Sense::Le, 0.0);
        let mut hi = alive.clone();
        hi.push((y, -inst.max));
        m.add_row(&format!("max{sp}"), &hi, Sense::Le, 0.0);
        match site.kind {
            SiteKind::Block => {
                let mut lo = alive.clone();
                lo.push((y, -inst.min));
                m.add_row(&format!("min{sp}"), &lo, Sense::Ge, 0.0);
            }
            SiteKind::Dooryard => {
                let mut eq = vials.clone();
                eq.push((y, -f64::from(inst.per_request)));
                m.add_row(&format!("req{sp}"), &eq, Sense::Eq, 0.0);
            }
        }
        if let Some(f) = site.force {
            let (mut t, rhs, pen) = match f {
                Force::Vials(v) => (vials, v, inst.force_penalty_per_vial),
                Force::Wasps(w) => (
                    alive,
                    w,
                    inst.force_penalty_per_vial / inst.best_alive_per_vial.max(1.0),
                ),
            };
            let slack = m.add_column(&format!("short{sp}"), 0.0, rhs, -pen, false);
            t.push((slack, 1.0));
            m.add_row(&format!("force{sp}"), &t, Sense::Ge, rhs);
        }
    }
    let mut res_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); inst.resources.len()];
    let mut share_terms = Vec::new();
    for &a in cand_arcs {
        for &r in &inst.arc_res[a] {
            res_terms[r].push((col[a], 1.0));
        }
        if let Some(s) = inst.share {
            let door = inst.sites[inst.arc_site[a]].kind == SiteKind::Dooryard;
            share_terms.push((col[a], if door { 1.0 - s } else { -s }));
        }
    }
    for (r, t) in res_terms.iter().enumerate() {
        if !t.is_empty() {
            m.add_row(&format!("res{r}"), t, Sense::Le, inst.res_rhs[r]);
        }
    }
    if !share_terms.is_empty() {
        m.add_row("share", &share_terms, Sense::Ge, 0.0);
    }
    let sol = m.solve_integer(1e-4, MIP_POLISH_NODES).ok()?;
    let mut x = vec![0u32; inst.arcs.len()];
    for &a in cand_arcs {
        x[a] = sol.values[col[a]].round().max(0.0) as u32;
    }
    Some(x)
}

/// Near misses are sites whose best first vial is within this fraction of its live-wasp value
/// of paying for the shared rows' duals.
const NEAR_MISS: f64 = 0.05;

/// The rounding's candidate sites: the LP's support (at least 0.02 vials: interior-point dust
/// below that carries no decision), forced sites, near misses ([`NEAR_MISS`]), and then the
/// next best sites by that ratio (reduced cost of the best first vial ÷ its live-wasp value)
/// until there are `per_support_site` candidates per support site (0: none): the alternates
/// a whole-vial plan needs when rounding frees a vial or a site cannot take one. Every site is
/// looked at, not only the working set's: pricing keeps the set small. O(arcs + S log S).
pub(crate) fn candidates(
    inst: &Instance,
    x: &[f64],
    res_dual: &[f64],
    share_dual: f64,
    per_support_site: f64,
) -> Vec<bool> {
    let mut cand = vec![false; inst.sites.len()];
    let mut rest: Vec<(f64, usize)> = Vec::new();
    let mut support = 0usize;
    for (sp, site) in inst.sites.iter().enumerate() {
        if site.force.is_some() || site.arcs.iter().map(|&a| x[a]).sum::<f64>() >= 0.02 {
            cand[sp] = true;
            support += 1;
            continue;
        }
        let ratio = site
            .arcs
            .iter()
            .filter_map(|&a| {
                let value = site.priority * inst.arcs[a].wasps_alive_per_vial;
                (value > 0.0)
                    .then(|| super::pricing::reduced_cost(inst, a, res_dual, share_dual) / value)
            })
            .fold(f64::NEG_INFINITY, f64::max);
        if ratio >= -NEAR_MISS {
            cand[sp] = true;
        } else if ratio.is_finite() {
            rest.push((ratio, sp));
        }
    }
    let want = (per_support_site * support as f64) as usize;
    let have = cand.iter().filter(|c| **c).count();
    if have < want {
        rest.sort_by(|p, q| q.0.total_cmp(&p.0).then(p.1.cmp(&q.1)));
        for &(_, sp) in rest.iter().take(want - have) {
            cand[sp] = true;
        }
    }
    cand
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::AllocOptions;
    use crate::arcs::{Arc, Arcs};
    use crate::scenario::fixture::tiny;

    fn arc(site: usize, facility: usize, day: u64, alive: f64) -> Arc {
        crate::scenario::fixture::route_arc(&tiny(), site, facility, day, alive)
    }

    #[test]
    fn free_vials_are_the_floor_of_what_is_left_and_never_negative() {
        // The cast must give ⌊rhs − used + 10⁻⁷⌋, at least 0, as the floor did, on every
        // kind of value a row can hold.
        let floor = |rhs: f64, used: f64| (rhs - used + 1e-7).floor().max(0.0) as u32;
        let mut rng = fastrand::Rng::with_seed(3);
        let mut cases = vec![
            (5.0, 5.0),
            (5.0, 5.0 + 1e-8),
            (5.0, 5.0 + 2e-7),
            (5.0, 4.999_999_95),
            (0.0, 0.5),
            (0.0, 1.5),
            (3.0, f64::NAN),
            (f64::INFINITY, 0.0),
            (1e12, 0.0),
            (4_294_967_295.0, 0.0),
        ];
        cases.extend((0..10_000).map(|_| (rng.f64() * 1e4, rng.f64() * 1e4)));
        cases.extend((0..10_000).map(|_| {
            let r = f64::from(rng.u32(0..1_000));
            (r, r - f64::from(rng.u32(0..3)) + (rng.f64() - 0.5) * 1e-6)
        }));
        for (rhs, used) in cases {
            assert_eq!(free_of(rhs, used), floor(rhs, used), "{rhs} − {used}");
        }
    }

    /// The growth move `best_move_at` must give: the first of the site's moves that fits
    /// supply, capacity and the share floor, checked from scratch.
    fn first_fitting(st: &mut State, sp: usize) -> Option<Growth> {
        st.refresh_growth(sp);
        let door_site = st.inst.sites[sp].kind == SiteKind::Dooryard;
        let (door, total) = (st.door, st.total);
        st.growth[sp]
            .as_deref()
            .unwrap_or(&[])
            .iter()
            .copied()
            .find(|&(_, a, n)| {
                let nf = f64::from(n);
                n <= st.free(a)
                    && st.share_ok_at(if door_site { door + nf } else { door }, total + nf)
            })
    }

    #[test]
    fn the_best_move_skips_only_moves_that_still_do_not_fit() {
        // The fixture's week: the greedy's own growth moves until supply runs out, now and then
        // vials taken off an arc, and after each commit the best move of every site compared
        // against a scan from scratch.
        let s = tiny();
        let arcs = crate::arcs::build_arcs(&s, &crate::travel::TravelModel::new(&s));
        let priority = vec![1.0; s.sites.len()];
        let inst = Instance::new(&s, &priority, &arcs, &AllocOptions::default()).expect("valid");
        let mut st = State::new(&inst);
        let mut rng = fastrand::Rng::with_seed(7);
        let mut skipped = 0;
        for _ in 0..3_000 {
            // Mostly the greedy's own growth (so supply runs out), sometimes vials taken off.
            let sp = rng.usize(..inst.sites.len());
            let served: Vec<usize> = (0..inst.arcs.len()).filter(|&a| st.x[a] > 0).collect();
            let (a, d) = match st.best_move_at(sp) {
                Some((_, a, n)) if rng.u8(..4) > 0 => (a, i64::from(n)),
                _ if !served.is_empty() => {
                    let a = served[rng.usize(..served.len())];
                    (a, -i64::from(rng.u32(1..=st.x[a])))
                }
                _ => continue,
            };
            st.commit(&[(a, d)]);
            for sp in 0..inst.sites.len() {
                skipped += st.blocked[sp].1.len();
                let want = first_fitting(&mut st, sp);
                assert_eq!(st.best_move_at(sp), want, "site position {sp}");
            }
        }
        // The shortcut was taken, so the comparison covers it.
        assert!(skipped > 1_000, "{skipped}");
    }

    #[test]
    fn wider_candidates_add_the_sites_closest_to_paying_for_the_duals() {
        let s = tiny();
        let arcs = Arcs {
            arcs: vec![arc(0, 0, 0, 90.0), arc(1, 0, 0, 95.0), arc(2, 0, 0, 80.0)],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let mut s2 = s.clone();
        s2.policy.dooryard_share_min = 0.0;
        let inst = Instance::new(&s2, &priority, &arcs, &AllocOptions::default()).expect("valid");
        // Site 0 is the LP's support; the shared rows' duals are far above what a first vial
        // earns anywhere, so neither other site is a near miss.
        let x = [1.0, 0.0, 0.0];
        let res_dual = vec![1e4; inst.res_rhs.len()];
        let sites = |c: Vec<bool>| -> Vec<usize> {
            (0..c.len())
                .filter(|&i| c[i])
                .map(|i| inst.sites[i].site)
                .collect()
        };
        assert_eq!(sites(candidates(&inst, &x, &res_dual, 0.0, 0.0)), vec![0]);
        // Two per support site: the better of the others (95 live wasps per vial against 80).
        assert_eq!(
            sites(candidates(&inst, &x, &res_dual, 0.0, 2.0)),
            vec![0, 1]
        );
        assert_eq!(
            sites(candidates(&inst, &x, &res_dual, 0.0, 3.0)),
            vec![0, 1, 2]
        );
        // With no duals every site's first vial pays: all are near misses.
        let free = vec![0.0; inst.res_rhs.len()];
        assert_eq!(sites(candidates(&inst, &x, &free, 0.0, 0.0)), vec![0, 1, 2]);
    }

    #[test]
    fn a_block_opening_brings_in_a_request_to_keep_the_share() {
        // B1 and B2 draw on F1's day-0 pack (6 vials), R1 on day 1; R2 on day 2 (room) or on
        // day 0 (full: B1 must give up vials). Share floor 0.3: B1 4 + R1 2 holds it (1/3);
        // B2 opening with 2 breaks it (2/8) until R2 comes in. Only F1's days 0-2 are packed
        // (6, 2 and 2 vials), so the two requests can absorb the floor's part and it is not
        // lowered. B2's vials are the cheapest on day 0 (80 live wasps each against B1's 90),
        // but it is the site being opened: the room comes from B1.
        let mut s = tiny();
        s.supply
            .retain(|p| p.facility == 0 && p.date < s.week_start + chrono::Days::new(3));
        for p in &mut s.supply {
            if p.date > s.week_start {
                p.vials = 2;
            }
        }
        for (r2_day, b1_after) in [(2, 4), (0, 2)] {
            let arcs = Arcs {
                arcs: vec![
                    arc(0, 0, 0, 90.0),
                    arc(1, 0, 0, 80.0),
                    arc(6, 0, 1, 90.0),
                    arc(7, 0, r2_day, 90.0),
                ],
                no_arc_reason: vec![None; s.sites.len()],
            };
            let mut s2 = s.clone();
            s2.policy.dooryard_share_min = 0.3;
            let priority = vec![1.0; s.sites.len()];
            let inst =
                Instance::new(&s2, &priority, &arcs, &AllocOptions::default()).expect("valid");
            let pos = |site: usize| {
                (0..inst.sites.len())
                    .find(|&p| inst.sites[p].site == site)
                    .expect("site in the instance")
            };
            let arc_of = |site: usize| inst.sites[pos(site)].arcs[0];
            let mut res_arcs: Vec<Vec<usize>> = vec![Vec::new(); inst.resources.len()];
            for a in 0..inst.arcs.len() {
                for &r in &inst.arc_res[a] {
                    res_arcs[r].push(a);
                }
            }
            let rows_hold = |st: &State| {
                (0..inst.resources.len()).all(|r| st.used[r] <= inst.res_rhs[r] + 1e-7)
            };
            let mut st = State::new(&inst);
            st.commit(&[(arc_of(0), 4), (arc_of(6), 2)]);
            assert!(st.share_ok());
            let requests = request_openings(&inst, &[pos(7)]);
            assert_eq!(requests, vec![(pos(7), arc_of(7))]);
            st.checkpoint();
            st.commit(&[(arc_of(1), 2)]);
            assert!(!st.share_ok());
            assert!(st.pay_share(arc_of(1), pos(1), &requests, &res_arcs));
            assert!(st.share_ok() && rows_hold(&st), "R2 on day {r2_day}");
            assert_eq!(st.x[arc_of(7)], 2, "R2 on day {r2_day}");
            assert_eq!(st.x[arc_of(1)], 2, "R2 on day {r2_day}");
            assert_eq!(st.x[arc_of(0)], b1_after, "R2 on day {r2_day}");
            st.rollback();
            assert_eq!(st.x, vec![4, 0, 2, 0]);
            // With no request to bring in, the opening cannot keep the floor.
            st.checkpoint();
            st.commit(&[(arc_of(1), 2)]);
            assert!(!st.pay_share(arc_of(1), pos(1), &[], &res_arcs));
            st.rollback();
            assert!(st.share_ok());
        }
    }

    #[test]
    fn greedy_fill_completes_a_thin_lp_solution() {
        let s = tiny();
        let arcs = Arcs {
            arcs: vec![arc(0, 0, 0, 90.0), arc(1, 0, 0, 95.0)],
            no_arc_reason: vec![None; s.sites.len()],
        };
        let priority = vec![1.0; s.sites.len()];
        let opts = AllocOptions {
            pricing: false,
            ..AllocOptions::default()
        };
        let mut s2 = s.clone();
        s2.policy.dooryard_share_min = 0.0;
        let inst = Instance::new(&s2, &priority, &arcs, &opts).expect("valid");
        // The LP hint is far below a minimum release at both sites.
        let x = round(&inst, &[0.5, 0.5], &[true, true], 1_000_000);
        // Six vials packed at F1 on day 0: both blocks at or above the 150-wasp minimum.
        assert_eq!(x.iter().sum::<u32>(), 6);
        for (a, &v) in x.iter().enumerate() {
            assert!(v == 0 || f64::from(v) * inst.arcs[a].wasps_alive_per_vial >= 150.0);
        }
    }
}
