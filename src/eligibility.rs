//! Eligibility: whether a site may get a release on a given dispatch date, and if not, why.

use serde::Serialize;

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
    /// Allocated, but no route could deliver it and no other arc took its place.
    Undeliverable,
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
        )
    }
}
