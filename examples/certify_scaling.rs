//! Times the certificate on a synthetic network: `N SEED DT STRIDE`.
//! The link set is the structural plan (5 s limit) plus the cheapest other
//! candidates until the digraph has about 4·N arcs.
use exmesh::certify::certify;
use exmesh::problem::{LinkId, LinkSet};
use exmesh::search::{self, Options};
use exmesh::{ExcitationTable, synth};
use std::time::{Duration, Instant};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let n: usize = args.first().map_or(200, |a| a.parse().unwrap());
    let seed: u64 = args.get(1).map_or(1, |a| a.parse().unwrap());
    let dt: f64 = args.get(2).map_or(0.02, |a| a.parse().unwrap());
    let stride: f64 = args.get(3).map_or(10.0, |a| a.parse().unwrap());
    let t0 = Instant::now();
    let mut problem = synth::bench_problem_sized(n, seed, 0.03, dt);
    problem.settings.stride = Some(stride);
    problem.settings.gains.jump_coupling = 0.1;
    let problem = exmesh::Problem::from_parts(
        problem.path.clone(),
        problem.settings.clone(),
        problem.nodes.clone(),
        problem.links.clone(),
    )
    .unwrap();
    let table = ExcitationTable::build(&problem);
    eprintln!("built in {:.2?}; {} windows", t0.elapsed(), problem.windows.len());
    let plan = search::plan(
        &problem,
        &table,
        &Options {
            time_limit: Some(Duration::from_secs(5)),
            progress: false,
        },
    );
    let mut ids: Vec<LinkId> = problem
        .all_links()
        .ids()
        .iter()
        .copied()
        .filter(|l| plan.links.iter().any(|c| c.id == problem.link(*l).id))
        .collect();
    let mut rest: Vec<LinkId> = problem
        .all_links()
        .ids()
        .iter()
        .copied()
        .filter(|l| !ids.contains(l))
        .collect();
    rest.sort_by(|a, b| problem.link(*a).cost.total_cmp(&problem.link(*b).cost));
    let mut rest = rest.into_iter();
    while problem.arcs(&LinkSet::new(ids.clone())).len() < 4 * n {
        match rest.next() {
            Some(l) => ids.push(l),
            None => break,
        }
    }
    let set = LinkSet::new(ids);
    let t1 = Instant::now();
    let c = certify(&problem, &table, &set);
    println!(
        "n={n} dt={dt} stride={stride}: {} arcs, rate {:?}, window {} s, {} windows, {} Lanczos steps, {:.2?} (windows {:.2?}, horizon {:.2?})",
        problem.arcs(&set).len(),
        c.rate,
        c.window,
        c.windows,
        c.power_iterations,
        t1.elapsed(),
        c.timing.windows,
        c.timing.horizon
    );
}
