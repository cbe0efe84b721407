//! Outputs read at a glance: which part of a plan is proven, numbers
//! without Rust exponents or negative zeros, skipped rates said as such,
//! the log that shortens the horizon named.

use super::fixtures::{Folder, exmesh, small_problem, small_problem_with_plan};
use std::path::Path;

const PLATEAU: &str = "problems/plateau-masts/problem.toml";

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// A number in Rust's exponent notation (`4.6395e0`, `2.4784e-2`), or a
/// negative zero (`-0.000`, `-0`), anywhere in `text`.
fn unreadable_number(text: &str) -> Option<String> {
    let b = text.as_bytes();
    for (i, w) in b.windows(2).enumerate() {
        // digit, then e/E, then digit or minus sign
        if w[0].is_ascii_digit() && (w[1] == b'e' || w[1] == b'E') {
            let next = b.get(i + 2).copied().unwrap_or(b' ');
            let after = b.get(i + 3).copied().unwrap_or(b' ');
            if next.is_ascii_digit() || (next == b'-' && after.is_ascii_digit()) {
                let start = i.saturating_sub(8);
                return Some(String::from_utf8_lossy(&b[start..(i + 6).min(b.len())]).into());
            }
        }
    }
    for token in text.split(|c: char| c.is_whitespace() || ",[]()".contains(c)) {
        let t = token.trim_end_matches(['.', ';', ':']);
        if let Some(rest) = t.strip_prefix('-')
            && !rest.is_empty()
            && rest.bytes().all(|c| c == b'0' || c == b'.')
            && rest.starts_with('0')
        {
            return Some(t.to_string());
        }
    }
    None
}

#[test]
fn the_detector_finds_what_it_should() {
    assert!(unreadable_number("level 4.6395e0, x").is_some());
    assert!(unreadable_number("rate 2.4784e-2 1/s").is_some());
    assert!(unreadable_number("[-0.000, +1.000]").is_some());
    assert!(unreadable_number("weakest -0 here").is_some());
    assert!(unreadable_number("mast-east rate 0.04483 1/s, 1.912×10⁹, -0.5").is_none());
}

/// The demo's plan: the structural part is proven optimal (the rate stage
/// starts from it), the rate stage adds cost without a proof, and the link
/// it swaps out is named. The swapped-out links are exactly the structural
/// plan's links missing from the result (set difference, recomputed here
/// from `plan` run without the target).
#[test]
fn plan_text_says_which_part_is_proven() {
    let run = exmesh(root(), &["plan", PLATEAU, "--json"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let rate = &v["rate"];
    assert_eq!(rate["structural_status"], "optimal");
    assert_eq!(v["status"], "feasible");
    // The structural plan alone: the same problem without target_rate.
    let folder = Folder::new();
    let dir = folder.dir.path();
    copy_dir(&root().join("problems/plateau-masts"), dir);
    let text = std::fs::read_to_string(dir.join("problem.toml")).unwrap();
    let without: String = text
        .lines()
        .filter(|l| !l.trim_start().starts_with("target_rate"))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(dir.join("problem.toml"), without).unwrap();
    let plain = exmesh(dir, &["plan", "problem.toml", "--json"]);
    let plain: serde_json::Value = serde_json::from_str(&plain.stdout).unwrap();
    assert_eq!(plain["status"], "optimal");
    assert_eq!(plain["cost"], rate["structural_cost"]);
    let ids = |x: &serde_json::Value| -> Vec<String> {
        x["links"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l["id"].as_str().unwrap().to_string())
            .collect()
    };
    let (before, after) = (ids(&plain), ids(&v));
    let gone: Vec<String> = before
        .iter()
        .filter(|l| !after.contains(l))
        .cloned()
        .collect();
    let removed: Vec<String> = rate["removed_links"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l.as_str().unwrap().to_string())
        .collect();
    assert_eq!(removed, gone);

    let text = exmesh(root(), &["plan", PLATEAU]);
    assert!(
        text.stdout.contains("structural part is proven optimal"),
        "{}",
        text.stdout
    );
    assert!(text.stdout.contains("(rate stage, no optimality proof)"));
    assert!(
        !text.stdout.contains("not proven optimal"),
        "{}",
        text.stdout
    );
    for l in &removed {
        assert!(
            text.stdout.contains(l.as_str()),
            "{l} named: {}",
            text.stdout
        );
    }
    assert!(text.stdout.contains("swapped out"));
    assert_eq!(unreadable_number(&text.stdout), None, "{}", text.stdout);
}

fn copy_dir(from: &Path, to: &Path) {
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            std::fs::create_dir_all(&target).unwrap();
            copy_dir(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

/// Text screens of both demos carry no Rust exponents and no negative
/// zeros; singular counts read "1 link", not "1 links".
#[test]
fn screens_print_readable_numbers() {
    for demo in [PLATEAU, "problems/delta-substations/problem.toml"] {
        for args in [
            vec!["excitation", demo],
            vec!["check", demo, "--installed", "--skip-rate"],
        ] {
            let run = exmesh(root(), &args);
            assert!(run.code <= 1, "{args:?}: {}", run.stderr);
            assert_eq!(
                unreadable_number(&run.stdout),
                None,
                "{args:?}: {}",
                run.stdout
            );
            for plural in ["1 links", "1 units", "1 windows", "1 sets", "1 rounds"] {
                assert!(
                    !run.stdout.contains(&format!(" {plural}")),
                    "{args:?}: {}",
                    run.stdout
                );
            }
        }
    }
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    for args in [
        vec!["check", "problem.toml", "--plan", "plan.json"],
        vec!["stress", "problem.toml", "--plan", "plan.json"],
        vec!["simulate", "problem.toml", "--plan", "plan.json"],
        vec!["plan", "problem.toml"],
    ] {
        let run = exmesh(dir, &args);
        assert!(run.code <= 1, "{args:?}: {}", run.stderr);
        assert_eq!(
            unreadable_number(&run.stdout),
            None,
            "{args:?}: {}",
            run.stdout
        );
    }
}

/// `stress --skip-rate` says the rates were skipped (not "none", which
/// would read as "no rate could be certified"), and the JSON says so too.
#[test]
fn skipped_rates_read_as_skipped() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    let run = exmesh(
        dir,
        &[
            "stress",
            "problem.toml",
            "--plan",
            "plan.json",
            "--skip-rate",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("certified rate skipped (--skip-rate)"),
        "{}",
        run.stdout
    );
    assert!(!run.stdout.contains("certified rate none"));
    let json = exmesh(
        dir,
        &[
            "stress",
            "problem.toml",
            "--plan",
            "plan.json",
            "--skip-rate",
            "--json",
        ],
    );
    let v: serde_json::Value = serde_json::from_str(&json.stdout).unwrap();
    assert_eq!(v["rates_checked"], false);
    let json = exmesh(
        dir,
        &["stress", "problem.toml", "--plan", "plan.json", "--json"],
    );
    let v: serde_json::Value = serde_json::from_str(&json.stdout).unwrap();
    assert_eq!(v["rates_checked"], true);
}

/// A log that ends early shortens the common horizon: `excitation` names
/// the unit and the seconds lost (recomputed here from the logs' last
/// rows); logs of equal span give no such line.
#[test]
fn the_log_that_shortens_the_horizon_is_named() {
    let folder = Folder::new();
    small_problem(&folder);
    let dir = folder.dir.path();
    let quiet = exmesh(dir, &["excitation", "problem.toml", "--json"]);
    let v: serde_json::Value = serde_json::from_str(&quiet.stdout).unwrap();
    assert_eq!(v["horizon_cuts"], serde_json::json!([]));
    // Cut b's log to its first 60 % of rows.
    let b = std::fs::read_to_string(dir.join("logs/b.csv")).unwrap();
    let lines: Vec<&str> = b.lines().collect();
    let keep = lines.len() * 6 / 10;
    std::fs::write(dir.join("logs/b.csv"), lines[..keep].join("\n") + "\n").unwrap();
    let last_t = |text: &str| -> f64 {
        text.lines()
            .rev()
            .find(|l| l.starts_with(|c: char| c.is_ascii_digit()))
            .and_then(|l| l.split(',').next())
            .unwrap()
            .parse()
            .unwrap()
    };
    let b_end = last_t(&std::fs::read_to_string(dir.join("logs/b.csv")).unwrap());
    let a_end = last_t(&std::fs::read_to_string(dir.join("logs/a.csv")).unwrap());
    let run = exmesh(dir, &["excitation", "problem.toml", "--json"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let cuts = v["horizon_cuts"].as_array().unwrap();
    assert_eq!(cuts.len(), 1, "{cuts:?}");
    assert_eq!(cuts[0]["node"], "b");
    assert_eq!(cuts[0]["side"], "end");
    assert_eq!(cuts[0]["at"].as_f64().unwrap(), b_end);
    assert!((cuts[0]["cut"].as_f64().unwrap() - (a_end - b_end)).abs() < 1e-9);
    let text = exmesh(dir, &["excitation", "problem.toml"]);
    assert!(
        text.stdout
            .contains("the horizon's end is set by b: its log ends at"),
        "{}",
        text.stdout
    );
}

/// Why each link: on the demo's plan every link has a role; for each
/// `structure` link, `check` of the plan without it (an independent run of
/// the binary) finds the source component the reason names not excited.
#[test]
fn every_link_says_why() {
    let run = exmesh(root(), &["plan", PLATEAU, "--json"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let links = v["links"].as_array().unwrap();
    let folder = Folder::new();
    let mut structural = 0;
    for l in links {
        let role = l["role"].as_str().expect("role");
        let reason = l["reason"].as_str().expect("reason");
        match role {
            "installed" => assert_eq!(l["installed"], true),
            "structure" => {
                structural += 1;
                let rest: Vec<&serde_json::Value> =
                    links.iter().filter(|k| k["id"] != l["id"]).collect();
                let file = folder.write(
                    "without.json",
                    &serde_json::json!({ "links": rest }).to_string(),
                );
                let check = exmesh(
                    root(),
                    &[
                        "check",
                        PLATEAU,
                        "--plan",
                        file.to_str().unwrap(),
                        "--json",
                        "--skip-rate",
                    ],
                );
                let c: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
                let bad: Vec<String> = c["source_components"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .filter(|s| s["excited"] == false)
                    .map(|s| {
                        s["nodes"]
                            .as_array()
                            .unwrap()
                            .iter()
                            .map(|n| n.as_str().unwrap())
                            .collect::<Vec<_>>()
                            .join(", ")
                    })
                    .collect();
                assert!(!bad.is_empty(), "{}: not needed?", l["id"]);
                assert!(
                    reason.contains(&format!("without it {} would be", bad[0])),
                    "{}: {reason} vs {bad:?}",
                    l["id"]
                );
            }
            other => assert!(["rate", "required", "survival"].contains(&other), "{other}"),
        }
    }
    assert!(structural > 0);
    let text = exmesh(root(), &["plan", PLATEAU]);
    assert!(text.stdout.contains("why: without it"), "{}", text.stdout);
}
