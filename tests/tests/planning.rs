//! The planner against outside references: textbook minimum spanning tree
//! and minimum arborescence, petgraph's Kruskal, and brute force.

use super::fixtures::{Edge, Folder, exmesh, one_root, small_problem, synthetic};
use exmesh::plan::{self, Options, PlanStatus};
use exmesh::problem::{LinkId, LinkSet, NodeId};
use exmesh::topology::Topology;
use exmesh::{ExcitationTable, Problem};
use proptest::prelude::*;

fn plan(problem: &Problem, table: &ExcitationTable) -> plan::Plan {
    plan::plan(problem, table, &Options::default())
}

/// Cormen, Leiserson, Rivest & Stein, "Introduction to Algorithms", 3rd ed.,
/// 2009, Fig. 23.1: the 9-vertex graph whose minimum spanning tree costs 37.
/// Two-way links with symmetric costs and one excited unit reduce the plan
/// to the minimum spanning tree.
#[test]
fn clrs_figure_23_1_minimum_spanning_tree() {
    let idx = |c: char| (c as u8 - b'a') as usize;
    let edges: Vec<Edge> = [
        ("ab", 4.0),
        ("ah", 8.0),
        ("bc", 8.0),
        ("bh", 11.0),
        ("cd", 7.0),
        ("cf", 4.0),
        ("ci", 2.0),
        ("de", 9.0),
        ("df", 14.0),
        ("ef", 10.0),
        ("fg", 2.0),
        ("gh", 1.0),
        ("gi", 6.0),
        ("hi", 7.0),
    ]
    .iter()
    .map(|(e, c)| {
        let mut ch = e.chars();
        (idx(ch.next().unwrap()), idx(ch.next().unwrap()), *c, true)
    })
    .collect();
    for root in 0..9 {
        let (problem, table) = synthetic(9, 1, &edges, 1, one_root(9, root), 0.5);
        let p = plan(&problem, &table);
        assert_eq!(p.status, PlanStatus::Optimal);
        assert_eq!(p.cost, Some(37.0), "root {root}");
        assert_eq!(p.lower_bound, Some(37.0));
        assert_eq!(p.links.len(), 8);
    }
}

/// Edmonds, "Optimum branchings", J. Res. NBS 71B, 1967: the 9-node example
/// as reproduced in NetworkX's branching tests (networkx/algorithms/tree/
/// tests/test_branchings.py); the minimum spanning arborescence rooted at 3
/// costs 96. One-way links and one excited root reduce the plan to it.
#[test]
fn edmonds_optimum_branching_example() {
    let arcs = [
        (0, 2, 12.0),
        (0, 4, 12.0),
        (1, 0, 4.0),
        (1, 5, 13.0),
        (2, 1, 17.0),
        (2, 3, 21.0),
        (2, 5, 12.0),
        (3, 0, 5.0),
        (3, 4, 17.0),
        (3, 6, 18.0),
        (4, 7, 12.0),
        (5, 6, 14.0),
        (5, 8, 12.0),
        (6, 2, 21.0),
        (6, 8, 15.0),
        (7, 3, 19.0),
        (7, 6, 15.0),
        (8, 7, 18.0),
    ];
    let edges: Vec<Edge> = arcs.iter().map(|&(a, b, c)| (a, b, c, false)).collect();
    let (problem, table) = synthetic(9, 1, &edges, 1, one_root(9, 3), 0.5);
    let p = plan(&problem, &table);
    assert_eq!(p.status, PlanStatus::Optimal);
    assert_eq!(p.cost, Some(96.0));
    assert_eq!(p.links.len(), 8);
    // Every unit but the root listens to exactly one link.
    for v in (0..9).filter(|&v| v != 3) {
        assert_eq!(
            p.links.iter().filter(|l| l.to == format!("n{v}")).count(),
            1
        );
    }
}

/// Independent condition check: petgraph's condensation and the table's
/// window scan per source component (not the planner's cached oracle).
pub(super) fn holds(problem: &Problem, table: &ExcitationTable, chosen: &[usize]) -> bool {
    let set = LinkSet::new(chosen.iter().map(|&k| LinkId(k as u32)).collect());
    let topo = Topology::analyse(problem.n(), &problem.arcs(&set));
    topo.sources()
        .all(|c| table.level(&c.nodes).value >= table.min_excitation())
}

/// The least cost of a link subset that `ok` accepts, by trying every
/// subset (`None`: none is accepted).
pub(super) fn cheapest(problem: &Problem, ok: impl Fn(&[usize]) -> bool) -> Option<f64> {
    let m = problem.links.len();
    let mut best: Option<f64> = None;
    for mask in 0u32..(1 << m) {
        let chosen: Vec<usize> = (0..m).filter(|&k| mask & (1 << k) != 0).collect();
        let cost: f64 = chosen.iter().map(|&k| problem.links[k].cost).sum();
        if best.is_some_and(|b| cost >= b) {
            continue;
        }
        if ok(&chosen) {
            best = Some(cost);
        }
    }
    best
}

fn brute_force(problem: &Problem, table: &ExcitationTable) -> Option<f64> {
    cheapest(problem, |chosen| holds(problem, table, chosen))
}

fn chosen_indices(problem: &Problem, p: &plan::Plan) -> Vec<usize> {
    p.links
        .iter()
        .map(|l| problem.links.iter().position(|c| c.id == l.id).unwrap())
        .collect()
}

/// Packed rank-1 Gramians u uᵀ, one per (window, unit) entry of `present`
/// (zero when absent), from consecutive p-vectors of `v`.
pub(super) fn rank_one_grams(p: usize, v: &[f64], present: &[bool]) -> Vec<f64> {
    let mut g = Vec::with_capacity(present.len() * p * (p + 1) / 2);
    for (k, &on) in present.iter().enumerate() {
        let u = &v[k * p..(k + 1) * p];
        let s = if on { 1.0 } else { 0.0 };
        for r in 0..p {
            for c in r..p {
                g.push(s * u[r] * u[c]);
            }
        }
    }
    g
}

pub(super) fn instance_strategy() -> impl Strategy<Value = (usize, usize, Vec<Edge>, Vec<f64>)> {
    (3usize..=7, 2usize..=3).prop_flat_map(|(n, p)| {
        // A two-way spanning path (so most instances are feasible), then
        // random extra links of either kind, at most 12 links in all.
        let path = prop::collection::vec(1u32..20, n - 1);
        let edge =
            (0..n, 0..n, 1u32..20, any::<bool>()).prop_map(|(a, b, c, t)| (a, b, c as f64, t));
        let extra = prop::collection::vec(edge, 0..=(13 - n));
        let edges = (path, extra).prop_map(move |(path, extra)| {
            let mut v: Vec<Edge> = path
                .iter()
                .enumerate()
                .map(|(k, &c)| (k, k + 1, c as f64, true))
                .collect();
            v.extend(extra.into_iter().filter(|e| e.0 != e.1));
            v
        });
        // Each unit on each of two windows: a rank-1 Gramian v vᵀ (or zero).
        let vectors = prop::collection::vec(-1.0f64..1.0, 2 * n * p);
        let present = prop::collection::vec(prop::bool::weighted(0.8), 2 * n);
        (
            Just(n),
            Just(p),
            edges,
            (vectors, present).prop_map(move |(v, on)| rank_one_grams(p, &v, &on)),
        )
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// Against brute force over all link subsets: same optimal cost (or both
    /// infeasible); the plan satisfies the condition and is irreducible.
    #[test]
    fn plan_matches_brute_force((n, p, edges, gram) in instance_strategy()) {
        let (problem, table) = synthetic(n, p, &edges, 2, gram, 0.05);
        let got = plan(&problem, &table);
        let want = brute_force(&problem, &table);
        match want {
            None => prop_assert_eq!(got.status, PlanStatus::Infeasible),
            Some(best) => {
                prop_assert_eq!(got.status, PlanStatus::Optimal);
                let cost = got.cost.unwrap();
                prop_assert!((cost - best).abs() < 1e-9, "plan {} vs brute force {}", cost, best);
                let chosen = chosen_indices(&problem, &got);
                prop_assert!(holds(&problem, &table, &chosen));
                for k in 0..chosen.len() {
                    let mut less = chosen.clone();
                    less.remove(k);
                    prop_assert!(!holds(&problem, &table, &less), "link {} can be dropped", chosen[k]);
                }
            }
        }
    }

    /// Required links (each link required with probability 1/4): the plan
    /// holds every required link and costs what brute force over the link
    /// subsets that hold them all costs (or both are infeasible); its lower
    /// bound is at least the required links' cost.
    #[test]
    fn plan_with_required_links_matches_brute_force(
        (n, p, edges, gram) in instance_strategy(),
        pick in prop::collection::vec(prop::bool::weighted(0.25), 13),
    ) {
        let (mut problem, table) = synthetic(n, p, &edges, 2, gram, 0.05);
        for (l, &r) in problem.links.iter_mut().zip(&pick) {
            l.required = r;
        }
        let required: Vec<usize> = (0..problem.links.len()).filter(|&k| problem.links[k].required).collect();
        let fixed: f64 = required.iter().map(|&k| problem.links[k].cost).sum();
        let got = plan(&problem, &table);
        let want = cheapest(&problem, |chosen| {
            required.iter().all(|k| chosen.contains(k)) && holds(&problem, &table, chosen)
        });
        match want {
            None => prop_assert_eq!(got.status, PlanStatus::Infeasible),
            Some(best) => {
                prop_assert_eq!(got.status, PlanStatus::Optimal);
                let cost = got.cost.unwrap();
                prop_assert!((cost - best).abs() < 1e-9, "plan {} vs brute force {}", cost, best);
                prop_assert!(got.lower_bound.unwrap() >= fixed - 1e-9);
                let chosen = chosen_indices(&problem, &got);
                for k in &required {
                    prop_assert!(chosen.contains(k), "required link {} missing", k);
                }
                prop_assert!(holds(&problem, &table, &chosen));
            }
        }
    }

    /// Radio ports (each unit limited to 1–3 links with probability 1/2):
    /// the plan keeps every limit and costs what brute force over the link
    /// subsets within the limits costs (or both are infeasible).
    #[test]
    fn plan_with_port_limits_matches_brute_force(
        (n, p, edges, gram) in instance_strategy(),
        limits in prop::collection::vec(prop::option::weighted(0.5, 1u32..=3), 7),
    ) {
        let (mut problem, table) = synthetic(n, p, &edges, 2, gram, 0.05);
        for (v, &m) in problem.nodes.iter_mut().zip(&limits) {
            v.max_links = m;
        }
        let ends = |k: usize| match problem.links[k].ends {
            exmesh::problem::Ends::TwoWay(a, b) => (a.index(), b.index()),
            exmesh::problem::Ends::OneWay { from, to } => (from.index(), to.index()),
        };
        let within = |chosen: &[usize]| {
            let mut used = vec![0u32; n];
            for &k in chosen {
                let (a, b) = ends(k);
                used[a] += 1;
                used[b] += 1;
            }
            problem.nodes.iter().zip(&used).all(|(v, &u)| v.max_links.is_none_or(|m| u <= m))
        };
        let got = plan(&problem, &table);
        let want = cheapest(&problem, |chosen| within(chosen) && holds(&problem, &table, chosen));
        match want {
            None => prop_assert_eq!(got.status, PlanStatus::Infeasible),
            Some(best) => {
                prop_assert_eq!(got.status, PlanStatus::Optimal);
                let cost = got.cost.unwrap();
                prop_assert!((cost - best).abs() < 1e-9, "plan {} vs brute force {}", cost, best);
                let chosen = chosen_indices(&problem, &got);
                prop_assert!(within(&chosen), "port limit broken");
                prop_assert!(holds(&problem, &table, &chosen));
            }
        }
    }

    /// One excited unit, two-way links: the plan costs what petgraph's
    /// Kruskal minimum spanning tree costs on random connected graphs.
    #[test]
    fn plan_matches_kruskal(n in 2usize..9, extra in prop::collection::vec((0usize..9, 0usize..9, 1u32..50), 0..16), tree_costs in prop::collection::vec(1u32..50, 8), root in 0usize..9) {
        let root = root % n;
        // A random spanning path makes the graph connected, then extra edges.
        let mut edges: Vec<Edge> = (1..n).map(|v| (v - 1, v, tree_costs[v - 1] as f64, true)).collect();
        edges.extend(extra.iter().filter(|e| e.0 < n && e.1 < n && e.0 != e.1).map(|&(a, b, c)| (a, b, c as f64, true)));
        let (problem, table) = synthetic(n, 1, &edges, 1, one_root(n, root), 0.5);
        let got = plan(&problem, &table);
        let mut g = petgraph::graph::UnGraph::<(), f64>::new_undirected();
        let ids: Vec<_> = (0..n).map(|_| g.add_node(())).collect();
        for &(a, b, c, _) in &edges {
            g.add_edge(ids[a], ids[b], c);
        }
        let mst: f64 = petgraph::algo::min_spanning_tree(&g)
            .filter_map(|e| match e {
                petgraph::data::Element::Edge { weight, .. } => Some(weight),
                _ => None,
            })
            .sum();
        prop_assert_eq!(got.status, PlanStatus::Optimal);
        prop_assert!((got.cost.unwrap() - mst).abs() < 1e-9, "plan {:?} vs Kruskal {}", got.cost, mst);
    }
}

#[test]
fn installed_links_are_kept_at_no_cost() {
    // Path 0-1-2, root 0 excited; link 1-2 installed: plan adds 0-1 only.
    let edges: Vec<Edge> = vec![(0, 1, 5.0, true), (1, 2, 7.0, true), (0, 2, 6.0, true)];
    let (mut problem, table) = synthetic(3, 1, &edges, 1, one_root(3, 0), 0.5);
    problem.links[1].installed = true;
    let p = plan(&problem, &table);
    assert_eq!(p.cost, Some(5.0));
    assert_eq!(p.links.len(), 2);
    assert!(p.links.iter().any(|l| l.installed && l.cost == 0.0));
}

#[test]
fn infeasible_networks_are_explained() {
    // Units 0 and 1 excite e1 only; 2 excites e2 but no link reaches 2 from
    // outside, and {0, 1} can never see e2.
    let edges: Vec<Edge> = vec![(0, 1, 1.0, true), (2, 1, 1.0, false)];
    let gram = vec![1.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 1.0];
    let (problem, table) = synthetic(3, 2, &edges, 1, gram, 0.5);
    let p = plan(&problem, &table);
    assert_eq!(p.status, PlanStatus::Infeasible);
    assert_eq!(p.shortfalls.len(), 1);
    assert_eq!(p.shortfalls[0].nodes, vec!["n2"]);
    assert!(p.shortfalls[0].remedy.contains("no candidate link enters"));
    let _ = NodeId(0);
}

#[test]
fn plan_command_writes_a_plan_that_check_accepts() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &["plan", "problem.toml", "--out", "plan.json", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    for key in [
        "status",
        "cost",
        "lower_bound",
        "links",
        "source_components",
    ] {
        assert!(v.get(key).is_some(), "missing key {key}");
    }
    assert_eq!(v["status"], "optimal");
    // a<->b installed (0), then the cheaper of b->c (3) and a->c (4).
    assert_eq!(v["cost"], 3.0);
    assert_eq!(v["lower_bound"], 3.0);
    let link = &v["links"][1];
    assert_eq!(
        (
            link["from"].as_str(),
            link["to"].as_str(),
            link["two_way"].as_bool(),
            link["cost"].as_f64()
        ),
        (Some("b"), Some("c"), Some(false), Some(3.0))
    );
    let file = std::fs::read_to_string(folder.path("plan.json")).unwrap();
    assert_eq!(file, run.stdout, "the plan file is the JSON output");
    let check = exmesh(dir, &["check", "problem.toml", "--plan", "plan.json"]);
    assert_eq!(check.code, 0, "{}", check.stderr);
    // Same input, same bytes.
    let again = exmesh(dir, &["plan", "problem.toml", "--json"]);
    assert_eq!(again.stdout, run.stdout);
    // No temporary files left behind.
    let names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.ends_with(".tmp")), "{names:?}");
}

#[test]
fn infeasible_plan_exits_1_and_writes_nothing() {
    let folder = Folder::new();
    small_problem(&folder);
    // Without a->c and b->c, unit c (no excitation) can never be reached.
    let text = super::fixtures::SMALL_PROBLEM
        .replace("[[link]]\nfrom = \"b\"\nto = \"c\"\ncost = 3.0\n", "")
        .replace("[[link]]\nfrom = \"a\"\nto = \"c\"\ncost = 4.0\n", "");
    folder.write("problem.toml", &text);
    let run = exmesh(
        folder.dir.path(),
        &["plan", "problem.toml", "--out", "plan.json"],
    );
    assert_eq!(run.code, 1, "{}", run.stderr);
    assert!(
        run.stdout.contains("INFEASIBLE") && run.stdout.contains("units: c"),
        "{}",
        run.stdout
    );
    assert!(!folder.path("plan.json").exists());
}

#[test]
fn plan_runs_on_both_demos() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let run = exmesh(
        root,
        &["plan", "problems/plateau-masts/problem.toml", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    // The demo asks for a rate its structural optimum does not certify:
    // links are added for speed, so the plan is feasible above the bound.
    assert_eq!(v["status"], "feasible");
    let r = &v["rate"];
    assert_eq!(r["met"], true);
    assert!(r["certified"].as_f64().unwrap() >= r["target"].as_f64().unwrap());
    assert!(!r["added_links"].as_array().unwrap().is_empty());
    assert!(v["cost"].as_f64().unwrap() > r["structural_cost"].as_f64().unwrap());
    assert_eq!(v["lower_bound"].as_f64(), r["structural_cost"].as_f64());
    let run = exmesh(
        root,
        &[
            "plan",
            "problems/delta-substations/problem.toml",
            "--time-limit",
            "3",
            "--json",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let (cost, lower) = (
        v["cost"].as_f64().unwrap(),
        v["lower_bound"].as_f64().unwrap(),
    );
    assert!(lower <= cost && lower > 0.0);
    assert!(
        v["source_components"]
            .as_array()
            .unwrap()
            .iter()
            .all(|c| c["excited"] == true)
    );
}

/// A network large enough for neighbourhood search, under a time limit:
/// the plan is valid by an independent check, irreducible, and its bound
/// is below its cost. (Invented benchmark data: a consistency check, not a
/// reference.)
#[test]
fn large_network_plan_is_valid_under_a_time_limit() {
    let problem = exmesh::synth::bench_problem(60, 3, 0.03);
    let table = ExcitationTable::build(&problem);
    let options = Options {
        time_limit: Some(std::time::Duration::from_secs(4)),
        progress: exmesh::progress::Sink::silent(),
        ..Default::default()
    };
    let p = plan::plan(&problem, &table, &options);
    assert!(
        matches!(p.status, PlanStatus::Optimal | PlanStatus::TimeLimit),
        "{:?}",
        p.status
    );
    let chosen = chosen_indices(&problem, &p);
    assert!(holds(&problem, &table, &chosen));
    let (cost, lower) = (p.cost.unwrap(), p.lower_bound.unwrap());
    assert!(lower <= cost + 1e-9 && lower > 0.0);
    let direct: f64 = chosen.iter().map(|&k| problem.links[k].cost).sum();
    assert!((direct - cost).abs() < 1e-6);
    for k in 0..chosen.len() {
        let mut less = chosen.clone();
        less.remove(k);
        assert!(
            !holds(&problem, &table, &less),
            "link {} can be dropped",
            chosen[k]
        );
    }
}

/// Rate targets on the small problem: one that the structural optimum
/// already meets, and one no link set can meet (exit 1, no plan file, the
/// best reachable rate reported).
#[test]
fn rate_targets_met_or_explained() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    let text = super::fixtures::small_problem_with_target("0.01");
    folder.write("problem.toml", &text);
    let run = exmesh(
        dir,
        &["plan", "problem.toml", "--out", "plan.json", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["status"], "optimal");
    assert_eq!(v["rate"]["met"], true);
    assert!(v["rate"]["added_links"].as_array().unwrap().is_empty());
    // The plan file certifies the same rate through `check`.
    let check = exmesh(
        dir,
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
    );
    let c: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
    assert_eq!(c["certificate"]["rate"], v["rate"]["certified"]);
    let text = super::fixtures::small_problem_with_target("1000.0");
    folder.write("problem.toml", &text);
    std::fs::remove_file(folder.path("plan.json")).unwrap();
    let run = exmesh(
        dir,
        &["plan", "problem.toml", "--out", "plan.json", "--json"],
    );
    assert_eq!(run.code, 1, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["status"], "infeasible");
    assert_eq!(v["rate"]["met"], false);
    assert!(v["rate"]["best_reachable"].as_f64().unwrap() < 1000.0);
    assert!(!folder.path("plan.json").exists());
    let text = exmesh(dir, &["plan", "problem.toml"]);
    assert!(
        text.stdout.contains("Best certified rate reachable"),
        "{}",
        text.stdout
    );
}

/// A target the structural optimum misses by far: the plan meets it (the
/// JSON says so and `check` certifies the written plan at least as fast),
/// and the raised-excitation path is recorded.
#[test]
fn rate_target_on_the_plateau_demo_is_met_and_rechecked() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("problems/plateau-masts");
    let folder = Folder::new();
    let text = std::fs::read_to_string(root.join("problem.toml"))
        .unwrap()
        .replace("target_rate = 0.04", "target_rate = 0.06")
        .replace(
            "log = \"logs/",
            &format!("log = \"{}/logs/", root.display()),
        );
    folder.write("problem.toml", &text);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &["plan", "problem.toml", "--out", "plan.json", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["rate"]["met"], true);
    // On this demo the structural optimum at a raised μ_req, pruned, is
    // cheaper than adding links to the plain optimum (measured: 6750 vs 8000).
    assert!(v["rate"]["raised_min_excitation"].as_f64().unwrap() > 0.05);
    let check = exmesh(
        dir,
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
    );
    assert_eq!(check.code, 0, "{}", check.stderr);
    let c: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
    assert!(c["certificate"]["rate"].as_f64().unwrap() >= 0.06);
    assert_eq!(c["certificate"]["rate"], v["rate"]["certified"]);
}

/// Networks of 60 units or more run neighbourhood search on a second
/// thread; its results are taken at fixed points, so the plan is the same
/// on every run: both when the tree is finished before the second result
/// is due (60 units, proven optimal) and under a node limit (70 units).
/// Byte-identical output for identical input is common practice.
#[test]
fn plans_with_the_helper_thread_are_identical_across_runs() {
    for (n, nodes) in [(60, None), (70, Some(150))] {
        let problem = exmesh::synth::bench_problem(n, 3, 0.03);
        let table = ExcitationTable::build(&problem);
        let options = Options {
            node_limit: nodes,
            ..Default::default()
        };
        let runs: Vec<String> = (0..2)
            .map(|_| serde_json::to_string(&plan::plan(&problem, &table, &options)).unwrap())
            .collect();
        assert_eq!(runs[0], runs[1], "{n} units");
    }
}

/// Brute force with the in-degree caps of the gain condition: every unit's
/// weighted in-degree at most (1 − γ_d s_i/2)/δ, s_i = 0 here (no jumps).
fn brute_force_capped(problem: &Problem, table: &ExcitationTable, cap: f64) -> Option<f64> {
    cheapest(problem, |chosen| {
        within_cap(problem, chosen, cap) && holds(problem, table, chosen)
    })
}

/// Every unit's weighted in-degree under the links `chosen` is at most
/// `cap`.
pub(super) fn within_cap(problem: &Problem, chosen: &[usize], cap: f64) -> bool {
    let set = LinkSet::new(chosen.iter().map(|&k| LinkId(k as u32)).collect());
    let mut degree = vec![0.0; problem.n()];
    for a in problem.arcs(&set) {
        degree[a.to.index()] += a.weight;
    }
    degree.iter().all(|&d| d <= cap + 1e-12)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// With a jump coupling large enough for the in-degree caps to bind
    /// (δ = 0.4, 0.55 or 0.9: each unit may listen to at most 2, 1 or 1
    /// links of weight 1), the plan matches brute force over all link
    /// subsets that meet both the condition and the caps, and never breaks
    /// a cap; `check` of the plan passes the gain condition.
    #[test]
    fn plan_with_degree_caps_matches_brute_force(
        (n, p, edges, gram) in instance_strategy(),
        which in 0usize..3,
    ) {
        let delta = [0.4, 0.55, 0.9][which];
        let (base, table) = synthetic(n, p, &edges, 2, gram, 0.05);
        let mut settings = base.settings.clone();
        settings.gains.jump_coupling = delta;
        let problem = Problem::from_parts(base.path.clone(), settings, base.nodes, base.links).unwrap();
        let got = plan(&problem, &table);
        let want = brute_force_capped(&problem, &table, 1.0 / delta);
        match want {
            None => prop_assert_eq!(got.status, PlanStatus::Infeasible),
            Some(best) => {
                prop_assert_eq!(got.status, PlanStatus::Optimal);
                let cost = got.cost.unwrap();
                prop_assert!((cost - best).abs() < 1e-9, "plan {} vs brute force {}", cost, best);
                prop_assert_eq!(got.gains_ok, Some(true));
                let set = LinkSet::new(chosen_indices(&problem, &got).iter().map(|&k| LinkId(k as u32)).collect());
                prop_assert!(exmesh::certify::gain_checks(&problem, &set).iter().all(|g| g.ok));
            }
        }
    }
}

/// `required = true` through the binary: on the small problem (a excites
/// e1, b excites e2, c nothing; a<->b installed) requiring a->c (cost 4)
/// makes b->c (cost 3) unnecessary, so the plan is a<->b + a->c at cost 4
/// (reasoning by hand from the condition; common practice); the text marks
/// the link required. A link both installed and required is refused with
/// its line.
#[test]
fn required_links_are_in_the_plan_at_their_cost() {
    let folder = Folder::new();
    small_problem(&folder);
    let text = std::fs::read_to_string(folder.path("problem.toml")).unwrap();
    let required = text.replace(
        "from = \"a\"\nto = \"c\"\ncost = 4.0\n",
        "from = \"a\"\nto = \"c\"\ncost = 4.0\nrequired = true\n",
    );
    assert_ne!(required, text);
    folder.write("problem.toml", &required);
    let dir = folder.dir.path();
    let run = exmesh(dir, &["plan", "problem.toml", "--json"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["cost"], 4.0);
    assert_eq!(v["lower_bound"], 4.0);
    let ids: Vec<&str> = v["links"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["id"].as_str().unwrap())
        .collect();
    assert_eq!(ids, vec!["a<->b", "a->c"]);
    assert_eq!(v["links"][1]["required"], true);
    let text_run = exmesh(dir, &["plan", "problem.toml"]);
    assert!(
        text_run.stdout.contains("(required)"),
        "{}",
        text_run.stdout
    );

    let both = required.replace("required = true\n", "required = true\ninstalled = true\n");
    folder.write("problem.toml", &both);
    let bad = exmesh(dir, &["plan", "problem.toml"]);
    assert_eq!(bad.code, 2, "{}", bad.stderr);
    let line = both
        .lines()
        .position(|l| l.starts_with("required"))
        .unwrap()
        + 1;
    assert!(
        bad.stderr.contains(&format!("problem.toml:{line}:"))
            && bad.stderr.contains("both `installed`"),
        "{}",
        bad.stderr
    );
}

/// Remedies that can work: c and d excite nothing and no candidate enters
/// them; d is c's nearest unit but lacks the same directions, so the remedy
/// for c names b (in the excited group a<->b) and not d; when no unit
/// excites a direction at all, the remedy says so first (reasoning by hand
/// from the condition; common practice).
#[test]
fn infeasible_remedies_name_units_that_can_help() {
    use super::fixtures::constant_log;
    let folder = Folder::new();
    folder.write("logs/a.csv", &constant_log(&[1.0, 0.0]));
    folder.write("logs/b.csv", &constant_log(&[0.0, 1.0]));
    folder.write("logs/c.csv", &constant_log(&[0.0, 0.0]));
    folder.write("logs/d.csv", &constant_log(&[0.0, 0.0]));
    let head = "[network]\nparameters = 2\nwindow = 4.0\nstride = 1.0\nmin_excitation = 0.5\n";
    let node = |id: &str, x: f64| {
        format!("[[node]]\nid = \"{id}\"\nlog = \"logs/{id}.csv\"\nposition = [{x}, 0.0]\n")
    };
    let problem = format!(
        "{head}{}{}{}{}[[link]]\nbetween = [\"a\", \"b\"]\ncost = 1.0\n",
        node("a", 0.0),
        node("b", 1.0),
        node("c", 5.0),
        node("d", 5.5)
    );
    folder.write("problem.toml", &problem);
    let run = exmesh(folder.dir.path(), &["plan", "problem.toml", "--json"]);
    assert_eq!(run.code, 1, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let shortfalls = v["shortfalls"].as_array().unwrap();
    let for_c = shortfalls
        .iter()
        .find(|s| s["nodes"] == serde_json::json!(["c"]))
        .expect("c is short");
    let remedy = for_c["remedy"].as_str().unwrap();
    assert!(remedy.contains("from b (4 km away)"), "{remedy}");
    assert!(!remedy.contains("from d"), "{remedy}");

    // Only a and c: nobody excites e2.
    let problem = format!("{head}{}{}", node("a", 0.0), node("c", 5.0));
    folder.write("problem.toml", &problem);
    let run = exmesh(folder.dir.path(), &["plan", "problem.toml", "--json"]);
    assert_eq!(run.code, 1, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    for s in v["shortfalls"].as_array().unwrap() {
        let remedy = s["remedy"].as_str().unwrap();
        assert!(
            remedy.starts_with("no unit in the network excites"),
            "{remedy}"
        );
    }
}

/// Radio ports through the binary: with `max_links = 2` on the demo's
/// mast-summit, `plan`, `budget` and `retire` never give it more than two
/// links; with `max_links = 0` on the small problem's c (which needs a
/// link) the plan is infeasible and the remedy names c's limit.
#[test]
fn port_limits_hold_everywhere() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let folder = Folder::new();
    let dir = folder.dir.path();
    std::fs::create_dir_all(dir.join("logs")).unwrap();
    for e in std::fs::read_dir(root.join("problems/plateau-masts/logs")).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dir.join("logs").join(e.file_name())).unwrap();
    }
    let text = std::fs::read_to_string(root.join("problems/plateau-masts/problem.toml")).unwrap();
    let limited = text.replace(
        "id = \"mast-summit\"\nlog = \"logs/mast-summit.csv\"\n",
        "id = \"mast-summit\"\nlog = \"logs/mast-summit.csv\"\nmax_links = 2\n",
    );
    assert_ne!(limited, text);
    folder.write("problem.toml", &limited);
    let touching = |links: &serde_json::Value| {
        links
            .as_array()
            .unwrap()
            .iter()
            .filter(|l| {
                let s = |k: &str| l[k].as_str().map(str::to_string).unwrap_or_default();
                let id = l.as_str().map(str::to_string).unwrap_or_else(|| s("id"));
                id.contains("mast-summit")
            })
            .count()
    };
    let plan = exmesh(dir, &["plan", "problem.toml", "--json"]);
    assert_eq!(plan.code, 0, "{}", plan.stderr);
    let v: serde_json::Value = serde_json::from_str(&plan.stdout).unwrap();
    assert!(touching(&v["links"]) <= 2, "{}", v["links"]);
    let budget = exmesh(
        dir,
        &[
            "budget",
            "problem.toml",
            "--json",
            "--steps",
            "2",
            "--time-limit",
            "20",
        ],
    );
    let b: serde_json::Value = serde_json::from_str(&budget.stdout).unwrap();
    for p in b["front"].as_array().unwrap() {
        assert!(touching(&p["links"]) <= 2, "{}", p["links"]);
    }
    let retire = exmesh(
        dir,
        &["retire", "problem.toml", "--node", "mast-fold", "--json"],
    );
    let r: serde_json::Value = serde_json::from_str(&retire.stdout).unwrap();
    assert!(touching(&r["plan"]["links"]) <= 2, "{}", r["plan"]["links"]);

    let small = Folder::new();
    small_problem(&small);
    let text = std::fs::read_to_string(small.path("problem.toml")).unwrap();
    let zero = text.replace(
        "id = \"c\"\nlog = \"logs/c.csv\"\n",
        "id = \"c\"\nlog = \"logs/c.csv\"\nmax_links = 0\n",
    );
    assert_ne!(zero, text);
    small.write("problem.toml", &zero);
    let run = exmesh(small.dir.path(), &["plan", "problem.toml", "--json"]);
    assert_eq!(run.code, 1, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let remedy = v["shortfalls"][0]["remedy"].as_str().unwrap();
    assert!(remedy.contains("c (max_links = 0"), "{remedy}");
}

/// Brute force over the non-installed links (installed ones always in,
/// at cost 0) with every unit's in-degree within the gain condition's cap.
fn brute_force_with_installed(problem: &Problem, table: &ExcitationTable) -> Option<f64> {
    let caps = exmesh::certify::degree_caps(problem);
    let installed: Vec<usize> = (0..problem.links.len())
        .filter(|&k| problem.links[k].installed)
        .collect();
    let free: Vec<usize> = (0..problem.links.len())
        .filter(|&k| !problem.links[k].installed)
        .collect();
    let mut best: Option<f64> = None;
    for mask in 0u32..(1 << free.len()) {
        let mut chosen = installed.clone();
        chosen.extend(
            (0..free.len())
                .filter(|&i| mask & (1 << i) != 0)
                .map(|i| free[i]),
        );
        let cost: f64 = (0..free.len())
            .filter(|&i| mask & (1 << i) != 0)
            .map(|i| problem.links[free[i]].cost)
            .sum();
        if best.is_some_and(|b| cost >= b) {
            continue;
        }
        let set = LinkSet::new(chosen.iter().map(|&k| LinkId(k as u32)).collect());
        let degrees = exmesh::certify::in_degrees(problem, &set);
        if degrees.iter().zip(&caps).all(|(&d, &c)| d <= c + 1e-9) && holds(problem, table, &chosen)
        {
            best = Some(cost);
        }
    }
    best
}

/// The benchmark family's twelve designs at 5 units (every layout, degree,
/// one-way share, p, mix, cost model, installed links) against brute force
/// over every link subset (invented benchmark data; the reference is the
/// exhaustive search).
#[test]
fn family_members_match_brute_force() {
    let mut feasible = 0;
    for k in 0..12 {
        let problem = exmesh::family::problem(5, k, 0.03);
        assert!(problem.links.len() <= 10, "member {k}");
        let table = ExcitationTable::build(&problem);
        let got = plan(&problem, &table);
        match brute_force_with_installed(&problem, &table) {
            None => assert_eq!(got.status, PlanStatus::Infeasible, "member {k}"),
            Some(best) => {
                assert_eq!(got.status, PlanStatus::Optimal, "member {k}");
                let cost = got.cost.unwrap();
                assert!(
                    (cost - best).abs() < 1e-6,
                    "member {k}: plan {cost} vs brute force {best}"
                );
                feasible += 1;
            }
        }
    }
    assert!(feasible >= 8, "only {feasible} feasible members");
}

/// Time limits on generated networks (family members of 40 units, tiny to
/// moderate limits, with and without a target rate): whatever the limit
/// stops, the answer is valid by an independent check — the chosen links
/// excite every source component, the cost is theirs, the bound is below
/// it and the gap agrees; a met target is certified. Validity only, no
/// timing.
#[test]
fn family_plans_are_valid_under_time_limits() {
    for (k, limit, target) in [
        (0usize, 0.02, None),
        (4, 0.3, None),
        (7, 1.0, Some(0.02)),
        (9, 0.2, Some(0.05)),
    ] {
        let base = exmesh::family::problem(40, k, 0.03);
        let mut settings = base.settings.clone();
        settings.target_rate = target;
        let problem =
            Problem::from_parts(base.path.clone(), settings, base.nodes, base.links).unwrap();
        let table = ExcitationTable::build(&problem);
        let options = Options {
            time_limit: Some(std::time::Duration::from_secs_f64(limit)),
            progress: exmesh::progress::Sink::silent(),
            ..Default::default()
        };
        let p = plan::plan(&problem, &table, &options);
        let Some(cost) = p.cost else {
            assert!(
                matches!(p.status, PlanStatus::TimeLimit | PlanStatus::Infeasible),
                "member {k}: {:?}",
                p.status
            );
            continue;
        };
        let chosen = chosen_indices(&problem, &p);
        assert!(holds(&problem, &table, &chosen), "member {k}");
        let direct: f64 = chosen
            .iter()
            .filter(|&&c| !problem.links[c].installed)
            .map(|&c| problem.links[c].cost)
            .sum();
        assert!(
            (direct - cost).abs() < 1e-6,
            "member {k}: {direct} vs {cost}"
        );
        let lower = p.lower_bound.unwrap();
        assert!(lower <= cost + 1e-9, "member {k}");
        let gap = p.gap.unwrap();
        assert!(
            (gap - (cost - lower) / cost).abs() < 1e-9,
            "member {k}: gap {gap}"
        );
        if let Some(r) = &p.rate
            && r.met
        {
            assert!(r.certified.unwrap() >= r.target, "member {k}");
        }
    }
}
