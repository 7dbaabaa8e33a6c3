//! `manifest.csv` and `manifest.json`: one row per delivered shipment (route stops and
//! parcels), plus route totals and parcel totals per day in the JSON.

use std::collections::{BTreeMap, BTreeSet};

use chrono::{NaiveDate, NaiveDateTime};
use serde::Serialize;

use super::{Delivered, OutputError, PlanView, bad_site, fixed, iso_minutes, mode_str, round_to};
use crate::arcs::Mode;
use crate::scenario::{FacilityIdx, SiteIdx};

/// The `manifest.csv` header, the contract's column order.
pub const MANIFEST_COLUMNS: [&str; 15] = [
    "shipment_id",
    "facility_id",
    "dispatch_date",
    "mode",
    "route_id",
    "stop_seq",
    "site_id",
    "site_kind",
    "lat",
    "lon",
    "vials",
    "wasps_packed",
    "wasps_expected_alive",
    "eta",
    "release_by",
];

/// One delivered shipment.
#[derive(Clone, Debug, PartialEq)]
pub struct ManifestRow {
    /// `S-<facility>-<yyyymmdd>-<site>` (dispatch date), with `-2`, `-3`… when the same site
    /// gets two shipments from one facility on one day (different pack days).
    pub shipment_id: String,
    /// Index into `Allocation::shipments` of the shipment.
    pub shipment: usize,
    /// Sending facility.
    pub facility: FacilityIdx,
    /// Sending facility id.
    pub facility_id: String,
    /// Day the vials were packed.
    pub pack_date: NaiveDate,
    /// Day they leave the facility.
    pub dispatch_date: NaiveDate,
    /// Route or parcel.
    pub mode: Mode,
    /// The route (routes only).
    pub route_id: Option<String>,
    /// 1-based stop position on the route (routes only).
    pub stop_seq: Option<u32>,
    /// Receiving site.
    pub site: SiteIdx,
    /// Receiving site id.
    pub site_id: String,
    /// `block` or `dooryard`.
    pub site_kind: &'static str,
    /// Stop latitude, degrees.
    pub lat: f64,
    /// Stop longitude, degrees.
    pub lon: f64,
    /// Vials delivered.
    pub vials: u32,
    /// Wasps at packing = vials × wasps_per_vial.
    pub wasps_packed: u64,
    /// Expected live wasps at release.
    pub wasps_expected_alive: f64,
    /// Arrival (route: at the stop, before any wait for the window; parcel: delivery).
    pub eta: NaiveDateTime,
    /// Latest useful release.
    pub release_by: NaiveDateTime,
}

/// Builds the rows from routes and parcels; `Dispatch::undeliverable` is left out.
/// O(n log n) in delivered shipments.
pub(crate) fn rows(view: &PlanView) -> Result<Vec<ManifestRow>, OutputError> {
    let sc = view.scenario;
    let al = view.allocation;
    let make = |shipment: usize,
                site: SiteIdx,
                vials: u32,
                wasps: f64,
                eta: NaiveDateTime,
                release_by: NaiveDateTime,
                route: Option<(&str, u32)>,
                dispatch_date: Option<NaiveDate>|
     -> Result<ManifestRow, OutputError> {
        let sh = al.shipments.get(shipment).ok_or_else(|| {
            OutputError::Inconsistent(format!("shipment index {shipment} is out of range"))
        })?;
        let s = sc.sites.get(site).ok_or_else(|| bad_site(site))?;
        let f = sc.facilities.get(sh.arc.facility).ok_or_else(|| {
            OutputError::Inconsistent(format!(
                "facility index {} is out of range",
                sh.arc.facility
            ))
        })?;
        Ok(ManifestRow {
            shipment_id: String::new(),
            shipment,
            facility: sh.arc.facility,
            facility_id: f.id.0.clone(),
            pack_date: sh.arc.pack_date,
            dispatch_date: dispatch_date.unwrap_or(sh.arc.dispatch_date),
            mode: if route.is_some() {
                Mode::Route
            } else {
                Mode::Parcel
            },
            route_id: route.map(|(r, _)| r.to_string()),
            stop_seq: route.map(|(_, n)| n),
            site,
            site_id: s.id.0.clone(),
            site_kind: s.kind().as_str(),
            lat: s.location.lat,
            lon: s.location.lon,
            vials,
            wasps_packed: u64::from(vials) * u64::from(f.wasps_per_vial),
            wasps_expected_alive: wasps,
            eta,
            release_by,
        })
    };
    let mut out = Vec::new();
    for r in &view.dispatch.routes {
        for (i, st) in r.stops.iter().enumerate() {
            out.push(make(
                st.shipment,
                st.site,
                st.vials,
                st.wasps_expected_alive,
                st.arrival,
                st.release_by,
                Some((&r.id, i as u32 + 1)),
                Some(r.date),
            )?);
        }
    }
    for p in &view.dispatch.parcels {
        out.push(make(
            p.shipment,
            p.site,
            p.vials,
            p.wasps_expected_alive,
            p.eta,
            p.release_by,
            None,
            Some(p.ship_at.date()),
        )?);
    }
    out.sort_by(|a, b| {
        (
            a.dispatch_date,
            a.mode,
            &a.route_id,
            a.stop_seq,
            &a.site_id,
            a.pack_date,
        )
            .cmp(&(
                b.dispatch_date,
                b.mode,
                &b.route_id,
                b.stop_seq,
                &b.site_id,
                b.pack_date,
            ))
    });
    // Ids after sorting, so that the suffix of a repeated (facility, day, site) follows the
    // row order and does not depend on the order the dispatch stage listed them in.
    let mut seen: BTreeMap<String, u32> = BTreeMap::new();
    for row in &mut out {
        let base = format!(
            "S-{}-{}-{}",
            row.facility_id,
            row.dispatch_date.format("%Y%m%d"),
            row.site_id
        );
        let n = seen.entry(base.clone()).or_insert(0);
        *n += 1;
        row.shipment_id = if *n == 1 { base } else { format!("{base}-{n}") };
    }
    Ok(out)
}

/// `manifest.csv`. Coordinates with 6 decimals (about 0.1 m), wasps alive with 1.
pub(crate) fn csv(rows: &[ManifestRow]) -> Result<Vec<u8>, OutputError> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(MANIFEST_COLUMNS)?;
    for r in rows {
        w.write_record([
            r.shipment_id.clone(),
            r.facility_id.clone(),
            r.dispatch_date.to_string(),
            mode_str(r.mode).to_string(),
            r.route_id.clone().unwrap_or_default(),
            r.stop_seq.map(|n| n.to_string()).unwrap_or_default(),
            r.site_id.clone(),
            r.site_kind.to_string(),
            fixed(r.lat, 6),
            fixed(r.lon, 6),
            r.vials.to_string(),
            r.wasps_packed.to_string(),
            fixed(r.wasps_expected_alive, 1),
            iso_minutes(r.eta),
            iso_minutes(r.release_by),
        ])?;
    }
    w.into_inner()
        .map_err(|e| OutputError::Csv(csv::Error::from(e.into_error())))
}

#[derive(Serialize)]
struct JsonRow<'a> {
    shipment_id: &'a str,
    facility_id: &'a str,
    dispatch_date: String,
    mode: &'static str,
    route_id: Option<&'a str>,
    stop_seq: Option<u32>,
    site_id: &'a str,
    site_kind: &'static str,
    lat: f64,
    lon: f64,
    vials: u32,
    wasps_packed: u64,
    wasps_expected_alive: f64,
    eta: String,
    release_by: String,
}

#[derive(Serialize)]
struct RouteTotal<'a> {
    route_id: &'a str,
    vehicle_id: &'a str,
    depot_id: &'a str,
    date: String,
    depart: String,
    #[serde(rename = "return")]
    return_at: String,
    stops: usize,
    vials: u32,
    drive_minutes: f64,
}

#[derive(Serialize)]
struct ParcelDay {
    date: String,
    parcels: usize,
    vials: u64,
    /// Ids of the facilities that sent parcels that day, sorted.
    facility_ids: BTreeSet<String>,
}

#[derive(Serialize)]
struct ManifestJson<'a> {
    rows: Vec<JsonRow<'a>>,
    routes: Vec<RouteTotal<'a>>,
    parcels_per_day: Vec<ParcelDay>,
}

/// `manifest.json`: `rows` (same fields as the CSV, null for empty), `routes` (totals per
/// route; `drive_minutes` in minutes) and `parcels_per_day` (hand-over date, count, vials).
pub(crate) fn json(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let rows = plan
        .rows
        .iter()
        .map(|r| JsonRow {
            shipment_id: &r.shipment_id,
            facility_id: &r.facility_id,
            dispatch_date: r.dispatch_date.to_string(),
            mode: mode_str(r.mode),
            route_id: r.route_id.as_deref(),
            stop_seq: r.stop_seq,
            site_id: &r.site_id,
            site_kind: r.site_kind,
            lat: round_to(r.lat, 6),
            lon: round_to(r.lon, 6),
            vials: r.vials,
            wasps_packed: r.wasps_packed,
            wasps_expected_alive: round_to(r.wasps_expected_alive, 1),
            eta: iso_minutes(r.eta),
            release_by: iso_minutes(r.release_by),
        })
        .collect();
    let mut routes = Vec::new();
    for r in &view.dispatch.routes {
        let vehicle = sc.fleet.get(r.vehicle).ok_or_else(|| {
            OutputError::Inconsistent(format!("vehicle index {} is out of range", r.vehicle))
        })?;
        let depot = sc.facilities.get(r.depot).ok_or_else(|| {
            OutputError::Inconsistent(format!("depot index {} is out of range", r.depot))
        })?;
        routes.push(RouteTotal {
            route_id: &r.id,
            vehicle_id: vehicle.id.as_str(),
            depot_id: depot.id.as_str(),
            date: r.date.to_string(),
            depart: iso_minutes(r.depart),
            return_at: iso_minutes(r.return_at),
            stops: r.stops.len(),
            vials: r.vials(),
            drive_minutes: round_to(r.drive_minutes, 1),
        });
    }
    let mut days: BTreeMap<NaiveDate, ParcelDay> = BTreeMap::new();
    for r in plan.rows.iter().filter(|r| r.mode == Mode::Parcel) {
        let e = days.entry(r.dispatch_date).or_insert_with(|| ParcelDay {
            date: r.dispatch_date.to_string(),
            parcels: 0,
            vials: 0,
            facility_ids: BTreeSet::new(),
        });
        e.parcels += 1;
        e.vials += u64::from(r.vials);
        e.facility_ids.insert(r.facility_id.clone());
    }
    let doc = ManifestJson {
        rows,
        routes,
        parcels_per_day: days.into_values().collect(),
    };
    let mut bytes = serde_json::to_vec_pretty(&doc)?;
    bytes.push(b'\n');
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    #[test]
    fn rows_skip_undeliverable_and_number_stops_from_one() {
        let p = tiny_plan();
        let rows = rows(&p.view()).unwrap();
        assert_eq!(rows.len(), 6, "5 stops + 1 parcel; B3 is undeliverable");
        assert!(rows.iter().all(|r| r.site_id != "B3"));
        let r1: Vec<_> = rows
            .iter()
            .filter(|r| r.route_id.as_deref() == Some("R-F1-20270302-1"))
            .map(|r| (r.stop_seq, r.site_id.as_str()))
            .collect();
        assert_eq!(
            r1,
            [(Some(1), "B1"), (Some(2), "R1"), (Some(3), "B2")],
            "stop order kept"
        );
        let parcel = rows.iter().find(|r| r.mode == Mode::Parcel).unwrap();
        assert_eq!(parcel.shipment_id, "S-F2-20270301-R3");
        assert_eq!(parcel.stop_seq, None);
        assert_eq!(parcel.wasps_packed, 2 * 120);
    }

    #[test]
    fn repeated_facility_day_site_gets_a_suffix() {
        let mut p = tiny_plan();
        // A second shipment to B1 on the same run, packed a day earlier.
        let mut extra = p.dispatch.routes[0].stops[0].clone();
        extra.arrival += chrono::Duration::minutes(1);
        p.dispatch.routes[0].stops.push(extra);
        let rows = rows(&p.view()).unwrap();
        let ids: Vec<_> = rows
            .iter()
            .filter(|r| r.site_id == "B1")
            .map(|r| r.shipment_id.as_str())
            .collect();
        assert_eq!(ids, ["S-F1-20270302-B1", "S-F1-20270302-B1-2"]);
    }

    #[test]
    fn bad_shipment_index_is_an_error_not_a_panic() {
        let mut p = tiny_plan();
        p.dispatch.routes[0].stops[0].shipment = 99;
        assert!(matches!(rows(&p.view()), Err(OutputError::Inconsistent(_))));
    }
}
