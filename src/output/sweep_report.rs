//! Outputs of `sweep`: `sweep.csv` (one row per variant), `sweep.html` (printable report with
//! SVG charts), the same charts as `sweep-shipped.svg`, `sweep-value.svg`, `sweep-marginal.svg` and
//! `sweep-served.svg`, and in `variants/<name>/` every file `plan --redact` writes for that
//! variant (so `compare` works on any two variants; route sheets without addresses).
//!
//! No personal data: ids, counts and model figures only (a summary's notes name site and
//! facility ids, never an address). Every number is written with fixed decimals, so the bytes
//! depend only on the sweep. Cost: O(variants · binding rows).
//!
//! `sweep.html` is a `maud` template: every value spliced into it is HTML-escaped. The charts
//! are the standalone SVG files (`sweep_chart`, which escapes their text) and enter the
//! template as they are.

use std::collections::BTreeMap;

use maud::{DOCTYPE, PreEscaped, html};
use serde::Serialize;

use super::sweep_chart::{self, LineChart, Series};
use super::{OutputError, PAGE_CSS, PlanView, RenderOptions, fixed, render_all_with};

const REDACTED: RenderOptions = RenderOptions { redact: true };
use crate::allocate::ConstraintKind::{self, Parcel, Supply, Vehicles};
use crate::csvread::{Cells, CsvRow};
use crate::sweep::{Multiplier, Sweep, VariantResult};

/// Whether a binding row is of one kind.
type IsKind = fn(&ConstraintKind) -> bool;

/// The `sweep.csv` header, the contract's column order ([`SweepRecord`]).
pub const SWEEP_COLUMNS: [&str; 17] = [
    "variant",
    "supply_multiplier",
    "lp_bound",
    "objective",
    "gap",
    "shipped_vials",
    "supply_vials",
    "sites_served",
    "requests_served",
    "wasps_expected_alive",
    "marginal_value_per_vial",
    "blocks_served",
    "bound",
    "top_quarter_wasps",
    "hand_objective",
    "hand_top_quarter_wasps",
    "hand_unshipped_vials",
];

/// Renders every sweep output as (relative file name, bytes), in a fixed order.
///
/// # Errors
/// CSV errors (not expected for an in-memory writer).
pub fn render(sweep: &Sweep) -> Result<Vec<(String, Vec<u8>)>, OutputError> {
    let charts = charts(sweep);
    let mut files = vec![
        ("sweep.csv".to_string(), csv(sweep)?),
        ("sweep.html".to_string(), html(sweep, &charts).into_bytes()),
    ];
    for (name, svg) in charts {
        files.push((format!("{name}.svg"), svg.into_bytes()));
    }
    for (v, plan) in sweep.variants.iter().zip(&sweep.plans) {
        // Redacted: the sweep is an analyst's output, so no variant's route sheets carry an
        // address (docs/outputs.md, "Personal data").
        for (name, bytes) in render_all_with(&PlanView::of(plan), &REDACTED)? {
            files.push((format!("variants/{}/{name}", v.name), bytes));
        }
    }
    Ok(files)
}

/// One `sweep.csv` row: a variant's headline figures. Written by `sweep` and read back through
/// [`crate::csvread`]. Fields in [`SWEEP_COLUMNS`] order (the CSV writer checks it, a test ties
/// the two); objective values with 3 decimals, ratios and values per vial with 6, wasps with 1.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SweepRecord {
    /// Variant name, `x` and the multiplier (`x0.5`); its folder under `variants/`.
    pub variant: String,
    /// Supply multiplier, as its canonical text (`0.5`, `1`, `4`).
    #[serde(serialize_with = "super::cell::text")]
    pub supply_multiplier: Multiplier,
    /// LP relaxation optimum, objective units (priority-weighted live wasps).
    #[serde(serialize_with = "super::cell::fixed3")]
    pub lp_bound: f64,
    /// The whole-vial plan's objective, objective units.
    #[serde(serialize_with = "super::cell::fixed3")]
    pub objective: f64,
    /// 1 − objective / bound (a share, 0..1).
    #[serde(serialize_with = "super::cell::fixed6")]
    pub gap: f64,
    /// Vials on a route stop or parcel.
    pub shipped_vials: u64,
    /// Vials packed over the week after scaling, all facilities.
    pub supply_vials: u64,
    /// Sites (blocks and requests) that receive vials.
    pub sites_served: u64,
    /// Dooryard requests that receive vials.
    pub requests_served: u64,
    /// Expected live wasps released, wasps.
    #[serde(serialize_with = "super::cell::fixed1")]
    pub wasps_expected_alive: f64,
    /// Objective gained per extra vial, supply-weighted mean over facilities (objective units
    /// per vial).
    #[serde(serialize_with = "super::cell::fixed6")]
    pub marginal_value_per_vial: f64,
    /// Blocks that receive vials.
    pub blocks_served: u64,
    /// Whole-vial upper bound, objective units.
    #[serde(serialize_with = "super::cell::fixed3")]
    pub bound: f64,
    /// Expected live wasps delivered to the top priority quarter of eligible sites, wasps.
    #[serde(serialize_with = "super::cell::fixed1")]
    pub top_quarter_wasps: f64,
    /// The same variant planned by hand: its objective, objective units.
    #[serde(serialize_with = "super::cell::fixed3")]
    pub hand_objective: f64,
    /// Planned by hand: live wasps to the top priority quarter, wasps.
    #[serde(serialize_with = "super::cell::fixed1")]
    pub hand_top_quarter_wasps: f64,
    /// Planned by hand: vials packed and never shipped.
    pub hand_unshipped_vials: u64,
}

impl SweepRecord {
    /// The row of one variant.
    pub fn of(v: &VariantResult) -> Self {
        SweepRecord {
            variant: v.name.clone(),
            supply_multiplier: v.multiplier.clone(),
            lp_bound: v.lp_bound,
            objective: v.objective,
            gap: v.gap,
            shipped_vials: v.shipped_vials,
            supply_vials: v.supply_vials,
            sites_served: v.sites_served as u64,
            requests_served: v.requests_served as u64,
            wasps_expected_alive: v.wasps_expected_alive,
            marginal_value_per_vial: v.marginal_value_per_vial,
            blocks_served: v.blocks_served as u64,
            bound: v.bound,
            top_quarter_wasps: v.top_quarter_wasps,
            hand_objective: v.hand.objective,
            hand_top_quarter_wasps: v.hand.top_quarter_wasps,
            hand_unshipped_vials: v.hand.unshipped_vials(),
        }
    }
}

impl CsvRow for SweepRecord {
    const COLUMNS: &'static [&'static str] = &SWEEP_COLUMNS;
    const UNIQUE: Option<(&'static str, &'static str)> =
        Some(("variant", "the file has one row per variant"));

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let finite = |s: &str| {
            s.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| "a finite number".to_string())
        };
        const WHOLE: &str = "a whole number ≥ 0";
        let variant = c.required("variant", "every row needs a variant name");
        let supply_multiplier = c.parse_with("supply_multiplier", |s| {
            Multiplier::parse(s).map_err(|e| e.to_string())
        });
        let lp_bound = c.parse_with("lp_bound", finite);
        let objective = c.parse_with("objective", finite);
        let gap = c.parse_with("gap", finite);
        let shipped_vials = c.parse("shipped_vials", WHOLE);
        let supply_vials = c.parse("supply_vials", WHOLE);
        let sites_served = c.parse("sites_served", WHOLE);
        let requests_served = c.parse("requests_served", WHOLE);
        let wasps_expected_alive = c.parse_with("wasps_expected_alive", finite);
        let marginal_value_per_vial = c.parse_with("marginal_value_per_vial", finite);
        let blocks_served = c.parse("blocks_served", WHOLE);
        let bound = c.parse_with("bound", finite);
        let top_quarter_wasps = c.parse_with("top_quarter_wasps", finite);
        let hand_objective = c.parse_with("hand_objective", finite);
        let hand_top_quarter_wasps = c.parse_with("hand_top_quarter_wasps", finite);
        let hand_unshipped_vials = c.parse("hand_unshipped_vials", WHOLE);
        Some(SweepRecord {
            variant: variant?,
            supply_multiplier: supply_multiplier?,
            lp_bound: lp_bound?,
            objective: objective?,
            gap: gap?,
            shipped_vials: shipped_vials?,
            supply_vials: supply_vials?,
            sites_served: sites_served?,
            requests_served: requests_served?,
            wasps_expected_alive: wasps_expected_alive?,
            marginal_value_per_vial: marginal_value_per_vial?,
            blocks_served: blocks_served?,
            bound: bound?,
            top_quarter_wasps: top_quarter_wasps?,
            hand_objective: hand_objective?,
            hand_top_quarter_wasps: hand_top_quarter_wasps?,
            hand_unshipped_vials: hand_unshipped_vials?,
        })
    }
}

/// `sweep.csv`: one [`SweepRecord`] per variant, in multiplier order.
fn csv(sweep: &Sweep) -> Result<Vec<u8>, OutputError> {
    super::write_csv(&SWEEP_COLUMNS, sweep.variants.iter().map(SweepRecord::of))
}

/// What limits a variant's vials shipped, as (short label for a chart point, sentence): the
/// supply when it runs out, else the dooryard share floor, vehicle capacity or the parcel cap
/// when one binds, else the sites' own limits (every reachable site has what it can use).
/// `plan` gives the policy figures for the sentence; without it the sentence is shorter.
pub fn limit(v: &VariantResult, plan: Option<&crate::plan::Plan>) -> (String, String) {
    let binds = |is: IsKind| v.binding.iter().any(|b| is(&b.kind) && b.dual.abs() > 1e-9);
    let n = |x: u64| sweep_chart::tick_label(x as f64, 1.0);
    if v.supply_vials > 0 && v.shipped_vials >= v.supply_vials {
        return (
            "supply".into(),
            format!("supply: all {} vials shipped", n(v.supply_vials)),
        );
    }
    if binds(|k| *k == ConstraintKind::DooryardShare) {
        let sentence = match plan {
            Some(p) if p.scenario.policy.dooryard_share_min > 0.0 => {
                let per = p.scenario.policy.dooryard_vials_per_request;
                let share = p.scenario.policy.dooryard_share_min;
                let cap = (v.requests_served as f64 * f64::from(per) / share).floor() as u64;
                format!(
                    "dooryard floor: {} requests × {per} vials at a {} % share cap all vials at {}; {} shipped of {}",
                    n(v.requests_served as u64),
                    fixed(share * 100.0, 0),
                    n(cap),
                    n(v.shipped_vials),
                    n(v.supply_vials)
                )
            }
            _ => format!(
                "dooryard floor: {} shipped of {}",
                n(v.shipped_vials),
                n(v.supply_vials)
            ),
        };
        return ("dooryard floor".into(), sentence);
    }
    let shared: [(IsKind, _, _); 3] = [
        (
            |k| matches!(k, Supply { .. }),
            "supply",
            "supply on some days",
        ),
        (
            |k| matches!(k, Vehicles { .. }),
            "vehicles",
            "vehicle capacity",
        ),
        (
            |k| matches!(k, Parcel { .. }),
            "parcel cap",
            "the daily parcel cap",
        ),
    ];
    for (kind, short, words) in shared {
        if binds(kind) {
            return (
                short.into(),
                format!(
                    "{words}: {} shipped of {}",
                    n(v.shipped_vials),
                    n(v.supply_vials)
                ),
            );
        }
    }
    (
        "site limits".into(),
        format!(
            "no shared limit: every reachable site has what it can use; {} shipped of {}",
            n(v.shipped_vials),
            n(v.supply_vials)
        ),
    )
}

/// What binds in a variant's LP, in words: the shared rows (supply, vehicles, parcel, dooryard
/// share) with the largest duals, then how many of each site's own rows bind.
pub fn binding_text(v: &VariantResult) -> String {
    let shared: Vec<String> = v
        .binding
        .iter()
        .filter(|b| b.kind.is_shared())
        .take(3)
        .map(|b| format!("{} (dual {})", b.name, fixed(b.dual, 1)))
        .collect();
    let mut site_rows: BTreeMap<&str, usize> = BTreeMap::new();
    for b in v.binding.iter().filter(|b| !b.kind.is_shared()) {
        *site_rows.entry(b.kind.family()).or_insert(0) += 1;
    }
    let site_text = site_rows
        .iter()
        .map(|(k, n)| format!("{k} {n}"))
        .collect::<Vec<_>>()
        .join(", ");
    match (shared.is_empty(), site_rows.is_empty()) {
        (true, true) => "no constraint binds".to_string(),
        (true, false) => format!("no shared row binds; site rows: {site_text}"),
        (false, true) => shared.join(", "),
        (false, false) => format!("{}; site rows: {site_text}", shared.join(", ")),
    }
}

/// The saturation finding in one sentence (printed by the CLI and shown in the report).
pub fn saturation_text(sweep: &Sweep) -> String {
    let s = &sweep.saturation;
    let pct = fixed(s.fraction * 100.0, 0);
    let Some(reference) = sweep.reference() else {
        return "No 1× variant: the saturation point is not defined".to_string();
    };
    match s.at.and_then(|i| sweep.variants.get(i)) {
        Some(v) if s.reference <= 0.0 => format!(
            "Saturated at 1×: one more vial already adds nothing (marginal value 0), so supply is \
             not what limits this week; what binds at 1×: {}",
            binding_text(v)
        ),
        Some(v) => format!(
            "Saturation at {}× supply ({} vials): the marginal value falls to {} per vial, below \
             {pct} % of its 1× value {} (threshold {}); what binds there: {}",
            v.multiplier,
            v.supply_vials,
            fixed(v.marginal_value_per_vial, 1),
            fixed(s.reference, 1),
            fixed(s.threshold, 1),
            binding_text(v)
        ),
        None => {
            let last = sweep.variants.last().unwrap_or(reference);
            format!(
                "No saturation within the sweep: at {}× the marginal value is still {} per vial, \
                 {} % of its 1× value {} (threshold {pct} %); sweep larger multipliers to find it",
                last.multiplier,
                fixed(last.marginal_value_per_vial, 1),
                fixed(
                    if s.reference > 0.0 {
                        100.0 * last.marginal_value_per_vial / s.reference
                    } else {
                        0.0
                    },
                    0
                ),
                fixed(s.reference, 1),
            )
        }
    }
}

const BLUE: &str = "#1f4e79";
const ORANGE: &str = "#c55a11";
const GREEN: &str = "#38761d";
/// The hand plan's line: grey, beside the plan's colours.
const GREY: &str = "#7f7f7f";

/// (file stem, standalone SVG) for the four charts.
fn charts(sweep: &Sweep) -> Vec<(&'static str, String)> {
    let vs = &sweep.variants;
    let pts = |f: &dyn Fn(&VariantResult) -> f64| -> Vec<(f64, f64)> {
        vs.iter().map(|v| (v.multiplier.value(), f(v))).collect()
    };
    let base = sweep.reference().map_or(0, |v| v.supply_vials).to_string();
    let x_label = format!("supply multiplier (× the week's vials; 1× = {base} vials)");
    let value = LineChart {
        title: "Value vs supply",
        x_label: &x_label,
        y_label: "value (priority-weighted live wasps)",
        series: vec![
            Series {
                label: "LP bound",
                points: pts(&|v| v.lp_bound),
                colour: BLUE,
                dashed: false,
            },
            Series {
                label: "whole-vial plan",
                points: pts(&|v| v.objective),
                colour: ORANGE,
                dashed: true,
            },
            Series {
                label: "planned by hand",
                points: pts(&|v| v.hand.objective),
                colour: GREY,
                dashed: true,
            },
        ],
        hline: None,
        mark: None,
        point_labels: Vec::new(),
    };
    let sat = &sweep.saturation;
    let mark = sat.at.and_then(|i| vs.get(i)).map(|v| {
        (
            v.multiplier.value(),
            v.marginal_value_per_vial,
            format!("saturation at {}×", v.multiplier),
        )
    });
    let marginal = LineChart {
        title: "Marginal value of one more vial vs supply",
        x_label: &x_label,
        y_label: "marginal value (weighted live wasps per vial)",
        series: vec![Series {
            label: "supply-weighted mean of facility duals",
            points: pts(&|v| v.marginal_value_per_vial),
            colour: BLUE,
            dashed: false,
        }],
        hline: (sat.reference > 0.0).then(|| {
            (
                sat.threshold,
                format!("{} % of the 1× value", fixed(sat.fraction * 100.0, 0)),
            )
        }),
        mark,
        point_labels: Vec::new(),
    };
    let limits: Vec<String> = vs
        .iter()
        .enumerate()
        .map(|(i, v)| limit(v, sweep.plans.get(i)).0)
        .collect();
    let shipped = LineChart {
        title: "Vials shipped vs supply, and what limits them",
        x_label: &x_label,
        y_label: "vials (count)",
        series: vec![
            Series {
                label: "vials shipped",
                points: pts(&|v| v.shipped_vials as f64),
                colour: BLUE,
                dashed: false,
            },
            Series {
                label: "vials packed (supply)",
                points: pts(&|v| v.supply_vials as f64),
                colour: ORANGE,
                dashed: true,
            },
        ],
        hline: None,
        mark: None,
        point_labels: limits.clone(),
    };
    let served = LineChart {
        title: "Sites and requests served vs supply",
        x_label: &x_label,
        y_label: "sites served (count)",
        series: vec![
            Series {
                label: "sites (blocks + requests)",
                points: pts(&|v| v.sites_served as f64),
                colour: BLUE,
                dashed: false,
            },
            Series {
                label: "dooryard requests",
                points: pts(&|v| v.requests_served as f64),
                colour: GREEN,
                dashed: true,
            },
        ],
        hline: None,
        mark: None,
        point_labels: limits,
    };
    vec![
        ("sweep-shipped", sweep_chart::render(&shipped)),
        ("sweep-value", sweep_chart::render(&value)),
        ("sweep-marginal", sweep_chart::render(&marginal)),
        ("sweep-served", sweep_chart::render(&served)),
    ]
}

const STYLE: &str = "body{font-family:sans-serif;max-width:46rem;margin:1.5rem auto;padding:0 1rem;color:#111}\
h1{font-size:1.5rem;margin-bottom:.2rem}h2{font-size:1.15rem;margin-top:1.6rem;break-after:avoid}\
.meta{color:#444;margin-top:0}figure{margin:1rem 0;break-inside:avoid;page-break-inside:avoid}\
figure svg{width:100%;height:auto;border:1px solid #ccc}figcaption{font-size:.85rem;color:#333}\
table{border-collapse:collapse;font-size:.8rem;width:100%}th,td{border:1px solid #bbb;padding:.2rem .35rem;text-align:right}\
th:first-child,td:first-child{text-align:left}thead{display:table-header-group}tr{break-inside:avoid}\
.finding{border-left:4px solid #c00000;padding:.3rem .7rem;background:#fbf3f3}\
footer{margin-top:2rem;font-size:.8rem;color:#444}\
@media print{body{margin:0;max-width:none}figure{page-break-inside:avoid}}";

fn html(sweep: &Sweep, charts: &[(&'static str, String)]) -> String {
    let week = super::week_title(&sweep.scenario, sweep.week_start);
    let list = |v: &[String]| {
        html! {
            @if v.is_empty() {
                "none"
            }
            @for (i, s) in v.iter().enumerate() {
                @if i > 0 { ", " }
                code { (s) }
            }
        }
    };
    let search = if sweep.full_routes {
        html! {
            "every variant searched routes as long as " code { "plan" } " does (" code { "--full-routes" } ")"
        }
    } else {
        html! {
            "the 1× variant searched routes as long as " code { "plan" } " does, the others for a \
             shorter time (their routes are not printed; " code { "--full-routes" } " for the full \
             search)"
        }
    };
    let reconcile = sweep.reference().map_or_else(String::new, |one| {
        let parts: Vec<String> = one
            .marginal_by_facility
            .iter()
            .map(|(f, v)| format!("{f} {}", fixed(*v, 1)))
            .collect();
        format!(
            " At 1×, report.html's per-facility values ({}) average to {} with each facility's vials as weights.",
            parts.join(", "),
            fixed(one.marginal_value_per_vial, 1)
        )
    });
    let marginal_caption = format!(
        "Objective gained per extra vial: each facility's best supply-row dual of the week, \
         averaged with the facility's vials as weights.{reconcile} The dotted line is the saturation \
         threshold; the ring marks the saturation point."
    );
    let captions = [
        "Vials shipped (delivered) and vials packed against supply; each point names what limits \
         the vials shipped there (the table above says it in full).",
        "LP bound (upper bound on any plan), the whole-vial plan's objective, and the same \
         variant planned by hand (docs/baseline.md) valued by the same objective. The LP value \
         is concave and non-decreasing in supply.",
        &marginal_caption,
        "Sites and dooryard requests that receive vials (delivered, as in summary.json); each \
         point names what limits the vials shipped.",
    ];
    let page = html! {
        (DOCTYPE) "\n"
        html lang="en" {
            head {
                meta charset="utf-8";
                title { "Supply sweep — " (week) }
                // Constant style sheets: raw text, not markup to escape.
                style { (PreEscaped(PAGE_CSS)) (PreEscaped(STYLE)) }
            }
            body {
                "\n"
                h1 { "Supply sweep" }
                p.meta {
                    (week) " · " (sweep.variants.len()) " "
                    @if sweep.variants.len() == 1 { "variant" } @else { "variants" }
                }
                "\n"
                p {
                    "Every variant is a full plan (allocation, whole vials, routes) with each facility's \
                     daily vials × the multiplier, rounded half to even; " (search) ". Facilities removed from \
                     every variant: " (list(&sweep.without)) ". scenario.json overrides applied to every variant: "
                    (list(&sweep.settings)) "."
                }
                "\n"
                h2 { "Saturation" } p.finding { (saturation_text(sweep)) } "\n"
                h2 { "What limits the vials shipped" }
                table {
                    thead { tr { th { "variant" } th style="text-align:left" { "limit, in words" } } }
                    tbody {
                        "\n"
                        @for (i, v) in sweep.variants.iter().enumerate() {
                            tr { td { (v.name) } td style="text-align:left" { (limit(v, sweep.plans.get(i)).1) } }
                            "\n"
                        }
                    }
                }
                "\n"
                h2 { "Charts" } "\n"
                @for ((_, svg), cap) in charts.iter().zip(captions) {
                    // Standalone SVG from `sweep_chart`, its text escaped there.
                    figure { (PreEscaped(svg.trim_end())) figcaption { (cap) } }
                    "\n"
                }
                h2 { "Variants" }
                table {
                    thead {
                        tr {
                            th { "variant" } th { "supply (vials)" } th { "LP bound" } th { "objective" }
                            th { "gap %" } th { "shipped (vials)" } th { "sites" } th { "requests" }
                            th { "live wasps" } th { "marginal / vial" }
                        }
                    }
                    tbody {
                        "\n"
                        @for v in &sweep.variants {
                            tr {
                                td { (v.name) } td { (v.supply_vials) } td { (fixed(v.lp_bound, 1)) }
                                td { (fixed(v.objective, 1)) } td { (fixed(v.gap * 100.0, 2)) }
                                td { (v.shipped_vials) } td { (v.sites_served) } td { (v.requests_served) }
                                td { (fixed(v.wasps_expected_alive, 0)) } td { (fixed(v.marginal_value_per_vial, 1)) }
                            }
                            "\n"
                        }
                    }
                }
                "\n"
                h2 { "Against planning by hand" }
                p {
                    "Each variant planned the way an office does by hand \
                     (requests first come, first served up to the dooryard share, blocks by scouting count, \
                     nearest facility, earliest day; docs/baseline.md), valued by the same objective."
                }
                table {
                    thead {
                        tr {
                            th { "variant" } th { "value" } th { "value by hand" } th { "plan / hand" }
                            th { "top-quarter wasps" } th { "by hand" } th { "vials unshipped" } th { "by hand" }
                        }
                    }
                    tbody {
                        "\n"
                        @for v in &sweep.variants {
                            tr {
                                td { (v.name) } td { (fixed(v.objective, 1)) } td { (fixed(v.hand.objective, 1)) }
                                td {
                                    @if v.hand.objective > 0.0 {
                                        (fixed(v.objective / v.hand.objective, 2))
                                    } @else {
                                        "–"
                                    }
                                }
                                td { (fixed(v.top_quarter_wasps, 0)) } td { (fixed(v.hand.top_quarter_wasps, 0)) }
                                td { (v.supply_vials.saturating_sub(v.shipped_vials)) } td { (v.hand.unshipped_vials()) }
                            }
                            "\n"
                        }
                    }
                }
                "\n"
                h2 { "What binds" }
                table {
                    thead {
                        tr { th { "variant" } th style="text-align:left" { "binding constraints (largest duals first)" } }
                    }
                    tbody {
                        "\n"
                        @for v in &sweep.variants {
                            tr { td { (v.name) } td style="text-align:left" { (binding_text(v)) } }
                            "\n"
                        }
                    }
                }
                "\n"
                footer {
                    p {
                        "Values are in the model's objective units: live wasps expected at release, \
                         weighted by site priority. The plan is decision support: local extension and licensed \
                         pest-control practice decide."
                    }
                }
                "\n"
            }
        }
        "\n"
    };
    page.into_string()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::allocate::Binding;
    use crate::output::round_to;
    use crate::sweep::Saturation;

    fn variant(m: &str, lp: f64, mv: f64, binding: Vec<Binding>) -> VariantResult {
        VariantResult {
            name: format!("x{m}"),
            multiplier: Multiplier::parse(m).unwrap(),
            lp_bound: lp,
            bound: lp,
            objective: lp * 0.99,
            gap: 0.01,
            supply_vials: 100,
            shipped_vials: 90,
            sites_served: 10,
            blocks_served: 4,
            requests_served: 6,
            wasps_expected_alive: 1234.56,
            marginal_value_per_vial: mv,
            marginal_by_facility: Vec::new(),
            binding,
            top_quarter_wasps: 500.0,
            hand: crate::baseline::Baseline {
                objective: lp * 0.7,
                supply_vials: 100,
                shipped_vials: 88,
                top_quarter_wasps: 300.0,
                ..Default::default()
            },
        }
    }

    fn b(kind: ConstraintKind, dual: f64) -> Binding {
        Binding {
            name: kind.to_string(),
            kind,
            dual,
        }
    }

    fn site(s: &str) -> crate::scenario::SiteId {
        crate::scenario::SiteId(s.into())
    }

    fn on_f1(day: u32) -> (crate::scenario::FacilityId, chrono::NaiveDate) {
        let date = chrono::NaiveDate::from_ymd_opt(2027, 3, day).unwrap();
        (crate::scenario::FacilityId("F1".into()), date)
    }

    fn sample() -> Sweep {
        let variants = vec![
            variant(
                "0.5",
                50.0,
                120.0,
                vec![b(
                    ConstraintKind::Supply {
                        facility: on_f1(1).0,
                        date: on_f1(1).1,
                    },
                    120.0,
                )],
            ),
            variant(
                "1",
                90.0,
                100.0,
                vec![b(ConstraintKind::Request { site: site("R1") }, 300.0)],
            ),
            variant(
                "2",
                120.0,
                10.0,
                vec![
                    b(ConstraintKind::MaxRelease { site: site("B1") }, 50.0),
                    b(
                        ConstraintKind::Vehicles {
                            depot: on_f1(2).0,
                            date: on_f1(2).1,
                        },
                        40.0,
                    ),
                    b(ConstraintKind::MaxRelease { site: site("B2") }, 30.0),
                ],
            ),
        ];
        let saturation = crate::sweep::saturation(&variants, 0.25);
        Sweep {
            scenario: "Demo <week>".into(),
            week_start: chrono::NaiveDate::from_ymd_opt(2027, 3, 1).unwrap(),
            without: vec!["F2".into()],
            settings: vec!["policy.dooryard_share_min=0.3".into()],
            full_routes: false,
            variants,
            plans: Vec::new(),
            saturation,
        }
    }

    #[test]
    fn csv_has_one_row_per_variant_in_order() {
        let s = sample();
        let bytes = csv(&s).unwrap();
        let mut r = csv::Reader::from_reader(bytes.as_slice());
        assert_eq!(r.headers().unwrap(), SWEEP_COLUMNS.as_slice());
        let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
        let names: Vec<&str> = rows.iter().map(|r| &r[0]).collect();
        assert_eq!(names, ["x0.5", "x1", "x2"]);
        assert_eq!(&rows[2][10], "10.000000");
        assert_eq!(&rows[0][9], "1234.6");
    }

    #[test]
    fn the_file_reads_back_as_the_records_written_in_the_contract_order() {
        let s = sample();
        let records: Vec<SweepRecord> = s.variants.iter().map(SweepRecord::of).collect();
        // serde's own field names are the contract's column list.
        let fields: Vec<&str> = super::super::cell::record(&records[0])
            .unwrap()
            .into_iter()
            .map(|(k, _)| k)
            .collect();
        assert_eq!(fields, SWEEP_COLUMNS);
        let read = crate::csvread::read::<SweepRecord>("sweep.csv", &csv(&s).unwrap());
        assert!(read.problems.is_empty(), "{:?}", read.problems);
        let got: Vec<SweepRecord> = read.rows.into_iter().map(|(_, r)| r).collect();
        // Written with 3, 6 and 1 decimals.
        let want: Vec<SweepRecord> = records
            .into_iter()
            .map(|r| SweepRecord {
                lp_bound: round_to(r.lp_bound, 3),
                objective: round_to(r.objective, 3),
                gap: round_to(r.gap, 6),
                wasps_expected_alive: round_to(r.wasps_expected_alive, 1),
                marginal_value_per_vial: round_to(r.marginal_value_per_vial, 6),
                bound: round_to(r.bound, 3),
                top_quarter_wasps: round_to(r.top_quarter_wasps, 1),
                hand_objective: round_to(r.hand_objective, 3),
                hand_top_quarter_wasps: round_to(r.hand_top_quarter_wasps, 1),
                ..r
            })
            .collect();
        assert_eq!(got, want);
    }

    #[test]
    fn a_bad_sweep_csv_names_line_field_and_rule() {
        let s = sample();
        let text = String::from_utf8(csv(&s).unwrap()).unwrap();
        let bad = text
            .replacen("x1,1,", "x1,-1,", 1)
            .replacen("x2,", "x0.5,", 1);
        let read = crate::csvread::read::<SweepRecord>("sweep.csv", bad.as_bytes());
        let shown: Vec<String> = read.problems.iter().map(ToString::to_string).collect();
        assert_eq!(read.rows.len(), 1, "{shown:?}");
        assert!(shown[0].starts_with("sweep.csv:3: field 'supply_multiplier': value '-1'"));
        assert!(
            shown[1].starts_with("sweep.csv:4: field 'variant': value 'x0.5': already on line 2"),
            "{shown:?}"
        );
    }

    #[test]
    fn saturation_names_the_point_and_what_binds() {
        let s = sample();
        assert_eq!(
            s.saturation,
            Saturation {
                fraction: 0.25,
                reference: 100.0,
                threshold: 25.0,
                at: Some(2)
            }
        );
        let t = saturation_text(&s);
        assert!(t.starts_with("Saturation at 2× supply"), "{t}");
        assert!(
            t.contains("vehicles_F1_2027-03-02 (dual 40.0); site rows: maxrelease 2"),
            "{t}"
        );
    }

    /// Markup, ampersands and quotes in the scenario's name, a removed facility id, a
    /// `--set` override and a variant's name reach `sweep.html` as text.
    #[test]
    fn names_and_overrides_are_escaped_by_the_template() {
        let hostile = "<script>alert(\"x\")</script> & 'co'";
        let escaped = "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; 'co'";
        let mut s = sample();
        s.scenario = hostile.into();
        s.without = vec![hostile.into()];
        s.settings = vec![format!("name={hostile}")];
        s.variants[0].name = hostile.into();
        let files = render(&s).unwrap();
        let html = String::from_utf8(files[1].1.clone()).unwrap();
        assert!(!html.contains("<script>"), "{html}");
        for want in [
            format!("<title>Supply sweep — {escaped} — week of 2027-03-01</title>"),
            format!("<p class=\"meta\">{escaped} — week of 2027-03-01 · 3 variants</p>"),
            format!("every variant: <code>{escaped}</code>. scenario.json"),
            format!("every variant: <code>name={escaped}</code>.</p>"),
            format!("<tr><td>{escaped}</td><td style=\"text-align:left\">"),
        ] {
            assert!(html.contains(&want), "{want}");
        }
    }

    #[test]
    fn report_escapes_text_and_lists_every_file() {
        let s = sample();
        let files = render(&s).unwrap();
        let names: Vec<&str> = files.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(
            names,
            [
                "sweep.csv",
                "sweep.html",
                "sweep-shipped.svg",
                "sweep-value.svg",
                "sweep-marginal.svg",
                "sweep-served.svg",
            ]
        );
        // Variant folders come from the plans (tests/it/sweep.rs renders a real sweep's).
        let html = String::from_utf8(files[1].1.clone()).unwrap();
        assert!(html.contains("Demo &lt;week&gt;") && !html.contains("Demo <week>"));
        assert_eq!(html.matches("<svg").count(), 4);
        assert!(html.contains("Saturation at 2×"));
    }
}
