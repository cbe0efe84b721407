//! One short function per command: load, call the library, hand the answer
//! to `output`.

use crate::args::{LinkChoice, Pictures, SurviveArg, Vector};
use crate::output::{
    FlagError, Outputs, emit, plan_code, problem_inputs, progress, refuse_overwriting, verdict,
};
use anyhow::Context;
use exmesh::{
    ExcitationTable, LinkSet, analysis, certify, plan, problem, report, simulate, whatif,
};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::OnceLock;
use std::time::{Duration, Instant};

/// When the command started: time limits count from here.
static STARTED: OnceLock<Instant> = OnceLock::new();

/// Marks the start of the command (call first thing in `main`).
pub(crate) fn start_clock() {
    STARTED.get_or_init(Instant::now);
}

/// What is left of a time limit counted from the command's start (at
/// least a millisecond, so the engine still returns its first plan).
fn remaining(limit: Option<Duration>) -> Option<Duration> {
    let started = *STARTED.get_or_init(Instant::now);
    limit.map(|l| {
        l.saturating_sub(started.elapsed())
            .max(Duration::from_millis(1))
    })
}

/// `excitation`: per-unit excitation summary.
pub(crate) fn excitation(
    out: &mut impl Write,
    path: &Path,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let table = ExcitationTable::build(&problem);
    let summary = analysis::excitation_summary(&problem, &table);
    emit(out, json, &summary, |o| {
        report::text::excitation(&summary, o)
    })
    .context("writing the excitation summary")?;
    Ok(ExitCode::SUCCESS)
}

/// `plan`: the cheapest link set, its pictures and plan file.
pub(crate) fn plan(
    out: &mut impl Write,
    path: &Path,
    plan_path: Option<PathBuf>,
    time_limit: Option<Duration>,
    survive: Option<SurviveArg>,
    pictures: &Pictures,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    refuse_overwriting(
        &problem_inputs(&problem),
        &[
            ("--out", plan_path.as_deref()),
            ("--svg", pictures.map.as_deref()),
            ("--dot", pictures.dot.as_deref()),
        ],
    )?;
    let table = ExcitationTable::build(&problem);
    let options = plan::Options {
        time_limit: remaining(time_limit),
        progress: progress(),
        survive: match survive {
            None => plan::Survive::Nothing,
            Some(SurviveArg::Link) => plan::Survive::Link,
            Some(SurviveArg::Unit) => plan::Survive::Unit,
        },
        node_limit: None,
    };
    let plan = plan::plan(&problem, &table, &options);
    let feasible = plan.status != plan::PlanStatus::Infeasible;
    // The picture of an infeasible problem shows every candidate.
    let set = if feasible {
        plan.link_set(&problem)
    } else {
        problem.all_links()
    };
    let mut files = Outputs::default();
    files.pictures(pictures, &problem, &table, &set);
    files.plan_file(plan_path.as_deref(), &plan)?;
    files.commit()?;
    emit(out, json, &plan, |o| report::text::plan(&plan, o)).context("writing the plan")?;
    Ok(plan_code(&plan))
}

/// The command line as typed, program name shortened to `exmesh` and
/// arguments with spaces or quotes quoted.
fn command_line() -> String {
    let mut parts = vec!["exmesh".to_string()];
    for a in std::env::args().skip(1) {
        if a.is_empty() || a.contains([' ', '"', '\'', '\\']) {
            parts.push(format!("{a:?}"));
        } else {
            parts.push(a);
        }
    }
    parts.join(" ")
}

/// The files `budget` writes besides its answer.
pub(crate) struct FrontFiles {
    /// The front figure (SVG).
    pub(crate) svg: Option<PathBuf>,
    /// A folder for one plan file per point of the front.
    pub(crate) out_dir: Option<PathBuf>,
}

/// One point of the front as a plan file: `check`, `simulate`, `stress`
/// and `report` read its `links`.
#[derive(serde::Serialize)]
struct FrontPlanFile<'a> {
    network: &'a str,
    /// Position on the front, from 1 (the cheapest).
    point: usize,
    cost: f64,
    certified_rate: Option<f64>,
    links: Vec<exmesh::plan::ChosenLink>,
}

/// `budget`: the cost–rate front.
pub(crate) fn budget(
    out: &mut impl Write,
    path: &Path,
    max_cost: Option<f64>,
    steps: usize,
    files_out: &FrontFiles,
    time_limit: Option<Duration>,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let inputs = problem_inputs(&problem);
    refuse_overwriting(&inputs, &[("--svg", files_out.svg.as_deref())])?;
    let table = ExcitationTable::build(&problem);
    let options = plan::Options {
        time_limit: remaining(time_limit),
        progress: progress(),
        ..Default::default()
    };
    let front = whatif::budget::front(&problem, &table, &options, max_cost, steps);
    let mut files = Outputs::default();
    if let Some(path) = &files_out.svg {
        let text = report::chart::front_svg(&front, problem.settings.target_rate)
            .map_err(|e| anyhow::anyhow!("drawing the front: {e}"))?;
        let text = report::svg::with_cautions(&text);
        files.add(path, text.into_bytes(), "the figure");
    }
    if let Some(dir) = &files_out.out_dir {
        let width = front.front.len().to_string().len().max(2);
        let targets: Vec<PathBuf> = (1..=front.front.len())
            .map(|k| dir.join(format!("front-{k:0width$}.json")))
            .collect();
        let named: Vec<(&'static str, Option<&Path>)> = targets
            .iter()
            .map(|t| ("--out-dir", Some(t.as_path())))
            .collect();
        refuse_overwriting(&inputs, &named)?;
        std::fs::create_dir_all(dir).map_err(|e| FlagError {
            flag: "--out-dir",
            message: format!("cannot make the folder {}: {e}", dir.display()),
        })?;
        for (k, (p, target)) in front.front.iter().zip(&targets).enumerate() {
            let ids: Vec<exmesh::problem::LinkId> = p
                .links
                .iter()
                .filter_map(|id| problem.link_id(id))
                .collect();
            let set = LinkSet::new(ids);
            let file = FrontPlanFile {
                network: &problem.settings.name,
                point: k + 1,
                cost: p.cost,
                certified_rate: p.rate,
                links: exmesh::plan::chosen_links(&problem, &set),
            };
            let mut bytes = Vec::new();
            report::json::write(&file, &mut bytes)?;
            files.add(target, bytes, "a plan of the front");
        }
    }
    files.commit()?;
    emit(out, json, &front, |o| report::text::front(&front, o)).context("writing the front")?;
    let ok = front.structural_cost.is_some()
        && (max_cost.is_none() || front.best_within_budget.is_some());
    Ok(verdict(ok))
}

/// `compare`: two link sets side by side.
pub(crate) fn compare(
    out: &mut impl Write,
    path: &Path,
    plans: [&Path; 2],
    skip_rate: bool,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let a = problem::read_link_set(&problem, plans[0])?;
    let b = problem::read_link_set(&problem, plans[1])?;
    let table = ExcitationTable::build(&problem);
    let names = plans.map(|p| p.display().to_string());
    let result =
        whatif::compare::compare(&problem, &table, &a, &b, [&names[0], &names[1]], !skip_rate);
    emit(out, json, &result, |o| report::text::comparison(&result, o))
        .context("writing the comparison")?;
    Ok(ExitCode::SUCCESS)
}

/// `stress`: every single failure of a plan.
pub(crate) fn stress(
    out: &mut impl Write,
    path: &Path,
    plan: &Path,
    skip_rate: bool,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let set = problem::read_link_set(&problem, plan)?;
    let table = ExcitationTable::build(&problem);
    let result = whatif::stress::stress(&problem, &table, &set, !skip_rate, &progress());
    emit(out, json, &result, |o| report::text::stress(&result, o))
        .context("writing the failure report")?;
    Ok(ExitCode::SUCCESS)
}

/// `report`: one HTML page of a plan.
pub(crate) fn report(
    out: &mut impl Write,
    path: &Path,
    plan: &Path,
    page: &Path,
    front: bool,
    truth: Option<Vector>,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let mut inputs = problem_inputs(&problem);
    inputs.push(plan);
    refuse_overwriting(&inputs, &[("--out", Some(page))])?;
    let (set, facts) = problem::read_plan_file(&problem, plan)?;
    let table = ExcitationTable::build(&problem);
    let truth = truth.map(|v| v.0);
    if let Some(v) = &truth {
        let p = problem.settings.parameters;
        if v.len() != p {
            return Err(FlagError {
                flag: "--truth",
                message: format!(
                    "expected {p} values (the problem's parameters), found {}",
                    v.len()
                ),
            }
            .into());
        }
    }
    let provenance = report::html::Provenance {
        command: command_line(),
        plan_file: plan.display().to_string(),
    };
    let html = report::html::assemble(
        &problem,
        &table,
        &set,
        facts,
        provenance,
        truth,
        front,
        &progress(),
    )
    .map_err(anyhow::Error::msg)?;
    let mut files = Outputs::default();
    files.add(page, html.into_bytes(), "the report");
    files.commit()?;
    writeln!(out, "wrote {}", page.display()).context("writing to standard output")?;
    Ok(ExitCode::SUCCESS)
}

/// What `retire` is told: units retired, links failed, the links in place
/// and where to write the new plan and the reduced problem.
pub(crate) struct Retiring {
    pub(crate) nodes: Vec<String>,
    pub(crate) links: Vec<String>,
    pub(crate) in_place: Option<PathBuf>,
    pub(crate) plan_out: Option<PathBuf>,
    pub(crate) problem_out: Option<PathBuf>,
}

/// Resolves a failed link named `FROM,TO` (the candidate between the two
/// units: a two-way link in either order or a one-way link FROM → TO) or by
/// its id. An unknown unit, no candidate or several candidates are flag
/// errors that say what was found.
fn failed_link(
    problem: &exmesh::Problem,
    text: &str,
) -> Result<exmesh::problem::LinkId, FlagError> {
    use exmesh::problem::{Ends, LinkId};
    if let Some(id) = problem.link_id(text) {
        return Ok(id);
    }
    let bad = |message: String| FlagError {
        flag: "--link",
        message,
    };
    let Some((a, b)) = text.split_once(',') else {
        return Err(bad(format!(
            "{text:?} is neither a candidate link id nor FROM,TO; expected two unit ids separated by a comma, or a link id"
        )));
    };
    let (a, b) = (a.trim(), b.trim());
    let unit = |name: &str| {
        problem.node_id(name).ok_or_else(|| {
            bad(format!(
                "unknown unit {name:?} in {text:?}; expected one of the problem's [[node]] ids"
            ))
        })
    };
    let (u, v) = (unit(a)?, unit(b)?);
    let matches: Vec<LinkId> = (0..problem.links.len() as u32)
        .map(LinkId)
        .filter(|&l| match problem.link(l).ends {
            Ends::TwoWay(x, y) => (x, y) == (u, v) || (x, y) == (v, u),
            Ends::OneWay { from, to } => (from, to) == (u, v),
        })
        .collect();
    match matches.as_slice() {
        [] => Err(bad(format!(
            "no candidate link joins {a} to {b} (two-way in either order, or one-way from {a} to {b})"
        ))),
        [one] => Ok(*one),
        many => Err(bad(format!(
            "{text:?} is ambiguous: {} candidate links join {a} and {b}: {}; name one by its id",
            many.len(),
            many.iter()
                .map(|&l| {
                    let link = problem.link(l);
                    format!(
                        "{} ({}, cost {})",
                        link.id,
                        if matches!(link.ends, Ends::TwoWay(..)) {
                            "two-way"
                        } else {
                            "one-way"
                        },
                        link.cost
                    )
                })
                .collect::<Vec<_>>()
                .join(", ")
        ))),
    }
}

/// `retire`: re-plan without some units or links.
pub(crate) fn retire(
    out: &mut impl Write,
    path: &Path,
    what: &Retiring,
    time_limit: Option<Duration>,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let mut inputs = problem_inputs(&problem);
    inputs.extend(what.in_place.as_deref());
    refuse_overwriting(
        &inputs,
        &[
            ("--out", what.plan_out.as_deref()),
            ("--write-problem", what.problem_out.as_deref()),
        ],
    )?;
    let mut units = Vec::new();
    for name in &what.nodes {
        let id = problem.node_id(name).ok_or_else(|| FlagError {
            flag: "--node",
            message: format!("unknown unit {name:?}; expected one of the problem's [[node]] ids"),
        })?;
        if !units.contains(&id) {
            units.push(id);
        }
    }
    let mut failed = Vec::new();
    for text in &what.links {
        let l = failed_link(&problem, text)?;
        if !failed.contains(&l) {
            failed.push(l);
        }
    }
    let in_place = match &what.in_place {
        Some(path) => problem::read_link_set(&problem, path)?,
        None => LinkSet::default(),
    };
    let options = plan::Options {
        time_limit: remaining(time_limit),
        progress: progress(),
        ..Default::default()
    };
    let result = whatif::retire::retire(&problem, &units, &failed, &in_place, &options)
        .map_err(|e| exmesh::InputError::whole(&problem.path, e.to_string()))?;
    let mut files = Outputs::default();
    files.plan_file(what.plan_out.as_deref(), &result.plan)?;
    if let Some(target) = &what.problem_out {
        let reduced = &result.reduced;
        let mut header = vec![format!(
            "Written by `{}` from {}.",
            command_line(),
            problem.path.display()
        )];
        if !result.retired.is_empty() {
            header.push(format!("Retired units: {}.", result.retired.join(", ")));
        }
        if !result.failed_links.is_empty() {
            header.push(format!("Failed links: {}.", result.failed_links.join(", ")));
        }
        header.push("Links that were in place are marked installed.".into());
        files.add(
            target,
            reduced.to_toml(target, &header).into_bytes(),
            "the reduced problem",
        );
    }
    files.commit()?;
    emit(out, json, &result, |o| report::text::retirement(&result, o))
        .context("writing the re-plan")?;
    Ok(plan_code(&result.plan))
}

/// The files `simulate` writes besides its summary.
pub(crate) struct SimulationFiles {
    /// The error trajectories (CSV).
    pub(crate) csv: Option<PathBuf>,
    /// The error figure (SVG).
    pub(crate) svg: Option<PathBuf>,
}

/// `simulate`: run the estimators on the logs for a plan.
pub(crate) fn simulate(
    out: &mut impl Write,
    path: &Path,
    plan: &Path,
    files: SimulationFiles,
    truth: Option<Vector>,
    initial: Option<Vector>,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let mut inputs = problem_inputs(&problem);
    inputs.push(plan);
    refuse_overwriting(
        &inputs,
        &[
            ("--out", files.csv.as_deref()),
            ("--svg", files.svg.as_deref()),
        ],
    )?;
    let set = problem::read_link_set(&problem, plan)?;
    let table = ExcitationTable::build(&problem);
    let cert = certify::certify_showing(&problem, &table, &set, &progress());
    let options = simulate::SimOptions {
        truth: truth.map(|v| v.0),
        initial: initial.map(|v| v.0),
    };
    let traj = simulate::simulate(&problem, &set, Some(&cert), &options).map_err(|e| {
        let flag = match &e {
            simulate::SimError::Dimension { which, .. } => match which {
                simulate::Given::Truth => "--truth",
                simulate::Given::Initial => "--initial",
            },
            _ => {
                return anyhow::Error::new(exmesh::InputError::whole(&problem.path, e.to_string()));
            }
        };
        anyhow::Error::new(FlagError {
            flag,
            message: e.to_string(),
        })
    })?;
    let mut outputs = Outputs::default();
    if let Some(path) = &files.csv {
        let mut bytes = Vec::new();
        simulate::write_csv(&problem, &traj, &mut bytes)?;
        outputs.add(path, bytes, "the trajectory");
    }
    if let Some(path) = &files.svg {
        let text = report::chart::errors_svg(&problem, &traj)
            .map_err(|e| anyhow::anyhow!("drawing the error figure: {e}"))?;
        let text = report::svg::with_cautions(&text);
        outputs.add(path, text.into_bytes(), "the figure");
    }
    outputs.commit()?;
    emit(out, json, &traj, |o| report::text::simulation(&traj, o))
        .context("writing the simulation summary")?;
    Ok(ExitCode::SUCCESS)
}

/// `check`: are all source components jointly excited, at what rate?
pub(crate) fn check(
    out: &mut impl Write,
    path: &Path,
    links: &LinkChoice,
    pictures: &Pictures,
    json: bool,
    skip_rate: bool,
) -> anyhow::Result<ExitCode> {
    let problem = problem::load(path)?;
    let mut inputs = problem_inputs(&problem);
    inputs.extend(links.plan.as_deref());
    refuse_overwriting(
        &inputs,
        &[
            ("--svg", pictures.map.as_deref()),
            ("--dot", pictures.dot.as_deref()),
        ],
    )?;
    let set: LinkSet = match (links.all, links.installed, &links.plan) {
        (true, _, _) => problem.all_links(),
        (_, true, _) => problem.installed_links(),
        (_, _, Some(plan)) => problem::read_link_set(&problem, plan)?,
        _ => unreachable!("clap requires one link choice"),
    };
    let table = ExcitationTable::build(&problem);
    let mut files = Outputs::default();
    files.pictures(pictures, &problem, &table, &set);
    files.commit()?;
    let mut check = analysis::check(&problem, &table, &set);
    if !skip_rate {
        let cert = certify::certify_showing(&problem, &table, &set, &progress());
        check = check.with_certificate(cert);
    }
    emit(out, json, &check, |o| report::text::check(&check, o)).context("writing the check")?;
    Ok(verdict(check.verdict.ok()))
}
