//! The `exmesh` command-line tool: parses arguments, calls the library,
//! prints.
//!
//! Exit codes:
//! - 0: done; for `check`, every source component is excited; for `plan`, a
//!   plan was found (optimal, or with its gap at the time limit).
//! - 1: the condition does not hold (`check`), or no link set can satisfy it
//!   (`plan`, infeasible; no plan file is written).
//! - 2: bad input (problem file, log, plan file) or bad command line.
//! - 3: any other failure (for example, writing the output failed).
//! - 141: standard output was closed early (a pipe into `head`), as for a
//!   program ended by SIGPIPE.

use anyhow::Context;
use clap::{Args, Parser, Subcommand};
use exmesh::{
    ExcitationTable, InputError, LinkSet, analysis, certify, problem, report, search, simulate,
};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Duration;

#[derive(Parser)]
#[command(
    name = "exmesh",
    version,
    about = "Plan estimate-sharing links so every unit's hybrid gradient estimator provably converges"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Per-unit excitation: level, weakest direction, rank, flow vs jump share.
    Excitation {
        /// Problem file (TOML).
        problem: PathBuf,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Cheapest link set that makes every source component excited, with a proven lower bound.
    Plan {
        /// Problem file (TOML).
        problem: PathBuf,
        /// Write the plan (JSON) to this file.
        #[arg(long, value_name = "PLAN.json")]
        out: Option<PathBuf>,
        /// Stop after this many seconds and return the best plan with its gap.
        #[arg(long, value_name = "SECONDS")]
        time_limit: Option<f64>,
        /// Plan so that the condition still holds after any one link fails, or any one unit is lost.
        #[arg(long, value_enum)]
        survive: Option<SurviveArg>,
        #[command(flatten)]
        pictures: Pictures,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Run the estimators on the logs for a plan and compare with the certified rate.
    Simulate {
        /// Problem file (TOML).
        problem: PathBuf,
        /// The plan (JSON with a `links` list) whose links carry the estimates.
        #[arg(long, value_name = "PLAN.json")]
        plan: PathBuf,
        /// Write each unit's error norm over time (CSV).
        #[arg(long, value_name = "TRAJ.csv")]
        out: Option<PathBuf>,
        /// Draw the errors and the certified envelope (SVG).
        #[arg(long, value_name = "ERRORS.svg")]
        svg: Option<PathBuf>,
        /// True parameter, comma-separated; outputs are made from it instead of the logged y.
        #[arg(long, value_name = "V1,V2,...", allow_hyphen_values = true)]
        truth: Option<String>,
        /// Initial estimate of every unit, comma-separated (default zero).
        #[arg(long, value_name = "V1,V2,...", allow_hyphen_values = true)]
        initial: Option<String>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Cost–rate front: the best certified rate each budget buys.
    Budget {
        /// Problem file (TOML).
        problem: PathBuf,
        /// Only plans costing at most this much; report the best rate within it.
        #[arg(long, value_name = "B")]
        max_cost: Option<f64>,
        /// Most links added beyond the structural optimum.
        #[arg(long, value_name = "N", default_value_t = 8)]
        steps: usize,
        /// Draw the front (SVG).
        #[arg(long, value_name = "FRONT.svg")]
        svg: Option<PathBuf>,
        /// Stop after this many seconds (half for the structural search, half for the sweep).
        #[arg(long, value_name = "SECONDS")]
        time_limit: Option<f64>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Every single link failure and unit loss of a plan: does the condition hold, at what rate?
    Stress {
        /// Problem file (TOML).
        problem: PathBuf,
        /// The plan (JSON with a `links` list).
        #[arg(long, value_name = "PLAN.json")]
        plan: PathBuf,
        /// Only the structural check of each failure: skip the certified rates.
        #[arg(long)]
        skip_rate: bool,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// One self-contained HTML report of a plan (map, links, components, certificate, errors).
    Report {
        /// Problem file (TOML).
        problem: PathBuf,
        /// The plan (JSON with a `links` list).
        #[arg(long, value_name = "PLAN.json")]
        plan: PathBuf,
        /// Write the report here.
        #[arg(long, value_name = "REPORT.html")]
        out: PathBuf,
        /// Include the cost–rate front (runs the budget sweep).
        #[arg(long)]
        front: bool,
        /// True parameter for the error figure, comma-separated (else the logged y).
        #[arg(long, value_name = "V1,V2,...", allow_hyphen_values = true)]
        truth: Option<String>,
    },
    /// Retire units: drop them, their logs and links, and re-plan with the links in place kept free.
    Retire {
        /// Problem file (TOML).
        problem: PathBuf,
        /// Unit to retire (repeat for several).
        #[arg(long = "node", value_name = "ID", required = true)]
        nodes: Vec<String>,
        /// The links in place (a plan file); links marked `installed` count too.
        #[arg(long, value_name = "INSTALLED.json")]
        plan: Option<PathBuf>,
        /// Write the new plan (JSON) to this file.
        #[arg(long, value_name = "PLAN.json")]
        out: Option<PathBuf>,
        /// Stop the search after this many seconds.
        #[arg(long, value_name = "SECONDS")]
        time_limit: Option<f64>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Check a link set: are all source components jointly excited?
    Check {
        /// Problem file (TOML).
        problem: PathBuf,
        #[command(flatten)]
        links: LinkChoice,
        #[command(flatten)]
        pictures: Pictures,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
        /// Only the structural check: skip the certified convergence rate.
        #[arg(long)]
        skip_rate: bool,
    },
}

#[derive(Args)]
struct Pictures {
    /// Draw the map of the links (SVG).
    #[arg(long = "svg", value_name = "MAP.svg")]
    map: Option<PathBuf>,
    /// Write the chosen digraph in Graphviz DOT.
    #[arg(long, value_name = "FILE.dot")]
    dot: Option<PathBuf>,
}

impl Pictures {
    /// Writes the requested pictures of `set`.
    fn write(
        &self,
        problem: &exmesh::Problem,
        table: &ExcitationTable,
        set: &LinkSet,
    ) -> anyhow::Result<()> {
        if self.map.is_none() && self.dot.is_none() {
            return Ok(());
        }
        let scene = report::map::Scene::new(problem, table, set);
        if let Some(path) = &self.map {
            write_atomically(path, report::map::svg(&scene).as_bytes())
                .with_context(|| format!("writing the map to {}", path.display()))?;
        }
        if let Some(path) = &self.dot {
            write_atomically(path, report::dot::dot(&scene).as_bytes())
                .with_context(|| format!("writing the DOT file to {}", path.display()))?;
        }
        Ok(())
    }
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum SurviveArg {
    /// Any one link failing.
    Link,
    /// Any one unit lost (its own estimate excepted).
    Unit,
}

#[derive(Args)]
#[group(required = true, multiple = false)]
struct LinkChoice {
    /// Every candidate link.
    #[arg(long)]
    all: bool,
    /// Only the links marked `installed`.
    #[arg(long)]
    installed: bool,
    /// The links of a plan file (JSON with a `links` list).
    #[arg(long, value_name = "FILE")]
    plan: Option<PathBuf>,
}

fn main() -> ExitCode {
    match run() {
        Ok(code) => code,
        Err(e) => {
            // A closed pipe (`exmesh ... | head`) ends quietly with the
            // conventional 128 + SIGPIPE.
            let broken_pipe = e
                .chain()
                .filter_map(|c| c.downcast_ref::<std::io::Error>())
                .any(|io| io.kind() == std::io::ErrorKind::BrokenPipe);
            if broken_pipe {
                return ExitCode::from(141);
            }
            let code = if e.downcast_ref::<InputError>().is_some() {
                2
            } else {
                3
            };
            eprintln!("exmesh: error: {e:#}");
            ExitCode::from(code)
        }
    }
}

fn run() -> anyhow::Result<ExitCode> {
    let cli = Cli::parse();
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    let code = match cli.command {
        Command::Excitation { problem, json } => {
            let problem = problem::load(&problem)?;
            let table = ExcitationTable::build(&problem);
            let summary = analysis::excitation_summary(&problem, &table);
            emit(&mut out, json, &summary, |o| {
                report::text::excitation(&summary, o)
            })
            .context("writing the excitation summary")?;
            ExitCode::SUCCESS
        }
        Command::Plan {
            problem,
            out: plan_path,
            time_limit,
            survive,
            pictures,
            json,
        } => {
            let time_limit = match parse_time_limit(time_limit) {
                Ok(t) => t,
                Err(code) => return Ok(code),
            };
            let problem = problem::load(&problem)?;
            let table = ExcitationTable::build(&problem);
            let options = search::Options {
                time_limit,
                progress: true,
                survive: match survive {
                    None => search::Survive::Nothing,
                    Some(SurviveArg::Link) => search::Survive::Link,
                    Some(SurviveArg::Unit) => search::Survive::Unit,
                },
                node_limit: None,
            };
            let plan = search::plan(&problem, &table, &options);
            let feasible = plan.status != search::PlanStatus::Infeasible;
            // The picture of an infeasible problem shows every candidate.
            let set = if feasible {
                plan.link_set(&problem)
            } else {
                problem.all_links()
            };
            pictures.write(&problem, &table, &set)?;
            write_plan_file(plan_path, &plan)?;
            emit(&mut out, json, &plan, |o| report::text::plan(&plan, o))
                .context("writing the plan")?;
            verdict(feasible)
        }
        Command::Budget {
            problem,
            max_cost,
            steps,
            svg,
            time_limit,
            json,
        } => {
            let time_limit = match parse_time_limit(time_limit) {
                Ok(t) => t,
                Err(code) => return Ok(code),
            };
            if let Some(b) = max_cost
                && !(b.is_finite() && b >= 0.0)
            {
                eprintln!("exmesh: error: --max-cost {b}: expected a cost of zero or more");
                return Ok(ExitCode::from(2));
            }
            let problem = problem::load(&problem)?;
            let table = ExcitationTable::build(&problem);
            let options = search::Options {
                time_limit,
                progress: true,
                ..Default::default()
            };
            let front = search::pareto::front(&problem, &table, &options, max_cost, steps);
            if let Some(path) = svg {
                let text = report::chart::front_svg(&front, problem.settings.target_rate)
                    .map_err(|e| anyhow::anyhow!("drawing the front: {e}"))?;
                write_atomically(&path, text.as_bytes())
                    .with_context(|| format!("writing the figure to {}", path.display()))?;
            }
            emit(&mut out, json, &front, |o| report::text::front(&front, o))
                .context("writing the front")?;
            let ok = front.structural_cost.is_some()
                && (max_cost.is_none() || front.best_within_budget.is_some());
            verdict(ok)
        }
        Command::Stress {
            problem,
            plan,
            skip_rate,
            json,
        } => {
            let problem = problem::load(&problem)?;
            let set = problem::read_link_set(&problem, &plan)?;
            let table = ExcitationTable::build(&problem);
            let result = search::stress::stress(&problem, &table, &set, !skip_rate);
            emit(&mut out, json, &result, |o| {
                report::text::stress(&result, o)
            })
            .context("writing the failure report")?;
            ExitCode::SUCCESS
        }
        Command::Report {
            problem,
            plan,
            out: path,
            front,
            truth,
        } => {
            let truth = truth.map(|t| parse_vector("--truth", &t)).transpose()?;
            let problem = problem::load(&problem)?;
            let set = problem::read_link_set(&problem, &plan)?;
            let facts = plan_facts(&plan);
            let table = ExcitationTable::build(&problem);
            let check = analysis::check(&problem, &table, &set);
            let cert = certify::certify(&problem, &table, &set);
            let options = simulate::SimOptions {
                truth,
                initial: None,
            };
            let simulation = simulate::simulate(&problem, &set, Some(&cert), &options)
                .map_err(|e| e.to_string())
                .and_then(|t| {
                    let svg = report::chart::errors_svg(&problem, &t)?;
                    Ok((t, svg))
                });
            let check = check.with_certificate(cert);
            let front = if front {
                let f = search::pareto::front(
                    &problem,
                    &table,
                    &search::Options {
                        progress: true,
                        ..Default::default()
                    },
                    None,
                    8,
                );
                let svg = report::chart::front_svg(&f, problem.settings.target_rate)
                    .map_err(|e| anyhow::anyhow!("drawing the front: {e}"))?;
                Some((f, svg))
            } else {
                None
            };
            let scene = report::map::Scene::new(&problem, &table, &set);
            let html = report::html::report(&report::html::ReportInput {
                problem: &problem,
                set: &set,
                check: &check,
                facts,
                map_svg: report::map::svg(&scene),
                simulation,
                front,
            });
            write_atomically(&path, html.as_bytes())
                .with_context(|| format!("writing the report to {}", path.display()))?;
            writeln!(out, "wrote {}", path.display()).context("writing to standard output")?;
            ExitCode::SUCCESS
        }
        Command::Retire {
            problem,
            nodes,
            plan,
            out: plan_path,
            time_limit,
            json,
        } => {
            let time_limit = match parse_time_limit(time_limit) {
                Ok(t) => t,
                Err(code) => return Ok(code),
            };
            let problem = problem::load(&problem)?;
            let mut units = Vec::new();
            for name in &nodes {
                let id = problem.node_id(name).ok_or_else(|| {
                    InputError::whole(
                        Path::new("--node"),
                        format!(
                            "unknown unit {name:?}; expected one of the problem's [[node]] ids"
                        ),
                    )
                })?;
                if !units.contains(&id) {
                    units.push(id);
                }
            }
            let in_place = match &plan {
                Some(path) => problem::read_link_set(&problem, path)?,
                None => LinkSet::default(),
            };
            let options = search::Options {
                time_limit,
                progress: true,
                ..Default::default()
            };
            let result = search::replan::retire(&problem, &units, &in_place, &options)
                .map_err(|e| InputError::whole(&problem.path, e.to_string()))?;
            let feasible = result.plan.status != search::PlanStatus::Infeasible;
            write_plan_file(plan_path, &result.plan)?;
            emit(&mut out, json, &result, |o| {
                report::text::retirement(&result, o)
            })
            .context("writing the re-plan")?;
            verdict(feasible)
        }
        Command::Simulate {
            problem,
            plan,
            out: csv_path,
            svg,
            truth,
            initial,
            json,
        } => {
            let truth = truth.map(|t| parse_vector("--truth", &t)).transpose()?;
            let initial = initial.map(|t| parse_vector("--initial", &t)).transpose()?;
            let problem = problem::load(&problem)?;
            let set = problem::read_link_set(&problem, &plan)?;
            let table = ExcitationTable::build(&problem);
            let cert = certify::certify(&problem, &table, &set);
            let options = simulate::SimOptions { truth, initial };
            let traj = simulate::simulate(&problem, &set, Some(&cert), &options).map_err(|e| {
                let file = match &e {
                    simulate::SimError::Dimension { what, .. } if what.contains("true") => {
                        Path::new("--truth")
                    }
                    simulate::SimError::Dimension { .. } => Path::new("--initial"),
                    _ => problem.path.as_path(),
                };
                InputError::whole(file, e.to_string())
            })?;
            if let Some(path) = csv_path {
                let mut bytes = Vec::new();
                simulate::write_csv(&problem, &traj, &mut bytes)?;
                write_atomically(&path, &bytes)
                    .with_context(|| format!("writing the trajectory to {}", path.display()))?;
            }
            if let Some(path) = svg {
                let text = report::chart::errors_svg(&problem, &traj)
                    .map_err(|e| anyhow::anyhow!("drawing the error figure: {e}"))?;
                write_atomically(&path, text.as_bytes())
                    .with_context(|| format!("writing the figure to {}", path.display()))?;
            }
            emit(&mut out, json, &traj, |o| {
                report::text::simulation(&traj, o)
            })
            .context("writing the simulation summary")?;
            ExitCode::SUCCESS
        }
        Command::Check {
            problem,
            links,
            pictures,
            json,
            skip_rate,
        } => {
            let problem = problem::load(&problem)?;
            let set: LinkSet = match (links.all, links.installed, links.plan) {
                (true, _, _) => problem.all_links(),
                (_, true, _) => problem.installed_links(),
                (_, _, Some(plan)) => problem::read_link_set(&problem, &plan)?,
                _ => unreachable!("clap requires one link choice"),
            };
            let table = ExcitationTable::build(&problem);
            pictures.write(&problem, &table, &set)?;
            let mut check = analysis::check(&problem, &table, &set);
            if !skip_rate {
                check = check.with_certificate(certify::certify(&problem, &table, &set));
            }
            emit(&mut out, json, &check, |o| report::text::check(&check, o))
                .context("writing the check")?;
            verdict(check.verdict.ok())
        }
    };
    out.flush().context("writing to standard output")?;
    Ok(code)
}

/// Status, cost, bound and gap from a plan file written by `plan` (absent
/// keys stay empty; the file was already validated by `read_link_set`).
fn plan_facts(path: &Path) -> report::html::PlanFacts {
    let value: serde_json::Value = std::fs::read_to_string(path)
        .ok()
        .and_then(|t| serde_json::from_str(&t).ok())
        .unwrap_or_default();
    report::html::PlanFacts {
        status: value["status"].as_str().map(str::to_string),
        cost: value["cost"].as_f64(),
        lower_bound: value["lower_bound"].as_f64(),
        gap: value["gap"].as_f64(),
    }
}

/// Prints `value` as JSON, or as text through `text`.
fn emit<W: Write, T: serde::Serialize>(
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
fn verdict(ok: bool) -> ExitCode {
    if ok {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    }
}

/// Writes `plan` as a plan file (temporary file, then rename) when a path
/// is given and the plan is not infeasible.
fn write_plan_file(path: Option<PathBuf>, plan: &search::Plan) -> anyhow::Result<()> {
    if let (Some(path), true) = (path, plan.status != search::PlanStatus::Infeasible) {
        let mut bytes = Vec::new();
        report::json::write(plan, &mut bytes)?;
        write_atomically(&path, &bytes)
            .with_context(|| format!("writing the plan to {}", path.display()))?;
    }
    Ok(())
}

/// Checks `--time-limit`: a positive number of seconds, or exit 2.
fn parse_time_limit(t: Option<f64>) -> Result<Option<Duration>, ExitCode> {
    match t {
        Some(t) if t.is_finite() && t > 0.0 => Ok(Some(Duration::from_secs_f64(t))),
        Some(t) => {
            eprintln!("exmesh: error: --time-limit {t}: expected a positive number of seconds");
            Err(ExitCode::from(2))
        }
        None => Ok(None),
    }
}

/// Parses a comma-separated vector of finite numbers given on the command
/// line.
fn parse_vector(flag: &str, text: &str) -> Result<Vec<f64>, InputError> {
    text.split(',')
        .map(|v| {
            v.trim()
                .parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| {
                    InputError::whole(
                        Path::new(flag),
                        format!("expected comma-separated finite numbers, found {v:?}"),
                    )
                })
        })
        .collect()
}

/// Writes `bytes` to a temporary file beside `path`, then renames it, so a
/// failed run never leaves a half-written file.
fn write_atomically(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
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
