//! `broodcast forecast rearing.csv --temps temps.csv --out supply.csv`: vials per facility and
//! day from the cage log and daily mean temperatures (degree-day model, `docs/season.md`).

use std::collections::BTreeMap;
use std::path::PathBuf;

use chrono::{Datelike, NaiveDate, Weekday};

use super::{CliResult, Failure, print_out};
use crate::forecast::{self, ForecastError, ForecastParams};

/// Arguments of `forecast`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Cage log: cage_id,facility_id,wasps_added_date,expected_yield_wasps.
    rearing: PathBuf,
    /// Daily mean temperatures: facility_id,date,mean_c (every day from adding to emergence).
    #[arg(long)]
    temps: PathBuf,
    /// Where to write supply.csv (facility_id,date,vials), atomically. An existing file is
    /// refused (broodcast cannot tell its own CSV from yours) unless --force.
    #[arg(long)]
    out: PathBuf,
    /// Move an existing --out file aside to `<name>.replaced-<n>` instead of refusing
    /// (nothing is ever deleted).
    #[arg(long)]
    force: bool,
    /// Wasps in one vial, every facility (else read from --facilities).
    #[arg(long, conflicts_with = "facilities")]
    wasps_per_vial: Option<u32>,
    /// A facilities.csv giving each facility's wasps_per_vial.
    #[arg(long)]
    facilities: Option<PathBuf>,
    /// Lower development threshold, °C (Ramos Aguila et al. 2020).
    #[arg(long, default_value_t = 7.85)]
    threshold_c: f64,
    /// Degree-days above the threshold from egg to adult (Ramos Aguila et al. 2020).
    #[arg(long, default_value_t = 193.36)]
    degree_days: f64,
    /// Days over which a cage's yield emerges, uniformly (common practice).
    #[arg(long, default_value_t = 5)]
    collection_days: u32,
    /// Only this planning week (a Monday): the file then loads as that week's supply.csv.
    #[arg(long)]
    week: Option<NaiveDate>,
}

impl From<ForecastError> for Failure {
    fn from(e: ForecastError) -> Self {
        match e {
            ForecastError::Input { .. } | ForecastError::Io { .. } => Failure::Input(e.to_string()),
        }
    }
}

pub(crate) fn run(args: Args) -> CliResult {
    if !(args.threshold_c.is_finite() && args.degree_days.is_finite() && args.degree_days > 0.0) {
        return Err(Failure::Input(
            "--threshold-c must be finite and --degree-days finite and > 0".into(),
        ));
    }
    if args.collection_days == 0 {
        return Err(Failure::Input("--collection-days must be 1 or more".into()));
    }
    if let Some(w) = args.week
        && w.weekday() != Weekday::Mon
    {
        return Err(Failure::Input(format!(
            "--week {w} is a {:?}; a planning week starts on a Monday",
            w.weekday()
        )));
    }
    let mut inputs = vec![args.rearing.as_path(), args.temps.as_path()];
    inputs.extend(args.facilities.as_deref());
    let target = crate::output::OutputFile::check(&args.out, &inputs, None, args.force)?;
    let params = ForecastParams {
        threshold_c: args.threshold_c,
        degree_days: args.degree_days,
        collection_days: args.collection_days,
    };
    let cages = forecast::read_cages(&args.rearing)?;
    let temps = forecast::read_temps(&args.temps)?;
    let wpv: BTreeMap<String, u32> = match (args.wasps_per_vial, &args.facilities) {
        (Some(0), _) => return Err(Failure::Input("--wasps-per-vial must be > 0".into())),
        (Some(n), _) => cages.iter().map(|c| (c.facility_id.clone(), n)).collect(),
        (None, Some(f)) => forecast::read_wasps_per_vial(f)?,
        (None, None) => {
            return Err(Failure::Input(
                "give --wasps-per-vial N or --facilities facilities.csv".into(),
            ));
        }
    };
    let mut rows = forecast::forecast(&cages, &temps, &params, &wpv)?;
    if let Some(w) = args.week {
        let end = w + chrono::Days::new(6);
        rows.retain(|r| r.date >= w && r.date <= end);
    }
    let bytes = forecast::supply_csv(&rows);
    let aside = target.write(&bytes)?;
    let vials: u64 = rows.iter().map(|r| u64::from(r.vials)).sum();
    let mut text = format!(
        "{} cages → {vials} vials over {} facility-days; wrote {}\n",
        cages.len(),
        rows.len(),
        args.out.display()
    );
    if let Some(a) = aside {
        text.push_str(&format!(
            "moved the file that was there to {} (nothing was deleted)\n",
            a.display()
        ));
    }
    print_out(&text)
}
