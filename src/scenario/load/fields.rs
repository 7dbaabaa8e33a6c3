//! Parsers for single values as written in the input files. Each returns the rule broken, in
//! words a coordinator can act on, so callers only add the file, line and field.

use chrono::{NaiveDate, NaiveTime, Weekday};

/// Strict ISO 8601 calendar date `YYYY-MM-DD` (no time, no week dates, no sign).
pub(super) fn parse_date(s: &str) -> Result<NaiveDate, String> {
    let b = s.as_bytes();
    let shape_ok = b.len() == 10
        && b[4] == b'-'
        && b[7] == b'-'
        && b.iter()
            .enumerate()
            .all(|(i, c)| i == 4 || i == 7 || c.is_ascii_digit());
    if !shape_ok {
        return Err("expected an ISO 8601 date YYYY-MM-DD, e.g. 2027-03-01".into());
    }
    NaiveDate::parse_from_str(s, "%Y-%m-%d")
        .map_err(|_| "not a calendar date; write an existing day as YYYY-MM-DD".into())
}

/// Strict 24-hour local time `HH:MM`.
pub(super) fn parse_time(s: &str) -> Result<NaiveTime, String> {
    let b = s.as_bytes();
    let shape_ok =
        b.len() == 5 && b[2] == b':' && [0, 1, 3, 4].iter().all(|&i| b[i].is_ascii_digit());
    if !shape_ok {
        return Err("expected a 24-hour time HH:MM, e.g. 07:30".into());
    }
    let h = u32::from(b[0] - b'0') * 10 + u32::from(b[1] - b'0');
    let m = u32::from(b[3] - b'0') * 10 + u32::from(b[4] - b'0');
    NaiveTime::from_hms_opt(h, m, 0).ok_or_else(|| "hours must be 00..23 and minutes 00..59".into())
}

const DAY_NAMES: [(&str, Weekday); 7] = [
    ("mon", Weekday::Mon),
    ("tue", Weekday::Tue),
    ("wed", Weekday::Wed),
    ("thu", Weekday::Thu),
    ("fri", Weekday::Fri),
    ("sat", Weekday::Sat),
    ("sun", Weekday::Sun),
];

/// One lowercase three-letter day name.
pub(super) fn parse_day(s: &str) -> Result<Weekday, String> {
    DAY_NAMES
        .iter()
        .find(|(n, _)| *n == s)
        .map(|&(_, d)| d)
        .ok_or_else(|| format!("'{s}' is not a day; use mon, tue, wed, thu, fri, sat or sun"))
}

/// Checks a list of days for duplicates and sorts it Monday first.
pub(super) fn check_days(mut days: Vec<Weekday>) -> Result<Vec<Weekday>, String> {
    if days.is_empty() {
        return Err("list at least one day (mon..sun)".into());
    }
    days.sort_by_key(|d| d.num_days_from_monday());
    if let Some(w) = days.windows(2).find(|w| w[0] == w[1]) {
        return Err(format!(
            "day '{}' is listed twice; list each day once",
            day_name(w[0])
        ));
    }
    Ok(days)
}

/// Semicolon-separated day list such as `mon;wed;fri`.
pub(super) fn parse_days(s: &str) -> Result<Vec<Weekday>, String> {
    if s.trim().is_empty() {
        return Err("list at least one day, e.g. mon;wed;fri".into());
    }
    let days = s
        .split(';')
        .map(|d| parse_day(d.trim()))
        .collect::<Result<Vec<_>, _>>()?;
    check_days(days)
}

/// Lowercase three-letter name of a weekday.
pub(super) fn day_name(d: Weekday) -> &'static str {
    DAY_NAMES[d.num_days_from_monday() as usize].0
}

/// A finite decimal number.
pub(super) fn parse_f64(s: &str) -> Result<f64, String> {
    let v: f64 = s
        .parse()
        .map_err(|_| "expected a number, e.g. 12.5".to_string())?;
    if v.is_finite() {
        Ok(v)
    } else {
        Err("the number must be finite".into())
    }
}

/// A whole number 0..=u32::MAX written with digits only.
pub(super) fn parse_u32(s: &str) -> Result<u32, String> {
    if let Some(rest) = s.strip_prefix('-')
        && !rest.is_empty()
        && rest.bytes().all(|c| c.is_ascii_digit())
    {
        return Err("must be 0 or more".into());
    }
    if s.is_empty() || !s.bytes().all(|c| c.is_ascii_digit()) {
        return Err("expected a whole number of 0 or more, e.g. 12".into());
    }
    s.parse()
        .map_err(|_| format!("too large; the largest allowed is {}", u32::MAX))
}

/// Latitude in degrees, finite, in [-90, 90].
pub(super) fn parse_lat(s: &str) -> Result<f64, String> {
    let v = parse_f64(s)?;
    check_lat(v)
}

/// Longitude in degrees, finite, in [-180, 180].
pub(super) fn parse_lon(s: &str) -> Result<f64, String> {
    let v = parse_f64(s)?;
    check_lon(v)
}

/// Range check for a latitude.
pub(super) fn check_lat(v: f64) -> Result<f64, String> {
    if v.is_finite() && (-90.0..=90.0).contains(&v) {
        Ok(v)
    } else {
        Err("latitude must be between -90 and 90 degrees (check lat/lon are not swapped)".into())
    }
}

/// Range check for a longitude.
pub(super) fn check_lon(v: f64) -> Result<f64, String> {
    if v.is_finite() && (-180.0..=180.0).contains(&v) {
        Ok(v)
    } else {
        Err("longitude must be between -180 and 180 degrees".into())
    }
}

/// One of a fixed set of exact spellings.
pub(super) fn parse_enum<T: Copy>(s: &str, choices: &[(&str, T)]) -> Result<T, String> {
    choices
        .iter()
        .find(|(n, _)| *n == s)
        .map(|&(_, v)| v)
        .ok_or_else(|| {
            let names: Vec<&str> = choices.iter().map(|(n, _)| *n).collect();
            format!("must be one of {} (exact spelling)", names.join(", "))
        })
}

/// Whether `c` prints as nothing or as a blank that is not a plain space: control characters,
/// the byte-order mark, zero-width and direction marks, no-break and other odd spaces. Such a
/// character inside a value makes two equal-looking ids differ.
pub(crate) fn invisible(c: char) -> bool {
    c.is_control()
        || matches!(
            c,
            '\u{00A0}'
                | '\u{00AD}'
                | '\u{034F}'
                | '\u{061C}'
                | '\u{115F}'
                | '\u{1160}'
                | '\u{17B4}'
                | '\u{17B5}'
                | '\u{180E}'
                | '\u{2000}'..='\u{200F}'
                | '\u{2028}'..='\u{202F}'
                | '\u{205F}'..='\u{206F}'
                | '\u{3000}'
                | '\u{3164}'
                | '\u{FEFF}'
                | '\u{FFA0}'
                | '\u{FFF9}'..='\u{FFFB}'
        )
}

/// Shortens and cleans a value for display in a problem: binary garbage and very long cells
/// must not flood the terminal, and an invisible character is written as an escape
/// (`\u{feff}`) so that the reader sees why `F1` is not `F1`.
pub(super) fn show(s: &str) -> String {
    const MAX_CHARS: usize = 60;
    let mut out = String::new();
    for c in s.chars().take(MAX_CHARS) {
        if invisible(c) {
            out.push_str(&c.escape_unicode().to_string());
        } else {
            out.push(c);
        }
    }
    if s.chars().count() > MAX_CHARS {
        out.push('…');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_must_be_strict_iso() {
        assert_eq!(
            parse_date("2027-03-01").unwrap(),
            NaiveDate::from_ymd_opt(2027, 3, 1).unwrap()
        );
        for bad in [
            "2027-3-1",
            "01/03/2027",
            "2027-02-30",
            "2027-03-01T00:00",
            "",
            "+2027-03-0",
        ] {
            assert!(parse_date(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn times_are_hh_mm_24_hour() {
        assert_eq!(
            parse_time("07:30").unwrap(),
            NaiveTime::from_hms_opt(7, 30, 0).unwrap()
        );
        assert_eq!(
            parse_time("23:59").unwrap(),
            NaiveTime::from_hms_opt(23, 59, 0).unwrap()
        );
        for bad in ["7:30", "24:00", "12:60", "07:30:00", "ab:cd", "", "07-30"] {
            assert!(parse_time(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn days_are_lowercase_unique_and_sorted() {
        assert_eq!(
            parse_days("fri;mon; wed").unwrap(),
            vec![Weekday::Mon, Weekday::Wed, Weekday::Fri]
        );
        assert!(parse_days("Mon").is_err());
        assert!(parse_days("mon;mon").unwrap_err().contains("twice"));
        assert!(parse_days("").is_err());
        assert!(parse_days("mon;;tue").is_err());
        assert!(parse_days("monday").is_err());
    }

    #[test]
    fn whole_numbers_reject_signs_fractions_and_overflow() {
        assert_eq!(parse_u32("0").unwrap(), 0);
        assert_eq!(parse_u32("4294967295").unwrap(), u32::MAX);
        assert!(parse_u32("-5").unwrap_err().contains("0 or more"));
        assert!(parse_u32("4294967296").unwrap_err().contains("too large"));
        assert!(parse_u32("1.5").is_err());
        assert!(parse_u32("").is_err());
    }

    #[test]
    fn numbers_must_be_finite() {
        assert_eq!(parse_f64("1.5").unwrap(), 1.5);
        for bad in ["NaN", "inf", "1e400", "x", ""] {
            assert!(parse_f64(bad).is_err(), "{bad}");
        }
        assert!(parse_lat("91").is_err());
        assert!(parse_lon("-180.5").is_err());
        assert!(parse_lon("180").is_ok());
    }

    #[test]
    fn shown_values_are_short_and_printable() {
        let long = "x".repeat(500);
        assert_eq!(show(&long).chars().count(), 61);
        assert_eq!(show("a\u{0}b"), "a\\u{0}b");
        assert_eq!(show("\u{feff}F1"), "\\u{feff}F1");
        assert_eq!(show("F\u{200b}1 x"), "F\\u{200b}1 x");
    }
}
