//! Our own linear-model representation: named columns and rows, always maximised.
//!
//! One [`LinearModel`] is what the allocation solves with clarabel (relaxation, with duals;
//! or HiGHS, see [`Solver`], when built with the `highs` feature),
//! what microlp solves when columns are integer (small reduced problems and tests), and what
//! [`super::mps`] writes. Keeping one representation guarantees that the exported model is
//! exactly the solved one.

use std::collections::BTreeMap;

use good_lp::solvers::clarabel::clarabel;
use good_lp::{
    DualValues, Expression, ProblemVariables, Solution, SolutionWithDual, SolverModel, Variable,
    variable,
};

/// Errors from building or solving a [`LinearModel`].
#[derive(Debug, thiserror::Error)]
pub enum ModelError {
    /// The solver proved the model infeasible.
    #[error("model `{model}` is infeasible")]
    Infeasible {
        /// Model name.
        model: String,
    },
    /// The solver proved the model unbounded.
    #[error("model `{model}` is unbounded")]
    Unbounded {
        /// Model name.
        model: String,
    },
    /// Any other solver failure (numerical trouble, iteration or time limit).
    #[error("solver {solver} failed on model `{model}`: {message}")]
    Solver {
        /// Solver name.
        solver: &'static str,
        /// Model name.
        model: String,
        /// The solver's message.
        message: String,
    },
}

/// Which solver solves the continuous relaxation ([`LinearModel::solve_relaxation_with`]).
///
/// Both return the same conventions: primal values by column, and row duals as the objective
/// gained per unit increase of the row's rhs (≥ 0 for a binding ≤ row of the maximisation).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Solver {
    /// Clarabel (pure Rust, interior point): the default, in every build.
    #[default]
    Clarabel,
    /// HiGHS (C++, dual simplex by default; its solution is a vertex). Only in builds with
    /// the `highs` cargo feature (`cargo build --release --features highs`).
    #[cfg(feature = "highs")]
    Highs,
}

impl Solver {
    /// The name used on the command line and in messages (`clarabel`, `highs`).
    pub fn name(self) -> &'static str {
        match self {
            Solver::Clarabel => "clarabel",
            #[cfg(feature = "highs")]
            Solver::Highs => "highs",
        }
    }
}

/// Row sense.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Sense {
    /// Σ terms ≤ rhs.
    Le,
    /// Σ terms ≥ rhs.
    Ge,
    /// Σ terms = rhs.
    Eq,
}

/// One column (variable).
#[derive(Clone, Debug, PartialEq)]
pub struct Column {
    /// Name, already sanitised for MPS (unique in the model).
    pub name: String,
    /// Lower bound (may be `-inf`).
    pub lower: f64,
    /// Upper bound (may be `inf`).
    pub upper: f64,
    /// Objective coefficient (the model is maximised).
    pub objective: f64,
    /// Whether the column must take an integer value (ignored by the relaxation).
    pub integer: bool,
}

/// One row (constraint).
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    /// Name, already sanitised for MPS (unique in the model).
    pub name: String,
    /// (column index, coefficient), column indices ascending, no duplicates.
    pub terms: Vec<(usize, f64)>,
    /// Sense.
    pub sense: Sense,
    /// Right-hand side.
    pub rhs: f64,
}

/// A solved model.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelSolution {
    /// Column values, by column index.
    pub values: Vec<f64>,
    /// Row duals (objective gained per unit increase of the row's rhs; ≥ 0 for a binding ≤ row
    /// of a maximisation), by row index. Empty when the solver gives none (microlp).
    pub duals: Vec<f64>,
    /// Objective value Σ objective × value.
    pub objective: f64,
}

/// A maximisation model with named columns and rows (STYLE.md point 10: one builder struct
/// holding the variables, the objective and the map from names to variables).
#[derive(Clone, Debug, Default)]
pub struct LinearModel {
    /// Model name (the MPS `NAME`).
    pub name: String,
    /// Columns in creation order.
    pub columns: Vec<Column>,
    /// Rows in creation order.
    pub rows: Vec<Row>,
    names: BTreeMap<String, usize>,
    row_names: BTreeMap<String, usize>,
}

/// Replaces every character MPS free format cannot carry in a name (space, tab, `$`, `*` and
/// anything outside printable ASCII) by `_`.
pub fn sanitize_name(raw: &str) -> String {
    let s: String = raw
        .chars()
        .map(|c| {
            if c.is_ascii_graphic() && c != '$' && c != '*' {
                c
            } else {
                '_'
            }
        })
        .collect();
    if s.is_empty() { "_".to_string() } else { s }
}

fn unique(map: &BTreeMap<String, usize>, base: String) -> String {
    if !map.contains_key(&base) {
        return base;
    }
    (2..)
        .map(|k| format!("{base}~{k}"))
        .find(|n| !map.contains_key(n))
        .expect("an unused suffix always exists")
}

impl LinearModel {
    /// An empty model.
    pub fn new(name: &str) -> Self {
        LinearModel {
            name: sanitize_name(name),
            ..Default::default()
        }
    }

    /// Adds a column and returns its index. The name is sanitised and made unique (`~2`, …).
    pub fn add_column(
        &mut self,
        name: &str,
        lower: f64,
        upper: f64,
        objective: f64,
        integer: bool,
    ) -> usize {
        let name = unique(&self.names, sanitize_name(name));
        let idx = self.columns.len();
        self.names.insert(name.clone(), idx);
        self.columns.push(Column {
            name,
            lower,
            upper,
            objective,
            integer,
        });
        idx
    }

    /// Adds a row and returns its index. Terms on the same column are summed; zero
    /// coefficients are dropped. Complexity O(t log t) for t terms.
    pub fn add_row(&mut self, name: &str, terms: &[(usize, f64)], sense: Sense, rhs: f64) -> usize {
        let mut t: Vec<(usize, f64)> = terms.to_vec();
        t.sort_by_key(|&(c, _)| c);
        let mut merged: Vec<(usize, f64)> = Vec::with_capacity(t.len());
        for (c, v) in t {
            match merged.last_mut() {
                Some(last) if last.0 == c => last.1 += v,
                _ => merged.push((c, v)),
            }
        }
        merged.retain(|&(_, v)| v != 0.0);
        let name = unique(&self.row_names, sanitize_name(name));
        let idx = self.rows.len();
        self.row_names.insert(name.clone(), idx);
        self.rows.push(Row {
            name,
            terms: merged,
            sense,
            rhs,
        });
        idx
    }

    /// Index of the column named `name` (sanitised name).
    pub fn column(&self, name: &str) -> Option<usize> {
        self.names.get(name).copied()
    }

    /// Index of the row named `name` (sanitised name).
    pub fn row(&self, name: &str) -> Option<usize> {
        self.row_names.get(name).copied()
    }

    /// Σ objective × value.
    pub fn objective_of(&self, values: &[f64]) -> f64 {
        self.columns
            .iter()
            .zip(values)
            .map(|(c, v)| c.objective * v)
            .sum()
    }

    /// Largest violation of any bound or row by `values` (0 when feasible).
    pub fn max_violation(&self, values: &[f64]) -> f64 {
        let mut worst: f64 = 0.0;
        for (c, &v) in self.columns.iter().zip(values) {
            worst = worst.max(c.lower - v).max(v - c.upper);
        }
        for r in &self.rows {
            let lhs: f64 = r.terms.iter().map(|&(c, a)| a * values[c]).sum();
            let viol = match r.sense {
                Sense::Le => lhs - r.rhs,
                Sense::Ge => r.rhs - lhs,
                Sense::Eq => (lhs - r.rhs).abs(),
            };
            worst = worst.max(viol);
        }
        worst
    }

    fn to_good_lp(
        &self,
        integer: bool,
        scale: f64,
    ) -> (ProblemVariables, Vec<Variable>, Expression) {
        let mut vars = ProblemVariables::new();
        let cols: Vec<Variable> = self
            .columns
            .iter()
            .map(|c| {
                let mut d = variable().name(c.name.clone());
                if c.lower.is_finite() {
                    d = d.min(c.lower);
                }
                if c.upper.is_finite() {
                    d = d.max(c.upper);
                }
                if integer && c.integer {
                    d = d.integer();
                }
                vars.add(d)
            })
            .collect();
        let mut objective = Expression::with_capacity(self.columns.len());
        for (c, &v) in self.columns.iter().zip(&cols) {
            if c.objective != 0.0 {
                objective.add_mul(c.objective / scale, v);
            }
        }
        (vars, cols, objective)
    }

    fn constraint(&self, r: &Row, cols: &[Variable]) -> good_lp::Constraint {
        let mut e = Expression::with_capacity(r.terms.len());
        for &(c, a) in &r.terms {
            e.add_mul(a, cols[c]);
        }
        match r.sense {
            Sense::Le => e.leq(r.rhs),
            Sense::Ge => e.geq(r.rhs),
            Sense::Eq => e.eq(r.rhs),
        }
    }

    /// Solves the continuous relaxation with clarabel (interior point) and returns primal
    /// values and row duals. Integer flags are ignored. Clarabel turns each finite bound into a
    /// row, so the cost grows with columns + rows; see `docs/performance-allocate.md`.
    pub fn solve_relaxation(&self) -> Result<ModelSolution, ModelError> {
        self.solve_relaxation_with(Solver::Clarabel)
    }

    /// Solves the continuous relaxation with `solver` and returns primal values and row duals
    /// in the conventions of [`ModelSolution`], whichever the solver. Integer flags are ignored.
    pub fn solve_relaxation_with(&self, solver: Solver) -> Result<ModelSolution, ModelError> {
        // The objective is divided by its largest coefficient before solving, and the duals
        // multiplied back: priorities a million times apart (pest pressure from extreme
        // scouting counts) otherwise end clarabel's interior point at a point far from the
        // optimum (measured on the demo with tap counts of 0 and 1e6: an "optimum" of 568.6
        // against a whole-vial plan worth 5.3e11). The optimum and the primal are unchanged.
        let scale = self.objective_scale();
        let (vars, cols, objective) = self.to_good_lp(false, scale);
        let unsolved = vars.maximise(objective);
        let (values, mut duals) = match solver {
            Solver::Clarabel => self.solve_dual(unsolved.using(clarabel), &cols, "clarabel")?,
            #[cfg(feature = "highs")]
            Solver::Highs => self.solve_dual(
                unsolved.using(good_lp::solvers::highs::highs),
                &cols,
                "highs",
            )?,
        };
        for d in &mut duals {
            *d *= scale;
        }
        let objective = self.objective_of(&values);
        Ok(ModelSolution {
            values,
            duals,
            objective,
        })
    }

    /// Solves the continuous relaxation with clarabel, as [`LinearModel::solve_relaxation`]
    /// does, but stops between interior-point iterations once `stop` is set: `Ok(None)` then.
    /// Only the column values come back (no duals). Until `stop` is set the steps are the
    /// ones good_lp's `solve` takes (the same values to the last bit), so a caller may start
    /// a solve it might not need beside other work and stop it when it proves unneeded.
    ///
    /// # Errors
    /// As [`LinearModel::solve_relaxation`].
    pub fn solve_relaxation_until(
        &self,
        stop: &std::sync::Arc<std::sync::atomic::AtomicBool>,
    ) -> Result<Option<Vec<f64>>, ModelError> {
        let stop = std::sync::Arc::clone(stop);
        self.solve_relaxation_unless(move || stop.load(std::sync::atomic::Ordering::Relaxed))
    }

    /// [`LinearModel::solve_relaxation_until`] with the question asked of a function: once
    /// before clarabel's setup (its ordering and first factorisation), then once an iteration.
    fn solve_relaxation_unless(
        &self,
        stop: impl Fn() -> bool + Send + Sync + 'static,
    ) -> Result<Option<Vec<f64>>, ModelError> {
        use clarabel::solver::{IPSolver, SolverStatus};
        let scale = self.objective_scale();
        let (vars, cols, objective) = self.to_good_lp(false, scale);
        let mut problem = vars.maximise(objective).using(clarabel);
        for r in &self.rows {
            problem.add_constraint(self.constraint(r, &cols));
        }
        if stop() {
            return Ok(None);
        }
        let mut solver = problem
            .try_into_solver()
            .map_err(|e| self.map_err("clarabel", e))?;
        solver.set_termination_callback(move |_| stop());
        solver.solve();
        let fail = |message: &str| ModelError::Solver {
            solver: "clarabel",
            model: self.name.clone(),
            message: message.to_string(),
        };
        // The statuses good_lp's `solve` accepts, and its errors for the others.
        match solver.solution.status {
            SolverStatus::Solved
            | SolverStatus::AlmostSolved
            | SolverStatus::AlmostDualInfeasible
            | SolverStatus::DualInfeasible => {}
            SolverStatus::CallbackTerminated => return Ok(None),
            SolverStatus::PrimalInfeasible | SolverStatus::AlmostPrimalInfeasible => {
                return Err(ModelError::Infeasible {
                    model: self.name.clone(),
                });
            }
            SolverStatus::MaxIterations => return Err(fail("Max iterations reached")),
            SolverStatus::MaxTime => return Err(fail("Time limit reached")),
            SolverStatus::NumericalError => return Err(fail("Numerical error")),
            SolverStatus::InsufficientProgress => return Err(fail("No progress")),
            SolverStatus::Unsolved => return Err(fail("Unsolved")),
        }
        // good_lp numbers the variables in the order they were added: the columns, in order.
        let x = &solver.solution.x;
        if x.len() != cols.len() {
            return Err(fail("values for a different number of columns"));
        }
        Ok(Some(x.clone()))
    }

    /// The objective's largest coefficient (1 when there is none or it is not a normal
    /// number): both relaxation solves divide the objective by it.
    fn objective_scale(&self) -> f64 {
        let scale = self
            .columns
            .iter()
            .map(|c| c.objective.abs())
            .fold(0.0, f64::max);
        if scale.is_normal() { scale } else { 1.0 }
    }

    /// Adds the rows to `problem`, solves it and reads the column values and row duals.
    fn solve_dual<P>(
        &self,
        mut problem: P,
        cols: &[Variable],
        solver: &'static str,
    ) -> Result<(Vec<f64>, Vec<f64>), ModelError>
    where
        P: SolverModel<Error = good_lp::ResolutionError>,
        for<'a> P::Solution: SolutionWithDual<'a>,
    {
        let refs: Vec<_> = self
            .rows
            .iter()
            .map(|r| problem.add_constraint(self.constraint(r, cols)))
            .collect();
        let mut sol = problem.solve().map_err(|e| self.map_err(solver, e))?;
        let values: Vec<f64> = cols.iter().map(|&v| sol.value(v)).collect();
        let dual = sol.compute_dual();
        let duals: Vec<f64> = refs.iter().map(|r| dual.dual(r.clone())).collect();
        Ok((values, duals))
    }

    /// Solves with microlp, honouring integer columns. Branch and bound stops at relative
    /// `mip_gap`, or after `node_limit` nodes with the best plan found: a work limit, so the
    /// same model gives the same answer on any machine and under any load. No duals. Use only
    /// on small models: microlp's simplex is dense-ish and slows past a few thousand columns.
    ///
    /// # Errors
    /// [`ModelError::Solver`] when microlp fails or the node limit is reached before any
    /// integer plan is found.
    pub fn solve_integer(
        &self,
        mip_gap: f64,
        node_limit: u64,
    ) -> Result<ModelSolution, ModelError> {
        let fail = |message: String| ModelError::Solver {
            solver: "microlp",
            model: self.name.clone(),
            message,
        };
        let mut p = ::microlp::Problem::new(::microlp::OptimizationDirection::Maximize);
        let mut vars = Vec::with_capacity(self.columns.len());
        for c in &self.columns {
            let v = if c.integer {
                // microlp's integer columns take i32 bounds.
                let lo = c.lower.max(f64::from(i32::MIN)).ceil() as i32;
                let hi = c.upper.min(f64::from(i32::MAX)).floor() as i32;
                p.add_integer_var(c.objective, (lo, hi))
            } else {
                p.add_var(c.objective, (c.lower, c.upper))
            };
            vars.push(v);
        }
        for r in &self.rows {
            let mut e = ::microlp::LinearExpr::empty();
            for &(c, a) in &r.terms {
                e.add(vars[c], a);
            }
            let op = match r.sense {
                Sense::Le => ::microlp::ComparisonOp::Le,
                Sense::Ge => ::microlp::ComparisonOp::Ge,
                Sense::Eq => ::microlp::ComparisonOp::Eq,
            };
            p.add_constraint(e, op, r.rhs);
        }
        let mut opts = ::microlp::SolveOptions::default();
        opts.mip_gap = mip_gap.max(0.0);
        opts.node_limit = Some(node_limit);
        let sol = p
            .solve_with(opts)
            .map_err(|e| match e {
                ::microlp::Error::Infeasible => ModelError::Infeasible {
                    model: self.name.clone(),
                },
                ::microlp::Error::Unbounded => ModelError::Unbounded {
                    model: self.name.clone(),
                },
                other => fail(other.to_string()),
            })?
            .into_solution()
            .map_err(|_| fail(format!("no integer plan within {node_limit} nodes")))?;
        let values: Vec<f64> = vars.iter().map(|&v| sol.var_value(v)).collect();
        let objective = self.objective_of(&values);
        Ok(ModelSolution {
            values,
            duals: Vec::new(),
            objective,
        })
    }

    fn map_err(&self, solver: &'static str, e: good_lp::ResolutionError) -> ModelError {
        match e {
            good_lp::ResolutionError::Infeasible => ModelError::Infeasible {
                model: self.name.clone(),
            },
            good_lp::ResolutionError::Unbounded => ModelError::Unbounded {
                model: self.name.clone(),
            },
            other => ModelError::Solver {
                solver,
                model: self.name.clone(),
                message: other.to_string(),
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// max 3x + 2y s.t. x + y ≤ 4, x + 3y ≤ 7, x ≤ 3: optimum x=3, y=1, value 11; the dual of
    /// the first row is 2 (worked by hand: x ≤ 3 and row 1 bind, row 2 is slack, y prices row 1).
    #[test]
    fn relaxation_values_and_duals_match_hand_solution() {
        let mut m = LinearModel::new("hand");
        let x = m.add_column("x", 0.0, 3.0, 3.0, false);
        let y = m.add_column("y", 0.0, f64::INFINITY, 2.0, false);
        let r1 = m.add_row("r1", &[(x, 1.0), (y, 1.0)], Sense::Le, 4.0);
        let r2 = m.add_row("r2", &[(x, 1.0), (y, 3.0)], Sense::Le, 7.0);
        let s = m.solve_relaxation().expect("feasible");
        assert!((s.objective - 11.0).abs() < 1e-6, "{}", s.objective);
        assert!((s.values[x] - 3.0).abs() < 1e-6);
        assert!((s.duals[r1] - 2.0).abs() < 1e-5, "{:?}", s.duals);
        assert!(s.duals[r2].abs() < 1e-5);
        let i = m.solve_integer(0.0, 100_000).expect("feasible");
        assert!((i.objective - 11.0).abs() < 1e-9);
    }

    #[test]
    fn ge_row_dual_is_non_positive_when_it_hurts() {
        let mut m = LinearModel::new("ge");
        let x = m.add_column("x", 0.0, 10.0, -1.0, false);
        let r = m.add_row("floor", &[(x, 1.0)], Sense::Ge, 2.0);
        let s = m.solve_relaxation().expect("feasible");
        assert!((s.values[x] - 2.0).abs() < 1e-6);
        assert!((s.duals[r] + 1.0).abs() < 1e-5, "{:?}", s.duals);
    }

    /// The stoppable solve: never stopped, the values of the plain solve bit for bit; stopped
    /// at its first iteration (the question's second asking) or before its setup, no answer.
    #[test]
    fn a_stoppable_solve_gives_the_plain_values_or_stops() {
        use std::sync::Arc;
        use std::sync::atomic::{AtomicUsize, Ordering};
        let mut m = LinearModel::new("stop");
        let x = m.add_column("x", 0.0, f64::INFINITY, 3.0, false);
        let y = m.add_column("y", 0.0, f64::INFINITY, 2.0, false);
        m.add_row("r1", &[(x, 1.0), (y, 1.0)], Sense::Le, 4.0);
        m.add_row("r2", &[(x, 1.0), (y, 3.0)], Sense::Le, 7.0);
        m.add_row("r3", &[(x, 1.0)], Sense::Le, 3.0);
        let plain = m.solve_relaxation().expect("solved").values;
        let never = m.solve_relaxation_unless(|| false).expect("solved");
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(never.as_deref().map(bits), Some(bits(&plain)));
        let asked = Arc::new(AtomicUsize::new(0));
        let counter = Arc::clone(&asked);
        let second = move || counter.fetch_add(1, Ordering::Relaxed) >= 1;
        assert_eq!(m.solve_relaxation_unless(second).expect("no error"), None);
        assert_eq!(
            asked.load(Ordering::Relaxed),
            2,
            "asked before setup and once after"
        );
        assert_eq!(m.solve_relaxation_unless(|| true).expect("no error"), None);
    }

    /// HiGHS must hand back the conventions clarabel does: same optimum, same primal where it
    /// is unique, and row duals of the same sign and size (≥ 0 for a binding ≤ row, ≤ 0 for a
    /// binding ≥ row that hurts, an equality row priced as d objective / d rhs).
    #[cfg(feature = "highs")]
    #[test]
    fn highs_values_and_duals_agree_with_clarabel() {
        // max 3x + 2y − z s.t. x + y ≤ 4 (dual 2), x + 3y ≤ 7 (slack), z ≥ 1 (dual −1),
        // x − w = 0 with w ≤ 3 (the equality carries x's bound: dual 1), x, y, z, w ≥ 0.
        // Unique optimum x = w = 3, y = 1, z = 1, value 10.
        let mut m = LinearModel::new("agree");
        let x = m.add_column("x", 0.0, f64::INFINITY, 3.0, false);
        let y = m.add_column("y", 0.0, f64::INFINITY, 2.0, false);
        let z = m.add_column("z", 0.0, 10.0, -1.0, false);
        let w = m.add_column("w", 0.0, 3.0, 0.0, false);
        m.add_row("r1", &[(x, 1.0), (y, 1.0)], Sense::Le, 4.0);
        m.add_row("r2", &[(x, 1.0), (y, 3.0)], Sense::Le, 7.0);
        m.add_row("floor", &[(z, 1.0)], Sense::Ge, 1.0);
        m.add_row("tie", &[(x, 1.0), (w, -1.0)], Sense::Eq, 0.0);
        let c = m.solve_relaxation_with(Solver::Clarabel).expect("feasible");
        let h = m.solve_relaxation_with(Solver::Highs).expect("feasible");
        assert!((c.objective - 10.0).abs() < 1e-6, "{}", c.objective);
        assert!((h.objective - 10.0).abs() < 1e-9, "{}", h.objective);
        for (a, b) in c.values.iter().zip(&h.values) {
            assert!((a - b).abs() < 1e-5, "{:?} vs {:?}", c.values, h.values);
        }
        for (want, (a, b)) in [2.0, 0.0, -1.0, 1.0]
            .iter()
            .zip(c.duals.iter().zip(&h.duals))
        {
            assert!((a - want).abs() < 1e-5, "clarabel {:?}", c.duals);
            assert!((b - want).abs() < 1e-9, "highs {:?}", h.duals);
        }
    }

    #[cfg(feature = "highs")]
    #[test]
    fn highs_infeasible_relaxation_is_an_error_not_a_panic() {
        let mut m = LinearModel::new("bad");
        let x = m.add_column("x", 0.0, 1.0, 1.0, false);
        m.add_row("r", &[(x, 1.0)], Sense::Ge, 5.0);
        assert!(matches!(
            m.solve_relaxation_with(Solver::Highs),
            Err(ModelError::Infeasible { .. })
        ));
    }

    #[test]
    fn names_are_sanitised_and_unique() {
        let mut m = LinearModel::new("n");
        let a = m.add_column("x a", 0.0, 1.0, 0.0, false);
        let b = m.add_column("x_a", 0.0, 1.0, 0.0, false);
        assert_eq!(m.columns[a].name, "x_a");
        assert_eq!(m.columns[b].name, "x_a~2");
        assert_eq!(m.column("x_a~2"), Some(b));
    }

    #[test]
    fn infeasible_model_is_an_error_not_a_panic() {
        let mut m = LinearModel::new("bad");
        let x = m.add_column("x", 0.0, 1.0, 1.0, false);
        m.add_row("r", &[(x, 1.0)], Sense::Ge, 5.0);
        assert!(matches!(
            m.solve_integer(0.0, 100_000),
            Err(ModelError::Infeasible { .. })
        ));
    }
}
