//! Eligibility: whether a site may get a release on a given dispatch date, and if not, why.
//!
//! Rules, in the order they are tested (the first that holds is the reason):
//! 1. `Forbidden`: `overrides.csv` forbids the site.
//! 2. Blocks: `NoFlush` when `policy.require_flush` is set and `flush` is none;
//!    `InsecticideWindow` when `dispatch_date < last_insecticide + insecticide_exclusion_days`.
//!    The last excluded day is `last_insecticide + insecticide_exclusion_days − 1`; the day
//!    `last_insecticide + insecticide_exclusion_days` is the first eligible one (the lower end
//!    is inclusive on the excluded side, the upper end on the eligible side). An application
//!    dated after the dispatch date also excludes it: the spray would kill the released wasps.
//! 3. Requests: `NoHostPlant` when `host_plant` is none; `UsesInsecticide` when
//!    `insecticide_free` is no.
//!
//! A `Force` override does not make an ineligible site eligible: forcing a release into an
//! exclusion window would kill the wasps. The allocation reports such a conflict.

use chrono::NaiveDate;
use serde::Serialize;

use crate::scenario::{HostPlant, OverrideAction, Scenario, SiteDetail, SiteIdx};

/// Why a site got nothing. Codes are the `reason` column of `allocation.csv`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub enum Reason {
    /// Block not flushing while `policy.require_flush` is set.
    NoFlush,
    /// Block inside the insecticide exclusion window on every dispatch date.
    InsecticideWindow,
    /// Dooryard without a host plant.
    NoHostPlant,
    /// Dooryard that uses insecticides (`insecticide_free` = no).
    UsesInsecticide,
    /// Forbidden by `overrides.csv`.
    Forbidden,
    /// Eligible, but no facility can deliver live wasps in time (shelf life, shift, access
    /// hours, parcel days or delivery preference).
    OutOfReach,
    /// Reachable, but its priority is 0 (no pest pressure in range).
    LowPriority,
    /// Reachable and valuable, but better sites took the supply.
    BelowCutoff,
    /// No route could deliver it (the routes left its stop out, or its depot-days' routes
    /// were full and kept to the stops they served) and no other arc took its place.
    Undeliverable,
    /// Dooryard request already served or scheduled in another week of the season ledger
    /// (`plan --ledger`).
    AlreadyServed,
    /// Block released (or scheduled) within `policy.rerelease_interval_days` of every
    /// dispatch date of the week, per the season ledger (`plan --ledger`).
    ReleasedRecently,
}

impl Reason {
    /// The code written in outputs.
    pub fn code(self) -> &'static str {
        match self {
            Reason::NoFlush => "no-flush",
            Reason::InsecticideWindow => "insecticide-window",
            Reason::NoHostPlant => "no-host-plant",
            Reason::UsesInsecticide => "uses-insecticide",
            Reason::Forbidden => "forbidden",
            Reason::OutOfReach => "out-of-reach",
            Reason::LowPriority => "low-priority",
            Reason::BelowCutoff => "below-cutoff",
            Reason::Undeliverable => "undeliverable",
            Reason::AlreadyServed => "already-served",
            Reason::ReleasedRecently => "released-recently",
        }
    }

    /// Whether the reason is a property of the site itself (not of this week's supply/reach).
    pub fn is_ineligible(self) -> bool {
        matches!(
            self,
            Reason::NoFlush
                | Reason::InsecticideWindow
                | Reason::NoHostPlant
                | Reason::UsesInsecticide
                | Reason::Forbidden
                | Reason::AlreadyServed
                | Reason::ReleasedRecently
        )
    }
}

/// The reason `site` may not get a release dispatched on `dispatch_date`, or `None` when it
/// may. See the module doc for the rules and their order. O(overrides).
pub fn site_reason(scenario: &Scenario, site: SiteIdx, dispatch_date: NaiveDate) -> Option<Reason> {
    reason_given(scenario, site, dispatch_date, is_forbidden(scenario, site))
}

/// The reason that holds on every day of the planning week, or `None` when the site is
/// eligible on at least one day. O(7 + overrides).
pub fn week_reason(scenario: &Scenario, site: SiteIdx) -> Option<Reason> {
    let forbidden = is_forbidden(scenario, site);
    let mut first = None;
    for date in scenario.week_dates() {
        // Date-independent rules come first, so every day gives the same reason when none is
        // eligible; the first day's is returned.
        let r = reason_given(scenario, site, date, forbidden)?;
        first.get_or_insert(r);
    }
    first
}

/// Whether `overrides.csv` forbids `site`. O(overrides).
pub(crate) fn is_forbidden(scenario: &Scenario, site: SiteIdx) -> bool {
    scenario
        .overrides
        .iter()
        .any(|o| o.site == site && o.action == OverrideAction::Forbid)
}

/// [`site_reason`] with the override lookup done by the caller (the arc builder does it once
/// per site, not once per date).
pub(crate) fn reason_given(
    scenario: &Scenario,
    site: SiteIdx,
    dispatch_date: NaiveDate,
    forbidden: bool,
) -> Option<Reason> {
    if forbidden {
        return Some(Reason::Forbidden);
    }
    match &scenario.sites.get(site)?.detail {
        SiteDetail::Block(b) => {
            if scenario.policy.require_flush && b.flush == crate::scenario::Flush::None {
                return Some(Reason::NoFlush);
            }
            if let Some(last) = b.last_insecticide {
                let first_ok =
                    last + chrono::Days::new(u64::from(scenario.policy.insecticide_exclusion_days));
                if dispatch_date < first_ok {
                    return Some(Reason::InsecticideWindow);
                }
            }
            None
        }
        SiteDetail::Dooryard(r) => {
            if r.host_plant == HostPlant::None {
                Some(Reason::NoHostPlant)
            } else if !r.insecticide_free {
                Some(Reason::UsesInsecticide)
            } else {
                None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::fixture::tiny;
    use crate::scenario::{Flush, Override};

    fn idx(s: &Scenario, id: &str) -> SiteIdx {
        s.site_idx(id).expect("fixture site")
    }

    #[test]
    fn eligible_sites_have_no_reason() {
        let s = tiny();
        for id in ["B1", "B2", "B3", "B6", "R1", "R2", "R3"] {
            assert_eq!(week_reason(&s, idx(&s, id)), None, "{id}");
            assert_eq!(site_reason(&s, idx(&s, id), s.week_start), None, "{id}");
        }
    }

    #[test]
    fn no_flush_only_when_required() {
        let mut s = tiny();
        let b4 = idx(&s, "B4");
        assert_eq!(week_reason(&s, b4), Some(Reason::NoFlush));
        s.policy.require_flush = false;
        assert_eq!(week_reason(&s, b4), None);
    }

    #[test]
    fn insecticide_window_boundary_day_is_eligible() {
        // B5 sprayed 3 days before Monday 2027-03-01; 21-day window.
        let mut s = tiny();
        let b5 = idx(&s, "B5");
        assert_eq!(week_reason(&s, b5), Some(Reason::InsecticideWindow));
        // Exclusion of 4 days: sprayed Fri 02-26, first eligible day Tue 03-02.
        s.policy.insecticide_exclusion_days = 4;
        let mon = s.week_start;
        let tue = mon + chrono::Days::new(1);
        assert_eq!(site_reason(&s, b5, mon), Some(Reason::InsecticideWindow));
        assert_eq!(site_reason(&s, b5, tue), None);
        assert_eq!(week_reason(&s, b5), None);
        // Zero days: no window at all, even on the application day.
        s.policy.insecticide_exclusion_days = 0;
        let sprayed = mon - chrono::Days::new(3);
        assert_eq!(site_reason(&s, b5, sprayed), None);
    }

    #[test]
    fn window_ending_on_sunday_excludes_whole_week_but_not_next_monday() {
        let mut s = tiny();
        let b5 = idx(&s, "B5");
        // Sprayed 02-26 + 10 days = first eligible 03-08, the Monday after the week.
        s.policy.insecticide_exclusion_days = 10;
        assert_eq!(week_reason(&s, b5), Some(Reason::InsecticideWindow));
        s.policy.insecticide_exclusion_days = 9;
        assert_eq!(week_reason(&s, b5), None);
        let sun = s.week_start + chrono::Days::new(6);
        assert_eq!(site_reason(&s, b5, sun), None);
        assert_eq!(
            site_reason(&s, b5, sun - chrono::Days::new(1)),
            Some(Reason::InsecticideWindow)
        );
    }

    #[test]
    fn application_later_in_the_week_excludes_days_before_it() {
        let mut s = tiny();
        let b1 = idx(&s, "B1");
        let wed = s.week_start + chrono::Days::new(2);
        if let SiteDetail::Block(b) = &mut s.sites[b1].detail {
            b.last_insecticide = Some(wed);
        }
        assert_eq!(
            site_reason(&s, b1, s.week_start),
            Some(Reason::InsecticideWindow)
        );
        assert_eq!(week_reason(&s, b1), Some(Reason::InsecticideWindow));
    }

    #[test]
    fn request_reasons() {
        let mut s = tiny();
        let r4 = idx(&s, "R4");
        assert_eq!(week_reason(&s, r4), Some(Reason::NoHostPlant));
        let r1 = idx(&s, "R1");
        if let SiteDetail::Dooryard(r) = &mut s.sites[r1].detail {
            r.insecticide_free = false;
        }
        assert_eq!(week_reason(&s, r1), Some(Reason::UsesInsecticide));
        assert_eq!(
            site_reason(&s, r1, s.week_start),
            Some(Reason::UsesInsecticide)
        );
    }

    #[test]
    fn forbidden_overrides_everything() {
        let mut s = tiny();
        let b4 = idx(&s, "B4");
        let b1 = idx(&s, "B1");
        for site in [b1, b4] {
            s.overrides.push(Override {
                site,
                action: OverrideAction::Forbid,
            });
        }
        s.overrides.push(Override {
            site: idx(&s, "B2"),
            action: OverrideAction::Force { vials: Some(3) },
        });
        assert_eq!(week_reason(&s, b1), Some(Reason::Forbidden));
        assert_eq!(week_reason(&s, b4), Some(Reason::Forbidden));
        assert_eq!(week_reason(&s, idx(&s, "B2")), None);
        if let SiteDetail::Block(b) = &mut s.sites[b1].detail {
            b.flush = Flush::None;
        }
        assert_eq!(site_reason(&s, b1, s.week_start), Some(Reason::Forbidden));
    }
}
