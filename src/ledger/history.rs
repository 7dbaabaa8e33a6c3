//! What the ledger says about the week being planned, as typed values: the CLI reads a
//! [`LedgerHistory`] from the file and hands it to [`LedgerMarks::new`], a pure function of
//! the scenario and the history; planning then takes the marks through its options.
//!
//! Rules (shipments of the week being planned are ignored, since that week's plan is what is
//! being made again):
//! - a dooryard request with a shipment `scheduled` or `released` in another week is not a
//!   candidate (`already-served`); one whose only shipments are `not_released` or
//!   `dead_on_arrival` is a candidate again, and keeps waiting from its `received` date
//!   (pressure counts whole weeks since `received`, so the wait spans weeks by itself);
//! - a block may not get a release on a dispatch date d when it had one (released, or still
//!   scheduled) on a date r with |d − r| < `policy.rerelease_interval_days`; r is the
//!   confirmation's `released_at` date when given, else the dispatch date. When that holds on
//!   every day of the week the block is `released-recently`.

use std::collections::{BTreeMap, BTreeSet};

use chrono::NaiveDate;

use super::{Ledger, LedgerError, Status, parse_date};
use crate::allocate::{AllocOptions, Allocation, NoteKind};
use crate::arcs::Mode;
use crate::eligibility::Reason;
use crate::scenario::{Scenario, SiteDetail, SiteIdx};

/// Past releases by site id, read from the ledger.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct LedgerHistory {
    /// Dooryard request ids with a shipment scheduled or released.
    pub served_requests: BTreeSet<String>,
    /// Block id → dates of its releases (released or scheduled), sorted, no repeats.
    pub block_releases: BTreeMap<String, Vec<NaiveDate>>,
}

impl Ledger {
    /// Past releases of every week except `planning_week` (Monday of the week being planned).
    /// O(S log S) in stored shipments.
    pub fn history(&self, planning_week: NaiveDate) -> Result<LedgerHistory, LedgerError> {
        let mut q = self
            .conn
            .prepare(
                "SELECT site_id, site_kind, dispatch_date, status, released_at FROM shipments
                 WHERE week_start <> ?1 ORDER BY site_id, dispatch_date, shipment_id",
            )
            .map_err(self.err())?;
        let rows = q
            .query_map([planning_week.to_string()], |r| {
                Ok((
                    r.get::<_, String>(0)?,
                    r.get::<_, String>(1)?,
                    r.get::<_, String>(2)?,
                    r.get::<_, String>(3)?,
                    r.get::<_, Option<String>>(4)?,
                ))
            })
            .map_err(self.err())?;
        let mut h = LedgerHistory::default();
        for row in rows {
            let (site, kind, dispatch, status, released_at) = row.map_err(self.err())?;
            if !Status::parse(&status).is_some_and(Status::counts_as_release) {
                continue;
            }
            if kind == "dooryard" {
                h.served_requests.insert(site);
            } else {
                let date = released_at
                    .as_deref()
                    .and_then(|s| parse_date(s.get(..10).unwrap_or(s)))
                    .or_else(|| parse_date(&dispatch));
                if let Some(d) = date {
                    h.block_releases.entry(site).or_default().push(d);
                }
            }
        }
        for dates in h.block_releases.values_mut() {
            dates.sort_unstable();
            dates.dedup();
        }
        Ok(h)
    }
}

/// Sites of one scenario that the ledger excludes, whole week or some days.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct LedgerMarks {
    /// Site → the week dates it may not get a release, and the reason.
    excluded: BTreeMap<SiteIdx, (Reason, Vec<NaiveDate>)>,
    week_len: usize,
}

impl LedgerMarks {
    /// Marks the scenario's sites from the history (see the module doc for the rules).
    /// O(S · (log H + 7 · r)) for S sites, H history entries and r releases of a block.
    pub fn new(scenario: &Scenario, history: &LedgerHistory) -> Self {
        let dates = scenario.week_dates();
        let interval = i64::from(scenario.policy.rerelease_interval_days);
        let mut excluded = BTreeMap::new();
        for (s, site) in scenario.sites.iter().enumerate() {
            match &site.detail {
                SiteDetail::Dooryard(_) => {
                    if history.served_requests.contains(site.id.as_str()) {
                        excluded.insert(s, (Reason::AlreadyServed, dates.to_vec()));
                    }
                }
                SiteDetail::Block(_) => {
                    let Some(past) = history.block_releases.get(site.id.as_str()) else {
                        continue;
                    };
                    let days: Vec<NaiveDate> = dates
                        .iter()
                        .copied()
                        .filter(|d| past.iter().any(|r| (*d - *r).num_days().abs() < interval))
                        .collect();
                    if !days.is_empty() {
                        excluded.insert(s, (Reason::ReleasedRecently, days));
                    }
                }
            }
        }
        LedgerMarks {
            excluded,
            week_len: dates.len(),
        }
    }

    /// The reason a site may get nothing all week, if the ledger excludes every day.
    pub fn week_reason(&self, site: SiteIdx) -> Option<Reason> {
        self.excluded
            .get(&site)
            .filter(|(_, days)| days.len() == self.week_len)
            .map(|(r, _)| *r)
    }

    /// Dates of the week on which the ledger excludes the site (empty when none).
    pub fn excluded_dates(&self, site: SiteIdx) -> &[NaiveDate] {
        self.excluded.get(&site).map_or(&[], |(_, d)| d.as_slice())
    }

    /// Sites excluded every day, by reason: (already-served, released-recently).
    pub fn counts(&self) -> (usize, usize) {
        let all = |r: Reason| {
            self.excluded
                .iter()
                .filter(|(s, (x, _))| *x == r && self.week_reason(**s).is_some())
                .count()
        };
        (all(Reason::AlreadyServed), all(Reason::ReleasedRecently))
    }

    /// Leaves out every arc to an excluded site on an excluded date, for each facility and
    /// each mode the site can be served by (blocks: route; requests: as `delivery` allows).
    /// O(E · F · m) keys for E excluded site-days, F facilities and m ≤ 2 modes.
    pub fn exclude_arcs(&self, scenario: &Scenario, opts: &mut AllocOptions) {
        for (&site, (_, days)) in &self.excluded {
            let modes: Vec<Mode> = match scenario.sites.get(site).map(|s| &s.detail) {
                Some(SiteDetail::Block(_)) => vec![Mode::Route],
                Some(SiteDetail::Dooryard(r)) => [
                    (r.delivery.allows_route(), Mode::Route),
                    (r.delivery.allows_parcel(), Mode::Parcel),
                ]
                .into_iter()
                .filter_map(|(ok, m)| ok.then_some(m))
                .collect(),
                None => Vec::new(),
            };
            for f in 0..scenario.facilities.len() {
                for &d in days {
                    for &mode in &modes {
                        opts.excluded.insert((f, d, site, mode));
                    }
                }
            }
        }
    }

    /// Gives every site excluded all week its ledger reason in the allocation's outcomes (the
    /// allocation saw those sites only as having no usable arc), and a site excluded on some
    /// days whose remaining arcs could not be used either (the allocation says
    /// `undeliverable`) the ledger reason too: only the ledger's days could have reached it.
    /// Such a site stays `eligible`, since it has arcs on other days. O(E log S).
    pub fn mark(&self, allocation: &mut Allocation) {
        // The ledger's exclusions travel in the same option as dispatch feedback, so the
        // allocation's count of excluded arcs would otherwise credit them all to dispatch.
        if !self.excluded.is_empty() {
            let excluded = allocation
                .notes
                .iter_mut()
                .filter(|n| matches!(n.kind, NoteKind::ArcsExcluded { .. }));
            for n in excluded {
                n.text = n.text.replace(
                    "(dispatch could not serve them)",
                    "(sites the season ledger excludes, and any stops dispatch could not serve)",
                );
            }
        }
        for (&site, (reason, _)) in &self.excluded {
            let Some(o) = allocation.sites.get_mut(site) else {
                continue;
            };
            if o.vials > 0 {
                continue;
            }
            if self.week_reason(site).is_some() {
                o.reason = Some(*reason);
                o.eligible = false;
            } else if o.reason == Some(Reason::Undeliverable) {
                o.reason = Some(*reason);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::{self, PlanOptions};
    use crate::scenario::fixture::tiny;

    fn d(s: &str) -> NaiveDate {
        parse_date(s).expect("date")
    }

    #[test]
    fn served_request_and_recent_block_are_marked() {
        let s = tiny();
        let mut h = LedgerHistory::default();
        h.served_requests.insert("R1".into());
        // Week of 2027-03-01, interval 28: released 02-03 → excluded until 03-02 inclusive
        // (03-03 − 02-03 = 28 days is the first allowed); released 02-10 → all week.
        h.block_releases.insert("B1".into(), vec![d("2027-02-03")]);
        h.block_releases.insert("B2".into(), vec![d("2027-02-10")]);
        h.block_releases.insert("B3".into(), vec![d("2027-01-01")]);
        let m = LedgerMarks::new(&s, &h);
        let idx = |id: &str| s.site_idx(id).expect("site");
        assert_eq!(m.week_reason(idx("R1")), Some(Reason::AlreadyServed));
        assert_eq!(m.week_reason(idx("B1")), None);
        assert_eq!(
            m.excluded_dates(idx("B1")),
            &[d("2027-03-01"), d("2027-03-02")]
        );
        assert_eq!(m.week_reason(idx("B2")), Some(Reason::ReleasedRecently));
        assert!(m.excluded_dates(idx("B3")).is_empty());
        assert_eq!(m.counts(), (1, 1));
    }

    #[test]
    fn history_skips_the_planned_week_and_shipments_that_did_not_release() {
        use super::super::commit::tests::{folder, row};
        use super::super::{Confirmation, read_plan_folder};
        let dir = tempfile::tempdir().expect("temp dir");
        let (mut l, _) = Ledger::init(&dir.path().join("s.db")).expect("init");
        let w1 = [
            row("S-1", "2027-03-01", "B1", "block", 3),
            row("S-2", "2027-03-02", "B2", "block", 3),
            row("S-3", "2027-03-02", "R1", "dooryard", 2),
            row("S-4", "2027-03-03", "R2", "dooryard", 2),
        ];
        let lines: Vec<&str> = w1.iter().map(String::as_str).collect();
        let p = read_plan_folder(folder("2027-03-01", &lines).path()).expect("read");
        l.commit(&p, false).expect("commit week 1");
        let w2 = [row("S-5", "2027-03-08", "R3", "dooryard", 2)];
        let p = read_plan_folder(folder("2027-03-08", &[w2[0].as_str()]).path()).expect("read");
        l.commit(&p, false).expect("commit week 2");
        let conf = |line, id: &str, status, at: Option<&str>| Confirmation {
            line,
            shipment_id: id.into(),
            status,
            released_at: at.map(str::to_string),
            note: String::new(),
        };
        l.confirm(
            "c.csv",
            &[
                conf(2, "S-1", Status::Released, Some("2027-03-02T10:00")),
                conf(3, "S-2", Status::DeadOnArrival, None),
                conf(4, "S-4", Status::NotReleased, None),
            ],
        )
        .expect("confirm");
        // Planning week 2 again: week 2's own shipment does not count.
        let h = l.history(d("2027-03-08")).expect("history");
        assert_eq!(h.served_requests, BTreeSet::from(["R1".to_string()]));
        assert_eq!(
            h.block_releases,
            BTreeMap::from([("B1".to_string(), vec![d("2027-03-02")])])
        );
        let h3 = l.history(d("2027-03-15")).expect("history");
        assert!(h3.served_requests.contains("R3"));
    }

    #[test]
    fn partly_excluded_site_left_without_usable_arcs_gets_the_ledger_reason() {
        let s = tiny();
        let mut p = plan::plan(s.clone(), &PlanOptions::default()).expect("plan");
        let b1 = s.site_idx("B1").expect("B1");
        let b2 = s.site_idx("B2").expect("B2");
        let mut h = LedgerHistory::default();
        // Released on the Sunday before the week, 3-day interval: Mon and Tue excluded.
        let mut s3 = s.clone();
        s3.policy.rerelease_interval_days = 3;
        for id in ["B1", "B2"] {
            h.block_releases
                .insert(id.into(), vec![s.week_start - chrono::Days::new(1)]);
        }
        let marks = LedgerMarks::new(&s3, &h);
        assert_eq!(marks.week_reason(b1), None);
        for (site, why) in [(b1, Reason::Undeliverable), (b2, Reason::BelowCutoff)] {
            let o = &mut p.allocation.sites[site];
            o.vials = 0;
            o.reason = Some(why);
        }
        marks.mark(&mut p.allocation);
        assert_eq!(
            p.allocation.sites[b1].reason,
            Some(Reason::ReleasedRecently)
        );
        assert!(p.allocation.sites[b1].eligible);
        assert_eq!(p.allocation.sites[b2].reason, Some(Reason::BelowCutoff));
    }

    #[test]
    fn zero_interval_excludes_no_block() {
        let mut s = tiny();
        s.policy.rerelease_interval_days = 0;
        let mut h = LedgerHistory::default();
        h.block_releases.insert("B1".into(), vec![s.week_start]);
        assert_eq!(
            LedgerMarks::new(&s, &h),
            LedgerMarks {
                excluded: BTreeMap::new(),
                week_len: 7
            }
        );
    }

    #[test]
    fn planning_with_marks_serves_no_marked_site_and_labels_it() {
        let s = tiny();
        let mut opts = PlanOptions::default();
        let first = plan::plan(s.clone(), &opts).expect("plan");
        let served: Vec<SiteIdx> = first
            .allocation
            .sites
            .iter()
            .filter(|o| o.vials > 0)
            .map(|o| o.site)
            .collect();
        assert!(!served.is_empty(), "the fixture serves something");
        let mut h = LedgerHistory::default();
        for &site in &served {
            let sid = s.sites[site].id.0.clone();
            match s.sites[site].detail {
                SiteDetail::Dooryard(_) => {
                    h.served_requests.insert(sid);
                }
                SiteDetail::Block(_) => {
                    h.block_releases
                        .insert(sid, vec![s.week_start - chrono::Days::new(7)]);
                }
            }
        }
        let marks = LedgerMarks::new(&s, &h);
        marks.exclude_arcs(&s, &mut opts.alloc);
        let mut second = plan::plan(s.clone(), &opts).expect("plan again");
        marks.mark(&mut second.allocation);
        for &site in &served {
            let o = &second.allocation.sites[site];
            assert_eq!(o.vials, 0, "{} served again", s.sites[site].id);
            let want = match s.sites[site].detail {
                SiteDetail::Dooryard(_) => Reason::AlreadyServed,
                SiteDetail::Block(_) => Reason::ReleasedRecently,
            };
            assert_eq!(o.reason, Some(want));
            assert!(!o.eligible);
        }
        assert!(
            second
                .allocation
                .notes
                .iter()
                .any(|n| matches!(n.kind, NoteKind::ArcsExcluded { .. })
                    && n.text
                        .contains("arc(s) excluded by request (sites the season ledger")),
            "{:?}",
            second.allocation.notes
        );
    }
}
