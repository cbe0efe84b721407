//! The planning engine: the cheapest link set such that every source
//! component of the chosen digraph is excited, with a proven lower bound.
//!
//! [`plan`] runs three stages: the structural stage (`structural.rs`:
//! feasibility of the all-candidates graph, greedy incumbent, branch and cut
//! on the covering model with rows separated lazily, final irreducibility;
//! docs/theory.md §4–5), the rate stage when the problem sets `target_rate`
//! (`rate.rs`, §7), and, when a failure must be survived, a plain plan for
//! the price of that requirement. The constants' measurements are in
//! docs/tuning.md.

mod bnc;
mod component_bound;
mod connected_sets;
mod cuts;
mod heuristics;
mod instance;
mod lns;
mod lp;
pub mod rate;
mod row;
mod structural;
mod types;

use crate::analysis;
use crate::excitation::ExcitationTable;
use crate::problem::{LinkSet, Problem};
use std::time::{Duration, Instant};
use structural::Structural;
pub use types::{
    ChosenLink, LinkRole, Options, Plan, PlanStats, PlanStatus, RatePlan, Robustness, Shortfall,
    Survive, Timings, chosen_links,
};

/// Plans of at most this many links get a reason per link (one check of
/// the plan without each link).
pub const EXPLAIN_LINKS: usize = 400;

/// Plans the cheapest link set for which every source component is excited.
///
/// # Complexity
/// Exponential in the worst case (the problem contains minimum-cost
/// arborescence and set-cover-like structure); the time limit bounds it and
/// the result then carries its proven gap.
///
/// # References
/// Edmonds, "Optimum branchings", J. Res. NBS 71B, 1967 (the one-root,
/// one-way special case); Chopra, "On the spanning tree polyhedron",
/// Oper. Res. Letters 8, 1989 (partition inequalities).
pub fn plan(problem: &Problem, table: &ExcitationTable, options: &Options) -> Plan {
    let started = Instant::now();
    // The work after the search (clean-up, the plan's check, gain checks,
    // why each link) cannot be interrupted: it gets a share of the limit up
    // front, about 1 ms per candidate link (measured at 500 units, 2,000
    // candidates: 1.8 s in all), at most a tenth of the limit.
    let deadline = options.time_limit.map(|d| started + d);
    let options = &Options {
        time_limit: options.time_limit.map(|d| {
            let tail = (0.2 + 0.001 * problem.links.len() as f64).min(0.1 * d.as_secs_f64());
            d.saturating_sub(Duration::from_secs_f64(tail))
        }),
        ..options.clone()
    };
    let robust = options.survive != Survive::Nothing;
    // With a survival requirement the robust plan gets ROBUST_SHARE of the
    // time limit and the plain plan it is compared with the rest.
    // With a target rate, the rate after failures gets RATE_AFTER_SHARE
    // of the limit, taken from the robust plan's share.
    let share = if problem.settings.target_rate.is_some() {
        ROBUST_SHARE - RATE_AFTER_SHARE
    } else {
        ROBUST_SHARE
    };
    let first = Options {
        time_limit: options
            .time_limit
            .map(|d| if robust { d.mul_f64(share) } else { d }),
        ..options.clone()
    };
    let mut result = plan_once(problem, table, &first);
    if robust {
        let reserve = if problem.settings.target_rate.is_some() {
            RATE_AFTER_SHARE
        } else {
            0.0
        };
        let left = options.time_limit.map(|d| {
            d.mul_f64(1.0 - reserve)
                .saturating_sub(started.elapsed())
                .max(std::time::Duration::from_millis(1))
        });
        let plain = plan_once(
            problem,
            table,
            &Options {
                survive: Survive::Nothing,
                progress: crate::progress::Sink::silent(),
                time_limit: left,
                ..options.clone()
            },
        );
        result.robustness = Some(Robustness {
            survive: options.survive,
            plain_cost: plain.cost,
            plain_status: plain.status,
            extra_cost: match (result.cost, plain.cost) {
                (Some(a), Some(b)) => Some(a - b),
                _ => None,
            },
            target_kept: None,
            worst_failure: None,
            worst_failure_rate: None,
            added_for_rate: Vec::new(),
        });
        // With a target: the certified rate after each single failure of
        // the kind survived, with links added where it falls short (when
        // the time limit leaves room).
        let deadline = options.time_limit.map(|d| started + d);
        let in_time = deadline.is_none_or(|d| Instant::now() < d);
        if let (Some(t), Some(_), true) = (problem.settings.target_rate, result.cost, in_time) {
            keep_rate_after_failures(problem, table, &mut result, t, options.survive, deadline);
        }
    }
    if result.cost.is_some() {
        let gains = crate::certify::gain_checks(problem, &result.link_set(problem));
        result.gains_ok = Some(gains.iter().all(|g| g.ok));
        result.gains = gains;
        // Why each link: skipped when the time limit has already passed.
        if deadline.is_none_or(|d| Instant::now() < d) {
            explain(problem, table, &mut result);
        }
    }
    result
}

/// Most rounds of additions for the rate after failures.
const RATE_REPAIR_ROUNDS: usize = 6;

/// The single failures of `kind` whose certified rate is below `target`,
/// worst first, with their rates.
/// `None` when the deadline left some failure uncertified.
fn failures_below(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    kind: crate::whatif::stress::FailureKind,
    deadline: Option<Instant>,
) -> Option<Vec<(String, Option<f64>)>> {
    let (s, late) = crate::whatif::stress::stress_until(
        problem,
        table,
        set,
        true,
        &crate::progress::Sink::silent(),
        deadline,
    );
    if late {
        return None;
    }
    let mut v: Vec<(String, Option<f64>)> = s
        .scenarios
        .iter()
        .filter(|sc| sc.kind == kind)
        .map(|sc| (sc.id.clone(), sc.rate))
        .collect();
    v.sort_by(|a, b| {
        a.1.unwrap_or(0.0)
            .total_cmp(&b.1.unwrap_or(0.0))
            .then(a.0.cmp(&b.0))
    });
    Some(v)
}

/// Certifies every single failure of the kind the plan survives; while
/// the worst one (a link failing) falls below `target`, runs the rate
/// stage on the plan without that link and adds what it adds (the
/// condition after any failure still holds: adding links keeps it; the
/// in-degree caps and port limits are checked). Records in `robustness`
/// whether the target is kept, the worst failure and its rate; when links
/// were added, the plan's links, cost, gap, status and rate certificate
/// are those of the larger set.
fn keep_rate_after_failures(
    problem: &Problem,
    table: &ExcitationTable,
    result: &mut Plan,
    target: f64,
    survive: Survive,
    deadline: Option<Instant>,
) {
    use crate::whatif::stress::FailureKind;
    let kind = match survive {
        Survive::Unit => FailureKind::Unit,
        _ => FailureKind::Link,
    };
    let mut set = result.link_set(problem);
    let mut added: Vec<crate::problem::LinkId> = Vec::new();
    let mut below = failures_below(problem, table, &set, kind, deadline);
    for _ in 0..RATE_REPAIR_ROUNDS {
        let Some((id, rate)) = below.as_ref().and_then(|b| b.first().cloned()) else {
            break;
        };
        if rate.is_some_and(|r| r >= target) || kind == FailureKind::Unit {
            break;
        }
        if deadline.is_some_and(|d| Instant::now() >= d) {
            break;
        }
        let Some(l) = problem.link_id(&id) else { break };
        let without = LinkSet::new(set.ids().iter().copied().filter(|&k| k != l).collect());
        let r = rate::meet_target(
            problem,
            table,
            &without,
            target,
            deadline,
            &|_| true,
            &crate::progress::Sink::silent(),
        );
        let extra: Vec<crate::problem::LinkId> = r
            .set
            .ids()
            .iter()
            .copied()
            .filter(|k| !set.ids().contains(k))
            .collect();
        if !r.met || extra.is_empty() {
            break;
        }
        let mut bigger: Vec<crate::problem::LinkId> = set.ids().to_vec();
        bigger.extend(&extra);
        let bigger = LinkSet::new(bigger);
        if !rate::within_caps(problem, &crate::certify::degree_caps(problem), &bigger) {
            break;
        }
        set = bigger;
        added.extend(extra);
        below = failures_below(problem, table, &set, kind, deadline);
    }
    // Unknown when the deadline left some failure uncertified.
    let worst = below.as_ref().map(|b| b.first().cloned());
    if !added.is_empty() {
        let cost = problem.cost(&set);
        let lower = result.lower_bound.unwrap_or(0.0);
        result.links = chosen_links(problem, &set);
        result.cost = Some(cost);
        result.gap = Some(if cost > 0.0 {
            ((cost - lower) / cost).max(0.0)
        } else {
            0.0
        });
        if result.status == PlanStatus::Optimal {
            result.status = PlanStatus::Feasible;
        }
        if let Some(rp) = result.rate.as_mut() {
            let cert = crate::certify::certify(problem, table, &set);
            rp.certified = cert.rate;
            rp.met = cert.rate.is_some_and(|x| x >= target);
            rp.certificate = cert;
            rp.added_links
                .extend(added.iter().map(|&k| problem.link(k).id.clone()));
            rp.set = set.clone();
        }
        let check = analysis::check(problem, table, &set);
        result.source_components = check.source_components;
    }
    if let Some(r) = result.robustness.as_mut() {
        if !added.is_empty() {
            r.extra_cost = r.plain_cost.zip(result.cost).map(|(p, c)| c - p);
        }
        if let Some(worst) = worst {
            r.target_kept = Some(
                worst
                    .as_ref()
                    .is_none_or(|w| w.1.is_some_and(|x| x >= target)),
            );
            r.worst_failure = worst.as_ref().map(|w| w.0.clone());
            r.worst_failure_rate = worst.and_then(|w| w.1);
        }
        r.added_for_rate = added.iter().map(|&k| problem.link(k).id.clone()).collect();
    }
}

/// Fills each chosen link's `role` and `reason` (see [`link_reasons`]).
fn explain(problem: &Problem, table: &ExcitationTable, plan: &mut Plan) {
    if plan.links.len() > EXPLAIN_LINKS {
        return;
    }
    let set = plan.link_set(problem);
    let why = Why {
        rate_added: plan
            .rate
            .as_ref()
            .map(|r| r.added_links.clone())
            .unwrap_or_default(),
        rate_stage: plan.rate.is_some(),
        survival: plan.robustness.is_some(),
    };
    let reasons = link_reasons(problem, table, &set, &why);
    for (c, (role, reason)) in plan.links.iter_mut().zip(reasons) {
        c.role = Some(role);
        c.reason = Some(reason);
    }
}

/// What a plan knows about why it has its links beyond the condition.
#[derive(Debug, Clone, Default)]
pub struct Why {
    /// Ids of the links the rate stage added.
    pub rate_added: Vec<String>,
    /// The plan came through a rate stage.
    pub rate_stage: bool,
    /// The plan meets a survival requirement.
    pub survival: bool,
}

/// Why `set` has each of its links (in the set's order): installed or
/// required links say so; otherwise the set without the link is checked,
/// and the source component it would leave unexcited is named with its
/// level and weakest direction; a link the condition does not need is there
/// for the target rate or for survival, as `why` says.
///
/// # Complexity
/// One structural check per link (in parallel).
pub fn link_reasons(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    why: &Why,
) -> Vec<(LinkRole, String)> {
    use crate::report::number as num;
    use crate::topology::Topology;
    use rayon::prelude::*;
    let ids: Vec<crate::problem::LinkId> = set.ids().to_vec();
    let mu = table.min_excitation();
    let excited: std::collections::HashSet<Vec<crate::problem::NodeId>> =
        Topology::analyse(problem.n(), &problem.arcs(set))
            .sources()
            .filter(|c| table.level(&c.nodes).value >= mu)
            .map(|c| c.nodes.clone())
            .collect();
    ids.par_iter()
        .map(|&l| {
            let link = problem.link(l);
            if link.installed {
                return (LinkRole::Installed, "in place already (costs 0)".to_string());
            }
            if link.required {
                return (
                    LinkRole::Required,
                    "marked required in the problem file".to_string(),
                );
            }
            let rest = LinkSet::new(ids.iter().copied().filter(|&k| k != l).collect());
            // Only source components the plan does not have can be
            // unexcited (the plan's own ones are known excited).
            let topo = Topology::analyse(problem.n(), &problem.arcs(&rest));
            let broken: Vec<(&[crate::problem::NodeId], crate::excitation::Level)> = topo
                .sources()
                .filter(|c| !excited.contains(&c.nodes))
                .map(|c| (c.nodes.as_slice(), table.level(&c.nodes)))
                .filter(|(_, level)| level.value < mu)
                .collect();
            if let Some((nodes, level)) = broken.first() {
                let more = if broken.len() > 1 {
                    format!(" (and {} more such groups)", broken.len() - 1)
                } else {
                    String::new()
                };
                let names: Vec<&str> = nodes.iter().map(|&v| problem.node_name(v)).collect();
                return (
                    LinkRole::Structure,
                    format!(
                        "without it {} would be a source component that is not excited: level {} < {} along [{}]{more}",
                        names.join(", "),
                        num::level_vs(level.value, mu),
                        num::level(mu),
                        level
                            .direction
                            .iter()
                            .map(|x| num::fixed(*x, 3, num::Round::Nearest))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                );
            }
            if why.rate_added.contains(&link.id) {
                return (
                    LinkRole::Rate,
                    "for the target rate: the condition holds without it".to_string(),
                );
            }
            if why.survival {
                return (
                    LinkRole::Survival,
                    "for survival: the condition holds without it, but not after every single failure".to_string(),
                );
            }
            if why.rate_stage {
                return (
                    LinkRole::Rate,
                    "kept for the target rate: the condition holds without it, and the rate stage found the target needs it".to_string(),
                );
            }
            (
                LinkRole::Structure,
                "the condition holds without it (not needed for the structure)".to_string(),
            )
        })
        .collect()
}

/// Share of the time limit for the robust plan when `--survive` asks for
/// one (the plain plan it is compared with gets the rest).
const ROBUST_SHARE: f64 = 0.7;

/// Share of the time limit kept for the rate stage when the problem sets a
/// target rate (the structural search gets the rest).
const RATE_STAGE_SHARE: f64 = 0.25;

/// Share of the time limit kept for certifying (and restoring) the rate
/// after single failures when `--survive` meets a target rate.
const RATE_AFTER_SHARE: f64 = 0.3;

/// One planning run: the structural stage, then the rate stage when the
/// problem sets `target_rate`.
fn plan_once(problem: &Problem, table: &ExcitationTable, options: &Options) -> Plan {
    let started = Instant::now();
    // With a target rate the structural search leaves RATE_STAGE_SHARE of
    // the limit to the rate stage (which also gets whatever the search does
    // not use).
    let structural_options = Options {
        time_limit: options.time_limit.map(|d| {
            if problem.settings.target_rate.is_some() {
                d.mul_f64(1.0 - RATE_STAGE_SHARE)
            } else {
                d
            }
        }),
        ..options.clone()
    };
    let rate_deadline = options.time_limit.map(|d| started + d);
    let found = match structural::run(problem, table, &structural_options) {
        Structural::Done(plan) => return *plan,
        Structural::Found(found) => found,
    };
    let lower = found.lower;
    let mut status = found.status;
    let mut set = found.set.clone();
    let rate_started = Instant::now();
    let keep = |candidate: &LinkSet| found.keeps(candidate);
    let rate = problem.settings.target_rate.map(|target| {
        rate::meet_target(
            problem,
            table,
            &set,
            target,
            rate_deadline,
            &keep,
            &options.progress,
        )
    });
    let rate = rate.map(|mut r| {
        r.structural_status = found.status;
        r
    });
    let (mut cost, mut gap) = (Some(found.cost), Some(found.gap));
    if let Some(r) = &rate {
        if r.met || r.timed_out {
            set = r.set.clone();
            let c = problem.cost(&set);
            let g = if c > 0.0 {
                ((c - lower) / c).max(0.0)
            } else {
                0.0
            };
            cost = Some(c);
            gap = Some(g);
            status = if !r.met || (r.timed_out && g > 1e-9) {
                PlanStatus::TimeLimit
            } else if g <= 1e-9 {
                PlanStatus::Optimal
            } else if status == PlanStatus::TimeLimit {
                PlanStatus::TimeLimit
            } else {
                PlanStatus::Feasible
            };
        } else {
            status = PlanStatus::Infeasible;
            set = LinkSet::default();
            cost = None;
            gap = None;
        }
    }
    let (stats, timings) = found.figures(rate_started.elapsed());
    let check = analysis::check(problem, table, &set);
    Plan {
        network: problem.settings.name.clone(),
        status,
        cost,
        lower_bound: Some(lower),
        gap,
        min_excitation: table.min_excitation(),
        min_excitation_given: table.min_excitation_given(),
        windows: table.windows().len(),
        links: chosen_links(problem, &set),
        source_components: if status == PlanStatus::Infeasible {
            Vec::new()
        } else {
            check.source_components
        },
        shortfalls: Vec::new(),
        robustness: None,
        rate,
        gains_ok: None,
        gains: Vec::new(),
        stats,
        timings,
    }
}
