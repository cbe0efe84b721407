//! Certificate benchmarks: the delta demo's structural plan, and the
//! synthetic certificate benchmark (`exmesh::synth::certificate_bench`):
//! 200 units, p = 4, 10⁴ samples per unit, about 800 arcs.

use criterion::{Criterion, criterion_group, criterion_main};
use exmesh::certify::certify;
use exmesh::plan::{self, Options};
use exmesh::{ExcitationTable, problem, synth};
use std::hint::black_box;
use std::path::Path;
use std::time::Duration;

fn benches(c: &mut Criterion) {
    let mut group = c.benchmark_group("certificate");
    group.sample_size(10);
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("problems/delta-substations/problem.toml");
    let demo = problem::load(&path).expect("demo loads");
    let table = ExcitationTable::build(&demo);
    let options = Options {
        time_limit: Some(Duration::from_secs(10)),
        progress: exmesh::progress::Sink::silent(),
        ..Default::default()
    };
    let plan = plan::plan(&demo, &table, &options);
    let set = plan.link_set(&demo);
    group.bench_function("delta demo, structural plan (40 units, p = 4)", |b| {
        b.iter(|| certify(black_box(&demo), &table, &set))
    });
    let (problem, set) = synth::certificate_bench(200, 1, 0.02);
    let table = ExcitationTable::build(&problem);
    let once = certify(&problem, &table, &set);
    eprintln!(
        "200 units: {} arcs, {} windows of {} s ({} evaluated), {} Lanczos steps, windows {:.2?}, horizon {:.2?}",
        problem.arcs(&set).len(),
        once.windows,
        once.window,
        once.evaluated_windows,
        once.lanczos_steps,
        once.timing.windows,
        once.timing.horizon
    );
    group.measurement_time(Duration::from_secs(60));
    group.bench_function("200 units, p = 4, 1e4 samples, ~800 arcs", |b| {
        b.iter(|| certify(black_box(&problem), &table, &set))
    });
    group.finish();
}

criterion_group!(group, benches);
criterion_main!(group);
