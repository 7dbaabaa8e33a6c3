//! Today's practice: the week planned the way an office plans it by hand, valued with the
//! allocation's own objective, so that the optimized plan can be shown beside it.
//!
//! The hand rule (`docs/baseline.md`, each step marked there as common practice):
//!
//! 1. sites forced by `overrides.csv` first, in site order; forbidden sites never;
//! 2. dooryard requests first come, first served (oldest `received` first, then id) until
//!    the requests hold the dooryard share of the week's supply;
//! 3. blocks by scouting count (adult psyllids of the `tap_adults` observations within
//!    `policy.pressure_radius_km`, [`pressure::tap_adults_in_range`]), highest first, then
//!    id; a block with no adult counted gets nothing;
//! 4. the remaining requests, first come, first served, with what is left;
//! 5. if the requests still hold less than the share, the last block releases are taken
//!    back until they hold it.
//!
//! Each site gets one release: a request the standard `policy.dooryard_vials_per_request`,
//! a block the vials that carry the target release as packed (⌈target ÷ wasps per vial⌉,
//! fewer if that many would exceed the maximum release alive), or what is left when that
//! still makes the minimum release alive. It comes from the nearest facility by distance that
//! still has the vials, on the earliest day, oldest vials first (stock rotation), by the
//! facility's own vehicles before parcel. The release uses only the week's candidate arcs
//! ([`crate::arcs`]: eligibility, shelf life, survival, shifts and access windows), the supply
//! per facility and pack day, the vehicle capacity per depot and day and the parcel cap per
//! day — the limits a hand planner knows too.
//!
//! The plan is valued by [`allocate::plan_objective`], the function the optimized plan is
//! valued by; nothing here values a plan a second way.

use std::collections::BTreeMap;

use chrono::NaiveDate;

use crate::allocate::{self, AllocError, AllocOptions, Shipment};
use crate::arcs::{Arc, Arcs, Mode};
use crate::geodesy;
use crate::pressure;
use crate::scenario::{FacilityIdx, OverrideAction, Scenario, SiteDetail, SiteIdx, SiteKind};

/// The week as planned by hand, and what it is worth.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Baseline {
    /// Whole-vial shipments, one per served site, in [`Shipment::order_key`] order.
    pub shipments: Vec<Shipment>,
    /// Objective of the shipments by [`allocate::plan_objective`] (priority-weighted live
    /// wasps, the optimized plan's units).
    pub objective: f64,
    /// Vials packed over the week, all facilities.
    pub supply_vials: u64,
    /// Vials shipped.
    pub shipped_vials: u64,
    /// Expected live wasps released, all sites.
    pub wasps_expected_alive: f64,
    /// Expected live wasps released in the top priority quarter ([`top_quarter`]).
    pub top_quarter_wasps: f64,
    /// Blocks that get vials.
    pub blocks_served: usize,
    /// Dooryard requests that get vials.
    pub requests_served: usize,
}

impl Baseline {
    /// Vials packed and never shipped: they die at the facilities, vials.
    pub fn unshipped_vials(&self) -> u64 {
        self.supply_vials.saturating_sub(self.shipped_vials)
    }
}

/// Which sites are in the top priority quarter, indexed by `SiteIdx`: the first quarter
/// (rounded down) of the `eligible` sites ranked by priority, highest first, then by index —
/// the "top quarter" band of `report.html`. O(S log S).
pub fn top_quarter(eligible: &[bool], priority: &[f64]) -> Vec<bool> {
    let mut ranked: Vec<SiteIdx> = (0..eligible.len()).filter(|&s| eligible[s]).collect();
    let p = |s: SiteIdx| priority.get(s).copied().unwrap_or(0.0);
    ranked.sort_by(|&a, &b| p(b).total_cmp(&p(a)).then(a.cmp(&b)));
    let mut top = vec![false; eligible.len()];
    for &s in &ranked[..ranked.len() / 4] {
        top[s] = true;
    }
    top
}

/// Whether each site could get a release this week (`SiteOutcome::eligible` of the
/// allocation): it has an arc and is not forbidden. Indexed by `SiteIdx`.
pub fn eligible_sites(scenario: &Scenario, arcs: &Arcs) -> Vec<bool> {
    let mut ok: Vec<bool> = arcs.no_arc_reason.iter().map(Option::is_none).collect();
    ok.resize(scenario.sites.len(), false);
    for o in &scenario.overrides {
        if o.action == OverrideAction::Forbid
            && let Some(e) = ok.get_mut(o.site)
        {
            *e = false;
        }
    }
    ok
}

/// What is left of the week's limits while the hand plan fills them, vials.
struct Left {
    supply: BTreeMap<(FacilityIdx, NaiveDate), u64>,
    vehicles: BTreeMap<(FacilityIdx, NaiveDate), u64>,
    parcel: BTreeMap<NaiveDate, u64>,
}

impl Left {
    fn new(scenario: &Scenario) -> Self {
        let mut supply = BTreeMap::new();
        for s in &scenario.supply {
            *supply.entry((s.facility, s.date)).or_insert(0) += u64::from(s.vials);
        }
        let mut vehicles = BTreeMap::new();
        for v in &scenario.fleet {
            for d in scenario.week_dates() {
                if v.runs_on(d) {
                    *vehicles.entry((v.depot, d)).or_insert(0) += u64::from(v.capacity_vials);
                }
            }
        }
        let parcel = scenario
            .week_dates()
            .iter()
            .map(|&d| (d, u64::from(scenario.parcel.max_vials_per_day)))
            .collect();
        Left {
            supply,
            vehicles,
            parcel,
        }
    }

    /// Vials an arc can still carry: the smaller of its pack day's supply and its dispatch
    /// day's vehicle capacity (or parcel cap).
    fn room(&self, a: &Arc) -> u64 {
        let supply = self
            .supply
            .get(&(a.facility, a.pack_date))
            .copied()
            .unwrap_or(0);
        let carry = match a.mode {
            Mode::Route => self.vehicles.get(&(a.facility, a.dispatch_date)),
            Mode::Parcel => self.parcel.get(&a.dispatch_date),
        };
        supply.min(carry.copied().unwrap_or(0))
    }

    /// Takes `vials` from the arc's limits (`take`), or gives them back.
    fn change(&mut self, a: &Arc, vials: u32, take: bool) {
        let v = u64::from(vials);
        let apply = |x: &mut u64| *x = if take { x.saturating_sub(v) } else { *x + v };
        if let Some(x) = self.supply.get_mut(&(a.facility, a.pack_date)) {
            apply(x);
        }
        let carry = match a.mode {
            Mode::Route => self.vehicles.get_mut(&(a.facility, a.dispatch_date)),
            Mode::Parcel => self.parcel.get_mut(&a.dispatch_date),
        };
        if let Some(x) = carry {
            apply(x);
        }
    }
}

/// The hand planner's state: each site's options in the order tried, what is left, and the
/// release chosen per site.
struct Hand<'a> {
    scenario: &'a Scenario,
    options: Vec<Vec<&'a Arc>>,
    forbidden: Vec<bool>,
    left: Left,
    chosen: Vec<Option<Shipment>>,
}

impl Hand<'_> {
    /// One release for site `s`, on the first option with room for it; whether it got one.
    /// `want` is the vials a forced block asks for (None: the standard release); requests
    /// always take the standard count.
    fn serve(&mut self, s: SiteIdx, want: Option<u32>) -> bool {
        if self.forbidden[s] || self.chosen[s].is_some() {
            return false;
        }
        let agent = &self.scenario.agent;
        let per_request = self.scenario.policy.dooryard_vials_per_request;
        let request = self.scenario.sites[s].kind() == SiteKind::Dooryard;
        for &a in &self.options[s] {
            let room = self.left.room(a);
            let vials = if request {
                if room < u64::from(per_request)
                    || a.wasps_alive_per_vial * f64::from(per_request) > agent.max_release_wasps
                {
                    continue;
                }
                per_request
            } else {
                let q = f64::from(self.scenario.facilities[a.facility].wasps_per_vial).max(1.0);
                let standard = want.unwrap_or((agent.target_release_wasps / q).ceil() as u32);
                let most = (agent.max_release_wasps / a.wasps_alive_per_vial).floor();
                let v = u64::from(standard)
                    .min(room)
                    .min(most.clamp(0.0, f64::from(u32::MAX)) as u64);
                let v = u32::try_from(v).unwrap_or(0);
                if v == 0 || a.wasps_alive_per_vial * f64::from(v) < agent.min_release_wasps {
                    continue;
                }
                v
            };
            self.left.change(a, vials, true);
            self.chosen[s] = Some(Shipment {
                arc: a.clone(),
                vials,
            });
            return true;
        }
        false
    }
}

/// Plans the week by the hand rule of the module doc and values it by
/// [`allocate::plan_objective`] with the same `priority`, `arcs` and `opts` as the optimized
/// plan. Arcs in `opts.excluded` (e.g. the season ledger's) are not used. The hand rule never
/// reads `priority`; only the valuation does.
///
/// Cost: O(A log A) for A arcs plus the scouting count's R*-tree query
/// ([`pressure::tap_adults_in_range`]).
///
/// # Errors
/// As [`allocate::plan_objective`] for inputs that do not belong together.
pub fn hand_plan(
    scenario: &Scenario,
    priority: &[f64],
    arcs: &Arcs,
    opts: &AllocOptions,
) -> Result<Baseline, AllocError> {
    let n = scenario.sites.len();
    // Each site's options in the order the office tries them: nearest facility first, then
    // earliest dispatch day, oldest vials, own vehicles before parcel.
    let mut options: Vec<Vec<&Arc>> = vec![Vec::new(); n];
    for a in &arcs.arcs {
        let usable = a.site < n
            && a.facility < scenario.facilities.len()
            && a.wasps_alive_per_vial > 0.0
            && a.eta <= a.release_by
            && a.pack_date <= a.dispatch_date
            && !opts
                .excluded
                .contains(&(a.facility, a.dispatch_date, a.site, a.mode));
        if usable {
            options[a.site].push(a);
        }
    }
    for (s, list) in options.iter_mut().enumerate().filter(|(_, l)| l.len() > 1) {
        // One geodesic per facility, not two per comparison: a sort of a site's ~60 arcs would
        // otherwise spend ~700 geodesic inverses (most of a 35,000-site plan's time).
        let at = scenario.sites[s].location;
        let km: Vec<f64> = scenario
            .facilities
            .iter()
            .map(|f| geodesy::distance_m(f.location, at))
            .collect();
        list.sort_by(|a, b| {
            km[a.facility]
                .total_cmp(&km[b.facility])
                .then(a.facility.cmp(&b.facility))
                .then(a.dispatch_date.cmp(&b.dispatch_date))
                .then(a.pack_date.cmp(&b.pack_date))
                .then((a.mode == Mode::Parcel).cmp(&(b.mode == Mode::Parcel)))
        });
    }
    let mut forbidden = vec![false; n];
    let mut forced: BTreeMap<SiteIdx, Option<u32>> = BTreeMap::new();
    for o in &scenario.overrides {
        match o.action {
            OverrideAction::Forbid if o.site < n => forbidden[o.site] = true,
            OverrideAction::Force { vials } if o.site < n => {
                forced.insert(o.site, vials);
            }
            _ => {}
        }
    }
    let mut hand = Hand {
        scenario,
        options,
        forbidden,
        left: Left::new(scenario),
        chosen: vec![None; n],
    };
    // 1. Forced sites.
    for (&s, &vials) in &forced {
        hand.serve(s, vials);
    }
    // 2. Requests, first come, first served, up to the dooryard share of the week's supply.
    let mut requests: Vec<(NaiveDate, &str, SiteIdx)> = scenario
        .sites
        .iter()
        .enumerate()
        .filter_map(|(s, site)| match &site.detail {
            SiteDetail::Dooryard(r) => Some((r.received, site.id.as_str(), s)),
            SiteDetail::Block(_) => None,
        })
        .collect();
    requests.sort();
    let supply = scenario.total_supply_vials();
    let share = allocate::share_floor(scenario, priority, arcs, opts)?.unwrap_or(0.0);
    let door_vials = |chosen: &[Option<Shipment>]| -> u64 {
        chosen
            .iter()
            .flatten()
            .filter(|sh| scenario.sites[sh.arc.site].kind() == SiteKind::Dooryard)
            .map(|sh| u64::from(sh.vials))
            .sum()
    };
    // Less a hair, so that 0.2 × 15 = 3.0000000000000004 asks for 3 vials, not 4.
    let quota = (share * supply as f64 - 1e-9).ceil().max(0.0) as u64;
    // Kept up to date as releases are chosen: recounting every site per request would make
    // this loop quadratic in the week's sites.
    let mut door = door_vials(&hand.chosen);
    let mut next_request = 0;
    while next_request < requests.len() && door < quota {
        let s = requests[next_request].2;
        if hand.serve(s, None) {
            door += hand.chosen[s].as_ref().map_or(0, |sh| u64::from(sh.vials));
        }
        next_request += 1;
    }
    // 3. Blocks by scouting count, highest first; none without an adult counted.
    let count = pressure::tap_adults_in_range(scenario);
    let mut blocks: Vec<(f64, &str, SiteIdx)> = scenario
        .sites
        .iter()
        .enumerate()
        .filter(|(s, site)| site.kind() == SiteKind::Block && count[*s] > 0.0)
        .map(|(s, site)| (count[s], site.id.as_str(), s))
        .collect();
    blocks.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(b.1)));
    let mut block_order = Vec::new();
    for &(_, _, s) in &blocks {
        if hand.serve(s, None) {
            block_order.push(s);
        }
    }
    // 4. The remaining requests with what is left.
    for &(_, _, s) in &requests[next_request..] {
        hand.serve(s, None);
    }
    // 5. Keep the dooryard share: take back the last block releases until it holds.
    // Only block releases are taken back, so the dooryard vials stay as they are.
    let door = door_vials(&hand.chosen);
    let mut shipped: u64 = hand
        .chosen
        .iter()
        .flatten()
        .map(|sh| u64::from(sh.vials))
        .sum();
    while (door as f64) < share * shipped as f64 - 1e-9 {
        let Some(s) = block_order.pop() else { break };
        if let Some(sh) = hand.chosen[s].take() {
            hand.left.change(&sh.arc, sh.vials, false);
            shipped -= u64::from(sh.vials);
        }
    }
    let mut shipments: Vec<Shipment> = hand.chosen.into_iter().flatten().collect();
    shipments.sort_by_key(Shipment::order_key);
    let objective = allocate::plan_objective(scenario, priority, arcs, opts, &shipments)?;
    let top = top_quarter(&eligible_sites(scenario, arcs), priority);
    let served = |kind: SiteKind| {
        shipments
            .iter()
            .filter(|sh| scenario.sites[sh.arc.site].kind() == kind)
            .count()
    };
    Ok(Baseline {
        objective,
        supply_vials: supply,
        shipped_vials: shipments.iter().map(|sh| u64::from(sh.vials)).sum(),
        wasps_expected_alive: shipments.iter().map(Shipment::wasps_expected_alive).sum(),
        top_quarter_wasps: shipments
            .iter()
            .filter(|sh| top[sh.arc.site])
            .map(Shipment::wasps_expected_alive)
            .sum(),
        blocks_served: served(SiteKind::Block),
        requests_served: served(SiteKind::Dooryard),
        shipments,
    })
}

#[cfg(test)]
mod tests {
    use chrono::Weekday;

    use super::*;
    use crate::eligibility::Reason;
    use crate::scenario::fixture::tiny;
    use crate::scenario::{ScoutKind, ScoutPoint, Supply};

    /// The tiny fixture reduced to Monday: F1 packs 10 vials (100 wasps each), F2 5 vials (120
    /// each); both depots run on Monday; adults counted at B2 (3), B3 (2) and B1 (1), none at
    /// B6. Every arc leaves on Monday with 90 % alive.
    fn monday() -> (Scenario, Arcs) {
        let mut s = tiny();
        let mon = s.week_start;
        s.supply = vec![
            Supply {
                facility: 0,
                date: mon,
                vials: 10,
            },
            Supply {
                facility: 1,
                date: mon,
                vials: 5,
            },
        ];
        s.fleet[1].days.push(Weekday::Mon);
        s.policy.dooryard_share_min = 0.2;
        s.policy.pressure_radius_km = 1.0;
        let at = |id: &str, kind, value| ScoutPoint {
            id: format!("S-{id}"),
            date: mon,
            location: s.sites[s.site_idx(id).expect("fixture site")].location,
            kind,
            value,
        };
        s.scouting = vec![
            at("B1", ScoutKind::TapAdults, 1.0),
            at("B2", ScoutKind::TapAdults, 3.0),
            at("B3", ScoutKind::TapAdults, 2.0),
            at("B6", ScoutKind::FlushInfestedPct, 80.0),
        ];
        let arc = |site: &str, facility: FacilityIdx, mode: Mode| Arc {
            facility,
            pack_date: mon,
            dispatch_date: mon,
            site: s.site_idx(site).expect("fixture site"),
            mode,
            eta: mon.and_hms_opt(10, 0, 0).expect("valid"),
            release_by: mon.and_hms_opt(23, 0, 0).expect("valid"),
            survival: 0.9,
            wasps_alive_per_vial: 0.9 * f64::from(s.facilities[facility].wasps_per_vial),
            drive_minutes: 30.0,
        };
        let mut list = vec![
            arc("B1", 0, Mode::Route),
            arc("B1", 1, Mode::Route),
            arc("B2", 1, Mode::Route),
            arc("B2", 0, Mode::Route),
            arc("B3", 0, Mode::Route),
            arc("B3", 1, Mode::Route),
            arc("B6", 0, Mode::Route),
            arc("R1", 0, Mode::Route),
            arc("R2", 1, Mode::Route),
            arc("R3", 0, Mode::Parcel),
        ];
        list.sort_by_key(|a| (a.site, a.facility, a.mode));
        let no_arc_reason = (0..s.sites.len())
            .map(|i| (!list.iter().any(|a| a.site == i)).then_some(Reason::OutOfReach))
            .collect();
        (
            s,
            Arcs {
                arcs: list,
                no_arc_reason,
            },
        )
    }

    /// (site id, facility id, mode, vials) of each shipment, sorted by site id.
    fn releases(s: &Scenario, b: &Baseline) -> Vec<(String, String, &'static str, u32)> {
        let mut v: Vec<_> = b
            .shipments
            .iter()
            .map(|sh| {
                (
                    s.sites[sh.arc.site].id.to_string(),
                    s.facilities[sh.arc.facility].id.to_string(),
                    sh.arc.mode.as_str(),
                    sh.vials,
                )
            })
            .collect();
        v.sort();
        v
    }

    #[test]
    fn hand_rule_on_a_monday_worked_out_by_hand() {
        let (s, arcs) = monday();
        let priority = vec![1.0; s.sites.len()];
        let opts = AllocOptions::default();
        let b = hand_plan(&s, &priority, &arcs, &opts).expect("valid");
        // Worked by hand. Share 0.2 of 15 vials: requests take 3 vials first, i.e. two
        // requests. Oldest first: R3 (received 4 weeks before), 2 vials by parcel from F1
        // (its only option); R2 (3 weeks), 2 vials from F2. The requests hold 4 ≥ 3 vials.
        // Blocks by adults counted: B2 (3) and B3 (2) take the standard release from F1,
        // their nearest facility, ⌈400 / 100⌉ = 4 vials each (360 live wasps ≥ 150):
        // F1 has 10 − 2 − 4 − 4 = 0 left. B1 (1) then tries F1 (empty) and F2: ⌈400 / 120⌉ =
        // 4 vials asked, 5 − 2 = 3 left, 3 × 108 = 324 live wasps ≥ 150, so 3 vials. B6 has
        // no adult counted; R1 comes last and finds F1 empty.
        let want: Vec<(String, String, &str, u32)> = [
            ("B1", "F2", "route", 3),
            ("B2", "F1", "route", 4),
            ("B3", "F1", "route", 4),
            ("R2", "F2", "route", 2),
            ("R3", "F1", "parcel", 2),
        ]
        .iter()
        .map(|&(a, b, c, d)| (a.to_string(), b.to_string(), c, d))
        .collect();
        assert_eq!(releases(&s, &b), want);
        assert_eq!(
            (b.supply_vials, b.shipped_vials, b.unshipped_vials()),
            (15, 15, 0)
        );
        assert_eq!((b.blocks_served, b.requests_served), (3, 2));
        let alive = 3.0 * 108.0 + 8.0 * 90.0 + 2.0 * 108.0 + 2.0 * 90.0;
        assert!((b.wasps_expected_alive - alive).abs() < 1e-9);
        let again =
            allocate::plan_objective(&s, &priority, &arcs, &opts, &b.shipments).expect("valid");
        assert_eq!(b.objective, again);
    }

    #[test]
    fn hand_rule_takes_back_block_releases_to_keep_the_dooryard_share() {
        let (mut s, mut arcs) = monday();
        // Half the vials should go to requests. R1's only option becomes F1's parcel, whose
        // cap of 2 vials R3 takes first, so only R3 and R2 can be served.
        s.policy.dooryard_share_min = 0.5;
        s.parcel.max_vials_per_day = 2;
        let r1 = s.site_idx("R1").expect("fixture site");
        for a in arcs.arcs.iter_mut().filter(|a| a.site == r1) {
            a.mode = Mode::Parcel;
        }
        let priority = vec![1.0; s.sites.len()];
        let opts = AllocOptions::default();
        // The three reachable requests take at most 6 of the 15 vials: the model lowers the
        // share to 6 / 15 = 0.4, and the hand plan keeps the same floor.
        let floor = allocate::share_floor(&s, &priority, &arcs, &opts).expect("valid");
        assert_eq!(floor, Some(0.4));
        let b = hand_plan(&s, &priority, &arcs, &opts).expect("valid");
        // Worked by hand. Quota ⌈0.4 × 15⌉ = 6 vials: R3 2 (parcel, F1), R2 2 (F2), R1 finds
        // the parcel cap used: the requests hold 4. Blocks: B2 4 and B3 4 from F1, B1 3 from
        // F2: 15 shipped, 4 < 0.4 × 15. Taken back, last first: B1 (12 shipped, 4 < 4.8),
        // then B3 (8 shipped, 4 ≥ 3.2). 7 vials stay home.
        let want: Vec<(String, String, &str, u32)> = [
            ("B2", "F1", "route", 4),
            ("R2", "F2", "route", 2),
            ("R3", "F1", "parcel", 2),
        ]
        .iter()
        .map(|&(a, b, c, d)| (a.to_string(), b.to_string(), c, d))
        .collect();
        assert_eq!(releases(&s, &b), want);
        assert_eq!(b.unshipped_vials(), 7);
    }

    #[test]
    fn top_quarter_is_the_first_quarter_of_eligible_sites_by_priority() {
        let eligible = [true, true, false, true, true, true, true, true, true];
        let priority = [1.0, 5.0, 9.0, 3.0, 5.0, 0.0, 2.0, 4.0, 0.5];
        // Eligible ranked: 1 (5.0), 4 (5.0, tie by index), 7, 3, 6, 0, 8, 5: 8 sites, top 2.
        let top = top_quarter(&eligible, &priority);
        let picked: Vec<usize> = (0..9).filter(|&i| top[i]).collect();
        assert_eq!(picked, vec![1, 4]);
    }
}
