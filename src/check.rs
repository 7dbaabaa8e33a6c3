//! The check summary: what a loaded scenario contains, for the coordinator to confirm before
//! planning (`broodcast check`). Counts, the week's supply by facility and day, total block
//! area, the extent of all points, and the loader's warnings.
//!
//! All maps are `BTreeMap` and all lists follow input order, so the JSON and the text are
//! byte-identical for the same scenario. Complexity: O(sites + scouting + supply rows ·
//! facilities).

use std::collections::BTreeMap;
use std::fmt::Write as _;

use serde::Serialize;

use crate::scenario::{
    Delivery, Flush, HostPlant, LonLat, Management, OverrideAction, Scenario, ScoutKind,
};

/// Everything `broodcast check` reports about a valid scenario.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CheckSummary {
    /// `scenario.json` `name`.
    pub name: String,
    /// First day of the week (a Monday), ISO 8601.
    pub week_start: String,
    /// Last day of the week (a Sunday), ISO 8601.
    pub week_end: String,
    /// Number of facilities.
    pub facilities: usize,
    /// Number of grove blocks.
    pub blocks: usize,
    /// Blocks per `management` value (every value listed, zeros included).
    pub blocks_by_management: BTreeMap<String, usize>,
    /// Blocks per `flush` value (every value listed, zeros included).
    pub blocks_by_flush: BTreeMap<String, usize>,
    /// Total geodesic area of all blocks, hectares.
    pub block_area_ha: f64,
    /// Number of dooryard requests.
    pub requests: usize,
    /// Requests per `host_plant` value.
    pub requests_by_host_plant: BTreeMap<String, usize>,
    /// Requests per `delivery` value.
    pub requests_by_delivery: BTreeMap<String, usize>,
    /// Number of scouting observations.
    pub scouting: usize,
    /// Scouting observations per `kind`.
    pub scouting_by_kind: BTreeMap<String, usize>,
    /// Number of vehicles.
    pub vehicles: usize,
    /// Sum of vehicle capacities on one run each, vials.
    pub vehicle_capacity_vials: u64,
    /// Forced sites in `overrides.csv`.
    pub overrides_force: usize,
    /// Forbidden sites in `overrides.csv`.
    pub overrides_forbid: usize,
    /// Location ids in the travel-time matrix, when one is given.
    pub travel_matrix_ids: Option<usize>,
    /// Supply per facility (facilities.csv order) and day of the week.
    pub supply: Vec<FacilitySupply>,
    /// Supply per day over all facilities, Monday first.
    pub supply_by_day: Vec<DaySupply>,
    /// Vials packed in the week, all facilities.
    pub total_vials: u64,
    /// Wasps packed in the week (vials × wasps per vial), all facilities.
    pub total_wasps: u64,
    /// Smallest box holding every site location and facility, degrees; `None` when empty.
    pub bounding_box: Option<BoundingBox>,
    /// Blocks eligible on at least one day of the week (flush, insecticide window, overrides).
    pub eligible_blocks: usize,
    /// Requests eligible (host plant, insecticide free, overrides).
    pub eligible_requests: usize,
    /// Sites ineligible all week, by reason code (`no-flush`, `insecticide-window`, ...).
    pub ineligible_by_reason: BTreeMap<String, usize>,
    /// Loader warnings, rendered as `file:line: message`.
    pub warnings: Vec<String>,
}

/// One facility's supply over the week.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FacilitySupply {
    /// Facility id.
    pub facility_id: String,
    /// Facility name.
    pub name: String,
    /// Wasps per vial at packing.
    pub wasps_per_vial: u32,
    /// The seven days, Monday first.
    pub days: Vec<DaySupply>,
    /// Vials packed in the week.
    pub vials: u64,
    /// Wasps packed in the week.
    pub wasps: u64,
}

/// Supply on one day.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DaySupply {
    /// ISO 8601 date.
    pub date: String,
    /// Vials packed.
    pub vials: u64,
    /// Wasps packed (vials × wasps per vial).
    pub wasps: u64,
}

/// A longitude/latitude box, degrees.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct BoundingBox {
    /// West edge, degrees east.
    pub min_lon: f64,
    /// South edge, degrees north.
    pub min_lat: f64,
    /// East edge, degrees east.
    pub max_lon: f64,
    /// North edge, degrees north.
    pub max_lat: f64,
}

fn management_name(m: Management) -> &'static str {
    match m {
        Management::Conventional => "conventional",
        Management::Organic => "organic",
        Management::Abandoned => "abandoned",
    }
}

fn flush_name(f: Flush) -> &'static str {
    match f {
        Flush::None => "none",
        Flush::Light => "light",
        Flush::Heavy => "heavy",
    }
}

fn host_plant_name(h: HostPlant) -> &'static str {
    match h {
        HostPlant::Citrus => "citrus",
        HostPlant::OrangeJasmine => "orange-jasmine",
        HostPlant::None => "none",
    }
}

fn delivery_name(d: Delivery) -> &'static str {
    match d {
        Delivery::Route => "route",
        Delivery::Parcel => "parcel",
        Delivery::Either => "either",
    }
}

fn scout_kind_name(k: ScoutKind) -> &'static str {
    match k {
        ScoutKind::TapAdults => "tap_adults",
        ScoutKind::FlushInfestedPct => "flush_infested_pct",
        ScoutKind::GreeningPositive => "greening_positive",
    }
}

fn zeros(names: &[&str]) -> BTreeMap<String, usize> {
    names.iter().map(|n| (n.to_string(), 0)).collect()
}

fn bump(map: &mut BTreeMap<String, usize>, key: &str) {
    *map.entry(key.to_string()).or_insert(0) += 1;
}

/// Summarises a validated scenario.
pub fn summarize(scenario: &Scenario) -> CheckSummary {
    let mut blocks_by_management = zeros(&["conventional", "organic", "abandoned"]);
    let mut blocks_by_flush = zeros(&["none", "light", "heavy"]);
    let mut requests_by_host_plant = zeros(&["citrus", "orange-jasmine", "none"]);
    let mut requests_by_delivery = zeros(&["route", "parcel", "either"]);
    let mut scouting_by_kind = zeros(&["tap_adults", "flush_infested_pct", "greening_positive"]);
    let (mut blocks, mut requests, mut block_area_ha) = (0, 0, 0.0);
    for site in &scenario.sites {
        if let Some(b) = site.as_block() {
            blocks += 1;
            block_area_ha += b.area_ha;
            bump(&mut blocks_by_management, management_name(b.management));
            bump(&mut blocks_by_flush, flush_name(b.flush));
        }
        if let Some(r) = site.as_request() {
            requests += 1;
            bump(&mut requests_by_host_plant, host_plant_name(r.host_plant));
            bump(&mut requests_by_delivery, delivery_name(r.delivery));
        }
    }
    for s in &scenario.scouting {
        bump(&mut scouting_by_kind, scout_kind_name(s.kind));
    }

    let (mut eligible_blocks, mut eligible_requests) = (0, 0);
    let mut ineligible_by_reason = BTreeMap::new();
    for (i, site) in scenario.sites.iter().enumerate() {
        match crate::eligibility::week_reason(scenario, i) {
            Some(r) => bump(&mut ineligible_by_reason, r.code()),
            None if site.as_block().is_some() => eligible_blocks += 1,
            None => eligible_requests += 1,
        }
    }

    let dates = scenario.week_dates();
    let supply: Vec<FacilitySupply> = scenario
        .facilities
        .iter()
        .enumerate()
        .map(|(fi, f)| {
            let per = u64::from(f.wasps_per_vial);
            let days: Vec<DaySupply> = dates
                .iter()
                .map(|&d| {
                    let vials = u64::from(scenario.supply_vials(fi, d));
                    DaySupply {
                        date: d.to_string(),
                        vials,
                        wasps: vials.saturating_mul(per),
                    }
                })
                .collect();
            FacilitySupply {
                facility_id: f.id.to_string(),
                name: f.name.clone(),
                wasps_per_vial: f.wasps_per_vial,
                vials: days.iter().map(|d| d.vials).sum(),
                wasps: days.iter().map(|d| d.wasps).sum(),
                days,
            }
        })
        .collect();
    let supply_by_day: Vec<DaySupply> = dates
        .iter()
        .enumerate()
        .map(|(i, d)| DaySupply {
            date: d.to_string(),
            vials: supply.iter().map(|f| f.days[i].vials).sum(),
            wasps: supply.iter().map(|f| f.days[i].wasps).sum(),
        })
        .collect();

    let points = scenario
        .sites
        .iter()
        .map(|s| s.location)
        .chain(scenario.facilities.iter().map(|f| f.location));
    let bounding_box = points.fold(None, |acc: Option<BoundingBox>, LonLat { lon, lat }| {
        Some(match acc {
            None => BoundingBox {
                min_lon: lon,
                min_lat: lat,
                max_lon: lon,
                max_lat: lat,
            },
            Some(b) => BoundingBox {
                min_lon: b.min_lon.min(lon),
                min_lat: b.min_lat.min(lat),
                max_lon: b.max_lon.max(lon),
                max_lat: b.max_lat.max(lat),
            },
        })
    });

    CheckSummary {
        name: scenario.name.clone(),
        week_start: dates[0].to_string(),
        week_end: dates[6].to_string(),
        facilities: scenario.facilities.len(),
        blocks,
        blocks_by_management,
        blocks_by_flush,
        block_area_ha,
        requests,
        requests_by_host_plant,
        requests_by_delivery,
        scouting: scenario.scouting.len(),
        scouting_by_kind,
        vehicles: scenario.fleet.len(),
        vehicle_capacity_vials: scenario
            .fleet
            .iter()
            .map(|v| u64::from(v.capacity_vials))
            .sum(),
        overrides_force: scenario
            .overrides
            .iter()
            .filter(|o| matches!(o.action, OverrideAction::Force { .. }))
            .count(),
        overrides_forbid: scenario
            .overrides
            .iter()
            .filter(|o| o.action == OverrideAction::Forbid)
            .count(),
        travel_matrix_ids: scenario.travel.matrix.as_ref().map(|m| m.ids.len()),
        total_vials: supply.iter().map(|f| f.vials).sum(),
        total_wasps: supply.iter().map(|f| f.wasps).sum(),
        supply,
        supply_by_day,
        bounding_box,
        eligible_blocks,
        eligible_requests,
        ineligible_by_reason,
        warnings: scenario.warnings.iter().map(ToString::to_string).collect(),
    }
}

fn breakdown(map: &BTreeMap<String, usize>) -> String {
    map.iter()
        .map(|(k, v)| format!("{k} {v}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Right-aligns `cells` under column widths; the first column is left-aligned.
fn row(out: &mut String, cells: &[String], widths: &[usize]) {
    let mut line = String::new();
    for (i, (c, w)) in cells.iter().zip(widths).enumerate() {
        if i == 0 {
            let _ = write!(line, "{c:<w$}");
        } else {
            let _ = write!(line, "  {c:>w$}");
        }
    }
    out.push_str(line.trim_end());
    out.push('\n');
}

impl CheckSummary {
    /// A plain-text report for the coordinator: counts, a supply table (vials per day, vials
    /// and wasps per week), area, extent and warnings.
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        let _ = writeln!(out, "Scenario: {}", self.name);
        let _ = writeln!(
            out,
            "Week:     {} (Mon) to {} (Sun)",
            self.week_start, self.week_end
        );
        out.push('\n');

        let _ = writeln!(out, "Inputs");
        let _ = writeln!(out, "  facilities   {}", self.facilities);
        let _ = writeln!(
            out,
            "  blocks       {}  (management: {}; flush: {})",
            self.blocks,
            breakdown(&self.blocks_by_management),
            breakdown(&self.blocks_by_flush)
        );
        let _ = writeln!(out, "  block area   {:.1} ha", self.block_area_ha);
        let _ = writeln!(
            out,
            "  requests     {}  (host plant: {}; delivery: {})",
            self.requests,
            breakdown(&self.requests_by_host_plant),
            breakdown(&self.requests_by_delivery)
        );
        let _ = writeln!(
            out,
            "  scouting     {}  ({})",
            self.scouting,
            breakdown(&self.scouting_by_kind)
        );
        let _ = writeln!(
            out,
            "  vehicles     {}  (capacity {} vials per run, all vehicles)",
            self.vehicles, self.vehicle_capacity_vials
        );
        let _ = writeln!(
            out,
            "  overrides    force {}, forbid {}",
            self.overrides_force, self.overrides_forbid
        );
        match self.travel_matrix_ids {
            Some(n) => {
                let _ = writeln!(out, "  travel       matrix of {n} locations");
            }
            None => {
                let _ = writeln!(out, "  travel       geodesic distance × circuity ÷ speed");
            }
        }
        if let Some(b) = self.bounding_box {
            let _ = writeln!(
                out,
                "  extent       lon {:.4} to {:.4}, lat {:.4} to {:.4}",
                b.min_lon, b.max_lon, b.min_lat, b.max_lat
            );
        }
        out.push('\n');

        let _ = writeln!(
            out,
            "Supply (vials packed per day; week totals in vials and wasps)"
        );
        let mut header: Vec<String> = vec!["facility".into()];
        header.extend(["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"].map(String::from));
        header.extend(["vials".into(), "wasps".into()]);
        let mut rows: Vec<Vec<String>> = vec![header];
        for f in &self.supply {
            let mut r = vec![f.facility_id.clone()];
            r.extend(f.days.iter().map(|d| d.vials.to_string()));
            r.extend([f.vials.to_string(), f.wasps.to_string()]);
            rows.push(r);
        }
        let mut total = vec!["total vials".to_string()];
        total.extend(self.supply_by_day.iter().map(|d| d.vials.to_string()));
        total.extend([self.total_vials.to_string(), self.total_wasps.to_string()]);
        rows.push(total);
        let mut wasps = vec!["total wasps".to_string()];
        wasps.extend(self.supply_by_day.iter().map(|d| d.wasps.to_string()));
        wasps.extend([String::new(), String::new()]);
        rows.push(wasps);
        let widths: Vec<usize> = (0..rows[0].len())
            .map(|i| rows.iter().map(|r| r[i].chars().count()).max().unwrap_or(0))
            .collect();
        for r in &rows {
            out.push_str("  ");
            row(&mut out, r, &widths);
        }
        out.push('\n');

        let _ = writeln!(
            out,
            "Eligible: {} of {} blocks, {} of {} requests (on at least one day of the week)",
            self.eligible_blocks, self.blocks, self.eligible_requests, self.requests
        );
        if !self.ineligible_by_reason.is_empty() {
            let _ = writeln!(
                out,
                "  ineligible all week: {}",
                breakdown(&self.ineligible_by_reason)
            );
        }
        out.push('\n');
        if self.warnings.is_empty() {
            let _ = writeln!(out, "Warnings: none");
        } else {
            let _ = writeln!(out, "Warnings ({})", self.warnings.len());
            for w in &self.warnings {
                let _ = writeln!(out, "  {w}");
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::fixture::tiny;

    #[test]
    fn counts_and_supply_of_the_tiny_fixture() {
        let s = summarize(&tiny());
        assert_eq!(s.facilities, 2);
        assert_eq!(s.blocks, 6);
        assert_eq!(s.requests, 4);
        assert_eq!(s.blocks_by_management["conventional"], 4);
        assert_eq!(s.blocks_by_management["organic"], 1);
        assert_eq!(s.blocks_by_flush["none"], 1);
        assert_eq!(s.requests_by_delivery["either"], 2);
        assert_eq!(s.requests_by_host_plant["orange-jasmine"], 1);
        assert_eq!(s.scouting_by_kind["tap_adults"], 3);
        assert_eq!(s.vehicles, 2);
        assert_eq!(s.vehicle_capacity_vials, 35);
        // 6 vials a weekday at each facility; F1 100 wasps/vial, F2 120.
        assert_eq!(s.total_vials, 60);
        assert_eq!(s.total_wasps, 30 * 100 + 30 * 120);
        assert_eq!(s.supply[1].days[0].wasps, 720);
        assert_eq!(s.supply_by_day[5].vials, 0);
        assert_eq!(s.supply_by_day[0].wasps, 600 + 720);
        let b = s.bounding_box.unwrap();
        assert_eq!(
            (b.min_lon, b.max_lon, b.min_lat, b.max_lat),
            (79.97, 80.05, 26.7, 27.0)
        );
        // Six squares of 0.004° side near 27° N, about 17.6 ha each (hand calculation).
        assert!(
            (s.block_area_ha - 6.0 * 17.6).abs() < 3.0,
            "{}",
            s.block_area_ha
        );
    }

    #[test]
    fn text_has_a_supply_table_and_is_deterministic() {
        let s = summarize(&tiny());
        let text = s.to_text();
        assert!(
            text.contains("Week:     2027-03-01 (Mon) to 2027-03-07 (Sun)"),
            "{text}"
        );
        let f2 = text
            .lines()
            .find(|l| l.trim_start().starts_with("F2"))
            .unwrap();
        let cells: Vec<&str> = f2.split_whitespace().collect();
        assert_eq!(
            cells,
            ["F2", "6", "6", "6", "6", "6", "0", "0", "30", "3600"]
        );
        assert!(text.contains("Warnings: none"));
        assert_eq!(text, summarize(&tiny()).to_text());
        let json = serde_json::to_string(&s).unwrap();
        assert!(json.contains("\"total_wasps\":6600"), "{json}");
    }

    #[test]
    fn warnings_are_listed() {
        let mut sc = tiny();
        sc.warnings.push(crate::scenario::Warning {
            file: "requests.csv".into(),
            location: crate::scenario::Location::Line(3),
            message: "far away".into(),
        });
        let text = summarize(&sc).to_text();
        assert!(
            text.contains("Warnings (1)\n  requests.csv:3: far away"),
            "{text}"
        );
    }
}
