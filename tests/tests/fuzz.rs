//! A mutation fuzzer over the plateau demo's problem file, logs and a plan
//! file, run through the real binary: no panic, exit code in {0,1,2,3},
//! on exit 2 nothing on stdout and the file or flag named, no hang (a
//! per-case cap), and outputs all or nothing (no new output file and no
//! temporary file after a failed run).
//!
//! In CI it runs a small, fixed number of cases (about a minute). A local
//! campaign (DEVELOPERS.md): `EXMESH_FUZZ_CASES=100000 cargo test --release
//! --test tests fuzz -- --nocapture` (optionally `EXMESH_FUZZ_SEED=…`)
//! prints a summary: cases, exit codes, crashes, hangs, exit-2 messages
//! without a line.

use super::fixtures::{CappedRun, exmesh_capped};
use exmesh::rng::Rng;
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::time::Duration;

const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/problems/plateau-masts");

/// Cases run in CI (each a fresh copy of the demo).
const CI_CASES: usize = 1500;

/// Longest a case may run before it counts as a hang. The commands carry
/// time limits of at most a second; the rest finish in about one on the
/// demo.
const CAP: Duration = Duration::from_secs(60);

/// Tokens that broke readers before, or sit on range edges.
const TOKENS: &[&str] = &[
    "nan",
    "inf",
    "-1",
    "0",
    "1e4",
    "1e308",
    "1.7e308",
    "1e-300",
    "4294967295",
    "-0",
    "\u{feff}",
    "\u{1}",
    "\u{ff}",
    "\"",
    ",",
    "#",
    "\n",
    "\r\n",
    "[node]",
    "[[link]]",
    "[[node]]",
    "=",
    "{",
    "]",
    "\"links\": []",
    "mast-weir",
    "between = [\"mast-weir\", \"mast-weir\"]",
    "window = 1e9",
    "stride = 1e-9",
    "parameters = 65",
    "1e15",
];

/// The demo's files as bytes, by name relative to the folder.
fn demo_files() -> Vec<(String, Vec<u8>)> {
    let mut files = vec![(
        "problem.toml".to_string(),
        std::fs::read(Path::new(DEMO).join("problem.toml")).unwrap(),
    )];
    let mut logs: Vec<PathBuf> = std::fs::read_dir(Path::new(DEMO).join("logs"))
        .unwrap()
        .flatten()
        .map(|e| e.path())
        .collect();
    logs.sort();
    for log in logs {
        let name = format!("logs/{}", log.file_name().unwrap().to_string_lossy());
        files.push((name, std::fs::read(&log).unwrap()));
    }
    files.push(("plan.json".to_string(), PLAN.as_bytes().to_vec()));
    files
}

/// A plan file for the demo (links among its candidates).
const PLAN: &str = r#"{"links": [
  {"from": "mast-north", "to": "mast-cairn", "two_way": true},
  {"from": "mast-cairn", "to": "mast-fold", "two_way": true},
  {"from": "mast-weir", "to": "mast-heath", "two_way": true}
]}
"#;

/// One mutation of `bytes`.
fn mutate(rng: &mut Rng, bytes: &mut Vec<u8>) {
    let len = bytes.len().max(1);
    match rng.below(8) {
        0 => {
            // Flip a byte.
            if !bytes.is_empty() {
                let k = rng.below(bytes.len());
                bytes[k] ^= 1 << rng.below(8);
            }
        }
        1 => {
            // Delete a range.
            let a = rng.below(len);
            let b = (a + 1 + rng.below(16)).min(bytes.len());
            if a < b {
                bytes.drain(a..b);
            }
        }
        2 | 3 => {
            // Insert a token, or replace a number-like run with one.
            let token = TOKENS[rng.below(TOKENS.len())].as_bytes();
            let at = rng.below(len).min(bytes.len());
            if rng.below(2) == 0 {
                let end = (at..bytes.len())
                    .find(|&k| !(bytes[k].is_ascii_alphanumeric() || bytes[k] == b'.'))
                    .unwrap_or(bytes.len());
                bytes.splice(at..end, token.iter().copied());
            } else {
                bytes.splice(at..at, token.iter().copied());
            }
        }
        4 => {
            // Duplicate a line.
            let lines: Vec<&[u8]> = bytes.split(|&b| b == b'\n').collect();
            let k = rng.below(lines.len());
            let mut out = Vec::with_capacity(bytes.len() * 2);
            for (i, l) in lines.iter().enumerate() {
                out.extend_from_slice(l);
                out.push(b'\n');
                if i == k {
                    out.extend_from_slice(l);
                    out.push(b'\n');
                }
            }
            *bytes = out;
        }
        5 => {
            // Delete a line.
            let lines: Vec<&[u8]> = bytes.split(|&b| b == b'\n').collect();
            let k = rng.below(lines.len());
            *bytes = lines
                .iter()
                .enumerate()
                .filter(|&(i, _)| i != k)
                .flat_map(|(_, l)| l.iter().copied().chain([b'\n']))
                .collect();
        }
        6 => {
            // Truncate.
            let k = rng.below(len);
            bytes.truncate(k);
        }
        _ => {
            // Swap two lines.
            let mut lines: Vec<Vec<u8>> =
                bytes.split(|&b| b == b'\n').map(<[u8]>::to_vec).collect();
            let (a, b) = (rng.below(lines.len()), rng.below(lines.len()));
            lines.swap(a, b);
            *bytes = lines.join(&b'\n');
        }
    }
}

/// The command of a case: mostly the reading commands (the mutations
/// mostly hit the readers), some with the certificate and the planner.
fn command(rng: &mut Rng) -> Vec<&'static str> {
    let r = rng.below(100);
    let args: &[&str] = match r {
        0..=29 => &["excitation", "problem.toml"],
        30..=54 => &[
            "check",
            "problem.toml",
            "--all",
            "--skip-rate",
            "--svg",
            "out/map.svg",
            "--dot",
            "out/map.dot",
        ],
        55..=74 => &[
            "stress",
            "problem.toml",
            "--plan",
            "plan.json",
            "--skip-rate",
            "--json",
        ],
        75..=81 => &["check", "problem.toml", "--plan", "plan.json", "--json"],
        82..=87 => &[
            "simulate",
            "problem.toml",
            "--plan",
            "plan.json",
            "--out",
            "out/t.csv",
            "--svg",
            "out/e.svg",
        ],
        88..=93 => &[
            "plan",
            "problem.toml",
            "--time-limit",
            "0.5",
            "--out",
            "out/p.json",
            "--svg",
            "out/m.svg",
        ],
        _ => &[
            "retire",
            "problem.toml",
            "--node",
            "mast-weir",
            "--time-limit",
            "0.5",
            "--out",
            "out/r.json",
        ],
    };
    args.to_vec()
}

/// What a campaign saw.
#[derive(Default, Debug)]
struct Tally {
    cases: usize,
    codes: std::collections::BTreeMap<i32, usize>,
    crashes: Vec<String>,
    hangs: Vec<String>,
    /// Exit 2 whose message names a file but no line (a whole-file
    /// complaint such as an empty log, or a flag).
    without_line: usize,
    /// The first few of those messages (first line), to read after a
    /// campaign.
    without_line_samples: Vec<String>,
    failures: Vec<String>,
}

/// Runs case `k` of the campaign with `seed`; returns the run and what
/// was mutated (for the failure message).
fn run_case(files: &[(String, Vec<u8>)], seed: u64, k: usize) -> (CappedRun, String, bool) {
    let mut rng = Rng(seed ^ (k as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15));
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(dir.path().join("logs")).unwrap();
    std::fs::create_dir_all(dir.path().join("out")).unwrap();
    let target = rng.below(files.len());
    let mut what = String::new();
    for (i, (name, bytes)) in files.iter().enumerate() {
        let mut bytes = bytes.clone();
        if i == target {
            let rounds = 1 + rng.below(3);
            for _ in 0..rounds {
                mutate(&mut rng, &mut bytes);
            }
            what = format!("{name} ({rounds} mutations, seed {seed}, case {k})");
        }
        std::fs::write(dir.path().join(name), bytes).unwrap();
    }
    let args = command(&mut rng);
    let run = exmesh_capped(dir.path(), &args, CAP);
    let leftovers = std::fs::read_dir(dir.path().join("out"))
        .unwrap()
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect::<Vec<_>>();
    // Outputs all or nothing: a failed run leaves nothing in out/, a
    // successful one no temporary file.
    let outputs_ok = if matches!(run.code, 0 | 1) {
        leftovers.iter().all(|f| !f.ends_with(".tmp"))
    } else {
        leftovers.is_empty()
    };
    (run, format!("{} on {what}", args.join(" ")), outputs_ok)
}

/// Checks one case's run and counts it.
fn judge(tally: &mut Tally, run: &CappedRun, what: &str, outputs_ok: bool) {
    tally.cases += 1;
    *tally.codes.entry(run.code).or_default() += 1;
    if run.killed {
        tally.hangs.push(what.to_string());
        return;
    }
    if run.stderr.contains("panicked") || !matches!(run.code, 0..=3) {
        tally
            .crashes
            .push(format!("{what}: exit {}: {}", run.code, run.stderr));
        return;
    }
    if !outputs_ok {
        tally
            .failures
            .push(format!("{what}: partial outputs after exit {}", run.code));
    }
    if run.code == 2 {
        let message = run.stderr.trim_start_matches("exmesh: error: ");
        let names_file = ["problem.toml", "logs/", "plan.json", "--", "error: "]
            .iter()
            .any(|f| message.contains(f));
        // Messages speak the file format, not the program's types.
        for internal in [
            "struct Raw",
            "expected f64",
            "expected usize",
            "expected u32",
        ] {
            if message.contains(internal) {
                tally.failures.push(format!(
                    "{what}: internal name `{internal}` in: {}",
                    run.stderr
                ));
            }
        }
        if !run.stdout.is_empty() || !names_file {
            tally.failures.push(format!(
                "{what}: exit 2 without the file named: {}",
                run.stderr
            ));
        }
        let has_line = message
            .split(':')
            .nth(1)
            .is_some_and(|l| !l.is_empty() && l.bytes().all(|b| b.is_ascii_digit()));
        if !has_line {
            tally.without_line += 1;
            let first = message.lines().next().unwrap_or("").to_string();
            if tally.without_line_samples.len() < 12 && !tally.without_line_samples.contains(&first)
            {
                tally.without_line_samples.push(first);
            }
        }
    }
}

fn campaign(cases: usize, seed: u64) -> Tally {
    let files = demo_files();
    let tally = Mutex::new(Tally::default());
    let next = std::sync::atomic::AtomicUsize::new(0);
    let workers = std::thread::available_parallelism()
        .map_or(2, |n| n.get())
        .min(4);
    std::thread::scope(|s| {
        for _ in 0..workers {
            s.spawn(|| {
                loop {
                    let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                    if k >= cases {
                        break;
                    }
                    let (run, what, outputs_ok) = run_case(&files, seed, k);
                    judge(&mut tally.lock().unwrap(), &run, &what, outputs_ok);
                }
            });
        }
    });
    tally.into_inner().unwrap()
}

#[test]
fn mutated_demo_inputs_never_crash_hang_or_leave_partial_outputs() {
    let cases = std::env::var("EXMESH_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(CI_CASES);
    let seed = std::env::var("EXMESH_FUZZ_SEED")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(0x00F0_22ED);
    let tally = campaign(cases, seed);
    println!(
        "fuzz: {} cases (seed {seed}); exit codes {:?}; crashes {}; hangs {}; exit 2 without a line {}; other failures {}",
        tally.cases,
        tally.codes,
        tally.crashes.len(),
        tally.hangs.len(),
        tally.without_line,
        tally.failures.len()
    );
    for m in &tally.without_line_samples {
        println!("fuzz: exit 2 without a line: {m}");
    }
    assert!(tally.crashes.is_empty(), "crashes: {:#?}", tally.crashes);
    assert!(tally.hangs.is_empty(), "hangs: {:#?}", tally.hangs);
    assert!(
        tally.failures.is_empty(),
        "failures: {:#?}",
        &tally.failures[..tally.failures.len().min(20)]
    );
}
