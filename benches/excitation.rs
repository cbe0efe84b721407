//! Excitation-table benchmarks on the larger shipped demo (40 units, p = 4,
//! about 500 samples per unit, 100 windows).

use criterion::{Criterion, criterion_group, criterion_main};
use exmesh::problem::{self, NodeId};
use exmesh::{ExcitationTable, analysis};
use std::hint::black_box;
use std::path::Path;

fn demo() -> exmesh::Problem {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("problems/delta-substations/problem.toml");
    problem::load(&path).expect("demo problem loads")
}

fn benches(c: &mut Criterion) {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("problems/delta-substations/problem.toml");
    c.bench_function("load delta demo (toml + 40 logs)", |b| {
        b.iter(|| problem::load(black_box(&path)).unwrap())
    });
    let p = demo();
    c.bench_function("excitation table, delta demo", |b| {
        b.iter(|| ExcitationTable::build(black_box(&p)))
    });
    let table = ExcitationTable::build(&p);
    let all: Vec<NodeId> = (0..p.n() as u32).map(NodeId).collect();
    c.bench_function("level of all 40 units (eigen per window)", |b| {
        b.iter(|| table.level(black_box(&all)))
    });
    c.bench_function("is_excited of all 40 units (Cholesky per window)", |b| {
        b.iter(|| table.is_excited(black_box(&all)))
    });
    c.bench_function("check --all, delta demo", |b| {
        b.iter(|| analysis::check(&p, &table, black_box(&p.all_links())))
    });
}

criterion_group!(group, benches);
criterion_main!(group);
