//! Re-planning after units are retired or links fail: the units, their logs
//! and their links go, failed links go; the links already in place cost
//! nothing; the cheapest additions restore the condition (and the target
//! rate, when set).

use crate::excitation::ExcitationTable;
use crate::plan::{Options, Plan, PlanStatus, plan};
use crate::problem::{LinkId, LinkSet, NodeId, Problem};
use serde::Serialize;

/// The outcome of retiring units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Retirement {
    /// Ids of the retired units.
    pub retired: Vec<String>,
    /// Ids of the links that failed (gone from the candidates).
    pub failed_links: Vec<String>,
    /// Links in place before that the new plan keeps.
    pub kept: Vec<String>,
    /// Links the new plan adds.
    pub added: Vec<String>,
    /// Links in place before that the new plan no longer needs.
    pub no_longer_needed: Vec<String>,
    /// Links in place before that went with the retired units.
    pub removed_with_units: Vec<String>,
    /// Cost of the added links.
    pub added_cost: Option<f64>,
    /// The new plan (on the remaining units).
    pub plan: Plan,
    /// The problem the new plan is for: remaining units and links, the
    /// links in place before marked installed (`retire --write-problem`).
    #[serde(skip)]
    pub reduced: Problem,
}

/// Why units cannot be retired.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum RetireError {
    /// Every unit would go.
    #[error("retiring every unit leaves nothing to plan")]
    Nothing,
    /// Neither a unit nor a link was named.
    #[error("nothing retired and no link failed; expected --node or --link")]
    NoChange,
    /// The remaining logs do not share a window.
    #[error("the remaining units' logs do not overlap for a whole window")]
    NoHorizon,
}

/// Retires `units` from `problem` and drops the `failed` links. `in_place`
/// is the link set installed before (a plan file's links); links marked
/// `installed` in the problem count too.
///
/// # Errors
/// [`RetireError`] when no unit would remain or the remaining logs share no
/// window.
pub fn retire(
    problem: &Problem,
    units: &[NodeId],
    failed: &[LinkId],
    in_place: &LinkSet,
    options: &Options,
) -> Result<Retirement, RetireError> {
    retire_with(problem, units, failed, in_place, options, &|reduced, _| {
        ExcitationTable::build(reduced)
    })
}

/// Like [`retire`], with the excitation table of the reduced problem made by
/// `table_of(reduced, kept units of the original)` (synthetic studies pass
/// a restriction of their own table).
///
/// # Errors
/// As [`retire`].
pub fn retire_with(
    problem: &Problem,
    units: &[NodeId],
    failed: &[LinkId],
    in_place: &LinkSet,
    options: &Options,
    table_of: &dyn Fn(&Problem, &[NodeId]) -> ExcitationTable,
) -> Result<Retirement, RetireError> {
    if units.len() >= problem.n() {
        return Err(RetireError::Nothing);
    }
    if units.is_empty() && failed.is_empty() {
        return Err(RetireError::NoChange);
    }
    let mut before: Vec<LinkId> = in_place.ids().to_vec();
    before.extend(problem.installed_links().ids());
    let before = LinkSet::new(before);
    let (reduced, origin) = problem
        .without(units, failed, &before)
        .ok_or(RetireError::NoHorizon)?;
    let kept_units: Vec<NodeId> = (0..problem.n() as u32)
        .map(NodeId)
        .filter(|v| !units.contains(v))
        .collect();
    let table = table_of(&reduced, &kept_units);
    let plan = plan(&reduced, &table, options);
    let chosen: Vec<LinkId> = plan
        .link_set(&reduced)
        .ids()
        .iter()
        .map(|l| origin[l.index()])
        .collect();
    let name = |l: &LinkId| problem.link(*l).id.clone();
    let feasible = plan.status != PlanStatus::Infeasible;
    let kept: Vec<String> = before
        .ids()
        .iter()
        .filter(|l| chosen.contains(l))
        .map(name)
        .collect();
    let removed_with_units: Vec<String> = before
        .ids()
        .iter()
        .filter(|l| !origin.contains(l) && !failed.contains(l))
        .map(name)
        .collect();
    let no_longer_needed: Vec<String> = before
        .ids()
        .iter()
        .filter(|l| feasible && origin.contains(l) && !chosen.contains(l))
        .map(name)
        .collect();
    let added_ids: Vec<LinkId> = chosen
        .iter()
        .copied()
        .filter(|l| !before.ids().contains(l))
        .collect();
    let added_cost =
        feasible.then(|| 0.0 + added_ids.iter().map(|&l| problem.link(l).cost).sum::<f64>());
    Ok(Retirement {
        retired: units
            .iter()
            .map(|&v| problem.node_name(v).to_string())
            .collect(),
        failed_links: failed.iter().map(name).collect(),
        kept,
        added: added_ids.iter().map(name).collect(),
        no_longer_needed,
        removed_with_units,
        added_cost,
        plan,
        reduced,
    })
}
