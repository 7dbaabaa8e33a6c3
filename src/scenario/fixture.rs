//! A small scenario built in code, for unit tests of every stage (no files involved).
//! Invented values in an invented place; not a demo and not a reference.

use chrono::{NaiveDate, NaiveTime, Weekday};
use geo::{MultiPolygon, polygon};

use super::*;

fn t(h: u32, m: u32) -> NaiveTime {
    NaiveTime::from_hms_opt(h, m, 0).expect("valid fixture time")
}

fn square(lon: f64, lat: f64, half_deg: f64) -> MultiPolygon<f64> {
    MultiPolygon(vec![polygon![
        (x: lon - half_deg, y: lat - half_deg),
        (x: lon + half_deg, y: lat - half_deg),
        (x: lon + half_deg, y: lat + half_deg),
        (x: lon - half_deg, y: lat + half_deg),
        (x: lon - half_deg, y: lat - half_deg),
    ]])
}

/// A route arc of `s` from facility `facility` to site `site`, packed and dispatched on day
/// `day` of the week, arriving at 09:00 with release-by 23:00, `alive` live wasps per vial
/// (survival: `alive` over the facility's wasps per vial) and 20 minutes of driving: for
/// unit tests that build their own arcs.
pub fn route_arc(
    s: &Scenario,
    site: SiteIdx,
    facility: FacilityIdx,
    day: u64,
    alive: f64,
) -> crate::arcs::Arc {
    let d = s.week_start + chrono::Days::new(day);
    crate::arcs::Arc {
        facility,
        pack_date: d,
        dispatch_date: d,
        site,
        mode: crate::arcs::Mode::Route,
        eta: d.and_hms_opt(9, 0, 0).expect("valid fixture time"),
        release_by: d.and_hms_opt(23, 0, 0).expect("valid fixture time"),
        survival: alive / f64::from(s.facilities[facility].wasps_per_vial),
        wasps_alive_per_vial: alive,
        drive_minutes: 20.0,
    }
}

/// A week starting Monday 2027-03-01 with 2 facilities, 6 blocks, 4 requests, 6 scouting
/// points, weekday supply, 2 vehicles and a parcel service. Every stage's unit tests may rely
/// on its shape; change it only with those tests.
pub fn tiny() -> Scenario {
    let week_start = NaiveDate::from_ymd_opt(2027, 3, 1).expect("valid fixture date");
    let day = |i: u64| week_start + chrono::Days::new(i);
    let facilities = vec![
        Facility {
            id: FacilityId("F1".into()),
            name: "North insectary".into(),
            location: LonLat {
                lon: 80.00,
                lat: 27.00,
            },
            wasps_per_vial: 100,
        },
        Facility {
            id: FacilityId("F2".into()),
            name: "South insectary".into(),
            location: LonLat {
                lon: 80.00,
                lat: 26.70,
            },
            wasps_per_vial: 120,
        },
    ];
    let mut supply = Vec::new();
    for f in 0..2 {
        for d in 0..5 {
            supply.push(Supply {
                facility: f,
                date: day(d),
                vials: 6,
            });
        }
    }
    let blocks = [
        (
            "B1",
            80.02,
            26.98,
            Management::Conventional,
            Flush::Heavy,
            None,
        ),
        ("B2", 80.05, 26.95, Management::Organic, Flush::Light, None),
        (
            "B3",
            79.98,
            26.90,
            Management::Abandoned,
            Flush::Heavy,
            None,
        ),
        (
            "B4",
            80.03,
            26.75,
            Management::Conventional,
            Flush::None,
            None,
        ),
        (
            "B5",
            79.97,
            26.72,
            Management::Conventional,
            Flush::Heavy,
            Some(day(0) - chrono::Days::new(3)),
        ),
        (
            "B6",
            80.01,
            26.80,
            Management::Conventional,
            Flush::Light,
            None,
        ),
    ];
    let mut sites: Vec<Site> = blocks
        .iter()
        .map(|&(id, lon, lat, management, flush, last_insecticide)| {
            let geometry = square(lon, lat, 0.002);
            Site {
                id: SiteId(id.into()),
                location: LonLat { lon, lat },
                detail: SiteDetail::Block(Block {
                    crop: "orange".into(),
                    management,
                    flush,
                    last_insecticide,
                    access_start: t(7, 0),
                    access_end: t(17, 0),
                    area_ha: crate::geodesy::area_ha(&geometry),
                    geometry,
                }),
            }
        })
        .collect();
    let requests = [
        (
            "R1",
            80.01,
            26.99,
            HostPlant::Citrus,
            true,
            Delivery::Route,
            "12 Palm Row",
        ),
        (
            "R2",
            80.04,
            26.85,
            HostPlant::OrangeJasmine,
            true,
            Delivery::Either,
            "3 Grove Lane",
        ),
        (
            "R3",
            79.99,
            26.71,
            HostPlant::Citrus,
            true,
            Delivery::Parcel,
            "88 Canal Street",
        ),
        (
            "R4",
            80.02,
            26.88,
            HostPlant::None,
            true,
            Delivery::Either,
            "5 Dune Court",
        ),
    ];
    sites.extend(requests.iter().enumerate().map(
        |(i, &(id, lon, lat, host_plant, insecticide_free, delivery, address))| Site {
            id: SiteId(id.into()),
            location: LonLat { lon, lat },
            detail: SiteDetail::Dooryard(Request {
                received: week_start - chrono::Days::new(7 * (i as u64 + 1)),
                address: address.into(),
                host_plant,
                insecticide_free,
                delivery,
            }),
        },
    ));
    let scouting = [
        (80.02, 26.98, ScoutKind::TapAdults, 2.0),
        (80.05, 26.95, ScoutKind::FlushInfestedPct, 40.0),
        (79.98, 26.90, ScoutKind::GreeningPositive, 1.0),
        (80.01, 26.80, ScoutKind::TapAdults, 0.5),
        (80.04, 26.85, ScoutKind::FlushInfestedPct, 10.0),
        (79.99, 26.71, ScoutKind::TapAdults, 1.0),
    ]
    .iter()
    .enumerate()
    .map(|(i, &(lon, lat, kind, value))| ScoutPoint {
        id: format!("S{}", i + 1),
        date: week_start - chrono::Days::new(i as u64 + 1),
        location: LonLat { lon, lat },
        kind,
        value,
    })
    .collect();
    let weekdays = vec![
        Weekday::Mon,
        Weekday::Tue,
        Weekday::Wed,
        Weekday::Thu,
        Weekday::Fri,
    ];
    let fleet = vec![
        Vehicle {
            id: VehicleId("V1".into()),
            depot: 0,
            days: weekdays.clone(),
            capacity_vials: 20,
            shift_start: t(7, 30),
            shift_hours: 8.0,
        },
        Vehicle {
            id: VehicleId("V2".into()),
            depot: 1,
            days: vec![Weekday::Tue, Weekday::Thu],
            capacity_vials: 15,
            shift_start: t(8, 0),
            shift_hours: 6.0,
        },
    ];
    Scenario {
        name: "tiny fixture".into(),
        week_start,
        agent: Agent {
            name: "parasitoid".into(),
            shelf_life_hours: 72.0,
            survival: Survival::Exponential {
                half_life_hours: 96.0,
            },
            min_release_wasps: 150.0,
            target_release_wasps: 400.0,
            max_release_wasps: 800.0,
            above_target_weight: 0.5,
            pack_time: t(6, 0),
        },
        policy: Policy {
            dooryard_share_min: 0.1,
            dooryard_vials_per_request: 2,
            insecticide_exclusion_days: 21,
            require_flush: true,
            pressure_radius_km: 5.0,
            pressure_bandwidth_km: 2.0,
            travel_cost_per_hour: 1.0,
            rerelease_interval_days: 28,
            releases_per_site_week: 1,
        },
        travel: Travel {
            circuity: 1.3,
            speed_kmh: 50.0,
            matrix: None,
            road_network: None,
        },
        parcel: Parcel {
            transit_hours: 24.0,
            days: vec![Weekday::Mon, Weekday::Wed],
            max_vials_per_day: 10,
            ship_time: t(15, 0),
        },
        dispatch: DispatchSettings {
            service_minutes_block: 15.0,
            service_minutes_dooryard: 5.0,
            dooryard_window_start: t(8, 0),
            dooryard_window_end: t(18, 0),
            time_limit_seconds: None,
            seed: 1,
        },
        facilities,
        supply,
        sites,
        scouting,
        fleet,
        overrides: Vec::new(),
        warnings: Vec::new(),
    }
}
