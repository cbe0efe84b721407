//! Plans that survive one failure, against a counting argument and brute
//! force.

use super::fixtures::{Edge, one_root, synthetic};
use super::planning::{cheapest, holds, rank_one_grams, within_cap};
use exmesh::plan::{self, Options, PlanStatus, Survive};
use exmesh::problem::{LinkId, LinkSet, NodeId};
use exmesh::topology::Topology;
use exmesh::{ExcitationTable, Problem};
use proptest::prelude::*;

fn plan(problem: &Problem, table: &ExcitationTable, survive: Survive) -> plan::Plan {
    plan::plan(
        problem,
        table,
        &Options {
            survive,
            ..Options::default()
        },
    )
}

fn chosen_indices(problem: &Problem, p: &plan::Plan) -> Vec<usize> {
    p.links
        .iter()
        .map(|l| problem.links.iter().position(|c| c.id == l.id).unwrap())
        .collect()
}

/// Independent check of a survival requirement (petgraph condensation and
/// the table's window scan, not the planner's oracle).
fn survives(problem: &Problem, table: &ExcitationTable, chosen: &[usize], s: Survive) -> bool {
    if !holds(problem, table, chosen) {
        return false;
    }
    match s {
        Survive::Nothing => true,
        Survive::Link => (0..chosen.len()).all(|k| {
            let mut less = chosen.to_vec();
            less.remove(k);
            holds(problem, table, &less)
        }),
        Survive::Unit => (0..problem.n() as u32).all(|v| {
            let set = LinkSet::new(chosen.iter().map(|&k| LinkId(k as u32)).collect());
            let arcs: Vec<_> = problem
                .arcs(&set)
                .into_iter()
                .filter(|a| a.from != NodeId(v) && a.to != NodeId(v))
                .collect();
            let topo = Topology::analyse(problem.n(), &arcs);
            topo.sources()
                .filter(|c| c.nodes != [NodeId(v)])
                .all(|c| table.level(&c.nodes).value >= table.min_excitation())
        }),
    }
}

fn brute_force(problem: &Problem, table: &ExcitationTable, s: Survive) -> Option<f64> {
    cheapest(problem, |chosen| survives(problem, table, chosen, s))
}

/// Common practice (no source): on the complete graph K_n with unit-cost
/// two-way links and one excited unit, a plan that survives any one link
/// failure must give every unit two links (else losing its only link cuts
/// it off), so it has at least n links; a Hamiltonian cycle has n and
/// survives. The optimum is n.
#[test]
fn survive_link_on_complete_graph_is_a_cycle() {
    for n in [5usize, 6, 7] {
        let edges: Vec<Edge> = (0..n)
            .flat_map(|a| (a + 1..n).map(move |b| (a, b, 1.0, true)))
            .collect();
        let (problem, table) = synthetic(n, 1, &edges, 1, one_root(n, 0), 0.5);
        let p = plan(&problem, &table, Survive::Link);
        assert_eq!(p.status, PlanStatus::Optimal, "n = {n}");
        assert_eq!(p.cost, Some(n as f64), "n = {n}");
        let chosen = chosen_indices(&problem, &p);
        assert!(survives(&problem, &table, &chosen, Survive::Link));
        // Every unit has exactly two of the chosen links.
        for v in 0..n {
            let name = format!("n{v}");
            let degree = p
                .links
                .iter()
                .filter(|l| l.from == name || l.to == name)
                .count();
            assert_eq!(degree, 2, "n = {n}, unit {v}");
        }
        let r = p.robustness.as_ref().unwrap();
        assert_eq!(r.plain_cost, Some((n - 1) as f64));
        assert_eq!(r.extra_cost, Some(1.0));
    }
}

/// Dense small instances (every pair of 3–5 units may be linked, two-way or
/// one-way, at most 12 links) with random rank-1 excitation per unit and
/// window, so that surviving a failure is usually possible.
fn dense_strategy(p_max: usize) -> impl Strategy<Value = (usize, usize, Vec<Edge>, Vec<f64>)> {
    (4usize..=5, 2usize..=p_max).prop_flat_map(|(n, p)| {
        let pairs: Vec<(usize, usize)> = (0..n)
            .flat_map(|a| (a + 1..n).map(move |b| (a, b)))
            .collect();
        let m = pairs.len();
        let links = prop::collection::vec((1u32..20, 0u8..8), m).prop_map(move |spec| {
            pairs
                .iter()
                .zip(spec)
                .filter(|(_, (_, kind))| *kind != 0)
                .map(|(&(a, b), (c, kind))| match kind {
                    1 => (b, a, c as f64, false),
                    2 => (a, b, c as f64, false),
                    _ => (a, b, c as f64, true),
                })
                .collect::<Vec<Edge>>()
        });
        let vectors = prop::collection::vec(-1.0f64..1.0, 2 * n * p);
        let present = prop::collection::vec(prop::bool::weighted(0.9), 2 * n);
        (
            Just(n),
            Just(p),
            links,
            (vectors, present).prop_map(move |(v, on)| rank_one_grams(p, &v, &on)),
        )
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// Against brute force over all link subsets: same optimal cost (or
    /// both infeasible), and the plan passes the independent check.
    #[test]
    fn survive_link_matches_brute_force((n, p, edges, gram) in dense_strategy(3)) {
        check_against_brute_force(n, p, &edges, gram, Survive::Link)?;
    }

    /// As above for losing a unit (p = 2, so that the others stay excited).
    #[test]
    fn survive_unit_matches_brute_force((n, p, edges, gram) in dense_strategy(2)) {
        check_against_brute_force(n, p, &edges, gram, Survive::Unit)?;
    }
}

fn check_against_brute_force(
    n: usize,
    p: usize,
    edges: &[Edge],
    gram: Vec<f64>,
    s: Survive,
) -> Result<(), TestCaseError> {
    let (problem, table) = synthetic(n, p, edges, 2, gram, 0.05);
    let got = plan(&problem, &table, s);
    match brute_force(&problem, &table, s) {
        None => prop_assert_eq!(got.status, PlanStatus::Infeasible),
        Some(best) => {
            prop_assert_eq!(got.status, PlanStatus::Optimal);
            let cost = got.cost.unwrap();
            prop_assert!(
                (cost - best).abs() < 1e-9,
                "plan {} vs brute force {}",
                cost,
                best
            );
            let chosen = chosen_indices(&problem, &got);
            prop_assert!(survives(&problem, &table, &chosen, s));
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 32, ..ProptestConfig::default() })]

    /// Surviving a link failure under the in-degree caps of the gain
    /// condition (δ = 0.4: at most two weight-1 links into a unit): the
    /// plan matches brute force over all subsets that survive and meet
    /// the caps.
    #[test]
    fn survive_link_with_degree_caps_matches_brute_force((n, p, edges, gram) in dense_strategy(3)) {
        let (base, table) = synthetic(n, p, &edges, 2, gram, 0.05);
        let mut settings = base.settings.clone();
        settings.gains.jump_coupling = 0.4;
        let problem = Problem::from_parts(base.path.clone(), settings, base.nodes, base.links).unwrap();
        let got = plan(&problem, &table, Survive::Link);
        let best = cheapest(&problem, |chosen| {
            within_cap(&problem, chosen, 2.5) && survives(&problem, &table, chosen, Survive::Link)
        });
        match best {
            None => prop_assert_eq!(got.status, PlanStatus::Infeasible),
            Some(best) => {
                prop_assert_eq!(got.status, PlanStatus::Optimal);
                prop_assert!((got.cost.unwrap() - best).abs() < 1e-9, "plan {:?} vs brute force {}", got.cost, best);
                let chosen = chosen_indices(&problem, &got);
                prop_assert!(within_cap(&problem, &chosen, 2.5));
            }
        }
    }
}

/// `--survive link` with a target rate says whether the certified rate
/// stays at the target after every single link failure: the worst failure
/// and its rate are those `stress` finds on the same plan (an independent
/// run), and `target_kept` agrees with them. `stress` marks the failures
/// below the target.
#[test]
fn survival_with_a_target_reports_the_rate_after_failures() {
    use super::fixtures::{Folder, exmesh, small_problem, small_problem_with_target};
    let folder = Folder::new();
    small_problem(&folder);
    let text = small_problem_with_target("0.05")
        + "\n[[link]]\nbetween = [\"a\", \"b\"]\nid = \"a-b-spare\"\ncost = 5.0\n";
    folder.write("problem.toml", &text);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &[
            "plan",
            "problem.toml",
            "--survive",
            "link",
            "--json",
            "--out",
            "plan.json",
        ],
    );
    assert!(run.code <= 1, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert!(!v["cost"].is_null(), "a robust plan exists: {v}");
    let r = &v["robustness"];
    let stress = exmesh(
        dir,
        &["stress", "problem.toml", "--plan", "plan.json", "--json"],
    );
    let s: serde_json::Value = serde_json::from_str(&stress.stdout).unwrap();
    let links: Vec<&serde_json::Value> = s["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|x| x["kind"] == "link")
        .collect();
    let worst = links
        .iter()
        .map(|x| x["rate"].as_f64().unwrap_or(0.0))
        .fold(f64::INFINITY, f64::min);
    assert_eq!(r["worst_failure_rate"].as_f64().unwrap_or(0.0), worst);
    assert_eq!(r["target_kept"], serde_json::json!(worst >= 0.05));
    for x in &links {
        let below = x["rate"].as_f64().is_none_or(|q| q < 0.05);
        assert_eq!(x["below_target"], serde_json::json!(below));
    }
    assert_eq!(s["target_rate"], 0.05);
    // Links added for the rate never break survival: no single link
    // failure breaks the condition.
    assert_eq!(s["critical_links"], serde_json::json!([]));
}
