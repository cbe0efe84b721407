//! Runs the planner on the benchmark family (docs/tuning.md, "The
//! benchmark family") and prints one line per member and a summary:
//! `cargo run --release --example plan_family -- N [TIME_LIMIT_S]
//! [MEMBERS] [MU_FRACTION]` with MEMBERS a count (first ones) or a range
//! `a..b`. Each member runs in a child process of its own, so that its peak
//! memory (VmHWM) is its own; the time limit counts from the child's
//! start, generation excluded (the command-line tool counts loading too).

use exmesh::plan::{self, Options};
use exmesh::{ExcitationTable, family};
use std::process::Command;
use std::time::{Duration, Instant};

/// Peak resident memory of this process in MiB (Linux), or NaN.
fn peak_mib() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn one(n: usize, k: usize, limit: f64, mu: f64) {
    let t = Instant::now();
    let problem = family::problem(n, k, mu);
    let table = ExcitationTable::build(&problem);
    let build = t.elapsed().as_secs_f64();
    let options = Options {
        time_limit: Some(Duration::from_secs_f64(limit)),
        progress: exmesh::progress::Sink::silent(),
        ..Default::default()
    };
    let t = Instant::now();
    let plan = plan::plan(&problem, &table, &options);
    let wall = t.elapsed().as_secs_f64();
    if plan.cost.is_none() {
        eprintln!("infeasible: {:?}", plan.shortfalls);
    }
    // Independent check of the plan: every source component excited.
    let ok = plan
        .cost
        .map(|_| table.sources_excited(&problem, &plan.link_set(&problem)));
    println!(
        "RESULT {k} {} {:.0} {:.0} {:.6} {wall:.2} {build:.2} {:.0} {:?} {} | {}",
        problem.links.len(),
        plan.cost.unwrap_or(f64::NAN),
        plan.lower_bound.unwrap_or(f64::NAN),
        100.0 * plan.gap.unwrap_or(f64::NAN),
        peak_mib(),
        plan.status,
        ok.map_or("-", |b| if b { "checked" } else { "FAILED" }),
        family::describe(k),
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.get(1).map(String::as_str) == Some("--one") {
        let get = |i: usize| args[i].parse::<f64>().expect("number");
        one(get(2) as usize, get(3) as usize, get(4), get(5));
        return;
    }
    let n: usize = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(150);
    let limit: f64 = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(60.0);
    let members: Vec<usize> = match args.get(3) {
        Some(s) if s.contains("..") => {
            let (a, b) = s.split_once("..").unwrap();
            (a.parse().unwrap()..b.parse().unwrap()).collect()
        }
        Some(s) => (0..s.parse().unwrap()).collect(),
        None => (0..12).collect(),
    };
    let mu: f64 = args.get(4).and_then(|s| s.parse().ok()).unwrap_or(0.03);
    let me = std::env::current_exe().expect("own path");
    println!("member links cost bound gap% wall_s build_s peak_MiB status check | design");
    let mut gaps = Vec::new();
    let mut proven = Vec::new();
    let mut peak: f64 = 0.0;
    for k in members {
        let out = Command::new(&me)
            .args(["--one", &n.to_string(), &k.to_string()])
            .args([limit.to_string(), mu.to_string()])
            .output()
            .expect("child runs");
        let text = String::from_utf8_lossy(&out.stdout);
        let Some(line) = text.lines().find(|l| l.starts_with("RESULT ")) else {
            println!("{k} failed: {}", String::from_utf8_lossy(&out.stderr));
            continue;
        };
        println!("{}", &line[7..]);
        let f: Vec<&str> = line.split_whitespace().collect();
        let gap: f64 = f[5].parse().unwrap_or(f64::NAN);
        let wall: f64 = f[6].parse().unwrap_or(f64::NAN);
        peak = peak.max(f[8].parse().unwrap_or(0.0));
        gaps.push(gap);
        if f[9] == "Optimal" {
            proven.push(wall);
        }
    }
    gaps.sort_by(f64::total_cmp);
    proven.sort_by(f64::total_cmp);
    let median = |v: &[f64]| {
        if v.is_empty() {
            f64::NAN
        } else if v.len() % 2 == 1 {
            v[v.len() / 2]
        } else {
            0.5 * (v[v.len() / 2 - 1] + v[v.len() / 2])
        }
    };
    println!(
        "SUMMARY n={n} limit={limit}s members={} gap median {:.2}% worst {:.2}% proven {}/{} (median time {:.1}s) peak {:.0} MiB",
        gaps.len(),
        median(&gaps),
        gaps.last().copied().unwrap_or(f64::NAN),
        proven.len(),
        gaps.len(),
        median(&proven),
        peak
    );
}
