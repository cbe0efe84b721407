//! The command line: every flag is checked by its parser here (a bad value
//! exits 2 through clap, naming the flag and what was expected), and nothing
//! else.

use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;
use std::time::Duration;

#[derive(Parser)]
#[command(
    name = "exmesh",
    version,
    about = "Plan estimate-sharing links so every unit's hybrid gradient estimator provably converges"
)]
pub(crate) struct Cli {
    #[command(subcommand)]
    pub(crate) command: Command,
}

#[derive(Subcommand)]
pub(crate) enum Command {
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
        /// Stop after this many seconds, counted from the start, and return the best plan with its gap (more than a century counts as a century).
        #[arg(long, value_name = "SECONDS", value_parser = seconds)]
        time_limit: Option<Duration>,
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
        #[arg(long, value_name = "V1,V2,...", allow_hyphen_values = true, value_parser = vector)]
        truth: Option<Vector>,
        /// Initial estimate of every unit, comma-separated (default zero).
        #[arg(long, value_name = "V1,V2,...", allow_hyphen_values = true, value_parser = vector)]
        initial: Option<Vector>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Cost–rate front: the best certified rate each budget buys.
    Budget {
        /// Problem file (TOML).
        problem: PathBuf,
        /// Only plans costing at most this much; report the best rate within it.
        #[arg(long, value_name = "B", value_parser = cost)]
        max_cost: Option<f64>,
        /// Most links added beyond the structural optimum.
        #[arg(long, value_name = "N", default_value_t = 8)]
        steps: usize,
        /// Draw the front (SVG).
        #[arg(long, value_name = "FRONT.svg")]
        svg: Option<PathBuf>,
        /// Write every point of the front as a plan file (front-01.json, …) into this folder (made when missing).
        #[arg(long, value_name = "DIR")]
        out_dir: Option<PathBuf>,
        /// Stop after this many seconds, counted from the start (half for the structural search, half for the sweep; more than a century counts as a century).
        #[arg(long, value_name = "SECONDS", value_parser = seconds)]
        time_limit: Option<Duration>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Start a problem: a commented problem file from a folder of logs, with a window, min_excitation and candidate range suggested from the data.
    Init {
        /// The folder (the problem file is written there).
        dir: PathBuf,
        /// The logs, relative to DIR; `*` and `?` in the file name (e.g. 'logs/*.csv'). Each file is a unit named by its file stem.
        #[arg(long, value_name = "PATTERN")]
        logs: String,
        /// Positions, relative to DIR: CSV `id,x_km,y_km` or `id,lat,lon`; candidates by range when given.
        #[arg(long, value_name = "FILE.csv")]
        positions: Option<PathBuf>,
        /// Name of the problem file in DIR (never overwritten).
        #[arg(long, value_name = "NAME", default_value = "problem.toml")]
        out: PathBuf,
    },
    /// Two link sets side by side: links only in each, cost, verdict, certified rate, source components, critical links and units.
    Compare {
        /// Problem file (TOML).
        problem: PathBuf,
        /// The first link set (a plan file).
        a: PathBuf,
        /// The second link set (a plan file).
        b: PathBuf,
        /// Only the structural checks: skip the certified rates.
        #[arg(long)]
        skip_rate: bool,
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
        #[arg(long, value_name = "V1,V2,...", allow_hyphen_values = true, value_parser = vector)]
        truth: Option<Vector>,
    },
    /// Retire units or drop failed links, and re-plan with the links in place kept free.
    Retire {
        /// Problem file (TOML).
        problem: PathBuf,
        /// Unit to retire (repeat for several).
        #[arg(long = "node", value_name = "ID", required_unless_present = "links")]
        nodes: Vec<String>,
        /// A link that failed, as FROM,TO (the candidate between them; a
        /// two-way link in either order) or by its id (repeat for several).
        #[arg(long = "link", value_name = "FROM,TO")]
        links: Vec<String>,
        /// Also write the reduced problem (TOML): retired units and failed
        /// links gone, the links in place marked installed, log paths valid
        /// from the new file's folder.
        #[arg(long, value_name = "PROBLEM.toml")]
        write_problem: Option<PathBuf>,
        /// The links in place (a plan file); links marked `installed` count too.
        #[arg(long, value_name = "INSTALLED.json")]
        plan: Option<PathBuf>,
        /// Write the new plan (JSON) to this file.
        #[arg(long, value_name = "PLAN.json")]
        out: Option<PathBuf>,
        /// Stop the search after this many seconds, counted from the start (more than a century counts as a century).
        #[arg(long, value_name = "SECONDS", value_parser = seconds)]
        time_limit: Option<Duration>,
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
pub(crate) struct Pictures {
    /// Draw the map of the links (SVG).
    #[arg(long = "svg", value_name = "MAP.svg")]
    pub(crate) map: Option<PathBuf>,
    /// Write the chosen digraph in Graphviz DOT.
    #[arg(long, value_name = "FILE.dot")]
    pub(crate) dot: Option<PathBuf>,
}

#[derive(Clone, Copy, clap::ValueEnum)]
pub(crate) enum SurviveArg {
    /// Any one link failing.
    Link,
    /// Any one unit lost (its own estimate excepted).
    Unit,
}

#[derive(Args)]
#[group(required = true, multiple = false)]
pub(crate) struct LinkChoice {
    /// Every candidate link.
    #[arg(long)]
    pub(crate) all: bool,
    /// Only the links marked `installed`.
    #[arg(long)]
    pub(crate) installed: bool,
    /// The links of a plan file (JSON with a `links` list).
    #[arg(long, value_name = "FILE")]
    pub(crate) plan: Option<PathBuf>,
}

/// A time limit: any finite positive number of seconds; limits past a
/// century are clamped to one (documented in docs/formats.md).
fn seconds(text: &str) -> Result<Duration, String> {
    match text.trim().parse::<f64>() {
        Ok(t) if t.is_finite() && t > 0.0 => Ok(Duration::from_secs_f64(
            t.min(exmesh::limits::MAX_TIME_LIMIT),
        )),
        _ => Err("expected a positive number of seconds".into()),
    }
}

/// `--max-cost`: a finite cost of zero or more.
fn cost(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(b) if b.is_finite() && b >= 0.0 => Ok(b),
        _ => Err("expected a cost of zero or more".into()),
    }
}

/// A vector given on the command line.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Vector(pub(crate) Vec<f64>);

/// `--truth`, `--initial`: comma-separated finite numbers.
fn vector(text: &str) -> Result<Vector, String> {
    let values: Result<Vec<f64>, String> = text
        .split(',')
        .map(|v| {
            v.trim()
                .parse::<f64>()
                .ok()
                .filter(|x| x.is_finite() && x.abs() <= exmesh::limits::MAX_VECTOR)
                .ok_or_else(|| {
                    format!(
                        "expected comma-separated numbers of size at most {:e}, found {v:?}",
                        exmesh::limits::MAX_VECTOR
                    )
                })
        })
        .collect();
    values.map(Vector)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn flag_values_are_checked_in_their_parsers() {
        assert_eq!(seconds("1.5"), Ok(Duration::from_millis(1500)));
        for bad in ["0", "-1", "nan", "inf", "x"] {
            assert!(seconds(bad).is_err(), "{bad}");
        }
        assert_eq!(cost("0"), Ok(0.0));
        assert!(cost("-1").is_err() && cost("NaN").is_err());
        assert_eq!(vector("1, -2"), Ok(Vector(vec![1.0, -2.0])));
        assert!(vector("1e200,0").is_err());
        // A century at most, and no panic on huge values.
        assert_eq!(
            seconds("1e20").unwrap().as_secs_f64(),
            exmesh::limits::MAX_TIME_LIMIT
        );
        assert_eq!(
            seconds("1e400"),
            Err("expected a positive number of seconds".into())
        );
        assert!(
            vector("1,x")
                .unwrap_err()
                .contains("numbers of size at most")
        );
    }
}
