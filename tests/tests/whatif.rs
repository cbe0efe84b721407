//! What-if questions: retiring units, budgets, failures.

use super::fixtures::synthetic;
use super::planning::instance_strategy;
use exmesh::problem::{LinkId, LinkSet, NodeId};
use exmesh::search::{self, Options, PlanStatus};
use proptest::prelude::*;

proptest! {
    #![proptest_config(ProptestConfig { cases: 32, ..ProptestConfig::default() })]

    /// Retiring a unit: the re-plan (links in place free) never costs more
    /// than planning the reduced network from scratch, and costs the same
    /// when nothing was in place (both are optima of the same covering
    /// problem, the first with some costs set to zero; common practice).
    #[test]
    fn retire_never_costs_more_than_scratch((n, p, edges, gram) in instance_strategy(), pick in 0usize..7) {
        let (problem, table) = synthetic(n, p, &edges, 2, gram, 0.05);
        let unit = NodeId((pick % n) as u32);
        let options = Options::default();
        let full = search::plan(&problem, &table, &options);
        let in_place = LinkSet::new(
            full.links
                .iter()
                .map(|c| LinkId(problem.links.iter().position(|l| l.id == c.id).unwrap() as u32))
                .collect(),
        );
        let restrict = |_: &exmesh::Problem, keep: &[NodeId]| table.restricted(keep);
        let (reduced, _) = problem.without_units(&[unit], &LinkSet::default()).unwrap();
        let kept: Vec<NodeId> = (0..n as u32).map(NodeId).filter(|&v| v != unit).collect();
        let scratch = search::plan(&reduced, &table.restricted(&kept), &options);
        for (before, equal) in [(in_place, false), (LinkSet::default(), true)] {
            let r = search::replan::retire_with(&problem, &[unit], &before, &options, &restrict).unwrap();
            prop_assert_eq!(r.plan.status == PlanStatus::Infeasible, scratch.status == PlanStatus::Infeasible);
            if let (Some(added), Some(fresh)) = (r.added_cost, scratch.cost) {
                prop_assert!(added <= fresh + 1e-9, "re-plan {} > scratch {}", added, fresh);
                if equal {
                    prop_assert!((added - fresh).abs() < 1e-9, "re-plan {} != scratch {}", added, fresh);
                }
            }
        }
    }
}
