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

mod args;
mod commands;
mod init;
mod output;

use anyhow::Context;
use args::{Cli, Command};
use clap::Parser;
use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    commands::start_clock();
    match run(Cli::parse().command) {
        Ok(code) => code,
        Err(e) => {
            let code = output::failure_code(&e);
            if code != 141 {
                eprintln!("exmesh: error: {e:#}");
            }
            ExitCode::from(code)
        }
    }
}

fn run(command: Command) -> anyhow::Result<ExitCode> {
    let stdout = std::io::stdout();
    let out = &mut stdout.lock();
    use commands as c;
    let code = match command {
        Command::Excitation { problem, json } => c::excitation(out, &problem, json),
        Command::Plan {
            problem,
            out: file,
            time_limit,
            survive,
            pictures,
            json,
        } => c::plan(out, &problem, file, time_limit, survive, &pictures, json),
        Command::Budget {
            problem,
            max_cost,
            steps,
            svg,
            out_dir,
            time_limit,
            json,
        } => c::budget(
            out,
            &problem,
            max_cost,
            steps,
            &c::FrontFiles { svg, out_dir },
            time_limit,
            json,
        ),
        Command::Init {
            dir,
            logs,
            positions,
            out: name,
        } => init::init(out, &dir, &logs, positions.as_deref(), &name),
        Command::Compare {
            problem,
            a,
            b,
            skip_rate,
            json,
        } => c::compare(out, &problem, [&a, &b], skip_rate, json),
        Command::Stress {
            problem,
            plan,
            skip_rate,
            json,
        } => c::stress(out, &problem, &plan, skip_rate, json),
        Command::Report {
            problem,
            plan,
            out: page,
            front,
            truth,
        } => c::report(out, &problem, &plan, &page, front, truth),
        Command::Retire {
            problem,
            nodes,
            links,
            write_problem,
            plan,
            out: file,
            time_limit,
            json,
        } => c::retire(
            out,
            &problem,
            &c::Retiring {
                nodes,
                links,
                in_place: plan,
                plan_out: file,
                problem_out: write_problem,
            },
            time_limit,
            json,
        ),
        Command::Simulate {
            problem,
            plan,
            out: csv,
            svg,
            truth,
            initial,
            json,
        } => {
            let files = c::SimulationFiles { csv, svg };
            c::simulate(out, &problem, &plan, files, truth, initial, json)
        }
        Command::Check {
            problem,
            links,
            pictures,
            json,
            skip_rate,
        } => c::check(out, &problem, &links, &pictures, json, skip_rate),
    }?;
    out.flush().context("writing to standard output")?;
    Ok(code)
}
