//! Records the JSON answer of every command on two generated instances with
//! node limits (deterministic on every machine), for checking that a change
//! of structure leaves the outputs byte-identical.
//!
//! Run: `cargo run --release --example record_outputs -- OUT_DIR`, then
//! `diff -r` two recordings. The demos are recorded through the binary
//! (see DEVELOPERS.md).

use exmesh::plan::{self, Options};
use exmesh::problem::NodeId;
use exmesh::{ExcitationTable, analysis, certify, report, simulate, synth};
use std::path::{Path, PathBuf};

fn save<T: serde::Serialize>(dir: &Path, name: &str, value: &T) {
    let mut bytes = Vec::new();
    report::json::write(value, &mut bytes).expect("JSON");
    std::fs::write(dir.join(name), bytes).expect("writing a recording");
}

fn main() {
    let dir = PathBuf::from(
        std::env::args()
            .nth(1)
            .expect("usage: record_outputs OUT_DIR"),
    );
    std::fs::create_dir_all(&dir).expect("output directory");
    for (n, seed, nodes) in [(30usize, 11u64, 40u64), (70, 5, 20)] {
        let tag = format!("gen{n}-{seed}");
        let problem = synth::bench_problem(n, seed, 0.03);
        let table = ExcitationTable::build(&problem);
        let options = Options {
            node_limit: Some(nodes),
            progress: exmesh::progress::Sink::silent(),
            ..Default::default()
        };
        save(
            &dir,
            &format!("{tag}-excitation.json"),
            &analysis::excitation_summary(&problem, &table),
        );
        let plan = plan::plan(&problem, &table, &options);
        save(&dir, &format!("{tag}-plan.json"), &plan);
        let set = plan.link_set(&problem);
        let cert = certify::certify(&problem, &table, &set);
        let check = analysis::check(&problem, &table, &set).with_certificate(cert.clone());
        save(&dir, &format!("{tag}-check.json"), &check);
        let front = exmesh::whatif::budget::front(&problem, &table, &options, None, 3);
        save(&dir, &format!("{tag}-budget.json"), &front);
        let stress =
            exmesh::whatif::stress::stress(&problem, &table, &set, n <= 30, &Default::default());
        save(&dir, &format!("{tag}-stress.json"), &stress);
        let retire =
            exmesh::whatif::retire::retire(&problem, &[NodeId(0), NodeId(3)], &[], &set, &options)
                .map_err(|e| e.to_string());
        match retire {
            Ok(r) => save(&dir, &format!("{tag}-retire.json"), &r),
            Err(e) => std::fs::write(dir.join(format!("{tag}-retire.txt")), e).unwrap(),
        }
        let p = problem.settings.parameters;
        let sim = simulate::simulate(
            &problem,
            &set,
            Some(&cert),
            &simulate::SimOptions {
                truth: Some(vec![1.0; p]),
                initial: None,
            },
        )
        .expect("simulation");
        save(&dir, &format!("{tag}-simulate.json"), &sim);
    }
}
