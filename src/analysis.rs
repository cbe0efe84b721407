//! Analyses that join the excitation table and the topology: the per-unit
//! excitation summary and the source-component check of a link set.

use crate::excitation::{ExcitationTable, eigenvalues, packed_index};
use crate::problem::{LinkSet, NodeId, Problem};
use crate::topology::Topology;
use serde::Serialize;

/// Excitation of one unit (or of a pooled set).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitExcitation {
    /// Unit id (or "all units" for the pool).
    pub id: String,
    /// Level μ over the windows.
    pub excitation: f64,
    /// Level ≥ μ_req.
    pub excited: bool,
    /// Eigenvector of the weakest window's smallest eigenvalue.
    pub weakest_direction: Vec<f64>,
    /// Start time of that window.
    pub weakest_window_start: f64,
    /// Number of eigenvalues of the whole-horizon Gramian at least μ_req.
    pub rank: usize,
    /// Share of the whole-horizon Gramian's trace that comes from flows.
    pub flow_share: f64,
    /// Share that comes from jumps.
    pub jump_share: f64,
}

/// The excitation summary of a problem.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExcitationSummary {
    /// Network name.
    pub network: String,
    /// Parameter dimension.
    pub parameters: usize,
    /// μ_req in use.
    pub min_excitation: f64,
    /// True when μ_req was given in the problem file.
    pub min_excitation_given: bool,
    /// Window length T.
    pub window: f64,
    /// Number of windows scanned.
    pub windows: usize,
    /// Common horizon `[h0, h1]`.
    pub horizon: [f64; 2],
    /// The logs that shorten the common horizon: the unit(s) whose log
    /// starts last or ends first, when some other log reaches further.
    pub horizon_cuts: Vec<HorizonCut>,
    /// Per unit, in file order.
    pub units: Vec<UnitExcitation>,
    /// All units pooled.
    pub pooled: UnitExcitation,
}

/// A log that sets one end of the common horizon and shortens it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HorizonCut {
    /// The unit whose log sets that end.
    pub node: String,
    /// `start` (its log starts last) or `end` (its log ends first).
    pub side: &'static str,
    /// Where its log starts or ends (s).
    pub at: f64,
    /// Seconds of recording the other logs have beyond it at that end (up
    /// to the log that reaches furthest).
    pub cut: f64,
}

/// The logs that set the ends of the common horizon, when another log
/// reaches further by at least 1 % of the span of all logs; file order,
/// starts first.
pub fn horizon_cuts(problem: &Problem) -> Vec<HorizonCut> {
    let spans: Vec<(f64, f64)> = problem.nodes.iter().map(|n| n.log.span()).collect();
    let (h0, h1) = (problem.domain.h0, problem.domain.h1);
    let first = spans.iter().map(|s| s.0).fold(f64::INFINITY, f64::min);
    let last = spans.iter().map(|s| s.1).fold(f64::NEG_INFINITY, f64::max);
    // Cuts of less than 1 % of the span of all logs (a sample or two of
    // offset) are not worth a line.
    let floor = 0.01 * (last - first);
    let mut cuts = Vec::new();
    if h0 - first >= floor && h0 > first {
        for (node, span) in problem.nodes.iter().zip(&spans) {
            if span.0 == h0 {
                cuts.push(HorizonCut {
                    node: node.id.clone(),
                    side: "start",
                    at: h0,
                    cut: h0 - first,
                });
            }
        }
    }
    if last - h1 >= floor && h1 < last {
        for (node, span) in problem.nodes.iter().zip(&spans) {
            if span.1 == h1 {
                cuts.push(HorizonCut {
                    node: node.id.clone(),
                    side: "end",
                    at: h1,
                    cut: last - h1,
                });
            }
        }
    }
    cuts
}

/// One source component in a check.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SourceComponent {
    /// Unit ids, in file order.
    pub nodes: Vec<String>,
    /// Its joint excitation level.
    pub excitation: f64,
    /// Level ≥ μ_req.
    pub excited: bool,
    /// Weakest direction of the pooled Gramian.
    pub weakest_direction: Vec<f64>,
    /// Start of the weakest window.
    pub weakest_window_start: f64,
    /// Units whose estimates it drives (itself included), in file order.
    pub reaches: Vec<String>,
    /// When not excited: ids of the candidate links (not in the set) that
    /// would enter it, cheapest first, at most five.
    pub entering_candidates: Vec<String>,
}

/// The outcome of checking a link set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// Network name.
    pub network: String,
    /// Every source component is excited.
    pub condition_holds: bool,
    /// μ_req in use.
    pub min_excitation: f64,
    /// True when μ_req was given in the problem file.
    pub min_excitation_given: bool,
    /// Number of windows scanned.
    pub windows: usize,
    /// Ids of the links checked.
    pub links: Vec<String>,
    /// Cost of the links (installed ones count 0).
    pub cost: f64,
    /// Source components, ordered by their first unit.
    pub source_components: Vec<SourceComponent>,
    /// Every unit's jump map is non-expansive (see [`crate::certify::gain_checks`]).
    pub gains_ok: bool,
    /// The gain conditions: the failing units, or the unit closest to its
    /// limit when all pass.
    pub gains: Vec<crate::certify::GainCheck>,
    /// Certified convergence rate, when asked for (see [`crate::certify`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub certificate: Option<crate::certify::Certificate>,
    /// What the check concludes (structure, gains and certificate together).
    pub verdict: Verdict,
}

/// The conclusion of a check. Only `converges` means every estimate
/// provably converges (on the recorded data and the model).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Structure, gains and certificate all hold.
    Converges,
    /// A source component is not excited.
    StructureFails,
    /// Some unit's jump map can expand the error (gain condition fails).
    GainsFail,
    /// Structure and gains hold but no window of the recorded horizon
    /// shows contraction: convergence is not certified.
    NotCertified,
    /// Structure and gains hold; the rate was not checked (`--skip-rate`).
    RateNotChecked,
}

impl Verdict {
    /// True when the verdict allows exit code 0 (`converges`, or structure
    /// and gains holding with the rate not asked for).
    pub fn ok(self) -> bool {
        matches!(self, Verdict::Converges | Verdict::RateNotChecked)
    }
}

impl Check {
    /// Attaches a certificate and recomputes the verdict.
    pub fn with_certificate(mut self, certificate: crate::certify::Certificate) -> Self {
        self.certificate = Some(certificate);
        self.verdict = self.conclude();
        self
    }

    fn conclude(&self) -> Verdict {
        if !self.condition_holds {
            Verdict::StructureFails
        } else if !self.gains_ok {
            Verdict::GainsFail
        } else {
            match &self.certificate {
                None => Verdict::RateNotChecked,
                Some(c) if c.rate.is_some() => Verdict::Converges,
                Some(_) => Verdict::NotCertified,
            }
        }
    }
}

fn names(problem: &Problem, nodes: &[NodeId]) -> Vec<String> {
    nodes
        .iter()
        .map(|&v| problem.node_name(v).to_string())
        .collect()
}

/// Start time of excitation window `w` (h0 when out of range).
pub(crate) fn window_start(problem: &Problem, table: &ExcitationTable, w: usize) -> f64 {
    table
        .windows()
        .get(w)
        .map_or(problem.domain.h0, |w| w.start)
}

fn unit_excitation(
    problem: &Problem,
    table: &ExcitationTable,
    id: String,
    nodes: &[NodeId],
) -> UnitExcitation {
    let p = table.p();
    let level = table.level(nodes);
    let mut flow = vec![0.0; crate::excitation::packed_len(p)];
    let mut jump = flow.clone();
    for &v in nodes {
        let (f, j) = table.horizon_parts(v);
        flow.iter_mut().zip(f).for_each(|(a, b)| *a += b);
        jump.iter_mut().zip(j).for_each(|(a, b)| *a += b);
    }
    let trace = |g: &[f64]| (0..p).map(|r| g[packed_index(p, r, r)]).sum::<f64>();
    let (tf, tj) = (trace(&flow), trace(&jump));
    let total: Vec<f64> = flow.iter().zip(&jump).map(|(a, b)| a + b).collect();
    let rank = eigenvalues(p, &total)
        .iter()
        .filter(|&&l| l >= table.min_excitation())
        .count();
    let share = |x: f64| if tf + tj > 0.0 { x / (tf + tj) } else { 0.0 };
    UnitExcitation {
        id,
        excitation: level.value,
        excited: level.value >= table.min_excitation(),
        weakest_direction: level.direction,
        weakest_window_start: window_start(problem, table, level.window),
        rank,
        flow_share: share(tf),
        jump_share: share(tj),
    }
}

/// Per-unit excitation and the pooled level of all units.
///
/// # Complexity
/// O(n W (n + p) p²).
pub fn excitation_summary(problem: &Problem, table: &ExcitationTable) -> ExcitationSummary {
    use rayon::prelude::*;
    let units = (0..problem.n() as u32)
        .into_par_iter()
        .map(|v| {
            unit_excitation(
                problem,
                table,
                problem.node_name(NodeId(v)).to_string(),
                &[NodeId(v)],
            )
        })
        .collect();
    let all: Vec<NodeId> = (0..problem.n() as u32).map(NodeId).collect();
    ExcitationSummary {
        network: problem.settings.name.clone(),
        parameters: problem.settings.parameters,
        min_excitation: table.min_excitation(),
        min_excitation_given: table.min_excitation_given(),
        window: problem.settings.window,
        windows: table.windows().len(),
        horizon: [problem.domain.h0, problem.domain.h1],
        horizon_cuts: horizon_cuts(problem),
        units,
        pooled: unit_excitation(problem, table, "all units".to_string(), &all),
    }
}

/// Candidate links outside `set` with an arc into `nodes` from outside,
/// cheapest first (file order on a tie), at most five.
fn entering(problem: &Problem, set: &LinkSet, nodes: &[NodeId]) -> Vec<String> {
    let mut found: Vec<(f64, usize)> = problem
        .links
        .iter()
        .enumerate()
        .filter(|(k, _)| {
            set.ids()
                .binary_search(&crate::problem::LinkId(*k as u32))
                .is_err()
        })
        .filter(|(_, l)| {
            l.arcs()
                .any(|a| nodes.contains(&a.to) && !nodes.contains(&a.from))
        })
        .map(|(k, l)| (l.cost, k))
        .collect();
    found.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    found
        .into_iter()
        .take(5)
        .map(|(_, k)| problem.links[k].id.clone())
        .collect()
}

/// Checks a link set: every source component of its digraph, with its
/// joint excitation, and whether all are excited.
///
/// # Complexity
/// O(n + m) for the condensation plus one level scan per source component.
pub fn check(problem: &Problem, table: &ExcitationTable, set: &LinkSet) -> Check {
    let topo = Topology::analyse(problem.n(), &problem.arcs(set));
    let source_components: Vec<SourceComponent> = topo
        .sources()
        .map(|c| {
            let level = table.level(&c.nodes);
            let excited = level.value >= table.min_excitation();
            let entering_candidates = if excited {
                Vec::new()
            } else {
                entering(problem, set, &c.nodes)
            };
            SourceComponent {
                entering_candidates,
                nodes: names(problem, &c.nodes),
                excitation: level.value,
                excited: level.value >= table.min_excitation(),
                weakest_direction: level.direction,
                weakest_window_start: window_start(problem, table, level.window),
                reaches: names(problem, &c.reaches),
            }
        })
        .collect();
    let gains = crate::certify::gain_checks(problem, set);
    let mut check = Check {
        network: problem.settings.name.clone(),
        condition_holds: source_components.iter().all(|c| c.excited),
        min_excitation: table.min_excitation(),
        min_excitation_given: table.min_excitation_given(),
        windows: table.windows().len(),
        links: set
            .ids()
            .iter()
            .map(|&l| problem.link(l).id.clone())
            .collect(),
        cost: problem.cost(set),
        gains_ok: gains.iter().all(|g| g.ok),
        gains,
        source_components,
        certificate: None,
        verdict: Verdict::StructureFails,
    };
    check.verdict = check.conclude();
    check
}
