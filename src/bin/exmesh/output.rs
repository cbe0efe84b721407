//! What leaves the binary: text or JSON on stdout, files written atomically,
//! the progress line on a terminal, and the exit code of each outcome.

use anyhow::Context;
use exmesh::progress::{Progress, Sink};
use exmesh::{ExcitationTable, LinkSet, Problem, plan, report};
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};

/// A bad flag value found after parsing (an unknown unit for `--node`, a
/// vector of the wrong length): exit 2, naming the flag.
#[derive(Debug, thiserror::Error)]
#[error("{flag}: {message}")]
pub(crate) struct FlagError {
    /// The flag at fault.
    pub(crate) flag: &'static str,
    /// What is wrong and what was expected.
    pub(crate) message: String,
}

/// One progress line on stderr, redrawn in place; only on a terminal.
/// Developer diagnostics (`EXMESH_DEBUG_GROUPS` set) go to stderr too.
struct TerminalLine {
    open: AtomicBool,
    terminal: bool,
    debug: bool,
}

impl Progress for TerminalLine {
    fn update(&self, line: &str) {
        if self.terminal {
            eprint!("\r{line}   ");
            self.open.store(true, Ordering::Relaxed);
        }
    }

    fn done(&self) {
        if self.open.swap(false, Ordering::Relaxed) {
            eprintln!();
        }
    }

    fn debug(&self, line: &str) {
        eprintln!("{line}");
    }

    fn wants_debug(&self) -> bool {
        self.debug
    }
}

/// The progress sink of this run: a terminal line when stderr is a
/// terminal, else silent.
pub(crate) fn progress() -> Sink {
    let debug = std::env::var_os("EXMESH_DEBUG_GROUPS").is_some();
    let terminal = std::io::stderr().is_terminal();
    if terminal || debug {
        Sink::new(TerminalLine {
            open: AtomicBool::new(false),
            terminal,
            debug,
        })
    } else {
        Sink::silent()
    }
}

/// Prints `value` as JSON, or as text through `text`.
pub(crate) fn emit<W: Write, T: serde::Serialize>(
    out: &mut W,
    json: bool,
    value: &T,
    text: impl FnOnce(&mut W) -> std::io::Result<()>,
) -> std::io::Result<()> {
    if json {
        report::json::write(value, out)
    } else {
        text(out)
    }
}

/// Exit 0 when the answer is yes, 1 when it is no.
pub(crate) fn verdict(ok: bool) -> ExitCode {
    if ok {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    }
}

/// Writes `plan` as a plan file when a path is given and the plan is not
/// infeasible.
pub(crate) fn write_plan_file(path: Option<PathBuf>, plan: &plan::Plan) -> anyhow::Result<()> {
    if let (Some(path), true) = (path, plan.status != plan::PlanStatus::Infeasible) {
        let mut bytes = Vec::new();
        report::json::write(plan, &mut bytes)?;
        write_atomically(&path, &bytes)
            .with_context(|| format!("writing the plan to {}", path.display()))?;
    }
    Ok(())
}

/// Writes the requested pictures (map SVG, DOT) of `set`.
pub(crate) fn write_pictures(
    map: Option<&Path>,
    dot: Option<&Path>,
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
) -> anyhow::Result<()> {
    if map.is_none() && dot.is_none() {
        return Ok(());
    }
    let scene = report::map::Scene::new(problem, table, set);
    if let Some(path) = map {
        write_atomically(path, report::map::svg(&scene).as_bytes())
            .with_context(|| format!("writing the map to {}", path.display()))?;
    }
    if let Some(path) = dot {
        write_atomically(path, report::dot::dot(&scene).as_bytes())
            .with_context(|| format!("writing the DOT file to {}", path.display()))?;
    }
    Ok(())
}

/// Writes `bytes` to a temporary file beside `path`, then renames it, so a
/// failed run never leaves a half-written file.
pub(crate) fn write_atomically(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = std::fs::write(&tmp, bytes).and_then(|()| std::fs::rename(&tmp, path));
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// The exit code of a failed run: 141 for a closed pipe (as for a program
/// ended by SIGPIPE), 2 for bad input or a bad flag, 3 otherwise.
pub(crate) fn failure_code(e: &anyhow::Error) -> u8 {
    let broken_pipe = e
        .chain()
        .filter_map(|c| c.downcast_ref::<std::io::Error>())
        .any(|io| io.kind() == std::io::ErrorKind::BrokenPipe);
    if broken_pipe {
        141
    } else if e.downcast_ref::<exmesh::InputError>().is_some()
        || e.downcast_ref::<FlagError>().is_some()
    {
        2
    } else {
        3
    }
}
