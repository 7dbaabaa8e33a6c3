//! `manifest.csv` and `manifest.json`: one row per delivered shipment (route stops and
//! parcels), plus route totals and parcel totals per day in the JSON.

use std::collections::{BTreeMap, BTreeSet};

use chrono::{NaiveDate, NaiveDateTime};
use serde::Serialize;

use super::{Delivered, OutputError, PlanView, bad_site, iso_minutes, round_to};
use crate::arcs::Mode;
use crate::csvread::{Cells, CsvRow, iso_date, local_datetime};
use crate::scenario::{FacilityIdx, SiteIdx, SiteKind};

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

/// One `manifest.csv` row as the file holds it: written by `plan`, read back (through
/// [`crate::csvread`]) by `ledger commit`, which keeps it in the ledger, and by `compare`.
/// Fields in [`MANIFEST_COLUMNS`] order (the CSV writer checks it, a test ties the two);
/// coordinates with 6 decimals, wasps alive with 1, times to the minute. The same record is a
/// row of `manifest.json` (numbers as JSON numbers, an empty cell as `null`).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ManifestRecord {
    /// `S-<facility>-<yyyymmdd>-<site>` (dispatch date), with `-2`, `-3`… when the same site
    /// gets two shipments from one facility on one day (different pack days).
    pub shipment_id: String,
    /// Sending facility id.
    pub facility_id: String,
    /// Day the vials leave the facility.
    #[serde(serialize_with = "super::cell::date")]
    pub dispatch_date: NaiveDate,
    /// Route or parcel.
    pub mode: Mode,
    /// The route (routes only).
    pub route_id: Option<String>,
    /// 1-based stop position on the route (routes only).
    pub stop_seq: Option<u32>,
    /// Receiving site id.
    pub site_id: String,
    /// Block or dooryard.
    pub site_kind: SiteKind,
    /// Stop latitude, degrees (`None` when a file read back has no `lat` column or an empty
    /// cell, and in the ledger, which keeps no locations).
    #[serde(serialize_with = "super::cell::degrees")]
    pub lat: Option<f64>,
    /// Stop longitude, degrees (`None` as for `lat`).
    #[serde(serialize_with = "super::cell::degrees")]
    pub lon: Option<f64>,
    /// Vials delivered.
    pub vials: u32,
    /// Wasps at packing, wasps.
    pub wasps_packed: u64,
    /// Expected live wasps at release, wasps.
    #[serde(serialize_with = "super::cell::fixed1")]
    pub wasps_expected_alive: f64,
    /// Arrival, local time (route: at the stop, before any wait for the window; parcel:
    /// delivery).
    #[serde(serialize_with = "super::cell::minutes")]
    pub eta: NaiveDateTime,
    /// Latest useful release, local time.
    #[serde(serialize_with = "super::cell::minutes")]
    pub release_by: NaiveDateTime,
}

/// A number that is finite and ≥ 0.
fn non_negative(s: &str, fix: &str) -> Result<f64, String> {
    s.parse::<f64>()
        .ok()
        .filter(|x| x.is_finite() && *x >= 0.0)
        .ok_or_else(|| fix.to_string())
}

/// A coordinate cell read back: empty, or a number in `range`, degrees.
fn degrees(
    s: &str,
    range: std::ops::RangeInclusive<f64>,
    fix: &str,
) -> Result<Option<f64>, String> {
    if s.is_empty() {
        return Ok(None);
    }
    s.parse::<f64>()
        .ok()
        .filter(|x| range.contains(x))
        .map(Some)
        .ok_or_else(|| format!("{fix}, or empty"))
}

const DATE_TIME: &str = "not an ISO local date-time (YYYY-MM-DDTHH:MM)";

impl CsvRow for ManifestRecord {
    const COLUMNS: &'static [&'static str] = &MANIFEST_COLUMNS;
    /// The ledger keeps no locations, so a manifest without coordinates can be committed.
    const OPTIONAL: &'static [&'static str] = &["lat", "lon"];
    const UNIQUE: Option<(&'static str, &'static str)> =
        Some(("shipment_id", "shipment ids are unique"));

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let shipment_id = c.required("shipment_id", "every row needs a shipment id");
        let facility_id = c.required("facility_id", "every row needs a facility id");
        let dispatch_date = c.parse_with("dispatch_date", |s| {
            iso_date(s).ok_or_else(|| "not an ISO date (YYYY-MM-DD)".to_string())
        });
        let mode = c.parse("mode", "must be route or parcel");
        let stop_seq = c.parse_with("stop_seq", |s| match s {
            "" => Ok(None),
            v => match v.parse::<u32>() {
                Ok(n) if n >= 1 => Ok(Some(n)),
                _ => Err("a stop number is a whole number ≥ 1, or empty".to_string()),
            },
        });
        let site_id = c.required("site_id", "every row needs a site id");
        let site_kind = c.parse("site_kind", "must be block or dooryard");
        let lat = c.parse_optional_with("lat", |s| {
            degrees(
                s,
                -90.0..=90.0,
                "a latitude is a number of degrees in -90..90",
            )
        });
        let lon = c.parse_optional_with("lon", |s| {
            degrees(
                s,
                -180.0..=180.0,
                "a longitude is a number of degrees in -180..180",
            )
        });
        let vials = c.parse("vials", "vials are a whole number ≥ 0");
        let wasps_packed = c.parse("wasps_packed", "wasps are a whole number ≥ 0");
        let alive = c.parse_with("wasps_expected_alive", |s| {
            non_negative(s, "expected live wasps are a finite number ≥ 0")
        });
        let eta = c.parse_with("eta", |s| local_datetime(s).ok_or_else(|| DATE_TIME.into()));
        let release_by = c.parse_with("release_by", |s| {
            local_datetime(s).ok_or_else(|| DATE_TIME.into())
        });
        Some(ManifestRecord {
            shipment_id: shipment_id?,
            facility_id: facility_id?,
            dispatch_date: dispatch_date?,
            mode: mode?,
            route_id: Some(c.text("route_id").to_string()).filter(|s| !s.is_empty()),
            stop_seq: stop_seq?,
            site_id: site_id?,
            site_kind: site_kind?,
            lat: lat?.flatten(),
            lon: lon?.flatten(),
            vials: vials?,
            wasps_packed: wasps_packed?,
            wasps_expected_alive: alive?,
            eta: eta?,
            release_by: release_by?,
        })
    }
}

/// One delivered shipment: its `manifest.csv` row and where it comes from in the plan. Reads
/// as its [`ManifestRecord`] (`row.site_id`, `row.eta`…).
#[derive(Clone, Debug, PartialEq)]
pub struct ManifestRow {
    /// The row as `manifest.csv` writes it (coordinates always present).
    pub record: ManifestRecord,
    /// Index into `Allocation::shipments` of the shipment.
    pub shipment: usize,
    /// Sending facility.
    pub facility: FacilityIdx,
    /// Day the vials were packed.
    pub pack_date: NaiveDate,
    /// Receiving site.
    pub site: SiteIdx,
}

impl std::ops::Deref for ManifestRow {
    type Target = ManifestRecord;

    fn deref(&self) -> &ManifestRecord {
        &self.record
    }
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
            record: ManifestRecord {
                shipment_id: String::new(),
                facility_id: f.id.0.clone(),
                dispatch_date: dispatch_date.unwrap_or(sh.arc.dispatch_date),
                mode: if route.is_some() {
                    Mode::Route
                } else {
                    Mode::Parcel
                },
                route_id: route.map(|(r, _)| r.to_string()),
                stop_seq: route.map(|(_, n)| n),
                site_id: s.id.0.clone(),
                site_kind: s.kind(),
                lat: Some(s.location.lat),
                lon: Some(s.location.lon),
                vials,
                wasps_packed: u64::from(vials) * u64::from(f.wasps_per_vial),
                wasps_expected_alive: wasps,
                eta,
                release_by,
            },
            shipment,
            facility: sh.arc.facility,
            pack_date: sh.arc.pack_date,
            site,
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
        row.record.shipment_id = if *n == 1 { base } else { format!("{base}-{n}") };
    }
    Ok(out)
}

/// `manifest.csv`. Coordinates with 6 decimals (about 0.1 m), wasps alive with 1.
pub(crate) fn csv(rows: &[ManifestRow]) -> Result<Vec<u8>, OutputError> {
    super::write_csv(&MANIFEST_COLUMNS, rows.iter().map(|r| &r.record))
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
    /// The `manifest.csv` rows, as JSON objects of the same fields.
    rows: Vec<&'a ManifestRecord>,
    routes: Vec<RouteTotal<'a>>,
    parcels_per_day: Vec<ParcelDay>,
}

/// `manifest.json`: `rows` (the [`ManifestRecord`]s of `manifest.csv`: the same fields, null
/// for an empty cell, numbers rounded as the CSV rounds them), `routes` (totals per route;
/// `drive_minutes` in minutes) and `parcels_per_day` (hand-over date, count, vials).
pub(crate) fn json(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let rows = plan.rows.iter().map(|r| &r.record).collect();
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
    fn the_file_reads_back_as_the_records_written_in_the_contract_order() {
        let p = tiny_plan();
        let rows = rows(&p.view()).unwrap();
        let bytes = csv(&rows).unwrap();
        let text = String::from_utf8(bytes.clone()).unwrap();
        assert_eq!(
            text.lines().next(),
            Some(MANIFEST_COLUMNS.join(",").as_str())
        );
        // serde's own field names are the contract's column list.
        let fields: Vec<&str> = super::super::cell::record(&rows[0].record)
            .unwrap()
            .into_iter()
            .map(|(k, _)| k)
            .collect();
        assert_eq!(fields, MANIFEST_COLUMNS);
        let read = crate::csvread::read::<ManifestRecord>("manifest.csv", &bytes);
        assert!(read.problems.is_empty(), "{:?}", read.problems);
        assert_eq!(read.rows.len(), rows.len());
        for ((line, got), (i, row)) in read.rows.iter().zip(rows.iter().enumerate()) {
            assert_eq!(*line, i as u64 + 2);
            let mut want = row.record.clone();
            // Written with 6 and 1 decimals, and to the minute.
            want.lat = want.lat.map(|x| round_to(x, 6));
            want.lon = want.lon.map(|x| round_to(x, 6));
            want.wasps_expected_alive = round_to(want.wasps_expected_alive, 1);
            want.eta = local_datetime(&iso_minutes(want.eta)).unwrap();
            want.release_by = local_datetime(&iso_minutes(want.release_by)).unwrap();
            assert_eq!(*got, want);
        }
        // Parcels are written with empty route cells.
        assert!(text.contains(",parcel,,,"), "{text}");
    }

    /// The keys of each object of a JSON array, in document order.
    struct KeysInOrder(Vec<Vec<String>>);

    impl<'de> serde::Deserialize<'de> for KeysInOrder {
        fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            struct Keys(Vec<String>);
            impl<'de> serde::Deserialize<'de> for Keys {
                fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                    struct V;
                    impl<'de> serde::de::Visitor<'de> for V {
                        type Value = Keys;
                        fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                            f.write_str("an object")
                        }
                        fn visit_map<A: serde::de::MapAccess<'de>>(
                            self,
                            mut m: A,
                        ) -> Result<Keys, A::Error> {
                            let mut keys = Vec::new();
                            while let Some(k) = m.next_key::<String>()? {
                                m.next_value::<serde::de::IgnoredAny>()?;
                                keys.push(k);
                            }
                            Ok(Keys(keys))
                        }
                    }
                    d.deserialize_map(V)
                }
            }
            let rows = Vec::<Keys>::deserialize(d)?;
            Ok(KeysInOrder(rows.into_iter().map(|k| k.0).collect()))
        }
    }

    #[test]
    fn json_rows_have_the_csv_columns_in_order_and_the_csv_values() {
        let p = tiny_plan();
        let view = p.view();
        let plan = Delivered::build(&view).unwrap();
        let bytes = json(&view, &plan).unwrap();
        #[derive(serde::Deserialize)]
        struct Doc {
            rows: KeysInOrder,
        }
        let keys = serde_json::from_slice::<Doc>(&bytes).unwrap().rows;
        let doc: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
        assert_eq!(keys.0.len(), plan.rows.len());
        for k in &keys.0 {
            assert_eq!(k, &MANIFEST_COLUMNS, "a manifest.json row's keys");
        }
        // Each JSON value is the CSV cell: text as is, numbers equal to the CSV's rounded text,
        // null for an empty cell.
        let csv = String::from_utf8(csv(&plan.rows).unwrap()).unwrap();
        let mut saw_null = false;
        for (line, obj) in csv.lines().skip(1).zip(doc["rows"].as_array().unwrap()) {
            for (cell, col) in line.split(',').zip(MANIFEST_COLUMNS) {
                match &obj[col] {
                    serde_json::Value::Null => {
                        saw_null = true;
                        assert_eq!(cell, "", "{col}")
                    }
                    serde_json::Value::String(t) => assert_eq!(cell, t, "{col}"),
                    serde_json::Value::Number(n) => {
                        assert_eq!(cell.parse::<f64>().ok(), n.as_f64(), "{col}")
                    }
                    other => panic!("{col}: {other}"),
                }
            }
        }
        assert!(saw_null, "a parcel row has null route cells");
    }

    #[test]
    fn bad_shipment_index_is_an_error_not_a_panic() {
        let mut p = tiny_plan();
        p.dispatch.routes[0].stops[0].shipment = 99;
        assert!(matches!(rows(&p.view()), Err(OutputError::Inconsistent(_))));
    }
}
