//! `confirmations.csv`: the form a coordinator fills in after the week and imports with
//! `broodcast ledger confirm`. One row per delivered shipment, in manifest order, with
//! exactly the columns that command reads ([`CONFIRMATION_COLUMNS`]); only `shipment_id` is
//! filled in. `status` is left empty on purpose, so that an unfilled form is refused by
//! `ledger confirm` (naming the line) instead of confirming releases that never happened.

use super::{Delivered, OutputError};

/// The header of `confirmations.csv`: the columns `ledger confirm` reads
/// (`crate::ledger::read_confirmations`), in its order.
pub const CONFIRMATION_COLUMNS: [&str; 4] = ["shipment_id", "status", "released_at", "note"];

/// One `confirmations.csv` row as written: the shipment id, and the three columns the
/// coordinator fills in left empty. Fields in [`CONFIRMATION_COLUMNS`] order (the CSV writer
/// checks it); `ledger confirm` reads the filled-in form back as
/// `crate::ledger::Confirmation`.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ConfirmationRecord<'a> {
    /// The shipment's id, as in `manifest.csv`.
    pub shipment_id: &'a str,
    /// `released`, `not_released` or `dead_on_arrival`; empty on the blank form.
    pub status: &'a str,
    /// When it was released (`YYYY-MM-DD` or `YYYY-MM-DDTHH:MM`); empty on the blank form.
    pub released_at: &'a str,
    /// Free text; empty on the blank form.
    pub note: &'a str,
}

/// One blank [`ConfirmationRecord`] per manifest row. O(n).
pub(crate) fn render(plan: &Delivered) -> Result<Vec<u8>, OutputError> {
    super::write_csv(
        &CONFIRMATION_COLUMNS,
        plan.rows.iter().map(|r| ConfirmationRecord {
            shipment_id: &r.shipment_id,
            status: "",
            released_at: "",
            note: "",
        }),
    )
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
