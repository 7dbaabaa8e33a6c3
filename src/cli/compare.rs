//! `broodcast compare PLAN_A PLAN_B [--json]`: what changed from one plan's outputs to
//! another's (sites gained and lost, vials by facility and day, headline figures).

use std::path::PathBuf;

use super::{CliResult, Failure, print_out};
use crate::compare::{self, Comparison};

/// Arguments of `compare`.
#[derive(Debug, clap::Args)]
pub(crate) struct Args {
    /// Folder written by `broodcast plan --out` (the "before").
    plan_a: PathBuf,
    /// Folder written by `broodcast plan --out` (the "after").
    plan_b: PathBuf,
    /// Print the comparison as JSON.
    #[arg(long)]
    json: bool,
}

pub(crate) fn run(args: Args) -> CliResult {
    let a = compare::read_plan(&args.plan_a).map_err(|e| Failure::Input(e.to_string()))?;
    let b = compare::read_plan(&args.plan_b).map_err(|e| Failure::Input(e.to_string()))?;
    let c = compare::compare(&a, &b);
    if args.json {
        let mut text = serde_json::to_string_pretty(&c).map_err(anyhow::Error::from)?;
        text.push('\n');
        print_out(&text)
    } else {
        print_out(&to_text(&c))
    }
}

fn signed(x: f64, decimals: usize) -> String {
    let x = if x.abs() < 0.5 * 10f64.powi(-(decimals as i32)) {
        0.0
    } else {
        x
    };
    if x > 0.0 {
        format!("+{x:.decimals$}")
    } else {
        format!("{x:.decimals$}")
    }
}

fn to_text(c: &Comparison) -> String {
    let mut t = format!("A: {}\nB: {}\n", c.plan_a, c.plan_b);
    for n in &c.notes {
        t.push_str(&format!("note: {n}\n"));
    }
    if c.no_change {
        t.push_str("no change: the same sites get the same vials from the same facilities on the same days\n");
        return t;
    }
    t.push_str(&format!(
        "\n{:<22} {:>16} {:>16} {:>16}\n",
        "figure", "A", "B", "change"
    ));
    for f in &c.figures {
        let d = if f.name == "objective" || f.name == "lp_bound" || f.name == "wasps_expected_alive"
        {
            1
        } else {
            0
        };
        t.push_str(&format!(
            "{:<22} {:>16.d$} {:>16.d$} {:>16}\n",
            f.name,
            f.a,
            f.b,
            signed(f.change, d)
        ));
    }
    let sites = |title: &str, list: &[compare::SiteChange], reason_title: &str| {
        let mut s = format!("\n{title}: {}\n", list.len());
        if !list.is_empty() {
            s.push_str(&format!(
                "  {:<12} {:<9} {:>7} {:>7}  {}\n",
                "site", "kind", "A vials", "B vials", reason_title
            ));
        }
        for x in list {
            s.push_str(&format!(
                "  {:<12} {:<9} {:>7} {:>7}  {}\n",
                x.site_id, x.site_kind, x.vials_a, x.vials_b, x.reason
            ));
        }
        s
    };
    t.push_str(&sites(
        "sites lost (served in A, not in B)",
        &c.sites_lost,
        "why not in B",
    ));
    t.push_str(&sites(
        "sites gained (served in B, not in A)",
        &c.sites_gained,
        "why not in A",
    ));
    t.push_str(&sites("sites with other vials", &c.sites_changed, ""));
    t.push_str(&format!(
        "\nvials by facility and dispatch day\n  {:<10} {:<10} {:>7} {:>7} {:>7}\n",
        "facility", "date", "A", "B", "change"
    ));
    for d in &c.vials_by_facility_day {
        t.push_str(&format!(
            "  {:<10} {:<10} {:>7} {:>7} {:>7}\n",
            d.facility_id,
            d.dispatch_date,
            d.vials_a,
            d.vials_b,
            signed(d.change as f64, 0)
        ));
    }
    t
}
