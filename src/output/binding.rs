//! `binding-constraints.csv`: every constraint that binds at the LP optimum, with its kind
//! read from the name the allocation gives it, for analysts. The report summarises the same
//! list by kind in plain words.
//!
//! Constraint names are those of the exported model (`docs/model.md`): `supply_<facility>_<date>`,
//! `vehicles_<facility>_<date>`, `parcel_<date>`, `dooryard_share`, and per site
//! `benefit_<site>`, `maxrelease_<site>`, `request_<site>`, `force_<site>`.

use chrono::NaiveDate;

use super::{OutputError, PlanView, fixed};

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
    /// A name this module does not know.
    Other,
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
            Kind::Other => "other",
        }
    }
}

/// One binding constraint with its name taken apart.
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

/// Takes a constraint name apart. Facility ids may hold `_`, so the date is read from the end.
pub(crate) fn parse(name: &str, dual: f64) -> Parsed<'_> {
    let mut p = Parsed {
        name,
        kind: Kind::Other,
        facility: None,
        date: None,
        site: None,
        dual,
    };
    if name == "dooryard_share" {
        p.kind = Kind::DooryardShare;
    } else if let Some(rest) = name.strip_prefix("supply_") {
        if let Some((f, d)) = facility_day(rest) {
            (p.kind, p.facility, p.date) = (Kind::Supply, Some(f), Some(d));
        }
    } else if let Some(rest) = name.strip_prefix("vehicles_") {
        if let Some((f, d)) = facility_day(rest) {
            (p.kind, p.facility, p.date) = (Kind::Vehicles, Some(f), Some(d));
        }
    } else if let Some(rest) = name.strip_prefix("parcel_") {
        if let Ok(d) = NaiveDate::parse_from_str(rest, "%Y-%m-%d") {
            (p.kind, p.date) = (Kind::Parcel, Some(d));
        }
    } else {
        for (prefix, kind) in [
            ("benefit_", Kind::SiteValue),
            ("maxrelease_", Kind::MaxRelease),
            ("request_", Kind::RequestVials),
            ("force_", Kind::Force),
        ] {
            if let Some(site) = name.strip_prefix(prefix) {
                (p.kind, p.site) = (kind, Some(site));
                break;
            }
        }
    }
    p
}

/// `<facility>_<date>`, the date read from the end (facility ids may hold `_`).
fn facility_day(rest: &str) -> Option<(&str, NaiveDate)> {
    let (f, d) = rest.rsplit_once('_')?;
    Some((f, NaiveDate::parse_from_str(d, "%Y-%m-%d").ok()?))
}

/// Every binding constraint of the view, parsed, in the allocation's order (largest dual
/// first).
pub(crate) fn all<'a>(view: &PlanView<'a>) -> Vec<Parsed<'a>> {
    view.allocation
        .binding
        .iter()
        .map(|b| parse(&b.name, b.dual))
        .collect()
}

/// Renders `binding-constraints.csv`: one row per binding constraint, largest dual first;
/// dual with 3 decimals (objective units per unit of slack). O(B).
pub(crate) fn render(view: &PlanView) -> Result<Vec<u8>, OutputError> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(BINDING_COLUMNS)?;
    for b in all(view) {
        let date = b.date.map(|d| d.to_string()).unwrap_or_default();
        w.write_record([
            b.name,
            b.kind.code(),
            b.facility.unwrap_or(""),
            &date,
            b.site.unwrap_or(""),
            &fixed(b.dual, 3),
        ])?;
    }
    w.into_inner()
        .map_err(|e| OutputError::Csv(csv::Error::from(e.into_error())))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_come_apart_by_kind() {
        let d = NaiveDate::from_ymd_opt(2027, 3, 2).unwrap();
        let p = parse("supply_F_1_2027-03-02", 2.0);
        assert_eq!(
            (p.kind, p.facility, p.date),
            (Kind::Supply, Some("F_1"), Some(d))
        );
        let p = parse("vehicles_F2_2027-03-02", 1.0);
        assert_eq!((p.kind, p.facility), (Kind::Vehicles, Some("F2")));
        assert_eq!(parse("parcel_2027-03-02", 1.0).kind, Kind::Parcel);
        assert_eq!(parse("dooryard_share", 1.0).kind, Kind::DooryardShare);
        let p = parse("request_R0137", 1.0);
        assert_eq!((p.kind, p.site), (Kind::RequestVials, Some("R0137")));
        assert_eq!(parse("maxrelease_B1", 1.0).kind, Kind::MaxRelease);
        assert_eq!(parse("benefit_B1", 1.0).kind, Kind::SiteValue);
        assert_eq!(parse("force_B1", 1.0).kind, Kind::Force);
        assert_eq!(parse("supply_F1_notadate", 1.0).kind, Kind::Other);
        assert_eq!(parse("mystery", 1.0).kind, Kind::Other);
    }
}
