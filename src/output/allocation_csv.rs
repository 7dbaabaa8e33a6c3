//! `allocation.csv`: every candidate site, what it was allocated and, if nothing arrives, why.

use super::{Delivered, OutputError, PlanView, bad_site, fixed, priority_of};

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

/// One row per `Allocation::sites` entry, in site order. `vials` and `wasps_expected_alive`
/// are the allocation's; `reason` is the allocation's reason, or `undeliverable` when vials
/// were allocated but no route or parcel carries them. Priority with 4 decimals, wasps with
/// 1. O(S).
pub(crate) fn render(view: &PlanView, plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let sc = view.scenario;
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(ALLOCATION_COLUMNS)?;
    for o in &view.allocation.sites {
        let site = sc.sites.get(o.site).ok_or_else(|| bad_site(o.site))?;
        w.write_record([
            site.id.as_str(),
            site.kind().as_str(),
            &fixed(priority_of(view, o.site), 4),
            if o.eligible { "true" } else { "false" },
            plan.reason(view, o.site).unwrap_or(""),
            &o.vials.to_string(),
            &fixed(o.wasps_expected_alive, 1),
        ])?;
    }
    w.into_inner()
        .map_err(|e| OutputError::Csv(csv::Error::from(e.into_error())))
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
        let mut r = csv::Reader::from_reader(bytes.as_slice());
        assert_eq!(r.headers().unwrap(), ALLOCATION_COLUMNS.as_slice());
        let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
        assert_eq!(rows.len(), p.scenario.sites.len());
        let b3 = rows.iter().find(|r| &r[0] == "B3").unwrap();
        assert_eq!(&b3[4], "undeliverable");
        assert_eq!(&b3[5], "3");
        let b4 = rows.iter().find(|r| &r[0] == "B4").unwrap();
        assert_eq!((&b4[3], &b4[4]), ("false", "no-flush"));
        let b1 = rows.iter().find(|r| &r[0] == "B1").unwrap();
        assert_eq!((&b1[2], &b1[4]), ("0.9000", ""));
    }
}
