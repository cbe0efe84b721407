//! What the planner takes and returns: options, the plan and its parts.

use crate::analysis::SourceComponent;
use crate::certify::Certificate;
use crate::problem::{Ends, LinkSet, Problem};
use serde::Serialize;
use std::time::Duration;

pub use super::instance::Survive;

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
    /// Marked `required` in the problem (in every plan, at its cost).
    pub required: bool,
    /// Why the plan has this link (plans of at most
    /// [`super::EXPLAIN_LINKS`] links; absent elsewhere).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub role: Option<LinkRole>,
    /// The reason in words (with `role`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
}

/// Why a plan has a link.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LinkRole {
    /// Already in place (free).
    Installed,
    /// Marked `required` in the problem.
    Required,
    /// Without it some source component is not excited.
    Structure,
    /// Added by the rate stage: the condition holds without it, the target
    /// rate needs it.
    Rate,
    /// The condition holds without it, the survival requirement needs it.
    Survival,
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
    /// With `target_rate`: whether the certified rate stays at or above
    /// the target after every single failure the plan survives (null
    /// without a target, without a plan, or when the time limit left no
    /// time to certify the failures).
    pub target_kept: Option<bool>,
    /// With `target_rate`: the failure with the lowest certified rate
    /// (a link or unit id) and that rate (null when certified none).
    pub worst_failure: Option<String>,
    /// See `worst_failure`.
    pub worst_failure_rate: Option<f64>,
    /// Links added so that the target rate holds after single link
    /// failures (ids; also in the rate stage's `added_links`).
    pub added_for_rate: Vec<String>,
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
    pub rate: Option<RatePlan>,
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

/// The outcome of the rate stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RatePlan {
    /// Required rate (1/s).
    pub target: f64,
    /// Certified rate of the returned links (null when not certified).
    pub certified: Option<f64>,
    /// The target is met.
    pub met: bool,
    /// Cost of the structural plan the stage started from.
    pub structural_cost: f64,
    /// Ids of the links added for speed, in the order they were added.
    pub added_links: Vec<String>,
    /// Ids of the structural plan's links that the rate stage swapped out
    /// (not in the returned set), in candidate order.
    pub removed_links: Vec<String>,
    /// Status of the structural plan the stage started from: `optimal`
    /// when its cost is proven minimal for the structure alone.
    pub structural_status: PlanStatus,
    /// When not met: the best certified rate found (the greedy additions or
    /// every candidate at once, whichever is faster).
    pub best_reachable: Option<f64>,
    /// True when the time limit cut the stage short.
    pub timed_out: bool,
    /// When the returned links come from a structural plan at a raised
    /// required excitation: that μ_req.
    pub raised_min_excitation: Option<f64>,
    /// The certificate of the returned links.
    pub certificate: Certificate,
    /// The returned link set.
    #[serde(skip)]
    pub set: LinkSet,
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
                required: link.required,
                role: None,
                reason: None,
            }
        })
        .collect()
}
