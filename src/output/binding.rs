//! `binding-constraints.csv`: every constraint that binds at the LP optimum, with its kind
//! and ids taken from the allocation's typed [`ConstraintKind`], for analysts. The report
//! summarises the same list by kind in plain words.
//!
//! Constraint names are those of the exported model (`docs/model.md`): `supply_<facility>_<date>`,
//! `vehicles_<facility>_<date>`, `parcel_<date>`, `dooryard_share`, and per site
//! `benefit_<site>`, `maxrelease_<site>`, `request_<site>`, `force_<site>`.

use chrono::NaiveDate;

use super::{OutputError, PlanView};
use crate::allocate::{Binding, ConstraintKind};
use crate::scenario::{FacilityId, SiteId};

/// The `binding-constraints.csv` header, in column order.
pub const BINDING_COLUMNS: [&str; 6] = [
    "constraint",
    "kind",
    "facility_id",
    "date",
    "site_id",
    "dual",
];

/// What a binding constraint limits, in the words the report uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) enum Kind {
    /// Vials packed at one facility on one day.
    Supply,
    /// Vials the vehicles of one facility carry on one day.
    Vehicles,
    /// Vials sent by parcel on one day.
    Parcel,
    /// The minimum share of vials that go to dooryard requests.
    DooryardShare,
    /// The standard vials per dooryard request (a request takes no more).
    RequestVials,
    /// The most live wasps released at one site.
    MaxRelease,
    /// A release forced by `overrides.csv`.
    Force,
    /// A site's value row (not a limit: it binds at every served site).
    SiteValue,
}

impl Kind {
    /// The `kind` column of `binding-constraints.csv`.
    pub fn code(self) -> &'static str {
        match self {
            Kind::Supply => "supply",
            Kind::Vehicles => "vehicle-capacity",
            Kind::Parcel => "parcel-cap",
            Kind::DooryardShare => "dooryard-share",
            Kind::RequestVials => "request-vials",
            Kind::MaxRelease => "max-release",
            Kind::Force => "force",
            Kind::SiteValue => "site-value",
        }
    }
}

/// One binding constraint with its kind's ids.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Parsed<'a> {
    /// The constraint name as in the model.
    pub name: &'a str,
    /// What it limits.
    pub kind: Kind,
    /// Facility id for supply and vehicle rows.
    pub facility: Option<&'a str>,
    /// Day for supply, vehicle and parcel rows.
    pub date: Option<NaiveDate>,
    /// Site id for per-site rows.
    pub site: Option<&'a str>,
    /// Objective gained per unit of slack (the LP dual).
    pub dual: f64,
}

/// A binding constraint in the report's words, from its typed kind (never from its name).
pub(crate) fn parse(b: &Binding) -> Parsed<'_> {
    let kind = match b.kind {
        ConstraintKind::Supply { .. } => Kind::Supply,
        ConstraintKind::Vehicles { .. } => Kind::Vehicles,
        ConstraintKind::Parcel { .. } => Kind::Parcel,
        ConstraintKind::DooryardShare => Kind::DooryardShare,
        ConstraintKind::Request { .. } => Kind::RequestVials,
        ConstraintKind::MaxRelease { .. } => Kind::MaxRelease,
        ConstraintKind::Force { .. } => Kind::Force,
        ConstraintKind::Benefit { .. } => Kind::SiteValue,
    };
    Parsed {
        name: &b.name,
        kind,
        facility: b.kind.facility().map(FacilityId::as_str),
        date: b.kind.date(),
        site: b.kind.site().map(SiteId::as_str),
        dual: b.dual,
    }
}

/// Every binding constraint of the view, parsed, in the allocation's order (largest dual
/// first).
pub(crate) fn all<'a>(view: &PlanView<'a>) -> Vec<Parsed<'a>> {
    view.allocation.binding.iter().map(parse).collect()
}

/// One `binding-constraints.csv` row. Fields in [`BINDING_COLUMNS`] order (the CSV writer
/// checks it); ids empty where the kind has none.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct BindingRecord<'a> {
    /// The constraint's row name in the exported model.
    pub constraint: &'a str,
    /// What it limits (the kind code of `docs/outputs.md`, e.g. `supply`).
    pub kind: &'static str,
    /// Facility id (supply and vehicle rows), else empty.
    pub facility_id: &'a str,
    /// Day as `YYYY-MM-DD` (supply, vehicle and parcel rows), else empty.
    pub date: String,
    /// Site id (per-site rows), else empty.
    pub site_id: &'a str,
    /// Objective gained per unit of slack (the LP dual), 3 decimals.
    #[serde(serialize_with = "super::cell::fixed3")]
    pub dual: f64,
}

impl<'a> BindingRecord<'a> {
    fn of(b: &Parsed<'a>) -> Self {
        BindingRecord {
            constraint: b.name,
            kind: b.kind.code(),
            facility_id: b.facility.unwrap_or(""),
            date: b.date.map(|d| d.to_string()).unwrap_or_default(),
            site_id: b.site.unwrap_or(""),
            dual: b.dual,
        }
    }
}

/// Renders `binding-constraints.csv`: one [`BindingRecord`] per binding constraint, largest
/// dual first. O(B).
pub(crate) fn render(view: &PlanView) -> Result<Vec<u8>, OutputError> {
    let all = all(view);
    super::write_csv(&BINDING_COLUMNS, all.iter().map(BindingRecord::of))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn binding(name: &str, kind: ConstraintKind) -> Binding {
        Binding {
            name: name.into(),
            kind,
            dual: 2.0,
        }
    }

    /// Kind, facility, day and site come from the typed kind: a row whose name reads as
    /// something else (a facility id holding `_`, or any name at all) is still read right.
    #[test]
    fn kind_and_ids_come_from_the_typed_kind_not_the_name() {
        let d = NaiveDate::from_ymd_opt(2027, 3, 2).unwrap();
        let b = binding(
            "vehicles_F_1_2027-03-02",
            ConstraintKind::Supply {
                facility: FacilityId("F_1".into()),
                date: d,
            },
        );
        let p = parse(&b);
        assert_eq!(
            (p.name, p.kind, p.facility, p.date, p.site),
            (
                "vehicles_F_1_2027-03-02",
                Kind::Supply,
                Some("F_1"),
                Some(d),
                None
            )
        );
        let b = binding(
            "row7",
            ConstraintKind::Request {
                site: SiteId("R 0137".into()),
            },
        );
        let p = parse(&b);
        assert_eq!((p.kind, p.site), (Kind::RequestVials, Some("R 0137")));
        for (kind, want) in [
            (
                ConstraintKind::Vehicles {
                    depot: FacilityId("F2".into()),
                    date: d,
                },
                Kind::Vehicles,
            ),
            (ConstraintKind::Parcel { date: d }, Kind::Parcel),
            (ConstraintKind::DooryardShare, Kind::DooryardShare),
            (
                ConstraintKind::MaxRelease {
                    site: SiteId("B1".into()),
                },
                Kind::MaxRelease,
            ),
            (
                ConstraintKind::Benefit {
                    site: SiteId("B1".into()),
                },
                Kind::SiteValue,
            ),
            (
                ConstraintKind::Force {
                    site: SiteId("B1".into()),
                },
                Kind::Force,
            ),
        ] {
            assert_eq!(parse(&binding("x", kind)).kind, want);
        }
    }
}
