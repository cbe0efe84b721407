//! Single failures of a plan: every link failing and every unit lost, one at
//! a time, with the condition and the certified rate after each.

use crate::analysis;
use crate::certify::{Certificate, certify};
use crate::excitation::ExcitationTable;
use crate::problem::{LinkId, LinkSet, NodeId, Problem};
use crate::progress::Sink;
use rayon::prelude::*;
use serde::Serialize;
use std::sync::atomic::{AtomicUsize, Ordering};

/// What fails.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FailureKind {
    /// A link stops carrying estimates (both ways for a two-way link).
    Link,
    /// A unit is lost with its links (its own estimate excepted).
    Unit,
}

/// One failure scenario.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Scenario {
    /// Link or unit.
    pub kind: FailureKind,
    /// Its id.
    pub id: String,
    /// Every source component is still excited.
    pub condition_holds: bool,
    /// Units in source components that are no longer excited.
    pub units_left_unexcited: Vec<String>,
    /// Certified rate after the failure (null when not certified or skipped).
    pub rate: Option<f64>,
    /// With `target_rate` set and rates checked: the certified rate after
    /// the failure is below the target (or none is certified); else null.
    pub below_target: Option<bool>,
}

/// All single failures of a plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stress {
    /// Network name.
    pub network: String,
    /// Condition and rate without failures.
    pub baseline_holds: bool,
    /// Certified rate without failures (null when not certified or skipped).
    pub baseline_rate: Option<f64>,
    /// Whether rates were computed (false with `--skip-rate`: every rate is
    /// then null because it was skipped, not because none was certified).
    pub rates_checked: bool,
    /// Scenarios, worst first: the condition failing first (more units left
    /// unexcited first), then by certified rate, lowest first.
    pub scenarios: Vec<Scenario>,
    /// Links whose failure breaks the condition, worst first.
    pub critical_links: Vec<String>,
    /// Units whose loss breaks the condition, worst first.
    pub critical_units: Vec<String>,
    /// The problem's `target_rate` (null when none).
    pub target_rate: Option<f64>,
    /// With a target: the failures (links and units) after which the
    /// certified rate is below it, worst first (empty with `--skip-rate`).
    pub below_target: Vec<String>,
}

fn unexcited(c: &analysis::Check) -> Vec<String> {
    c.source_components
        .iter()
        .filter(|s| !s.excited)
        .flat_map(|s| s.nodes.iter().cloned())
        .collect()
}

/// Runs every single failure of `set`; with `rates`, certifies each
/// surviving network (in parallel).
///
/// # Complexity
/// One structural check per scenario; with `rates`, one certificate per
/// scenario whose condition holds.
pub fn stress(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    rates: bool,
    progress: &Sink,
) -> Stress {
    stress_until(problem, table, set, rates, progress, None).0
}

/// Like [`stress`], certifying no scenario after `deadline` (its rate is
/// then null); returns whether the deadline left some unchecked.
pub fn stress_until(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    rates: bool,
    progress: &Sink,
    deadline: Option<std::time::Instant>,
) -> (Stress, bool) {
    let late = std::sync::atomic::AtomicBool::new(false);
    let total = set.ids().len() + problem.n();
    let done = AtomicUsize::new(0);
    let tick = || {
        let k = done.fetch_add(1, Ordering::Relaxed) + 1;
        progress.update(|| format!("stress: {k}/{total} failures checked"));
    };
    let base = analysis::check(problem, table, set);
    let rate_of = |p: &Problem, t: &ExcitationTable, s: &LinkSet, holds: bool| -> Option<f64> {
        if rates && holds && deadline.is_some_and(|d| std::time::Instant::now() >= d) {
            late.store(true, Ordering::Relaxed);
            return None;
        }
        (rates && holds)
            .then(|| certify(p, t, s))
            .and_then(|c: Certificate| c.rate)
    };
    let baseline_rate = rate_of(problem, table, set, base.condition_holds);
    let links: Vec<LinkId> = set.ids().to_vec();
    let mut scenarios: Vec<Scenario> = links
        .par_iter()
        .map(|&l| {
            let rest = LinkSet::new(set.ids().iter().copied().filter(|&k| k != l).collect());
            let c = analysis::check(problem, table, &rest);
            let rate = rate_of(problem, table, &rest, c.condition_holds);
            tick();
            Scenario {
                kind: FailureKind::Link,
                id: problem.link(l).id.clone(),
                condition_holds: c.condition_holds,
                units_left_unexcited: unexcited(&c),
                rate,
                below_target: None,
            }
        })
        .collect();
    let units: Vec<Scenario> = (0..problem.n() as u32)
        .into_par_iter()
        .filter_map(|v| {
            let v = NodeId(v);
            let (reduced, origin) = problem.without_units(&[v], &LinkSet::default())?;
            let kept: Vec<NodeId> = (0..problem.n() as u32)
                .map(NodeId)
                .filter(|&u| u != v)
                .collect();
            // Same windows as the whole network when its horizon is kept,
            // else the reduced network's own.
            let t = if reduced.windows == problem.windows {
                table.restricted(&kept)
            } else {
                ExcitationTable::build(&reduced)
            };
            let rest = LinkSet::new(
                origin
                    .iter()
                    .enumerate()
                    .filter(|(_, o)| set.ids().contains(o))
                    .map(|(k, _)| LinkId(k as u32))
                    .collect(),
            );
            let c = analysis::check(&reduced, &t, &rest);
            let rate = rate_of(&reduced, &t, &rest, c.condition_holds);
            tick();
            Some(Scenario {
                kind: FailureKind::Unit,
                id: problem.node_name(v).to_string(),
                condition_holds: c.condition_holds,
                units_left_unexcited: unexcited(&c),
                rate,
                below_target: None,
            })
        })
        .collect();
    scenarios.extend(units);
    progress.done();
    let target = problem.settings.target_rate;
    if let (Some(t), true) = (target, rates) {
        for s in &mut scenarios {
            s.below_target = Some(s.rate.is_none_or(|r| r < t));
        }
    }
    scenarios.sort_by(|a, b| {
        a.condition_holds
            .cmp(&b.condition_holds)
            .then(
                b.units_left_unexcited
                    .len()
                    .cmp(&a.units_left_unexcited.len()),
            )
            .then(a.rate.unwrap_or(0.0).total_cmp(&b.rate.unwrap_or(0.0)))
            .then(a.id.cmp(&b.id))
    });
    let critical = |kind| {
        scenarios
            .iter()
            .filter(|s| s.kind == kind && !s.condition_holds)
            .map(|s| s.id.clone())
            .collect()
    };
    let stress = Stress {
        network: problem.settings.name.clone(),
        baseline_holds: base.condition_holds,
        baseline_rate,
        rates_checked: rates,
        critical_links: critical(FailureKind::Link),
        critical_units: critical(FailureKind::Unit),
        target_rate: target,
        below_target: scenarios
            .iter()
            .filter(|s| s.below_target == Some(true))
            .map(|s| s.id.clone())
            .collect(),
        scenarios,
    };
    (stress, late.load(Ordering::Relaxed))
}
