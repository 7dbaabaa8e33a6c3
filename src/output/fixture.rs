//! A hand-built plan over `scenario::fixture::tiny()` for output tests: two routes, one
//! parcel and one undeliverable shipment. Invented values; not a solver result.

use chrono::{NaiveDate, NaiveDateTime};

use super::PlanView;
use crate::allocate::{Allocation, Binding, ConstraintKind, Note, NoteKind, Shipment, SiteOutcome};
use crate::arcs::{Arc, Mode};
use crate::dispatch::{Dispatch, ParcelShipment, Route, Stop, Undeliverable};
use crate::eligibility::Reason;
use crate::scenario::{LonLat, Scenario, fixture};

/// Owned parts of a [`PlanView`].
#[derive(Clone, Debug)]
pub struct TinyPlan {
    /// `scenario::fixture::tiny()` (sites may be edited by tests).
    pub scenario: Scenario,
    /// Priority per site.
    pub priority: Vec<f64>,
    /// Hand-built allocation.
    pub allocation: Allocation,
    /// Hand-built dispatch.
    pub dispatch: Dispatch,
    /// Route-feedback lines.
    pub moved: Vec<String>,
    /// The hand plan shown beside it (none in the fixture unless a test sets one).
    pub baseline: Option<crate::baseline::Baseline>,
}

impl TinyPlan {
    /// Borrows the parts as a view.
    pub fn view(&self) -> PlanView<'_> {
        PlanView {
            scenario: &self.scenario,
            priority: &self.priority,
            allocation: &self.allocation,
            dispatch: &self.dispatch,
            moved: &self.moved,
            baseline: self.baseline.as_ref(),
        }
    }
}

fn at(date: NaiveDate, h: u32, m: u32) -> NaiveDateTime {
    date.and_hms_opt(h, m, 0).expect("valid fixture time")
}

/// Site indices in `tiny()`: B1..B6 are 0..5, R1..R4 are 6..9.
const B1: usize = 0;
const B2: usize = 1;
const B3: usize = 2;
const B6: usize = 5;
const R1: usize = 6;
const R2: usize = 7;
const R3: usize = 8;

/// A road-like driven path depot → `sites` → depot: each leg runs east–west first, then
/// north–south, as on a grid of section-line roads, so that the path has more points than
/// stops (as a road model's does) and its corners are not at the stops.
fn grid_path(sc: &Scenario, depot: usize, sites: &[usize]) -> Vec<LonLat> {
    let depot = sc.facilities[depot].location;
    let stops = sites.iter().map(|&s| sc.sites[s].location);
    let places: Vec<LonLat> = std::iter::once(depot)
        .chain(stops)
        .chain(std::iter::once(depot))
        .collect();
    let mut path = vec![depot];
    for leg in places.windows(2) {
        let corner = LonLat {
            lon: leg[1].lon,
            lat: leg[0].lat,
        };
        for p in [corner, leg[1]] {
            if path.last() != Some(&p) {
                path.push(p);
            }
        }
    }
    path
}

/// The plan: route `R-F1-20270302-1` (V1: B1, R1, B2), route `R-F2-20270304-1` (V2: B6, R2),
/// a parcel to R3, and B3 allocated but undeliverable.
pub fn tiny_plan() -> TinyPlan {
    let sc = fixture::tiny();
    let d = |i: u64| sc.week_start + chrono::Days::new(i);
    let pack = |date: NaiveDate| date.and_time(sc.agent.pack_time);
    let arc = |facility: usize,
               pack_date: NaiveDate,
               dispatch_date: NaiveDate,
               site: usize,
               mode: Mode,
               eta: NaiveDateTime| {
        let hours = (eta - pack(pack_date)).num_minutes() as f64 / 60.0;
        let survival = sc.agent.survival_at(hours);
        Arc {
            facility,
            pack_date,
            dispatch_date,
            site,
            mode,
            eta,
            release_by: pack(pack_date)
                + chrono::Duration::minutes((sc.agent.shelf_life_hours * 60.0) as i64),
            survival,
            wasps_alive_per_vial: f64::from(sc.facilities[facility].wasps_per_vial) * survival,
            drive_minutes: 10.0,
        }
    };
    let (tue, wed, thu, mon) = (d(1), d(2), d(3), d(0));
    let shipments = vec![
        (arc(0, tue, tue, B1, Mode::Route, at(tue, 7, 40)), 3),
        (arc(0, mon, tue, B2, Mode::Route, at(tue, 8, 25)), 4),
        (arc(0, tue, tue, R1, Mode::Route, at(tue, 8, 0)), 2),
        (arc(0, wed, wed, B3, Mode::Route, at(wed, 8, 0)), 3),
        (arc(1, mon, mon, R3, Mode::Parcel, at(tue, 15, 0)), 2),
        (arc(1, wed, thu, B6, Mode::Route, at(thu, 8, 20)), 3),
        (arc(1, thu, thu, R2, Mode::Route, at(thu, 8, 45)), 2),
    ]
    .into_iter()
    .map(|(arc, vials)| Shipment { arc, vials })
    .collect::<Vec<_>>();
    let stop = |i: usize, arrival: NaiveDateTime, service: NaiveDateTime| {
        let s: &Shipment = &shipments[i];
        Stop {
            shipment: i,
            site: s.arc.site,
            arrival,
            service_start: service,
            vials: s.vials,
            wasps_expected_alive: s.wasps_expected_alive(),
            release_by: s.arc.release_by,
        }
    };
    let routes = vec![
        Route {
            id: "R-F1-20270302-1".into(),
            vehicle: 0,
            depot: 0,
            date: tue,
            depart: at(tue, 7, 30),
            return_at: at(tue, 9, 5),
            stops: vec![
                stop(0, at(tue, 7, 40), at(tue, 7, 40)),
                stop(2, at(tue, 7, 56), at(tue, 8, 0)),
                stop(1, at(tue, 8, 25), at(tue, 8, 25)),
            ],
            drive_minutes: 60.0,
            path: grid_path(&sc, 0, &[B1, R1, B2]),
        },
        Route {
            id: "R-F2-20270304-1".into(),
            vehicle: 1,
            depot: 1,
            date: thu,
            depart: at(thu, 8, 0),
            return_at: at(thu, 9, 20),
            stops: vec![
                stop(5, at(thu, 8, 20), at(thu, 8, 20)),
                stop(6, at(thu, 8, 45), at(thu, 8, 45)),
            ],
            drive_minutes: 55.0,
            path: grid_path(&sc, 1, &[B6, R2]),
        },
    ];
    let parcel = &shipments[4];
    let parcels = vec![ParcelShipment {
        shipment: 4,
        site: R3,
        ship_at: at(mon, 15, 0),
        eta: parcel.arc.eta,
        vials: parcel.vials,
        wasps_expected_alive: parcel.wasps_expected_alive(),
        release_by: parcel.arc.release_by,
    }];
    let priority = vec![0.9, 0.7, 0.8, 0.3, 0.6, 0.5, 0.4, 0.35, 0.45, 0.2];
    let reasons: [(bool, Option<Reason>); 10] = [
        (true, None),
        (true, None),
        (true, None),
        (false, Some(Reason::NoFlush)),
        (false, Some(Reason::InsecticideWindow)),
        (true, None),
        (true, None),
        (true, None),
        (true, None),
        (false, Some(Reason::NoHostPlant)),
    ];
    let sites = reasons
        .iter()
        .enumerate()
        .map(|(site, &(eligible, reason))| {
            let got: Vec<&Shipment> = shipments.iter().filter(|s| s.arc.site == site).collect();
            SiteOutcome {
                site,
                priority: priority[site],
                eligible,
                reason,
                vials: got.iter().map(|s| s.vials).sum(),
                wasps_expected_alive: got.iter().map(|s| s.wasps_expected_alive()).sum(),
            }
        })
        .collect();
    let allocation = Allocation {
        shipments,
        sites,
        lp_bound: 1000.0,
        bound: 1000.0,
        objective: 950.0,
        gap: 0.05,
        marginal_value_per_vial: vec![12.5, 8.0],
        binding: vec![
            Binding {
                name: "supply_F1_2027-03-02".into(),
                kind: ConstraintKind::Supply {
                    facility: sc.facilities[0].id.clone(),
                    date: d(1),
                },
                dual: 12.5,
            },
            Binding {
                name: "vehicles_F2_2027-03-04".into(),
                kind: ConstraintKind::Vehicles {
                    depot: sc.facilities[1].id.clone(),
                    date: d(3),
                },
                dual: 3.25,
            },
        ],
        notes: vec![Note::new(NoteKind::ShareBinds {
            share: 0.1,
            requests: 3,
            per_request: 2,
            cost_per_vial: 4.0,
        })],
        working_set: Vec::new(),
    };
    let dispatch = Dispatch {
        routes,
        parcels,
        undeliverable: vec![Undeliverable {
            shipment: 3,
            reason: "capacity",
        }],
        notes: Vec::new(),
    };
    TinyPlan {
        scenario: sc,
        priority,
        allocation,
        dispatch,
        moved: vec!["B3: no room on F1's Wednesday run; no other arc reaches it in time".into()],
        baseline: None,
    }
}
