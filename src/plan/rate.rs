//! Meeting a required convergence rate (docs/theory.md §7): from the
//! structural optimum, add links by estimated rate gain per cost until the
//! certified rate reaches the target, then drop links whose removal keeps
//! it. The structural optimum's lower bound stays valid for the result.

use super::structural::{self, Structural};
pub use super::types::RatePlan;
use super::types::{Options, PlanStatus};
use crate::certify::propagate::{ErrorSystem, Schedule};
use crate::certify::{Certificate, certify_with, window_log_norm};
use crate::excitation::ExcitationTable;
use crate::problem::{LinkId, LinkSet, Problem};
use crate::progress::Sink;
use rayon::prelude::*;
use std::time::Instant;

/// Units whose share of the slowest mode makes their links candidates for
/// speed (the rest cannot move that mode much).
const FOCUS_UNITS: usize = 6;

/// Raised levels of μ_req tried for structural plans that may be faster,
/// spread geometrically between μ_req and the pooled level of all units.
const RAISE_STEPS: usize = 4;

/// Branch-and-bound nodes per raised μ_req (a deterministic effort limit:
/// these plans only seed the rate stage).
const RAISE_NODES: u64 = 200;

pub(crate) fn with(set: &LinkSet, extra: LinkId) -> LinkSet {
    let mut ids = set.ids().to_vec();
    ids.push(extra);
    LinkSet::new(ids)
}

fn without(set: &LinkSet, drop: LinkId) -> LinkSet {
    LinkSet::new(set.ids().iter().copied().filter(|&l| l != drop).collect())
}

/// The candidate link with the largest estimated rate gain per cost: links
/// not in `set` nor `rejected`, ending at one of the units that carry most of
/// the slowest mode, costing at most `budget` (when given), scored by the
/// norm of the certificate's worst window with the link added (in
/// parallel). `None` when no candidate is estimated to help.
pub(crate) fn best_addition(
    problem: &Problem,
    schedule: &Schedule,
    set: &LinkSet,
    cert: &Certificate,
    rejected: &[LinkId],
    budget: Option<f64>,
) -> Option<LinkId> {
    let window = cert.worst_windows.first().copied()?;
    let focus: Vec<&str> = cert
        .units
        .iter()
        .take(FOCUS_UNITS)
        .map(|u| u.node.as_str())
        .collect();
    let price = |l: LinkId| {
        let link = problem.link(l);
        if link.installed { 0.0 } else { link.cost }
    };
    let candidates: Vec<LinkId> = (0..problem.links.len() as u32)
        .map(LinkId)
        .filter(|l| !set.ids().contains(l) && !rejected.contains(l))
        .filter(|&l| budget.is_none_or(|b| price(l) <= b))
        .filter(|&l| {
            problem
                .link(l)
                .arcs()
                .any(|a| focus.contains(&problem.node_name(a.to)))
        })
        .collect();
    // Only links that keep every unit within its in-degree cap (the jump
    // gain condition).
    let caps = crate::certify::degree_caps(problem);
    let candidates: Vec<LinkId> = candidates
        .into_iter()
        .filter(|&l| within_caps(problem, &caps, &with(set, l)))
        .collect();
    let current = rate_of(cert);
    let scored: Vec<(LinkId, f64, f64)> = candidates
        .par_iter()
        .map(|&l| {
            let trial = with(set, l);
            let system = ErrorSystem::of_links(schedule, problem, &trial);
            let estimate = -window_log_norm(&system, &window, &cert.worst_vector) / cert.window;
            (l, estimate, (estimate - current) / price(l).max(1e-9))
        })
        .collect();
    scored
        .iter()
        .filter(|s| s.1 > current)
        .max_by(|a, b| a.2.total_cmp(&b.2).then(b.0.cmp(&a.0)))
        .map(|s| s.0)
}

/// `set` keeps every unit within its in-degree cap.
fn keep_caps(problem: &Problem, set: &LinkSet) -> bool {
    within_caps(problem, &crate::certify::degree_caps(problem), set)
}

/// Every unit's weighted in-degree under `set` is within `caps`, and every
/// unit with a port limit (`max_links`) takes part in at most that many
/// links.
pub(crate) fn within_caps(problem: &Problem, caps: &[f64], set: &LinkSet) -> bool {
    within_ports(problem, set)
        && crate::certify::in_degrees(problem, set)
            .iter()
            .zip(caps)
            .all(|(&d, &c)| super::instance::within(d, c))
}

/// Every unit takes part in at most `max_links` links of `set`.
pub(crate) fn within_ports(problem: &Problem, set: &LinkSet) -> bool {
    if problem.nodes.iter().all(|n| n.max_links.is_none()) {
        return true;
    }
    let used = problem.links_per_unit(set.ids().iter().copied());
    problem
        .nodes
        .iter()
        .zip(&used)
        .all(|(n, &u)| n.max_links.is_none_or(|m| u <= m))
}

/// Certificates and raised-excitation plans already computed, shared by
/// the rate stages of one command (`budget` runs one per rate it reaches;
/// they certify many of the same link sets and re-plan at the same raised
/// excitations). A certificate depends only on the link set, so a hit
/// gives the same numbers.
#[derive(Default)]
pub struct Memo {
    certs: std::sync::Mutex<std::collections::HashMap<Vec<LinkId>, Certificate>>,
    raised: std::sync::Mutex<std::collections::HashMap<usize, Option<LinkSet>>>,
}

impl Memo {
    /// The certificate of `set`, computed once.
    pub(crate) fn certify(
        &self,
        problem: &Problem,
        table: &ExcitationTable,
        schedule: &Schedule,
        set: &LinkSet,
        progress: &Sink,
    ) -> Certificate {
        let key = set.ids().to_vec();
        let known = self
            .certs
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
            .get(&key)
            .cloned();
        if let Some(c) = known {
            return c;
        }
        let c = certify_with(problem, table, schedule, set, progress);
        self.certs
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
            .insert(key, c.clone());
        c
    }
}

/// A deadline that also refuses steps expected to overrun it: a step (a
/// certificate, a screening, a raised plan) starts only while the longest
/// step so far still fits before the deadline, so a command with a time
/// limit ends within about one step's rounding of it.
pub(crate) struct Clock {
    at: Option<Instant>,
    longest: std::sync::Mutex<std::time::Duration>,
}

impl Clock {
    pub(crate) fn new(at: Option<Instant>) -> Clock {
        Clock {
            at,
            longest: std::sync::Mutex::new(std::time::Duration::ZERO),
        }
    }

    /// The next step would end past the deadline.
    pub(crate) fn late(&self) -> bool {
        let longest = *self
            .longest
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        self.at.is_some_and(|d| Instant::now() + longest >= d)
    }

    /// Runs one step and records its duration.
    pub(crate) fn step<T>(&self, f: impl FnOnce() -> T) -> T {
        let t0 = Instant::now();
        let r = f();
        let took = t0.elapsed();
        let mut longest = self
            .longest
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        *longest = (*longest).max(took);
        r
    }
}

pub(crate) fn rate_of(c: &Certificate) -> f64 {
    c.rate.unwrap_or(0.0)
}

/// Adds and prunes links until the certified rate of `start` reaches
/// `target` or no addition helps. Pruning only drops a link when `keep`
/// accepts the smaller set (survival requirements).
///
/// # Complexity
/// Each addition screens the candidate links touching the units that carry
/// the slowest mode on the worst window (in parallel), then certifies the
/// best one; pruning certifies once per link of the plan.
// Long function: Additions, pruning and the raised-excitation plans share the current
// set, its certificate and the deadline; each step is a short block with its reason
// beside it.
pub fn meet_target(
    problem: &Problem,
    table: &ExcitationTable,
    start: &LinkSet,
    target: f64,
    deadline: Option<Instant>,
    keep: &dyn Fn(&LinkSet) -> bool,
    progress: &Sink,
) -> RatePlan {
    meet_target_with(
        problem,
        table,
        start,
        target,
        deadline,
        keep,
        progress,
        &Memo::default(),
    )
}

/// [`meet_target`] with certificates and raised-excitation plans shared
/// through `memo`.
#[allow(clippy::too_many_arguments)]
pub fn meet_target_with(
    problem: &Problem,
    table: &ExcitationTable,
    start: &LinkSet,
    target: f64,
    deadline: Option<Instant>,
    keep: &dyn Fn(&LinkSet) -> bool,
    progress: &Sink,
    memo: &Memo,
) -> RatePlan {
    let schedule = Schedule::new(problem);
    let structural_cost = problem.cost(start);
    let mut set = start.clone();
    let clock = Clock::new(deadline);
    let mut cert = clock.step(|| memo.certify(problem, table, &schedule, &set, progress));
    let mut added: Vec<LinkId> = Vec::new();
    let mut rejected: Vec<LinkId> = Vec::new();
    let late = || clock.late();
    let mut timed_out = false;
    while rate_of(&cert) < target {
        if late() {
            timed_out = true;
            break;
        }
        let Some((l, trial, full)) = clock.step(|| {
            let l = best_addition(problem, &schedule, &set, &cert, &rejected, None)?;
            let trial = with(&set, l);
            let full = memo.certify(problem, table, &schedule, &trial, progress);
            Some((l, trial, full))
        }) else {
            break;
        };
        let current = rate_of(&cert);
        if rate_of(&full) > current {
            set = trial;
            cert = full;
            added.push(l);
            progress.update(|| {
                format!(
                    "rate stage: {} added, certified {} of {} 1/s",
                    crate::report::number::count(added.len(), "link", "links"),
                    crate::report::number::sig(
                        rate_of(&cert),
                        4,
                        crate::report::number::Round::Down
                    ),
                    crate::report::number::sig(target, 4, crate::report::number::Round::Nearest)
                )
            });
        } else {
            rejected.push(l);
        }
    }
    if !added.is_empty() {
        progress.done();
    }
    let mut best_reachable = None;
    if rate_of(&cert) < target && !timed_out && late() {
        timed_out = true;
    }
    if rate_of(&cert) < target && !timed_out {
        // The greedy stalled: is the target reachable at all?
        let all = problem.all_links();
        let everything = clock.step(|| memo.certify(problem, table, &schedule, &all, progress));
        // All candidates at once can break an in-degree cap: then they are
        // neither a start nor a reachable rate.
        let fits = keep_caps(problem, &all);
        best_reachable = Some(if fits {
            rate_of(&cert).max(rate_of(&everything))
        } else {
            rate_of(&cert)
        });
        if rate_of(&everything) >= target && fits {
            set = all;
            cert = everything;
            added = set
                .ids()
                .iter()
                .copied()
                .filter(|l| !start.ids().contains(l))
                .collect();
        }
    }
    if rate_of(&cert) >= target {
        let (s2, c2, late_now) = prune(
            problem, table, &schedule, set, cert, target, keep, &clock, memo,
        );
        timed_out |= late_now;
        set = s2;
        cert = c2;
        added.retain(|l| set.ids().contains(l));
    }
    // Raising the required excitation: a structural optimum at a higher
    // μ_req carries more excitation in each source component and often
    // certifies faster; keep it when it meets the target for less.
    let mut raised = None;
    if !timed_out {
        // Levels between μ_req and the level of all units pooled (no
        // source component can be more excited than that).
        let all: Vec<crate::problem::NodeId> = (0..problem.n() as u32)
            .map(crate::problem::NodeId)
            .collect();
        let top = table.level(&all).value.max(table.min_excitation());
        let base = table.min_excitation();
        for step in 1..=RAISE_STEPS {
            if late() {
                timed_out = true;
                break;
            }
            let mu = base * (top / base).powf(step as f64 / (RAISE_STEPS + 1) as f64);
            let known = memo
                .raised
                .lock()
                .unwrap_or_else(std::sync::PoisonError::into_inner)
                .get(&step)
                .cloned();
            let planned = match known {
                Some(p) => p,
                None => clock.step(|| {
                    let stronger = table.with_min_excitation(mu);
                    let options = Options {
                        time_limit: deadline.map(|d| d.saturating_duration_since(Instant::now())),
                        node_limit: Some(RAISE_NODES),
                        ..Options::default()
                    };
                    // The structural stage alone (it never looks at the target).
                    let p = match structural::run(problem, &stronger, &options) {
                        Structural::Done(p) if p.status == PlanStatus::Infeasible => None,
                        Structural::Done(p) => Some(p.link_set(problem)),
                        Structural::Found(found) => Some(found.set),
                    };
                    memo.raised
                        .lock()
                        .unwrap_or_else(std::sync::PoisonError::into_inner)
                        .insert(step, p.clone());
                    p
                }),
            };
            let Some(candidate) = planned else { break };
            if !keep(&candidate) {
                continue;
            }
            if late() {
                timed_out = true;
                break;
            }
            let c = clock.step(|| memo.certify(problem, table, &schedule, &candidate, progress));
            if rate_of(&c) < target {
                continue;
            }
            let (s2, c2, late_now) = prune(
                problem, table, &schedule, candidate, c, target, keep, &clock, memo,
            );
            timed_out |= late_now;
            if rate_of(&cert) < target || problem.cost(&s2) < problem.cost(&set) - 1e-9 {
                added = s2
                    .ids()
                    .iter()
                    .copied()
                    .filter(|l| !start.ids().contains(l))
                    .collect();
                set = s2;
                cert = c2;
                raised = Some(mu);
            }
            break;
        }
    }
    let met = rate_of(&cert) >= target;
    if met {
        best_reachable = None;
    } else if best_reachable.is_none() {
        best_reachable = cert.rate;
    }
    RatePlan {
        target,
        certified: cert.rate,
        met,
        structural_cost,
        added_links: added.iter().map(|&l| problem.link(l).id.clone()).collect(),
        removed_links: start
            .ids()
            .iter()
            .filter(|l| !set.ids().contains(l))
            .map(|&l| problem.link(l).id.clone())
            .collect(),
        structural_status: PlanStatus::Feasible,
        best_reachable,
        timed_out,
        raised_min_excitation: raised,
        certificate: cert,
        set,
    }
}

/// Drops links, dearest first, while the target still holds and `keep`
/// accepts the smaller set. Returns the set, its certificate and whether the
/// deadline cut the pass short.
#[allow(clippy::too_many_arguments)]
fn prune(
    problem: &Problem,
    table: &ExcitationTable,
    schedule: &Schedule,
    mut set: LinkSet,
    mut cert: Certificate,
    target: f64,
    keep: &dyn Fn(&LinkSet) -> bool,
    clock: &Clock,
    memo: &Memo,
) -> (LinkSet, Certificate, bool) {
    let mut order: Vec<LinkId> = set
        .ids()
        .iter()
        .copied()
        .filter(|&l| !problem.link(l).installed && !problem.link(l).required)
        .collect();
    order.sort_by(|&a, &b| {
        problem
            .link(b)
            .cost
            .total_cmp(&problem.link(a).cost)
            .then(a.cmp(&b))
    });
    for l in order {
        if clock.late() {
            return (set, cert, true);
        }
        let trial = without(&set, l);
        if !keep(&trial) {
            continue;
        }
        let c = clock.step(|| memo.certify(problem, table, schedule, &trial, &Sink::silent()));
        if rate_of(&c) >= target {
            set = trial;
            cert = c;
        }
    }
    (set, cert, false)
}
