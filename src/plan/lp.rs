//! The LP solver behind the planner's bounds, and the only file that names
//! it: microlp 0.6.0 with the additions listed in
//! `vendor/microlp-exmesh/VENDORED.md` (warm restarts from a saved basis,
//! rows and fixings in batches, row duals, reduced costs).
//!
//! Everything else sees an [`Lp`] to fill with columns and rows, a
//! [`Solved`] LP to read and edit, a [`Basis`] to restart from, and an
//! [`Outcome`] that keeps apart the two failures the callers treat
//! differently: no solution (infeasible, or stopped by the time limit
//! before one was found) and solver trouble (a numerical failure, after
//! which nothing is known about the LP).

use microlp::{
    ComparisonOp, LinearExpr, OptimizationDirection, Problem, Solution, SolveOutcome,
    TerminationReason, Variable, WarmStart,
};
use std::time::{Duration, Instant};

/// A column (variable) of an LP.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Col(Variable);

/// The sense of a row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Sense {
    /// `Σ a_j x_j ≥ rhs`
    Ge,
    /// `Σ a_j x_j ≤ rhs`
    Le,
    /// `Σ a_j x_j = rhs`
    Eq,
}

impl Sense {
    fn op(self) -> ComparisonOp {
        match self {
            Sense::Ge => ComparisonOp::Ge,
            Sense::Le => ComparisonOp::Le,
            Sense::Eq => ComparisonOp::Eq,
        }
    }
}

/// A row to add to a solved LP: terms, sense, right-hand side.
pub(crate) type NewRow = (Vec<(Col, f64)>, Sense, f64);

/// A minimisation LP being built.
pub(crate) struct Lp(
    Problem,
    /// The model as written, for `EXMESH_LP_DUMP` (feature `lp-compare`).
    #[cfg(feature = "lp-compare")]
    dump::Model,
);

/// The result of a solve or of an edit of a solved LP.
pub(crate) enum Outcome {
    /// A solution (optimal unless the time limit stopped the solve; see
    /// [`Solved::proven_optimal`]).
    Solved(Solved),
    /// Infeasible, or stopped before a solution was found.
    NoSolution,
    /// A numerical failure of the solver.
    Trouble,
}

impl Outcome {
    fn of(result: Result<SolveOutcome, microlp::Error>) -> Self {
        match result {
            Ok(SolveOutcome::Solution(sol)) => Outcome::Solved(Solved(sol)),
            Ok(_) | Err(microlp::Error::Infeasible) => Outcome::NoSolution,
            Err(_) => Outcome::Trouble,
        }
    }

    /// The solution, if any.
    pub fn solved(self) -> Option<Solved> {
        match self {
            Outcome::Solved(s) => Some(s),
            _ => None,
        }
    }
}

impl Lp {
    /// An empty minimisation.
    pub fn minimise() -> Self {
        Lp(
            Problem::new(OptimizationDirection::Minimize),
            #[cfg(feature = "lp-compare")]
            dump::Model::default(),
        )
    }

    /// Adds a column with objective coefficient `cost` and bounds `lo..=hi`
    /// (`hi` may be infinite).
    pub fn column(&mut self, cost: f64, lo: f64, hi: f64) -> Col {
        #[cfg(feature = "lp-compare")]
        self.1.columns.push((cost, lo, hi));
        Col(self.0.add_var(cost, (lo, hi)))
    }

    /// Adds a row.
    pub fn row(&mut self, terms: &[(Col, f64)], sense: Sense, rhs: f64) {
        #[cfg(feature = "lp-compare")]
        self.1.rows.push((
            terms.iter().map(|&(c, a)| (c.0.idx(), a)).collect(),
            sense,
            rhs,
        ));
        let expr: LinearExpr = terms.iter().map(|&(c, a)| (c.0, a)).collect();
        self.0.add_constraint(expr, sense.op(), rhs);
    }

    /// Limits the wall-clock time of the next solve.
    pub fn set_time_limit(&mut self, limit: Duration) {
        self.0.set_time_limit(limit);
    }

    /// Solves from scratch, or from `basis` when it fits (a cold solve
    /// otherwise).
    pub fn solve(&self, basis: Option<&Basis>) -> Outcome {
        #[cfg(feature = "lp-compare")]
        let started = Instant::now();
        let out = Outcome::of(match basis {
            Some(b) => self.0.solve_warm(&b.0),
            None => self.0.solve(),
        });
        #[cfg(feature = "lp-compare")]
        if basis.is_none() {
            let objective = match &out {
                Outcome::Solved(s) => Some(s.objective()),
                _ => None,
            };
            self.1.keep_if_largest(started.elapsed(), objective);
        }
        out
    }
}

/// A solved LP, which can be read and edited (each edit re-optimises by
/// the dual simplex).
#[derive(Clone)]
pub(crate) struct Solved(Solution);

impl Solved {
    /// The objective value.
    pub fn objective(&self) -> f64 {
        self.0.objective()
    }

    /// A column's value, unrounded.
    pub fn value(&self, col: Col) -> f64 {
        self.0.var_value_raw(col.0)
    }

    /// Whether the solve ended with a proof of optimality (not stopped by
    /// its time limit).
    pub fn proven_optimal(&self) -> bool {
        self.0.termination_reason() == TerminationReason::ProvenOptimal
    }

    /// The dual value of each row, in the order the rows were added.
    pub fn row_duals(&self) -> Option<Vec<f64>> {
        self.0.row_duals()
    }

    /// A column's reduced cost at the current basis (0 when unknown).
    pub fn reduced_cost(&self, col: Col) -> f64 {
        self.0.reduced_cost_raw(col.0).unwrap_or(0.0)
    }

    /// The current basis, to restart this LP (or the same LP grown or
    /// with tightened bounds) later.
    pub fn basis(&self) -> Option<Basis> {
        self.0.warm_start().map(Basis)
    }

    /// Adds rows in one batch (one refactorisation, one dual simplex pass).
    pub fn add_rows(self, rows: Vec<NewRow>) -> Outcome {
        let batch: Vec<(LinearExpr, ComparisonOp, f64)> = rows
            .into_iter()
            .map(|(terms, sense, rhs)| {
                let expr: LinearExpr = terms.into_iter().map(|(c, a)| (c.0, a)).collect();
                (expr, sense.op(), rhs)
            })
            .collect();
        Outcome::of(self.0.add_constraints(batch))
    }

    /// Fixes one column.
    pub fn fix(self, col: Col, value: f64) -> Outcome {
        Outcome::of(self.0.fix_var(col.0, value))
    }

    /// Fixes several columns together (one dual simplex pass).
    pub fn fix_all(self, fixes: &[(Col, f64)]) -> Outcome {
        let fixes: Vec<(Variable, f64)> = fixes.iter().map(|&(c, v)| (c.0, v)).collect();
        Outcome::of(self.0.fix_vars(&fixes))
    }
}

/// A solved LP's basis and pricing weights (about 10 kB at 150 units).
#[derive(Clone)]
pub(crate) struct Basis(WarmStart);

impl Basis {
    /// This basis fitted to the same LP grown by `new_cols` columns after
    /// its first `cols` and `new_rows` rows after its rows (new columns
    /// at their lower bounds, new rows' slacks basic).
    pub fn grown(&self, cols: usize, new_cols: usize, new_rows: usize) -> Basis {
        Basis(self.0.grown(cols, new_cols, new_rows))
    }
}

/// LP solves and the time they took, for a search's statistics.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct Clock {
    /// Solves and dual-simplex restarts after edits.
    pub solves: u64,
    pub time: Duration,
}

impl Clock {
    /// Runs `work`, counting `solves` solves and its time.
    pub fn run<T>(&mut self, solves: u64, work: impl FnOnce() -> T) -> T {
        let t = Instant::now();
        let out = work();
        self.time += t.elapsed();
        self.solves += solves;
        out
    }
}

/// The largest LP solved cold in a run, written for the backend
/// comparison (`cargo run --release --features lp-compare --example
/// lp_backends`) when `EXMESH_LP_DUMP` names a file.
#[cfg(feature = "lp-compare")]
pub mod dump {
    use super::Sense;
    use std::fmt::Write as _;
    use std::sync::Mutex;
    use std::time::Duration;

    /// Columns (cost, lower, upper) and rows (terms, sense, rhs).
    #[derive(Default, Clone)]
    pub struct Model {
        /// (cost, lower, upper) per column.
        pub columns: Vec<(f64, f64, f64)>,
        /// (terms, sense, rhs) per row.
        pub rows: Vec<(Vec<(usize, f64)>, Sense, f64)>,
    }

    static LARGEST: Mutex<usize> = Mutex::new(0);

    impl Model {
        /// Writes the model (with the vendored solver's time and
        /// objective) when it is the largest solved cold so far.
        pub(super) fn keep_if_largest(&self, took: Duration, objective: Option<f64>) {
            let Ok(path) = std::env::var("EXMESH_LP_DUMP") else {
                return;
            };
            let size: usize =
                self.columns.len() + self.rows.iter().map(|r| r.0.len()).sum::<usize>();
            let mut largest = LARGEST.lock().unwrap_or_else(|e| e.into_inner());
            if size <= *largest {
                return;
            }
            *largest = size;
            let mut text = String::new();
            let _ = writeln!(
                text,
                "lp {} {} {} {:?}",
                self.columns.len(),
                self.rows.len(),
                took.as_secs_f64(),
                objective.unwrap_or(f64::NAN)
            );
            for (c, lo, hi) in &self.columns {
                let _ = writeln!(text, "c {c:?} {lo:?} {hi:?}");
            }
            for (terms, sense, rhs) in &self.rows {
                let s = match sense {
                    Sense::Ge => "ge",
                    Sense::Le => "le",
                    Sense::Eq => "eq",
                };
                let _ = write!(text, "r {s} {rhs:?} {}", terms.len());
                for (j, a) in terms {
                    let _ = write!(text, " {j} {a:?}");
                }
                text.push('\n');
            }
            let _ = std::fs::write(&path, text);
        }
    }
}
