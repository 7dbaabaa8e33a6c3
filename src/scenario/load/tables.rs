//! The CSV files: facilities, supply, requests, scouting, fleet and overrides.
//!
//! Each reader validates every row and returns only the rows that passed, with their line so
//! that cross-file checks can point at them. Complexity: O(rows · log rows) per file (the
//! id sets are B-trees).

use std::collections::{BTreeMap, BTreeSet};

use chrono::NaiveDate;

use super::fields::{
    parse_date, parse_days, parse_enum, parse_f64, parse_lat, parse_lon, parse_time, parse_u32,
};
use super::limits;
use super::text::{Sink, Table, parse_id, read_table};
use crate::scenario::problems::Location;
use crate::scenario::{
    Delivery, Facility, FacilityId, HostPlant, LonLat, ScoutKind, ScoutPoint, Vehicle, VehicleId,
};

/// Facility ids → index (`None` for an id whose row had a problem); the whole map is `None`
/// when `facilities.csv` could not be read at all. References to an id that is written but
/// invalid are not reported again: its row already has a problem.
pub(super) type FacilityIndex = Option<BTreeMap<String, Option<usize>>>;

/// Checks that the id on `line` has not been seen in this file.
fn unique(
    t: &Table<'_>,
    seen: &mut BTreeMap<String, u64>,
    id: &str,
    line: u64,
    col: &str,
    sink: &mut Sink,
) -> bool {
    if let Some(first) = seen.get(id) {
        sink.problem(
            t.file,
            Location::Line(line),
            Some(col),
            Some(id),
            format!("duplicate id, first used on line {first}; ids must be unique in the file"),
        );
        false
    } else {
        seen.insert(id.to_string(), line);
        true
    }
}

fn location(t: &Table<'_>, line: u64, rec: &csv::StringRecord, sink: &mut Sink) -> Option<LonLat> {
    let lat = t.parse(line, rec, "lat", sink, parse_lat);
    let lon = t.parse(line, rec, "lon", sink, parse_lon);
    Some(LonLat {
        lon: lon?,
        lat: lat?,
    })
}

fn facility_ref(
    t: &Table<'_>,
    line: u64,
    rec: &csv::StringRecord,
    col: &str,
    facilities: &FacilityIndex,
    sink: &mut Sink,
) -> Option<usize> {
    let id = t.parse(line, rec, col, sink, parse_id)?;
    let index = facilities.as_ref()?;
    match index.get(&id) {
        Some(&i) => i,
        None => {
            let known: Vec<&str> = index.keys().map(String::as_str).take(10).collect();
            t.problem(
                line,
                rec,
                col,
                sink,
                format!(
                    "no facility with this id in facilities.csv (known: {})",
                    known.join(", ")
                ),
            );
            None
        }
    }
}

/// `facilities.csv`: `id,name,lat,lon,wasps_per_vial`.
pub(super) fn facilities(
    file: &str,
    text: &str,
    sink: &mut Sink,
) -> (Vec<Facility>, FacilityIndex) {
    let Some(t) = read_table(
        file,
        text,
        &["id", "name", "lat", "lon", "wasps_per_vial"],
        sink,
    ) else {
        return (Vec::new(), None);
    };
    let mut seen = BTreeMap::new();
    let mut out = Vec::new();
    let mut index: BTreeMap<String, Option<usize>> = BTreeMap::new();
    for (line, rec) in &t.rows {
        let line = *line;
        let id = t.parse(line, rec, "id", sink, parse_id);
        let fresh = id
            .as_ref()
            .is_some_and(|id| unique(&t, &mut seen, id, line, "id", sink));
        if let Some(id) = &id {
            index.entry(id.clone()).or_insert(None);
        }
        let loc = location(&t, line, rec, sink);
        let wpv = t.parse(line, rec, "wasps_per_vial", sink, |s| {
            parse_u32(s).and_then(|n| {
                if n > 0 {
                    Ok(n)
                } else {
                    Err("a vial holds at least 1 wasp; give wasps per vial at packing".into())
                }
            })
        });
        if let (Some(id), true, Some(location), Some(wasps_per_vial)) = (id, fresh, loc, wpv) {
            index.insert(id.clone(), Some(out.len()));
            out.push(Facility {
                id: FacilityId(id),
                name: t.cell(rec, "name").to_string(),
                location,
                wasps_per_vial,
            });
        }
    }
    if t.rows.is_empty() {
        sink.problem(
            file,
            Location::File,
            None,
            None,
            "no facilities; list at least one rearing facility",
        );
    }
    (out, Some(index))
}

/// A whole number of vials, at most [`limits::MAX_VIALS_PER_ROW`] (supply a day, a vehicle's
/// load).
fn vials_up_to_limit(s: &str) -> Result<u32, String> {
    let n = parse_u32(s)?;
    if n > limits::MAX_VIALS_PER_ROW {
        return Err(format!(
            "more than the limit of {} vials; a larger value is a typing mistake",
            limits::MAX_VIALS_PER_ROW
        ));
    }
    Ok(n)
}

/// One supply row: facility index, date, vials.
pub(super) struct SupplyRow {
    pub(super) facility: usize,
    pub(super) date: NaiveDate,
    pub(super) vials: u32,
}

/// `supply.csv`: `facility_id,date,vials`; dates must fall in the week when it is known.
pub(super) fn supply(
    file: &str,
    text: &str,
    facilities: &FacilityIndex,
    week_start: Option<NaiveDate>,
    sink: &mut Sink,
) -> Vec<SupplyRow> {
    let Some(t) = read_table(file, text, &["facility_id", "date", "vials"], sink) else {
        return Vec::new();
    };
    let mut out = Vec::new();
    let mut seen: BTreeMap<(usize, NaiveDate), u64> = BTreeMap::new();
    let mut total: BTreeMap<(usize, NaiveDate), u64> = BTreeMap::new();
    for (line, rec) in &t.rows {
        let line = *line;
        let facility = facility_ref(&t, line, rec, "facility_id", facilities, sink);
        let date = t.parse(line, rec, "date", sink, |s| {
            let d = parse_date(s)?;
            match week_start {
                Some(w) if d < w || d > w + chrono::Days::new(6) => Err(format!(
                    "the date is outside the planning week {w} .. {}; supply must be packed in \
                     the week",
                    w + chrono::Days::new(6)
                )),
                _ => Ok(d),
            }
        });
        let vials = t.parse(line, rec, "vials", sink, vials_up_to_limit);
        if let (Some(facility), Some(date), Some(vials)) = (facility, date, vials) {
            if let Some(first) = seen.insert((facility, date), line) {
                sink.warning(
                    file,
                    Location::Line(line),
                    format!("same facility and date as line {first}; the vials are added up"),
                );
            }
            let day = total.entry((facility, date)).or_insert(0u64);
            *day += u64::from(vials);
            if *day > u64::from(limits::MAX_VIALS_PER_ROW) {
                t.problem(
                    line,
                    rec,
                    "vials",
                    sink,
                    format!(
                        "with the rows above for the same facility and date, {day} vials, more \
                         than the limit of {} a day; check the counts",
                        limits::MAX_VIALS_PER_ROW
                    ),
                );
            }
            out.push(SupplyRow {
                facility,
                date,
                vials,
            });
        }
    }
    out
}

/// One dooryard request as read, before it becomes a site.
pub(super) struct RequestRow {
    pub(super) line: u64,
    pub(super) id: String,
    pub(super) location: LonLat,
    pub(super) request: crate::scenario::Request,
}

/// `requests.csv`: `id,received,lat,lon,address,host_plant,insecticide_free,delivery`. Other
/// columns (names, phones, e-mails) are never read.
pub(super) fn requests(
    file: &str,
    text: &str,
    sink: &mut Sink,
) -> (Vec<RequestRow>, Option<BTreeSet<String>>) {
    let cols = [
        "id",
        "received",
        "lat",
        "lon",
        "address",
        "host_plant",
        "insecticide_free",
        "delivery",
    ];
    let Some(t) = read_table(file, text, &cols, sink) else {
        return (Vec::new(), None);
    };
    let mut seen = BTreeMap::new();
    let mut out = Vec::new();
    for (line, rec) in &t.rows {
        let line = *line;
        let id = t.parse(line, rec, "id", sink, parse_id);
        let fresh = id
            .as_ref()
            .is_some_and(|id| unique(&t, &mut seen, id, line, "id", sink));
        let received = t.parse(line, rec, "received", sink, parse_date);
        let loc = location(&t, line, rec, sink);
        let address = t.cell(rec, "address");
        if address.is_empty() {
            // The value is not echoed: addresses are personal data.
            sink.problem(
                file,
                Location::Line(line),
                Some("address"),
                None,
                "an address is required for the route sheet or parcel label",
            );
        }
        let host_plant = t.parse(line, rec, "host_plant", sink, |s| {
            parse_enum(
                s,
                &[
                    ("citrus", HostPlant::Citrus),
                    ("orange-jasmine", HostPlant::OrangeJasmine),
                    ("none", HostPlant::None),
                ],
            )
        });
        let insecticide_free = t.parse(line, rec, "insecticide_free", sink, |s| {
            parse_enum(s, &[("yes", true), ("no", false)])
        });
        let delivery = t.parse(line, rec, "delivery", sink, |s| {
            parse_enum(
                s,
                &[
                    ("route", Delivery::Route),
                    ("parcel", Delivery::Parcel),
                    ("either", Delivery::Either),
                ],
            )
        });
        if let (
            Some(id),
            true,
            Some(received),
            Some(location),
            false,
            Some(host_plant),
            Some(insecticide_free),
            Some(delivery),
        ) = (
            id,
            fresh,
            received,
            loc,
            address.is_empty(),
            host_plant,
            insecticide_free,
            delivery,
        ) {
            out.push(RequestRow {
                line,
                id,
                location,
                request: crate::scenario::Request {
                    received,
                    address: address.to_string(),
                    host_plant,
                    insecticide_free,
                    delivery,
                },
            });
        }
    }
    (out, Some(seen.into_keys().collect()))
}

/// `scouting.csv` rows with their lines (for the distance warning).
pub(super) fn scouting(file: &str, text: &str, sink: &mut Sink) -> Vec<(u64, ScoutPoint)> {
    let Some(t) = read_table(
        file,
        text,
        &["id", "date", "lat", "lon", "kind", "value"],
        sink,
    ) else {
        return Vec::new();
    };
    let mut seen = BTreeMap::new();
    let mut out = Vec::new();
    for (line, rec) in &t.rows {
        let line = *line;
        let id = t.parse(line, rec, "id", sink, parse_id);
        let fresh = id
            .as_ref()
            .is_some_and(|id| unique(&t, &mut seen, id, line, "id", sink));
        let date = t.parse(line, rec, "date", sink, parse_date);
        let loc = location(&t, line, rec, sink);
        let kind = t.parse(line, rec, "kind", sink, |s| {
            parse_enum(
                s,
                &[
                    ("tap_adults", ScoutKind::TapAdults),
                    ("flush_infested_pct", ScoutKind::FlushInfestedPct),
                    ("greening_positive", ScoutKind::GreeningPositive),
                ],
            )
        });
        let value = t.parse(line, rec, "value", sink, |s| {
            let v = parse_f64(s)?;
            if v < 0.0 {
                return Err("a scouting value is 0 or more".into());
            }
            if kind == Some(ScoutKind::FlushInfestedPct) && v > 100.0 {
                return Err("flush_infested_pct is a percentage: 0 to 100".into());
            }
            if v > limits::MAX_SCOUT_COUNT {
                return Err(format!(
                    "a count is at most {} (limit of the format); a larger value is a typing \
                     or unit mistake",
                    limits::MAX_SCOUT_COUNT
                ));
            }
            Ok(v)
        });
        if let (Some(id), true, Some(date), Some(location), Some(kind), Some(value)) =
            (id, fresh, date, loc, kind, value)
        {
            out.push((
                line,
                ScoutPoint {
                    id,
                    date,
                    location,
                    kind,
                    value,
                },
            ));
        }
    }
    out
}

/// `fleet.csv`: `vehicle_id,depot_id,days,capacity_vials,shift_start,shift_hours`.
pub(super) fn fleet(
    file: &str,
    text: &str,
    facilities: &FacilityIndex,
    sink: &mut Sink,
) -> Vec<Vehicle> {
    let cols = [
        "vehicle_id",
        "depot_id",
        "days",
        "capacity_vials",
        "shift_start",
        "shift_hours",
    ];
    let Some(t) = read_table(file, text, &cols, sink) else {
        return Vec::new();
    };
    let mut seen = BTreeMap::new();
    let mut out = Vec::new();
    for (line, rec) in &t.rows {
        let line = *line;
        let id = t.parse(line, rec, "vehicle_id", sink, parse_id);
        let fresh = id
            .as_ref()
            .is_some_and(|id| unique(&t, &mut seen, id, line, "vehicle_id", sink));
        let depot = facility_ref(&t, line, rec, "depot_id", facilities, sink);
        let days = t.parse(line, rec, "days", sink, parse_days);
        let capacity = t.parse(line, rec, "capacity_vials", sink, vials_up_to_limit);
        let shift_start = t.parse(line, rec, "shift_start", sink, parse_time);
        let shift_hours = t.parse(line, rec, "shift_hours", sink, |s| {
            let h = parse_f64(s)?;
            if h > 0.0 && h <= 16.0 {
                Ok(h)
            } else {
                Err("a shift lasts more than 0 and at most 16 hours".into())
            }
        });
        if let (
            Some(id),
            true,
            Some(depot),
            Some(days),
            Some(capacity_vials),
            Some(shift_start),
            Some(shift_hours),
        ) = (id, fresh, depot, days, capacity, shift_start, shift_hours)
        {
            out.push(Vehicle {
                id: VehicleId(id),
                depot,
                days,
                capacity_vials,
                shift_start,
                shift_hours,
            });
        }
    }
    out
}

/// An override as read: the site id (resolved by the caller), action and vials.
pub(super) struct OverrideRow {
    pub(super) line: u64,
    pub(super) site_id: String,
    pub(super) action: crate::scenario::OverrideAction,
}

/// `overrides.csv`: `site_id,action,vials`. Sites are resolved by the caller.
pub(super) fn overrides(file: &str, text: &str, sink: &mut Sink) -> Vec<OverrideRow> {
    use crate::scenario::OverrideAction;
    let Some(t) = read_table(file, text, &["site_id", "action", "vials"], sink) else {
        return Vec::new();
    };
    let mut seen = BTreeMap::new();
    let mut out = Vec::new();
    for (line, rec) in &t.rows {
        let line = *line;
        let site = t.parse(line, rec, "site_id", sink, parse_id);
        let fresh = site.as_ref().is_some_and(|id| {
            if let Some(first) = seen.get(id) {
                t.problem(
                    line,
                    rec,
                    "site_id",
                    sink,
                    format!("the site already has an override on line {first}; keep one per site"),
                );
                false
            } else {
                seen.insert(id.clone(), line);
                true
            }
        });
        let action = t.parse(line, rec, "action", sink, |s| {
            parse_enum(s, &[("force", true), ("forbid", false)])
        });
        let vials = t.parse(line, rec, "vials", sink, |s| {
            if s.is_empty() {
                return Ok(None);
            }
            match parse_u32(s)? {
                0 => Err("vials must be empty (use the standard amount) or 1 or more".into()),
                n => Ok(Some(n)),
            }
        });
        let action = match (action, vials) {
            (Some(true), Some(vials)) => Some(OverrideAction::Force { vials }),
            (Some(false), Some(None)) => Some(OverrideAction::Forbid),
            (Some(false), Some(Some(_))) => {
                t.problem(
                    line,
                    rec,
                    "vials",
                    sink,
                    "a forbidden site gets no vials; leave vials empty",
                );
                None
            }
            _ => None,
        };
        if let (Some(site_id), true, Some(action)) = (site, fresh, action) {
            out.push(OverrideRow {
                line,
                site_id,
                action,
            });
        }
    }
    out
}
