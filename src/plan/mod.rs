//! The planning engine: the cheapest link set such that every source
//! component of the chosen digraph is excited, with a proven lower bound.
//!
//! Stages: feasibility of the all-candidates graph; greedy incumbent by
//! reverse-delete; branch and cut on the covering model (cuts and partition
//! inequalities separated lazily, see docs/theory.md §5); final irreducibility.

mod bnc;
mod cuts;
mod groups;
mod heuristics;
mod instance;
mod lns;
mod lp;
pub mod rate;
mod row;

use crate::analysis::{self, SourceComponent};
use crate::excitation::ExcitationTable;
use crate::problem::{Ends, LinkId, LinkSet, Problem};
pub use instance::Survive;
use instance::{Failure, Instance};
use serde::Serialize;
use std::time::{Duration, Instant};

/// Search options.
#[derive(Debug, Clone, Default)]
pub struct Options {
    /// Stop after this long and return the best plan with its gap.
    pub time_limit: Option<Duration>,
    /// Where progress goes (silent by default; the library never prints).
    pub progress: crate::progress::Sink,
    /// Single failure the plan must survive.
    pub survive: Survive,
    /// Stop after this many branch-and-bound nodes (a deterministic effort
    /// limit; the plan then carries its gap).
    pub node_limit: Option<u64>,
}

/// How the search ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PlanStatus {
    /// The plan's cost equals the proven lower bound.
    Optimal,
    /// A valid plan whose optimality is not proven (see the gap).
    Feasible,
    /// Even every candidate link leaves a source component not excited.
    Infeasible,
    /// The time limit stopped the search; the plan is valid, see the gap.
    TimeLimit,
}

/// A chosen link in a plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChosenLink {
    /// Link id.
    pub id: String,
    /// Talking end (first end for a two-way link).
    pub from: String,
    /// Listening end (second end for a two-way link).
    pub to: String,
    /// Both ends listen.
    pub two_way: bool,
    /// Cost counted in the plan (0 for installed links).
    pub cost: f64,
    /// Already in place.
    pub installed: bool,
}

/// A group of units that no candidate set can excite, and what would help.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Shortfall {
    /// Units of the non-excited source component of the all-candidates graph.
    pub nodes: Vec<String>,
    /// Its excitation level.
    pub excitation: f64,
    /// Its weakest direction.
    pub weakest_direction: Vec<f64>,
    /// Start of the weakest window.
    pub weakest_window_start: f64,
    /// What would fix it.
    pub remedy: String,
}

/// The price of surviving a failure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Robustness {
    /// Which failure the plan survives.
    pub survive: Survive,
    /// Cost of the plain plan (no survival requirement), planned separately
    /// with the same options.
    pub plain_cost: Option<f64>,
    /// Status of that plain plan.
    pub plain_status: PlanStatus,
    /// This plan's cost minus the plain plan's.
    pub extra_cost: Option<f64>,
}

/// Search figures (deterministic: no timings).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanStats {
    /// Cost of the reverse-delete incumbent.
    pub greedy_cost: f64,
    /// LP bound at the root after cutting.
    pub root_lp_bound: f64,
    /// Separation rounds.
    pub rounds: u64,
    /// Rows generated (cuts and partition inequalities).
    pub cuts: u64,
    /// Branch-and-bound nodes.
    pub nodes: u64,
    /// LP (re-)solves.
    pub lp_solves: u64,
    /// Links fixed by reduced cost, summed over branch-and-bound nodes.
    pub fixed_by_reduced_cost: u64,
    /// Excitation queries, and full window scans among them.
    pub excitation_queries: u64,
    /// Full window scans (queries not answered by cache or rank pre-test).
    pub excitation_scans: u64,
    /// The lower bound from small components as columns (docs/theory.md
    /// §5), when it was computed: large two-way networks under a time
    /// limit that the tree did not finish.
    pub component_bound: Option<f64>,
    /// The largest component size taken as columns for it.
    pub component_size: Option<u32>,
    /// Connected unit sets of at most that size.
    pub component_sets: Option<u64>,
    /// The excited ones among them (the columns).
    pub component_columns: Option<u64>,
    /// The columns the LP took up.
    pub component_columns_used: Option<u64>,
}

/// Wall-clock time per stage (reported in text, never in JSON).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Timings {
    /// Feasibility check and greedy incumbent.
    pub greedy: Duration,
    /// Whole branch and cut.
    pub search: Duration,
    /// Excitation checks (inside all stages).
    pub excitation: Duration,
    /// Row separation, excitation checks excluded.
    pub separation: Duration,
    /// LP solves.
    pub solver: Duration,
    /// Primal heuristics.
    pub heuristics: Duration,
    /// The bound from small components as columns (on the second thread).
    pub component_bound: Duration,
    /// Rate stage (certificates, additions and pruning).
    pub rate: Duration,
}

/// The planner's answer.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Plan {
    /// Network name.
    pub network: String,
    /// How the search ended.
    pub status: PlanStatus,
    /// Total cost of the chosen links (installed links count 0); null when
    /// infeasible.
    pub cost: Option<f64>,
    /// Proven lower bound on the cost of any valid plan; null when infeasible.
    pub lower_bound: Option<f64>,
    /// (cost − lower_bound) / cost; null when infeasible.
    pub gap: Option<f64>,
    /// μ_req in use.
    pub min_excitation: f64,
    /// True when μ_req was given in the problem file.
    pub min_excitation_given: bool,
    /// Number of windows scanned.
    pub windows: usize,
    /// The chosen links, in candidate order.
    pub links: Vec<ChosenLink>,
    /// Source components of the plan's digraph.
    pub source_components: Vec<SourceComponent>,
    /// When infeasible: the groups no candidate set can excite.
    pub shortfalls: Vec<Shortfall>,
    /// Price of the survival requirement, when one is set.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robustness: Option<Robustness>,
    /// The rate stage, when the problem sets `target_rate`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rate: Option<rate::RatePlan>,
    /// The per-unit gain condition holds for the plan's links (`None`
    /// when there is no plan; the search keeps every unit within its
    /// in-degree cap, so a plan meets it).
    pub gains_ok: Option<bool>,
    /// The gain conditions of the plan's links (see
    /// [`crate::certify::gain_checks`]).
    pub gains: Vec<crate::certify::GainCheck>,
    /// Search figures.
    pub stats: PlanStats,
    /// Stage timings (text output only).
    #[serde(skip)]
    pub timings: Timings,
}

impl Plan {
    /// The plan's links as a link set of `problem` (the problem it was
    /// planned on).
    pub fn link_set(&self, problem: &Problem) -> LinkSet {
        LinkSet::new(
            self.links
                .iter()
                .filter_map(|c| problem.link_id(&c.id))
                .collect(),
        )
    }
}

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
    let mut result = plan_once(problem, table, options);
    if options.survive != Survive::Nothing {
        let plain = plan_once(
            problem,
            table,
            &Options {
                survive: Survive::Nothing,
                progress: crate::progress::Sink::silent(),
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
        });
    }
    if result.cost.is_some() {
        let gains = crate::certify::gain_checks(problem, &result.link_set(problem));
        result.gains_ok = Some(gains.iter().all(|g| g.ok));
        result.gains = gains;
    }
    result
}

/// Share of the time limit the root's cutting may use on networks that
/// get neighbourhood search (which runs on a second thread meanwhile).
/// 0.45 while that search ran after the root on the same core; with the
/// second thread, 0.85 lifted the 60 s root bound at 500 units from
/// 225009/237021 to 225295/237311 (seeds 1/2; gap 2.57/2.87 % →
/// 2.44/2.75 %), and 150 units seed 3 (the slowest root there) kept its
/// gap (1.78 %).
const ROOT_SHARE: f64 = 0.85;

fn plan_once(problem: &Problem, table: &ExcitationTable, options: &Options) -> Plan {
    let started = Instant::now();
    let deadline = options.time_limit.map(|d| started + d);
    let mut inst = Instance::new(problem, table);
    inst.survive = options.survive;
    let all = vec![true; inst.links.len()];
    let bad = inst.violations(&all);
    if !bad.is_empty() {
        let plain: Vec<Vec<u32>> = inst
            .source_components(&all)
            .into_iter()
            .filter(|c| !inst.oracle.excited(c))
            .collect();
        let shortfalls = if plain.is_empty() {
            failure_shortfalls(problem, table, &inst.failures(&all, false))
        } else {
            plain.iter().map(|c| shortfall(problem, table, c)).collect()
        };
        let check = analysis::check(problem, table, &problem.all_links());
        return infeasible(
            problem,
            table,
            &inst,
            started,
            check.source_components,
            shortfalls,
        );
    }
    let installed: Vec<bool> = inst.links.iter().map(|l| l.installed).collect();
    if !inst.fits(&installed) {
        return caps_infeasible(problem, table, &inst, started, true);
    }
    let reverse = heuristics::reverse_delete(&inst, &all);
    let greedy = match heuristics::forward_greedy(&inst) {
        Some(forward) if !inst.fits(&reverse) || inst.cost(&forward) < inst.cost(&reverse) => {
            forward
        }
        _ => reverse,
    };
    // A start beyond the in-degree caps is no incumbent: the search then
    // starts without one (and says so when it finds none).
    let greedy = if inst.holds(&greedy) {
        heuristics::exchange(&inst, &greedy, deadline)
    } else {
        greedy
    };
    let greedy_cost = inst.cost(&greedy);
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
        return plan;
    }
    // Final irreducibility: drop any link whose removal keeps the condition.
    let best = heuristics::reverse_delete(&inst, &result.best);
    let cost = inst.cost(&best);
    let lower = result.lower_bound.min(cost);
    let gap = if cost > 0.0 {
        ((cost - lower) / cost).max(0.0)
    } else {
        0.0
    };
    let mut status = if gap <= 1e-9 {
        PlanStatus::Optimal
    } else if result.timed_out {
        PlanStatus::TimeLimit
    } else {
        PlanStatus::Feasible
    };
    let mut set = LinkSet::new(
        best.iter()
            .enumerate()
            .filter(|(_, c)| **c)
            .map(|(k, _)| LinkId(k as u32))
            .collect(),
    );
    let rate_started = Instant::now();
    let keep = |candidate: &LinkSet| {
        let mut mask = vec![false; inst.links.len()];
        candidate.ids().iter().for_each(|l| mask[l.index()] = true);
        inst.holds(&mask)
    };
    let rate = problem.settings.target_rate.map(|target| {
        rate::meet_target(
            problem,
            table,
            &set,
            target,
            deadline,
            &keep,
            &options.progress,
        )
    });
    let (mut cost, mut gap) = (Some(cost), Some(gap));
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
    let rate_time = rate_started.elapsed();
    let check = analysis::check(problem, table, &set);
    let s = &result.stats;
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
        stats: stats(&inst, Some(s), greedy_cost),
        timings: Timings {
            greedy: greedy_time,
            search: search_time,
            excitation: inst.oracle.stats.borrow().time,
            separation: s.separation_time.saturating_sub(s.separation_checks),
            solver: s.lp.time,
            heuristics: s.heuristic_time,
            component_bound: s.group.map_or(Duration::ZERO, |g| g.time),
            rate: rate_time,
        },
    }
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
        component_bound: s.and_then(|s| s.group).map(|g| g.bound),
        component_size: s.and_then(|s| s.group).map(|g| g.k as u32),
        component_sets: s.and_then(|s| s.group).map(|g| g.sets as u64),
        component_columns: s.and_then(|s| s.group).map(|g| g.columns as u64),
        component_columns_used: s.and_then(|s| s.group).map(|g| g.used_columns as u64),
    }
}

/// The plan's links as output records.
pub fn chosen_links(problem: &Problem, set: &LinkSet) -> Vec<ChosenLink> {
    set.ids()
        .iter()
        .map(|&l| {
            let link = problem.link(l);
            let (a, b, two_way) = match link.ends {
                Ends::TwoWay(a, b) => (a, b, true),
                Ends::OneWay { from, to } => (from, to, false),
            };
            ChosenLink {
                id: link.id.clone(),
                from: problem.node_name(a).to_string(),
                to: problem.node_name(b).to_string(),
                two_way,
                cost: if link.installed { 0.0 } else { link.cost },
                installed: link.installed,
            }
        })
        .collect()
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
        let mut s = shortfall(problem, table, set);
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
    let remedy = if installed {
        format!(
            "the installed links alone exceed the in-degree limit of the gain condition \
             (δ·d_i + γ_d·s_i/2 ≤ 1) at some unit; tightest limits: {}. Lower jump_coupling \
             or jump_gain, or lighten the installed links' weights",
            names.join(", ")
        )
    } else {
        format!(
            "no link set both excites every source component and keeps every unit within \
             the in-degree limit of the gain condition (δ·d_i + γ_d·s_i/2 ≤ 1); tightest \
             limits: {}. Lower jump_coupling or jump_gain, use lighter link weights, or add \
             candidate links that spread the listening",
            names.join(", ")
        )
    };
    let named: Vec<crate::problem::NodeId> = tight
        .iter()
        .map(|&(_, i)| crate::problem::NodeId(i as u32))
        .collect();
    let level = table.level(&named);
    let shortfall = Shortfall {
        nodes: tight
            .iter()
            .map(|&(_, i)| problem.nodes[i].id.clone())
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

fn shortfall(problem: &Problem, table: &ExcitationTable, set: &[u32]) -> Shortfall {
    let nodes: Vec<crate::problem::NodeId> =
        set.iter().map(|&v| crate::problem::NodeId(v)).collect();
    let level = table.level(&nodes);
    let names: Vec<String> = nodes
        .iter()
        .map(|&v| problem.node_name(v).to_string())
        .collect();
    // The nearest unit outside the group, when positions are known.
    let nearest = nodes
        .iter()
        .filter_map(|&v| problem.nodes[v.index()].position.map(|p| (v, p)))
        .flat_map(|(_, p)| {
            problem
                .nodes
                .iter()
                .enumerate()
                .filter(|(k, n)| !set.contains(&(*k as u32)) && n.position.is_some())
                .map(move |(k, n)| {
                    let q = n.position.unwrap_or_default();
                    ((p[0] - q[0]).hypot(p[1] - q[1]), k)
                })
        })
        .min_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let link_hint = match nearest {
        Some((d, k)) => format!(
            "add a candidate link into it, e.g. from {} ({d:.2} km away)",
            problem.nodes[k].id
        ),
        None => "add a candidate link into it from a unit outside it".to_string(),
    };
    let dir: Vec<String> = level.direction.iter().map(|x| format!("{x:+.3}")).collect();
    Shortfall {
        remedy: format!(
            "no candidate link enters this group: {link_hint}, or give its units more excitation along [{}]",
            dir.join(", ")
        ),
        nodes: names,
        excitation: level.value,
        weakest_direction: level.direction,
        weakest_window_start: analysis::window_start(problem, table, level.window),
    }
}
