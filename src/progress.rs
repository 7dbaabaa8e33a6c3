//! Progress of the long stages of a plan, reported to whoever asked (the command line shows it
//! on a terminal). Stages call [`Progress::report`] as they reach each [`Step`]; nothing they
//! compute depends on it, so a plan is the same with or without a listener.

use std::fmt;
use std::sync::Arc;

/// A step a stage has reached.
#[derive(Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Step {
    /// Travel times between facilities and sites (road networks take longest).
    Travel,
    /// Pest pressure and priority at this many sites.
    Priority {
        /// Sites in the scenario.
        sites: usize,
    },
    /// Building the candidate arcs (facility, day, site, mode) for this many sites.
    Arcs {
        /// Sites in the scenario.
        sites: usize,
    },
    /// Planning the week by hand, for comparison.
    HandPlan,
    /// An LP round starts: the relaxation over `working_arcs` of `arcs` candidate arcs.
    LpRound {
        /// 1 for the first round.
        round: usize,
        /// Arcs in this round's LP.
        working_arcs: usize,
        /// Arcs in the whole pool.
        arcs: usize,
    },
    /// Tightening the whole-vial bound and rounding to whole vials.
    WholeVials,
    /// `done` of `total` depot-days routed (reported at 0 and after each depot-day).
    Routes {
        /// Depot-days routed so far.
        done: usize,
        /// Depot-days to route.
        total: usize,
    },
    /// Planning again without the options the routes could not serve.
    Replan,
}

/// A function told each step; it may be called from several threads at once (depot-days are
/// routed in parallel).
type Listener = dyn Fn(&Step) + Send + Sync;

/// Where progress goes: nowhere by default, or to a listener function.
#[derive(Clone, Default)]
pub struct Progress(Option<Arc<Listener>>);

impl Progress {
    /// Progress reported to `listener`.
    pub fn new(listener: impl Fn(&Step) + Send + Sync + 'static) -> Self {
        Progress(Some(Arc::new(listener)))
    }

    /// Tells the listener, if any, that `step` is reached.
    pub fn report(&self, step: Step) {
        if let Some(listener) = &self.0 {
            listener(&step);
        }
    }
}

impl fmt::Debug for Progress {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let state = if self.0.is_some() { "listened" } else { "off" };
        write!(f, "Progress({state})")
    }
}

impl fmt::Display for Step {
    /// One line for a person watching a terminal.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Step::Travel => write!(f, "travel times"),
            Step::Priority { sites } => write!(f, "pest pressure at {sites} sites"),
            Step::Arcs { sites } => write!(f, "candidate arcs for {sites} sites"),
            Step::HandPlan => write!(f, "the week planned by hand, for comparison"),
            Step::LpRound {
                round,
                working_arcs,
                arcs,
            } => write!(f, "LP round {round} on {working_arcs} of {arcs} arcs"),
            Step::WholeVials => write!(f, "whole vials: bound and rounding"),
            Step::Routes { done, total } => write!(f, "routes: {done} of {total} depot-days"),
            Step::Replan => write!(f, "re-planning the stops no route could serve"),
        }
    }
}

#[cfg(test)]
mod tests {
    use std::sync::Mutex;

    use super::*;
    use crate::output::{PlanView, RenderOptions, render_all_with};
    use crate::plan::{PlanOptions, plan};
    use crate::scenario::fixture::tiny;

    #[test]
    fn a_plan_reports_every_stage_in_order_and_is_the_same_without_a_listener() {
        let seen = Arc::new(Mutex::new(Vec::new()));
        let log = Arc::clone(&seen);
        let opts = PlanOptions {
            progress: Progress::new(move |s| log.lock().unwrap().push(s.clone())),
            ..PlanOptions::default()
        };
        let listened = plan(tiny(), &opts).unwrap();
        let steps = seen.lock().unwrap().clone();
        let position = |want: &dyn Fn(&Step) -> bool| {
            steps
                .iter()
                .position(want)
                .unwrap_or_else(|| panic!("missing step in {steps:?}"))
        };
        let order = [
            position(&|s| *s == Step::Travel),
            position(&|s| matches!(s, Step::Priority { sites } if *sites == tiny().sites.len())),
            position(&|s| matches!(s, Step::Arcs { .. })),
            position(&|s| *s == Step::HandPlan),
            position(&|s| matches!(s, Step::LpRound { round: 1, .. })),
            position(&|s| *s == Step::WholeVials),
            position(&|s| matches!(s, Step::Routes { done: 0, .. })),
        ];
        assert!(order.windows(2).all(|w| w[0] < w[1]), "{steps:?}");
        // Every depot-day is counted once, and the last count is the total.
        let routes: Vec<(usize, usize)> = steps
            .iter()
            .filter_map(|s| match s {
                Step::Routes { done, total } => Some((*done, *total)),
                _ => None,
            })
            .collect();
        let total = routes[0].1;
        assert!(total > 0, "the fixture routes something");
        let mut counts: Vec<usize> = routes.iter().map(|r| r.0).collect();
        counts.sort_unstable();
        assert_eq!(counts, (0..=total).collect::<Vec<_>>(), "{steps:?}");
        // Every LP round is numbered from 1 on and never over the pool.
        for s in &steps {
            if let Step::LpRound {
                round,
                working_arcs,
                arcs,
            } = s
            {
                assert!(*round >= 1 && working_arcs <= arcs, "{s:?}");
            }
        }
        let quiet = plan(tiny(), &PlanOptions::default()).unwrap();
        let bytes = |p| render_all_with(&PlanView::of(p), &RenderOptions::default()).unwrap();
        assert!(
            bytes(&listened) == bytes(&quiet),
            "listening changed the plan"
        );
    }

    #[test]
    fn steps_read_as_plain_words() {
        let s = Step::LpRound {
            round: 2,
            working_arcs: 3408,
            arcs: 13866,
        };
        assert_eq!(s.to_string(), "LP round 2 on 3408 of 13866 arcs");
        assert_eq!(
            Step::Routes { done: 3, total: 15 }.to_string(),
            "routes: 3 of 15 depot-days"
        );
        assert_eq!(format!("{:?}", Progress::default()), "Progress(off)");
    }
}
