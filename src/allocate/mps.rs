//! Free-format MPS writer for a [`LinearModel`], exactly as solved.
//!
//! The model is a maximisation; the file says so with an `OBJSENSE` section (`MAX`), which
//! HiGHS, CPLEX, Gurobi, SCIP and GLPK's free-MPS reader accept. The objective row is `obj`
//! (renamed when a constraint already has that name). Numbers are written with Rust's
//! shortest round-trip formatting, so a reader gets the same f64 values. Integer columns are
//! bracketed by `MARKER INTORG/INTEND`. Complexity O(non-zeros).

use std::fmt::Write;

use super::model::{LinearModel, Sense};

fn num(v: f64) -> String {
    format!("{v}")
}

/// The model as free MPS text.
pub fn write_mps(model: &LinearModel) -> String {
    let mut obj = "obj".to_string();
    while model.row(&obj).is_some() {
        obj.push('_');
    }
    let mut out = String::new();
    let _ = writeln!(out, "NAME {}", model.name);
    out.push_str("OBJSENSE\n    MAX\n");
    out.push_str("ROWS\n");
    let _ = writeln!(out, " N {obj}");
    for r in &model.rows {
        let s = match r.sense {
            Sense::Le => "L",
            Sense::Ge => "G",
            Sense::Eq => "E",
        };
        let _ = writeln!(out, " {s} {}", r.name);
    }
    // Column-major entries: transpose the row lists once.
    let mut by_col: Vec<Vec<(usize, f64)>> = vec![Vec::new(); model.columns.len()];
    for (ri, r) in model.rows.iter().enumerate() {
        for &(c, a) in &r.terms {
            by_col[c].push((ri, a));
        }
    }
    out.push_str("COLUMNS\n");
    let mut in_int = false;
    let mut marker = 0usize;
    for (ci, c) in model.columns.iter().enumerate() {
        if c.integer != in_int {
            let kind = if c.integer { "INTORG" } else { "INTEND" };
            let _ = writeln!(out, "    M{marker} 'MARKER' '{kind}'");
            marker += 1;
            in_int = c.integer;
        }
        // Always write the objective entry so columns with no row still appear.
        let _ = writeln!(out, "    {} {obj} {}", c.name, num(c.objective));
        for &(ri, a) in &by_col[ci] {
            let _ = writeln!(out, "    {} {} {}", c.name, model.rows[ri].name, num(a));
        }
    }
    if in_int {
        let _ = writeln!(out, "    M{marker} 'MARKER' 'INTEND'");
    }
    out.push_str("RHS\n");
    for r in &model.rows {
        if r.rhs != 0.0 {
            let _ = writeln!(out, "    RHS {} {}", r.name, num(r.rhs));
        }
    }
    out.push_str("BOUNDS\n");
    for c in &model.columns {
        let (lo, up) = (c.lower, c.upper);
        if lo == up {
            let _ = writeln!(out, " FX BND {} {}", c.name, num(lo));
            continue;
        }
        if lo == f64::NEG_INFINITY {
            let _ = writeln!(out, " MI BND {}", c.name);
        } else if lo != 0.0 || c.integer {
            // Integer columns get explicit bounds: some readers default INTORG columns to
            // binary.
            let _ = writeln!(out, " LO BND {} {}", c.name, num(lo));
        }
        if up.is_finite() {
            let _ = writeln!(out, " UP BND {} {}", c.name, num(up));
        } else if c.integer {
            let _ = writeln!(out, " PL BND {}", c.name);
        }
    }
    out.push_str("ENDATA\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_sections_bounds_and_sense() {
        let mut m = LinearModel::new("t");
        let x = m.add_column("x", 0.0, 3.5, 2.0, false);
        let y = m.add_column("y", 1.0, f64::INFINITY, 1.0, true);
        m.add_row("cap", &[(x, 1.0), (y, 0.25)], Sense::Le, 4.0);
        m.add_row("floor", &[(y, 1.0)], Sense::Ge, 0.0);
        let s = write_mps(&m);
        assert!(s.starts_with("NAME t\nOBJSENSE\n    MAX\nROWS\n N obj\n L cap\n G floor\n"));
        assert!(s.contains("    x cap 1\n"));
        assert!(s.contains("    y cap 0.25\n"));
        assert!(s.contains("'MARKER' 'INTORG'"));
        assert!(s.contains(" UP BND x 3.5\n"));
        assert!(s.contains(" LO BND y 1\n PL BND y\n"));
        assert!(s.contains("    RHS cap 4\n"));
        assert!(!s.contains("RHS floor"));
        assert!(s.ends_with("ENDATA\n"));
    }
}
