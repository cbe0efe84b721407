//! Excitation-table benchmarks on the larger shipped demo (40 units, p = 4,
//! about 500 samples per unit, 100 windows), and reading a problem with
//! 20,000 links and a plan file that lists them all (linear reading).

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

/// A folder with 400 units (one shared log), 20,000 one-way links (each
/// unit talks to the next 50) and a plan file listing every link.
fn many_links() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("temporary folder");
    let mut log = String::from("t,j,psi1\n");
    for k in 0..=20 {
        log.push_str(&format!("{},0,1\n", k as f64 * 0.5));
    }
    std::fs::write(dir.path().join("l.csv"), log).unwrap();
    let n = 400;
    let mut toml = String::from(
        "[network]\nparameters = 1\nwindow = 4.0\nstride = 1.0\nmin_excitation = 0.5\n",
    );
    for i in 0..n {
        toml.push_str(&format!("[[node]]\nid = \"u{i}\"\nlog = \"l.csv\"\n"));
    }
    let mut plan = String::from("{\"links\": [\n");
    for i in 0..n {
        for d in 1..=50 {
            let j = (i + d) % n;
            toml.push_str(&format!(
                "[[link]]\nfrom = \"u{i}\"\nto = \"u{j}\"\ncost = 1\n"
            ));
            if i + d > 1 {
                plan.push_str(",\n");
            }
            plan.push_str(&format!(
                "{{\"from\": \"u{i}\", \"to\": \"u{j}\", \"two_way\": false}}"
            ));
        }
    }
    plan.push_str("\n]}\n");
    std::fs::write(dir.path().join("problem.toml"), toml).unwrap();
    std::fs::write(dir.path().join("plan.json"), plan).unwrap();
    dir
}

fn reading(c: &mut Criterion) {
    let dir = many_links();
    let path = dir.path().join("problem.toml");
    c.bench_function("load 400 units, 20,000 links", |b| {
        b.iter(|| problem::load(black_box(&path)).unwrap())
    });
    let p = problem::load(&path).unwrap();
    let plan = dir.path().join("plan.json");
    c.bench_function("read a plan file of 20,000 links", |b| {
        b.iter(|| problem::read_link_set(&p, black_box(&plan)).unwrap())
    });
}

criterion_group!(group, benches, reading);
criterion_main!(group);
