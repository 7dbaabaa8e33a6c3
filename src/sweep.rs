//! Scenario sweeps: the analyst's what-ifs. One full plan per supply multiplier, with the same
//! facility outages (`--without`) and scenario.json overrides (`--set`) applied to every
//! variant. See `docs/sweep.md`.
//!
//! How variants combine: the overrides are applied to scenario.json first (and the scenario
//! re-validated by the loader), then the listed facilities are removed, then each supply
//! multiplier gives one variant. So `--supply 0.5,1,2 --without F2` plans three variants, all
//! without F2. The multipliers are sorted and de-duplicated, and 1 is always included: it is
//! the reference of the saturation point and, with no outage or override, reproduces `plan`.
//!
//! Shared set-up: the scenario is loaded once; the travel model and the pest-pressure priority
//! are computed once on the scenario with the outages applied (neither depends on supply);
//! the arcs, the allocation and the routes are computed per variant. Variants run in parallel
//! on the current rayon pool and are collected in multiplier order, so the result does not
//! depend on the number of threads (as long as the route search's per-depot-day time limit
//! does not bind, as for `plan`).

use std::cmp::Ordering;
use std::collections::BTreeMap;
use std::fmt;

use rayon::prelude::*;
use serde_json::Value;

use crate::allocate::{AllocError, Binding};
use crate::plan::{self, Plan, PlanOptions};
use crate::scenario::{FacilityIdx, InputError, Scenario};
use crate::travel::TravelModel;

/// Most decimals a supply multiplier may have.
const MAX_DECIMALS: u32 = 6;
/// Largest supply multiplier accepted (a sweep explores, it does not model another program).
const MAX_MULTIPLIER: u64 = 1000;

/// Sweep errors. [`SweepError::is_input`] tells a bad argument (exit 2) from a failure.
#[derive(Debug, thiserror::Error)]
pub enum SweepError {
    /// A `--supply` value is not a positive decimal.
    #[error("--supply value '{value}': {rule}")]
    BadMultiplier {
        /// As written.
        value: String,
        /// The rule broken and the fix.
        rule: String,
    },
    /// A scaled daily supply does not fit a vial count.
    #[error(
        "--supply {multiplier}: facility {facility} packs {vials} vials on {date}, which × {multiplier} \
         exceeds 4294967295 vials; use a smaller multiplier"
    )]
    ScaledTooLarge {
        /// The multiplier.
        multiplier: String,
        /// Facility id.
        facility: String,
        /// Pack date.
        date: chrono::NaiveDate,
        /// Vials before scaling.
        vials: u32,
    },
    /// A `--without` id names no facility.
    #[error("--without {id}: no facility has that id; the facilities are {known}")]
    UnknownFacility {
        /// As written.
        id: String,
        /// The facility ids, comma-separated.
        known: String,
    },
    /// Every facility would be removed.
    #[error("--without removes every facility ({ids}); keep at least one")]
    NoFacilityLeft {
        /// The ids removed.
        ids: String,
    },
    /// A `--set` argument is not `KEY=VALUE`, or names no settable key.
    #[error("--set {arg}: {rule}")]
    BadSetting {
        /// As written.
        arg: String,
        /// The rule broken and the fix.
        rule: String,
    },
    /// The overrides make the scenario invalid (the loader's problems, naming the keys).
    #[error(
        "with --set {settings} the scenario is no longer valid; change the value(s) as the \
         rule says:\n{source}"
    )]
    InvalidSettings {
        /// The `--set` arguments, space-separated.
        settings: String,
        /// The loader's problems.
        source: InputError,
    },
    /// The saturation fraction is not in (0, 1).
    #[error(
        "--saturation {value}: must be a share between 0 and 1 (exclusive), e.g. 0.25 for 25 %"
    )]
    BadSaturation {
        /// The value.
        value: f64,
    },
    /// Planning a variant failed.
    #[error("variant {variant}: {source}")]
    Plan {
        /// Variant name.
        variant: String,
        /// The allocation error.
        source: AllocError,
    },
}

impl SweepError {
    /// Whether the user must fix an argument or input (exit 2) rather than broodcast failing.
    pub fn is_input(&self) -> bool {
        !matches!(self, SweepError::Plan { .. })
    }
}

/// A supply multiplier, held exactly as the decimal written (`num / den`, `den` = 10^k), so
/// that scaling a vial count rounds the same way on every machine.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Multiplier {
    text: String,
    num: u64,
    den: u64,
}

impl Multiplier {
    /// Parses a decimal such as `0.25`, `1`, `1.5` or `4`: digits with at most one point and
    /// 6 decimals, greater than 0, at most 1000.
    ///
    /// ```
    /// use broodcast::sweep::Multiplier;
    /// let m = Multiplier::parse("0.50").unwrap();
    /// assert_eq!(m.as_str(), "0.5");
    /// assert_eq!(m.scale(3), 2); // 1.5 vials rounds half to even
    /// assert!(Multiplier::parse("-1").is_err());
    /// ```
    pub fn parse(s: &str) -> Result<Self, SweepError> {
        let bad = |rule: &str| SweepError::BadMultiplier {
            value: s.to_string(),
            rule: rule.to_string(),
        };
        let t = s.trim();
        let (int, frac) = t.split_once('.').unwrap_or((t, ""));
        let digits = |x: &str| x.bytes().all(|b| b.is_ascii_digit());
        if t.is_empty() || (int.is_empty() && frac.is_empty()) || !digits(int) || !digits(frac) {
            return Err(bad(
                "a multiplier is a positive decimal number such as 0.25, 1 or 2.5",
            ));
        }
        let frac = frac.trim_end_matches('0');
        if frac.len() > MAX_DECIMALS as usize {
            return Err(bad("use at most 6 decimals"));
        }
        let den = 10u64.pow(frac.len() as u32);
        let int = int.trim_start_matches('0');
        if int.len() > 4 {
            return Err(bad("must be at most 1000"));
        }
        let whole: u64 = if int.is_empty() {
            0
        } else {
            int.parse().map_err(|_| bad("must be at most 1000"))?
        };
        let part: u64 = if frac.is_empty() {
            0
        } else {
            frac.parse().map_err(|_| bad("use at most 6 decimals"))?
        };
        let num = whole * den + part;
        if num == 0 {
            return Err(bad(
                "must be greater than 0 (a week with no vials has nothing to plan)",
            ));
        }
        if num > MAX_MULTIPLIER * den {
            return Err(bad("must be at most 1000"));
        }
        let text = if frac.is_empty() {
            whole.to_string()
        } else {
            format!("{whole}.{frac}")
        };
        Ok(Multiplier { text, num, den })
    }

    /// Parses a comma-separated list (`0.25,0.5,1,2,4`).
    pub fn parse_list(s: &str) -> Result<Vec<Self>, SweepError> {
        s.split(',').map(Multiplier::parse).collect()
    }

    /// The multiplier 1.
    pub fn one() -> Self {
        Multiplier {
            text: "1".into(),
            num: 1,
            den: 1,
        }
    }

    /// The canonical text (`0.5`, `1`, `2.25`): no trailing zeros.
    pub fn as_str(&self) -> &str {
        &self.text
    }

    /// The value as a float (for charts and CSV).
    pub fn value(&self) -> f64 {
        self.num as f64 / self.den as f64
    }

    /// Whether this is exactly 1.
    pub fn is_one(&self) -> bool {
        self.num == self.den
    }

    /// `vials × multiplier`, rounded to a whole vial half to even (0.5 → 0, 1.5 → 2,
    /// 2.5 → 2): exact integer arithmetic, so no float noise decides a tie, and no bias up or
    /// down over many facility-days. Saturates at `u64::MAX` (callers check the u32 range).
    pub fn scale_u64(&self, vials: u32) -> u64 {
        let p = u128::from(vials) * u128::from(self.num);
        let den = u128::from(self.den);
        let (q, r) = (p / den, p % den);
        let q = match (2 * r).cmp(&den) {
            Ordering::Greater => q + 1,
            Ordering::Equal if q % 2 == 1 => q + 1,
            _ => q,
        };
        u64::try_from(q).unwrap_or(u64::MAX)
    }

    /// [`Multiplier::scale_u64`] clamped to `u32::MAX`.
    pub fn scale(&self, vials: u32) -> u32 {
        u32::try_from(self.scale_u64(vials)).unwrap_or(u32::MAX)
    }

    fn cmp_value(&self, other: &Self) -> Ordering {
        (u128::from(self.num) * u128::from(other.den))
            .cmp(&(u128::from(other.num) * u128::from(self.den)))
    }
}

impl fmt::Display for Multiplier {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.text)
    }
}

/// Sorts by value, drops duplicates (`1` and `1.0` are one) and adds 1 when missing.
pub fn normalize_multipliers(mut ms: Vec<Multiplier>) -> Vec<Multiplier> {
    ms.push(Multiplier::one());
    ms.sort_by(Multiplier::cmp_value);
    ms.dedup_by(|a, b| a.cmp_value(b) == Ordering::Equal);
    ms
}

/// One `--set KEY=VALUE`: a scenario.json key path and its new JSON value.
#[derive(Clone, Debug, PartialEq)]
pub struct Setting {
    /// Dotted key path, e.g. `policy.dooryard_share_min`.
    pub key: String,
    /// The value: `VALUE` read as JSON (`0.3`, `true`, `["mon","thu"]`), else as a string.
    pub value: Value,
    /// The argument as written.
    pub arg: String,
}

/// The scenario.json keys `--set` may change: every key the loader reads
/// ([`crate::scenario::SCENARIO_KEYS`]) but `name` and `week_start`, which identify the week
/// rather than describe a what-if.
pub fn settable_keys() -> Vec<&'static str> {
    crate::scenario::SCENARIO_KEYS
        .iter()
        .copied()
        .filter(|k| !matches!(*k, "name" | "week_start"))
        .collect()
}

impl Setting {
    /// Parses `KEY=VALUE`; the key must be one of [`settable_keys`] (values are checked
    /// later, by the loader, when the setting is applied).
    ///
    /// ```
    /// use broodcast::sweep::Setting;
    /// let s = Setting::parse("policy.dooryard_share_min=0.3").unwrap();
    /// assert_eq!(s.value, serde_json::json!(0.3));
    /// let days = Setting::parse("parcel.days=mon;thu").unwrap();
    /// assert_eq!(days.value, serde_json::json!("mon;thu"));
    /// assert!(Setting::parse("policy.dooryard_share=0.3").is_err());
    /// ```
    pub fn parse(arg: &str) -> Result<Self, SweepError> {
        let bad = |rule: String| SweepError::BadSetting {
            arg: arg.to_string(),
            rule,
        };
        let Some((key, raw)) = arg.split_once('=') else {
            return Err(bad(
                "expected KEY=VALUE, e.g. policy.dooryard_share_min=0.3".to_string(),
            ));
        };
        let key = key.trim();
        let settable = settable_keys();
        if !settable.contains(&key) {
            let section = key.split('.').next().unwrap_or("");
            let mut near: Vec<&str> = settable
                .iter()
                .copied()
                .filter(|k| k.split('.').next() == Some(section))
                .collect();
            if near.is_empty() {
                near = settable.clone();
            }
            return Err(bad(format!(
                "'{key}' is not a scenario.json key that can be set; use one of: {} \
                 (docs/formats.md)",
                near.join(", ")
            )));
        }
        let raw = raw.trim();
        let value =
            serde_json::from_str::<Value>(raw).unwrap_or_else(|_| Value::String(raw.into()));
        Ok(Setting {
            key: key.to_string(),
            value,
            arg: arg.to_string(),
        })
    }
}

/// Applies `settings` to the bytes of a scenario.json (a BOM is dropped), creating missing
/// sections (e.g. `dispatch`). Returns the new file's bytes; values are checked by the loader
/// when the scenario is loaded from them.
///
/// # Errors
/// [`SweepError::BadSetting`] when the file is not a JSON object or a section on the key path
/// is not an object.
pub fn apply_settings(scenario_json: &[u8], settings: &[Setting]) -> Result<Vec<u8>, SweepError> {
    let text = scenario_json
        .strip_prefix(b"\xEF\xBB\xBF".as_slice())
        .unwrap_or(scenario_json);
    let mut root: Value = serde_json::from_slice(text).map_err(|e| SweepError::BadSetting {
        arg: settings.first().map(|s| s.arg.clone()).unwrap_or_default(),
        rule: format!("scenario.json is not valid JSON ({e}); fix it first (`broodcast check`)"),
    })?;
    for s in settings {
        let parts: Vec<&str> = s.key.split('.').collect();
        let mut cur = &mut root;
        for (i, part) in parts.iter().enumerate() {
            let Value::Object(map) = cur else {
                return Err(SweepError::BadSetting {
                    arg: s.arg.clone(),
                    rule: format!(
                        "scenario.json key '{}' is not an object; fix scenario.json first",
                        parts[..i].join(".")
                    ),
                });
            };
            if i + 1 == parts.len() {
                map.insert((*part).to_string(), s.value.clone());
                break;
            }
            cur = map
                .entry((*part).to_string())
                .or_insert_with(|| Value::Object(Default::default()));
        }
    }
    let mut out = serde_json::to_vec_pretty(&root).map_err(|e| SweepError::BadSetting {
        arg: String::new(),
        rule: e.to_string(),
    })?;
    out.push(b'\n');
    Ok(out)
}

/// Loads a scenario from its files with `settings` applied to scenario.json. `files` are
/// (name, bytes) as for [`crate::scenario::load_files`].
///
/// # Errors
/// [`SweepError::InvalidSettings`] with the loader's problems when the result is not valid.
pub fn load_with_settings(
    files: &[(String, Vec<u8>)],
    settings: &[Setting],
) -> Result<Scenario, SweepError> {
    let json = files
        .iter()
        .find(|(n, _)| n == "scenario.json")
        .map(|(_, b)| b.as_slice())
        .unwrap_or_default();
    let patched = apply_settings(json, settings)?;
    let mut view: Vec<(&str, &[u8])> = files
        .iter()
        .filter(|(n, _)| n != "scenario.json")
        .map(|(n, b)| (n.as_str(), b.as_slice()))
        .collect();
    view.push(("scenario.json", &patched));
    crate::scenario::load_files(&view).map_err(|source| SweepError::InvalidSettings {
        settings: settings
            .iter()
            .map(|s| s.arg.as_str())
            .collect::<Vec<_>>()
            .join(" "),
        source,
    })
}

/// The scenario with the facilities `ids` down for the week: their supply rows and the
/// vehicles based at them go, so no arc leaves them. The facilities themselves stay (indices
/// unchanged), so every site keeps the facilities that serve it in the full plan
/// (`arcs::ArcOptions::max_facilities_per_site` is judged over all facilities) and merely
/// loses the arcs of the ones that are down: the variant's arcs are a subset of the full
/// plan's, so an outage can never raise the LP bound. O(supply + fleet).
///
/// # Errors
/// [`SweepError::UnknownFacility`] for an id no facility has, [`SweepError::NoFacilityLeft`]
/// when nothing would remain.
pub fn without_facilities(scenario: &Scenario, ids: &[String]) -> Result<Scenario, SweepError> {
    let mut drop = vec![false; scenario.facilities.len()];
    for id in ids {
        match scenario.facility_idx(id.trim()) {
            Some(f) => drop[f] = true,
            None => {
                return Err(SweepError::UnknownFacility {
                    id: id.clone(),
                    known: scenario
                        .facilities
                        .iter()
                        .map(|f| f.id.as_str())
                        .collect::<Vec<_>>()
                        .join(", "),
                });
            }
        }
    }
    if drop.iter().all(|d| *d) {
        return Err(SweepError::NoFacilityLeft {
            ids: ids.join(", "),
        });
    }
    let mut sc = scenario.clone();
    sc.supply.retain(|s| !drop[s.facility]);
    sc.fleet.retain(|v| !drop[v.depot]);
    Ok(sc)
}

/// The scenario with every supply row's vials × `m`, rounded half to even
/// ([`Multiplier::scale`]). O(supply rows).
///
/// # Errors
/// [`SweepError::ScaledTooLarge`] when a scaled count exceeds `u32::MAX` vials.
pub fn scale_supply(scenario: &Scenario, m: &Multiplier) -> Result<Scenario, SweepError> {
    let mut sc = scenario.clone();
    for s in &mut sc.supply {
        let v = m.scale_u64(s.vials);
        s.vials = u32::try_from(v).map_err(|_| SweepError::ScaledTooLarge {
            multiplier: m.text.clone(),
            facility: scenario.facilities[s.facility].id.to_string(),
            date: s.date,
            vials: s.vials,
        })?;
    }
    Ok(sc)
}

/// What to sweep.
#[derive(Clone, Debug)]
pub struct SweepSpec {
    /// Supply multipliers, one variant each (see [`normalize_multipliers`]).
    pub supply: Vec<Multiplier>,
    /// Facility ids removed from every variant.
    pub without: Vec<String>,
    /// scenario.json overrides already applied to the scenario given to [`sweep`]; kept to
    /// label the report.
    pub settings: Vec<Setting>,
    /// Saturation threshold as a share of the 1× marginal value (0 < fraction < 1).
    pub saturation_fraction: f64,
    /// Search every variant's routes as long as `plan` does. Off (the default), the 1×
    /// variant searches as `plan` does and every other variant, whose routes nobody prints,
    /// searches 1/(2⌈m⌉) of the rounds per depot-day: about half of what the 1× plan's search
    /// costs, since m times the supply routes about m times the stops. Allocations are the
    /// same unless the shorter search leaves a stop unplaced (then the feedback round runs, as
    /// in `plan`; `docs/sweep.md`).
    pub full_routes: bool,
}

impl SweepSpec {
    /// Route-search rounds divisor for the variant at `m` (see [`SweepSpec::full_routes`]):
    /// 1 for the 1× variant and with `full_routes`, else 2⌈m⌉.
    ///
    /// ```
    /// # use broodcast::sweep::{Multiplier, SweepSpec};
    /// let spec = SweepSpec { supply: vec![], without: vec![], settings: vec![],
    ///     saturation_fraction: 0.25, full_routes: false };
    /// let d = |m: &str| spec.route_rounds_divisor(&Multiplier::parse(m).unwrap());
    /// assert_eq!((d("0.25"), d("1"), d("1.5"), d("4")), (2, 1, 4, 8));
    /// ```
    pub fn route_rounds_divisor(&self, m: &Multiplier) -> u32 {
        if self.full_routes || m.is_one() {
            1
        } else {
            (2.0 * m.value().ceil()).min(f64::from(u32::MAX)) as u32
        }
    }
}

/// One variant's headline figures.
#[derive(Clone, Debug)]
pub struct VariantResult {
    /// Name: `x` and the multiplier (`x0.5`, `x1`, `x4`); also its sub-folder name.
    pub name: String,
    /// The supply multiplier.
    pub multiplier: Multiplier,
    /// LP relaxation optimum (objective units: priority-weighted live wasps).
    pub lp_bound: f64,
    /// The whole-vial plan's objective (same units).
    pub objective: f64,
    /// Whole-vial upper bound (≤ `lp_bound`, see [`crate::allocate::Allocation::bound`]).
    pub bound: f64,
    /// 1 − objective / bound.
    pub gap: f64,
    /// Vials packed over the week after scaling, all facilities.
    pub supply_vials: u64,
    /// Vials on a route stop or parcel.
    pub shipped_vials: u64,
    /// Sites (blocks and requests) that receive vials.
    pub sites_served: usize,
    /// Blocks that receive vials.
    pub blocks_served: usize,
    /// Dooryard requests that receive vials.
    pub requests_served: usize,
    /// Expected live wasps released, wasps.
    pub wasps_expected_alive: f64,
    /// Objective gained per extra vial, supply-weighted mean over facilities:
    /// Σ_f supply_f · μ_f / Σ_f supply_f, μ_f = the facility's best supply-row dual of the
    /// week (priority-weighted live wasps per vial). 0 when no vials are packed.
    pub marginal_value_per_vial: f64,
    /// Per facility id: μ_f (priority-weighted live wasps per vial).
    pub marginal_by_facility: Vec<(String, f64)>,
    /// The allocation's binding constraints, largest dual first.
    pub binding: Vec<Binding>,
    /// Expected live wasps delivered to the top priority quarter of eligible sites
    /// ([`crate::baseline::top_quarter`]), wasps.
    pub top_quarter_wasps: f64,
    /// The same variant planned by hand ([`crate::baseline`]).
    pub hand: crate::baseline::Baseline,
}

/// Where the marginal value of supply falls below a share of its 1× value.
#[derive(Clone, Debug, PartialEq)]
pub struct Saturation {
    /// The share (0..1).
    pub fraction: f64,
    /// Marginal value per vial at 1× (priority-weighted live wasps per vial).
    pub reference: f64,
    /// `fraction × reference`.
    pub threshold: f64,
    /// Index into [`Sweep::variants`] of the smallest multiplier above 1 whose marginal value
    /// is below the threshold (1× itself when its marginal value is already 0); `None` when
    /// no swept multiplier gets there.
    pub at: Option<usize>,
}

/// A finished sweep, variants in multiplier order. Typed results only: the output module
/// renders them (`output::sweep_report`), every variant's full plan outputs included.
#[derive(Debug)]
pub struct Sweep {
    /// Scenario name.
    pub scenario: String,
    /// Monday of the week.
    pub week_start: chrono::NaiveDate,
    /// Facility ids removed from every variant.
    pub without: Vec<String>,
    /// The `--set` arguments applied, as written.
    pub settings: Vec<String>,
    /// Whether every variant searched routes as long as `plan` ([`SweepSpec::full_routes`]).
    pub full_routes: bool,
    /// One per multiplier, ascending.
    pub variants: Vec<VariantResult>,
    /// The full plan of each variant, in the order of `variants`.
    pub plans: Vec<Plan>,
    /// The saturation point.
    pub saturation: Saturation,
}

impl Sweep {
    /// The 1× variant.
    pub fn reference(&self) -> Option<&VariantResult> {
        self.variants.iter().find(|v| v.multiplier.is_one())
    }
}

/// Runs the sweep on `scenario` (overrides already applied): removes `spec.without`, computes
/// the travel model and priority once, then plans every multiplier in parallel on the current
/// rayon pool. `on_variant_done` is called once per finished variant (from worker threads),
/// e.g. to advance a progress bar.
///
/// Cost: one [`plan::plan_with`] per multiplier (arcs, LP, rounding, routes), run on as many
/// threads as the pool has.
///
/// # Errors
/// Input errors for an unknown facility, a multiplier too large or a bad saturation share;
/// [`SweepError::Plan`] when a variant fails.
pub fn sweep(
    scenario: &Scenario,
    spec: &SweepSpec,
    opts: &PlanOptions,
    on_variant_done: &(dyn Fn() + Sync),
) -> Result<Sweep, SweepError> {
    let fraction = spec.saturation_fraction;
    if !(fraction > 0.0 && fraction < 1.0) {
        return Err(SweepError::BadSaturation { value: fraction });
    }
    let case = without_facilities(scenario, &spec.without)?;
    let multipliers = normalize_multipliers(spec.supply.clone());
    // Scale first (cheap, and an input error must come before any planning).
    let scaled: Vec<Scenario> = multipliers
        .iter()
        .map(|m| scale_supply(&case, m))
        .collect::<Result<_, _>>()?;
    let travel = TravelModel::new(&case);
    let priority = plan::priorities(&case, &opts.pressure);
    // Largest supply first: it routes the most stops and is the longest job, so starting it
    // first shortens the critical path (longest-processing-time-first); the results are
    // put back in ascending order, so the output does not depend on the schedule.
    let mut jobs: Vec<(Multiplier, Scenario)> = multipliers.into_iter().zip(scaled).collect();
    jobs.reverse();
    let mut done: Vec<(VariantResult, Plan)> = jobs
        .into_par_iter()
        .with_max_len(1)
        .map(|(m, sc)| {
            let name = format!("x{m}");
            let opts = PlanOptions {
                route_rounds_divisor: spec.route_rounds_divisor(&m),
                ..opts.clone()
            };
            let p = plan::plan_with(sc, &travel, priority.clone(), &opts).map_err(|source| {
                SweepError::Plan {
                    variant: name.clone(),
                    source,
                }
            })?;
            let v = variant_result(name, m, &p);
            on_variant_done();
            Ok((v, p))
        })
        .collect::<Result<_, SweepError>>()?;
    done.reverse();
    let (variants, plans): (Vec<VariantResult>, Vec<Plan>) = done.into_iter().unzip();
    let saturation = saturation(&variants, fraction);
    Ok(Sweep {
        scenario: case.name.clone(),
        week_start: case.week_start,
        without: spec.without.iter().map(|s| s.trim().to_string()).collect(),
        settings: spec.settings.iter().map(|s| s.arg.clone()).collect(),
        full_routes: spec.full_routes,
        variants,
        plans,
        saturation,
    })
}

/// Delivered totals of a plan, counted as `summary.json` counts them (route stops and
/// parcels; undeliverable shipments left out): (vials, blocks served, requests served, live
/// wasps, live wasps in the top priority quarter). `tests/it/sweep.rs` checks they equal the
/// variant's `summary.json`. O(stops + parcels + S log S).
fn delivered(p: &Plan) -> (u64, usize, usize, f64, f64) {
    let mut vials_at = vec![0u64; p.scenario.sites.len()];
    let mut wasps_at = vec![0.0; p.scenario.sites.len()];
    let (mut vials, mut wasps) = (0u64, 0.0);
    let stops = p.dispatch.routes.iter().flat_map(|r| &r.stops);
    let deliveries = stops
        .map(|s| (s.site, s.vials, s.wasps_expected_alive))
        .chain(
            p.dispatch
                .parcels
                .iter()
                .map(|x| (x.site, x.vials, x.wasps_expected_alive)),
        );
    for (site, v, w) in deliveries {
        if let Some(at) = vials_at.get_mut(site) {
            *at += u64::from(v);
            wasps_at[site] += w;
        }
        vials += u64::from(v);
        wasps += w;
    }
    let served = |kind: crate::scenario::SiteKind| {
        p.scenario
            .sites
            .iter()
            .zip(&vials_at)
            .filter(|(s, v)| s.kind() == kind && **v > 0)
            .count()
    };
    let eligible: Vec<bool> = p.allocation.sites.iter().map(|o| o.eligible).collect();
    let top = crate::baseline::top_quarter(&eligible, &p.priority);
    let top_wasps = wasps_at
        .iter()
        .zip(&top)
        .filter(|(_, t)| **t)
        .map(|(w, _)| w)
        .sum();
    (
        vials,
        served(crate::scenario::SiteKind::Block),
        served(crate::scenario::SiteKind::Dooryard),
        wasps,
        top_wasps,
    )
}

fn variant_result(name: String, m: Multiplier, p: &Plan) -> VariantResult {
    let (shipped_vials, blocks_served, requests_served, wasps_expected_alive, top_quarter_wasps) =
        delivered(p);
    let sc = &p.scenario;
    let al = &p.allocation;
    let mut per_facility: BTreeMap<FacilityIdx, u64> = BTreeMap::new();
    for s in &sc.supply {
        *per_facility.entry(s.facility).or_insert(0) += u64::from(s.vials);
    }
    let supply_vials = sc.total_supply_vials();
    let weighted: f64 = per_facility
        .iter()
        .map(|(f, v)| *v as f64 * al.marginal_value_per_vial.get(*f).copied().unwrap_or(0.0))
        .sum();
    let marginal = if supply_vials > 0 {
        weighted / supply_vials as f64
    } else {
        0.0
    };
    VariantResult {
        name,
        multiplier: m,
        lp_bound: al.lp_bound,
        bound: al.bound,
        objective: al.objective,
        gap: al.gap,
        supply_vials,
        shipped_vials,
        sites_served: blocks_served + requests_served,
        blocks_served,
        requests_served,
        wasps_expected_alive,
        marginal_value_per_vial: marginal,
        marginal_by_facility: sc
            .facilities
            .iter()
            .zip(&al.marginal_value_per_vial)
            .map(|(f, v)| (f.id.to_string(), *v))
            .collect(),
        binding: al.binding.clone(),
        top_quarter_wasps,
        hand: p.baseline.clone(),
    }
}

/// The saturation point of `variants` (ascending multipliers, one of them 1×). O(n).
pub fn saturation(variants: &[VariantResult], fraction: f64) -> Saturation {
    let reference = variants
        .iter()
        .find(|v| v.multiplier.is_one())
        .map_or(0.0, |v| v.marginal_value_per_vial);
    let threshold = fraction * reference;
    let at = if reference <= 0.0 {
        variants.iter().position(|v| v.multiplier.is_one())
    } else {
        variants
            .iter()
            .position(|v| v.multiplier.value() > 1.0 && v.marginal_value_per_vial < threshold)
    };
    Saturation {
        fraction,
        reference,
        threshold,
        at,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::fixture;

    #[test]
    fn multipliers_parse_exactly_and_canonically() {
        let m = Multiplier::parse("2.50").unwrap();
        assert_eq!((m.as_str(), m.value()), ("2.5", 2.5));
        assert_eq!(Multiplier::parse(".5").unwrap().as_str(), "0.5");
        assert_eq!(Multiplier::parse("1000").unwrap().as_str(), "1000");
        for bad in [
            "",
            "0",
            "0.000",
            "-1",
            "1e3",
            "abc",
            "1.2.3",
            "1000.5",
            "0.0000001",
            ".",
        ] {
            assert!(Multiplier::parse(bad).is_err(), "{bad:?} accepted");
        }
        let e = Multiplier::parse("x").unwrap_err().to_string();
        assert!(e.contains("--supply value 'x'"), "{e}");
    }

    #[test]
    fn scaling_rounds_half_to_even_without_float_noise() {
        let m = |s| Multiplier::parse(s).unwrap();
        // 0.7 × 5 = 3.5 exactly: even → 4 (a float product 3.4999… would give 3).
        assert_eq!(m("0.7").scale(5), 4);
        assert_eq!(m("0.5").scale(1), 0);
        assert_eq!(m("0.5").scale(3), 2);
        assert_eq!(m("0.5").scale(5), 2);
        assert_eq!(m("0.25").scale(7), 2);
        assert_eq!(m("1").scale(41), 41);
        assert_eq!(m("4").scale(u32::MAX), u32::MAX, "clamped");
        assert_eq!(m("4").scale_u64(u32::MAX), 4 * u64::from(u32::MAX));
    }

    #[test]
    fn multipliers_are_sorted_deduplicated_and_include_one() {
        let ms = Multiplier::parse_list("4,0.5,2.0,2").unwrap();
        let n = normalize_multipliers(ms);
        let t: Vec<&str> = n.iter().map(Multiplier::as_str).collect();
        assert_eq!(t, ["0.5", "1", "2", "4"]);
    }

    #[test]
    fn scale_supply_scales_every_row() {
        let sc = fixture::tiny();
        let m = Multiplier::parse("2").unwrap();
        let s2 = scale_supply(&sc, &m).unwrap();
        assert_eq!(s2.total_supply_vials(), 2 * sc.total_supply_vials());
        let huge = Multiplier::parse("1000").unwrap();
        let mut big = sc.clone();
        big.supply[0].vials = u32::MAX / 10;
        assert!(matches!(
            scale_supply(&big, &huge),
            Err(SweepError::ScaledTooLarge { .. })
        ));
    }

    #[test]
    fn without_removes_supply_and_vehicles_and_keeps_indices() {
        let sc = fixture::tiny();
        assert!(sc.facilities.len() >= 2);
        let first = sc.facilities[0].id.to_string();
        let out = without_facilities(&sc, std::slice::from_ref(&first)).unwrap();
        assert!(
            out.facilities
                .iter()
                .map(|f| &f.id)
                .eq(sc.facilities.iter().map(|f| &f.id))
        );
        let kept: u64 = sc
            .supply
            .iter()
            .filter(|s| s.facility != 0)
            .map(|s| u64::from(s.vials))
            .sum();
        assert!(kept < sc.total_supply_vials(), "the fixture packs at F1");
        assert_eq!(out.total_supply_vials(), kept);
        assert!(out.supply.iter().all(|s| s.facility != 0));
        assert!(out.fleet.iter().all(|v| v.depot != 0));
        assert!(!out.fleet.is_empty());
        let e = without_facilities(&sc, &["NOPE".into()]).unwrap_err();
        assert!(e.is_input() && e.to_string().contains("NOPE"), "{e}");
        let all: Vec<String> = sc.facilities.iter().map(|f| f.id.to_string()).collect();
        assert!(matches!(
            without_facilities(&sc, &all),
            Err(SweepError::NoFacilityLeft { .. })
        ));
    }

    #[test]
    fn settings_parse_json_or_text_and_refuse_unknown_keys() {
        let s = Setting::parse("policy.require_flush=false").unwrap();
        assert_eq!(s.value, Value::Bool(false));
        let s = Setting::parse("parcel.days=[\"mon\",\"thu\"]").unwrap();
        assert_eq!(s.value, serde_json::json!(["mon", "thu"]));
        let e = Setting::parse("policy.dooryard_shar=0.3")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("policy.dooryard_share_min"),
            "names the fix: {e}"
        );
        assert!(!e.contains("travel.circuity"), "same section only: {e}");
        let e = Setting::parse("policy").unwrap_err().to_string();
        assert!(e.contains("KEY=VALUE"), "{e}");
        assert!(Setting::parse("agent.survival.table=1").is_err());
        assert!(Setting::parse("week_start=2027-03-08").is_err());
    }

    #[test]
    fn settings_apply_to_the_json_and_create_sections() {
        let json = b"\xEF\xBB\xBF{\"policy\": {\"dooryard_share_min\": 0.1}}";
        let sets = [
            Setting::parse("policy.dooryard_share_min=0.3").unwrap(),
            Setting::parse("dispatch.seed=7").unwrap(),
        ];
        let out: Value = serde_json::from_slice(&apply_settings(json, &sets).unwrap()).unwrap();
        assert_eq!(out["policy"]["dooryard_share_min"], 0.3);
        assert_eq!(out["dispatch"]["seed"], 7);
        let e = apply_settings(b"{\"dispatch\": 3}", &sets[1..]).unwrap_err();
        assert!(e.to_string().contains("'dispatch' is not an object"), "{e}");
    }

    #[test]
    fn a_bad_value_is_reported_by_the_loader_with_its_key() {
        let files: Vec<(String, Vec<u8>)> = crate::demo::FILES
            .iter()
            .map(|(n, b)| (n.to_string(), b.to_vec()))
            .collect();
        let ok = load_with_settings(
            &files,
            &[Setting::parse("policy.dooryard_share_min=0.3").unwrap()],
        )
        .unwrap();
        assert_eq!(ok.policy.dooryard_share_min, 0.3);
        let e = load_with_settings(
            &files,
            &[Setting::parse("policy.dooryard_share_min=1.5").unwrap()],
        )
        .unwrap_err();
        assert!(e.is_input());
        let msg = e.to_string();
        assert!(msg.contains("policy.dooryard_share_min=1.5"), "{msg}");
        assert!(
            msg.contains("key 'policy.dooryard_share_min'") && msg.contains("between 0 and 1"),
            "{msg}"
        );
    }

    fn result(m: &str, mv: f64) -> VariantResult {
        VariantResult {
            name: format!("x{m}"),
            multiplier: Multiplier::parse(m).unwrap(),
            lp_bound: 0.0,
            bound: 0.0,
            objective: 0.0,
            gap: 0.0,
            supply_vials: 0,
            shipped_vials: 0,
            sites_served: 0,
            blocks_served: 0,
            requests_served: 0,
            wasps_expected_alive: 0.0,
            marginal_value_per_vial: mv,
            marginal_by_facility: Vec::new(),
            binding: Vec::new(),
            top_quarter_wasps: 0.0,
            hand: crate::baseline::Baseline::default(),
        }
    }

    #[test]
    fn saturation_is_the_first_multiplier_above_one_below_the_threshold() {
        let v = [
            result("0.5", 200.0),
            result("1", 100.0),
            result("2", 30.0),
            result("4", 10.0),
        ];
        let s = saturation(&v, 0.25);
        assert_eq!((s.reference, s.threshold, s.at), (100.0, 25.0, Some(3)));
        assert_eq!(saturation(&v, 0.5).at, Some(2));
        assert_eq!(saturation(&v, 0.05).at, None);
        let flat = [result("1", 0.0), result("2", 0.0)];
        assert_eq!(saturation(&flat, 0.25).at, Some(0), "saturated at 1×");
    }
}
