//! Times the cost–rate front on the planning benchmark with a 10 s window
//! stride: `cargo run --release --example front_scaling -- N SEED LIMIT STEPS`
//! (defaults 150 1 300 8).
use exmesh::plan::Options;
use exmesh::whatif::budget;
use exmesh::{ExcitationTable, Problem, synth};
use std::time::{Duration, Instant};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let n: usize = args.first().map_or(150, |a| a.parse().expect("N"));
    let seed: u64 = args.get(1).map_or(1, |a| a.parse().expect("SEED"));
    let limit: f64 = args.get(2).map_or(300.0, |a| a.parse().expect("LIMIT"));
    let steps: usize = args.get(3).map_or(8, |a| a.parse().expect("STEPS"));
    let base = synth::bench_problem(n, seed, 0.03);
    let mut settings = base.settings.clone();
    settings.stride = Some(10.0);
    settings.gains.jump_coupling = 0.1;
    let problem = Problem::from_parts(base.path.clone(), settings, base.nodes, base.links)
        .expect("benchmark logs overlap");
    let table = ExcitationTable::build(&problem);
    let started = Instant::now();
    let options = Options {
        time_limit: Some(Duration::from_secs_f64(limit)),
        progress: exmesh::progress::Sink::silent(),
        ..Options::default()
    };
    let front = budget::front(&problem, &table, &options, None, steps);
    println!(
        "n={n} seed={seed}: structural {:?} (bound {:?}), {} front points, {} sets certified, timed out {}, {:.2?}",
        front.structural_cost,
        front.lower_bound,
        front.front.len(),
        front.certified_sets,
        front.timed_out,
        started.elapsed()
    );
    for p in &front.front {
        println!(
            "  cost {:.0}  rate {:?}  links {}",
            p.cost,
            p.rate,
            p.links.len()
        );
    }
}
