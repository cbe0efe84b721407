//! The per-unit gain condition (docs/theory.md §1): every unit's jump map
//! must not expand the error, which caps its in-degree for given gains.

use crate::problem::{LinkSet, Problem};
use serde::Serialize;

/// One gain condition.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GainCheck {
    /// What is checked.
    pub condition: String,
    /// The value checked.
    pub value: f64,
    /// The limit the value is checked against.
    pub limit: f64,
    /// The condition holds.
    pub ok: bool,
    /// The unit concerned, for a per-unit condition.
    pub node: Option<String>,
}

/// For every unit, the largest `|ψ|²/(1 + |ψ|²)` over its own jumps in the
/// horizon (0 for a unit that never jumps): the share of the jump gain its
/// jump map applies along ψ.
pub fn jump_shares(problem: &Problem) -> Vec<f64> {
    let (h0, h1) = (problem.domain.h0, problem.domain.h1);
    problem
        .nodes
        .iter()
        .map(|v| {
            v.log
                .jumps()
                .filter(|e| e.time >= h0 && e.time <= h1)
                .map(|e| {
                    let sq: f64 = e.psi.iter().map(|x| x * x).sum();
                    sq / (1.0 + sq)
                })
                .fold(0.0, f64::max)
        })
        .collect()
}

/// Weighted in-degree of every unit under the links of `set`.
pub fn in_degrees(problem: &Problem, set: &LinkSet) -> Vec<f64> {
    let mut degree = vec![0.0f64; problem.n()];
    for a in problem.arcs(set) {
        degree[a.to.index()] += a.weight;
    }
    degree
}

/// The largest weighted in-degree each unit may have for its jump map to
/// stay non-expansive: `(1 − γ_d s_i / 2)/δ` (infinite when δ = 0), with
/// `s_i` from [`jump_shares`] (docs/theory.md §6, "Gains").
pub fn degree_caps(problem: &Problem) -> Vec<f64> {
    let g = problem.settings.gains;
    jump_shares(problem)
        .into_iter()
        .map(|s| {
            let room = 1.0 - g.jump_gain * s / 2.0;
            if g.jump_coupling > 0.0 {
                room / g.jump_coupling
            } else if room >= 0.0 {
                f64::INFINITY
            } else {
                f64::NEG_INFINITY
            }
        })
        .collect()
}

/// The gain conditions for the arcs of a link set: every unit's jump map
/// row is non-expansive when `δ·d_i + γ_d·s_i/2 ≤ 1` (d_i its weighted
/// in-degree, s_i from [`jump_shares`]; docs/theory.md §6). Lists every
/// unit that fails, or the unit closest to its limit when all pass.
///
/// # References
/// Horn & Johnson, "Matrix Analysis", 2nd ed., 2013, §5.6 (induced norms;
/// the block max norm of a block matrix is at most the largest block-row
/// sum of block norms).
pub fn gain_checks(problem: &Problem, set: &LinkSet) -> Vec<GainCheck> {
    let g = problem.settings.gains;
    let degree = in_degrees(problem, set);
    let shares = jump_shares(problem);
    let rows: Vec<GainCheck> = degree
        .iter()
        .zip(&shares)
        .zip(&problem.nodes)
        .map(|((&d, &s), v)| {
            let value = g.jump_coupling * d + g.jump_gain * s / 2.0;
            GainCheck {
                condition: "jump coupling × weighted in-degree + jump gain × share/2 ≤ 1 \
                            (the unit's jump map is non-expansive)"
                    .into(),
                value,
                limit: 1.0,
                ok: value <= 1.0,
                node: Some(v.id.clone()),
            }
        })
        .collect();
    let failing: Vec<GainCheck> = rows.iter().filter(|r| !r.ok).cloned().collect();
    if !failing.is_empty() {
        return failing;
    }
    rows.into_iter()
        .max_by(|a, b| a.value.total_cmp(&b.value).then(b.node.cmp(&a.node)))
        .into_iter()
        .collect()
}
