//! Supply forecast: wasps emerging per facility and day from the rearing cage log and daily
//! mean temperatures, packed into whole vials as a `supply.csv`.
//!
//! Model (linear degree-day, simple average method):
//! - each day from a cage's `wasps_added_date` (that day included) adds
//!   `max(0, mean_c − threshold_c)` degree-days;
//! - development completes when the running sum reaches `degree_days`; the fraction of the
//!   last day is interpolated, so at a constant temperature T the development time is
//!   `degree_days / (T − threshold_c)` days, and the first emergence date is the adding date
//!   plus the whole days elapsed (the day on which the sum is reached);
//! - the cage's `expected_yield_wasps` emerge spread uniformly over `collection_days`
//!   consecutive days from the first emergence date (a documented simplification: eggs are
//!   laid over several days after the wasps are added, and the cage is collected daily);
//! - per facility and day, emerging wasps are packed into vials of the facility's
//!   `wasps_per_vial`; a part-filled vial's wasps carry over to the next day's packing at that
//!   facility, and whatever is left after the last day is not packed.
//!
//! Defaults: lower threshold 7.85 °C and 193.36 degree-days from egg to adult (Ramos Aguila et
//! al. 2020, Journal of Economic Entomology 113(1)); collection over 5 days (common practice,
//! no source). Under fluctuating field temperatures the linear model is an approximation.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use chrono::NaiveDate;

use crate::csvread::{self, Cells, CsvRow, iso_date, problem};
use crate::scenario::{Location, MAX_LISTED, Problem};

/// Degree-day model settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ForecastParams {
    /// Lower development threshold, °C (default 7.85).
    pub threshold_c: f64,
    /// Degree-days above the threshold from egg to adult, °C·days (default 193.36).
    pub degree_days: f64,
    /// Days over which a cage's yield emerges and is collected, uniformly (default 5, ≥ 1).
    pub collection_days: u32,
}

impl Default for ForecastParams {
    fn default() -> Self {
        ForecastParams {
            threshold_c: 7.85,
            degree_days: 193.36,
            collection_days: 5,
        }
    }
}

/// One rearing cage (`rearing.csv`).
#[derive(Clone, Debug, PartialEq)]
pub struct Cage {
    /// `cage_id`.
    pub id: String,
    /// `facility_id`.
    pub facility_id: String,
    /// `wasps_added_date`: the day adult wasps were put on the psyllid nymphs.
    pub added: NaiveDate,
    /// `expected_yield_wasps`: adult wasps expected to emerge, wasps (≥ 0).
    pub expected_yield_wasps: f64,
}

/// Daily mean temperatures by (facility id, date), °C.
pub type Temps = BTreeMap<(String, NaiveDate), f64>;

/// Forecast errors.
#[derive(Debug, thiserror::Error)]
pub enum ForecastError {
    /// An input file is wrong (every problem found, at most [`MAX_LISTED`]).
    #[error("{}", csvread::problem_list(.problems, *.omitted))]
    Input {
        /// Problems, in file order.
        problems: Vec<Problem>,
        /// Problems past [`MAX_LISTED`].
        omitted: usize,
    },
    /// A file could not be read.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: String,
        /// The I/O error.
        #[source]
        source: std::io::Error,
    },
}

impl ForecastError {
    fn input(mut problems: Vec<Problem>) -> Self {
        let omitted = problems.len().saturating_sub(MAX_LISTED);
        problems.truncate(MAX_LISTED);
        ForecastError::Input { problems, omitted }
    }
}

/// Days (fractional) to accumulate `params.degree_days` from the given daily means, °C, day 0
/// first; `None` if the series ends first. O(days).
///
/// ```
/// use broodcast::forecast::{development_days, ForecastParams};
/// let p = ForecastParams::default();
/// let t = development_days(std::iter::repeat(20.0), &p).unwrap();
/// assert!((t - 193.36 / (20.0 - 7.85)).abs() < 1e-9);
/// ```
pub fn development_days(
    daily_mean_c: impl IntoIterator<Item = f64>,
    params: &ForecastParams,
) -> Option<f64> {
    let mut sum = 0.0;
    // A bound so that an endless series below the threshold cannot loop for ever.
    for (day, t) in daily_mean_c.into_iter().take(100_000).enumerate() {
        let dd = (t - params.threshold_c).max(0.0);
        if sum + dd >= params.degree_days && dd > 0.0 {
            return Some(day as f64 + (params.degree_days - sum) / dd);
        }
        sum += dd;
    }
    None
}

/// When a cage's wasps start to emerge.
#[derive(Clone, Debug, PartialEq)]
pub struct Emergence {
    /// The cage.
    pub cage_id: String,
    /// Its facility.
    pub facility_id: String,
    /// Development time, days (fractional).
    pub development_days: f64,
    /// First emergence date: added date + whole days of development.
    pub first_date: NaiveDate,
    /// Wasps emerging on each of the collection days.
    pub wasps_per_day: f64,
}

/// First emergence of every cage. A missing temperature day before development completes is
/// an input error naming the cage, facility and date. O(C · d) for C cages and d days.
pub fn emergence(
    cages: &[Cage],
    temps: &Temps,
    params: &ForecastParams,
) -> Result<Vec<Emergence>, ForecastError> {
    let mut problems = Vec::new();
    let mut out = Vec::new();
    for c in cages {
        let mut series = Vec::new();
        let mut day = c.added;
        let done = loop {
            let Some(&t) = temps.get(&(c.facility_id.clone(), day)) else {
                break None;
            };
            series.push(t);
            if let Some(d) = development_days(series.iter().copied(), params) {
                break Some(d);
            }
            match day.succ_opt() {
                Some(n) => day = n,
                None => break None,
            }
        };
        match done {
            Some(d) => out.push(Emergence {
                cage_id: c.id.clone(),
                facility_id: c.facility_id.clone(),
                development_days: d,
                first_date: c.added + chrono::Days::new(d.floor() as u64),
                wasps_per_day: c.expected_yield_wasps / f64::from(params.collection_days.max(1)),
            }),
            None => problems.push(Problem {
                file: "temps.csv".into(),
                location: Location::File,
                field: Some("date".into()),
                value: Some(day.to_string()),
                message: format!(
                    "cage {} (facility {}, wasps added {}): no mean temperature for {} on {day}; \
                     temps.csv must cover every day from the adding date until development \
                     completes ({:.1} of {} degree-days reached)",
                    c.id,
                    c.facility_id,
                    c.added,
                    c.facility_id,
                    series
                        .iter()
                        .map(|t| (t - params.threshold_c).max(0.0))
                        .sum::<f64>(),
                    params.degree_days
                ),
            }),
        }
    }
    if !problems.is_empty() {
        return Err(ForecastError::input(problems));
    }
    Ok(out)
}

/// One `supply.csv` row.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SupplyRow {
    /// Facility id.
    pub facility_id: String,
    /// Packing date.
    pub date: NaiveDate,
    /// Whole vials packed.
    pub vials: u32,
}

/// Vials per facility and day, sorted by (facility, date); days from each facility's first
/// to last emergence day, zero-vial days included. `wasps_per_vial` must name every facility
/// of the cages. O(C · n + F · D log D).
pub fn forecast(
    cages: &[Cage],
    temps: &Temps,
    params: &ForecastParams,
    wasps_per_vial: &BTreeMap<String, u32>,
) -> Result<Vec<SupplyRow>, ForecastError> {
    let missing: BTreeSet<&str> = cages
        .iter()
        .map(|c| c.facility_id.as_str())
        .filter(|f| !wasps_per_vial.contains_key(*f))
        .collect();
    if !missing.is_empty() {
        return Err(ForecastError::input(
            missing
                .into_iter()
                .map(|f| Problem {
                    file: "rearing.csv".into(),
                    location: Location::File,
                    field: Some("facility_id".into()),
                    value: Some(f.to_string()),
                    message: "no wasps per vial for this facility; pass --wasps-per-vial or a \
                              facilities.csv that lists it"
                        .into(),
                })
                .collect(),
        ));
    }
    let mut wasps: BTreeMap<(String, NaiveDate), f64> = BTreeMap::new();
    for e in emergence(cages, temps, params)? {
        for k in 0..params.collection_days.max(1) {
            let d = e.first_date + chrono::Days::new(u64::from(k));
            *wasps.entry((e.facility_id.clone(), d)).or_insert(0.0) += e.wasps_per_day;
        }
    }
    let mut out = Vec::new();
    let mut by_facility: BTreeMap<&str, Vec<(NaiveDate, f64)>> = BTreeMap::new();
    for ((f, d), w) in &wasps {
        by_facility.entry(f).or_default().push((*d, *w));
    }
    for (f, days) in by_facility {
        let q = f64::from(wasps_per_vial.get(f).copied().unwrap_or(1).max(1));
        let (Some(first), Some(last)) = (days.first().map(|x| x.0), days.last().map(|x| x.0))
        else {
            continue;
        };
        let per_day: BTreeMap<NaiveDate, f64> = days.into_iter().collect();
        let mut carry = 0.0;
        let mut d = first;
        while d <= last {
            let have = carry + per_day.get(&d).copied().unwrap_or(0.0);
            // A hair of tolerance so 1000 wasps / 1000 per vial is one vial despite rounding.
            let vials = ((have + 1e-6) / q).floor().max(0.0);
            carry = (have - vials * q).max(0.0);
            out.push(SupplyRow {
                facility_id: f.to_string(),
                date: d,
                vials: vials.min(f64::from(u32::MAX)) as u32,
            });
            match d.succ_opt() {
                Some(n) => d = n,
                None => break,
            }
        }
    }
    Ok(out)
}

/// `supply.csv` text: `facility_id,date,vials`.
pub fn supply_csv(rows: &[SupplyRow]) -> Vec<u8> {
    let mut s = String::from("facility_id,date,vials\n");
    for r in rows {
        s.push_str(&format!("{},{},{}\n", r.facility_id, r.date, r.vials));
    }
    s.into_bytes()
}

/// Reads a CSV file as rows of `R` with their lines; every problem is reported.
fn read_rows<R: CsvRow>(path: &Path) -> Result<Vec<(u64, R)>, ForecastError> {
    let file = path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let bytes = std::fs::read(path).map_err(|source| ForecastError::Io {
        path: path.display().to_string(),
        source,
    })?;
    let read = csvread::read::<R>(&file, &bytes);
    if read.problems.is_empty() {
        Ok(read.rows)
    } else {
        Err(ForecastError::input(read.problems))
    }
}

fn date(c: &mut Cells<'_>, col: &str) -> Option<NaiveDate> {
    c.parse_with(col, |s| {
        iso_date(s).ok_or_else(|| "not an ISO date (YYYY-MM-DD)".to_string())
    })
}

impl CsvRow for Cage {
    const COLUMNS: &'static [&'static str] = &[
        "cage_id",
        "facility_id",
        "wasps_added_date",
        "expected_yield_wasps",
    ];
    const UNIQUE: Option<(&'static str, &'static str)> = Some(("cage_id", "cage ids are unique"));

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let id = c.required("cage_id", "every cage needs an id");
        let facility_id = c.required("facility_id", "every cage needs a facility id");
        let added = date(c, "wasps_added_date");
        let yield_w = c.parse_with("expected_yield_wasps", |s| {
            s.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite() && *x >= 0.0)
                .ok_or_else(|| "a number of wasps ≥ 0".to_string())
        });
        Some(Cage {
            id: id?,
            facility_id: facility_id?,
            added: added?,
            expected_yield_wasps: yield_w?,
        })
    }
}

/// Reads `rearing.csv`: `cage_id,facility_id,wasps_added_date,expected_yield_wasps`.
pub fn read_cages(path: &Path) -> Result<Vec<Cage>, ForecastError> {
    Ok(read_rows::<Cage>(path)?
        .into_iter()
        .map(|(_, c)| c)
        .collect())
}

/// One `temps.csv` row.
struct TempRow {
    facility_id: String,
    date: NaiveDate,
    mean_c: f64,
}

impl CsvRow for TempRow {
    const COLUMNS: &'static [&'static str] = &["facility_id", "date", "mean_c"];

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let facility_id = c.required("facility_id", "every row needs a facility id");
        let d = date(c, "date");
        let mean_c = c.parse_with("mean_c", |s| {
            s.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite() && (-60.0..=60.0).contains(x))
                .ok_or_else(|| "a daily mean temperature in °C between −60 and 60".to_string())
        });
        Some(TempRow {
            facility_id: facility_id?,
            date: d?,
            mean_c: mean_c?,
        })
    }
}

/// Reads `temps.csv`: `facility_id,date,mean_c`; one row per facility and day.
pub fn read_temps(path: &Path) -> Result<Temps, ForecastError> {
    let file = path
        .file_name()
        .map_or(String::new(), |n| n.to_string_lossy().into_owned());
    let mut out = Temps::new();
    let mut problems = Vec::new();
    for (line, t) in read_rows::<TempRow>(path)? {
        if out.insert((t.facility_id, t.date), t.mean_c).is_some() {
            problems.push(problem(
                &file,
                line,
                Some("date"),
                Some(&t.date.to_string()),
                "this facility already has a temperature for this day",
            ));
        }
    }
    if !problems.is_empty() {
        return Err(ForecastError::input(problems));
    }
    Ok(out)
}

/// `id` and `wasps_per_vial` of a `facilities.csv` row.
struct VialSize {
    id: String,
    wasps_per_vial: u32,
}

impl CsvRow for VialSize {
    const COLUMNS: &'static [&'static str] = &["id", "wasps_per_vial"];

    fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
        let id = c.required("id", "every facility needs an id");
        let w = c.parse_with("wasps_per_vial", |s| match s.parse::<u32>() {
            Ok(n) if n > 0 => Ok(n),
            _ => Err("a whole number of wasps > 0".to_string()),
        });
        Some(VialSize {
            id: id?,
            wasps_per_vial: w?,
        })
    }
}

/// Reads `id` and `wasps_per_vial` from a `facilities.csv`.
pub fn read_wasps_per_vial(path: &Path) -> Result<BTreeMap<String, u32>, ForecastError> {
    Ok(read_rows::<VialSize>(path)?
        .into_iter()
        .map(|(_, v)| (v.id, v.wasps_per_vial))
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").expect("date")
    }

    fn constant(f: &str, from: &str, days: u64, t: f64) -> Temps {
        (0..days)
            .map(|k| ((f.to_string(), d(from) + chrono::Days::new(k)), t))
            .collect()
    }

    #[test]
    fn a_bad_line_of_a_crlf_rearing_log_names_its_physical_line() {
        // csv's own line count lags one per CRLF; this reader once reported line 3 here.
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("rearing.csv");
        std::fs::write(
            &path,
            "cage_id,facility_id,wasps_added_date,expected_yield_wasps\r\n\
             C1,F1,2027-02-01,100\r\nC2,F1,2027-02-01,100\r\nC3,F1,2027-02-31,100\r\n",
        )
        .expect("write");
        let e = read_cages(&path).expect_err("bad date").to_string();
        assert!(e.contains("rearing.csv:4: field 'wasps_added_date'"), "{e}");
    }

    #[test]
    fn below_threshold_never_develops() {
        let p = ForecastParams::default();
        assert_eq!(development_days([7.0; 400], &p), None);
        assert_eq!(development_days([], &p), None);
    }

    #[test]
    fn fluctuating_days_sum_degree_days() {
        // 10 days at 27.85 (20 DD) = 200 DD: 193.36 reached during day 9 (0-based).
        let p = ForecastParams::default();
        let t = development_days([27.85; 10], &p).expect("develops");
        assert!((t - 9.668).abs() < 1e-3, "{t}");
        // Cold days add nothing but still pass.
        let mut series = vec![5.0; 3];
        series.extend([27.85; 10]);
        let t2 = development_days(series, &p).expect("develops");
        assert!((t2 - (t + 3.0)).abs() < 1e-9);
    }

    #[test]
    fn yield_is_spread_and_packed_with_carry() {
        let cages = vec![Cage {
            id: "C1".into(),
            facility_id: "F1".into(),
            added: d("2027-03-01"),
            expected_yield_wasps: 5_000.0,
        }];
        let temps = constant("F1", "2027-03-01", 30, 27.0);
        let p = ForecastParams::default();
        let wpv = BTreeMap::from([("F1".to_string(), 600)]);
        let rows = forecast(&cages, &temps, &p, &wpv).expect("forecast");
        // 193.36 / 19.15 = 10.1 days → first emergence 2027-03-11, 1000 wasps a day for 5 days.
        assert_eq!(rows.first().map(|r| r.date), Some(d("2027-03-11")));
        assert_eq!(rows.len(), 5);
        let vials: Vec<u32> = rows.iter().map(|r| r.vials).collect();
        // 1000 → 1 (400 carried), 1400 → 2 (200), 1200 → 2 (0), 1000 → 1 (400), 1400 → 2.
        assert_eq!(vials, vec![1, 2, 2, 1, 2]);
        assert!(vials.iter().map(|&v| f64::from(v) * 600.0).sum::<f64>() <= 5_000.0);
    }

    #[test]
    fn missing_temperature_names_cage_and_date() {
        let cages = vec![Cage {
            id: "C7".into(),
            facility_id: "F1".into(),
            added: d("2027-03-01"),
            expected_yield_wasps: 100.0,
        }];
        let temps = constant("F1", "2027-03-01", 4, 25.0);
        let e = emergence(&cages, &temps, &ForecastParams::default()).expect_err("gap");
        let s = e.to_string();
        assert!(s.contains("cage C7") && s.contains("2027-03-05"), "{s}");
    }

    #[test]
    fn unknown_facility_needs_wasps_per_vial() {
        let cages = vec![Cage {
            id: "C1".into(),
            facility_id: "F9".into(),
            added: d("2027-03-01"),
            expected_yield_wasps: 100.0,
        }];
        let e = forecast(
            &cages,
            &Temps::new(),
            &ForecastParams::default(),
            &BTreeMap::new(),
        )
        .expect_err("no vial size");
        assert!(e.to_string().contains("F9"));
    }
}
