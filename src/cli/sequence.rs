//! `broodcast sequence --matrix FILE [--json] [--kicks N] [--time-limit SECONDS]`: best visiting
//! order for one vehicle.
//!
//! The search stops at a work limit (`--kicks`), so the same matrix gives the same order on
//! any machine. A wall-clock limit applies only when the user sets `--time-limit`, and the
//! output then says whether it stopped the search.

use std::path::PathBuf;
use std::time::Duration;

use super::{CliResult, Failure, print_out};
use crate::dispatch::tsp;
use crate::scenario;

/// Longest `--time-limit`, seconds (one hour).
const MAX_TIME_LIMIT_SECONDS: f64 = 3_600.0;

/// Arguments of `sequence`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Square travel-time CSV: header row and first column are ids, values in minutes; the
    /// first id is the depot the vehicle starts from and returns to.
    #[arg(long)]
    matrix: PathBuf,
    /// Print `{"order": [...], "total_minutes": N, "kicks": K, "time_limit_seconds": S or
    /// null, "time_limited": B}`.
    #[arg(long)]
    json: bool,
    /// Work limit: most perturbation kicks after the first local optimum. The same matrix and
    /// limit give the same order on any machine.
    #[arg(long, default_value_t = tsp::TspOptions::default().max_kicks)]
    kicks: u32,
    /// Optional wall-clock budget, seconds (at most 3,600). None by default; when it stops the
    /// search before `--kicks`, the order may differ between runs and the output says so.
    #[arg(long)]
    time_limit: Option<f64>,
}

pub(crate) fn run(args: Args) -> CliResult {
    let name = args.matrix.display().to_string();
    let bytes = std::fs::read(&args.matrix)
        .map_err(|e| Failure::Input(format!("{name}: cannot read: {e}")))?;
    let matrix = scenario::parse_travel_matrix(&name, &bytes)?;
    if matrix.ids.is_empty() {
        return Err(Failure::Input(format!(
            "{name}: the matrix has no locations; the first id must be the depot"
        )));
    }
    if let Some(t) = args.time_limit
        && !(t.is_finite() && t > 0.0 && t <= MAX_TIME_LIMIT_SECONDS)
    {
        return Err(Failure::Input(format!(
            "--time-limit {t}: must be a positive number of seconds, at most \
             {MAX_TIME_LIMIT_SECONDS}; leave it out to stop at --kicks only"
        )));
    }
    let opts = tsp::TspOptions {
        time_limit: args.time_limit.map(Duration::from_secs_f64),
        max_kicks: args.kicks,
        ..tsp::TspOptions::default()
    };
    let tour = tsp::best_order(&matrix.minutes, &opts);
    print_out(&report(&matrix.ids, &tour, &args, args.json))
}

/// The order as text or JSON, with the search limits used.
fn report(ids: &[String], tour: &tsp::Tour, args: &Args, json: bool) -> String {
    let order: Vec<&str> = tour.order.iter().map(|&i| ids[i].as_str()).collect();
    if json {
        let v = serde_json::json!({
            "order": order,
            "total_minutes": tour.total_minutes,
            "kicks": args.kicks,
            "time_limit_seconds": args.time_limit,
            "time_limited": tour.time_limited,
        });
        return format!("{v}\n");
    }
    let mut text = format!("depot {}\n", ids[0]);
    for (i, id) in order.iter().enumerate() {
        text.push_str(&format!("{:>4}  {id}\n", i + 1));
    }
    text.push_str(&format!(
        "back to {}\ntotal {:.1} minutes\n",
        ids[0], tour.total_minutes
    ));
    text.push_str(&match (args.time_limit, tour.time_limited) {
        (None, _) => format!("search: up to {} kicks (work limit)\n", args.kicks),
        (Some(t), false) => format!(
            "search: up to {} kicks; time limit {t} s (--time-limit) set, not reached\n",
            args.kicks
        ),
        (Some(t), true) => format!(
            "search: stopped by the time limit {t} s (--time-limit) before {} kicks; another \
             run may give another order\n",
            args.kicks
        ),
    });
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    fn args(time_limit: Option<f64>) -> Args {
        Args {
            matrix: PathBuf::from("m.csv"),
            json: false,
            kicks: 3_000,
            time_limit,
        }
    }

    /// Points on a line at 0, 10, 20, 30 minutes; the depot first.
    fn line() -> Vec<Vec<f64>> {
        let x = [0.0, 10.0, 20.0, 30.0, 15.0];
        x.iter()
            .map(|a: &f64| x.iter().map(|b: &f64| (a - b).abs()).collect())
            .collect()
    }

    #[test]
    fn default_search_is_work_limited_and_says_so() {
        let a = args(None);
        let opts = tsp::TspOptions {
            max_kicks: a.kicks,
            ..tsp::TspOptions::default()
        };
        assert_eq!(opts.time_limit, None);
        let tour = tsp::best_order(&line(), &opts);
        assert!(!tour.time_limited);
        let ids: Vec<String> = ["D", "A", "B", "C", "E"].map(String::from).to_vec();
        let text = report(&ids, &tour, &a, false);
        assert!(text.contains("total 60.0 minutes"), "{text}");
        assert!(text.contains("up to 3000 kicks (work limit)"), "{text}");
        let json: serde_json::Value = serde_json::from_str(&report(&ids, &tour, &a, true)).unwrap();
        assert_eq!(json["time_limit_seconds"], serde_json::Value::Null);
        assert_eq!(json["time_limited"], false);
        assert_eq!(json["kicks"], 3_000);
    }

    #[test]
    fn a_time_limit_the_user_set_is_reported() {
        let a = args(Some(0.5));
        let opts = tsp::TspOptions {
            time_limit: Some(Duration::ZERO),
            ..tsp::TspOptions::default()
        };
        let tour = tsp::best_order(&line(), &opts);
        assert!(tour.time_limited);
        let ids: Vec<String> = ["D", "A", "B", "C", "E"].map(String::from).to_vec();
        let text = report(&ids, &tour, &a, false);
        assert!(text.contains("stopped by the time limit 0.5 s"), "{text}");
        let json: serde_json::Value = serde_json::from_str(&report(&ids, &tour, &a, true)).unwrap();
        assert_eq!(json["time_limit_seconds"], 0.5);
        assert_eq!(json["time_limited"], true);
        let unbound = tsp::best_order(
            &line(),
            &tsp::TspOptions {
                time_limit: Some(Duration::from_secs(3_600)),
                ..tsp::TspOptions::default()
            },
        );
        assert!(!unbound.time_limited);
        assert!(report(&ids, &unbound, &a, false).contains("set, not reached"));
    }
}
