//! The cost–rate front (docs/theory.md §10): from the structural optimum,
//! links are added one at a time by estimated certified-rate gain per cost;
//! every set is certified and the non-dominated ones form the front.

use crate::certify::propagate::Schedule;
use crate::excitation::ExcitationTable;
use crate::plan::rate::{Clock, best_addition, meet_target_with, rate_of, with};
use crate::plan::{Options, PlanStatus, plan};
use crate::problem::{LinkId, LinkSet, Problem};
use crate::progress::Sink;
use rayon::prelude::*;
use serde::Serialize;
use std::time::Instant;

/// One point of the front.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrontPoint {
    /// Cost of the links (installed ones count 0).
    pub cost: f64,
    /// Certified rate (1/s); null when not certified on this horizon.
    pub rate: Option<f64>,
    /// Link ids.
    pub links: Vec<String>,
}

/// Two certified rates closer than this, relative to the larger, count as
/// equal on the front: a dearer point must be faster by more than this to
/// be listed (a link that leaves the slowest block alone changes its rate
/// only by round-off, about 1e-11 relative).
pub const RATE_TIE: f64 = 1e-6;

/// The non-dominated points, by increasing cost: the first is the
/// cheapest (on a cost tie the fastest, then the smaller link list); each
/// later point is faster than every cheaper one by more than [`RATE_TIE`]
/// relative. A point without a rate counts as rate 0.
pub fn non_dominated(mut points: Vec<FrontPoint>) -> Vec<FrontPoint> {
    points.sort_by(|a, b| {
        a.cost
            .total_cmp(&b.cost)
            .then(b.rate.unwrap_or(0.0).total_cmp(&a.rate.unwrap_or(0.0)))
            .then(a.links.cmp(&b.links))
    });
    let mut front: Vec<FrontPoint> = Vec::new();
    let mut best = f64::NEG_INFINITY;
    for p in points {
        let r = p.rate.unwrap_or(0.0);
        if front.is_empty() || r > best + RATE_TIE * best.abs().max(r.abs()) {
            best = best.max(r);
            front.push(p);
        }
    }
    front
}

/// The answer of a budget question.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Front {
    /// Network name.
    pub network: String,
    /// Status of the structural plan the front starts from.
    pub structural_status: PlanStatus,
    /// Cost of the structural plan (null when infeasible).
    pub structural_cost: Option<f64>,
    /// Proven lower bound of any plan meeting the condition.
    pub lower_bound: Option<f64>,
    /// Non-dominated plans by increasing cost (more cost, more rate).
    pub front: Vec<FrontPoint>,
    /// The budget asked about.
    pub max_cost: Option<f64>,
    /// With a budget: the point with the best certified rate within it
    /// (null when even the structural plan costs more).
    pub best_within_budget: Option<FrontPoint>,
    /// Sets certified along the way.
    pub certified_sets: usize,
    /// The time limit stopped the sweep.
    pub timed_out: bool,
}

fn set_of(problem: &Problem, ids: &[String]) -> Vec<LinkId> {
    ids.iter().filter_map(|id| problem.link_id(id)).collect()
}

/// Builds the cost–rate front with at most `steps` additions (each costing
/// at most what `max_cost` leaves).
///
/// # Complexity
/// One structural plan, then per step one screening of candidate links (in
/// parallel) and one certificate.
// Long function: The budget sweep: each step plans, certifies and prunes against the
// previous point of the front, sharing the deadline and progress.
pub fn front(
    problem: &Problem,
    table: &ExcitationTable,
    options: &Options,
    max_cost: Option<f64>,
    steps: usize,
) -> Front {
    let started = Instant::now();
    let deadline = options.time_limit.map(|d| started + d);
    let mut structural_problem = problem.clone();
    structural_problem.settings.target_rate = None;
    // The structural search gets half of the time limit, the sweep the rest.
    let base = plan(
        &structural_problem,
        table,
        &Options {
            time_limit: options.time_limit.map(|d| d / 2),
            ..options.clone()
        },
    );
    let mut out = Front {
        network: problem.settings.name.clone(),
        structural_status: base.status,
        structural_cost: base.cost,
        lower_bound: base.lower_bound,
        front: Vec::new(),
        max_cost,
        best_within_budget: None,
        certified_sets: 0,
        timed_out: false,
    };
    let Some(base_cost) = base.cost else {
        return out;
    };
    let ids: Vec<String> = base.links.iter().map(|c| c.id.clone()).collect();
    let mut set = LinkSet::new(set_of(problem, &ids));
    let schedule = Schedule::new(problem);
    // One memo for the whole sweep: the chain's sets and the rate stages'
    // certificates and raised-excitation plans are computed once each.
    let memo = crate::plan::rate::Memo::default();
    let clock = Clock::new(deadline);
    let mut cert = clock.step(|| memo.certify(problem, table, &schedule, &set, &options.progress));
    out.certified_sets += 1;
    let point = |set: &LinkSet, rate: Option<f64>| FrontPoint {
        cost: problem.cost(set),
        rate,
        links: set
            .ids()
            .iter()
            .map(|&l| problem.link(l).id.clone())
            .collect(),
    };
    let mut visited = vec![point(&set, cert.rate)];
    let mut rejected: Vec<LinkId> = Vec::new();
    let progress = &options.progress;
    let mut step = 0;
    while step < steps && max_cost.is_none_or(|b| base_cost <= b) {
        if clock.late() {
            out.timed_out = true;
            break;
        }
        let left = max_cost.map(|b| b - problem.cost(&set));
        let Some((l, trial, full)) = clock.step(|| {
            let l = best_addition(problem, &schedule, &set, &cert, &rejected, left)?;
            let trial = with(&set, l);
            let full = memo.certify(problem, table, &schedule, &trial, &options.progress);
            Some((l, trial, full))
        }) else {
            break;
        };
        out.certified_sets += 1;
        if rate_of(&full) > rate_of(&cert) {
            set = trial;
            cert = full;
            visited.push(point(&set, cert.rate));
            step += 1;
            progress.update(|| {
                format!(
                    "front: {step}/{steps} points, cost {}, rate {} 1/s",
                    crate::report::number::cost(
                        problem.cost(&set),
                        crate::report::number::Round::Nearest
                    ),
                    crate::report::number::sig(
                        rate_of(&cert),
                        4,
                        crate::report::number::Round::Down
                    )
                )
            });
        } else {
            rejected.push(l);
        }
    }
    progress.done();
    // Sweep: for each rate reached by the chain, the rate stage of `plan`
    // (additions, then pruning) from the structural plan, in parallel; its
    // pruned sets are often cheaper than the chain's.
    if !out.timed_out {
        let start = LinkSet::new(set_of(problem, &visited[0].links));
        let targets: Vec<f64> = visited.iter().skip(1).filter_map(|p| p.rate).collect();
        let swept: Vec<(FrontPoint, bool)> = targets
            .par_iter()
            .map(|&t| {
                let r = meet_target_with(
                    problem,
                    table,
                    &start,
                    t,
                    deadline,
                    &|_| true,
                    &Sink::silent(),
                    &memo,
                );
                (point(&r.set, r.certified), r.timed_out)
            })
            .collect();
        out.certified_sets += swept.len();
        out.timed_out |= swept.iter().any(|s| s.1);
        visited.extend(swept.into_iter().map(|s| s.0));
    }
    out.front = non_dominated(visited);
    if let Some(b) = max_cost {
        out.best_within_budget = out
            .front
            .iter()
            .filter(|p| p.cost <= b + 1e-9)
            .max_by(|x, y| {
                x.rate
                    .unwrap_or(0.0)
                    .total_cmp(&y.rate.unwrap_or(0.0))
                    .then(y.cost.total_cmp(&x.cost))
            })
            .cloned();
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(cost: f64, rate: Option<f64>, link: &str) -> FrontPoint {
        FrontPoint {
            cost,
            rate,
            links: vec![link.to_string()],
        }
    }

    #[test]
    fn rates_equal_to_round_off_are_one_point() {
        // The case seen on a demo: rates equal to 1e-11 relative at costs
        // 6920 and 7760; only the cheaper stays.
        let r = 0.026_123_456_789;
        let front = non_dominated(vec![
            point(7760.0, Some(r * (1.0 + 1e-11)), "b"),
            point(6920.0, Some(r), "a"),
            point(9000.0, Some(r * 1.01), "c"),
            point(8000.0, None, "d"),
        ]);
        let costs: Vec<f64> = front.iter().map(|p| p.cost).collect();
        assert_eq!(costs, vec![6920.0, 9000.0]);
        for w in front.windows(2) {
            let (a, b) = (w[0].rate.unwrap(), w[1].rate.unwrap());
            assert!(b > a * (1.0 + RATE_TIE));
        }
    }

    #[test]
    fn a_cost_tie_keeps_the_faster_point() {
        let front = non_dominated(vec![
            point(100.0, Some(0.01), "slow"),
            point(100.0, Some(0.02), "fast"),
        ]);
        assert_eq!(front.len(), 1);
        assert_eq!(front[0].links, ["fast"]);
    }
}
