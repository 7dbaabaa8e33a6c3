//! `broodcast sweep [DIR] --supply 0.25,0.5,1,2,4 [--without ID ...] [--set KEY=VALUE ...]
//! [--saturation 0.25] [--out DIR]`: one full plan per supply multiplier, with the same outages
//! and overrides in every variant; writes sweep.csv, sweep.html, the charts and each variant's
//! summary.json (docs/sweep.md).

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use super::{CliResult, Failure, print_out, source_of};
use crate::output::{self, sweep_report};
use crate::plan::PlanOptions;
use crate::scenario::{self, Source};
use crate::sweep::{self, Multiplier, Setting, SweepError, SweepSpec};

/// Arguments of `sweep`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Scenario folder (default: the built-in demo).
    dir: Option<PathBuf>,
    /// Supply multipliers, comma-separated: each scales every facility's daily vials
    /// (rounded half to even). 1 is always added.
    #[arg(long, default_value = "0.25,0.5,1,2,4")]
    supply: String,
    /// Remove a facility (its supply and vehicles) from every variant; repeat for more.
    #[arg(long = "without", value_name = "FACILITY_ID")]
    without: Vec<String>,
    /// Override a scenario.json key in every variant, e.g. policy.dooryard_share_min=0.3;
    /// repeat for more. The scenario is re-validated.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    set: Vec<String>,
    /// Saturation: the first multiplier above 1 whose marginal value per vial is below this
    /// share of the 1× value.
    #[arg(long, default_value_t = 0.25)]
    saturation: f64,
    /// Search every variant's routes as long as `plan` does (default: the 1× variant does,
    /// and a variant at m times the supply searches 1/(2⌈m⌉) of the rounds per depot-day).
    #[arg(long)]
    full_routes: bool,
    /// Output folder, replaced as a whole only once every file is ready, and only when it is
    /// new, empty or an unchanged earlier broodcast output.
    #[arg(long, default_value = "sweep-out")]
    out: PathBuf,
    /// When --out holds files broodcast did not write, move that folder aside to
    /// `<name>.replaced-<n>` instead of refusing (nothing is ever deleted).
    #[arg(long)]
    force: bool,
}

pub(super) fn input(e: SweepError) -> Failure {
    if e.is_input() {
        Failure::Input(e.to_string())
    } else {
        Failure::Internal(e.into())
    }
}

/// The scenario files as (name, bytes) for re-loading with overrides: the required files,
/// `overrides.csv` and the travel matrix and road network named by the overridden
/// scenario.json. Files that
/// cannot be read are left out; the loader then names them.
pub(super) fn scenario_files(source: &Source, settings: &[Setting]) -> Vec<(String, Vec<u8>)> {
    let dir: &Path = match source {
        Source::EmbeddedDemo => {
            return crate::demo::FILES
                .iter()
                .map(|(n, b)| (n.to_string(), b.to_vec()))
                .collect();
        }
        Source::Dir(d) => d,
    };
    let mut names: Vec<String> = [
        "scenario.json",
        "facilities.csv",
        "supply.csv",
        "blocks.geojson",
        "requests.csv",
        "scouting.csv",
        "fleet.csv",
        "overrides.csv",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let json = std::fs::read(dir.join("scenario.json")).unwrap_or_default();
    let doc = sweep::apply_settings(&json, settings)
        .ok()
        .and_then(|b| serde_json::from_slice::<serde_json::Value>(&b).ok());
    for key in ["matrix", "road_network"] {
        if let Some(m) = doc.as_ref().and_then(|v| v["travel"][key].as_str()) {
            // As the loader names it: trimmed, without a leading "./".
            names.push(m.trim().trim_start_matches("./").to_string());
        }
    }
    names
        .into_iter()
        .filter_map(|n| std::fs::read(dir.join(&n)).ok().map(|b| (n, b)))
        .collect()
}

pub(crate) fn run(args: Args) -> CliResult {
    // Every argument is checked before anything is loaded or planned.
    let supply = Multiplier::parse_list(&args.supply).map_err(input)?;
    let settings: Vec<Setting> = args
        .set
        .iter()
        .map(|s| Setting::parse(s))
        .collect::<Result<_, _>>()
        .map_err(input)?;
    if !(args.saturation > 0.0 && args.saturation < 1.0) {
        return Err(input(SweepError::BadSaturation {
            value: args.saturation,
        }));
    }
    let inputs: Vec<&Path> = args.dir.iter().map(PathBuf::as_path).collect();
    let target = output::OutputFolder::check(&args.out, &inputs, args.force)?;
    let source = source_of(&args.dir);
    // The scenario as given must be valid on its own, so that a problem found after the
    // overrides is theirs.
    let mut scenario = scenario::load(&source)?;
    if !settings.is_empty() {
        scenario = sweep::load_with_settings(&scenario_files(&source, &settings), &settings)
            .map_err(input)?;
    }
    let spec = SweepSpec {
        supply,
        without: args.without.clone(),
        settings,
        saturation_fraction: args.saturation,
        full_routes: args.full_routes,
    };
    let n = sweep::normalize_multipliers(spec.supply.clone()).len();
    let bar = if std::io::stderr().is_terminal() {
        let bar = indicatif::ProgressBar::new(n as u64);
        if let Ok(style) =
            indicatif::ProgressStyle::with_template("{msg} [{bar:30}] {pos}/{len} variants")
        {
            bar.set_style(style.progress_chars("=> "));
        }
        bar.set_message("planning");
        bar
    } else {
        indicatif::ProgressBar::hidden()
    };
    let result = sweep::sweep(&scenario, &spec, &PlanOptions::default(), &|| bar.inc(1));
    bar.finish_and_clear();
    let s = result.map_err(input)?;
    let files = sweep_report::render(&s).map_err(|e| Failure::Internal(e.into()))?;
    let written = target.write(&files)?;

    let mut text = format!(
        "swept '{}': {} {}",
        crate::output::week_title(&s.scenario, s.week_start),
        s.variants.len(),
        if s.variants.len() == 1 {
            "variant"
        } else {
            "variants"
        }
    );
    if !s.without.is_empty() {
        text.push_str(&format!(", without {}", s.without.join(", ")));
    }
    if !s.settings.is_empty() {
        text.push_str(&format!(", with {}", s.settings.join(" ")));
    }
    text.push('\n');
    text.push_str(&format!(
        "{:<10} {:>8} {:>14} {:>14} {:>7} {:>8} {:>6} {:>9} {:>12}\n",
        "variant",
        "vials",
        "LP bound",
        "objective",
        "gap %",
        "shipped",
        "sites",
        "requests",
        "marginal"
    ));
    for v in &s.variants {
        text.push_str(&format!(
            "{:<10} {:>8} {:>14.1} {:>14.1} {:>7.2} {:>8} {:>6} {:>9} {:>12.1}\n",
            v.name,
            v.supply_vials,
            v.lp_bound,
            v.objective,
            v.gap * 100.0,
            v.shipped_vials,
            v.sites_served,
            v.requests_served,
            v.marginal_value_per_vial
        ));
    }
    text.push_str(&sweep_report::saturation_text(&s));
    text.push('\n');
    text.push_str(&super::wrote_line(files.len(), &args.out, &written));
    print_out(&text)
}
