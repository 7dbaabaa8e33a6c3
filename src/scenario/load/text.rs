//! Shared plumbing: the problem collector, text decoding and a CSV table with line numbers.

use std::collections::BTreeMap;

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
    let Some(pos) = pos else { return 0 };
    let bytes = text.as_bytes();
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
    text.bytes()
        .enumerate()
        .filter(|&(_, c)| c == b'\n')
        .map(|(i, _)| i)
        .collect()
}

/// A CSV file read whole: trimmed header names and records with their 1-based physical line.
pub(super) struct Table<'f> {
    pub(super) file: &'f str,
    columns: BTreeMap<String, usize>,
    pub(super) rows: Vec<(u64, StringRecord)>,
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
    let mut rows = Vec::new();
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
    Some(Table {
        file,
        columns,
        rows,
    })
}

impl Table<'_> {
    /// The trimmed cell of `col` in `rec` ("" when the column is absent).
    pub(super) fn cell<'r>(&self, rec: &'r StringRecord, col: &str) -> &'r str {
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

/// A non-empty id cell.
pub(super) fn parse_id(s: &str) -> Result<String, String> {
    if s.is_empty() {
        Err("an id is required; give every row a short unique id".into())
    } else {
        Ok(s.to_string())
    }
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
