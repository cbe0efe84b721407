//! The structural stage of planning: feasibility of the all-candidates
//! graph, a greedy incumbent, branch and cut on the covering model (rows
//! separated lazily, docs/theory.md §4–5) and a final irreducibility pass.
//! The rate stage (`rate`) starts from its answer.

use super::bnc;
use super::heuristics;
use super::instance::{Failure, Instance, Survive};
use super::lns;
use super::types::{Options, Plan, PlanStats, PlanStatus, Shortfall, Timings};
use crate::analysis::{self, SourceComponent};
use crate::excitation::ExcitationTable;
use crate::problem::{LinkId, LinkSet, Problem};
use std::time::{Duration, Instant};

/// What the structural stage ends with.
pub(crate) enum Structural<'a> {
    /// A final answer: infeasible (with its explanation), or no link set
    /// within the in-degree caps found.
    Done(Box<Plan>),
    /// A link set, to be checked for rate and reported.
    Found(Box<Found<'a>>),
}

/// A structural plan and how the search for it went.
pub(crate) struct Found<'a> {
    /// The instance searched (its oracle's figures, its cap and survival
    /// test for the rate stage).
    pub inst: Instance<'a>,
    /// The link set, irreducible.
    pub set: LinkSet,
    pub cost: f64,
    /// Proven lower bound on any valid plan's cost.
    pub lower: f64,
    pub gap: f64,
    pub status: PlanStatus,
    pub search: bnc::SearchStats,
    pub greedy_cost: f64,
    /// Cost of the required links (in the cost and the bound, not in the
    /// instance).
    pub fixed: f64,
    pub greedy_time: Duration,
    pub search_time: Duration,
}

impl Found<'_> {
    /// Whether a link set keeps every unit within its in-degree cap and
    /// meets the survival requirement.
    pub fn keeps(&self, candidate: &LinkSet) -> bool {
        let mut mask = vec![false; self.inst.links.len()];
        candidate.ids().iter().for_each(|l| mask[l.index()] = true);
        self.inst.holds(&mask)
    }

    /// The search figures and stage times of this stage, with the rate
    /// stage's time.
    pub fn figures(&self, rate_time: Duration) -> (PlanStats, Timings) {
        let s = &self.search;
        let mut figures = stats(&self.inst, Some(s), self.greedy_cost);
        figures.root_lp_bound += self.fixed;
        (
            figures,
            Timings {
                greedy: self.greedy_time,
                search: self.search_time,
                excitation: self.inst.oracle.stats.borrow().time,
                separation: s.separation_time.saturating_sub(s.separation_checks),
                solver: s.lp.time,
                heuristics: s.heuristic_time,
                component_bound: s.component.map_or(Duration::ZERO, |g| g.time),
                rate: rate_time,
            },
        )
    }
}

/// Share of the time limit the root's cutting may use on networks that
/// get neighbourhood search (which runs on a second thread meanwhile;
/// measurements: docs/tuning.md, "Root share of the time limit").
const ROOT_SHARE: f64 = 0.85;

/// Share of the time limit that the start heuristics (forward greedy,
/// reverse-delete, exchange) may use.
const GREEDY_SHARE: f64 = 0.4;

/// Runs the structural stage: the cheapest link set whose source
/// components are all excited, within the in-degree caps and the survival
/// requirement of `options` (the rate target is not looked at).
pub(crate) fn run<'a>(
    problem: &'a Problem,
    table: &'a ExcitationTable,
    options: &Options,
) -> Structural<'a> {
    let started = Instant::now();
    let deadline = options.time_limit.map(|d| started + d);
    let mut inst = Instance::new(problem, table);
    inst.survive = options.survive;
    let all = vec![true; inst.links.len()];
    // Under a survival requirement this check alone is one
    // source-component pass per candidate link.
    let check_started = Instant::now();
    let Some(bad) = inst.violations_until(&all, deadline) else {
        let mut plan = infeasible(problem, table, &inst, started, Vec::new(), Vec::new());
        plan.status = PlanStatus::TimeLimit;
        return Structural::Done(Box::new(plan));
    };
    // One step of reverse-delete from every candidate costs about as much
    // as that check: skip it when it cannot finish a step in the heuristics'
    // share of the time.
    let step = check_started.elapsed();
    if !bad.is_empty() {
        let plain: Vec<Vec<u32>> = inst
            .source_components(&all)
            .into_iter()
            .filter(|c| !inst.oracle.excited(c))
            .collect();
        let shortfalls = if plain.is_empty() {
            failure_shortfalls(problem, table, &inst.failures(&all, false))
        } else {
            plain
                .iter()
                .map(|c| shortfall(problem, table, c, &plain))
                .collect()
        };
        let check = analysis::check(problem, table, &problem.all_links());
        return Structural::Done(Box::new(infeasible(
            problem,
            table,
            &inst,
            started,
            check.source_components,
            shortfalls,
        )));
    }
    let installed: Vec<bool> = inst.links.iter().map(|l| l.installed).collect();
    if !inst.fits(&installed) {
        return Structural::Done(Box::new(caps_infeasible(
            problem, table, &inst, started, true,
        )));
    }
    // The start heuristics get at most GREEDY_SHARE of the time limit, so
    // that the search can still prove a bound. The forward greedy runs
    // first: on large networks reverse-delete from every candidate is the
    // slow one, and when it stops early its start is only less reduced.
    let greedy_deadline = options
        .time_limit
        .map(|d| started + d.mul_f64(GREEDY_SHARE));
    let forward = heuristics::forward_greedy(&inst, greedy_deadline);
    let reverse = if greedy_deadline.is_some_and(|d| Instant::now() + 2 * step >= d) {
        all.clone()
    } else {
        heuristics::reverse_delete_until(&inst, &all, greedy_deadline)
    };
    let greedy = match forward {
        Some(forward) if !inst.fits(&reverse) || inst.cost(&forward) < inst.cost(&reverse) => {
            forward
        }
        _ => reverse,
    };
    // A start beyond the in-degree caps is no incumbent: the search then
    // starts without one (and says so when it finds none).
    let greedy = if inst.holds(&greedy) {
        heuristics::exchange(&inst, &greedy, greedy_deadline)
    } else {
        greedy
    };
    let greedy_cost = inst.cost(&greedy) + required_cost(problem);
    let greedy_time = started.elapsed();
    let neighbourhood = inst.n >= lns::MIN_UNITS && options.survive == Survive::Nothing;
    let limits = bnc::Limits {
        deadline,
        nodes: options.node_limit,
        neighbourhood: neighbourhood.then_some(lns::improve as bnc::Improve),
        // Root cutting gets at most ROOT_SHARE of the time limit when
        // neighbourhood search runs.
        root_deadline: options
            .time_limit
            .filter(|_| neighbourhood)
            .map(|d| started + d.mul_f64(ROOT_SHARE)),
    };
    let result = bnc::search(&inst, greedy, limits, &options.progress);
    let search_time = started.elapsed() - greedy_time;
    if !inst.holds(&result.best) {
        // No link set within the in-degree caps was found.
        let mut plan = caps_infeasible(problem, table, &inst, started, false);
        // An infeasible root LP also ends the search early: only a real
        // deadline makes this a time limit.
        if result.timed_out && deadline.is_some_and(|d| Instant::now() >= d) {
            plan.status = PlanStatus::TimeLimit;
        }
        return Structural::Done(Box::new(plan));
    }
    // Final irreducibility: drop any link whose removal keeps the condition.
    // The final clean-up may run a little past the deadline (the command
    // promises the limit plus max(1 s, 2 %)).
    let cleanup = deadline.map(|d| {
        d + options
            .time_limit
            .map_or(Duration::ZERO, |l| l.mul_f64(0.01))
            .max(Duration::from_millis(300))
    });
    let best = heuristics::reverse_delete_until(&inst, &result.best, cleanup);
    // Required links are forced in at cost 0 in the instance: their costs
    // are a constant of every plan, added to the cost and the bound.
    let fixed = required_cost(problem);
    let cost = inst.cost(&best) + fixed;
    let lower = (result.lower_bound + fixed).min(cost);
    let gap = if cost > 0.0 {
        ((cost - lower) / cost).max(0.0)
    } else {
        0.0
    };
    let status = if gap <= 1e-9 {
        PlanStatus::Optimal
    } else if result.timed_out {
        PlanStatus::TimeLimit
    } else {
        PlanStatus::Feasible
    };
    let set = LinkSet::new(
        best.iter()
            .enumerate()
            .filter(|(_, c)| **c)
            .map(|(k, _)| LinkId(k as u32))
            .collect(),
    );
    Structural::Found(Box::new(Found {
        inst,
        set,
        cost,
        lower,
        gap,
        status,
        search: result.stats,
        greedy_cost,
        fixed,
        greedy_time,
        search_time,
    }))
}

/// Total cost of the links marked `required` (in every plan).
pub(crate) fn required_cost(problem: &Problem) -> f64 {
    problem
        .links
        .iter()
        .filter(|l| l.required)
        .map(|l| l.cost)
        .sum()
}

fn stats(inst: &Instance, s: Option<&bnc::SearchStats>, greedy_cost: f64) -> PlanStats {
    let o = *inst.oracle.stats.borrow();
    PlanStats {
        greedy_cost,
        root_lp_bound: s.map_or(f64::NAN, |s| s.root_bound),
        rounds: s.map_or(0, |s| s.rounds),
        cuts: s.map_or(0, |s| s.cuts),
        nodes: s.map_or(0, |s| s.nodes),
        lp_solves: s.map_or(0, |s| s.lp.solves),
        fixed_by_reduced_cost: s.map_or(0, |s| s.fixed_by_cost),
        excitation_queries: o.queries,
        excitation_scans: o.scans,
        component_bound: s.and_then(|s| s.component).map(|g| g.bound),
        component_size: s.and_then(|s| s.component).map(|g| g.k as u32),
        component_sets: s.and_then(|s| s.component).map(|g| g.sets as u64),
        component_columns: s.and_then(|s| s.component).map(|g| g.columns as u64),
        component_columns_used: s.and_then(|s| s.component).map(|g| g.used_columns as u64),
    }
}

/// Shortfalls of a survival requirement: the group left without excitation
/// by each failure (first failure per group).
fn failure_shortfalls(
    problem: &Problem,
    table: &ExcitationTable,
    failures: &[(Vec<u32>, Failure)],
) -> Vec<Shortfall> {
    let mut seen: Vec<&[u32]> = Vec::new();
    let mut out = Vec::new();
    for (set, failure) in failures {
        if seen.contains(&set.as_slice()) {
            continue;
        }
        seen.push(set);
        let mut s = shortfall(problem, table, set, &[]);
        s.remedy = match *failure {
            Failure::Link(k) => format!(
                "if link {} fails, no other candidate link enters this group: add a second candidate link into it",
                problem.links[k].id
            ),
            Failure::Unit(v) => format!(
                "if unit {} is lost, no candidate link enters this group from any other unit: add a candidate link into it from elsewhere, or more excitation inside it",
                problem.nodes[v as usize].id
            ),
        };
        out.push(s);
    }
    out
}

/// The plan when no link set meets both the structure and the in-degree
/// caps of the gain condition (`installed`: the installed links alone break
/// a cap). Names the units with the tightest caps.
fn caps_infeasible(
    problem: &Problem,
    table: &ExcitationTable,
    inst: &Instance,
    started: Instant,
    installed: bool,
) -> Plan {
    let caps = inst.caps.clone().unwrap_or_default();
    // Units whose port limit (max_links) is below their candidate links.
    let ports: Vec<(f64, usize, usize)> = inst.ports.as_ref().map_or(Vec::new(), |p| {
        let mut v: Vec<(f64, usize, usize)> = p
            .iter()
            .enumerate()
            .filter(|&(i, &m)| (inst.touching[i].len() as f64) > m)
            .map(|(i, &m)| (m, inst.touching[i].len(), i))
            .collect();
        v.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.2.cmp(&b.2)));
        v.truncate(5);
        v
    });
    let port_names: Vec<String> = ports
        .iter()
        .map(|&(m, k, i)| {
            format!(
                "{} (max_links = {m}, {k} candidate links)",
                problem.nodes[i].id
            )
        })
        .collect();
    let port_part = if port_names.is_empty() {
        String::new()
    } else {
        format!(
            "; radio-port limits that bind: {} (raise max_links or offer other links)",
            port_names.join(", ")
        )
    };
    let mut tight: Vec<(f64, usize)> = caps
        .iter()
        .enumerate()
        .filter(|(_, c)| c.is_finite())
        .map(|(i, &c)| (c, i))
        .collect();
    tight.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    tight.truncate(5);
    let names: Vec<String> = tight
        .iter()
        .map(|&(c, i)| format!("{} (in-degree ≤ {c:.3})", problem.nodes[i].id))
        .collect();
    let names = if names.is_empty() {
        "none bind".to_string()
    } else {
        names.join(", ")
    };
    let remedy = if installed {
        format!(
            "the installed and required links alone exceed a unit's limits: the in-degree \
             limit of the gain condition (δ·d_i + γ_d·s_i/2 ≤ 1; tightest: {names}) or its \
             radio ports{port_part}. Lower jump_coupling or jump_gain, lighten these links' \
             weights, or require fewer links"
        )
    } else {
        format!(
            "no link set both excites every source component and keeps every unit within \
             its limits: the in-degree limit of the gain condition (δ·d_i + γ_d·s_i/2 ≤ 1; \
             tightest: {names}){port_part}. Lower jump_coupling or jump_gain, use lighter \
             link weights, or add candidate links that spread the listening"
        )
    };
    let mut named: Vec<crate::problem::NodeId> = tight
        .iter()
        .map(|&(_, i)| crate::problem::NodeId(i as u32))
        .collect();
    for &(_, _, i) in &ports {
        let v = crate::problem::NodeId(i as u32);
        if !named.contains(&v) {
            named.push(v);
        }
    }
    let level = table.level(&named);
    let shortfall = Shortfall {
        nodes: named
            .iter()
            .map(|&v| problem.nodes[v.index()].id.clone())
            .collect(),
        excitation: level.value,
        weakest_direction: level.direction,
        weakest_window_start: analysis::window_start(problem, table, level.window),
        remedy,
    };
    infeasible(problem, table, inst, started, Vec::new(), vec![shortfall])
}

/// An infeasible plan with its explanation.
fn infeasible(
    problem: &Problem,
    table: &ExcitationTable,
    inst: &Instance,
    started: Instant,
    source_components: Vec<SourceComponent>,
    shortfalls: Vec<Shortfall>,
) -> Plan {
    Plan {
        network: problem.settings.name.clone(),
        status: PlanStatus::Infeasible,
        cost: None,
        lower_bound: None,
        gap: None,
        min_excitation: table.min_excitation(),
        min_excitation_given: table.min_excitation_given(),
        windows: table.windows().len(),
        links: Vec::new(),
        source_components,
        shortfalls,
        robustness: None,
        rate: None,
        gains_ok: None,
        gains: Vec::new(),
        stats: stats(inst, None, f64::NAN),
        timings: Timings {
            greedy: started.elapsed(),
            excitation: inst.oracle.stats.borrow().time,
            ..Timings::default()
        },
    }
}

/// `groups`: every group that even all candidates leave unexcited (a link
/// from one of them helps only when the two together are excited).
fn shortfall(
    problem: &Problem,
    table: &ExcitationTable,
    set: &[u32],
    groups: &[Vec<u32>],
) -> Shortfall {
    let nodes: Vec<crate::problem::NodeId> =
        set.iter().map(|&v| crate::problem::NodeId(v)).collect();
    let level = table.level(&nodes);
    let names: Vec<String> = nodes
        .iter()
        .map(|&v| problem.node_name(v).to_string())
        .collect();
    let mu = table.min_excitation();
    let dir: Vec<String> = level
        .direction
        .iter()
        .map(|x| crate::report::number::fixed(*x, 3, crate::report::number::Round::Nearest))
        .collect();
    let dir = format!("[{}]", dir.join(", "));
    // Units whose link into the group fixes it: a unit outside every
    // unexcited group (its sources are excited, so the group stops being a
    // source), or a unit of another unexcited group when the two together
    // are excited (a two-way link merges them). Nearest first when
    // positions are known.
    let all: Vec<crate::problem::NodeId> = (0..problem.n() as u32)
        .map(crate::problem::NodeId)
        .collect();
    let anywhere = table.level(&all).value >= mu;
    let group_of = |k: u32| groups.iter().find(|g| g.contains(&k));
    let mut carriers: Vec<(f64, bool, usize)> = (0..problem.n())
        .filter(|k| !set.contains(&(*k as u32)))
        .filter_map(|k| {
            let merge = match group_of(k as u32) {
                None => false,
                Some(other) => {
                    let mut joined = nodes.clone();
                    joined.extend(other.iter().map(|&v| crate::problem::NodeId(v)));
                    if table.level(&joined).value < mu {
                        return None;
                    }
                    true
                }
            };
            let d = nodes
                .iter()
                .filter_map(|&v| problem.nodes[v.index()].distance_km(&problem.nodes[k]))
                .min_by(f64::total_cmp)
                .unwrap_or(f64::INFINITY);
            Some((d, merge, k))
        })
        .collect();
    carriers.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
    let remedy = if !anywhere {
        format!(
            "no unit in the network excites the direction {dir} enough (all units pooled stay below μ_req), so no link can help: record logs that excite it, or lower min_excitation"
        )
    } else if carriers.is_empty() {
        format!(
            "no other unit can supply the direction {dir} this group lacks (the other units are in groups that lack it too); give its units more excitation along it"
        )
    } else {
        let names: Vec<String> = carriers
            .iter()
            .take(3)
            .map(|&(d, merge, k)| {
                let how = if merge { ", two-way" } else { "" };
                if d.is_finite() {
                    format!(
                        "{} ({} km away{how})",
                        problem.nodes[k].id,
                        crate::report::number::sig(d, 3, crate::report::number::Round::Nearest)
                    )
                } else if merge {
                    format!("{} (two-way)", problem.nodes[k].id)
                } else {
                    problem.nodes[k].id.clone()
                }
            })
            .collect();
        format!(
            "no candidate link enters this group: add one from a unit that can supply the direction {dir} it lacks, e.g. from {}, or give its units more excitation along it",
            names.join(" or ")
        )
    };
    Shortfall {
        remedy,
        nodes: names,
        excitation: level.value,
        weakest_direction: level.direction,
        weakest_window_start: analysis::window_start(problem, table, level.window),
    }
}
