//! `allocation.csv`: every candidate site, what it was allocated and, if nothing arrives, why.

use serde::Serialize;

use super::{Delivered, OutputError, PlanView, bad_site, priority_of};
use crate::csvread::{Cells, CsvRow};
use crate::scenario::SiteKind;

/// The `allocation.csv` header, the contract's column order.
pub const ALLOCATION_COLUMNS: [&str; 7] = [
    "site_id",
    "site_kind",
    "priority",
    "eligible",
    "reason",
    "vials",
    "wasps_expected_alive",
];

/// One `allocation.csv` row as the file holds it: written by `plan` and read back by
/// `ledger commit` and `compare` (through [`crate::csvread`]). Fields in
/// [`ALLOCATION_COLUMNS`] order (a test ties the two).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AllocationRecord {
    /// Site id.
    pub site_id: String,
    /// Block or dooryard.
    pub site_kind: SiteKind,
    /// Priority weight (≥ 0, unitless), 4 decimals.
    #[serde(serialize_with = "super::cell::fixed4")]
    pub priority: f64,
    /// Whether the site could get vials this week.
    pub eligible: bool,
    /// Why nothing arrives (e.g. `below-cutoff`, `undeliverable`); empty when served.
    pub reason: String,
    /// Vials allocated.
    pub vials: u32,
    /// Expected live wasps at release, wasps, 1 decimal.
    #[serde(serialize_with = "super::cell::fixed1")]
    pub wasps_expected_alive: f64,
}

impl CsvRow for AllocationRecord {
    const COLUMNS: &'static [&'static str] = &ALLOCATION_COLUMNS;
    const UNIQUE: Option<(&'static str, &'static str)> =
        Some(("site_id", "the file has one row per site"));

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let number = |s: &str, fix: &str| {
            s.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite() && *x >= 0.0)
                .ok_or_else(|| fix.to_string())
        };
        let site_id = c.required("site_id", "every row needs a site id");
        let site_kind = c.parse("site_kind", "must be block or dooryard");
        let priority = c.parse_with("priority", |s| number(s, "a priority is a number ≥ 0"));
        let eligible = c.parse("eligible", "must be true or false");
        let vials = c.parse("vials", "vials are a whole number ≥ 0");
        let alive = c.parse_with("wasps_expected_alive", |s| {
            number(s, "expected live wasps are a finite number ≥ 0")
        });
        Some(AllocationRecord {
            site_id: site_id?,
            site_kind: site_kind?,
            priority: priority?,
            eligible: eligible?,
            reason: c.text("reason").to_string(),
            vials: vials?,
            wasps_expected_alive: alive?,
        })
    }
}

/// One row per `Allocation::sites` entry, in site order. `vials` and `wasps_expected_alive`
/// are the allocation's; `reason` is the allocation's reason, or `undeliverable` when vials
/// were allocated but no route or parcel carries them. Priority with 4 decimals, wasps with
/// 1. O(S).
pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let records = view
        .allocation
        .sites
        .iter()
        .map(|o| {
            let site = sc.sites.get(o.site).ok_or_else(|| bad_site(o.site))?;
            Ok(AllocationRecord {
                site_id: site.id.0.clone(),
                site_kind: site.kind(),
                priority: priority_of(view, o.site),
                eligible: o.eligible,
                reason: plan.reason(view, o.site).unwrap_or("").to_string(),
                vials: o.vials,
                wasps_expected_alive: o.wasps_expected_alive,
            })
        })
        .collect::<Result<Vec<_>, OutputError>>()?;
    super::write_csv(&ALLOCATION_COLUMNS, records)
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    #[test]
    fn every_site_has_a_row_and_unserved_ones_a_reason() {
        let p = tiny_plan();
        let v = p.view();
        let plan = Delivered::build(&v).unwrap();
        let bytes = render(&v, &plan).unwrap();
        let text = String::from_utf8(bytes.clone()).unwrap();
        assert_eq!(
            text.lines().next(),
            Some(ALLOCATION_COLUMNS.join(",").as_str())
        );
        let read = crate::csvread::read::<AllocationRecord>("allocation.csv", &bytes);
        assert!(read.problems.is_empty(), "{:?}", read.problems);
        let rows: Vec<AllocationRecord> = read.rows.into_iter().map(|(_, r)| r).collect();
        assert_eq!(rows.len(), p.scenario.sites.len());
        let b3 = rows.iter().find(|r| r.site_id == "B3").unwrap();
        assert_eq!((b3.reason.as_str(), b3.vials), ("undeliverable", 3));
        let b4 = rows.iter().find(|r| r.site_id == "B4").unwrap();
        assert_eq!((b4.eligible, b4.reason.as_str()), (false, "no-flush"));
        let b1 = rows.iter().find(|r| r.site_id == "B1").unwrap();
        assert_eq!((b1.priority, b1.reason.as_str()), (0.9, ""));
        assert!(text.contains("\nB1,block,0.9000,true,,"), "{text}");
    }

    #[test]
    fn the_record_serializes_the_columns_in_the_contract_order() {
        let record = AllocationRecord {
            site_id: "B1".into(),
            site_kind: SiteKind::Block,
            priority: 0.5,
            eligible: true,
            reason: String::new(),
            vials: 2,
            wasps_expected_alive: 3.24,
        };
        let fields: Vec<&str> = super::super::cell::record(&record)
            .unwrap()
            .into_iter()
            .map(|(k, _)| k)
            .collect();
        assert_eq!(fields, ALLOCATION_COLUMNS);
        let text =
            String::from_utf8(super::super::write_csv(&ALLOCATION_COLUMNS, [record]).unwrap())
                .unwrap();
        assert_eq!(
            text,
            format!(
                "{}\nB1,block,0.5000,true,,2,3.2\n",
                ALLOCATION_COLUMNS.join(",")
            )
        );
    }
}
