//! What leaves the binary: text or JSON on stdout, files written atomically,
//! the progress line on a terminal, and the exit code of each outcome.

use crate::args::Pictures;
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

/// The exit code of a planning command: 0 with a plan, 1 when no link set
/// can satisfy the problem, 3 (with a message) when the time limit came
/// before any plan was found.
pub(crate) fn plan_code(plan: &plan::Plan) -> ExitCode {
    match (plan.status, plan.cost) {
        (plan::PlanStatus::Infeasible, _) => ExitCode::from(1),
        (_, Some(_)) => ExitCode::SUCCESS,
        (_, None) => {
            eprintln!(
                "exmesh: error: no plan was found within the time limit; expected a longer --time-limit"
            );
            ExitCode::from(3)
        }
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

/// The files a command writes, gathered and written together at the end:
/// all or none (no new picture beside a plan file that could not be
/// written).
#[derive(Default)]
pub(crate) struct Outputs {
    files: Vec<(PathBuf, Vec<u8>, &'static str)>,
}

impl Outputs {
    /// Adds a file; `what` names it in messages ("the plan").
    pub(crate) fn add(&mut self, path: &Path, bytes: Vec<u8>, what: &'static str) {
        self.files.push((path.to_path_buf(), bytes, what));
    }

    /// Adds `plan` as a plan file when a path is given and there is a plan
    /// (not infeasible, and found before any time limit).
    pub(crate) fn plan_file(
        &mut self,
        path: Option<&Path>,
        plan: &plan::Plan,
    ) -> anyhow::Result<()> {
        let found = plan.status != plan::PlanStatus::Infeasible && plan.cost.is_some();
        if let (Some(path), true) = (path, found) {
            let mut bytes = Vec::new();
            report::json::write(plan, &mut bytes)?;
            self.add(path, bytes, "the plan");
        }
        Ok(())
    }

    /// Adds the requested pictures (map SVG, DOT) of `set`.
    pub(crate) fn pictures(
        &mut self,
        pictures: &Pictures,
        problem: &Problem,
        table: &ExcitationTable,
        set: &LinkSet,
    ) {
        if pictures.map.is_none() && pictures.dot.is_none() {
            return;
        }
        let scene = report::map::Scene::new(problem, table, set);
        if let Some(path) = &pictures.map {
            let map = report::svg::with_cautions(&report::map::svg(&scene));
            self.add(path, map.into_bytes(), "the map");
        }
        if let Some(path) = &pictures.dot {
            self.add(path, report::dot::dot(&scene).into_bytes(), "the DOT file");
        }
    }

    /// Writes every file to a temporary file beside it, then renames them
    /// all; when any write fails, no temporary file stays and no target
    /// is touched.
    pub(crate) fn commit(self) -> anyhow::Result<()> {
        let mut written: Vec<(PathBuf, &Path)> = Vec::new();
        for (path, bytes, what) in &self.files {
            let tmp = temporary(path);
            clean_stale(path);
            if let Err(e) = std::fs::write(&tmp, bytes) {
                let _ = std::fs::remove_file(&tmp);
                for (t, _) in &written {
                    let _ = std::fs::remove_file(t);
                }
                return Err(
                    anyhow::Error::new(e).context(format!("writing {what} to {}", path.display()))
                );
            }
            written.push((tmp, path));
        }
        let mut failed = None;
        for (k, (tmp, path)) in written.iter().enumerate() {
            if let Err(e) = std::fs::rename(tmp, path) {
                for (t, _) in &written[k..] {
                    let _ = std::fs::remove_file(t);
                }
                let what = self.files[k].2;
                failed = Some(
                    anyhow::Error::new(e).context(format!("writing {what} to {}", path.display())),
                );
                break;
            }
        }
        failed.map_or(Ok(()), Err)
    }
}

/// Refuses (exit 2) an output path that is one of the command's inputs, or
/// that two outputs share. `outputs` pairs each flag with its path.
pub(crate) fn refuse_overwriting(
    inputs: &[&Path],
    outputs: &[(&'static str, Option<&Path>)],
) -> Result<(), FlagError> {
    let same = |a: &Path, b: &Path| match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    };
    let given: Vec<(&'static str, &Path)> = outputs
        .iter()
        .filter_map(|&(flag, path)| path.map(|p| (flag, p)))
        .collect();
    for (k, &(flag, path)) in given.iter().enumerate() {
        if let Some(input) = inputs.iter().find(|i| same(path, i)) {
            return Err(FlagError {
                flag,
                message: if path == *input {
                    format!(
                        "{} is an input of this command; expected another output file",
                        path.display()
                    )
                } else {
                    format!(
                        "{} is an input of this command ({}); expected another output file",
                        path.display(),
                        input.display()
                    )
                },
            });
        }
        let clash = given[..k]
            .iter()
            .find(|(_, other)| other == &path || same(path, other));
        if let Some((other, _)) = clash {
            return Err(FlagError {
                flag,
                message: format!(
                    "{} is also the file of {other}; expected a different file for each output",
                    path.display()
                ),
            });
        }
    }
    Ok(())
}

/// The files a problem reads: the problem file and every unit's log.
pub(crate) fn problem_inputs(problem: &Problem) -> Vec<&Path> {
    std::iter::once(problem.path.as_path())
        .chain(problem.nodes.iter().map(|n| n.log.path.as_path()))
        .collect()
}

/// The temporary file of `path`: `.NAME.PID.exmesh.tmp` beside it.
fn temporary(path: &Path) -> PathBuf {
    let (dir, name) = dir_and_name(path);
    dir.join(format!(".{name}.{}.exmesh.tmp", std::process::id()))
}

fn dir_and_name(path: &Path) -> (&Path, String) {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    (dir, name)
}

/// Removes temporary files of `path` left by an exmesh run that was
/// killed between writing and renaming: those whose process is gone (on
/// systems with /proc), or older than an hour elsewhere.
fn clean_stale(path: &Path) {
    let (dir, name) = dir_and_name(path);
    let prefix = format!(".{name}.");
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let proc = Path::new("/proc/self").exists();
    for entry in entries.flatten() {
        let file = entry.file_name();
        let Some(pid) = file
            .to_str()
            .and_then(|f| f.strip_prefix(&prefix))
            .and_then(|f| f.strip_suffix(".exmesh.tmp"))
            .and_then(|pid| pid.parse::<u32>().ok())
        else {
            continue;
        };
        if pid == std::process::id() {
            continue;
        }
        let stale = if proc {
            !Path::new(&format!("/proc/{pid}")).exists()
        } else {
            entry
                .metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_some_and(|age| age.as_secs() > 3600)
        };
        if stale {
            let _ = std::fs::remove_file(entry.path());
        }
    }
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
