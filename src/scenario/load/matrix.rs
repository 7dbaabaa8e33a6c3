//! The optional travel-time matrix: a square CSV of drive minutes.
//!
//! ```text
//! id,F1,B1,R1
//! F1,0,12.5,20
//! B1,13,0,9
//! R1,21,9.5,0
//! ```
//! The first header cell is a free label; the other header cells are location ids, and row `i`
//! starts with the `i`-th of them. Complexity: O(n²) cells, O(n log n) for the id check.

use std::collections::BTreeMap;

use super::fields::parse_f64;
use super::limits::MAX_MATRIX_IDS;
use super::text::{Sink, decode, line_of, newline_offsets};
use crate::scenario::TravelMatrix;
use crate::scenario::problems::Location;

/// Whether a text looks like a location id (letters, digits, `-_./`, at most 32 characters,
/// fewer than 7 digits), and so may be quoted in a message. A matrix pointed at the wrong file
/// may hold names, phones or e-mails, which must never be printed.
pub(super) fn id_like(s: &str) -> bool {
    !s.is_empty()
        && s.chars().count() <= 32
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_./".contains(c))
        && s.chars().filter(char::is_ascii_digit).count() < 7
}

/// A cell as it may be quoted: a number-like text of at most 24 characters, else nothing.
fn number_like(s: &str) -> Option<&str> {
    (s.len() <= 24
        && s.chars()
            .all(|c| c.is_ascii_digit() || ".+-eE, ".contains(c) || "NaNinfINF".contains(c)))
    .then_some(s)
}

/// Header names that only a file of people has; a matrix header holds location ids.
const PERSONAL_COLUMNS: [&str; 6] = ["name", "phone", "email", "e-mail", "address", "contact"];

/// Parses a matrix from bytes; every problem goes to `sink`. `None` if anything is wrong.
/// Problems quote a cell only when it looks like a number or an id ([`id_like`]): the file may
/// be the wrong one and hold personal data.
pub(super) fn parse(file: &str, bytes: &[u8], sink: &mut Sink) -> Option<TravelMatrix> {
    let before = sink.problems.len();
    let text = decode(file, bytes, sink)?;
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(text.as_bytes());
    let newlines = newline_offsets(text);
    let mut records = reader.records();
    let header = match records.next() {
        Some(Ok(h)) => h,
        Some(Err(e)) => {
            sink.problem(
                file,
                Location::Line(1),
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
                "the matrix has no header row",
            );
            return None;
        }
    };
    let ids: Vec<String> = header
        .iter()
        .skip(1)
        .map(|s| s.trim().to_string())
        .collect();
    if ids.is_empty() {
        sink.problem(
            file,
            Location::Line(1),
            None,
            None,
            "the header lists no location ids; write a corner label, then one id per column",
        );
        return None;
    }
    if ids.len() > MAX_MATRIX_IDS {
        sink.problem(
            file,
            Location::Line(1),
            None,
            None,
            format!(
                "the header lists {} location ids, more than the limit of {MAX_MATRIX_IDS} (the \
                 matrix would hold {} cells); give drive minutes only between the facilities \
                 and the sites you plan, or leave travel.matrix out to use geodesic distances",
                ids.len(),
                ids.len() * ids.len()
            ),
        );
        return None;
    }
    if let Some(col) = ids
        .iter()
        .find(|id| PERSONAL_COLUMNS.contains(&id.to_ascii_lowercase().as_str()))
    {
        sink.problem(
            file,
            Location::Line(1),
            Some(col),
            None,
            "this is not a travel matrix: its header has a column of personal data; check that \
             travel.matrix in scenario.json names the matrix file (first header cell a label, \
             then one location id per column)",
        );
        return None;
    }
    let odd = ids.iter().filter(|id| !id_like(id)).count();
    if 2 * odd > ids.len() {
        sink.problem(
            file,
            Location::Line(1),
            None,
            None,
            format!(
                "this does not look like a travel matrix: {odd} of {} header cells are not \
                 location ids (values not shown); check that travel.matrix in scenario.json \
                 names the matrix file (first header cell a label, then one id per column)",
                ids.len()
            ),
        );
        return None;
    }
    // How a column is named in problems: its id when it looks like one, else its number.
    let col_name = |j: usize| match ids.get(j) {
        Some(id) if id_like(id) => id.clone(),
        _ => format!("column {}", j + 2),
    };
    let mut seen = BTreeMap::new();
    for (j, id) in ids.iter().enumerate() {
        if id.is_empty() {
            sink.problem(
                file,
                Location::Line(1),
                Some(&format!("column {}", j + 2)),
                None,
                "an empty location id; every column needs the id of a facility or site",
            );
        } else if let Some(first) = seen.insert(id.clone(), j) {
            sink.problem(
                file,
                Location::Line(1),
                Some(&format!("column {}", j + 2)),
                id_like(id).then_some(id.as_str()),
                format!("the id is also column {}; each id appears once", first + 2),
            );
        }
    }
    let n = ids.len();
    let mut minutes: Vec<Vec<f64>> = Vec::with_capacity(n);
    let mut last_line = 1;
    let mut empty_rows = 0usize;
    for rec in records {
        let rec = match rec {
            Ok(r) => r,
            Err(e) => {
                let line = line_of(text, &newlines, e.position());
                sink.problem(
                    file,
                    Location::Line(line),
                    None,
                    None,
                    format!("unreadable row: {e}"),
                );
                continue;
            }
        };
        let line = line_of(text, &newlines, rec.position());
        last_line = line;
        if rec.iter().all(|c| c.trim().is_empty()) {
            if rec.len() > 1 {
                empty_rows += 1;
            }
            continue;
        }
        if minutes.is_empty() {
            // The first data row decides whether this is a matrix at all: a wrong file
            // would otherwise give one problem per cell, each quoting it.
            let words = rec
                .iter()
                .skip(1)
                .filter(|c| parse_f64(c.trim()).is_err())
                .count();
            if rec.len() >= 2 && 2 * words > rec.len() - 1 {
                sink.problem(
                    file,
                    Location::Line(line),
                    None,
                    None,
                    format!(
                        "this does not look like a travel matrix: {words} of {} cells of the \
                         first row are not numbers (values not shown); check that travel.matrix \
                         in scenario.json names the matrix file",
                        rec.len() - 1
                    ),
                );
                return None;
            }
        }
        let i = minutes.len();
        if i >= n {
            sink.problem(
                file,
                Location::Line(line),
                None,
                None,
                format!("more rows than the {n} ids in the header; the matrix must be square"),
            );
            // One report is enough, and stopping bounds the work on a runaway file.
            break;
        }
        let row_id = rec.get(0).map_or("", str::trim);
        if row_id != ids[i] {
            sink.problem(
                file,
                Location::Line(line),
                Some("column 1"),
                Some(if ids.iter().any(|i| i == row_id) || id_like(row_id) {
                    row_id
                } else {
                    "(not shown)"
                }),
                format!(
                    "row {} must start with '{}', the id of header column {}; rows follow the \
                     header order",
                    i + 1,
                    col_name(i),
                    i + 2
                ),
            );
        }
        if rec.len() != n + 1 {
            sink.problem(
                file,
                Location::Line(line),
                None,
                None,
                format!(
                    "the row has {} values, expected {n} (one per header id)",
                    rec.len() - 1
                ),
            );
            minutes.push(Vec::new());
            continue;
        }
        let mut row = Vec::with_capacity(n);
        for (j, cell) in rec.iter().skip(1).enumerate() {
            let cell = cell.trim();
            let col = col_name(j);
            let col = col.as_str();
            match parse_f64(cell) {
                Ok(v) if v < 0.0 => sink.problem(
                    file,
                    Location::Line(line),
                    Some(col),
                    number_like(cell),
                    "drive minutes are 0 or more",
                ),
                Ok(v) if i == j && v != 0.0 => sink.problem(
                    file,
                    Location::Line(line),
                    Some(col),
                    number_like(cell),
                    "a location is 0 minutes from itself; the diagonal must be 0",
                ),
                Ok(v) => row.push(v),
                Err(msg) => {
                    let shown = number_like(cell).or(id_like(cell).then_some(cell));
                    sink.problem(file, Location::Line(line), Some(col), shown, msg);
                }
            }
        }
        minutes.push(row);
    }
    if minutes.len() < n {
        sink.problem(
            file,
            Location::Line(last_line),
            None,
            None,
            format!(
                "{} rows for {n} header ids; the matrix must be square (add the missing rows)",
                minutes.len()
            ),
        );
    }
    if empty_rows > 0 {
        sink.warning(
            file,
            Location::Line(last_line),
            format!(
                "{empty_rows} row(s) with every cell empty (e.g. ',,' left by a spreadsheet \
                 export) skipped"
            ),
        );
    }
    if sink.problems.len() > before {
        return None;
    }
    Some(TravelMatrix { ids, minutes })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn square_matrix_parses() {
        let mut sink = Sink::default();
        let m = parse("m.csv", b"id,A,B\nA,0,5\nB,6.5,0\n", &mut sink).unwrap();
        assert_eq!(m.ids, vec!["A", "B"]);
        assert_eq!(m.minutes, vec![vec![0.0, 5.0], vec![6.5, 0.0]]);
    }

    #[test]
    fn each_matrix_defect_is_reported() {
        let cases: [(&[u8], &str); 7] = [
            (b"id,A,B\nA,0,5\n", "square"),
            (b"id,A,A\nA,0,5\nA,5,0\n", "appears once"),
            (b"id,A,B\nB,0,5\nA,5,0\n", "must start with"),
            (b"id,A,B\nA,0,-5\nB,5,0\n", "0 or more"),
            (b"id,A,B\nA,1,5\nB,5,0\n", "diagonal"),
            (b"id,A,B\nA,0,x\nB,5,0\n", "number"),
            (b"id,A,B\nA,0\nB,5,0\n", "expected 2"),
        ];
        for (text, want) in cases {
            let mut sink = Sink::default();
            assert!(parse("m.csv", text, &mut sink).is_none());
            assert!(
                sink.problems.iter().any(|p| p.to_string().contains(want)),
                "{want}: {:?}",
                sink.problems
            );
        }
    }

    #[test]
    fn extra_rows_are_reported_once_and_reading_stops() {
        let mut text = String::from("id,A\nA,0\n");
        text.push_str(&"A,0\n".repeat(10_000));
        let mut sink = Sink::default();
        assert!(parse("m.csv", text.as_bytes(), &mut sink).is_none());
        assert_eq!(sink.problems.len(), 1, "{:?}", &sink.problems[..2]);
        assert!(sink.problems[0].to_string().starts_with("m.csv:3:"));
    }

    #[test]
    fn too_many_ids_fail_at_the_header() {
        let ids: Vec<String> = (0..=MAX_MATRIX_IDS).map(|i| format!("L{i}")).collect();
        let text = format!("id,{}\n", ids.join(","));
        let mut sink = Sink::default();
        assert!(parse("m.csv", text.as_bytes(), &mut sink).is_none());
        assert_eq!(sink.problems.len(), 1);
        assert!(sink.problems[0].message.contains("limit of 5000"));
    }
}
