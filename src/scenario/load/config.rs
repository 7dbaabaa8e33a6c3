//! `scenario.json`: week, agent, policy, travel, parcel and dispatch settings.

use chrono::{Datelike, NaiveDate, NaiveTime, Weekday};
use serde_json::{Map, Value};

use super::fields::{check_days, parse_date, parse_day, parse_days, parse_time};
use super::limits;
use super::text::{Sink, duplicate_keys};
use crate::scenario::problems::Location;
use crate::scenario::{Agent, DispatchSettings, Parcel, Policy, Survival};

/// Everything `scenario.json` says, before the travel matrix is read.
pub(super) struct Config {
    pub(super) name: String,
    /// `None` when `week_start` is missing or invalid (later date checks are then skipped).
    pub(super) week_start: Option<NaiveDate>,
    pub(super) agent: Agent,
    pub(super) policy: Policy,
    pub(super) circuity: f64,
    pub(super) speed_kmh: f64,
    /// `travel.matrix` as written, relative to the scenario folder.
    pub(super) matrix: Option<String>,
    /// `travel.road_network` as written, relative to the scenario folder.
    pub(super) road_network: Option<String>,
    pub(super) parcel: Parcel,
    pub(super) dispatch: DispatchSettings,
}

/// A JSON object at a key path, with typed getters that record problems. Getters return a
/// fallback on failure: the caller's scenario is discarded whenever any problem was recorded,
/// so a fallback never reaches a plan; it only lets checking go on.
struct Obj<'a> {
    file: &'a str,
    path: String,
    map: Option<&'a Map<String, Value>>,
}

fn t(h: u32, m: u32) -> NaiveTime {
    NaiveTime::from_hms_opt(h, m, 0).expect("constant time is valid")
}

fn kind(v: &Value) -> &'static str {
    match v {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(_) => "a number",
        Value::String(_) => "a string",
        Value::Array(_) => "a list",
        Value::Object(_) => "an object",
    }
}

fn shown(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        other => other.to_string(),
    }
}

impl<'a> Obj<'a> {
    fn key_path(&self, key: &str) -> String {
        if self.path.is_empty() {
            key.to_string()
        } else {
            format!("{}.{key}", self.path)
        }
    }

    fn bad(&self, sink: &mut Sink, key: &str, v: Option<&Value>, msg: impl Into<String>) {
        let value = v.map(shown);
        sink.problem(
            self.file,
            Location::Key(self.key_path(key)),
            None,
            value.as_deref(),
            msg,
        );
    }

    /// The value at `key`; a missing required key is a problem. `null` counts as missing.
    fn get(&self, sink: &mut Sink, key: &str, required: bool) -> Option<&'a Value> {
        let map = self.map?;
        match map.get(key) {
            Some(Value::Null) | None => {
                if required {
                    self.bad(
                        sink,
                        key,
                        None,
                        "required key is missing; see docs/formats.md for scenario.json",
                    );
                }
                None
            }
            Some(v) => Some(v),
        }
    }

    fn object(&self, sink: &mut Sink, key: &str, required: bool) -> Obj<'a> {
        let map = match self.get(sink, key, required) {
            Some(Value::Object(m)) => Some(m),
            Some(v) => {
                self.bad(
                    sink,
                    key,
                    Some(v),
                    format!("expected an object {{...}}, found {}", kind(v)),
                );
                None
            }
            None => None,
        };
        Obj {
            file: self.file,
            path: self.key_path(key),
            map,
        }
    }

    fn string(&self, sink: &mut Sink, key: &str, required: bool) -> Option<String> {
        match self.get(sink, key, required)? {
            Value::String(s) if s.chars().any(char::is_control) => {
                self.bad(
                    sink,
                    key,
                    Some(&Value::String(s.clone())),
                    "the text holds a control character (shown escaped, e.g. \\u{0}); retype it",
                );
                None
            }
            Value::String(s) => Some(s.clone()),
            v => {
                self.bad(
                    sink,
                    key,
                    Some(v),
                    format!("expected a string, found {}", kind(v)),
                );
                None
            }
        }
    }

    /// A finite number that passes `rule` (`Err` is the message); `default` when optional and
    /// absent.
    fn number(
        &self,
        sink: &mut Sink,
        key: &str,
        default: Option<f64>,
        rule: impl Fn(f64) -> Result<(), String>,
    ) -> f64 {
        let fallback = default.unwrap_or(1.0);
        let Some(v) = self.get(sink, key, default.is_none()) else {
            return fallback;
        };
        let Some(x) = v.as_f64().filter(|x| x.is_finite()) else {
            self.bad(
                sink,
                key,
                Some(v),
                format!("expected a number, found {}", kind(v)),
            );
            return fallback;
        };
        match rule(x) {
            Ok(()) => x,
            Err(msg) => {
                self.bad(sink, key, Some(v), msg);
                fallback
            }
        }
    }

    /// A whole number in `min..=max`.
    fn integer(&self, sink: &mut Sink, key: &str, default: Option<u64>, min: u64, max: u64) -> u64 {
        let fallback = default.unwrap_or(min);
        let Some(v) = self.get(sink, key, default.is_none()) else {
            return fallback;
        };
        let whole = v.as_u64().or_else(|| {
            v.as_f64()
                .filter(|x| x.fract() == 0.0 && *x >= 0.0 && *x <= u64::MAX as f64)
                .map(|x| x as u64)
        });
        match whole {
            Some(n) if (min..=max).contains(&n) => n,
            Some(_) => {
                self.bad(
                    sink,
                    key,
                    Some(v),
                    format!("must be a whole number from {min} to {max}"),
                );
                fallback
            }
            None => {
                let msg = if v.as_f64().is_some_and(|x| x < 0.0) {
                    format!("must be {min} or more")
                } else {
                    format!("expected a whole number from {min} to {max}")
                };
                self.bad(sink, key, Some(v), msg);
                fallback
            }
        }
    }

    fn boolean(&self, sink: &mut Sink, key: &str) -> bool {
        match self.get(sink, key, true) {
            Some(Value::Bool(b)) => *b,
            Some(v) => {
                self.bad(
                    sink,
                    key,
                    Some(v),
                    "expected true or false (without quotes)",
                );
                false
            }
            None => false,
        }
    }

    fn time(&self, sink: &mut Sink, key: &str, default: NaiveTime) -> NaiveTime {
        let Some(v) = self.get(sink, key, false) else {
            return default;
        };
        let parsed = match v {
            Value::String(s) => parse_time(s),
            _ => Err(format!(
                "expected a time string \"HH:MM\", found {}",
                kind(v)
            )),
        };
        parsed.unwrap_or_else(|msg| {
            self.bad(sink, key, Some(v), msg);
            default
        })
    }
}

/// A number in `(0, max]`, `unit` naming what `max` counts (the limits and their reasons are in
/// docs/formats.md, "Limits").
fn positive_up_to(max: f64, unit: &'static str) -> impl Fn(f64) -> Result<(), String> {
    move |x| {
        if x > 0.0 && x <= max {
            Ok(())
        } else if x <= 0.0 {
            Err("must be greater than 0".into())
        } else {
            Err(format!(
                "must be at most {max} {unit}; a larger value is a typing or unit mistake"
            ))
        }
    }
}

/// A number in `[0, max]`.
fn up_to(max: f64, unit: &'static str) -> impl Fn(f64) -> Result<(), String> {
    move |x| {
        if (0.0..=max).contains(&x) {
            Ok(())
        } else if x < 0.0 {
            Err("must be 0 or more".into())
        } else {
            Err(format!(
                "must be at most {max} {unit}; a larger value is a typing or unit mistake"
            ))
        }
    }
}

fn share(x: f64) -> Result<(), String> {
    if (0.0..=1.0).contains(&x) {
        Ok(())
    } else {
        Err("a share must be between 0 and 1 (write 15 % as 0.15)".into())
    }
}

/// `policy.insecticide_exclusion_days`, or the same value under its earlier name
/// `policy.pesticide_exclusion_days` with a warning to rename it (outputs and docs say
/// *insecticide* throughout). Both names at once is a problem: which one is meant?
fn insecticide_exclusion_days(p: &Obj, sink: &mut Sink) -> u32 {
    const NEW: &str = "insecticide_exclusion_days";
    const OLD: &str = "pesticide_exclusion_days";
    let given = |k: &str| {
        p.map
            .is_some_and(|m| m.get(k).is_some_and(|v| !v.is_null()))
    };
    let days = |key: &str, sink: &mut Sink| {
        p.integer(sink, key, None, 0, limits::MAX_INTERVAL_DAYS) as u32
    };
    match (given(NEW), given(OLD)) {
        (false, true) => {
            sink.warning(
                p.file,
                Location::Key(p.key_path(OLD)),
                format!(
                    "`{}` is the earlier name of `{}`; it is read for now, rename the key",
                    p.key_path(OLD),
                    p.key_path(NEW)
                ),
            );
            days(OLD, sink)
        }
        (true, true) => {
            p.bad(
                sink,
                OLD,
                p.map.and_then(|m| m.get(OLD)),
                format!(
                    "both `{}` and its earlier name are given; keep only `{}`",
                    p.key_path(NEW),
                    p.key_path(NEW)
                ),
            );
            days(NEW, sink)
        }
        _ => days(NEW, sink),
    }
}

/// Parses `scenario.json`. `None` only when the text is not a JSON object at all.
/// Every key path the loader reads from scenario.json (format v1, `docs/formats.md`), dotted
/// from the top object. Other modules derive their key lists from it (e.g. the keys
/// `--set` may change); a test below checks that the loader reads each one.
pub const SCENARIO_KEYS: [&str; 34] = [
    "name",
    "week_start",
    "agent.name",
    "agent.shelf_life_hours",
    "agent.survival.model",
    "agent.survival.half_life_hours",
    "agent.survival.points",
    "agent.min_release_wasps",
    "agent.target_release_wasps",
    "agent.max_release_wasps",
    "agent.above_target_weight",
    "agent.pack_time",
    "policy.dooryard_share_min",
    "policy.dooryard_vials_per_request",
    "policy.insecticide_exclusion_days",
    "policy.require_flush",
    "policy.pressure_radius_km",
    "policy.pressure_bandwidth_km",
    "policy.travel_cost_per_hour",
    "policy.rerelease_interval_days",
    "travel.circuity",
    "travel.speed_kmh",
    "travel.matrix",
    "travel.road_network",
    "parcel.transit_hours",
    "parcel.days",
    "parcel.max_vials_per_day",
    "parcel.ship_time",
    "dispatch.service_minutes_block",
    "dispatch.service_minutes_dooryard",
    "dispatch.dooryard_window_start",
    "dispatch.dooryard_window_end",
    "dispatch.time_limit_seconds",
    "dispatch.seed",
];

pub(super) fn parse(file: &str, text: &str, sink: &mut Sink) -> Option<Config> {
    let root: Value = match serde_json::from_str(text) {
        Ok(v) => v,
        Err(e) => {
            sink.problem(
                file,
                Location::Line(e.line() as u64),
                None,
                None,
                format!("not valid JSON (column {}): {e}", e.column()),
            );
            return None;
        }
    };
    for path in duplicate_keys(text) {
        sink.problem(
            file,
            Location::Key(path),
            None,
            None,
            "the key is written twice in the same object; a reader would silently keep one of \
             the two values. Keep the one you mean and delete the other",
        );
    }
    let Value::Object(map) = &root else {
        sink.problem(
            file,
            Location::File,
            None,
            None,
            "expected a JSON object { ... } at the top",
        );
        return None;
    };
    let top = Obj {
        file,
        path: String::new(),
        map: Some(map),
    };
    let name = top.string(sink, "name", true).unwrap_or_default();
    let week_start = top
        .string(sink, "week_start", true)
        .and_then(|s| match parse_date(&s) {
            Ok(d) if !(limits::WEEK_YEARS).contains(&d.year()) => {
                top.bad(
                    sink,
                    "week_start",
                    Some(&Value::String(s.clone())),
                    format!(
                        "the year must be from {} to {}; check the date",
                        limits::WEEK_YEARS.start(),
                        limits::WEEK_YEARS.end()
                    ),
                );
                None
            }
            Ok(d) if d.weekday() == Weekday::Mon => Some(d),
            Ok(d) => {
                top.bad(
                    sink,
                    "week_start",
                    Some(&Value::String(s.clone())),
                    format!(
                        "the week must start on a Monday; {d} is a {:?}",
                        d.weekday()
                    ),
                );
                None
            }
            Err(msg) => {
                top.bad(sink, "week_start", Some(&Value::String(s.clone())), msg);
                None
            }
        });

    let agent = parse_agent(&top.object(sink, "agent", true), sink);

    let p = top.object(sink, "policy", true);
    let policy = Policy {
        dooryard_share_min: p.number(sink, "dooryard_share_min", None, share),
        dooryard_vials_per_request: p.integer(
            sink,
            "dooryard_vials_per_request",
            None,
            1,
            limits::MAX_VIALS_PER_REQUEST,
        ) as u32,
        insecticide_exclusion_days: insecticide_exclusion_days(&p, sink),
        require_flush: p.boolean(sink, "require_flush"),
        pressure_radius_km: p.number(
            sink,
            "pressure_radius_km",
            None,
            positive_up_to(limits::MAX_KM, "km"),
        ),
        pressure_bandwidth_km: p.number(
            sink,
            "pressure_bandwidth_km",
            None,
            positive_up_to(limits::MAX_KM, "km"),
        ),
        travel_cost_per_hour: p.number(
            sink,
            "travel_cost_per_hour",
            Some(1.0),
            up_to(limits::MAX_TRAVEL_COST_PER_HOUR, "per hour"),
        ),
        rerelease_interval_days: p.integer(
            sink,
            "rerelease_interval_days",
            Some(28),
            0,
            limits::MAX_INTERVAL_DAYS,
        ) as u32,
        releases_per_site_week: p.integer(sink, "releases_per_site_week", Some(1), 1, 7) as u32,
    };

    let tr = top.object(sink, "travel", true);
    let circuity = tr.number(sink, "circuity", None, |x| {
        if (1.0..=limits::MAX_CIRCUITY).contains(&x) {
            Ok(())
        } else if x > 1.0 {
            Err(format!(
                "must be at most {}; road distance is rarely more than twice the straight line",
                limits::MAX_CIRCUITY
            ))
        } else {
            Err("road distance over straight-line distance is 1 or more (typically 1.2–1.5)".into())
        }
    });
    let speed_kmh = tr.number(
        sink,
        "speed_kmh",
        None,
        positive_up_to(limits::MAX_SPEED_KMH, "km/h"),
    );
    let matrix = tr.string(sink, "matrix", false);
    let road_network = tr.string(sink, "road_network", false);

    let pa = top.object(sink, "parcel", true);
    let parcel = Parcel {
        transit_hours: pa.number(
            sink,
            "transit_hours",
            None,
            up_to(limits::MAX_HOURS, "hours"),
        ),
        days: parse_parcel_days(&pa, sink),
        max_vials_per_day: pa.integer(
            sink,
            "max_vials_per_day",
            None,
            0,
            limits::MAX_VIALS_PER_DAY,
        ) as u32,
        ship_time: pa.time(sink, "ship_time", t(15, 0)),
    };

    let d = top.object(sink, "dispatch", false);
    let dispatch = DispatchSettings {
        service_minutes_block: d.number(
            sink,
            "service_minutes_block",
            Some(15.0),
            up_to(limits::MAX_SERVICE_MINUTES, "minutes"),
        ),
        service_minutes_dooryard: d.number(
            sink,
            "service_minutes_dooryard",
            Some(5.0),
            up_to(limits::MAX_SERVICE_MINUTES, "minutes"),
        ),
        dooryard_window_start: d.time(sink, "dooryard_window_start", t(8, 0)),
        dooryard_window_end: d.time(sink, "dooryard_window_end", t(18, 0)),
        time_limit_seconds: d.get(sink, "time_limit_seconds", false).is_some().then(|| {
            d.number(
                sink,
                "time_limit_seconds",
                None,
                positive_up_to(limits::MAX_TIME_LIMIT_SECONDS, "seconds"),
            )
        }),
        seed: d.integer(sink, "seed", Some(1), 0, u64::MAX),
    };
    if dispatch.dooryard_window_start >= dispatch.dooryard_window_end {
        d.bad(
            sink,
            "dooryard_window_end",
            Some(&Value::String(
                dispatch.dooryard_window_end.format("%H:%M").to_string(),
            )),
            "the dooryard window must end after it starts",
        );
    }

    Some(Config {
        name,
        week_start,
        agent,
        policy,
        circuity,
        speed_kmh,
        matrix,
        road_network,
        parcel,
        dispatch,
    })
}

fn parse_parcel_days(pa: &Obj<'_>, sink: &mut Sink) -> Vec<Weekday> {
    let Some(v) = pa.get(sink, "days", true) else {
        return Vec::new();
    };
    let parsed = match v {
        Value::Array(items) => items
            .iter()
            .map(|i| match i {
                Value::String(s) => parse_day(s),
                other => Err(format!(
                    "each day is a string such as \"mon\", found {}",
                    kind(other)
                )),
            })
            .collect::<Result<Vec<_>, _>>()
            .and_then(check_days),
        Value::String(s) => parse_days(s),
        other => Err(format!(
            "expected a list of days such as [\"mon\", \"thu\"], found {}",
            kind(other)
        )),
    };
    parsed.unwrap_or_else(|msg| {
        pa.bad(sink, "days", Some(v), msg);
        Vec::new()
    })
}

fn parse_agent(a: &Obj<'_>, sink: &mut Sink) -> Agent {
    let name = a.string(sink, "name", true).unwrap_or_default();
    let shelf_life_hours = a.number(
        sink,
        "shelf_life_hours",
        None,
        positive_up_to(limits::MAX_HOURS, "hours"),
    );
    let survival = parse_survival(&a.object(sink, "survival", true), sink);
    let min = a.number(
        sink,
        "min_release_wasps",
        None,
        up_to(limits::MAX_RELEASE_WASPS, "wasps"),
    );
    let target = a.number(
        sink,
        "target_release_wasps",
        None,
        up_to(limits::MAX_RELEASE_WASPS, "wasps"),
    );
    let max = a.number(
        sink,
        "max_release_wasps",
        None,
        up_to(limits::MAX_RELEASE_WASPS, "wasps"),
    );
    if min > target {
        a.bad(
            sink,
            "min_release_wasps",
            a.map.and_then(|m| m.get("min_release_wasps")),
            format!("must not exceed target_release_wasps ({target})"),
        );
    }
    if target > max {
        a.bad(
            sink,
            "target_release_wasps",
            a.map.and_then(|m| m.get("target_release_wasps")),
            format!("must not exceed max_release_wasps ({max})"),
        );
    }
    Agent {
        name,
        shelf_life_hours,
        survival,
        min_release_wasps: min,
        target_release_wasps: target,
        max_release_wasps: max,
        above_target_weight: a.number(sink, "above_target_weight", Some(0.5), share),
        pack_time: a.time(sink, "pack_time", t(6, 0)),
    }
}

fn parse_survival(s: &Obj<'_>, sink: &mut Sink) -> Survival {
    let fallback = Survival::Exponential {
        half_life_hours: 1.0,
    };
    let Some(model) = s.string(sink, "model", true) else {
        return fallback;
    };
    match model.as_str() {
        "exponential" => Survival::Exponential {
            half_life_hours: s.number(
                sink,
                "half_life_hours",
                None,
                positive_up_to(limits::MAX_HOURS, "hours"),
            ),
        },
        "table" => match s.get(sink, "points", true) {
            Some(v) => match table_points(v) {
                Ok(points) => Survival::Table(points),
                Err(msg) => {
                    s.bad(sink, "points", Some(v), msg);
                    fallback
                }
            },
            None => fallback,
        },
        _ => {
            s.bad(
                sink,
                "model",
                Some(&Value::String(model.clone())),
                "must be \"exponential\" (with half_life_hours) or \"table\" (with points)",
            );
            fallback
        }
    }
}

/// `[[hours, share], ...]`: first at 0 h, hours increasing, shares in [0, 1] not increasing.
fn table_points(v: &Value) -> Result<Vec<(f64, f64)>, String> {
    let Value::Array(items) = v else {
        return Err("expected a list of [hours, share] pairs, e.g. [[0, 1.0], [48, 0.8]]".into());
    };
    let mut points = Vec::with_capacity(items.len());
    for (i, item) in items.iter().enumerate() {
        let pair = item.as_array().filter(|p| p.len() == 2);
        let (Some(h), Some(sh)) = (
            pair.and_then(|p| p[0].as_f64()).filter(|x| x.is_finite()),
            pair.and_then(|p| p[1].as_f64()).filter(|x| x.is_finite()),
        ) else {
            return Err(format!(
                "point {i} must be a pair of numbers [hours, share]"
            ));
        };
        if h > limits::MAX_HOURS {
            return Err(format!(
                "point {i}: {h} hours is more than the limit of {} hours",
                limits::MAX_HOURS
            ));
        }
        if !(0.0..=1.0).contains(&sh) {
            return Err(format!("point {i}: share {sh} must be between 0 and 1"));
        }
        if let Some(&(ph, ps)) = points.last() {
            if h <= ph {
                return Err(format!("point {i}: hours must increase ({h} after {ph})"));
            }
            if sh > ps {
                return Err(format!(
                    "point {i}: the share alive cannot rise with age ({sh} after {ps})"
                ));
            }
        } else if h != 0.0 {
            return Err("the first point must be at 0 hours".into());
        }
        points.push((h, sh));
    }
    if points.is_empty() {
        return Err("give at least the point [0, 1.0]".into());
    }
    Ok(points)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_points_rules() {
        let ok = serde_json::json!([[0, 1.0], [24, 0.9], [48, 0.5]]);
        assert_eq!(table_points(&ok).unwrap().len(), 3);
        for bad in [
            serde_json::json!([[1, 1.0]]),
            serde_json::json!([[0, 1.0], [0, 0.9]]),
            serde_json::json!([[0, 0.5], [10, 0.9]]),
            serde_json::json!([[0, 1.5]]),
            serde_json::json!([]),
            serde_json::json!([[0]]),
        ] {
            assert!(table_points(&bad).is_err(), "{bad}");
        }
    }
}
