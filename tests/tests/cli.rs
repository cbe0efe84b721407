//! The real binary on files: verdicts, exit codes, JSON keys, determinism,
//! and every kind of bad input (exit 2, file and line named, no panic).

use super::fixtures::{
    Folder, SMALL_PROBLEM, constant_log, exmesh, log_text, small_problem, small_problem_with_plan,
};

fn line_of(text: &str, needle: &str) -> usize {
    text.lines()
        .position(|l| l.contains(needle))
        .expect("needle in text")
        + 1
}

/// Runs `check --all` on the small problem after `edit`; expects exit 2 and
/// a message that starts with `file:line:` and contains `words`.
fn expect_bad(edit: impl FnOnce(&Folder), file: &str, line: Option<usize>, words: &str) {
    let folder = Folder::new();
    small_problem(&folder);
    edit(&folder);
    let run = exmesh(folder.dir.path(), &["check", "problem.toml", "--all"]);
    assert_eq!(run.code, 2, "stderr: {}", run.stderr);
    assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
    let place = match line {
        Some(l) => format!("{file}:{l}:"),
        None => format!("{file}:"),
    };
    assert!(
        run.stderr.contains(&place),
        "expected `{place}` in: {}",
        run.stderr
    );
    assert!(
        run.stderr.contains(words),
        "expected `{words}` in: {}",
        run.stderr
    );
    assert!(
        run.stdout.is_empty(),
        "no output on bad input: {}",
        run.stdout
    );
}

fn edit_problem(from: &str, to: &str) -> impl FnOnce(&Folder) {
    let text = SMALL_PROBLEM.replacen(from, to, 1);
    assert_ne!(text, SMALL_PROBLEM, "edit must change the problem");
    move |f: &Folder| {
        f.write("problem.toml", &text);
    }
}

#[test]
fn malformed_toml() {
    expect_bad(
        edit_problem("parameters = 2", "parameters = "),
        "problem.toml",
        Some(3),
        "malformed",
    );
}

#[test]
fn unknown_key() {
    expect_bad(
        edit_problem("stride = 1.0", "stride = 1.0\ncolour = \"red\""),
        "problem.toml",
        Some(6),
        "colour",
    );
}

#[test]
fn unknown_node_in_link() {
    let line = line_of(SMALL_PROBLEM, "between");
    expect_bad(
        edit_problem("between = [\"a\", \"b\"]", "between = [\"a\", \"zz\"]"),
        "problem.toml",
        Some(line),
        "unknown unit \"zz\"",
    );
}

#[test]
fn duplicate_node_ids() {
    let line = line_of(SMALL_PROBLEM, "id = \"c\"");
    expect_bad(
        edit_problem("id = \"c\"", "id = \"a\""),
        "problem.toml",
        Some(line),
        "duplicate unit id",
    );
}

#[test]
fn negative_cost() {
    let line = line_of(SMALL_PROBLEM, "cost = 3.0");
    expect_bad(
        edit_problem("cost = 3.0", "cost = -3.0"),
        "problem.toml",
        Some(line),
        "expected a finite cost from 0 to",
    );
}

#[test]
fn non_finite_cost() {
    let line = line_of(SMALL_PROBLEM, "cost = 3.0");
    expect_bad(
        edit_problem("cost = 3.0", "cost = nan"),
        "problem.toml",
        Some(line),
        "finite cost",
    );
    expect_bad(
        edit_problem("cost = 3.0", "cost = inf"),
        "problem.toml",
        Some(line),
        "finite cost",
    );
}

#[test]
fn missing_log_file() {
    let line = line_of(SMALL_PROBLEM, "logs/b.csv");
    expect_bad(
        edit_problem("logs/b.csv", "logs/missing.csv"),
        "problem.toml",
        Some(line),
        "cannot read log file",
    );
}

#[test]
fn wrong_column_count() {
    expect_bad(
        |f| {
            f.write("logs/a.csv", "t,j,psi1,psi2,y\n0,0,1,0,0\n1,0,1,0\n");
        },
        "logs/a.csv",
        Some(3),
        "expected 5 columns",
    );
}

#[test]
fn nan_and_inf_in_log() {
    expect_bad(
        |f| {
            f.write("logs/a.csv", "t,j,psi1,psi2,y\n0,0,1,0,0\n1,0,NaN,0,0\n");
        },
        "logs/a.csv",
        Some(3),
        "finite number",
    );
    expect_bad(
        |f| {
            f.write(
                "logs/b.csv",
                "# header next\nt,j,psi1,psi2,y\n0,0,1,0,0\n1,0,1,-inf,0\n",
            );
        },
        "logs/b.csv",
        Some(4),
        "finite number",
    );
}

#[test]
fn time_going_backwards() {
    expect_bad(
        |f| {
            f.write(
                "logs/a.csv",
                "t,j,psi1,psi2,y\n0,0,1,0,0\n2,0,1,0,0\n1,0,1,0,0\n",
            );
        },
        "logs/a.csv",
        Some(4),
        "time goes backwards",
    );
}

#[test]
fn jump_rows_disagree_on_t() {
    expect_bad(
        |f| {
            f.write(
                "logs/c.csv",
                "t,j,psi1,psi2,y\n0,0,1,0,0\n5,0,1,0,0\n5.5,1,1,0,0\n10,1,1,0,0\n",
            );
        },
        "logs/c.csv",
        Some(4),
        "a jump's two rows must share t",
    );
}

#[test]
fn parameter_dimension_mismatch() {
    expect_bad(
        |f| {
            f.write(
                "logs/b.csv",
                "t,j,psi1,psi2,psi3,y\n0,0,1,0,0,0\n10,0,1,0,0,0\n",
            );
        },
        "logs/b.csv",
        Some(1),
        "parameters = 2",
    );
}

#[test]
fn logs_too_short_for_the_window() {
    let line = line_of(SMALL_PROBLEM, "window = 4.0");
    expect_bad(
        edit_problem("window = 4.0", "window = 40.0"),
        "problem.toml",
        Some(line),
        "no window fits",
    );
}

#[test]
fn link_without_ends() {
    expect_bad(
        edit_problem("from = \"a\"\nto = \"c\"", "to = \"c\""),
        "problem.toml",
        Some(line_of(SMALL_PROBLEM, "from = \"a\"") - 1),
        "expected either",
    );
}

#[test]
fn verdicts_and_exit_codes() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    // a<->b together excite both directions; c listens.
    let all = exmesh(dir, &["check", "problem.toml", "--all"]);
    assert_eq!(all.code, 0, "{}", all.stderr);
    assert!(
        all.stdout
            .contains("structure, gains and certificate hold — every estimate converges"),
        "{}",
        all.stdout
    );
    assert!(all.stdout.contains("Cautions"));
    // Installed only: {a,b} excited, c alone is a source and not excited.
    let installed = exmesh(dir, &["check", "problem.toml", "--installed", "--json"]);
    assert_eq!(installed.code, 1);
    let v: serde_json::Value = serde_json::from_str(&installed.stdout).unwrap();
    assert_eq!(v["condition_holds"], false);
    assert_eq!(v["min_excitation"], 0.5);
    let comps = v["source_components"].as_array().unwrap();
    assert_eq!(comps.len(), 2);
    assert_eq!(comps[0]["nodes"], serde_json::json!(["a", "b"]));
    assert_eq!(comps[0]["excited"], true);
    assert_eq!(comps[1]["nodes"], serde_json::json!(["c"]));
    assert_eq!(comps[1]["excited"], false);
    assert_eq!(comps[1]["excitation"], 0.0);
    assert_eq!(comps[1]["weakest_direction"].as_array().unwrap().len(), 2);
    // Cheapest candidate links into {c} first: b->c (3), then a->c (4).
    assert_eq!(
        comps[1]["entering_candidates"],
        serde_json::json!(["b->c", "a->c"])
    );
    assert!(v["cautions"].as_array().unwrap().len() >= 3);
    // Usage error: no link choice.
    assert_eq!(exmesh(dir, &["check", "problem.toml"]).code, 2);
}

#[test]
fn json_is_byte_identical_across_runs() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    for args in [
        &["check", "problem.toml", "--all", "--json"][..],
        &["excitation", "problem.toml", "--json"][..],
    ] {
        let a = exmesh(dir, args);
        let b = exmesh(dir, args);
        assert_eq!(a.code, b.code);
        assert!(!a.stdout.is_empty());
        assert_eq!(a.stdout, b.stdout);
    }
}

#[test]
fn excitation_reports_rank_and_shares() {
    let folder = Folder::new();
    small_problem(&folder);
    // Unit c: flows along e1, one jump along e2 at t = 5.
    let rows = vec![
        (0.0, 0, vec![1.0, 0.0]),
        (5.0, 0, vec![0.0, 2.0]),
        (5.0, 1, vec![1.0, 0.0]),
        (10.0, 1, vec![1.0, 0.0]),
    ];
    folder.write("logs/c.csv", &log_text(2, &rows));
    let run = exmesh(folder.dir.path(), &["excitation", "problem.toml", "--json"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let c = &v["units"][2];
    assert_eq!(c["id"], "c");
    assert_eq!(c["rank"], 2);
    // Flow trace 10 (|ψ|² = 1 for 10 s), jump trace 4/5.
    let jump_share = c["jump_share"].as_f64().unwrap();
    assert!((jump_share - 0.8 / 10.8).abs() < 1e-12, "{jump_share}");
    assert_eq!(v["pooled"]["excited"], true);
}

#[test]
fn plan_files_are_resolved_against_candidates() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    folder.write(
        "plan.json",
        "{\n  \"links\": [\n    {\"from\": \"b\", \"to\": \"a\", \"two_way\": true},\n    {\"from\": \"a\", \"to\": \"c\", \"two_way\": false, \"cost\": 4.0}\n  ]\n}\n",
    );
    let ok = exmesh(
        dir,
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
    );
    assert_eq!(ok.code, 0, "{}", ok.stderr);
    let v: serde_json::Value = serde_json::from_str(&ok.stdout).unwrap();
    assert_eq!(v["links"], serde_json::json!(["a<->b", "a->c"]));
    assert_eq!(v["cost"], 4.0);

    folder.write("bad.json", "{\n  \"links\": [\n    {\"from\": \"a\", \"to\": \"b\", \"two_way\": true},\n    {\"from\": \"c\", \"to\": \"a\", \"two_way\": false}\n  ]\n}\n");
    let run = exmesh(dir, &["check", "problem.toml", "--plan", "bad.json"]);
    assert_eq!(run.code, 2);
    assert!(
        run.stderr.contains("bad.json:4:") && run.stderr.contains("not among the candidate links"),
        "{}",
        run.stderr
    );

    folder.write(
        "who.json",
        "{\"links\": [\n{\"from\": \"a\", \"to\": \"q\", \"two_way\": true}]}",
    );
    let run = exmesh(dir, &["check", "problem.toml", "--plan", "who.json"]);
    assert_eq!(run.code, 2);
    assert!(
        run.stderr.contains("who.json:2:") && run.stderr.contains("unknown unit \"q\""),
        "{}",
        run.stderr
    );

    folder.write("broken.json", "{\"links\": [\n{\"from\": \"a\",,}]}");
    let run = exmesh(dir, &["check", "problem.toml", "--plan", "broken.json"]);
    assert_eq!(run.code, 2);
    assert!(run.stderr.contains("broken.json:2:"), "{}", run.stderr);
}

#[test]
fn generated_candidates_follow_positions() {
    let folder = Folder::new();
    folder.write("logs/a.csv", &constant_log(&[1.0]));
    folder.write("logs/b.csv", &constant_log(&[0.0]));
    folder.write("logs/c.csv", &constant_log(&[0.0]));
    folder.write(
        "problem.toml",
        "[network]\nparameters = 1\nwindow = 2.0\n[candidates]\nrange = 1.5\nfixed_cost = 100.0\ncost_per_km = 10.0\n\
         [[node]]\nid = \"a\"\nlog = \"logs/a.csv\"\nposition = [0.0, 0.0]\n\
         [[node]]\nid = \"b\"\nlog = \"logs/b.csv\"\nposition = [1.0, 0.0]\n\
         [[node]]\nid = \"c\"\nlog = \"logs/c.csv\"\nposition = [2.0, 0.0]\n",
    );
    let run = exmesh(
        folder.dir.path(),
        &["check", "problem.toml", "--all", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    // a–b and b–c are within 1.5 km, a–c (2 km) is not: 2 links at 110 each.
    assert_eq!(v["links"], serde_json::json!(["a<->b", "b<->c"]));
    assert_eq!(v["cost"], 220.0);
}

/// Positions as latitude/longitude: three units on the equator at
/// longitudes 0°, 0.01° and 0.02°; one hundredth of a degree of the
/// equator is πR/18000 = 1.1119… km for R = 6371.0088 km (closed form), so
/// with a 1.5 km range a–b and b–c are candidates and a–c (2.2239 km) is
/// not, each costing 100 + 10·1.1119…. Mixed kinds and out-of-range
/// degrees exit 2 at their line.
#[test]
fn candidates_follow_latitude_and_longitude() {
    let folder = Folder::new();
    folder.write("logs/a.csv", &constant_log(&[1.0]));
    folder.write("logs/b.csv", &constant_log(&[0.0]));
    folder.write("logs/c.csv", &constant_log(&[0.0]));
    let text = "[network]\nparameters = 1\nwindow = 2.0\n[candidates]\nrange = 1.5\nfixed_cost = 100.0\ncost_per_km = 10.0\n\
         [[node]]\nid = \"a\"\nlog = \"logs/a.csv\"\nlat_lon = [0.0, 0.0]\n\
         [[node]]\nid = \"b\"\nlog = \"logs/b.csv\"\nlat_lon = [0.0, 0.01]\n\
         [[node]]\nid = \"c\"\nlog = \"logs/c.csv\"\nlat_lon = [0.0, 0.02]\n";
    folder.write("problem.toml", text);
    let run = exmesh(
        folder.dir.path(),
        &["check", "problem.toml", "--all", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["links"], serde_json::json!(["a<->b", "b<->c"]));
    let km = std::f64::consts::PI * 6371.0088 / 18000.0;
    let cost = v["cost"].as_f64().unwrap();
    assert!((cost - 2.0 * (100.0 + 10.0 * km)).abs() < 1e-6, "{cost}");
    for (from, to, words) in [
        (
            "lat_lon = [0.0, 0.02]",
            "position = [0.0, 2.0]",
            "one kind for the whole network",
        ),
        (
            "lat_lon = [0.0, 0.02]",
            "lat_lon = [91.0, 0.02]",
            "latitude from -90 to 90",
        ),
    ] {
        let line = line_of(text, from);
        folder.write("problem.toml", &text.replace(from, to));
        let bad = exmesh(folder.dir.path(), &["check", "problem.toml", "--all"]);
        assert_eq!(bad.code, 2, "{}", bad.stderr);
        assert!(
            bad.stderr.contains(&format!("problem.toml:{line}:")) && bad.stderr.contains(words),
            "{}",
            bad.stderr
        );
    }
}

#[test]
fn both_demos_run() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    for demo in [
        "problems/plateau-masts/problem.toml",
        "problems/delta-substations/problem.toml",
    ] {
        // The certificate of every candidate at once is slow on 40 units;
        // the plan-based checks below certify the demos.
        // Every candidate at once: the structure holds; on the plateau demo
        // some mast then listens to too many links for the gain condition
        // (docs/theory.md §6), so the verdict is `gains_fail`, exit 1.
        let all = exmesh(root, &["check", demo, "--all", "--skip-rate", "--json"]);
        let v: serde_json::Value = serde_json::from_str(&all.stdout).unwrap();
        assert_eq!(v["condition_holds"], true, "{demo}");
        let expected = if v["gains_ok"] == true { 0 } else { 1 };
        assert_eq!(all.code, expected, "{demo}: {}", all.stderr);
        let ex = exmesh(root, &["excitation", demo, "--json"]);
        assert_eq!(ex.code, 0, "{demo}: {}", ex.stderr);
        let v: serde_json::Value = serde_json::from_str(&ex.stdout).unwrap();
        let units = v["units"].as_array().unwrap();
        let alone = units.iter().filter(|u| u["excited"] == true).count();
        // Most units are not excited alone, so links matter.
        assert!(
            alone * 4 < units.len(),
            "{demo}: {alone} of {} excited alone",
            units.len()
        );
        let flow_only = units
            .iter()
            .filter(|u| u["jump_share"] == 0.0 && u["flow_share"] == 1.0)
            .count();
        let jump_only = units
            .iter()
            .filter(|u| u["flow_share"] == 0.0 && u["jump_share"] == 1.0)
            .count();
        let both = units
            .iter()
            .filter(|u| {
                u["flow_share"].as_f64().unwrap() > 0.0 && u["jump_share"].as_f64().unwrap() > 0.0
            })
            .count();
        assert!(
            flow_only > 0 && jump_only > 0 && both > 0,
            "{demo}: mix of flow-only, jump-only and both"
        );
    }
}

#[test]
fn check_reports_the_certificate_keys() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let run = exmesh(
        folder.dir.path(),
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let c = &v["certificate"];
    for key in [
        "rate",
        "window",
        "transient_factor",
        "time_to_1pct",
        "gains_ok",
    ] {
        assert!(c.get(key).is_some(), "missing {key}");
    }
    assert!(c["rate"].as_f64().unwrap() > 0.0);
    assert!(c["transient_factor"].as_f64().unwrap() >= 1.0);
    assert_eq!(c["gains_ok"], true);
    // Not excited: no rate, and the reason says why.
    let run = exmesh(
        folder.dir.path(),
        &["check", "problem.toml", "--installed", "--json"],
    );
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert!(v["certificate"]["rate"].is_null());
    assert!(
        v["certificate"]["reason"]
            .as_str()
            .unwrap()
            .contains("not jointly excited")
    );
    // --skip-rate leaves the key out.
    let run = exmesh(
        folder.dir.path(),
        &["check", "problem.toml", "--all", "--json", "--skip-rate"],
    );
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert!(v.get("certificate").is_none());
}

#[test]
fn simulate_writes_csv_and_svg() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &[
            "simulate",
            "problem.toml",
            "--plan",
            "plan.json",
            "--truth",
            "1,-2",
            "--out",
            "traj.csv",
            "--svg",
            "errors.svg",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("under the certified bound"),
        "{}",
        run.stdout
    );
    let csv = std::fs::read_to_string(folder.path("traj.csv")).unwrap();
    // The cautions come first as `#` lines, then the header.
    assert!(csv.starts_with("# Caution: "));
    let mut lines = csv.lines().skip_while(|l| l.starts_with('#'));
    assert_eq!(lines.next().unwrap(), "t,err_a,err_b,err_c,total,envelope");
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    assert!(rows.len() > 5);
    // Starts from zero: every unit's error is |θ| = √5; it decays.
    assert!((rows[0][1] - 5f64.sqrt()).abs() < 1e-8);
    let last = &rows[rows.len() - 1];
    assert!(last[4] < rows[0][4] && last[4] <= last[5]);
    let svg = std::fs::read_to_string(folder.path("errors.svg")).unwrap();
    assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
    // The logged outputs are zero: the pooled fit is θ = 0, the estimates stay 0.
    let run = exmesh(
        dir,
        &["simulate", "problem.toml", "--plan", "plan.json", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["reference_kind"], "pooled_fit");
    assert_eq!(v["reference"], serde_json::json!([0.0, 0.0]));
    // Bad vectors: exit 2 naming the flag, no files written.
    for (flag, value, words) in [
        ("--truth", "1,x", "numbers of size at most"),
        ("--truth", "1,2,3", "3 values"),
        ("--initial", "nan,1", "numbers of size at most"),
    ] {
        let run = exmesh(
            dir,
            &[
                "simulate",
                "problem.toml",
                "--plan",
                "plan.json",
                flag,
                value,
                "--out",
                "bad.csv",
            ],
        );
        assert_eq!(run.code, 2, "{flag} {value}: {}", run.stderr);
        assert!(
            run.stderr.contains(flag) && run.stderr.contains(words),
            "{}",
            run.stderr
        );
        assert!(!folder.path("bad.csv").exists());
    }
}

/// A jump gain above 2 can never converge (the own jump map expands the
/// error along a large regressor, docs/theory.md §3): rejected at load with
/// the line and the allowed range.
#[test]
fn jump_gain_above_two_is_rejected() {
    let line = line_of(SMALL_PROBLEM, "min_excitation = 0.5") + 1;
    expect_bad(
        edit_problem(
            "min_excitation = 0.5\n",
            "min_excitation = 0.5\n[estimator]\njump_gain = 6.0\n",
        ),
        "problem.toml",
        Some(line + 1),
        "a number from 0 to 2",
    );
}

/// Plan files may list links by id, as `budget`, `retire` and `check`
/// print them: the same link set as the objects; an unknown or repeated
/// id exits 2 at its line.
#[test]
fn plan_files_accept_link_ids() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write("ids.json", "{\"links\": [\n\"a<->b\",\n\"b->c\"\n]}");
    let dir = folder.dir.path();
    let by_object = exmesh(
        dir,
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
    );
    let by_id = exmesh(
        dir,
        &["check", "problem.toml", "--plan", "ids.json", "--json"],
    );
    assert_eq!(by_id.code, 0, "{}", by_id.stderr);
    assert_eq!(by_object.stdout, by_id.stdout);
    for (text, line, words) in [
        (
            "{\"links\": [\n\"a<->b\",\n\"x->y\"\n]}",
            3,
            "unknown link id \"x->y\"",
        ),
        (
            "{\"links\": [\n\"a<->b\",\n\"a<->b\"\n]}",
            3,
            "listed twice (also on line 2)",
        ),
    ] {
        folder.write("bad.json", text);
        let run = exmesh(dir, &["check", "problem.toml", "--plan", "bad.json"]);
        assert_eq!(run.code, 2, "{}", run.stderr);
        assert!(
            run.stderr.contains(&format!("bad.json:{line}:")) && run.stderr.contains(words),
            "{}",
            run.stderr
        );
    }
}

/// `init` on a folder of logs: one unit per log (file stem), p from the
/// columns, a range that connects the units (1.5 × the longest link of a
/// minimum spanning tree, recomputed here by brute force over all spanning
/// trees' bottleneck: the smallest r whose r-graph is connected), and a
/// file the other commands load. Bad starts exit 2 naming the flag or file.
#[test]
fn init_writes_a_problem_that_loads() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let folder = Folder::new();
    let dir = folder.dir.path();
    std::fs::create_dir_all(dir.join("logs")).unwrap();
    let units = [
        ("mast-north", 0.0, 3.0),
        ("mast-cairn", 1.1, 2.6),
        ("mast-fold", 2.0, 3.1),
        ("mast-weir", 0.4, 1.6),
    ];
    let mut csv = String::from("id,x_km,y_km\n");
    for (id, x, y) in units {
        std::fs::copy(
            root.join(format!("problems/plateau-masts/logs/{id}.csv")),
            dir.join(format!("logs/{id}.csv")),
        )
        .unwrap();
        csv.push_str(&format!("{id},{x},{y}\n"));
    }
    folder.write("units.csv", &csv);
    let run = exmesh(
        dir,
        &[
            "init",
            ".",
            "--logs",
            "logs/*.csv",
            "--positions",
            "units.csv",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(run.stdout.contains("it loads"), "{}", run.stdout);
    let text = std::fs::read_to_string(dir.join("problem.toml")).unwrap();
    let ex = exmesh(dir, &["excitation", "problem.toml", "--json"]);
    assert_eq!(ex.code, 0, "{}", ex.stderr);
    let v: serde_json::Value = serde_json::from_str(&ex.stdout).unwrap();
    assert_eq!(v["parameters"], 3);
    let mut ids: Vec<&str> = v["units"]
        .as_array()
        .unwrap()
        .iter()
        .map(|u| u["id"].as_str().unwrap())
        .collect();
    ids.sort_unstable();
    let mut want: Vec<&str> = units.iter().map(|u| u.0).collect();
    want.sort_unstable();
    assert_eq!(ids, want);
    // The bottleneck distance: the smallest pairwise distance r at which
    // the r-graph is connected (equals the longest MST link).
    let d = |a: (&str, f64, f64), b: (&str, f64, f64)| (a.1 - b.1).hypot(a.2 - b.2);
    let mut cands: Vec<f64> = Vec::new();
    for a in units {
        for b in units {
            cands.push(d(a, b));
        }
    }
    cands.sort_by(f64::total_cmp);
    let connected = |r: f64| {
        let mut seen = vec![false; units.len()];
        let mut stack = vec![0];
        seen[0] = true;
        while let Some(u) = stack.pop() {
            for v in 0..units.len() {
                if !seen[v] && d(units[u], units[v]) <= r {
                    seen[v] = true;
                    stack.push(v);
                }
            }
        }
        seen.iter().all(|&s| s)
    };
    let bottleneck = cands.into_iter().find(|&r| connected(r)).unwrap();
    let range: f64 = text
        .lines()
        .find_map(|l| l.strip_prefix("range = "))
        .unwrap()
        .parse()
        .unwrap();
    assert!(
        (range - 1.5 * bottleneck).abs() < 1e-3,
        "{range} vs {bottleneck}"
    );

    // Never overwrites; no match; mixed p; a unit without a position.
    let again = exmesh(dir, &["init", ".", "--logs", "logs/*.csv"]);
    assert_eq!(again.code, 2);
    assert!(again.stderr.contains("--out"), "{}", again.stderr);
    let none = exmesh(
        dir,
        &["init", ".", "--logs", "logs/*.txt", "--out", "b.toml"],
    );
    assert_eq!(none.code, 2);
    assert!(none.stderr.contains("--logs"), "{}", none.stderr);
    folder.write("logs/odd.csv", "t,j,psi1\n0,0,1\n1,0,1\n");
    let mixed = exmesh(
        dir,
        &["init", ".", "--logs", "logs/*.csv", "--out", "c.toml"],
    );
    assert_eq!(mixed.code, 2);
    assert!(mixed.stderr.contains("odd.csv:1:"), "{}", mixed.stderr);
    std::fs::remove_file(dir.join("logs/odd.csv")).unwrap();
    folder.write("units.csv", "id,x_km,y_km\nmast-north,0,3\n");
    let missing = exmesh(
        dir,
        &[
            "init",
            ".",
            "--logs",
            "logs/*.csv",
            "--positions",
            "units.csv",
            "--out",
            "d.toml",
        ],
    );
    assert_eq!(missing.code, 2);
    assert!(
        missing.stderr.contains("no position for unit"),
        "{}",
        missing.stderr
    );
    assert!(!dir.join("d.toml").exists());
}

/// Two radio classes from one `[candidates]` rule: class `short` (range
/// 1.2 km, 100 + 10/km) and `long` (range 3 km, 500 + 1/km) on units at
/// 0, 1 and 2.5 km: a–b gets both classes (110 and 501), b–c (1.5 km) and
/// a–c (2.5 km) only `long` (501.5, 502.5); with a excited alone the
/// cheapest plan is a–b short + b–c long = 611.5 (hand computation). A rule
/// with both the plain keys and classes exits 2 at its line.
#[test]
fn candidate_classes_offer_two_radios_per_pair() {
    let folder = Folder::new();
    folder.write("logs/a.csv", &constant_log(&[1.0]));
    folder.write("logs/b.csv", &constant_log(&[0.0]));
    folder.write("logs/c.csv", &constant_log(&[0.0]));
    let text = "[network]\nparameters = 1\nwindow = 2.0\nmin_excitation = 0.5\n\
         [[node]]\nid = \"a\"\nlog = \"logs/a.csv\"\nposition = [0.0, 0.0]\n\
         [[node]]\nid = \"b\"\nlog = \"logs/b.csv\"\nposition = [1.0, 0.0]\n\
         [[node]]\nid = \"c\"\nlog = \"logs/c.csv\"\nposition = [2.5, 0.0]\n\
         [candidates]\n\
         [[candidates.class]]\nname = \"short\"\nrange = 1.2\nfixed_cost = 100.0\ncost_per_km = 10.0\n\
         [[candidates.class]]\nname = \"long\"\nrange = 3.0\nfixed_cost = 500.0\ncost_per_km = 1.0\n";
    folder.write("problem.toml", text);
    let dir = folder.dir.path();
    let all = exmesh(
        dir,
        &["check", "problem.toml", "--all", "--json", "--skip-rate"],
    );
    assert!(all.code <= 1, "{}", all.stderr);
    let v: serde_json::Value = serde_json::from_str(&all.stdout).unwrap();
    assert_eq!(
        v["links"],
        serde_json::json!(["a<->b:short", "a<->b:long", "a<->c:long", "b<->c:long"])
    );
    let plan = exmesh(dir, &["plan", "problem.toml", "--json"]);
    assert_eq!(plan.code, 0, "{}", plan.stderr);
    let p: serde_json::Value = serde_json::from_str(&plan.stdout).unwrap();
    assert!(
        (p["cost"].as_f64().unwrap() - 611.5).abs() < 1e-9,
        "{}",
        p["cost"]
    );
    let both = text.replace("[candidates]\n", "[candidates]\nrange = 1.0\n");
    folder.write("problem.toml", &both);
    let bad = exmesh(dir, &["check", "problem.toml", "--all"]);
    assert_eq!(bad.code, 2, "{}", bad.stderr);
    assert!(bad.stderr.contains("not both"), "{}", bad.stderr);
}
