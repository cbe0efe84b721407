//! What-if questions: retiring units, budgets, failures.

use super::fixtures::synthetic;
use super::planning::instance_strategy;
use exmesh::plan::{self, Options, PlanStatus};
use exmesh::problem::{LinkId, LinkSet, NodeId};
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
        let full = plan::plan(&problem, &table, &options);
        let in_place = LinkSet::new(
            full.links
                .iter()
                .map(|c| LinkId(problem.links.iter().position(|l| l.id == c.id).unwrap() as u32))
                .collect(),
        );
        let restrict = |_: &exmesh::Problem, keep: &[NodeId]| table.restricted(keep);
        let (reduced, _) = problem.without_units(&[unit], &LinkSet::default()).unwrap();
        let kept: Vec<NodeId> = (0..n as u32).map(NodeId).filter(|&v| v != unit).collect();
        let scratch = plan::plan(&reduced, &table.restricted(&kept), &options);
        for (before, equal) in [(in_place, false), (LinkSet::default(), true)] {
            let r = exmesh::whatif::retire::retire_with(&problem, &[unit], &[], &before, &options, &restrict).unwrap();
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

use super::fixtures::{Folder, exmesh, small_problem, small_problem_with_plan};

/// The small problem (a excites e1, b excites e2, c nothing; plan a<->b,
/// b->c): reasoning by hand from the condition (common practice) gives the
/// critical links and units. Losing b leaves {a} and {c} unexcited, the
/// failing a<->b leaves {a} and {b}, losing a leaves {b}, the failing b->c
/// leaves {c}; losing c leaves a<->b excited.
#[test]
fn stress_names_the_critical_links_and_units() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let run = exmesh(
        folder.dir.path(),
        &["stress", "problem.toml", "--plan", "plan.json", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["baseline_holds"], true);
    assert!(v["baseline_rate"].as_f64().unwrap() > 0.0);
    assert_eq!(v["critical_links"], serde_json::json!(["a<->b", "b->c"]));
    assert_eq!(v["critical_units"], serde_json::json!(["b", "a"]));
    let last = v["scenarios"].as_array().unwrap().last().unwrap().clone();
    assert_eq!(last["id"], "c");
    assert_eq!(last["condition_holds"], true);
    assert!(last["rate"].as_f64().unwrap() > 0.0);
}

/// The front starts at `plan`'s structural optimum and is monotone: more
/// cost, strictly more certified rate. A budget below the optimum exits 1.
#[test]
fn budget_front_is_monotone_and_starts_at_the_optimum() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    let plan = exmesh(dir, &["plan", "problem.toml", "--json"]);
    let plan: serde_json::Value = serde_json::from_str(&plan.stdout).unwrap();
    let run = exmesh(
        dir,
        &["budget", "problem.toml", "--json", "--svg", "front.svg"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let front = v["front"].as_array().unwrap();
    assert!(!front.is_empty());
    assert_eq!(front[0]["cost"], plan["cost"]);
    for pair in front.windows(2) {
        assert!(pair[1]["cost"].as_f64() > pair[0]["cost"].as_f64());
        assert!(pair[1]["rate"].as_f64() > pair[0]["rate"].as_f64());
    }
    for p in front {
        assert!(p["links"].is_array());
    }
    let svg = std::fs::read_to_string(folder.path("front.svg")).unwrap();
    assert!(svg.starts_with("<svg"));
    let small = exmesh(dir, &["budget", "problem.toml", "--max-cost", "1"]);
    assert_eq!(small.code, 1);
    assert!(small.stdout.contains("too small"), "{}", small.stdout);
}

/// Retiring c: b->c goes with it, a<->b (installed) stays, nothing is
/// added; an unknown unit exits 2 naming the flag.
#[test]
fn retire_reports_the_diff() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &[
            "retire",
            "problem.toml",
            "--node",
            "c",
            "--plan",
            "plan.json",
            "--json",
            "--out",
            "new.json",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["retired"], serde_json::json!(["c"]));
    assert_eq!(v["kept"], serde_json::json!(["a<->b"]));
    assert_eq!(v["added"], serde_json::json!([]));
    assert_eq!(v["removed_with_units"], serde_json::json!(["b->c"]));
    assert_eq!(v["added_cost"], 0.0);
    assert!(folder.path("new.json").exists());
    let bad = exmesh(dir, &["retire", "problem.toml", "--node", "zz"]);
    assert_eq!(bad.code, 2);
    assert!(
        bad.stderr.contains("--node") && bad.stderr.contains("zz"),
        "{}",
        bad.stderr
    );
}

/// Byte-identical JSON across runs for the what-if commands, the rate stage
/// and simulation.
#[test]
fn what_if_json_is_deterministic() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let text = super::fixtures::small_problem_with_target("0.3");
    folder.write("target.toml", &text);
    let dir = folder.dir.path();
    for args in [
        &["stress", "problem.toml", "--plan", "plan.json", "--json"][..],
        &["budget", "problem.toml", "--json"][..],
        &["plan", "target.toml", "--json", "--survive", "link"][..],
        &["retire", "problem.toml", "--node", "a", "--json"][..],
        &[
            "simulate",
            "problem.toml",
            "--plan",
            "plan.json",
            "--truth",
            "1,1",
            "--json",
        ][..],
    ] {
        let a = exmesh(dir, args);
        let b = exmesh(dir, args);
        assert!(!a.stdout.is_empty(), "{args:?}: {}", a.stderr);
        assert_eq!(a.code, b.code);
        assert_eq!(a.stdout, b.stdout, "{args:?}");
    }
}

/// Losing a (the only unit exciting e1) leaves b and c without e1 whatever
/// the links: `--survive unit` is infeasible and says which loss breaks it;
/// `--survive link` also fails (a->c and b->c are one-way, a<->b is the only
/// link between a and b).
#[test]
fn survival_shortfalls_name_the_failure() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &[
            "plan",
            "problem.toml",
            "--survive",
            "unit",
            "--out",
            "p.json",
        ],
    );
    assert_eq!(run.code, 1, "{}", run.stderr);
    assert!(
        run.stdout.contains("after the loss of a single unit"),
        "{}",
        run.stdout
    );
    assert!(
        run.stdout.contains("if unit a is lost") || run.stdout.contains("if unit b is lost"),
        "{}",
        run.stdout
    );
    assert!(!folder.path("p.json").exists());
    let run = exmesh(
        dir,
        &["plan", "problem.toml", "--survive", "link", "--json"],
    );
    assert_eq!(run.code, 1, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["status"], "infeasible");
    assert_eq!(v["robustness"]["survive"], "link");
    assert!(
        v["shortfalls"][0]["remedy"]
            .as_str()
            .unwrap()
            .contains("fails")
    );
}

/// A failed link: on the small problem (a excites e1, b excites e2, c
/// nothing; a<->b installed, plan a<->b + b->c) the failing b->c leaves c
/// reachable only through a->c, so the re-plan adds a->c at cost 4
/// (reasoning by hand from the condition; common practice). The written
/// problem loads, lists no b->c, marks a<->b installed, and `plan` on it
/// costs what the re-plan's additions cost; `check` accepts the new plan
/// on it; a retired unit is gone from `simulate` on the written problem.
#[test]
fn a_failed_link_is_replanned_and_the_problem_carried_forward() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    std::fs::create_dir_all(dir.join("after")).unwrap();
    let run = exmesh(
        dir,
        &[
            "retire",
            "problem.toml",
            "--link",
            "b,c",
            "--plan",
            "plan.json",
            "--json",
            "--out",
            "after/new.json",
            "--write-problem",
            "after/problem.toml",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["failed_links"], serde_json::json!(["b->c"]));
    assert_eq!(v["retired"], serde_json::json!([]));
    assert_eq!(v["kept"], serde_json::json!(["a<->b"]));
    assert_eq!(v["added"], serde_json::json!(["a->c"]));
    assert_eq!(v["added_cost"], 4.0);
    // The written problem, from its own folder.
    let written = std::fs::read_to_string(dir.join("after/problem.toml")).unwrap();
    assert!(!written.contains("\"b->c\""), "{written}");
    assert!(written.contains("logs/a.csv"), "{written}");
    let after = dir.join("after");
    let plan = exmesh(&after, &["plan", "problem.toml", "--json"]);
    assert_eq!(plan.code, 0, "{}", plan.stderr);
    let p: serde_json::Value = serde_json::from_str(&plan.stdout).unwrap();
    assert_eq!(p["cost"], 4.0);
    let installed: Vec<&serde_json::Value> = p["links"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|l| l["installed"] == true)
        .collect();
    assert_eq!(installed.len(), 1);
    assert_eq!(installed[0]["id"], "a<->b");
    let check = exmesh(&after, &["check", "problem.toml", "--plan", "new.json"]);
    assert_eq!(check.code, 0, "{}{}", check.stdout, check.stderr);

    // Retiring c and writing the problem: simulate no longer runs c.
    let run = exmesh(
        dir,
        &[
            "retire",
            "problem.toml",
            "--node",
            "c",
            "--plan",
            "plan.json",
            "--out",
            "after/new2.json",
            "--write-problem",
            "after/two.toml",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let sim = exmesh(
        &after,
        &[
            "simulate",
            "two.toml",
            "--plan",
            "new2.json",
            "--json",
            "--truth",
            "1,2",
        ],
    );
    assert_eq!(sim.code, 0, "{}", sim.stderr);
    let s: serde_json::Value = serde_json::from_str(&sim.stdout).unwrap();
    let units: Vec<&str> = s["units"]
        .as_array()
        .unwrap()
        .iter()
        .map(|u| u["node"].as_str().unwrap())
        .collect();
    assert_eq!(units, vec!["a", "b"]);
}

/// `--link` names a candidate as plan files do; an unknown unit, no
/// candidate, or several candidates between the two units exit 2 naming
/// the flag and the matches, and write nothing.
#[test]
fn failed_links_are_named_unambiguously() {
    let folder = Folder::new();
    small_problem(&folder);
    let text = std::fs::read_to_string(folder.path("problem.toml")).unwrap();
    folder.write(
        "problem.toml",
        &format!("{text}\n[[link]]\nbetween = [\"b\", \"c\"]\ncost = 9.0\n"),
    );
    let dir = folder.dir.path();
    for (arg, words) in [
        ("b,zz", "unknown unit \"zz\""),
        ("c,a", "no candidate link joins c to a"),
        ("b,c", "ambiguous: 2 candidate links join b and c: b->c"),
        ("bc", "neither a candidate link id nor FROM,TO"),
    ] {
        let run = exmesh(
            dir,
            &["retire", "problem.toml", "--link", arg, "--out", "x.json"],
        );
        assert_eq!(run.code, 2, "{arg}: {}", run.stderr);
        assert!(
            run.stderr.contains("--link") && run.stderr.contains(words),
            "{arg}: {}",
            run.stderr
        );
        assert!(!folder.path("x.json").exists());
    }
    // By id: the two-way one.
    let run = exmesh(
        dir,
        &["retire", "problem.toml", "--link", "b<->c", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["failed_links"], serde_json::json!(["b<->c"]));
}

/// Writing a problem file and loading it back gives the same problem
/// (settings, units, logs, every candidate with its ends, cost, weight and
/// state) for both demos, written into another folder.
#[test]
fn a_written_problem_loads_back_the_same() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let folder = Folder::new();
    std::fs::create_dir_all(folder.path("elsewhere/deeper")).unwrap();
    for demo in ["plateau-masts", "delta-substations"] {
        let original =
            exmesh::problem::load(&root.join(format!("problems/{demo}/problem.toml"))).unwrap();
        let target = folder.path(&format!("elsewhere/deeper/{demo}.toml"));
        std::fs::write(&target, original.to_toml(&target, &["a header".into()])).unwrap();
        let back = exmesh::problem::load(&target).unwrap();
        assert_eq!(back.settings, original.settings, "{demo}");
        assert_eq!(back.nodes.len(), original.nodes.len());
        for (a, b) in back.nodes.iter().zip(&original.nodes) {
            assert_eq!(a.id, b.id);
            assert_eq!(a.position, b.position);
            assert_eq!(a.log.t, b.log.t);
            assert_eq!(a.log.psi, b.log.psi);
        }
        assert_eq!(back.links.len(), original.links.len());
        for (a, b) in back.links.iter().zip(&original.links) {
            assert_eq!(
                (&a.id, a.ends, a.cost, a.weight, a.installed, a.required),
                (&b.id, b.ends, b.cost, b.weight, b.installed, b.required),
                "{demo}"
            );
        }
        assert_eq!(back.domain, original.domain);
    }
}

/// `budget --out-dir` writes every front point as a plan file that `check`
/// accepts, with the same links; `check` certifies the rate the front
/// lists for it (the same certificate, recomputed independently of the
/// sweep). The text names the links each point adds over the previous one.
#[test]
fn front_points_are_plan_files() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &["budget", "problem.toml", "--json", "--out-dir", "front"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let points = v["front"].as_array().unwrap();
    assert!(!points.is_empty());
    for (k, p) in points.iter().enumerate() {
        let file = format!("front/front-{:02}.json", k + 1);
        let check = exmesh(dir, &["check", "problem.toml", "--plan", &file, "--json"]);
        assert!(check.code <= 1, "{file}: {}", check.stderr);
        let c: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
        let mut listed: Vec<&str> = p["links"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l.as_str().unwrap())
            .collect();
        let mut checked: Vec<&str> = c["links"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l.as_str().unwrap())
            .collect();
        listed.sort_unstable();
        checked.sort_unstable();
        assert_eq!(listed, checked, "{file}");
        assert_eq!(c["certificate"]["rate"], p["rate"], "{file}");
    }
    assert!(
        !folder
            .path(&format!("front/front-{:02}.json", points.len() + 1))
            .exists()
    );
    let text = exmesh(dir, &["budget", "problem.toml"]);
    assert!(text.stdout.contains("change from the row above"));
    assert!(text.stdout.contains("(the structural plan)"));
    if points.len() > 1 {
        assert!(text.stdout.contains("adds "), "{}", text.stdout);
    }
}

/// `compare` agrees with `check` and `stress` run on each plan alone, and
/// splits the links into only-A, only-B and both.
#[test]
fn compare_agrees_with_check_and_stress() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write(
        "other.json",
        r#"{"links": [{"from": "a", "to": "b", "two_way": true}, {"from": "a", "to": "c", "two_way": false}]}"#,
    );
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &[
            "compare",
            "problem.toml",
            "plan.json",
            "other.json",
            "--json",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["only_in_a"], serde_json::json!(["b->c"]));
    assert_eq!(v["only_in_b"], serde_json::json!(["a->c"]));
    assert_eq!(v["in_both"], serde_json::json!(["a<->b"]));
    for (side, file) in [("a", "plan.json"), ("b", "other.json")] {
        let check = exmesh(dir, &["check", "problem.toml", "--plan", file, "--json"]);
        let c: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
        let stress = exmesh(dir, &["stress", "problem.toml", "--plan", file, "--json"]);
        let s: serde_json::Value = serde_json::from_str(&stress.stdout).unwrap();
        let got = &v[side];
        assert_eq!(got["cost"], c["cost"], "{side}");
        assert_eq!(got["verdict"], c["verdict"], "{side}");
        assert_eq!(got["rate"], c["certificate"]["rate"], "{side}");
        assert_eq!(got["source_components"], c["source_components"], "{side}");
        assert_eq!(got["critical_links"], s["critical_links"], "{side}");
        assert_eq!(got["critical_units"], s["critical_units"], "{side}");
    }
    let text = exmesh(dir, &["compare", "problem.toml", "plan.json", "other.json"]);
    assert!(text.stdout.contains("only in A: b->c"), "{}", text.stdout);
    let bad = exmesh(
        dir,
        &["compare", "problem.toml", "plan.json", "missing.json"],
    );
    assert_eq!(bad.code, 2);
    assert!(bad.stderr.contains("missing.json"), "{}", bad.stderr);
}
