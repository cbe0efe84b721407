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
