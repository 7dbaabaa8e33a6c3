//! `broodcast sequence --matrix FILE [--json]`: best visiting order for one vehicle.

use std::path::PathBuf;

use super::{CliResult, Failure, print_out};
use crate::dispatch::tsp;
use crate::scenario;

/// Arguments of `sequence`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Square travel-time CSV: header row and first column are ids, values in minutes; the
    /// first id is the depot the vehicle starts from and returns to.
    #[arg(long)]
    matrix: PathBuf,
    /// Print `{"order": [...], "total_minutes": N}`.
    #[arg(long)]
    json: bool,
    /// Wall-clock budget for the search, seconds.
    #[arg(long, default_value_t = 1.0)]
    time_limit: f64,
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
    if !(args.time_limit.is_finite() && args.time_limit > 0.0) {
        return Err(Failure::Input(format!(
            "--time-limit {}: must be a positive number of seconds",
            args.time_limit
        )));
    }
    let opts = tsp::TspOptions {
        time_limit: Some(std::time::Duration::from_secs_f64(
            args.time_limit.min(3600.0),
        )),
        ..tsp::TspOptions::default()
    };
    let tour = tsp::best_order(&matrix.minutes, &opts);
    let order: Vec<&str> = tour.order.iter().map(|&i| matrix.ids[i].as_str()).collect();
    if args.json {
        let v = serde_json::json!({ "order": order, "total_minutes": tour.total_minutes });
        print_out(&format!("{v}\n"))
    } else {
        let mut text = format!("depot {}\n", matrix.ids[0]);
        for (i, id) in order.iter().enumerate() {
            text.push_str(&format!("{:>4}  {id}\n", i + 1));
        }
        text.push_str(&format!(
            "back to {}\ntotal {:.1} minutes\n",
            matrix.ids[0], tour.total_minutes
        ));
        print_out(&text)
    }
}
