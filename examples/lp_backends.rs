//! Solves the largest LP a planner run solved cold with the vendored
//! solver and with good_lp's pure-Rust backends (Clarabel, an interior
//! point method, and upstream microlp), for docs/tuning.md ("LP layer"):
//!
//! ```text
//! EXMESH_LP_DUMP=/tmp/lp.txt cargo run --release --features lp-compare \
//!     --example plan_family -- --one 500 0 60 0.03
//! cargo run --release --features lp-compare --example lp_backends -- /tmp/lp.txt
//! ```

use good_lp::{Expression, ProblemVariables, Solution, SolverModel, constraint, variable};
use std::time::Instant;

type Row = (Vec<(usize, f64)>, String, f64);

fn main() {
    let path = std::env::args().nth(1).expect("the dump file");
    let text = std::fs::read_to_string(&path).expect("readable dump");
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().expect("header").split_whitespace().collect();
    let (recorded, objective) = (head[3], head[4]);
    let mut columns: Vec<(f64, f64, f64)> = Vec::new();
    let mut rows: Vec<Row> = Vec::new();
    for line in lines {
        let f: Vec<&str> = line.split_whitespace().collect();
        let num = |s: &str| s.parse::<f64>().expect("number");
        match f[0] {
            "c" => columns.push((num(f[1]), num(f[2]), num(f[3]))),
            "r" => {
                let k: usize = f[3].parse().expect("count");
                let terms = (0..k)
                    .map(|i| (f[4 + 2 * i].parse().expect("index"), num(f[5 + 2 * i])))
                    .collect();
                rows.push((terms, f[1].to_string(), num(f[2])));
            }
            _ => {}
        }
    }
    let nnz: usize = rows.iter().map(|r| r.0.len()).sum();
    println!(
        "LP: {} columns, {} rows, {nnz} nonzeros; in the run: vendored cold solve {recorded} s, objective {objective}",
        columns.len(),
        rows.len()
    );

    // The vendored solver (the project's microlp with its additions).
    let t = Instant::now();
    let mut p = microlp::Problem::new(microlp::OptimizationDirection::Minimize);
    let vars: Vec<microlp::Variable> = columns
        .iter()
        .map(|&(c, lo, hi)| p.add_var(c, (lo, hi)))
        .collect();
    for (terms, sense, rhs) in &rows {
        let expr: microlp::LinearExpr = terms.iter().map(|&(j, a)| (vars[j], a)).collect();
        let op = match sense.as_str() {
            "ge" => microlp::ComparisonOp::Ge,
            "le" => microlp::ComparisonOp::Le,
            _ => microlp::ComparisonOp::Eq,
        };
        p.add_constraint(expr, op, *rhs);
    }
    let value = p.solve().map(|s| s.objective());
    println!(
        "vendored microlp-exmesh: {:.3} s, objective {:?}",
        t.elapsed().as_secs_f64(),
        value
    );

    for backend in ["clarabel", "microlp"] {
        let t = Instant::now();
        let mut problem = ProblemVariables::new();
        let xs: Vec<good_lp::Variable> = columns
            .iter()
            .map(|&(_, lo, hi)| {
                let v = variable().min(lo);
                problem.add(if hi.is_finite() { v.max(hi) } else { v })
            })
            .collect();
        let mut objective = Expression::with_capacity(columns.len());
        for (x, &(c, _, _)) in xs.iter().zip(&columns) {
            objective += c * *x;
        }
        let constraints: Vec<good_lp::Constraint> = rows
            .iter()
            .map(|(terms, sense, rhs)| {
                let mut e = Expression::with_capacity(terms.len());
                for &(j, a) in terms {
                    e += a * xs[j];
                }
                match sense.as_str() {
                    "ge" => constraint!(e >= *rhs),
                    "le" => constraint!(e <= *rhs),
                    _ => constraint!(e == *rhs),
                }
            })
            .collect();
        let result = match backend {
            "clarabel" => problem
                .minimise(objective.clone())
                .using(good_lp::clarabel)
                .with_all(constraints)
                .solve()
                .map(|s| objective.eval_with(&s)),
            _ => problem
                .minimise(objective.clone())
                .using(good_lp::microlp)
                .with_all(constraints)
                .solve()
                .map(|s| objective.eval_with(&s)),
        };
        println!(
            "good_lp + {backend}: {:.3} s, objective {:?}",
            t.elapsed().as_secs_f64(),
            result
        );
    }
}
