//! Seeded synthetic allocation inputs for tests and benchmarks (not a demo, not a reference):
//! the `tiny()` fixture's policy, agent and fleet with generated sites, supply and arcs.

use chrono::{Datelike, Days, NaiveTime};

use crate::arcs::{Arc, Arcs, Mode};
use crate::scenario::{Scenario, Site, SiteDetail, SiteId, Supply, fixture::tiny};

/// A same-day arc for hand-made test cases: packed, dispatched and arriving (09:00) on the
/// week's first day, release-by 23:00, survival 0.9 (90 live wasps a vial), 30 minutes' drive.
pub fn same_day_arc(s: &Scenario, site: usize, facility: usize, mode: Mode) -> Arc {
    let d = s.week_start;
    Arc {
        facility,
        pack_date: d,
        dispatch_date: d,
        site,
        mode,
        eta: d.and_hms_opt(9, 0, 0).expect("valid"),
        release_by: d.and_hms_opt(23, 0, 0).expect("valid"),
        survival: 0.9,
        wasps_alive_per_vial: 90.0,
        drive_minutes: 30.0,
    }
}

/// SplitMix64: a tiny seeded generator, enough for test data.
#[derive(Clone, Debug)]
pub struct Rng(pub u64);

impl Rng {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Uniform in 0..n (n ≥ 1).
    pub fn below(&mut self, n: u64) -> u64 {
        self.next_u64() % n.max(1)
    }
}

/// `n_sites` sites (about one in five a dooryard request), `supply_vials` vials over the
/// five weekdays of both facilities, two or three arcs a site, skewed priorities (one in
/// ten 0). Returns (scenario, priority per site, arcs).
pub fn generate(seed: u64, n_sites: usize, supply_vials: u32) -> (Scenario, Vec<f64>, Arcs) {
    let mut rng = Rng(seed);
    let mut s = tiny();
    let block = s.sites[0].clone();
    let request = s.sites[6].clone();
    s.sites = (0..n_sites)
        .map(|i| {
            let door = rng.below(5) == 0;
            let mut site = if door { request.clone() } else { block.clone() };
            site.id = SiteId(format!("{}{:05}", if door { "R" } else { "B" }, i + 1));
            site.location.lon += rng.unit() * 0.4 - 0.2;
            site.location.lat += rng.unit() * 0.4 - 0.2;
            if let SiteDetail::Dooryard(r) = &mut site.detail {
                r.delivery = match rng.below(3) {
                    0 => crate::scenario::Delivery::Route,
                    1 => crate::scenario::Delivery::Parcel,
                    _ => crate::scenario::Delivery::Either,
                };
            }
            site
        })
        .collect::<Vec<Site>>();
    let per = supply_vials / 10;
    let mut extra = supply_vials - per * 10;
    s.supply = (0..2)
        .flat_map(|f| (0..5u64).map(move |d| (f, d)))
        .map(|(f, d)| {
            let add = u32::from(extra > 0);
            extra = extra.saturating_sub(1);
            Supply {
                facility: f,
                date: s.week_start + Days::new(d),
                vials: per + add,
            }
        })
        .collect();
    // Vehicle capacity: most of a day's supply, so capacity binds on some days.
    let daily = f64::from(supply_vials) / 5.0;
    s.fleet[0].capacity_vials = (daily * 0.45).ceil() as u32 + 1;
    s.fleet[1].capacity_vials = (daily * 0.6).ceil() as u32 + 1;
    s.parcel.max_vials_per_day = (daily * 0.2).ceil() as u32 + 2;
    let priority: Vec<f64> = (0..n_sites)
        .map(|_| {
            if rng.below(10) == 0 {
                0.0
            } else {
                0.05 + rng.unit().powi(3) * 10.0
            }
        })
        .collect();
    let pack = |d: chrono::NaiveDate| d.and_time(NaiveTime::from_hms_opt(6, 0, 0).expect("valid"));
    let mut arcs = Vec::new();
    for (i, site) in s.sites.iter().enumerate() {
        let door = matches!(site.detail, SiteDetail::Dooryard(_));
        let k = 2 + rng.below(2);
        for _ in 0..k {
            let facility = rng.below(2) as usize;
            let day = rng.below(5);
            let dispatch = s.week_start + Days::new(day);
            let wd = dispatch.weekday();
            let parcel_ok = door && s.parcel.days.contains(&wd) && rng.below(2) == 0;
            let route_ok = s
                .fleet
                .iter()
                .any(|v| v.depot == facility && v.runs_on(dispatch));
            let mode = if parcel_ok {
                Mode::Parcel
            } else if route_ok {
                Mode::Route
            } else {
                continue;
            };
            let held = if day > 0 { rng.below(2) } else { 0 };
            let pack_date = dispatch - Days::new(held);
            let drive = 10.0 + rng.unit() * 80.0;
            let eta = match mode {
                Mode::Route => {
                    dispatch.and_hms_opt(8, 0, 0).expect("valid")
                        + chrono::Duration::minutes(drive as i64)
                }
                Mode::Parcel => {
                    dispatch.and_hms_opt(15, 0, 0).expect("valid") + chrono::Duration::hours(24)
                }
            };
            let hours = (eta - pack(pack_date)).num_minutes() as f64 / 60.0;
            let survival = s.agent.survival_at(hours);
            let release_by =
                pack(pack_date) + chrono::Duration::hours(s.agent.shelf_life_hours as i64);
            if survival <= 0.0 || eta > release_by {
                continue;
            }
            arcs.push(Arc {
                facility,
                pack_date,
                dispatch_date: dispatch,
                site: i,
                mode,
                eta,
                release_by,
                survival,
                wasps_alive_per_vial: f64::from(s.facilities[facility].wasps_per_vial) * survival,
                drive_minutes: if mode == Mode::Route { drive } else { 0.0 },
            });
        }
    }
    arcs.sort_by(|a, b| {
        (a.site, a.facility, a.pack_date, a.dispatch_date, a.mode).cmp(&(
            b.site,
            b.facility,
            b.pack_date,
            b.dispatch_date,
            b.mode,
        ))
    });
    arcs.dedup_by(|a, b| {
        (a.site, a.facility, a.pack_date, a.dispatch_date, a.mode)
            == (b.site, b.facility, b.pack_date, b.dispatch_date, b.mode)
    });
    let mut has = vec![false; n_sites];
    for a in &arcs {
        has[a.site] = true;
    }
    let no_arc_reason = has
        .iter()
        .map(|&h| (!h).then_some(crate::eligibility::Reason::OutOfReach))
        .collect();
    (
        s,
        priority,
        Arcs {
            arcs,
            no_arc_reason,
        },
    )
}
