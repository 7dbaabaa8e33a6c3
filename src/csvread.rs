//! One reader for every CSV file broodcast reads outside the scenario loader: the plan outputs
//! read back by `ledger commit` and `compare` (`manifest.csv`, `allocation.csv`), the filled-in
//! `confirmations.csv` of `ledger confirm`, the rearing log, temperatures and facilities of
//! `forecast`, and a sweep's `sweep.csv`
//! ([`crate::output::sweep_report::SweepRecord`]).
//!
//! A file is decoded and split into rows by the scenario loader's own table reader, so every
//! reader shares its rules: UTF-8 (an invalid byte names its line), physical line numbers that
//! are right on CRLF files and across quoted multi-line cells, the header checked against the
//! columns the row type reads, a quote left open reported instead of swallowing rows, a row
//! with the wrong number of fields named. Each row is then built by its type
//! ([`CsvRow::from_cells`]), which parses every cell with serde or a rule of its own; every
//! problem of every row is reported, with file, line, field, value and the fix.
//!
//! The row types are the output contract: the writer of a file serializes the same type that
//! its readers read back, and its column list is the one the writer writes (e.g.
//! [`crate::output::ManifestRecord`] and [`crate::output::MANIFEST_COLUMNS`]).
//!
//! Cost: O(bytes + rows · log lines).

use std::collections::BTreeMap;

use chrono::{NaiveDate, NaiveDateTime};
use serde::de::DeserializeOwned;

use crate::scenario::{CsvTable, Location, Problem, show_value};

/// A row type of a CSV file: the columns it reads and how it is built from them.
pub trait CsvRow: Sized {
    /// Columns the row reads, in the writer's order: the header must name each one not in
    /// [`CsvRow::OPTIONAL`]. Other columns are ignored.
    const COLUMNS: &'static [&'static str];
    /// Columns of [`CsvRow::COLUMNS`] a file may leave out (read as absent).
    const OPTIONAL: &'static [&'static str] = &[];
    /// A column whose values must differ from row to row, and the rule to quote when one
    /// repeats (e.g. `("shipment_id", "shipment ids are unique")`). Checked over every row,
    /// also those with other problems.
    const UNIQUE: Option<(&'static str, &'static str)> = None;

    /// Builds the row, or records in `cells` every problem it has and returns `None`. Read
    /// every cell before giving up, so that all of a row's problems are reported.
    fn from_cells(cells: &mut Cells<'_>) -> Option<Self>;
}

/// The cells of one row while its type reads them; problems are recorded against the row's
/// physical line.
pub struct Cells<'a> {
    table: &'a CsvTable<'a>,
    record: &'a csv::StringRecord,
    line: u64,
    problems: &'a mut Vec<Problem>,
}

impl Cells<'_> {
    /// The 1-based physical line where the row starts (the header is line 1).
    pub fn line(&self) -> u64 {
        self.line
    }

    /// The trimmed cell of `col` ("" when the column is absent).
    pub fn text(&self, col: &str) -> &str {
        self.table.cell(self.record, col)
    }

    /// Records a problem about `col`, quoting its value; `fix` says the rule and how to fix it.
    pub fn problem(&mut self, col: &str, fix: impl Into<String>) {
        let value = self.text(col).to_string();
        self.problems.push(problem(
            self.table.file,
            self.line,
            Some(col),
            Some(&value),
            fix,
        ));
    }

    /// The cell of `col`, which must not be empty (`fix` otherwise).
    pub fn required(&mut self, col: &str, fix: &str) -> Option<String> {
        let v = self.text(col);
        if v.is_empty() {
            self.problem(col, fix);
            None
        } else {
            Some(v.to_string())
        }
    }

    /// The cell of `col` parsed by `parse`; its error message becomes the problem's fix.
    pub fn parse_with<T>(
        &mut self,
        col: &str,
        parse: impl FnOnce(&str) -> Result<T, String>,
    ) -> Option<T> {
        match parse(self.text(col)) {
            Ok(v) => Some(v),
            Err(fix) => {
                self.problem(col, fix);
                None
            }
        }
    }

    /// The cell of `col` deserialized by serde as `T` (numbers, `true`/`false`, enums by their
    /// serialized name; an empty cell is `None` for an `Option`); `fix` when it is not one.
    pub fn parse<T: DeserializeOwned>(&mut self, col: &str, fix: &str) -> Option<T> {
        self.parse_with(col, |s| deserialize(s).ok_or_else(|| fix.to_string()))
    }

    /// Like [`Cells::parse_with`] for a column of [`CsvRow::OPTIONAL`]: `Some(None)` when the
    /// file has no such column.
    pub fn parse_optional_with<T>(
        &mut self,
        col: &str,
        parse: impl FnOnce(&str) -> Result<T, String>,
    ) -> Option<Option<T>> {
        if self.table.has(col) {
            self.parse_with(col, parse).map(Some)
        } else {
            Some(None)
        }
    }
}

/// `text` deserialized as `T` the way the `csv` crate deserializes one field.
fn deserialize<T: DeserializeOwned>(text: &str) -> Option<T> {
    csv::StringRecord::from(vec![text])
        .deserialize::<T>(None)
        .ok()
}

/// The rows read from a file, each with its physical line, and every problem found.
#[derive(Debug)]
pub struct Rows<R> {
    /// Rows without a problem, in file order, with their 1-based physical line.
    pub rows: Vec<(u64, R)>,
    /// Every problem, in file order (not truncated: the caller's error type keeps the first
    /// ones).
    pub problems: Vec<Problem>,
}

/// Reads `bytes`, the content of `file` (the name problems give), as rows of `R`.
///
/// ```
/// use broodcast::csvread::{read, CsvRow, Cells};
/// struct Stock { id: String, vials: u32 }
/// impl CsvRow for Stock {
///     const COLUMNS: &'static [&'static str] = &["id", "vials"];
///     fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
///         let id = c.required("id", "every row needs an id");
///         let vials = c.parse("vials", "vials are a whole number ≥ 0");
///         Some(Stock { id: id?, vials: vials? })
///     }
/// }
/// let got = read::<Stock>("stock.csv", b"id,vials\r\nF1,3\r\nF2,-1\r\n");
/// assert_eq!(got.rows.len(), 1);
/// assert_eq!(
///     got.problems[0].to_string(),
///     "stock.csv:3: field 'vials': value '-1': vials are a whole number ≥ 0"
/// );
/// ```
pub fn read<R: CsvRow>(file: &str, bytes: &[u8]) -> Rows<R> {
    let required: Vec<&str> = R::COLUMNS
        .iter()
        .copied()
        .filter(|c| !R::OPTIONAL.contains(c))
        .collect();
    let (table, mut problems) = crate::scenario::read_csv(file, bytes, &required);
    let Some(table) = table else {
        return Rows {
            rows: Vec::new(),
            problems,
        };
    };
    let mut rows = Vec::with_capacity(table.rows.len());
    let mut found = Vec::new();
    let mut seen: BTreeMap<&str, u64> = BTreeMap::new();
    for (line, record) in &table.rows {
        let before = found.len();
        if let Some((col, rule)) = R::UNIQUE {
            let key = table.cell(record, col);
            if !key.is_empty()
                && let Some(first) = seen.insert(key, *line)
            {
                found.push(problem(
                    file,
                    *line,
                    Some(col),
                    Some(key),
                    format!("already on line {first}; {rule}"),
                ));
                seen.insert(key, first);
            }
        }
        let mut cells = Cells {
            table: &table,
            record,
            line: *line,
            problems: &mut found,
        };
        if let Some(r) = R::from_cells(&mut cells)
            && found.len() == before
        {
            rows.push((*line, r));
        }
    }
    // The table's own problems (a bad row, a quote left open) and the cells' in line order.
    problems.extend(found);
    problems.sort_by_key(|p| match p.location {
        Location::Line(n) => n,
        _ => 0,
    });
    Rows { rows, problems }
}

/// A problem at a 1-based line of `file` (0: the whole file). The value is shown with invisible
/// characters escaped (`\u{feff}`), as the loader shows it.
pub fn problem(
    file: &str,
    line: u64,
    field: Option<&str>,
    value: Option<&str>,
    fix: impl Into<String>,
) -> Problem {
    Problem {
        file: file.to_string(),
        location: if line == 0 {
            Location::File
        } else {
            Location::Line(line)
        },
        field: field.map(str::to_string),
        value: value.map(show_value),
        message: fix.into(),
    }
}

/// Problems as an error message lists them: `N problems:`, then one indented line each, then
/// how many more were found past those listed.
pub fn problem_list(problems: &[Problem], omitted: usize) -> String {
    let n = problems.len() + omitted;
    let mut s = format!("{n} problem{}:", if n == 1 { "" } else { "s" });
    for p in problems {
        s.push_str(&format!("\n  {p}"));
    }
    if omitted > 0 {
        s.push_str(&format!("\n  … and {omitted} more"));
    }
    s
}

/// An ISO date, `YYYY-MM-DD`.
pub fn iso_date(s: &str) -> Option<NaiveDate> {
    NaiveDate::parse_from_str(s.trim(), "%Y-%m-%d").ok()
}

/// An ISO local date-time with minutes or seconds, `T` or a space between date and time.
pub fn local_datetime(s: &str) -> Option<NaiveDateTime> {
    let s = s.trim();
    [
        "%Y-%m-%dT%H:%M",
        "%Y-%m-%dT%H:%M:%S",
        "%Y-%m-%d %H:%M",
        "%Y-%m-%d %H:%M:%S",
    ]
    .iter()
    .find_map(|f| NaiveDateTime::parse_from_str(s, f).ok())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A row of every kind of cell the readers parse.
    #[derive(Debug, PartialEq)]
    struct Row {
        id: String,
        n: u32,
        x: Option<f64>,
        note: String,
    }

    impl CsvRow for Row {
        const COLUMNS: &'static [&'static str] = &["id", "n", "x", "note"];
        const OPTIONAL: &'static [&'static str] = &["x"];
        const UNIQUE: Option<(&'static str, &'static str)> = Some(("id", "ids are unique"));
        fn from_cells(c: &mut Cells<'_>) -> Option<Self> {
            let id = c.required("id", "every row needs an id");
            let n = c.parse("n", "n is a whole number ≥ 0");
            let x = c.parse_optional_with("x", |s| match s {
                "" => Ok(None),
                s => s
                    .parse()
                    .map(Some)
                    .map_err(|_| "x is a number or empty".to_string()),
            });
            Some(Row {
                id: id?,
                n: n?,
                x: x?.flatten(),
                note: c.text("note").to_string(),
            })
        }
    }

    fn shown(r: &Rows<Row>) -> Vec<String> {
        r.problems.iter().map(ToString::to_string).collect()
    }

    #[test]
    fn crlf_lines_are_physical() {
        let r = read::<Row>("t.csv", b"id,n,x,note\r\na,1,,\r\nb,2,0.5,\r\nc,z,,\r\n");
        let lines: Vec<u64> = r.rows.iter().map(|(l, _)| *l).collect();
        assert_eq!(lines, vec![2, 3]);
        assert_eq!(
            shown(&r),
            vec!["t.csv:4: field 'n': value 'z': n is a whole number ≥ 0"]
        );
    }

    #[test]
    fn a_quoted_multiline_cell_keeps_the_lines_after_it_right() {
        let r = read::<Row>(
            "t.csv",
            b"id,n,x,note\r\na,1,,\"first\r\nsecond\"\r\nb,x,,\r\n",
        );
        assert_eq!(r.rows.len(), 1);
        assert_eq!(r.rows[0].1.note, "first\r\nsecond");
        assert_eq!(r.rows[0].0, 2);
        assert_eq!(
            shown(&r),
            vec!["t.csv:4: field 'n': value 'x': n is a whole number ≥ 0"]
        );
    }

    #[test]
    fn a_missing_column_names_the_column_and_the_header() {
        let r = read::<Row>("t.csv", b"id,x,note\na,1,\n");
        assert!(r.rows.is_empty());
        assert_eq!(r.problems.len(), 1, "{:?}", shown(&r));
        let p = &shown(&r)[0];
        assert!(
            p.starts_with("t.csv:1: field 'n': required column is missing"),
            "{p}"
        );
        assert!(
            p.contains("id,n,note"),
            "the optional column is not required: {p}"
        );
        // The optional column may be left out.
        let r = read::<Row>("t.csv", b"id,n,note\na,1,\n");
        assert_eq!(r.rows[0].1.x, None);
        assert!(r.problems.is_empty());
    }

    #[test]
    fn every_bad_cell_of_every_row_is_reported_in_line_order() {
        let r = read::<Row>("t.csv", b"id,n,x,note\n,-1,nope,\nb,1,,\nc,1.5,,\n");
        assert_eq!(r.rows.len(), 1);
        assert_eq!(
            shown(&r),
            vec![
                "t.csv:2: field 'id': value '': every row needs an id",
                "t.csv:2: field 'n': value '-1': n is a whole number ≥ 0",
                "t.csv:2: field 'x': value 'nope': x is a number or empty",
                "t.csv:4: field 'n': value '1.5': n is a whole number ≥ 0",
            ]
        );
    }

    #[test]
    fn a_repeated_id_names_the_first_line_even_when_that_row_is_bad() {
        let r = read::<Row>("t.csv", b"id,n,x,note\na,z,,\nb,1,,\na,2,,\na,3,,\n");
        assert_eq!(r.rows.len(), 1);
        assert_eq!(
            shown(&r),
            vec![
                "t.csv:2: field 'n': value 'z': n is a whole number ≥ 0",
                "t.csv:4: field 'id': value 'a': already on line 2; ids are unique",
                "t.csv:5: field 'id': value 'a': already on line 2; ids are unique",
            ]
        );
    }

    #[test]
    fn invalid_utf8_names_its_line() {
        let r = read::<Row>("t.csv", b"id,n,x,note\na,1,,\nb,2,,caf\xe9\n");
        assert!(r.rows.is_empty());
        let p = shown(&r);
        assert_eq!(p.len(), 1);
        assert!(p[0].starts_with("t.csv:3: "), "{p:?}");
        assert!(p[0].contains("UTF-8"), "{p:?}");
    }

    #[test]
    fn a_wrong_field_count_and_an_open_quote_are_named() {
        let r = read::<Row>(
            "t.csv",
            b"id,n,x,note\na,1,,\nb,2\nc,3,,\"open\nd,4,,x\ne,5,,y\" z\n",
        );
        let p = shown(&r);
        assert_eq!(r.rows.len(), 1, "{p:?}");
        assert!(p[0].starts_with("t.csv:3: the row has 2 fields"), "{p:?}");
        assert!(p[1].starts_with("t.csv:4: field 'note'"), "{p:?}");
        assert!(p[1].contains("line 5"), "{p:?}");
    }

    #[test]
    fn an_invisible_character_is_shown_escaped() {
        let r = read::<Row>("t.csv", "id,n,x,note\na,\u{feff}1,,\n".as_bytes());
        assert!(
            shown(&r)[0].contains("value '\\u{feff}1'"),
            "{:?}",
            shown(&r)
        );
    }
}
