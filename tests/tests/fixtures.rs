//! Helpers: problem folders in a temporary directory, running the binary.

use std::path::{Path, PathBuf};
use std::process::Command;

/// A problem folder in a temporary directory.
pub struct Folder {
    pub dir: tempfile::TempDir,
}

impl Folder {
    pub fn new() -> Self {
        Folder {
            dir: tempfile::tempdir().expect("temporary folder"),
        }
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        let path = self.path(name);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent).unwrap();
        }
        std::fs::write(&path, text).unwrap();
        path
    }
}

/// Output of one run of the binary.
pub struct Run {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

/// Runs `exmesh` with `args` in `dir`.
pub fn exmesh(dir: &Path, args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_exmesh"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run exmesh");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Output of a run with a time cap.
pub struct CappedRun {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
    /// The run was still going at the cap and was killed.
    pub killed: bool,
}

/// Runs `exmesh` with `args` in `dir`, killing it after `cap` (a hang
/// guard, not a timing check). Output goes through files so a chatty run
/// cannot block on a full pipe.
pub fn exmesh_capped(dir: &Path, args: &[&str], cap: std::time::Duration) -> CappedRun {
    let out_dir = tempfile::tempdir().expect("temporary folder");
    let (out_path, err_path) = (out_dir.path().join("out"), out_dir.path().join("err"));
    let mut child = Command::new(env!("CARGO_BIN_EXE_exmesh"))
        .args(args)
        .current_dir(dir)
        .stdout(std::fs::File::create(&out_path).unwrap())
        .stderr(std::fs::File::create(&err_path).unwrap())
        .spawn()
        .expect("run exmesh");
    let started = std::time::Instant::now();
    let mut killed = false;
    let status = loop {
        if let Some(status) = child.try_wait().expect("wait for exmesh") {
            break status;
        }
        if started.elapsed() > cap {
            let _ = child.kill();
            killed = true;
            break child.wait().expect("wait for exmesh");
        }
        std::thread::sleep(std::time::Duration::from_millis(5));
    };
    let read =
        |p: &Path| String::from_utf8_lossy(&std::fs::read(p).unwrap_or_default()).into_owned();
    CappedRun {
        code: status.code().unwrap_or(-1),
        stdout: read(&out_path),
        stderr: read(&err_path),
        killed,
    }
}

/// A log of `rows` (t, j, psi...) with a `y` column of zeros.
pub fn log_text(p: usize, rows: &[(f64, u32, Vec<f64>)]) -> String {
    let psi: Vec<String> = (1..=p).map(|k| format!("psi{k}")).collect();
    let mut s = format!("t,j,{},y\n", psi.join(","));
    for (t, j, v) in rows {
        let cols: Vec<String> = v.iter().map(|x| x.to_string()).collect();
        s.push_str(&format!("{t},{j},{},0\n", cols.join(",")));
    }
    s
}

/// A flow-only log with constant regressor `psi` sampled every 0.5 s on [0, 10].
pub fn constant_log(psi: &[f64]) -> String {
    let rows: Vec<(f64, u32, Vec<f64>)> = (0..=20)
        .map(|k| (k as f64 * 0.5, 0, psi.to_vec()))
        .collect();
    log_text(psi.len(), &rows)
}

/// A valid three-unit problem (p = 2): `a` excites e1, `b` e2, `c` nothing.
/// Links: a<->b (installed), b->c, a->c.
pub fn small_problem(folder: &Folder) -> PathBuf {
    folder.write("logs/a.csv", &constant_log(&[1.0, 0.0]));
    folder.write("logs/b.csv", &constant_log(&[0.0, 1.0]));
    folder.write("logs/c.csv", &constant_log(&[0.0, 0.0]));
    folder.write("problem.toml", SMALL_PROBLEM)
}

/// The small problem with `plan.json` holding the links a<->b and b->c.
pub fn small_problem_with_plan(folder: &Folder) -> PathBuf {
    folder.write("plan.json", SMALL_PLAN);
    small_problem(folder)
}

/// The small problem's text with a required convergence rate.
pub fn small_problem_with_target(rate: &str) -> String {
    SMALL_PROBLEM.replacen(
        "min_excitation = 0.5\n",
        &format!("min_excitation = 0.5\ntarget_rate = {rate}\n"),
        1,
    )
}

/// A plan file for the small problem: a<->b and b->c.
pub const SMALL_PLAN: &str = r#"{"links": [
  {"from": "a", "to": "b", "two_way": true},
  {"from": "b", "to": "c", "two_way": false}
]}"#;

pub const SMALL_PROBLEM: &str = r#"[network]
name = "three units"
parameters = 2
window = 4.0
stride = 1.0
min_excitation = 0.5

[[node]]
id = "a"
log = "logs/a.csv"

[[node]]
id = "b"
log = "logs/b.csv"

[[node]]
id = "c"
log = "logs/c.csv"

[[link]]
between = ["a", "b"]
cost = 10.0
installed = true

[[link]]
from = "b"
to = "c"
cost = 3.0

[[link]]
from = "a"
to = "c"
cost = 4.0
"#;

use exmesh::ExcitationTable;
use exmesh::problem::{Ends, Gains, Link, Node, NodeId, Problem, Settings};
use exmesh::signal::{Log, Window, WindowKind};

/// A link for [`synthetic`]: (a, b, cost, two_way).
pub type Edge = (usize, usize, f64, bool);

/// A problem on `n` units with the given links, whose excitation comes from
/// `gram` (packed p×p per window and unit, index `(w * n + i) * q`), not from
/// the (silent) logs. μ_req is `mu`.
pub fn synthetic(
    n: usize,
    p: usize,
    edges: &[Edge],
    windows: usize,
    gram: Vec<f64>,
    mu: f64,
) -> (Problem, ExcitationTable) {
    let nodes: Vec<Node> = (0..n)
        .map(|i| Node {
            id: format!("n{i}"),
            position: None,
            lat_lon: None,
            max_links: None,
            log: Log {
                path: PathBuf::from(format!("n{i}.csv")),
                p,
                t: vec![0.0, windows as f64],
                j: vec![0, 0],
                psi: vec![0.0; 2 * p],
                y: None,
            },
        })
        .collect();
    let links: Vec<Link> = edges
        .iter()
        .enumerate()
        .map(|(k, &(a, b, cost, two_way))| Link {
            id: format!("l{k}"),
            ends: if two_way {
                Ends::TwoWay(NodeId(a as u32), NodeId(b as u32))
            } else {
                Ends::OneWay {
                    from: NodeId(a as u32),
                    to: NodeId(b as u32),
                }
            },
            cost,
            weight: 1.0,
            installed: false,
            required: false,
            generated: false,
        })
        .collect();
    let settings = Settings {
        name: "synthetic".into(),
        parameters: p,
        window: 1.0,
        window_kind: WindowKind::Time,
        stride: Some(1.0),
        min_excitation: Some(mu),
        target_rate: None,
        gains: Gains::default(),
    };
    let problem = Problem::from_parts(PathBuf::from("synthetic.toml"), settings, nodes, links)
        .expect("valid synthetic problem");
    let ws: Vec<Window> = (0..windows)
        .map(|k| Window {
            start: k as f64,
            end: k as f64 + 1.0,
            jumps_through_end: false,
        })
        .collect();
    let table = ExcitationTable::from_gramians(n, p, ws, gram, Some(mu));
    (problem, table)
}

/// Gramians for p = 1, one window: unit `root` has 1, the others 0.
pub fn one_root(n: usize, root: usize) -> Vec<f64> {
    (0..n).map(|i| if i == root { 1.0 } else { 0.0 }).collect()
}
