//! What each row of the allocation LP limits, as a typed kind with the domain ids it is about.
//!
//! A [`ConstraintKind`] displays as the row's name in the exported model (`docs/model.md`,
//! "Rows"), so the model reads like the scenario, and readers of the solved model (the
//! binding-constraint list, the report, the sweep) match on the kind instead of parsing names.
//! The model writes the name through [`super::model::sanitize_name`], so an id holding a
//! character free MPS cannot carry (a space, `$`, `*`, non-ASCII) shows as `_` in the file;
//! the kind keeps the id as written.

use std::fmt;

use chrono::NaiveDate;

use crate::scenario::{FacilityId, SiteId};

/// What one row of the allocation LP limits.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum ConstraintKind {
    /// `supply_<facility>_<date>`: vials packed at a facility on a pack day.
    Supply {
        /// The facility.
        facility: FacilityId,
        /// The pack day.
        date: NaiveDate,
    },
    /// `vehicles_<depot>_<date>`: vials the depot's vehicles carry on a dispatch day.
    Vehicles {
        /// The depot (a facility).
        depot: FacilityId,
        /// The dispatch day.
        date: NaiveDate,
    },
    /// `parcel_<date>`: vials the parcel service takes on a dispatch day.
    Parcel {
        /// The dispatch day.
        date: NaiveDate,
    },
    /// `dooryard_share`: the least share of shipped vials that goes to dooryard requests.
    DooryardShare,
    /// `benefit_<site>`: a site's live wasps counted in its value (not a limit: it binds at
    /// every served site).
    Benefit {
        /// The site.
        site: SiteId,
    },
    /// `maxrelease_<site>`: the most live wasps released at a site.
    MaxRelease {
        /// The site.
        site: SiteId,
    },
    /// `request_<site>`: a dooryard request takes at most the standard vials.
    Request {
        /// The request.
        site: SiteId,
    },
    /// `force_<site>`: a release forced by `overrides.csv`.
    Force {
        /// The forced site.
        site: SiteId,
    },
}

impl ConstraintKind {
    /// The row family, the part of the name before the ids: `supply`, `vehicles`, `parcel`,
    /// `dooryard_share`, `benefit`, `maxrelease`, `request` or `force`.
    pub fn family(&self) -> &'static str {
        match self {
            ConstraintKind::Supply { .. } => "supply",
            ConstraintKind::Vehicles { .. } => "vehicles",
            ConstraintKind::Parcel { .. } => "parcel",
            ConstraintKind::DooryardShare => "dooryard_share",
            ConstraintKind::Benefit { .. } => "benefit",
            ConstraintKind::MaxRelease { .. } => "maxrelease",
            ConstraintKind::Request { .. } => "request",
            ConstraintKind::Force { .. } => "force",
        }
    }

    /// Whether the row is shared by many sites (supply, vehicles, parcel, the dooryard share)
    /// rather than one site's own.
    pub fn is_shared(&self) -> bool {
        matches!(
            self,
            ConstraintKind::Supply { .. }
                | ConstraintKind::Vehicles { .. }
                | ConstraintKind::Parcel { .. }
                | ConstraintKind::DooryardShare
        )
    }

    /// The facility of a supply row, or the depot of a vehicle row.
    pub fn facility(&self) -> Option<&FacilityId> {
        match self {
            ConstraintKind::Supply { facility, .. } => Some(facility),
            ConstraintKind::Vehicles { depot, .. } => Some(depot),
            _ => None,
        }
    }

    /// The day of a supply (pack day), vehicle or parcel (dispatch day) row.
    pub fn date(&self) -> Option<NaiveDate> {
        match self {
            ConstraintKind::Supply { date, .. }
            | ConstraintKind::Vehicles { date, .. }
            | ConstraintKind::Parcel { date } => Some(*date),
            _ => None,
        }
    }

    /// The site of a per-site row.
    pub fn site(&self) -> Option<&SiteId> {
        match self {
            ConstraintKind::Benefit { site }
            | ConstraintKind::MaxRelease { site }
            | ConstraintKind::Request { site }
            | ConstraintKind::Force { site } => Some(site),
            _ => None,
        }
    }
}

/// The row name as in the exported model, before MPS sanitising (module docs).
impl fmt::Display for ConstraintKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let family = self.family();
        match self {
            ConstraintKind::Supply { facility, date }
            | ConstraintKind::Vehicles {
                depot: facility,
                date,
            } => write!(f, "{family}_{facility}_{}", date.format("%Y-%m-%d")),
            ConstraintKind::Parcel { date } => write!(f, "{family}_{}", date.format("%Y-%m-%d")),
            ConstraintKind::DooryardShare => f.write_str(family),
            ConstraintKind::Benefit { site }
            | ConstraintKind::MaxRelease { site }
            | ConstraintKind::Request { site }
            | ConstraintKind::Force { site } => write!(f, "{family}_{site}"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every kind displays as the row name `docs/model.md` documents ("Rows").
    #[test]
    fn display_is_the_documented_row_name() {
        let d = NaiveDate::from_ymd_opt(2027, 3, 1).unwrap();
        let fac = || FacilityId("F_1".into());
        let site = |s: &str| SiteId(s.into());
        for (kind, name) in [
            (
                ConstraintKind::Supply {
                    facility: fac(),
                    date: d,
                },
                "supply_F_1_2027-03-01",
            ),
            (
                ConstraintKind::Vehicles {
                    depot: fac(),
                    date: d,
                },
                "vehicles_F_1_2027-03-01",
            ),
            (ConstraintKind::Parcel { date: d }, "parcel_2027-03-01"),
            (ConstraintKind::DooryardShare, "dooryard_share"),
            (ConstraintKind::Benefit { site: site("B1") }, "benefit_B1"),
            (
                ConstraintKind::MaxRelease { site: site("B1") },
                "maxrelease_B1",
            ),
            (
                ConstraintKind::Request {
                    site: site("R0137"),
                },
                "request_R0137",
            ),
            (
                ConstraintKind::Force {
                    site: site("B0004"),
                },
                "force_B0004",
            ),
        ] {
            assert_eq!(kind.to_string(), name);
            assert!(name.starts_with(kind.family()), "{name}");
        }
    }

    #[test]
    fn shared_rows_and_their_ids() {
        let d = NaiveDate::from_ymd_opt(2027, 3, 2).unwrap();
        let supply = ConstraintKind::Supply {
            facility: FacilityId("F2".into()),
            date: d,
        };
        assert!(supply.is_shared());
        assert_eq!(supply.facility().map(FacilityId::as_str), Some("F2"));
        assert_eq!(supply.date(), Some(d));
        assert_eq!(supply.site(), None);
        let request = ConstraintKind::Request {
            site: SiteId("R7".into()),
        };
        assert!(!request.is_shared());
        assert_eq!(request.site().map(SiteId::as_str), Some("R7"));
        assert_eq!((request.facility(), request.date()), (None, None));
        assert!(ConstraintKind::DooryardShare.is_shared());
        assert!(ConstraintKind::Parcel { date: d }.is_shared());
    }
}
