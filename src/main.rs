//! The `exmesh` command-line tool: parses arguments, calls the library,
//! prints.
//!
//! Exit codes:
//! - 0: done; for `check`, every source component is excited.
//! - 1: the condition does not hold (some source component is not excited).
//! - 2: bad input (problem file, log, plan file) or bad command line.
//! - 3: any other failure (for example, writing the output failed).

use anyhow::Context;
use clap::{Args, Parser, Subcommand};
use exmesh::{ExcitationTable, InputError, LinkSet, analysis, problem, report};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

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
    /// Check a link set: are all source components jointly excited?
    Check {
        /// Problem file (TOML).
        problem: PathBuf,
        #[command(flatten)]
        links: LinkChoice,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
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
            if json {
                report::json::write(&summary, &mut out)
            } else {
                report::text::excitation(&summary, &mut out)
            }
            .context("writing the excitation summary")?;
            ExitCode::SUCCESS
        }
        Command::Check {
            problem,
            links,
            json,
        } => {
            let problem = problem::load(&problem)?;
            let set: LinkSet = match (links.all, links.installed, links.plan) {
                (true, _, _) => problem.all_links(),
                (_, true, _) => problem.installed_links(),
                (_, _, Some(plan)) => problem::read_link_set(&problem, &plan)?,
                _ => unreachable!("clap requires one link choice"),
            };
            let table = ExcitationTable::build(&problem);
            let check = analysis::check(&problem, &table, &set);
            if json {
                report::json::write(&check, &mut out)
            } else {
                report::text::check(&check, &mut out)
            }
            .context("writing the check")?;
            if check.condition_holds {
                ExitCode::SUCCESS
            } else {
                ExitCode::from(1)
            }
        }
    };
    out.flush().context("writing to standard output")?;
    Ok(code)
}
