//! Planning benchmarks on the seeded synthetic instances of
//! `exmesh::synth::bench_problem` (two-way candidates, mean degree about 8,
//! p = 4, mixed excitation, μ_req = 3 % of a full-rank unit's level).
//!
//! Each sample is one whole `plan` call (proven optimum for the 50-unit
//! instances; 150 units under a 10 s limit, reporting the gap reached).

use criterion::{Criterion, criterion_group, criterion_main};
use exmesh::plan::{self, Options, PlanStatus};
use exmesh::{ExcitationTable, synth};
use std::hint::black_box;
use std::time::Duration;

fn benches(c: &mut Criterion) {
    let mut group = c.benchmark_group("plan");
    group.sample_size(10);
    group.measurement_time(Duration::from_secs(20));
    for seed in [1u64, 2, 3, 4, 5] {
        let problem = synth::bench_problem(50, seed, 0.03);
        let table = ExcitationTable::build(&problem);
        let plan = plan::plan(&problem, &table, &Options::default());
        assert_eq!(plan.status, PlanStatus::Optimal);
        eprintln!(
            "50 units, seed {seed}: optimum {:?}, root LP bound {:.0}",
            plan.cost, plan.stats.root_lp_bound
        );
        group.bench_function(format!("50 units seed {seed} to optimality"), |b| {
            b.iter(|| plan::plan(black_box(&problem), &table, &Options::default()))
        });
    }
    let problem = synth::bench_problem(150, 1, 0.03);
    let table = ExcitationTable::build(&problem);
    let limited = Options {
        time_limit: Some(Duration::from_secs(10)),
        progress: exmesh::progress::Sink::silent(),
        ..Default::default()
    };
    let plan = plan::plan(&problem, &table, &limited);
    eprintln!(
        "150 units, seed 1, 10 s: cost {:?}, bound {:?}, gap {:?}",
        plan.cost, plan.lower_bound, plan.gap
    );
    group.bench_function("150 units seed 1 with a 10 s limit", |b| {
        b.iter(|| plan::plan(black_box(&problem), &table, &limited))
    });
    group.finish();

    let mut group = c.benchmark_group("excitation");
    group.sample_size(10);
    let problem = synth::bench_problem(500, 1, 0.03);
    group.bench_function("table for 500 units, 1801 windows", |b| {
        b.iter(|| ExcitationTable::build(black_box(&problem)))
    });
    group.finish();
}

criterion_group!(group, benches);
criterion_main!(group);
