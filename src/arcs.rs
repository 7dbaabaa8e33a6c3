//! Candidate arcs: (facility, pack day, dispatch day, site, mode) combinations that deliver
//! live wasps before the vial's release-by time.
//!
//! An arc exists only when the site is eligible on the dispatch date, the facility can reach it
//! that day (a route from its depot on a day its fleet runs, out and back inside a shift, inside
//! the site's access window; or a parcel on a parcel day for a request that accepts parcels),
//! and the estimated arrival is no later than `pack time + shelf_life_hours`.
//!
//! [`build_arcs`] enumerates every feasible (facility, pack day, dispatch day, site, mode) and
//! keeps a subset chosen by [`Pruning`]; rules and the pruning argument are in
//! `docs/model.md`. All clock arithmetic is done in whole seconds from the week start,
//! so an arc's stored `eta` and `release_by` compare exactly as the builder compared them.

use chrono::{Datelike, NaiveDate, NaiveDateTime, NaiveTime, Timelike};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::eligibility::{self, Reason};
use crate::scenario::{FacilityIdx, Scenario, Site, SiteDetail, SiteIdx};
use crate::travel::{Place, TravelTimes};

/// How vials reach a site.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Mode {
    /// A vehicle from the facility's depot.
    Route,
    /// Handed to a parcel carrier.
    Parcel,
}

impl Mode {
    /// Name as written in outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            Mode::Route => "route",
            Mode::Parcel => "parcel",
        }
    }
}

/// One way of sending vials from a facility's pack day to a site.
#[derive(Clone, Debug, PartialEq)]
pub struct Arc {
    /// Packing facility (and, for routes, the depot).
    pub facility: FacilityIdx,
    /// Day the vials were packed.
    pub pack_date: NaiveDate,
    /// Day they leave the facility (≥ `pack_date`: vials may be held, aging).
    pub dispatch_date: NaiveDate,
    /// Receiving site.
    pub site: SiteIdx,
    /// Route or parcel.
    pub mode: Mode,
    /// Estimated arrival used for survival (for routes: a direct drive from the depot at the
    /// earliest shift start that day, waiting for the access window if early).
    pub eta: NaiveDateTime,
    /// Latest useful release: pack time + shelf life.
    pub release_by: NaiveDateTime,
    /// Share of packed wasps alive at `eta` (0..=1).
    pub survival: f64,
    /// Expected live wasps per vial at `eta` = wasps_per_vial × survival.
    pub wasps_alive_per_vial: f64,
    /// One-way drive from the depot to the site, minutes (0 for parcels).
    pub drive_minutes: f64,
}

/// The arcs of a week and, for each site, why it has none.
#[derive(Clone, Debug, Default)]
pub struct Arcs {
    /// All arcs, sorted by (site, facility, pack_date, dispatch_date, mode).
    pub arcs: Vec<Arc>,
    /// Per site (indexed by `SiteIdx`): `None` when the site has at least one arc, otherwise the
    /// reason it has none (an ineligibility reason or `OutOfReach`).
    pub no_arc_reason: Vec<Option<Reason>>,
}

/// Which feasible (pack day, dispatch day) pairs of one (site, facility, mode) become arcs.
///
/// "Freshest dispatch" of a pack day p: among the feasible dispatch days for p, the one with
/// the earliest ETA (so the highest survival), ties to the earlier day.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Pruning {
    /// Keep the dispatch days that are the freshest dispatch of at least one pack day, and on
    /// each of them every pack day that reaches the site in time. Every pack day keeps its
    /// freshest arc, and on every kept dispatch day the LP may still substitute older held
    /// vials when the freshest pack day runs short. Dropped: dispatch days that are nobody's
    /// freshest (typically a vehicle day with no packing, e.g. a Saturday run), which only
    /// carry held vials and matter only when capacity on the kept days binds. A heuristic,
    /// not a lossless reduction: see `docs/model.md`.
    FreshestDispatchDays,
    /// Only each pack day's freshest dispatch: about one arc per (facility, pack day, mode).
    /// Smallest pool; loses holding vials for a later vehicle when a day's capacity binds.
    FreshestPerPackDay,
    /// Every feasible pair: the whole problem. The default: working-set pricing keeps the LP
    /// small (arcs that do not pay never enter it), so the pool's size costs only the pricing
    /// passes, and the bounds hold for the user's whole problem.
    #[default]
    None,
}

/// Options of [`build_arcs_with`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ArcOptions {
    /// Which feasible arcs to keep.
    pub pruning: Pruning,
    /// A site gets arcs only from this many facilities, the nearest by drive time. The
    /// default, `usize::MAX`, keeps every facility that can deliver live wasps before
    /// release-by, so the LP and its bounds are those of the whole problem. A smaller value
    /// is a speed option for experiments only: the bounds are then those of the pruned
    /// problem, which can be far below the whole problem's (docs/model.md, "Nearest
    /// facilities").
    pub max_facilities_per_site: usize,
}

impl Default for ArcOptions {
    fn default() -> Self {
        ArcOptions {
            pruning: Pruning::default(),
            max_facilities_per_site: usize::MAX,
        }
    }
}

/// Candidate arcs of the week with the default [`ArcOptions`].
///
/// Complexity: O(S · F · (7 · 7 · V + a log a)) for S sites, F facilities, V vehicles per
/// depot and a arcs per site, plus 2 travel look-ups per (facility, site) pair.
///
/// ```
/// use broodcast::arcs::build_arcs;
/// use broodcast::eligibility::Reason;
/// use broodcast::travel::TravelModel;
/// let scenario = broodcast::scenario::fixture::tiny();
/// let arcs = build_arcs(&scenario, &TravelModel::new(&scenario));
/// assert!(arcs.arcs.iter().all(|a| a.eta <= a.release_by));
/// let b4 = scenario.site_idx("B4").unwrap(); // not flushing, flush required
/// assert_eq!(arcs.no_arc_reason[b4], Some(Reason::NoFlush));
/// ```
pub fn build_arcs(scenario: &Scenario, travel: &(impl TravelTimes + Sync)) -> Arcs {
    build_arcs_with(scenario, travel, &ArcOptions::default())
}

/// Seconds in a day.
const DAY_S: i64 = 86_400;
/// Drive times above this are treated as unreachable (a week), minutes. Keeps the integer
/// clock arithmetic far from overflow whatever a travel matrix holds.
const MAX_DRIVE_MINUTES: f64 = 7.0 * 24.0 * 60.0;

/// One feasible (pack day, dispatch day) before pruning; times in seconds from week start.
#[derive(Clone, Copy, Debug)]
struct Candidate {
    pack: usize,
    dispatch: usize,
    eta_s: i64,
}

/// Candidate arcs of the week; see [`Pruning`] for which feasible arcs are kept.
///
/// Same complexity as [`build_arcs`]. Never panics on scenario values: a non-finite or
/// negative travel time makes that (facility, site) route unreachable.
pub fn build_arcs_with(
    scenario: &Scenario,
    travel: &(impl TravelTimes + Sync),
    options: &ArcOptions,
) -> Arcs {
    let dates = scenario.week_dates();
    let nf = scenario.facilities.len();
    let secs = |t: NaiveTime| i64::from(t.num_seconds_from_midnight());
    let pack_s: [i64; 7] =
        std::array::from_fn(|i| i as i64 * DAY_S + secs(scenario.agent.pack_time));
    let shelf_s = hours_to_seconds(scenario.agent.shelf_life_hours);

    // supply[f][p] > 0: facility f packs on day p.
    let mut packs = vec![[false; 7]; nf];
    for row in &scenario.supply {
        let Some(p) = dates.iter().position(|&d| d == row.date) else {
            continue;
        };
        if row.vials > 0
            && let Some(f) = packs.get_mut(row.facility)
        {
            f[p] = true;
        }
    }
    // shifts[f][d]: (start, end) seconds of each vehicle at depot f running on day d.
    let mut shifts: Vec<[Vec<(i64, i64)>; 7]> = (0..nf).map(|_| Default::default()).collect();
    for v in &scenario.fleet {
        if v.capacity_vials == 0 || !(v.shift_hours.is_finite() && v.shift_hours > 0.0) {
            continue;
        }
        let Some(depot) = shifts.get_mut(v.depot) else {
            continue;
        };
        for (d, &date) in dates.iter().enumerate() {
            if v.runs_on(date) {
                let start = d as i64 * DAY_S + secs(v.shift_start);
                let end = start + hours_to_seconds(v.shift_hours);
                depot[d].push((start, end));
            }
        }
    }
    let parcel_day: [bool; 7] = std::array::from_fn(|d| {
        scenario.parcel.max_vials_per_day > 0 && scenario.parcel.days.contains(&dates[d].weekday())
    });
    let parcel_transit_s = hours_to_seconds(scenario.parcel.transit_hours);
    let parcel_ok =
        scenario.parcel.transit_hours.is_finite() && scenario.parcel.transit_hours >= 0.0;
    let ship_s = secs(scenario.parcel.ship_time);

    let mut forbidden = vec![false; scenario.sites.len()];
    for o in &scenario.overrides {
        if o.action == crate::scenario::OverrideAction::Forbid
            && let Some(f) = forbidden.get_mut(o.site)
        {
            *f = true;
        }
    }

    let origin = scenario.week_start.and_time(NaiveTime::MIN);
    let at = |s: i64| origin + chrono::Duration::seconds(s);

    // Sites are independent: built in parallel, then joined in site order.
    let per_site = |cands: &mut Vec<Candidate>, (s, site): (usize, &Site)| {
        let eligible: [bool; 7] = std::array::from_fn(|d| {
            eligibility::reason_given(scenario, s, dates[d], forbidden[s]).is_none()
        });
        if !eligible.iter().any(|&e| e) {
            let reason = eligibility::reason_given(scenario, s, dates[0], forbidden[s]);
            return (Vec::new(), reason);
        }
        let (window, service_min, route_allowed, parcel_allowed) = match &site.detail {
            SiteDetail::Block(b) => (
                (secs(b.access_start), secs(b.access_end)),
                scenario.dispatch.service_minutes_block,
                true,
                false,
            ),
            SiteDetail::Dooryard(r) => (
                (
                    secs(scenario.dispatch.dooryard_window_start),
                    secs(scenario.dispatch.dooryard_window_end),
                ),
                scenario.dispatch.service_minutes_dooryard,
                r.delivery.allows_route(),
                r.delivery.allows_parcel(),
            ),
        };
        let service_s = to_seconds(service_min).unwrap_or(i64::MAX / 4);
        let mut site_arcs: Vec<Arc> = Vec::new();
        // Only the nearest depots serve a site (by drive time, ties to the lower index).
        let trips: Vec<(f64, f64)> = (0..nf)
            .map(|f| travel.round_trip(Place::Facility(f), Place::Site(s)))
            .collect();
        let mut nearest: Vec<(f64, usize)> = trips
            .iter()
            .enumerate()
            .map(|(f, &(m, _))| (if m.is_finite() { m } else { f64::INFINITY }, f))
            .collect();
        nearest.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let mut serving: Vec<usize> = nearest
            .iter()
            .take(options.max_facilities_per_site.max(1))
            .map(|&(_, f)| f)
            .collect();
        serving.sort_unstable();
        for f in serving {
            let q = f64::from(scenario.facilities[f].wasps_per_vial);
            let to_arc = |mode, drive_minutes, c: &Candidate| {
                make_arc(
                    scenario,
                    f,
                    s,
                    mode,
                    c,
                    &dates,
                    &pack_s,
                    shelf_s,
                    q,
                    drive_minutes,
                    &at,
                )
            };
            if route_allowed && shifts[f].iter().any(|v| !v.is_empty()) {
                let (drive_out, drive_back) = trips[f];
                if let (Some(out_s), Some(back_s)) = (to_seconds(drive_out), to_seconds(drive_back))
                {
                    cands.clear();
                    for d in (0..7).filter(|&d| eligible[d]) {
                        let (open, close) =
                            (d as i64 * DAY_S + window.0, d as i64 * DAY_S + window.1);
                        for p in (0..=d).filter(|&p| packs[f][p]) {
                            // Earliest arrival over this depot's vehicles that leave after
                            // packing, reach the site inside its window and get back in shift.
                            let eta = shifts[f][d]
                                .iter()
                                .filter(|&&(start, _)| start >= pack_s[p])
                                .filter_map(|&(start, end)| {
                                    let eta = (start + out_s).max(open);
                                    (eta <= close && eta + service_s + back_s <= end).then_some(eta)
                                })
                                .min();
                            if let Some(eta_s) = eta
                                && fresh_enough(scenario, eta_s, pack_s[p], shelf_s)
                            {
                                cands.push(Candidate {
                                    pack: p,
                                    dispatch: d,
                                    eta_s,
                                });
                            }
                        }
                    }
                    prune(cands, options.pruning);
                    site_arcs.extend(cands.iter().map(|c| to_arc(Mode::Route, drive_out, c)));
                }
            }
            if parcel_allowed && parcel_ok {
                cands.clear();
                for d in (0..7).filter(|&d| eligible[d] && parcel_day[d]) {
                    let hand_over = d as i64 * DAY_S + ship_s;
                    let eta_s = hand_over + parcel_transit_s;
                    for p in (0..=d).filter(|&p| packs[f][p]) {
                        if hand_over >= pack_s[p]
                            && fresh_enough(scenario, eta_s, pack_s[p], shelf_s)
                        {
                            cands.push(Candidate {
                                pack: p,
                                dispatch: d,
                                eta_s,
                            });
                        }
                    }
                }
                prune(cands, options.pruning);
                site_arcs.extend(cands.iter().map(|c| to_arc(Mode::Parcel, 0.0, c)));
            }
        }
        site_arcs.sort_by(|a, b| {
            (a.facility, a.pack_date, a.dispatch_date, a.mode).cmp(&(
                b.facility,
                b.pack_date,
                b.dispatch_date,
                b.mode,
            ))
        });
        let reason = site_arcs.is_empty().then_some(Reason::OutOfReach);
        (site_arcs, reason)
    };
    let sites: Vec<(Vec<Arc>, Option<Reason>)> = scenario
        .sites
        .par_iter()
        .enumerate()
        .map_init(Vec::new, per_site)
        .collect();
    let mut out = Arcs {
        arcs: Vec::with_capacity(sites.iter().map(|(a, _)| a.len()).sum()),
        no_arc_reason: Vec::with_capacity(scenario.sites.len()),
    };
    for (mut site_arcs, reason) in sites {
        out.arcs.append(&mut site_arcs);
        out.no_arc_reason.push(reason);
    }
    out
}

/// Hours to whole seconds, clamped to 0..=1 year so that clock sums can never overflow
/// whatever the scenario holds (NaN gives 0).
fn hours_to_seconds(hours: f64) -> i64 {
    const YEAR_S: f64 = 365.0 * 86_400.0;
    let s = (hours * 3600.0).round();
    if s.is_nan() {
        0
    } else {
        s.clamp(0.0, YEAR_S) as i64
    }
}

/// Minutes to whole seconds, `None` when not a usable drive or service time.
fn to_seconds(minutes: f64) -> Option<i64> {
    (minutes.is_finite() && (0.0..=MAX_DRIVE_MINUTES).contains(&minutes))
        .then(|| (minutes * 60.0).round() as i64)
}

/// Arrival no later than release-by and some wasps still alive.
fn fresh_enough(scenario: &Scenario, eta_s: i64, pack_s: i64, shelf_s: i64) -> bool {
    eta_s <= pack_s + shelf_s && scenario.agent.survival_at((eta_s - pack_s) as f64 / 3600.0) > 0.0
}

/// Keeps the candidates of one (site, facility, mode) that `pruning` selects.
/// O(c²) for c ≤ 28 candidates (7 dispatch × 7 pack days at most, in practice ≤ 15).
fn prune(cands: &mut Vec<Candidate>, pruning: Pruning) {
    if pruning == Pruning::None {
        return;
    }
    // Freshest candidate per pack day: earliest ETA, ties to the earlier dispatch day.
    let mut best: [Option<Candidate>; 7] = [None; 7];
    for &c in cands.iter() {
        let slot = &mut best[c.pack];
        if slot.is_none_or(|b| (c.eta_s, c.dispatch) < (b.eta_s, b.dispatch)) {
            *slot = Some(c);
        }
    }
    match pruning {
        Pruning::FreshestPerPackDay => {
            cands.retain(|c| best[c.pack].is_some_and(|b| b.dispatch == c.dispatch));
        }
        Pruning::FreshestDispatchDays => {
            let mut keep = [false; 7];
            for b in best.iter().flatten() {
                keep[b.dispatch] = true;
            }
            cands.retain(|c| keep[c.dispatch]);
        }
        Pruning::None => {}
    }
}

#[expect(
    clippy::too_many_arguments,
    reason = "private helper of one loop; the values are its locals"
)]
fn make_arc(
    scenario: &Scenario,
    facility: FacilityIdx,
    site: SiteIdx,
    mode: Mode,
    c: &Candidate,
    dates: &[NaiveDate; 7],
    pack_s: &[i64; 7],
    shelf_s: i64,
    wasps_per_vial: f64,
    drive_minutes: f64,
    at: &impl Fn(i64) -> NaiveDateTime,
) -> Arc {
    let survival = scenario
        .agent
        .survival_at((c.eta_s - pack_s[c.pack]) as f64 / 3600.0);
    Arc {
        facility,
        pack_date: dates[c.pack],
        dispatch_date: dates[c.dispatch],
        site,
        mode,
        eta: at(c.eta_s),
        release_by: at(pack_s[c.pack] + shelf_s),
        survival,
        wasps_alive_per_vial: wasps_per_vial * survival,
        drive_minutes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::fixture::tiny;
    use crate::scenario::{Override, OverrideAction, SiteKind};
    use crate::travel::TravelModel;
    use chrono::Weekday;

    /// These tests pin the arc rules with every pack day of a kept dispatch day, so they build
    /// with `FreshestDispatchDays` rather than the smaller default.
    fn build_arcs(scenario: &Scenario, travel: &(impl TravelTimes + Sync)) -> Arcs {
        build_arcs_with(
            scenario,
            travel,
            &ArcOptions {
                pruning: Pruning::FreshestDispatchDays,
                ..ArcOptions::default()
            },
        )
    }

    /// Every facility→site drive takes `out` minutes, every site→facility drive `back`.
    struct Const {
        out: f64,
        back: f64,
    }

    impl TravelTimes for Const {
        fn minutes(&self, from: Place, to: Place) -> f64 {
            match (from, to) {
                _ if from == to => 0.0,
                (Place::Facility(_), _) => self.out,
                _ => self.back,
            }
        }
    }

    fn idx(s: &Scenario, id: &str) -> SiteIdx {
        s.site_idx(id).expect("fixture site")
    }

    fn day(s: &Scenario, i: u64) -> NaiveDate {
        s.week_start + chrono::Days::new(i)
    }

    fn dt(date: NaiveDate, h: u32, m: u32) -> NaiveDateTime {
        date.and_hms_opt(h, m, 0).expect("valid time")
    }

    fn of(arcs: &Arcs, site: SiteIdx) -> Vec<&Arc> {
        arcs.arcs.iter().filter(|a| a.site == site).collect()
    }

    fn find(arcs: &Arcs, f: usize, site: SiteIdx, p: NaiveDate, d: NaiveDate) -> Option<&Arc> {
        arcs.arcs
            .iter()
            .find(|a| a.facility == f && a.site == site && a.pack_date == p && a.dispatch_date == d)
    }

    /// Invariants every arc set must meet, whatever the scenario.
    fn check_invariants(s: &Scenario, arcs: &Arcs) {
        assert_eq!(arcs.no_arc_reason.len(), s.sites.len());
        for w in arcs.arcs.windows(2) {
            let k = |a: &Arc| (a.site, a.facility, a.pack_date, a.dispatch_date, a.mode);
            assert!(
                k(&w[0]) < k(&w[1]),
                "sorted and unique: {:?} {:?}",
                k(&w[0]),
                k(&w[1])
            );
        }
        for a in &arcs.arcs {
            assert!(a.pack_date <= a.dispatch_date);
            assert!(a.eta <= a.release_by, "{a:?}");
            assert!(a.survival > 0.0 && a.survival <= 1.0);
            let q = f64::from(s.facilities[a.facility].wasps_per_vial);
            assert!((a.wasps_alive_per_vial - q * a.survival).abs() < 1e-9);
            assert!(s.supply_vials(a.facility, a.pack_date) > 0);
            assert_eq!(
                crate::eligibility::site_reason(s, a.site, a.dispatch_date),
                None
            );
            assert_eq!(arcs.no_arc_reason[a.site], None);
            let hours =
                (a.eta - a.pack_date.and_time(s.agent.pack_time)).num_seconds() as f64 / 3600.0;
            assert!((a.survival - s.agent.survival_at(hours)).abs() < 1e-12);
        }
        for (site, r) in arcs.no_arc_reason.iter().enumerate() {
            if r.is_some() {
                assert!(of(arcs, site).is_empty());
            }
        }
    }

    #[test]
    fn fixture_counts_reasons_and_invariants() {
        let s = tiny();
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        check_invariants(&s, &arcs);
        let count = |id: &str| of(&arcs, idx(&s, id)).len();
        // Hand count (see docs/model.md): F1 runs Mon–Fri, reaches in minutes, so
        // pack days d−2..d reach each dispatch day d: 1+2+3+3+3 = 12. F2 runs Tue/Thu:
        // Tue {Mon,Tue} + Thu {Tue,Wed,Thu} = 5.
        for id in ["B1", "B2", "B3", "B6", "R1"] {
            assert_eq!(count(id), 17, "{id}");
        }
        // R2 (either) adds parcels: Mon {Mon}, Wed {Tue, Wed} per facility = 6.
        assert_eq!(count("R2"), 23);
        assert_eq!(count("R3"), 6);
        let reason = |id: &str| arcs.no_arc_reason[idx(&s, id)];
        assert_eq!(reason("B4"), Some(Reason::NoFlush));
        assert_eq!(reason("B5"), Some(Reason::InsecticideWindow));
        assert_eq!(reason("R4"), Some(Reason::NoHostPlant));
        assert_eq!(reason("B1"), None);
        assert_eq!(arcs.arcs.len(), 4 * 17 + 17 + 23 + 6);
        // Strict pruning: one arc per (facility, pack day, mode) that reaches the site.
        let strict = build_arcs_with(
            &s,
            &TravelModel::new(&s),
            &ArcOptions {
                pruning: Pruning::FreshestPerPackDay,
                ..ArcOptions::default()
            },
        );
        check_invariants(&s, &strict);
        assert_eq!(strict.arcs.len(), 4 * 9 + 9 + 15 + 6);
    }

    #[test]
    fn shelf_life_cut_just_inside_and_just_past_release_by() {
        // Pack Mon 06:00 + 26 h = release-by Tue 08:00; V1 leaves 07:30.
        let mut s = tiny();
        s.agent.shelf_life_hours = 26.0;
        let b1 = idx(&s, "B1");
        let (mon, tue) = (day(&s, 0), day(&s, 1));
        let inside = build_arcs(
            &s,
            &Const {
                out: 30.0,
                back: 30.0,
            },
        );
        let a = find(&inside, 0, b1, mon, tue).expect("arrives exactly at release-by");
        assert_eq!(a.eta, dt(tue, 8, 0));
        assert_eq!(a.release_by, dt(tue, 8, 0));
        assert!((a.survival - s.agent.survival_at(26.0)).abs() < 1e-12);
        let past = build_arcs(
            &s,
            &Const {
                out: 31.0,
                back: 30.0,
            },
        );
        assert!(find(&past, 0, b1, mon, tue).is_none());
        assert!(find(&past, 0, b1, tue, tue).is_some());
        check_invariants(&s, &past);
    }

    #[test]
    fn vehicle_must_get_back_inside_its_shift() {
        // V1 07:30–15:30, 15 min service: 232.5 + 15 + 232.5 from 07:30 ends at 15:30 exactly.
        let s = tiny();
        let b1 = idx(&s, "B1");
        let mon = day(&s, 0);
        let ok = build_arcs(
            &s,
            &Const {
                out: 232.5,
                back: 232.5,
            },
        );
        let a = find(&ok, 0, b1, mon, mon).expect("back exactly at shift end");
        assert_eq!(a.eta, mon.and_hms_opt(11, 22, 30).expect("time"));
        assert_eq!(a.drive_minutes, 232.5);
        let late = build_arcs(
            &s,
            &Const {
                out: 232.5,
                back: 233.5,
            },
        );
        // V2's 6 h shift is shorter still: the block is out of reach.
        assert!(of(&late, b1).is_empty());
        assert_eq!(late.no_arc_reason[b1], Some(Reason::OutOfReach));
    }

    #[test]
    fn access_window_waits_if_early_and_drops_if_late() {
        let mut s = tiny();
        let b1 = idx(&s, "B1");
        let set = |s: &mut Scenario, a: (u32, u32), b: (u32, u32)| {
            if let SiteDetail::Block(bl) = &mut s.sites[b1].detail {
                bl.access_start = NaiveTime::from_hms_opt(a.0, a.1, 0).expect("time");
                bl.access_end = NaiveTime::from_hms_opt(b.0, b.1, 0).expect("time");
            }
        };
        set(&mut s, (13, 0), (14, 0));
        let arcs = build_arcs(
            &s,
            &Const {
                out: 30.0,
                back: 30.0,
            },
        );
        let a = of(&arcs, b1);
        assert!(!a.is_empty());
        assert!(
            a.iter()
                .all(|a| a.eta == a.dispatch_date.and_hms_opt(13, 0, 0).expect("t"))
        );
        // F1 arrives 08:00, F2 08:30: both after a 07:45 close.
        set(&mut s, (6, 0), (7, 45));
        let arcs = build_arcs(
            &s,
            &Const {
                out: 30.0,
                back: 30.0,
            },
        );
        assert!(of(&arcs, b1).is_empty());
        assert_eq!(arcs.no_arc_reason[b1], Some(Reason::OutOfReach));
        set(&mut s, (6, 0), (8, 0));
        let arcs = build_arcs(
            &s,
            &Const {
                out: 30.0,
                back: 30.0,
            },
        );
        assert!(of(&arcs, b1).iter().all(|a| a.facility == 0));
        assert!(!of(&arcs, b1).is_empty());
    }

    #[test]
    fn parcels_only_on_parcel_days_at_ship_time_plus_transit() {
        let s = tiny();
        let r3 = idx(&s, "R3");
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        let a = of(&arcs, r3);
        assert!(!a.is_empty());
        for a in a {
            assert_eq!(a.mode, Mode::Parcel);
            assert!(matches!(
                a.dispatch_date.weekday(),
                Weekday::Mon | Weekday::Wed
            ));
            assert_eq!(
                a.eta,
                dt(a.dispatch_date, 15, 0) + chrono::Duration::hours(24)
            );
            assert_eq!(a.drive_minutes, 0.0);
        }
        // Pack Mon, ship Wed: 81 h > 72 h shelf life.
        assert!(find(&arcs, 0, r3, day(&s, 0), day(&s, 2)).is_none());
    }

    #[test]
    fn delivery_preference_selects_modes() {
        let s = tiny();
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        let modes = |id: &str| {
            let mut m: Vec<Mode> = of(&arcs, idx(&s, id)).iter().map(|a| a.mode).collect();
            m.sort();
            m.dedup();
            m
        };
        assert_eq!(modes("R1"), vec![Mode::Route]);
        assert_eq!(modes("R2"), vec![Mode::Route, Mode::Parcel]);
        assert_eq!(modes("R3"), vec![Mode::Parcel]);
        assert_eq!(modes("B1"), vec![Mode::Route]);
    }

    #[test]
    fn held_vials_arrive_with_fewer_live_wasps() {
        let s = tiny();
        let b1 = idx(&s, "B1");
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        let (mon, tue) = (day(&s, 0), day(&s, 1));
        let held = find(&arcs, 0, b1, mon, tue).expect("held arc");
        let fresh = find(&arcs, 0, b1, tue, tue).expect("fresh arc");
        assert_eq!(held.eta, fresh.eta);
        assert!(held.survival < fresh.survival);
        assert!(held.wasps_alive_per_vial < fresh.wasps_alive_per_vial);
        // One day of holding at a 96 h half-life: ratio 2^(−24/96).
        assert!((held.survival / fresh.survival - 0.5_f64.powf(0.25)).abs() < 1e-12);
    }

    #[test]
    fn no_same_day_route_before_packing() {
        let mut s = tiny();
        s.fleet[0].shift_start = NaiveTime::from_hms_opt(5, 0, 0).expect("time");
        let b1 = idx(&s, "B1");
        let arcs = build_arcs(
            &s,
            &Const {
                out: 30.0,
                back: 30.0,
            },
        );
        assert!(
            of(&arcs, b1)
                .iter()
                .filter(|a| a.facility == 0)
                .all(|a| a.pack_date < a.dispatch_date)
        );
        assert!(find(&arcs, 0, b1, day(&s, 0), day(&s, 1)).is_some());
    }

    #[test]
    fn forbidden_and_exclusion_days_have_no_arcs() {
        let mut s = tiny();
        let b1 = idx(&s, "B1");
        s.overrides.push(Override {
            site: b1,
            action: OverrideAction::Forbid,
        });
        // B5 sprayed the Friday before; 4-day window: eligible from Tuesday.
        s.policy.insecticide_exclusion_days = 4;
        let b5 = idx(&s, "B5");
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        check_invariants(&s, &arcs);
        assert_eq!(arcs.no_arc_reason[b1], Some(Reason::Forbidden));
        let a = of(&arcs, b5);
        assert!(!a.is_empty() && a.iter().all(|a| a.dispatch_date > s.week_start));
    }

    #[test]
    fn pruning_drops_only_dispatch_days_nobody_packs_for() {
        // V1 also runs Saturday, when nothing is packed: only held Thu/Fri vials could go.
        let mut s = tiny();
        s.fleet[0].days.push(Weekday::Sat);
        let b1 = idx(&s, "B1");
        let tm = TravelModel::new(&s);
        let sat = day(&s, 5);
        let full = build_arcs_with(
            &s,
            &tm,
            &ArcOptions {
                pruning: Pruning::None,
                ..ArcOptions::default()
            },
        );
        let default = build_arcs(&s, &tm);
        let strict = build_arcs_with(
            &s,
            &tm,
            &ArcOptions {
                pruning: Pruning::FreshestPerPackDay,
                ..ArcOptions::default()
            },
        );
        for a in [&full, &default, &strict] {
            check_invariants(&s, a);
        }
        assert_eq!(
            of(&full, b1)
                .iter()
                .filter(|a| a.dispatch_date == sat)
                .count(),
            2
        );
        assert_eq!(
            of(&default, b1)
                .iter()
                .filter(|a| a.dispatch_date == sat)
                .count(),
            0
        );
        assert_eq!(of(&full, b1).len(), 19);
        assert_eq!(of(&default, b1).len(), 17);
        // One per pack day and facility: F1 Mon–Fri, F2 Mon..Thu → Tue/Thu.
        assert_eq!(of(&strict, b1).len(), 9);
        // The default is a subset of the full set, and keeps each pack day's freshest arc.
        for a in &default.arcs {
            assert!(full.arcs.contains(a));
        }
        for a in &strict.arcs {
            assert!(default.arcs.contains(a));
        }
    }

    #[test]
    fn unusable_travel_times_make_routes_unreachable_without_panic() {
        let s = tiny();
        for bad in [f64::NAN, f64::INFINITY, -1.0, 1e300] {
            let arcs = build_arcs(
                &s,
                &Const {
                    out: bad,
                    back: 10.0,
                },
            );
            check_invariants(&s, &arcs);
            assert!(arcs.arcs.iter().all(|a| a.mode == Mode::Parcel));
        }
        // Absurd durations clamp instead of overflowing the clock arithmetic.
        let mut s = tiny();
        s.agent.shelf_life_hours = 1e300;
        s.parcel.transit_hours = 1e300;
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        check_invariants(&s, &arcs);
        assert!(arcs.arcs.iter().all(|a| a.mode == Mode::Route));
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]

        /// Whatever the durations, every pruning yields valid arcs, the default is a subset of
        /// the full set, the strict one of the default, and every pack day that reaches a
        /// (site, facility, mode) at all keeps its freshest arc in both.
        #[test]
        fn pruned_sets_are_nested_and_keep_each_pack_days_freshest(
            shelf in 1.0..100.0f64,
            out in 0.0..400.0f64,
            back in 0.0..400.0f64,
            start_h in 4u32..11,
            shift_h in 1.0..16.0f64,
            open_h in 5u32..12,
            len_h in 1u32..10,
            transit in 0.0..60.0f64,
            extra_day in 0usize..7,
        ) {
            let mut s = tiny();
            s.agent.shelf_life_hours = shelf;
            s.parcel.transit_hours = transit;
            s.fleet[0].shift_start = NaiveTime::from_hms_opt(start_h, 0, 0).expect("time");
            s.fleet[0].shift_hours = shift_h;
            let extra = s.week_dates()[extra_day].weekday();
            s.fleet[1].days.push(extra);
            for site in &mut s.sites {
                if let SiteDetail::Block(b) = &mut site.detail {
                    b.access_start = NaiveTime::from_hms_opt(open_h, 0, 0).expect("time");
                    b.access_end = NaiveTime::from_hms_opt(open_h + len_h, 0, 0).expect("time");
                }
            }
            let tr = Const { out, back };
            let with = |pruning| build_arcs_with(&s, &tr, &ArcOptions { pruning, ..ArcOptions::default() });
            let (full, default, strict) =
                (with(Pruning::None), with(Pruning::FreshestDispatchDays), with(Pruning::FreshestPerPackDay));
            for a in [&full, &default, &strict] {
                check_invariants(&s, a);
            }
            for a in &default.arcs {
                proptest::prop_assert!(full.arcs.contains(a));
            }
            for a in &strict.arcs {
                proptest::prop_assert!(default.arcs.contains(a));
            }
            let key = |a: &Arc| (a.site, a.facility, a.mode, a.pack_date);
            for a in &full.arcs {
                let best = full
                    .arcs
                    .iter()
                    .filter(|b| key(b) == key(a))
                    .min_by_key(|b| (b.eta, b.dispatch_date))
                    .expect("a itself");
                proptest::prop_assert!(strict.arcs.contains(best));
                proptest::prop_assert!(default.arcs.contains(best));
            }
            proptest::prop_assert_eq!(&full.no_arc_reason, &default.no_arc_reason);
            proptest::prop_assert_eq!(&full.no_arc_reason, &strict.no_arc_reason);
        }
    }

    /// `n` sites cloned from the fixture's eligible ones, spread on a grid of about 0.6 km
    /// around the two facilities; a third are requests. Invented positions.
    pub(crate) fn synthetic(n: usize) -> Scenario {
        let mut s = tiny();
        let templates: Vec<_> = ["B1", "B2", "B3", "B6", "R1", "R2", "R3"]
            .iter()
            .map(|id| s.sites[idx(&s, id)].clone())
            .collect();
        let side = (n as f64).sqrt().ceil() as usize;
        s.sites = (0..n)
            .map(|i| {
                let mut site = templates[i % templates.len()].clone();
                site.id = crate::scenario::SiteId(format!("S{i}"));
                site.location = LonLat {
                    lon: 80.30 + 0.006 * (i % side) as f64,
                    lat: 26.55 + 0.006 * (i / side) as f64,
                };
                site
            })
            .collect();
        s
    }

    use crate::scenario::LonLat;

    #[test]
    fn synthetic_35k_sites_stay_small_per_site() {
        let s = synthetic(35_000);
        let arcs = build_arcs(&s, &TravelModel::new(&s));
        check_invariants(&s, &arcs);
        let mut per_site = vec![0usize; s.sites.len()];
        for a in &arcs.arcs {
            per_site[a.site] += 1;
        }
        assert!(
            per_site.iter().all(|&c| c <= 23),
            "max {:?}",
            per_site.iter().max()
        );
        let blocks = s
            .sites
            .iter()
            .filter(|x| x.kind() == SiteKind::Block)
            .count();
        assert!(blocks > 0 && arcs.arcs.len() > 5 * s.sites.len());
    }

    /// `cargo test --release --lib arcs::tests::timing -- --ignored --nocapture`
    #[test]
    #[ignore = "timing report, run by hand in release"]
    fn timing_35k() {
        let s = synthetic(35_000);
        let tm = TravelModel::new(&s);
        let t = std::time::Instant::now();
        let mut total = 0.0;
        for site in 0..s.sites.len() {
            for f in 0..s.facilities.len() {
                total += tm.minutes(Place::Facility(f), Place::Site(site));
                total += tm.minutes(Place::Site(site), Place::Facility(f));
            }
        }
        eprintln!(
            "travel look-ups alone (4 per site): {:.3} s (sum {total:.0} min)",
            t.elapsed().as_secs_f64()
        );
        for pruning in [
            Pruning::FreshestDispatchDays,
            Pruning::FreshestPerPackDay,
            Pruning::None,
        ] {
            let t = std::time::Instant::now();
            let arcs = build_arcs_with(
                &s,
                &tm,
                &ArcOptions {
                    pruning,
                    ..ArcOptions::default()
                },
            );
            let el = t.elapsed();
            let reached = arcs.no_arc_reason.iter().filter(|r| r.is_none()).count();
            eprintln!(
                "{pruning:?}: {} sites, {} with arcs, {} arcs ({:.2}/site), {:.3} s",
                s.sites.len(),
                reached,
                arcs.arcs.len(),
                arcs.arcs.len() as f64 / s.sites.len() as f64,
                el.as_secs_f64()
            );
        }
    }
}
