//! The local search to a local optimum, and the driver: starts, perturbation rounds, the
//! acceptance rule and the work limits.

use std::time::Instant;

use rayon::prelude::*;

use super::segment::{Data, EPS, Seg};
use super::state::{Move, State};
use super::{Solution, SolveOptions};

/// Rounds of late-acceptance history: a candidate no worse than the current solution of this
/// many rounds ago is accepted.
const HISTORY: usize = 300;
/// Independent searches from the construction before the best goes on.
const STARTS: u32 = 2;

/// A customer's route (vehicle), predecessor and successor (the depot as 0): when none of the
/// three changes, the moves found from it are the same as before, up to time-window slack.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
struct Placement {
    route: usize,
    pred: usize,
    succ: usize,
}

impl State<'_> {
    /// One full local search to a local optimum.
    ///
    /// Passes look only at customers on routes changed in the previous pass (all routes in the
    /// first when `dirty` is `None`), a don't-look rule at route level: a move from a clean
    /// route into a changed one is still found from the changed route's side when it is a
    /// relocate/exchange/tail swap of that route's customers.
    pub(super) fn local_search(&mut self, dirty: Option<Vec<bool>>) {
        let d = self.data;
        let mut dirty = dirty.unwrap_or_else(|| vec![true; self.routes.len()]);
        let mut guard = 0usize;
        while dirty.iter().any(|&x| x) && guard < 10_000 {
            guard += 1;
            let mut next = vec![false; self.routes.len()];
            for u in 1..d.n {
                let Some((r, _)) = self.at[u] else { continue };
                if !dirty[r] {
                    continue;
                }
                if let Some(m) = self.find_move(u) {
                    for (v, _) in &m.0 {
                        next[*v] = true;
                        dirty[*v] = true;
                    }
                    #[cfg(debug_assertions)]
                    let before = self.total_cost();
                    self.apply(m);
                    #[cfg(debug_assertions)]
                    debug_assert!(self.total_cost() <= before + 1e-6, "move raised the cost");
                }
            }
            dirty = next;
        }
    }

    /// Local search from the customers in `mark` (a don't-look rule at customer level): a pass
    /// looks for a move from each marked customer only; an applied move marks the customers
    /// whose route, predecessor or successor it changed, for this pass and the next. Ends when
    /// a pass marks no one.
    pub(super) fn local_search_from(&mut self, mut mark: Vec<bool>) {
        let d = self.data;
        let mut guard = 0usize;
        while mark.iter().any(|&x| x) && guard < 10_000 {
            guard += 1;
            let mut next = vec![false; d.n];
            for u in 1..d.n {
                if !mark[u] || self.at[u].is_none() {
                    continue;
                }
                if let Some(m) = self.find_move(u) {
                    let old = self.placements(&m);
                    self.apply(m);
                    for (node, was) in old {
                        if self.placement(node) != was {
                            next[node] = true;
                            mark[node] = true;
                        }
                    }
                }
            }
            mark = next;
        }
    }

    /// Where `node` is now, `None` when unserved.
    fn placement(&self, node: usize) -> Option<Placement> {
        let (r, p) = self.at[node]?;
        let nodes = &self.routes[r].nodes;
        let pred = if p == 0 { 0 } else { nodes[p - 1] };
        let succ = nodes.get(p + 1).copied().unwrap_or(0);
        Some(Placement {
            route: r,
            pred,
            succ,
        })
    }

    /// The placement now of every customer on a route `m` changes, before or after it.
    fn placements(&self, m: &Move) -> Vec<(usize, Option<Placement>)> {
        let mut out = Vec::new();
        for (v, nodes) in &m.0 {
            for &node in self.routes[*v].nodes.iter().chain(nodes) {
                out.push((node, self.placement(node)));
            }
        }
        out
    }

    /// First improving move involving customer u, over u's neighbours, then alone onto an
    /// unused vehicle.
    pub(super) fn find_move(&self, u: usize) -> Option<Move> {
        let d = self.data;
        let (ru, pu) = self.at[u]?;
        let a = &self.routes[ru];
        let la = a.nodes.len();
        // Summaries of the 1–3 customers from u (both ways) and of route a without them.
        let cut: [(Seg, Seg, Seg); 3] = std::array::from_fn(|k| {
            let len = (k + 1).min(la - pu);
            let seg = &a.nodes[pu..pu + len];
            (
                d.seq(seg.iter().copied()),
                d.seq(seg.iter().rev().copied()),
                d.cat(&a.pre[pu], &a.suf[pu + len]),
            )
        });
        for &v in &d.neigh[u] {
            let Some((rv, pv)) = self.at[v] else { continue };
            let m = if rv == ru {
                self.intra(ru, pu, pv)
            } else {
                self.between(ru, pu, &cut, v)
            };
            if m.is_some() {
                return m;
            }
        }
        self.to_unused(ru, pu)
    }
}

/// The search of [`super::solve`]: the best of the construction starts, then [`STARTS`]
/// independent late-acceptance searches from it with their own seeds, each given
/// `max_iterations / (2 · STARTS)` rounds, then the best of those goes on for the remaining
/// rounds. The search stops after [`stall_limit`] rounds in a row without a new best, counted
/// over the search as a whole when the better start serves every customer: it hands its count
/// to the rounds that go on, so a start that ended 1,400 rounds past its last new best goes
/// on for at most the rest of the limit. (Counted afresh, the continuation of every depot-day
/// of the generated 35,000-site week but two ran its full stall limit without a new best: a
/// third of the routing work.) With customers left out the count starts afresh.
pub(super) fn run(data: &Data<'_>, opts: &SolveOptions) -> Solution {
    let started = Instant::now();
    // One start per opening order of vehicle kinds; the best local optimum goes on.
    let empty = State::empty(data);
    let mut first: Option<State<'_>> = None;
    for order in empty.opening_orders() {
        let mut s = empty.clone();
        s.construct(&order);
        s.local_search(None);
        if first.as_ref().is_none_or(|c| s.key_lt(c)) {
            first = Some(s);
        }
    }
    let first = first.unwrap_or(empty);
    if data.n <= 2 {
        return first.into_solution();
    }
    let stall = stall_limit(data, opts);
    let per_start = opts.max_iterations / (2 * STARTS);
    // One independent search per start, each with its own seed. Without a wall-clock limit
    // they do not depend on each other, so they run in parallel (a large depot-day that
    // starts last no longer leaves a core idle) and are compared in start order: the same
    // result as one after the other. With a limit they run in turn, and a start that hits it
    // ends the starts.
    let start = |j: u32| {
        let mut rng = fastrand::Rng::with_seed(
            opts.seed
                .wrapping_mul(0x9E37_79B9_7F4A_7C15)
                .wrapping_add(u64::from(j) + 1),
        );
        // Odd starts search penalised (see [`ils`]).
        let penalised = j % 2 == 1;
        ils(
            first.clone(),
            &mut rng,
            per_start,
            Stall::fresh(stall),
            started,
            opts,
            penalised,
        )
    };
    let searched: Vec<Searched<'_>> = if opts.time_limit.is_none() {
        (0..STARTS).into_par_iter().map(start).collect()
    } else {
        let mut searched = Vec::new();
        for j in 0..STARTS {
            let done = start(j);
            let tl = done.time_limited;
            searched.push(done);
            if tl {
                break;
            }
        }
        searched
    };
    let mut time_limited = false;
    let mut best: Option<Searched<'_>> = None;
    for done in searched {
        time_limited |= done.time_limited;
        if best.as_ref().is_none_or(|c| done.best.key_lt(&c.best)) {
            best = Some(done);
        }
    }
    let (mut best, without_best) = match best {
        Some(done) => (done.best, done.without_best),
        None => (first, 0),
    };
    if !time_limited {
        let mut rng = fastrand::Rng::with_seed(opts.seed);
        let rest = opts.max_iterations - per_start * STARTS;
        let stalled = Stall::going_on(stall, &best, without_best);
        let done = ils(best, &mut rng, rest, stalled, started, opts, false);
        best = done.best;
        time_limited = done.time_limited;
    }
    Solution {
        time_limited,
        ..best.into_solution()
    }
}

/// Rounds without a new best after which a search stops: `opts.stall_rounds`, or 30 per
/// customer when that is fewer (small depot-days settle long before large ones).
fn stall_limit(data: &Data<'_>, opts: &SolveOptions) -> u32 {
    let per_customer = u32::try_from(30 * (data.n - 1)).unwrap_or(u32::MAX);
    opts.stall_rounds.min(per_customer).max(1)
}

/// The stall rule of one search: it stops when `without_best` reaches `limit` (see
/// [`stall_limit`]).
#[derive(Clone, Copy, Debug)]
pub(super) struct Stall {
    /// Most rounds in a row without a new best.
    pub(super) limit: u32,
    /// Rounds already run without a new best (by an earlier search this one continues).
    pub(super) without_best: u32,
}

impl Stall {
    /// A search that starts its count at zero.
    pub(super) fn fresh(limit: u32) -> Self {
        Stall {
            limit,
            without_best: 0,
        }
    }

    /// The rule for the rounds a start's `best` goes on for, after `without_best` rounds of
    /// that start found no new best. When it serves every customer it keeps that count: the
    /// limit holds for the search as a whole. When it leaves customers out the count starts
    /// afresh, since those rounds are where the left-out ones get in (on the generated
    /// 20,000-site week, one such depot-day delivered 9 vials fewer with the count carried
    /// over).
    pub(super) fn going_on(limit: u32, best: &State<'_>, without_best: u32) -> Self {
        Stall {
            limit,
            without_best: if best.unserved.is_empty() {
                without_best
            } else {
                0
            },
        }
    }
}

/// What [`ils`] returns.
pub(super) struct Searched<'a> {
    /// The best solution, every route fitting its vehicle.
    pub(super) best: State<'a>,
    /// Whether the time limit stopped the search.
    pub(super) time_limited: bool,
    /// Rounds in a row without a new best at the end, for a search that continues this one.
    pub(super) without_best: u32,
}

/// Time-warp weight a search starts from: a minute late costs as much as a minute of drive.
const START_WEIGHT: f64 = 1.0;
/// The weight stays within these bounds. Below 1 a late minute costs less than a minute of
/// drive, and the current solution drifts far from any that fits: measured 2026-12-03 with a
/// floor of 0.05, a 124-stop depot-day's current solution carried over 300 late minutes for
/// hundreds of rounds, where every move inside a late route needs a full window check. With
/// the floor at 1 that day took 0.56–0.61× the time (seeds 1 and 2, run back to back) and the
/// 113 instances of the routing benchmark × seeds 1–5 gave the same routes in 561 of 565 runs
/// (2 shorter, 2 longer by at most 0.15 %; geometric mean ratio 1.0000).
const WEIGHT_RANGE: (f64, f64) = (1.0, 1e4);
/// Rounds between weight updates.
const WEIGHT_EVERY: u32 = 50;
/// Share of rounds whose local optimum should fit every vehicle: fewer, and the weight rises
/// (×[`RAISE`]); more, and it falls (×[`LOWER`]). PyVRP's penalty manager aims its weights at
/// a feasible share the same way: `PenaltyParams` of pyvrp 0.14.1 (read from the installed
/// package) targets 0.65 and updates by ×1.5 / ×0.9 every 500 solutions; we update more often
/// and more gently, since a depot-day runs a few thousand rounds, not tens of thousands.
const TARGET_FEASIBLE: f64 = 0.65;
/// Weight factor when too few rounds end feasible.
const RAISE: f64 = 1.3;
/// Weight factor when enough rounds end feasible.
const LOWER: f64 = 0.85;
/// A late local optimum is searched again, half the time, under this many times the weight,
/// which usually makes it fit (PyVRP's "repair" step does the same with its own booster).
const REPAIR_BOOST: f64 = 10.0;

/// Iterated local search from `cur` for at most `rounds` rounds, stopping once `stall.limit`
/// rounds in a row (counting the `stall.without_best` an earlier search ran) found no new
/// best.
///
/// When `cur` serves every customer, the rounds search *penalised*: a route may be late (time
/// warp at a customer or back at the depot), at a cost of [`State::tw_weight`] drive minutes
/// per late minute, so the search can pass through late routes between two that fit (tight
/// windows otherwise wall local optima in). The weight adapts to the share of rounds whose
/// local optimum fits ([`TARGET_FEASIBLE`]); a late one is half the time searched again under
/// a boosted weight. Only solutions where every route fits its vehicle become the best, so
/// the result always fits. Capacity stays a hard limit. With customers left out, the search
/// keeps every route feasible (a penalised recreate would squeeze them in late).
pub(super) fn ils<'a>(
    mut cur: State<'a>,
    rng: &mut fastrand::Rng,
    rounds: u32,
    stall: Stall,
    started: Instant,
    opts: &SolveOptions,
    penalised: bool,
) -> Searched<'a> {
    let mut best = cur.clone();
    let penalised = penalised && cur.unserved.is_empty() && cur.feasible();
    let mut weight = if penalised {
        START_WEIGHT
    } else {
        f64::INFINITY
    };
    let mut fits_seen = 0u32;
    // Late acceptance (Burke & Bykov 2017): a candidate no worse than the current solution
    // or than the current solution [`HISTORY`] rounds ago becomes current; the history
    // slot then takes the current solution's drive (plus penalty).
    let mut history = vec![cur.key().1; HISTORY];
    // Rounds in a row without a new best, as counted before round `it`.
    let mut without_best = stall.without_best;
    // The round's candidate, copied from `cur` into the same buffers each round.
    let mut cand = cur.clone();
    for it in 0..rounds {
        if without_best >= stall.limit {
            break;
        }
        if let Some(limit) = opts.time_limit
            && started.elapsed() >= limit
        {
            return Searched {
                best,
                time_limited: true,
                without_best,
            };
        }
        cand.clone_from(&cur);
        cand.tw_weight = weight;
        let changed = cand.ruin_and_recreate(rng);
        // The search starts from the customers the ruin and recreate moved or gave new
        // neighbours (see docs/routing.md for the measured choice).
        let mark: Vec<bool> = (0..cand.data.n)
            .map(|u| {
                cand.at[u].is_some_and(|(r, _)| changed[r]) && cand.placement(u) != cur.placement(u)
            })
            .collect();
        cand.local_search_from(mark);
        let mut fits = !penalised || cand.feasible();
        if penalised {
            fits_seen += u32::from(fits);
            if !fits && rng.bool() {
                cand.tw_weight = weight * REPAIR_BOOST;
                // Whole-route passes, not the customer-level rule: measured 2026-12-03 on
                // Solomon R1/R2/RC1/RC2, seeds 1-5, the customer-level repair gave 0.05 %
                // longer routes (geometric mean) for 0.92x the time.
                let late: Vec<bool> = cand.routes.iter().map(|r| r.late > 0.0).collect();
                cand.local_search(Some(late));
                cand.tw_weight = weight;
                fits = cand.feasible();
            }
            if (it + 1) % WEIGHT_EVERY == 0 {
                let share = f64::from(fits_seen) / f64::from(WEIGHT_EVERY);
                let factor = if share < TARGET_FEASIBLE {
                    RAISE
                } else {
                    LOWER
                };
                weight = (weight * factor).clamp(WEIGHT_RANGE.0, WEIGHT_RANGE.1);
                fits_seen = 0;
                cand.tw_weight = weight;
            }
            cur.tw_weight = weight;
        }
        let (uu, ud, _) = cur.key();
        let (cu, cd, _) = cand.key();
        let slot = it as usize % history.len();
        if fits && cand.key_lt(&best) {
            // A new best gets one full search over every route, all routes fitting.
            cand.tw_weight = f64::INFINITY;
            cand.local_search(None);
            cand.tw_weight = weight;
            without_best = 0;
            best.clone_from(&cand);
            std::mem::swap(&mut cur, &mut cand);
        } else if cu < uu || (cu == uu && (cd <= ud + EPS || cd <= history[slot] + EPS)) {
            std::mem::swap(&mut cur, &mut cand);
        }
        history[slot] = cur.key().1;
        without_best += 1;
    }
    best.tw_weight = f64::INFINITY;
    Searched {
        best,
        time_limited: false,
        without_best,
    }
}
