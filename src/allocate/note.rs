//! What the allocation tells the analyst besides the plan: each note a typed [`NoteKind`]
//! with the figures it reports, and its text in plain words.
//!
//! Code (tests, benchmarks, the ledger) matches on the kind; people read the text
//! (`summary.json` `notes`, the report, `plan`'s output).

use std::fmt;

use crate::eligibility::Reason;
use crate::scenario::SiteId;

/// One allocation note.
#[derive(Clone, Debug, PartialEq)]
pub struct Note {
    /// What the note is about, with its figures.
    pub kind: NoteKind,
    /// The note in plain words: the kind's text, unless a later stage rewords it (the season
    /// ledger says which excluded arcs are its own).
    pub text: String,
}

impl Note {
    /// A note with its kind's text.
    pub fn new(kind: NoteKind) -> Self {
        Note {
            text: kind.to_string(),
            kind,
        }
    }
}

/// The text.
impl fmt::Display for Note {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.text)
    }
}

/// A force's shortfall in the force's own unit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Shortfall {
    /// Vials short of a force in vials.
    Vials(f64),
    /// Live wasps short of a block forced without a count (the minimum release).
    Wasps(f64),
}

/// What a note is about.
#[derive(Clone, Debug, PartialEq)]
pub enum NoteKind {
    /// Arcs left out because `AllocOptions::excluded` names them (dispatch feedback).
    ArcsExcluded {
        /// Arcs left out.
        arcs: usize,
    },
    /// Route arcs left out because their depot-day's routes were full: the route feedback's
    /// re-plan keeps only the stops those routes served there.
    ArcsToFullDepotDays {
        /// Arcs left out.
        arcs: usize,
    },
    /// Arcs left out that carry no value: dead or late on arrival, or to a site with
    /// priority 0 and no force.
    ArcsWithoutValue {
        /// Arcs left out.
        arcs: usize,
    },
    /// Arcs left out with no vials packed on their pack day, or no vehicle or parcel
    /// capacity on their dispatch day.
    ArcsWithoutCapacity {
        /// Arcs left out.
        arcs: usize,
    },
    /// Arcs left out because no whole release fits on them: the fewest vials of a release
    /// (a request's standard vials, or a block's minimum release) exceed the maximum release
    /// or the whole vials of the pack day, vehicle day or parcel day.
    ArcsWithoutWholeRelease {
        /// Arcs left out.
        arcs: usize,
    },
    /// A site both forced and forbidden by overrides: it is forbidden.
    ForcedAndForbidden {
        /// The site.
        site: SiteId,
    },
    /// A forced site with no usable arc: the force cannot be met at all.
    ForceWithoutArc {
        /// The site.
        site: SiteId,
        /// Why the site has no arc, when arc building says (else every arc was excluded or
        /// carries no live wasps).
        reason: Option<Reason>,
    },
    /// A force asking for more whole vials than can reach the site: trimmed to what exists.
    ForceTrimmed {
        /// The site.
        site: SiteId,
        /// Vials the override asks for.
        asked: f64,
        /// Most whole vials that can reach the site; the force is trimmed to this.
        most: f64,
        /// Releases the site may get this week.
        releases: usize,
        /// `max_release_wasps`, wasps.
        max_release_wasps: f64,
    },
    /// A forced site the LP cannot give all it asks for (supply, capacity or policy).
    ForceShort {
        /// The site.
        site: SiteId,
        /// How much is missing.
        shortfall: Shortfall,
        /// Objective penalty per vial of shortfall (objective units per vial).
        penalty_per_vial: f64,
    },
    /// The dooryard share floor was lowered to what the reachable requests can take.
    ShareLowered {
        /// The policy's share.
        from: f64,
        /// The share kept.
        to: f64,
        /// Reachable requests.
        requests: usize,
        /// Vials they can take (requests × standard vials per request).
        absorb_vials: u64,
        /// The week's vials packed on days some usable arc draws on.
        supply_vials: u64,
    },
    /// The dooryard share floor was dropped: no request can be reached.
    ShareDropped {
        /// The policy's share.
        share: f64,
    },
    /// The dooryard share floor binds at the LP optimum.
    ShareBinds {
        /// The share kept.
        share: f64,
        /// Reachable requests.
        requests: u64,
        /// Standard vials per request.
        per_request: u32,
        /// Objective each vial the floor demands costs (minus the row's dual; objective
        /// units per vial).
        cost_per_vial: f64,
    },
    /// No vials are packed this week.
    NoSupply,
    /// No site can be reached with live wasps and a priority above 0.
    NothingReachable,
    /// The LP was solved on a working set grown by pricing.
    LpPriced {
        /// Arcs in the final working set.
        working_arcs: usize,
        /// Usable arcs in the pool.
        arcs: usize,
        /// Sites with an arc in the final working set.
        working_sites: usize,
        /// Sites with a usable arc.
        sites: usize,
        /// LP solves.
        rounds: usize,
    },
    /// The LP was solved on every arc at once (a small pool).
    LpWhole {
        /// Usable arcs.
        arcs: usize,
    },
    /// Some vials stay at the facilities: no whole vial more adds value within the limits.
    SupplyUnused {
        /// Vials shipped.
        shipped: u64,
        /// Vials packed.
        supply: u64,
    },
    /// Some vials stay at the facilities, and some of them because the routes of the last
    /// re-plan could not serve their stops (those sites were dropped).
    SupplyUndelivered {
        /// Vials shipped.
        shipped: u64,
        /// Vials packed.
        supply: u64,
        /// Vials of the dropped sites.
        dropped: u64,
    },
}

/// The note's text.
impl fmt::Display for NoteKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NoteKind::ArcsExcluded { arcs } => write!(
                f,
                "{arcs} arc(s) excluded by request (dispatch could not serve them)"
            ),
            NoteKind::ArcsToFullDepotDays { arcs } => write!(
                f,
                "{arcs} route arc(s) left out: their depot-day's routes could not serve every \
                 stop, so the re-plan keeps only the stops they served there"
            ),
            NoteKind::ArcsWithoutValue { arcs } => write!(
                f,
                "{arcs} arc(s) left out: no live wasps on arrival, past release-by, or a site \
                 with priority 0"
            ),
            NoteKind::ArcsWithoutCapacity { arcs } => write!(
                f,
                "{arcs} arc(s) left out: no vials packed that day, or no vehicle/parcel \
                 capacity on the dispatch day"
            ),
            NoteKind::ArcsWithoutWholeRelease { arcs } => write!(
                f,
                "{arcs} arc(s) left out: no whole release fits (a minimum release or a \
                 request's vials is more than the pack day, vehicle day or parcel day holds, \
                 or one vial is over the maximum release)"
            ),
            NoteKind::ForcedAndForbidden { site } => {
                write!(f, "site {site} is both forced and forbidden: forbid wins")
            }
            NoteKind::ForceWithoutArc { site, reason } => {
                let why = reason.map(Reason::code).unwrap_or(
                    "every arc was excluded, carries no live wasps or cannot carry a whole release",
                );
                write!(
                    f,
                    "force of site {site} cannot be met: no usable arc ({why})"
                )
            }
            NoteKind::ForceShort {
                site,
                shortfall,
                penalty_per_vial,
            } => {
                let (short, unit) = match shortfall {
                    Shortfall::Vials(v) => (v, "vials"),
                    Shortfall::Wasps(w) => (w, "wasps"),
                };
                write!(
                    f,
                    "force of site {site} cannot be met in full: short by {short:.1} {unit} \
                     (supply, capacity or policy limits); a penalty of {penalty_per_vial:.1} \
                     per vial of shortfall keeps the plan valid"
                )
            }
            NoteKind::ShareLowered {
                from,
                to,
                requests,
                absorb_vials,
                supply_vials,
            } => write!(
                f,
                "dooryard share lowered from {from:.2} to {to:.4}: the {requests} reachable \
                 request(s) can take at most {absorb_vials} vials, less than {from:.2} of the \
                 week's {supply_vials} vials; the rest may go to blocks rather than stay at the \
                 facilities"
            ),
            NoteKind::ForceTrimmed {
                site,
                asked,
                most,
                releases,
                max_release_wasps,
            } => write!(
                f,
                "force of site {site} asks for {asked} vials, more than exist for it: at most \
                 {most} whole vials reach it in {releases} release(s) within max_release_wasps \
                 ({max_release_wasps}) and the vials packed and carried on its days; the force \
                 is trimmed to {most} vials"
            ),
            NoteKind::ShareDropped { share } => write!(
                f,
                "dooryard share {share:.2} dropped: no dooryard request can be reached this \
                 week with its standard vials within max_release_wasps, so keeping it would \
                 forbid every block release"
            ),
            NoteKind::ShareBinds {
                share,
                requests,
                per_request,
                cost_per_vial,
            } => write!(
                f,
                "dooryard share {share:.2} binds: the plan serves more requests than value \
                 alone would ({requests} reachable request(s) × {per_request} vials could take \
                 up to {} vials); each vial the floor demands costs {cost_per_vial:.1} \
                 objective units",
                requests * u64::from(*per_request)
            ),
            NoteKind::NoSupply => f.write_str("no vials are packed this week: nothing to allocate"),
            NoteKind::NothingReachable => f.write_str(
                "no site can be reached with live wasps and a priority above 0: nothing to \
                 allocate",
            ),
            NoteKind::LpPriced {
                working_arcs,
                arcs,
                working_sites,
                sites,
                rounds,
            } => write!(
                f,
                "LP solved on {working_arcs} of {arcs} arcs ({working_sites} of {sites} \
                 reachable sites) in {rounds} round(s); no other arc has a positive reduced \
                 cost, so the bound holds for the whole pool"
            ),
            NoteKind::LpWhole { arcs } => write!(
                f,
                "LP solved on all {arcs} arcs at once: a pool this small solves faster whole \
                 than by rounds of pricing"
            ),
            NoteKind::SupplyUnused { shipped, supply } => write!(
                f,
                "{shipped} of {supply} vials shipped; no whole vial more adds value within the \
                 release limits, vehicle and parcel capacity, shelf life and the dooryard share"
            ),
            NoteKind::SupplyUndelivered {
                shipped,
                supply,
                dropped,
            } => write!(
                f,
                "{shipped} of {supply} vials shipped; {dropped} of those unshipped were planned \
                 for stops the re-planned routes could not serve (listed with the route \
                 feedback); no whole vial more adds value to the rest within the release \
                 limits, vehicle and parcel capacity, shelf life and the dooryard share"
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_carries_the_figures() {
        let n = Note::new(NoteKind::ForceShort {
            site: SiteId("B4".into()),
            shortfall: Shortfall::Wasps(150.04),
            penalty_per_vial: 2000.0,
        });
        assert_eq!(
            n.to_string(),
            "force of site B4 cannot be met in full: short by 150.0 wasps (supply, capacity or \
             policy limits); a penalty of 2000.0 per vial of shortfall keeps the plan valid"
        );
        let n = Note::new(NoteKind::ShareLowered {
            from: 0.9,
            to: 0.54321,
            requests: 166,
            absorb_vials: 332,
            supply_vials: 614,
        });
        assert_eq!(
            n.text,
            "dooryard share lowered from 0.90 to 0.5432: the 166 reachable request(s) can take \
             at most 332 vials, less than 0.90 of the week's 614 vials; the rest may go to \
             blocks rather than stay at the facilities"
        );
        let n = NoteKind::ForceWithoutArc {
            site: SiteId("R1".into()),
            reason: Some(Reason::OutOfReach),
        };
        assert!(
            n.to_string().ends_with("no usable arc (out-of-reach)"),
            "{n}"
        );
    }
}
