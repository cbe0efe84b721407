//! Hostile input through the real binary: the reproductions of a fuzz
//! campaign (bounded work, no panic, linear reading, right line numbers,
//! consistent verdicts, all-or-nothing outputs, inputs never overwritten).
//! Each test failed on the code before the fix it guards.

use super::fixtures::{
    Folder, SMALL_PROBLEM, constant_log, exmesh, exmesh_capped, small_problem_with_plan,
};
use std::time::Duration;

/// The small problem with its plan, after replacing `from` by `to` in the
/// problem file.
fn edited(from: &str, to: &str) -> Folder {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let text = SMALL_PROBLEM.replacen(from, to, 1);
    assert_ne!(text, SMALL_PROBLEM, "the edit must change the problem");
    folder.write("problem.toml", &text);
    folder
}

/// Runs and checks exit 2 with `place` (file:line) and `words` on stderr,
/// nothing on stdout. A run still going after two minutes is killed and
/// fails the test as a hang (not a speed target: these inputs used to run
/// for hours).
fn expect_rejected(folder: &Folder, args: &[&str], place: &str, words: &str) {
    let run = exmesh_capped(folder.dir.path(), args, Duration::from_secs(120));
    assert!(!run.killed, "{args:?} hung");
    assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
    assert!(run.stdout.is_empty(), "{}", run.stdout);
    assert!(
        run.stderr.contains(place),
        "expected `{place}` in {}",
        run.stderr
    );
    assert!(
        run.stderr.contains(words),
        "expected `{words}` in {}",
        run.stderr
    );
}

/// Failure 1: Work that grew without bound: a regressor typo, a huge coupling or
/// weight, a tiny stride, a log spanning 1e15 s.
#[test]
fn inputs_that_made_work_unbounded_are_rejected_at_load() {
    let cases: [(&str, &str, &str, &str); 4] = [
        (
            "min_excitation = 0.5\n",
            "min_excitation = 0.5\n[estimator]\nflow_coupling = 1e308\n",
            "problem.toml:8:",
            "expected a number from 0 to 1e4",
        ),
        (
            "cost = 3.0\n",
            "cost = 3.0\nweight = 1e5\n",
            "problem.toml:",
            "expected a positive number ≤ 1e4",
        ),
        (
            "stride = 1.0",
            "stride = 1e-300",
            "problem.toml:5:",
            "windows",
        ),
        (
            "min_excitation = 0.5\n",
            "min_excitation = 0.5\n[estimator]\nflow_coupling = 200.0\nlink_weight = 100.0\n",
            "problem.toml:",
            "flow_coupling · weight",
        ),
    ];
    for (from, to, place, words) in cases {
        let folder = edited(from, to);
        expect_rejected(&folder, &["check", "problem.toml", "--all"], place, words);
    }
    // A one-digit typo in a log: |psi| = 1e4 makes flow_gain·|psi|² = 1e8 1/s.
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let log = constant_log(&[1.0, 0.0]).replacen("1,0,0\n", "1e4,0,0\n", 1);
    folder.write("logs/a.csv", &log);
    let line = log.lines().position(|l| l.contains("1e4")).unwrap() + 1;
    for args in [
        &["check", "problem.toml", "--plan", "plan.json"][..],
        &["plan", "problem.toml", "--time-limit", "5"][..],
        &["simulate", "problem.toml", "--plan", "plan.json"][..],
    ] {
        expect_rejected(
            &folder,
            args,
            &format!("logs/a.csv:{line}:"),
            "flow_gain·|psi|²",
        );
    }
    // A log spanning 1e15 s.
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write("logs/c.csv", "t,j,psi1,psi2,y\n0,0,0,0,0\n1e15,0,0,0,0\n");
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "logs/c.csv:3:",
        "|t| ≤ 1e9",
    );
}

/// Failure 2: Runaway memory: `--truth 1e200,0` is outside the accepted range.
#[test]
fn huge_vectors_are_rejected() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    for flag in ["--truth", "--initial"] {
        let run = exmesh(
            folder.dir.path(),
            &[
                "simulate",
                "problem.toml",
                "--plan",
                "plan.json",
                flag,
                "1e200,0",
                "--svg",
                "e.svg",
            ],
        );
        assert_eq!(run.code, 2, "{}", run.stderr);
        assert!(
            run.stderr.contains(flag) && run.stderr.contains("at most 1e6"),
            "{}",
            run.stderr
        );
        assert!(!folder.path("e.svg").exists());
    }
}

/// Failure 3: `--time-limit 1e20` panicked converting to a Duration.
#[test]
fn huge_time_limits_do_not_panic() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    for args in [
        &["plan", "problem.toml", "--time-limit", "1e20"][..],
        &[
            "budget",
            "problem.toml",
            "--time-limit",
            "1e300",
            "--steps",
            "2",
        ][..],
        &[
            "retire",
            "problem.toml",
            "--node",
            "c",
            "--time-limit",
            "1e20",
        ][..],
    ] {
        let run = exmesh(folder.dir.path(), args);
        assert!(
            matches!(run.code, 0 | 1),
            "{args:?}: {} {}",
            run.code,
            run.stderr
        );
        assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
    }
}

/// Failure 4: Linear reading: a plan file with many entries and a problem with many
/// links. Duplicate entries are an error naming both lines.
#[test]
fn many_entries_read_quickly_and_duplicates_name_both_lines() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let entry = "  {\"from\": \"a\", \"to\": \"b\", \"two_way\": true},\n";
    folder.write(
        "dup.json",
        &format!(
            "{{\"links\": [\n{entry}{}]}}",
            entry.trim_end().trim_end_matches(',')
        ),
    );
    expect_rejected(
        &folder,
        &["check", "problem.toml", "--plan", "dup.json", "--skip-rate"],
        "dup.json:3:",
        "listed twice (also on line 2)",
    );
    // 15,000 links between 300 units, all listed in a plan (the old reader
    // was quadratic in both; the criterion bench `excitation` times it).
    let folder = Folder::new();
    let mut problem = String::from(
        "[network]\nparameters = 1\nwindow = 4.0\nstride = 1.0\nmin_excitation = 0.5\n",
    );
    let n = 300;
    for i in 0..n {
        problem.push_str(&format!("[[node]]\nid = \"u{i}\"\nlog = \"l.csv\"\n"));
    }
    let mut plan = String::from("{\"links\": [\n");
    let mut k = 0;
    for i in 0..n {
        for d in 1..=50 {
            let j = (i + d) % n;
            problem.push_str(&format!(
                "[[link]]\nfrom = \"u{i}\"\nto = \"u{j}\"\ncost = 1\n"
            ));
            if k > 0 {
                plan.push_str(",\n");
            }
            plan.push_str(&format!(
                "{{\"from\": \"u{i}\", \"to\": \"u{j}\", \"two_way\": false}}"
            ));
            k += 1;
        }
    }
    plan.push_str("\n]}\n");
    folder.write("l.csv", &constant_log(&[1.0]));
    folder.write("problem.toml", &problem);
    folder.write("plan.json", &plan);
    let run = exmesh_capped(
        folder.dir.path(),
        &[
            "check",
            "problem.toml",
            "--plan",
            "plan.json",
            "--skip-rate",
            "--json",
        ],
        Duration::from_secs(120),
    );
    assert!(!run.killed);
    // Exit 1 is a verdict (50 listeners per unit fail the gain check).
    assert!(matches!(run.code, 0 | 1), "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["links"].as_array().map(Vec::len), Some(15_000), "{v}");
}

/// Failure 5: Line numbers after comments, blank lines, a BOM, invalid UTF-8; a
/// BOM in a plan file; `[node]` for `[[node]]`.
#[test]
fn line_numbers_are_right_everywhere() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write(
        "logs/a.csv",
        "# unit a\n\n# more\nt,jj,psi1,psi2,y\n0,0,1,0,0\n",
    );
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "logs/a.csv:4:",
        "header",
    );
    folder.write(
        "logs/a.csv",
        "\u{feff}t,j,psi1,psi2,y\n# c\n\n0,0,1,0,0\n# c\n1,0,x,0,0\n",
    );
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "logs/a.csv:6:",
        "psi1",
    );
    let mut bad = constant_log(&[1.0, 0.0]).into_bytes();
    let at = bad
        .iter()
        .enumerate()
        .filter(|(_, b)| **b == b'\n')
        .nth(4)
        .unwrap()
        .0
        + 2;
    bad[at] = 0xFF;
    std::fs::write(folder.path("logs/a.csv"), &bad).unwrap();
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "logs/a.csv:6:",
        "not UTF-8",
    );
    folder.write("logs/a.csv", &constant_log(&[1.0, 0.0]));
    let mut toml = SMALL_PROBLEM.as_bytes().to_vec();
    let at = SMALL_PROBLEM.find("three").unwrap();
    toml[at] = 0xFE;
    std::fs::write(folder.path("problem.toml"), &toml).unwrap();
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "problem.toml:2:",
        "not UTF-8",
    );
    folder.write(
        "problem.toml",
        &SMALL_PROBLEM.replacen("[[node]]\nid = \"b\"", "[node]\nid = \"b\"", 1),
    );
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "problem.toml:12:",
        "[[node]]",
    );
    folder.write("problem.toml", SMALL_PROBLEM);
    let plan = std::fs::read_to_string(folder.path("plan.json")).unwrap();
    folder.write("bom.json", &format!("\u{feff}{plan}"));
    let run = exmesh(
        folder.dir.path(),
        &["check", "problem.toml", "--plan", "bom.json", "--skip-rate"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
}

/// Failure 6: A jump counter wrapping from 4294967295 to 0; `report --truth` of the
/// wrong length.
#[test]
fn wrapping_jump_counters_and_short_truths_are_rejected() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write(
        "logs/a.csv",
        "t,j,psi1,psi2,y\n0,4294967295,1,0,0\n5,4294967295,1,0,0\n5,0,1,0,0\n10,0,1,0,0\n",
    );
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "logs/a.csv:4:",
        "j goes from",
    );
    folder.write("logs/a.csv", &constant_log(&[1.0, 0.0]));
    expect_rejected(
        &folder,
        &[
            "report",
            "problem.toml",
            "--plan",
            "plan.json",
            "--out",
            "r.html",
            "--truth",
            "1",
        ],
        "--truth",
        "expected 2 values",
    );
    assert!(!folder.path("r.html").exists());
}

/// Failure 7: Overflow gave contradictory verdicts: a regressor of 1e308 (NaN
/// level) and costs of 1.7e308 (infinite plan cost) are outside the
/// accepted ranges, for every command alike.
#[test]
fn values_that_overflow_are_rejected_by_every_command() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write("logs/b.csv", &constant_log(&[0.0, 1e308]));
    for args in [
        &["check", "problem.toml", "--all"][..],
        &["plan", "problem.toml"][..],
        &["excitation", "problem.toml"][..],
    ] {
        expect_rejected(&folder, args, "logs/b.csv:2:", "outside the accepted range");
    }
    let folder = edited("cost = 3.0", "cost = 1.7e308");
    for args in [
        &["plan", "problem.toml"][..],
        &["budget", "problem.toml"][..],
    ] {
        expect_rejected(&folder, args, "problem.toml:28:", "from 0 to 1e12");
    }
}

/// Failure 8: Outputs: control characters in ids; a set of outputs written all or
/// nothing; stale temporary files of a killed run removed.
#[test]
fn outputs_are_well_formed_and_all_or_nothing() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    folder.write(
        "problem.toml",
        &SMALL_PROBLEM.replace("\"c\"", "\"c\\u0001\""),
    );
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "problem.toml:17:",
        "U+0001",
    );

    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let run = exmesh(
        folder.dir.path(),
        &[
            "plan",
            "problem.toml",
            "--svg",
            "a.svg",
            "--dot",
            "a.dot",
            "--out",
            "missing/p.json",
        ],
    );
    assert_eq!(run.code, 3, "{}", run.stderr);
    assert!(!folder.path("a.svg").exists() && !folder.path("a.dot").exists());
    let leftovers: Vec<_> = std::fs::read_dir(folder.dir.path())
        .unwrap()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");

    // A temporary file of a process that no longer exists (no pid reaches
    // 999999999 on Linux) is cleaned when the target is next written.
    if std::path::Path::new("/proc/self").exists() {
        let stale = folder.write(".p.json.999999999.exmesh.tmp", "{");
        let run = exmesh(
            folder.dir.path(),
            &["plan", "problem.toml", "--out", "p.json"],
        );
        assert_eq!(run.code, 0, "{}", run.stderr);
        assert!(!stale.exists());
    }
}

/// Failure 9: Inputs overwritten: an output path that is an input is refused.
#[test]
fn outputs_never_overwrite_inputs() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let problem = std::fs::read(folder.path("problem.toml")).unwrap();
    let log = std::fs::read(folder.path("logs/a.csv")).unwrap();
    let plan = std::fs::read(folder.path("plan.json")).unwrap();
    let cases: [&[&str]; 6] = [
        &["plan", "problem.toml", "--out", "problem.toml"],
        &["plan", "problem.toml", "--svg", "./logs/../logs/a.csv"],
        &[
            "report",
            "problem.toml",
            "--plan",
            "plan.json",
            "--out",
            "plan.json",
        ],
        &[
            "simulate",
            "problem.toml",
            "--plan",
            "plan.json",
            "--out",
            "logs/a.csv",
        ],
        &["check", "problem.toml", "--all", "--svg", "problem.toml"],
        &[
            "retire",
            "problem.toml",
            "--node",
            "c",
            "--plan",
            "plan.json",
            "--out",
            "plan.json",
        ],
    ];
    for args in cases {
        let run = exmesh(folder.dir.path(), args);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
        assert!(
            run.stderr.contains("is an input of this command"),
            "{}",
            run.stderr
        );
    }
    assert_eq!(std::fs::read(folder.path("problem.toml")).unwrap(), problem);
    assert_eq!(std::fs::read(folder.path("logs/a.csv")).unwrap(), log);
    assert_eq!(std::fs::read(folder.path("plan.json")).unwrap(), plan);
}

/// Failure 1, within the ranges: a regressor near the stiffness cap held
/// for the whole horizon. The certificate says why it has no rate, and
/// `simulate` stops with the same reason, instead of stepping through
/// millions of substeps per pass.
#[test]
fn too_stiff_error_systems_stop_with_a_reason() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let long = |psi: [f64; 2]| {
        let mut s = String::from("t,j,psi1,psi2,y\n");
        for k in 0..=400 {
            s.push_str(&format!("{},0,{},{},0\n", k as f64 * 0.5, psi[0], psi[1]));
        }
        s
    };
    folder.write("logs/a.csv", &long([99.0, 0.0]));
    folder.write("logs/b.csv", &long([0.0, 1.0]));
    folder.write("logs/c.csv", &long([0.0, 0.0]));
    let run = exmesh_capped(
        folder.dir.path(),
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
        Duration::from_secs(120),
    );
    assert!(!run.killed, "check hung");
    let v: serde_json::Value = serde_json::from_str(&run.stdout).expect(&run.stderr);
    assert!(v["certificate"]["rate"].is_null(), "{}", v["certificate"]);
    assert!(
        v["certificate"]["reason"]
            .as_str()
            .unwrap_or("")
            .contains("too stiff"),
        "{}",
        v["certificate"]
    );
    expect_rejected(
        &folder,
        &["simulate", "problem.toml", "--plan", "plan.json"],
        "problem.toml:",
        "too stiff",
    );
}

/// Time limits far too short for the work: every planning command still
/// answers with a valid outcome. Exit 0 comes with a plan file that
/// `check` accepts; exit 1 (infeasible: the small problem cannot survive
/// a link failure) and exit 3 (no plan before the limit, status
/// `time_limit`, no links) with no plan file. Validity only, no timing.
#[test]
fn tiny_time_limits_give_valid_answers() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let cases: [&[&str]; 4] = [
        &[
            "plan",
            "problem.toml",
            "--time-limit",
            "1e-9",
            "--out",
            "p.json",
            "--json",
        ],
        &[
            "plan",
            "problem.toml",
            "--survive",
            "link",
            "--time-limit",
            "1e-9",
            "--out",
            "p.json",
            "--json",
        ],
        &[
            "retire",
            "problem.toml",
            "--node",
            "c",
            "--time-limit",
            "1e-9",
            "--out",
            "p.json",
            "--json",
        ],
        &[
            "budget",
            "problem.toml",
            "--time-limit",
            "1e-9",
            "--steps",
            "3",
            "--json",
        ],
    ];
    for args in cases {
        let _ = std::fs::remove_file(folder.path("p.json"));
        let run = exmesh_capped(folder.dir.path(), args, Duration::from_secs(120));
        assert!(!run.killed, "{args:?} hung");
        assert!(matches!(run.code, 0 | 1 | 3), "{args:?}: {}", run.stderr);
        let v: serde_json::Value = serde_json::from_str(&run.stdout).expect(&run.stderr);
        if args[0] == "budget" {
            continue;
        }
        let plan = if args[0] == "retire" { &v["plan"] } else { &v };
        match run.code {
            0 => {
                assert!(plan["cost"].is_number(), "{plan}");
                let check = exmesh(
                    folder.dir.path(),
                    &["check", "problem.toml", "--plan", "p.json", "--skip-rate"],
                );
                // retire's plan is for the reduced problem; the structure
                // check applies to plan's files only.
                if args[0] == "plan" {
                    assert_eq!(check.code, 0, "{}", check.stderr);
                }
            }
            1 => {
                assert_eq!(plan["status"], "infeasible", "{plan}");
                assert!(!folder.path("p.json").exists());
            }
            3 => {
                assert_eq!(plan["status"], "time_limit", "{plan}");
                assert!(plan["cost"].is_null(), "{plan}");
                assert!(!folder.path("p.json").exists());
                assert!(
                    run.stderr
                        .contains("no plan was found within the time limit")
                );
            }
            _ => panic!("{args:?}: unexpected exit {}", run.code),
        }
    }
}

/// Runaway memory from the excitation table: 300 units with 64
/// parameters and about 1,600 windows would need 300 × 1,600 × 2,080
/// numbers (8 GB).
#[test]
fn oversized_excitation_tables_are_rejected_at_load() {
    let folder = Folder::new();
    let header: Vec<String> = (1..=64).map(|k| format!("psi{k}")).collect();
    let mut log = format!("t,j,{}\n", header.join(","));
    let row: Vec<&str> = (0..64).map(|k| if k == 0 { "1" } else { "0" }).collect();
    for k in 0..=2000 {
        log.push_str(&format!("{},0,{}\n", k as f64 * 0.01, row.join(",")));
    }
    folder.write("l.csv", &log);
    let mut text = String::from(
        "[network]\nparameters = 64\nwindow = 4.0\nstride = 0.01\nmin_excitation = 0.5\n",
    );
    for i in 0..300 {
        text.push_str(&format!("[[node]]\nid = \"u{i}\"\nlog = \"l.csv\"\n"));
    }
    folder.write("problem.toml", &text);
    expect_rejected(
        &folder,
        &["excitation", "problem.toml"],
        "problem.toml:4:",
        "numbers for the excitation table",
    );
}

/// Bad input for the keys and flags of the field engineer's workflow: each
/// exits 2 naming the file and line (or the flag) and writes nothing.
#[test]
fn new_keys_and_flags_refuse_bad_input() {
    use super::fixtures::{Folder, exmesh, small_problem_with_plan};
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    let text = std::fs::read_to_string(folder.path("problem.toml")).unwrap();
    let line_of = |t: &str, needle: &str| t.lines().position(|l| l.contains(needle)).unwrap() + 1;
    for (extra, words) in [
        ("max_links = -1\n", "max_links: expected a whole number"),
        ("max_links = 1.5\n", "malformed problem file"),
    ] {
        let bad = text.replace(
            "id = \"c\"\nlog = \"logs/c.csv\"\n",
            &format!("id = \"c\"\nlog = \"logs/c.csv\"\n{extra}"),
        );
        folder.write("bad.toml", &bad);
        let run = exmesh(dir, &["plan", "bad.toml"]);
        assert_eq!(run.code, 2, "{extra}: {}", run.stderr);
        let line = line_of(&bad, extra.trim());
        assert!(
            run.stderr.contains(&format!("bad.toml:{line}:")) && run.stderr.contains(words),
            "{extra}: {}",
            run.stderr
        );
    }
    // A class name used twice.
    let classes = "[network]\nparameters = 2\nwindow = 4.0\n\
        [[node]]\nid = \"a\"\nlog = \"logs/a.csv\"\nposition = [0.0, 0.0]\n\
        [[node]]\nid = \"b\"\nlog = \"logs/b.csv\"\nposition = [1.0, 0.0]\n\
        [candidates]\n\
        [[candidates.class]]\nname = \"x\"\nrange = 2.0\nfixed_cost = 1.0\ncost_per_km = 1.0\n\
        [[candidates.class]]\nname = \"x\"\nrange = 3.0\nfixed_cost = 1.0\ncost_per_km = 1.0\n";
    folder.write("classes.toml", classes);
    let run = exmesh(dir, &["check", "classes.toml", "--all"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    let second = classes.match_indices("name = \"x\"").nth(1).unwrap().0;
    let line = classes[..second].lines().count() + 1;
    assert!(
        run.stderr.contains(&format!("classes.toml:{line}:"))
            && run.stderr.contains("duplicate class name"),
        "{}",
        run.stderr
    );
    // --write-problem onto the problem itself; --out-dir onto a file.
    let run = exmesh(
        dir,
        &[
            "retire",
            "problem.toml",
            "--node",
            "c",
            "--write-problem",
            "problem.toml",
        ],
    );
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("--write-problem"), "{}", run.stderr);
    assert_eq!(
        std::fs::read_to_string(folder.path("problem.toml")).unwrap(),
        text
    );
    folder.write("taken", "a file");
    let run = exmesh(dir, &["budget", "problem.toml", "--out-dir", "taken"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("--out-dir"), "{}", run.stderr);
    // compare with a plan naming an unknown unit: the file and line.
    folder.write(
        "odd.json",
        "{\"links\": [\n{\"from\": \"a\", \"to\": \"zz\", \"two_way\": false}\n]}",
    );
    let run = exmesh(dir, &["compare", "problem.toml", "plan.json", "odd.json"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("odd.json:2:"), "{}", run.stderr);
}
