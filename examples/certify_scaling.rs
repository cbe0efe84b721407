//! Times the certificate on the synthetic certificate benchmark:
//! `cargo run --release --example certify_scaling -- N SEED DT`
//! (defaults 200 1 0.02: 200 units, p = 4, 10⁴ samples per unit, ~800 arcs).
use exmesh::certify::certify;
use exmesh::{ExcitationTable, synth};
use std::time::Instant;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let n: usize = args.first().map_or(200, |a| a.parse().expect("N"));
    let seed: u64 = args.get(1).map_or(1, |a| a.parse().expect("SEED"));
    let dt: f64 = args.get(2).map_or(0.02, |a| a.parse().expect("DT"));
    let (problem, set) = synth::certificate_bench(n, seed, dt);
    let table = ExcitationTable::build(&problem);
    let started = Instant::now();
    let c = certify(&problem, &table, &set);
    println!(
        "n={n} dt={dt}: {} arcs, rate {:?}, window {} s, {} windows ({} evaluated), {} Lanczos steps, {:.2?} (windows {:.2?}, horizon {:.2?})",
        problem.arcs(&set).len(),
        c.rate,
        c.window,
        c.windows,
        c.evaluated_windows,
        c.lanczos_steps,
        started.elapsed(),
        c.timing.windows,
        c.timing.horizon
    );
}
