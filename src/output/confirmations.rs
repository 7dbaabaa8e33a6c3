//! `confirmations.csv`: the form a coordinator fills in after the week and imports with
//! `broodcast ledger confirm`. One row per delivered shipment, in manifest order, with
//! exactly the columns that command reads ([`CONFIRMATION_COLUMNS`]); only `shipment_id` is
//! filled in. `status` is left empty on purpose, so that an unfilled form is refused by
//! `ledger confirm` (naming the line) instead of confirming releases that never happened.

use super::{Delivered, OutputError};

/// The header of `confirmations.csv`: the columns `ledger confirm` reads
/// (`crate::ledger::read_confirmations`), in its order.
pub const CONFIRMATION_COLUMNS: [&str; 4] = ["shipment_id", "status", "released_at", "note"];

/// One row per manifest row. O(n).
pub(crate) fn render(plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(CONFIRMATION_COLUMNS)?;
    for r in &plan.rows {
        w.write_record([r.shipment_id.as_str(), "", "", ""])?;
    }
    w.into_inner()
        .map_err(|e| OutputError::Csv(csv::Error::from(e.into_error())))
}

#[cfg(test)]
mod tests {
    use super::super::fixture::tiny_plan;
    use super::*;

    #[test]
    fn one_blank_row_per_manifest_row() {
        let p = tiny_plan();
        let plan = Delivered::build(&p.view()).unwrap();
        let text = String::from_utf8(render(&plan).unwrap()).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], "shipment_id,status,released_at,note");
        assert_eq!(lines.len(), 1 + plan.rows.len());
        for (line, row) in lines[1..].iter().zip(&plan.rows) {
            assert_eq!(*line, format!("{},,,", row.shipment_id));
        }
    }
}
