//! Runs the planner on seeded synthetic benchmark instances and prints one
//! line per instance: `cargo run --release --example plan_scaling -- N SEED
//! [TIME_LIMIT_S] [MU_FRACTION] [NODE_LIMIT]`.

use exmesh::plan::{self, Options};
use exmesh::{ExcitationTable, synth};
use std::time::{Duration, Instant};

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let n: usize = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(50);
    let seed: u64 = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(1);
    let limit: f64 = args.get(3).and_then(|s| s.parse().ok()).unwrap_or(60.0);
    let mu: f64 = args.get(4).and_then(|s| s.parse().ok()).unwrap_or(0.03);
    let node_limit: Option<u64> = args.get(5).and_then(|s| s.parse().ok());
    let t = Instant::now();
    let problem = synth::bench_problem(n, seed, mu);
    let table = ExcitationTable::build(&problem);
    let build = t.elapsed();
    let options = Options {
        time_limit: Some(Duration::from_secs_f64(limit)),
        progress: exmesh::progress::Sink::silent(),
        node_limit,
        ..Default::default()
    };
    let t = Instant::now();
    let plan = plan::plan(&problem, &table, &options);
    let s = &plan.stats;
    let tm = &plan.timings;
    println!(
        "n={n} seed={seed} links={} windows={} status={:?} cost={:.0} bound={:.0} gap={:.2}% greedy={:.0} root_lp={:.0} components={} rounds={} rows={} nodes={} lp_solves={} | build {:.2}s plan {:.2}s (lp {:.2}s sep {:.2}s exc {:.2}s heur {:.2}s)",
        problem.links.len(),
        table.windows().len(),
        plan.status,
        plan.cost.unwrap_or(f64::NAN),
        plan.lower_bound.unwrap_or(f64::NAN),
        100.0 * plan.gap.unwrap_or(f64::NAN),
        s.greedy_cost,
        s.root_lp_bound,
        s.component_bound
            .zip(s.component_size)
            .map_or("-".to_string(), |(b, k)| format!("{b:.0}(k={k})")),
        s.rounds,
        s.cuts,
        s.nodes,
        s.lp_solves,
        build.as_secs_f64(),
        t.elapsed().as_secs_f64(),
        tm.solver.as_secs_f64(),
        tm.separation.as_secs_f64(),
        tm.excitation.as_secs_f64(),
        tm.heuristics.as_secs_f64(),
    );
}
