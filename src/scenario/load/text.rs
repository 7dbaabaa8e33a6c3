//! Shared plumbing: the problem collector, text decoding and a CSV table with line numbers.

use std::collections::{BTreeMap, BTreeSet};

use csv::StringRecord;

use super::fields::show;
use super::limits::MAX_CSV_ROWS;
use crate::scenario::problems::Location;
use crate::scenario::{Problem, Warning};

/// Collects every problem and warning found, across all files.
#[derive(Default)]
pub(super) struct Sink {
    pub(super) problems: Vec<Problem>,
    pub(super) warnings: Vec<Warning>,
}

impl Sink {
    /// Records a problem; `value` is shortened and cleaned for display.
    pub(super) fn problem(
        &mut self,
        file: &str,
        location: Location,
        field: Option<&str>,
        value: Option<&str>,
        message: impl Into<String>,
    ) {
        self.problems.push(Problem {
            file: file.to_string(),
            location,
            field: field.map(str::to_string),
            value: value.map(show),
            message: message.into(),
        });
    }

    /// Records a warning.
    pub(super) fn warning(&mut self, file: &str, location: Location, message: impl Into<String>) {
        self.warnings.push(Warning {
            file: file.to_string(),
            location,
            message: message.into(),
        });
    }
}

/// Decodes a file as UTF-8 text without a byte-order mark. An invalid byte or an empty file is
/// a problem (the line of the first invalid byte is named).
pub(super) fn decode<'a>(file: &str, bytes: &'a [u8], sink: &mut Sink) -> Option<&'a str> {
    let (bom, bytes) = match bytes.strip_prefix(b"\xEF\xBB\xBF") {
        Some(rest) => (3, rest),
        None => (0, bytes),
    };
    let text = match std::str::from_utf8(bytes) {
        Ok(t) => t,
        Err(e) => {
            let good = &bytes[..e.valid_up_to()];
            let line = 1 + good.iter().filter(|&&b| b == b'\n').count() as u64;
            let hint = if file.ends_with(".csv") {
                " (from a spreadsheet: save as 'CSV UTF-8')"
            } else {
                ""
            };
            sink.problem(
                file,
                Location::Line(line),
                None,
                None,
                format!(
                    "byte {} of the file is not valid UTF-8; save the file as UTF-8 text{hint}",
                    bom + e.valid_up_to() + 1
                ),
            );
            return None;
        }
    };
    if text.trim().is_empty() {
        sink.problem(
            file,
            Location::File,
            None,
            None,
            "the file is empty; it needs at least its header (see docs/formats.md)",
        );
        return None;
    }
    Some(text)
}

/// Physical 1-based line of a CSV record. csv's own `Position::line` lags one line per CRLF
/// terminator (rust-csv issue #395, open as of csv 1.4), so the line is recounted from the
/// record's byte offset. That offset may point at the `\n` of the previous CRLF; terminator
/// bytes are skipped first. O(log lines) with `newlines` the sorted offsets of every `\n`.
pub(super) fn line_of(text: &str, newlines: &[usize], pos: Option<&csv::Position>) -> u64 {
    line_of_bytes(text.as_bytes(), newlines, pos)
}

fn line_of_bytes(bytes: &[u8], newlines: &[usize], pos: Option<&csv::Position>) -> u64 {
    let Some(pos) = pos else { return 0 };
    let mut b = usize::try_from(pos.byte())
        .unwrap_or(usize::MAX)
        .min(bytes.len());
    while b < bytes.len() && matches!(bytes[b], b'\r' | b'\n') {
        b += 1;
    }
    1 + newlines.partition_point(|&n| n < b) as u64
}

/// Byte offsets of every `\n` in `text`.
pub(super) fn newline_offsets(text: &str) -> Vec<usize> {
    memchr_newlines(text.as_bytes())
}

/// Physical line numbers of CSV records in one text, right on LF and CRLF files alike. csv's
/// own `Position::line` lags one line per CRLF terminator (rust-csv issue #395, open as of
/// csv 1.4); every reader of a CSV file (scenario files, manifests read back, confirmation
/// files) counts lines through this instead.
///
/// ```
/// use broodcast::scenario::CsvLines;
/// let text = "id,n\r\na,1\r\nb,2\r\n";
/// let lines = CsvLines::new(text);
/// let mut r = csv::Reader::from_reader(text.as_bytes());
/// let got: Vec<u64> = r.records().map(|x| lines.line(x.unwrap().position())).collect();
/// assert_eq!(got, vec![2, 3]);
/// ```
pub struct CsvLines<'t> {
    bytes: &'t [u8],
    newlines: Vec<usize>,
}

impl<'t> CsvLines<'t> {
    /// Indexes the line breaks of `text`. O(bytes).
    pub fn new(text: &'t str) -> Self {
        CsvLines::from_bytes(text.as_bytes())
    }

    /// Indexes the line breaks of `bytes` (text not yet checked to be UTF-8). O(bytes).
    pub fn from_bytes(bytes: &'t [u8]) -> Self {
        CsvLines {
            bytes,
            newlines: memchr_newlines(bytes),
        }
    }

    /// The 1-based physical line where the record or error at `pos` starts (0 when unknown).
    /// O(log lines).
    pub fn line(&self, pos: Option<&csv::Position>) -> u64 {
        line_of_bytes(self.bytes, &self.newlines, pos)
    }
}

fn memchr_newlines(bytes: &[u8]) -> Vec<usize> {
    bytes
        .iter()
        .enumerate()
        .filter(|&(_, &c)| c == b'\n')
        .map(|(i, _)| i)
        .collect()
}

/// A quoted cell that runs over several lines and holds what reads as a whole row of `width`
/// fields: almost always a quote left open, so that the rows after it were read as one cell.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SwallowedRow {
    /// 0-based index of the cell in its record.
    pub column: usize,
    /// Lines after the record's first line at which the swallowed row starts (≥ 1).
    pub offset: u64,
    /// Lines the cell runs over in all.
    pub lines: u64,
}

impl SwallowedRow {
    /// The problem text; it never quotes the cell (it may hold names, phones or e-mails).
    pub fn message(&self, start_line: u64) -> String {
        format!(
            "the quoted value runs over {} lines and line {} inside it reads as a whole row: a \
             quote (\") is probably not closed, so the rows after it were read as part of this \
             value. Close the quote, or remove it",
            self.lines,
            start_line + self.offset
        )
    }
}

/// Finds a cell of `rec` holding a line break followed by a line that reads as a whole row of
/// `width` fields (`width` ≥ 2): a line inside the cell with at least `width` fields, or the
/// cell's last line whose fields and the cells after it in the record make `width` (the quote
/// was closed in the middle of a later row, whose rest then filled this record). O(record
/// length).
pub fn swallowed_row(rec: &StringRecord, width: usize) -> Option<SwallowedRow> {
    if width < 2 {
        return None;
    }
    let mut before = 0u64;
    for (column, cell) in rec.iter().enumerate() {
        let breaks = cell.matches('\n').count() as u64;
        if breaks > 0 {
            let after = rec.len() - column - 1;
            for (k, part) in cell.split('\n').enumerate().skip(1) {
                let mut r = csv::ReaderBuilder::new()
                    .has_headers(false)
                    .flexible(true)
                    .from_reader(part.trim_end_matches('\r').as_bytes());
                let mut fields = r
                    .records()
                    .next()
                    .and_then(Result::ok)
                    .map_or(0, |x| x.len());
                if k as u64 == breaks {
                    fields += after;
                }
                if fields >= width {
                    return Some(SwallowedRow {
                        column,
                        offset: before + k as u64,
                        lines: breaks + 1,
                    });
                }
            }
        }
        before += breaks;
    }
    None
}

/// A CSV file read whole: trimmed header names and records with their 1-based physical line.
pub(crate) struct Table<'f> {
    pub(crate) file: &'f str,
    columns: BTreeMap<String, usize>,
    pub(crate) rows: Vec<(u64, StringRecord)>,
}

/// Decodes and reads a CSV file the way the loader reads its own (see [`decode`] and
/// [`read_table`]), for the readers of other CSV files (`crate::csvread`): the table (`None`
/// when the file or its header is unusable) and every problem found. A row with a problem is
/// left out of the table; a row with every cell empty is skipped without a word.
pub(crate) fn read_csv<'f>(
    file: &'f str,
    bytes: &[u8],
    required: &[&str],
) -> (Option<Table<'f>>, Vec<Problem>) {
    let mut sink = Sink::default();
    let table =
        decode(file, bytes, &mut sink).and_then(|text| read_table(file, text, required, &mut sink));
    (table, sink.problems)
}

/// Reads a CSV table and checks that `required` columns are present. Rows whose field count
/// differs from the header are reported and dropped. `None` when the header itself is unusable
/// or the file has more than [`MAX_CSV_ROWS`] rows (reading stops there).
pub(super) fn read_table<'f>(
    file: &'f str,
    text: &str,
    required: &[&str],
    sink: &mut Sink,
) -> Option<Table<'f>> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(text.as_bytes());
    let newlines = newline_offsets(text);
    let mut records = reader.records();
    let header = match records.next() {
        Some(Ok(h)) => h,
        Some(Err(e)) => {
            let line = line_of(text, &newlines, e.position()).max(1);
            sink.problem(
                file,
                Location::Line(line),
                None,
                None,
                format!("unreadable header: {e}"),
            );
            return None;
        }
        None => {
            sink.problem(
                file,
                Location::File,
                None,
                None,
                "the file has no header row",
            );
            return None;
        }
    };
    let mut columns = BTreeMap::new();
    let mut ok = true;
    for (i, name) in header.iter().enumerate() {
        let name = name.trim();
        if name.is_empty() {
            continue;
        }
        if columns.insert(name.to_string(), i).is_some() {
            sink.problem(
                file,
                Location::Line(1),
                Some(name),
                None,
                "column appears twice in the header; keep one",
            );
            ok = false;
        }
    }
    for col in required {
        if !columns.contains_key(*col) {
            sink.problem(
                file,
                Location::Line(1),
                Some(col),
                None,
                format!(
                    "required column is missing; the header must include {}",
                    required.join(",")
                ),
            );
            ok = false;
        }
    }
    if !ok {
        return None;
    }
    let width = header.len();
    let names: Vec<String> = header.iter().map(|h| h.trim().to_string()).collect();
    let mut rows = Vec::new();
    let mut empty_rows: Vec<u64> = Vec::new();
    for (n, rec) in records.enumerate() {
        if n == MAX_CSV_ROWS {
            let line = rec
                .as_ref()
                .map_or(0, |r| line_of(text, &newlines, r.position()));
            sink.problem(
                file,
                Location::Line(line),
                None,
                None,
                format!(
                    "more than {MAX_CSV_ROWS} data rows, the limit per CSV file; check it is \
                     the right file, or split the scenario"
                ),
            );
            return None;
        }
        match rec {
            Ok(r) => {
                let line = line_of(text, &newlines, r.position());
                if r.len() == 1 && r.get(0).is_some_and(|c| c.trim().is_empty()) {
                    continue; // a blank line
                }
                if r.len() > 1 && r.iter().all(|c| c.trim().is_empty()) {
                    // `,,,`: a row a spreadsheet export left with every cell empty.
                    empty_rows.push(line);
                    continue;
                }
                if let Some(sw) = swallowed_row(&r, width) {
                    sink.problem(
                        file,
                        Location::Line(line),
                        names.get(sw.column).map(String::as_str),
                        None,
                        sw.message(line),
                    );
                    continue;
                }
                if let Some((i, c)) = r.iter().enumerate().find(|(_, c)| {
                    c.chars()
                        .any(|ch| ch.is_control() && !"\t\r\n".contains(ch))
                }) {
                    sink.problem(
                        file,
                        Location::Line(line),
                        names.get(i).map(String::as_str),
                        Some(c),
                        "the value holds a control character (shown escaped, e.g. \\u{0}), left \
                         by a binary file or a broken export; retype the value or re-export the \
                         file as CSV UTF-8",
                    );
                    continue;
                }
                if r.len() != width {
                    sink.problem(
                        file,
                        Location::Line(line),
                        None,
                        None,
                        format!(
                            "the row has {} fields but the header has {width}; check for a \
                             missing or extra comma, or quote values that contain commas",
                            r.len()
                        ),
                    );
                    continue;
                }
                rows.push((line, r));
            }
            Err(e) => {
                let line = line_of(text, &newlines, e.position());
                sink.problem(
                    file,
                    Location::Line(line),
                    None,
                    None,
                    format!("unreadable row: {e}"),
                );
            }
        }
    }
    if let Some(first) = empty_rows.first() {
        sink.warning(
            file,
            Location::Line(*first),
            format!(
                "{} row(s) with every cell empty (e.g. ',,' left by a spreadsheet export) \
                 skipped, the first on line {first}",
                empty_rows.len()
            ),
        );
    }
    Some(Table {
        file,
        columns,
        rows,
    })
}

impl Table<'_> {
    /// Whether the header names `col`.
    pub(crate) fn has(&self, col: &str) -> bool {
        self.columns.contains_key(col)
    }

    /// The trimmed cell of `col` in `rec` ("" when the column is absent).
    pub(crate) fn cell<'r>(&self, rec: &'r StringRecord, col: &str) -> &'r str {
        self.columns
            .get(col)
            .and_then(|&i| rec.get(i))
            .map_or("", str::trim)
    }

    /// Parses the cell of `col` with `parse`; a failure becomes a problem naming the line, the
    /// field and the value.
    pub(super) fn parse<T>(
        &self,
        line: u64,
        rec: &StringRecord,
        col: &str,
        sink: &mut Sink,
        parse: impl FnOnce(&str) -> Result<T, String>,
    ) -> Option<T> {
        let raw = self.cell(rec, col);
        match parse(raw) {
            Ok(v) => Some(v),
            Err(msg) => {
                sink.problem(self.file, Location::Line(line), Some(col), Some(raw), msg);
                None
            }
        }
    }

    /// Records a problem about `col` on `line`, echoing the value.
    pub(super) fn problem(
        &self,
        line: u64,
        rec: &StringRecord,
        col: &str,
        sink: &mut Sink,
        msg: impl Into<String>,
    ) {
        let raw = self.cell(rec, col);
        sink.problem(self.file, Location::Line(line), Some(col), Some(raw), msg);
    }
}

/// A non-empty id cell without invisible characters (a byte-order mark or zero-width space
/// pasted into an id makes it differ from the same id written elsewhere).
pub(super) fn parse_id(s: &str) -> Result<String, String> {
    if s.is_empty() {
        Err("an id is required; give every row a short unique id".into())
    } else if s.chars().any(super::fields::invisible) {
        Err(
            "the id holds an invisible character (shown escaped, e.g. \\u{feff}); retype the \
             id"
            .into(),
        )
    } else {
        Ok(s.to_string())
    }
}

/// Key paths (`policy.require_flush`, `features[3].properties.id`) written twice in one JSON
/// object, in file order. serde_json keeps the last of two equal keys silently; a scenario
/// must not depend on which copy a reader keeps. `text` must already parse as JSON. O(n).
pub(super) fn duplicate_keys(text: &str) -> Vec<String> {
    use serde::de::{DeserializeSeed, Deserializer, MapAccess, SeqAccess, Visitor};
    use std::cell::RefCell;

    struct Walk<'a> {
        path: String,
        found: &'a RefCell<Vec<String>>,
    }
    impl<'de> DeserializeSeed<'de> for Walk<'_> {
        type Value = ();
        fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
            d.deserialize_any(self)
        }
    }
    impl<'de> Visitor<'de> for Walk<'_> {
        type Value = ();
        fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            f.write_str("any JSON value")
        }
        fn visit_bool<E>(self, _: bool) -> Result<(), E> {
            Ok(())
        }
        fn visit_i64<E>(self, _: i64) -> Result<(), E> {
            Ok(())
        }
        fn visit_u64<E>(self, _: u64) -> Result<(), E> {
            Ok(())
        }
        fn visit_f64<E>(self, _: f64) -> Result<(), E> {
            Ok(())
        }
        fn visit_str<E>(self, _: &str) -> Result<(), E> {
            Ok(())
        }
        fn visit_unit<E>(self) -> Result<(), E> {
            Ok(())
        }
        fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
            let mut i = 0usize;
            while seq
                .next_element_seed(Walk {
                    path: format!("{}[{i}]", self.path),
                    found: self.found,
                })?
                .is_some()
            {
                i += 1;
            }
            Ok(())
        }
        fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
            let mut seen = BTreeSet::new();
            while let Some(key) = map.next_key::<String>()? {
                let path = if self.path.is_empty() {
                    key.clone()
                } else {
                    format!("{}.{key}", self.path)
                };
                if !seen.insert(key) {
                    self.found.borrow_mut().push(path.clone());
                }
                map.next_value_seed(Walk {
                    path,
                    found: self.found,
                })?;
            }
            Ok(())
        }
    }
    let found = RefCell::new(Vec::new());
    let mut de = serde_json::Deserializer::from_str(text);
    let _ = Walk {
        path: String::new(),
        found: &found,
    }
    .deserialize(&mut de);
    found.into_inner()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_numbers_are_physical_with_crlf_and_quoted_newlines() {
        let mut sink = Sink::default();
        let text = "id,note\r\na,\"two\nlines\"\r\nb,x\r\n";
        let t = read_table("t.csv", text, &["id"], &mut sink).unwrap();
        let lines: Vec<u64> = t.rows.iter().map(|(l, _)| *l).collect();
        assert_eq!(lines, vec![2, 4]);
        assert!(sink.problems.is_empty());
    }

    #[test]
    fn a_row_swallowed_by_an_open_quote_is_found_and_a_multiline_address_is_not() {
        let read = |t: &str| {
            let mut r = csv::ReaderBuilder::new()
                .has_headers(false)
                .flexible(true)
                .from_reader(t.as_bytes());
            r.records().map(Result::unwrap).collect::<Vec<_>>()
        };
        // The quote opened on line 2 closes inside line 4's name: line 3 vanished.
        let rows = read("id,addr,name,phone\nR1,\"1 Row,A,1\nR2,2 Row,B,2\nR3,3 Row,C\" x,3\n");
        assert_eq!(rows.len(), 2);
        assert_eq!(
            swallowed_row(&rows[1], 4),
            Some(SwallowedRow {
                column: 1,
                offset: 1,
                lines: 3
            })
        );
        // The same shape with the quote closed on the next line: that line is half a row.
        let rows = read("id,addr,name,phone\nR1,\"1 Row,A,1\nR2,2 Row\",B,2\n");
        assert_eq!(swallowed_row(&rows[1], 4).map(|s| s.offset), Some(1));
        let rows = read("id,addr,name,phone\nR1,\"1 Row\nFlat 2\",A,1\n");
        assert_eq!(swallowed_row(&rows[1], 4), None);
    }

    #[test]
    fn empty_rows_are_skipped_with_one_warning() {
        let mut sink = Sink::default();
        let t = read_table("t.csv", "id,n\na,1\n,\n ,\n", &["id"], &mut sink).unwrap();
        assert_eq!(t.rows.len(), 1);
        assert!(sink.problems.is_empty());
        assert_eq!(sink.warnings.len(), 1);
        assert_eq!(sink.warnings[0].location, Location::Line(3));
    }

    #[test]
    fn duplicate_json_keys_are_found_at_any_depth() {
        let t = r#"{"a": 1, "b": {"c": [{"d": 1, "d": 2}], "e": 0}, "a": 3}"#;
        assert_eq!(duplicate_keys(t), vec!["b.c[0].d", "a"]);
        assert!(duplicate_keys(r#"{"a": {"a": 1}}"#).is_empty());
    }

    #[test]
    fn invalid_utf8_names_the_line() {
        let mut sink = Sink::default();
        assert!(decode("x.csv", b"a,b\n1,2\n\xff\n", &mut sink).is_none());
        assert_eq!(sink.problems[0].location, Location::Line(3));
    }

    #[test]
    fn bom_is_stripped_and_blank_is_empty() {
        let mut sink = Sink::default();
        assert_eq!(
            decode("x.csv", b"\xEF\xBB\xBFid\n", &mut sink),
            Some("id\n")
        );
        assert!(decode("x.csv", b"\xEF\xBB\xBF \r\n", &mut sink).is_none());
        assert!(sink.problems[0].message.contains("empty"));
    }
}
