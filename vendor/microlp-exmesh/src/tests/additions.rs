//! Tests of the functions added for exmesh (see VENDORED.md), each against
//! a cold solve of the same LP or a closed form.

#[cfg(test)]
mod tests_additions {
    use crate::{
        ComparisonOp, Error, LinearExpr, OptimizationDirection, Problem, SolveOutcome, Variable,
    };

    /// Chvátal's first example, maximise 5x1 + 4x2 + 3x3 subject to
    /// 2x1 + 3x2 + x3 ≤ 5, 4x1 + x2 + 2x3 ≤ 11, 3x1 + 4x2 + 2x3 ≤ 8, x ≥ 0,
    /// with optimum 13 at (2, 0, 1) (V. Chvátal, "Linear Programming",
    /// 1983, ch. 2; quoted from memory), and `x1` bounded by `x1_max`.
    fn chvatal(x1_max: f64) -> Problem {
        let mut p = Problem::new(OptimizationDirection::Maximize);
        let x1 = p.add_var(5.0, (0.0, x1_max));
        let x2 = p.add_var(4.0, (0.0, f64::INFINITY));
        let x3 = p.add_var(3.0, (0.0, f64::INFINITY));
        p.add_constraint([(x1, 2.0), (x2, 3.0), (x3, 1.0)], ComparisonOp::Le, 5.0);
        p.add_constraint([(x1, 4.0), (x2, 1.0), (x3, 2.0)], ComparisonOp::Le, 11.0);
        p.add_constraint([(x1, 3.0), (x2, 4.0), (x3, 2.0)], ComparisonOp::Le, 8.0);
        p
    }

    /// The dual of Chvátal's example: minimise 5y1 + 11y2 + 8y3 subject to
    /// 2y1 + 4y2 + 3y3 ≥ 5, 3y1 + y2 + 4y3 ≥ 4, y1 + 2y2 + 2y3 ≥ 3, y ≥ 0.
    /// By strong duality its optimum is 13, at y = (1, 0, 1), and its row
    /// duals are the primal optimum (2, 0, 1) (closed form: the primal
    /// optimum above and complementary slackness).
    fn chvatal_dual() -> Problem {
        let mut p = Problem::new(OptimizationDirection::Minimize);
        let y1 = p.add_var(5.0, (0.0, f64::INFINITY));
        let y2 = p.add_var(11.0, (0.0, f64::INFINITY));
        let y3 = p.add_var(8.0, (0.0, f64::INFINITY));
        p.add_constraint([(y1, 2.0), (y2, 4.0), (y3, 3.0)], ComparisonOp::Ge, 5.0);
        p.add_constraint([(y1, 3.0), (y2, 1.0), (y3, 4.0)], ComparisonOp::Ge, 4.0);
        p.add_constraint([(y1, 1.0), (y2, 2.0), (y3, 2.0)], ComparisonOp::Ge, 3.0);
        p
    }

    fn solved(outcome: Result<SolveOutcome, Error>) -> crate::Solution {
        match outcome {
            Ok(SolveOutcome::Solution(sol)) => sol,
            other => panic!("not solved: {other:?}"),
        }
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() < 1e-9
    }

    /// The warm restart used for open nodes (`Problem::solve_warm`) reaches
    /// the optimum of the LP with a tightened bound. With x1 ≤ 1 the
    /// optimum is 12.5 at (1, 0, 2.5): worked by hand (the third row binds
    /// at x2 = 0; the vertex where the first and third rows meet, x2 = 0.5,
    /// x3 = 1.5, gives 11.5).
    #[test]
    fn warm_restart_after_tightening_a_bound() {
        let first = solved(chvatal(f64::INFINITY).solve());
        assert!(close(first.objective(), 13.0));
        let warm = first.warm_start().expect("an LP solution has a basis");
        // The same LP restarts at its optimum.
        let same = solved(chvatal(f64::INFINITY).solve_warm(&warm));
        assert!(close(same.objective(), 13.0));
        // With x1 ≤ 1 the old basis is dual feasible, primal infeasible.
        let tight = solved(chvatal(1.0).solve_warm(&warm));
        assert!(close(tight.objective(), 12.5));
        let values: Vec<f64> = tight.iter().map(|(_, v)| v).collect();
        for (v, want) in values.iter().zip([1.0, 0.0, 2.5]) {
            assert!(close(*v, want), "{values:?}");
        }
    }

    /// A basis that does not fit the problem (another number of rows)
    /// falls back to a cold solve instead of failing.
    #[test]
    fn unfitting_basis_falls_back_to_a_cold_solve() {
        let mut small = Problem::new(OptimizationDirection::Maximize);
        let x = small.add_var(1.0, (0.0, 4.0));
        small.add_constraint([(x, 1.0)], ComparisonOp::Le, 3.0);
        let warm = solved(small.solve()).warm_start().unwrap();
        let other = solved(chvatal(1.0).solve_warm(&warm));
        assert!(close(other.objective(), 12.5));
    }

    /// Rows added in one batch give the optimum of a cold solve of the
    /// enlarged LP and of adding the same rows one at a time.
    #[test]
    fn batch_of_rows_matches_cold_solve_and_row_by_row() {
        let rows = |_: &Problem| {
            let v: Vec<_> = (0..3).map(Variable).collect();
            vec![
                (LinearExpr::from([(v[0], 1.0)]), ComparisonOp::Le, 1.0),
                (LinearExpr::from([(v[2], 1.0)]), ComparisonOp::Le, 2.0),
                (
                    LinearExpr::from([(v[1], 1.0), (v[2], 1.0)]),
                    ComparisonOp::Ge,
                    0.5,
                ),
            ]
        };
        let base = chvatal(f64::INFINITY);
        let mut enlarged = chvatal(f64::INFINITY);
        for (expr, op, rhs) in rows(&base) {
            enlarged.add_constraint(expr, op, rhs);
        }
        let cold = solved(enlarged.solve());
        let batch = solved(solved(base.solve()).add_constraints(rows(&base)));
        let mut one_by_one = solved(base.solve());
        for (expr, op, rhs) in rows(&base) {
            one_by_one = solved(one_by_one.add_constraint(expr, op, rhs));
        }
        // Worked by hand: x1 = 1, x3 = 2 and the third original row give
        // x2 = 0.25, objective 5 + 1 + 6 = 12.
        assert!(close(cold.objective(), 12.0), "{}", cold.objective());
        assert!(close(batch.objective(), cold.objective()));
        assert!(close(one_by_one.objective(), cold.objective()));
        for ((_, a), (_, b)) in batch.iter().zip(cold.iter()) {
            assert!(close(a, b));
        }
    }

    /// Row duals of the dual LP are the primal optimum (strong duality and
    /// complementary slackness); reduced costs are the objective
    /// coefficients minus the columns priced by those duals:
    /// 5 − (2·2 + 3·0 + 1·1) = 0, 11 − (4·2 + 1·0 + 2·1) = 1,
    /// 8 − (3·2 + 4·0 + 2·1) = 0.
    #[test]
    fn row_duals_and_reduced_costs_of_the_dual_lp() {
        let p = chvatal_dual();
        let sol = solved(p.solve());
        assert!(close(sol.objective(), 13.0));
        let duals = sol.row_duals().expect("an LP solution has row duals");
        for (d, want) in duals.iter().zip([2.0, 0.0, 1.0]) {
            assert!((d - want).abs() < 1e-7, "{duals:?}");
        }
        for (i, want) in [0.0, 1.0, 0.0].into_iter().enumerate() {
            let rc = sol.reduced_cost_raw(Variable(i)).unwrap();
            assert!((rc - want).abs() < 1e-7, "variable {i}: {rc}");
        }
    }

    /// Several fixings in one pass give the optimum of a cold solve with
    /// those bounds: x1 = 1, x2 = 0 leaves max 3x3 with x3 ≤ 2.5 (third
    /// row), objective 12.5.
    #[test]
    fn fixing_several_variables_matches_cold_solve() {
        let p = chvatal(f64::INFINITY);
        let fixed = solved(solved(p.solve()).fix_vars(&[(Variable(0), 1.0), (Variable(1), 0.0)]));
        let mut bounded = Problem::new(OptimizationDirection::Maximize);
        let x1 = bounded.add_var(5.0, (1.0, 1.0));
        let x2 = bounded.add_var(4.0, (0.0, 0.0));
        let x3 = bounded.add_var(3.0, (0.0, f64::INFINITY));
        bounded.add_constraint([(x1, 2.0), (x2, 3.0), (x3, 1.0)], ComparisonOp::Le, 5.0);
        bounded.add_constraint([(x1, 4.0), (x2, 1.0), (x3, 2.0)], ComparisonOp::Le, 11.0);
        bounded.add_constraint([(x1, 3.0), (x2, 4.0), (x3, 2.0)], ComparisonOp::Le, 8.0);
        let cold = solved(bounded.solve());
        assert!(close(cold.objective(), 12.5));
        assert!(close(fixed.objective(), cold.objective()));
    }

    /// A basis grown by one variable and one row restarts the enlarged LP
    /// at the optimum of its cold solve.
    #[test]
    fn grown_basis_restarts_an_enlarged_lp() {
        let first = solved(chvatal(f64::INFINITY).solve());
        let warm = first.warm_start().unwrap().grown(3, 1, 1);
        let build = || {
            let mut p = chvatal(f64::INFINITY);
            let x4 = p.add_var(6.0, (0.0, f64::INFINITY));
            let (x1, x3) = (Variable(0), Variable(2));
            p.add_constraint([(x1, 1.0), (x3, 1.0), (x4, 2.0)], ComparisonOp::Le, 3.0);
            p
        };
        let cold = solved(build().solve());
        let restarted = solved(build().solve_warm(&warm));
        assert!(close(restarted.objective(), cold.objective()));
        assert!(cold.objective() > 13.0, "the new column must pay");
    }
}
