//! Runs the estimators of docs/theory.md §1 on the recorded logs for a link set and
//! compares each unit's error with the certified envelope.
//!
//! With a given true parameter the outputs are made as `y_i = ψ_iᵀ θ`, and
//! the run is the error system itself. Otherwise the logged `y` drives the
//! estimators and the error is measured against the pooled least-squares
//! fit of all logs (the best single answer the data supports).

use crate::certify::Certificate;
use crate::certify::propagate::{Direction, ErrorSystem, Schedule, Step, Work};
use crate::excitation::{min_eigen, packed_index, packed_len, unpack};
use crate::problem::{LinkSet, Problem};
use crate::signal::Window;
use serde::Serialize;

/// Most output times in a trajectory (grid points are thinned evenly).
pub const MAX_SAMPLES: usize = 2000;

/// Where the reference parameter comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reference {
    /// Given by the user; outputs made from it.
    Truth,
    /// Pooled least-squares fit of all logged outputs.
    PooledFit,
}

/// Options of a simulation run.
#[derive(Debug, Clone, Default)]
pub struct SimOptions {
    /// True parameter; `None` uses the logged outputs.
    pub truth: Option<Vec<f64>>,
    /// Initial estimate of every unit; `None` starts from zero.
    pub initial: Option<Vec<f64>>,
}

/// Per-unit summary of a run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitRun {
    /// Unit id.
    pub node: String,
    /// Error norm at the start.
    pub initial_error: f64,
    /// Error norm at the end of the horizon.
    pub final_error: f64,
    /// Final estimate.
    pub estimate: Vec<f64>,
}

/// A simulation run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Trajectory {
    /// Reference parameter the errors are measured against.
    pub reference: Vec<f64>,
    /// Where it comes from.
    pub reference_kind: Reference,
    /// Output times.
    pub times: Vec<f64>,
    /// `errors[i][k]`: |θ_i − θ| of unit i at `times[k]`.
    #[serde(skip)]
    pub errors: Vec<Vec<f64>>,
    /// Norm of the stacked error at each time.
    #[serde(skip)]
    pub total: Vec<f64>,
    /// Certified envelope `c e^{−λ(t−h0)} |e(h0)|` at each time, when certified.
    #[serde(skip)]
    pub envelope: Option<Vec<f64>>,
    /// Per unit.
    pub units: Vec<UnitRun>,
    /// `−ln(|e(h1)|/|e(h0)|)/(h1 − h0)` of the stacked error.
    pub observed_rate: Option<f64>,
    /// Certified rate used for the envelope.
    pub certified_rate: Option<f64>,
    /// The stacked error stays under the envelope at every output time
    /// (`None` without a certificate).
    pub within_envelope: Option<bool>,
}

/// Why a simulation cannot run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SimError {
    /// A vector of the wrong length.
    #[error("{which} has {got} values; the problem has {expected} parameters")]
    Dimension {
        /// Which vector.
        which: Given,
        /// Its length.
        got: usize,
        /// p.
        expected: usize,
    },
    /// No truth and a log without outputs.
    #[error(
        "the log of unit {0} has no y column: give the true parameter (--truth) to make outputs"
    )]
    NoOutputs(String),
    /// The pooled fit is not unique.
    #[error(
        "all logs together do not determine the parameter (pooled Gramian singular): give --truth"
    )]
    Underdetermined,
    /// The error system needs more work than accepted (the reason says
    /// how much and where).
    #[error("{0}")]
    TooStiff(String),
}

/// Pooled least-squares fit `(Σ G_i)⁻¹ Σ b_i` over the horizon, with the
/// flow and jump terms weighted as in the Gramian.
fn pooled_fit(problem: &Problem, schedule: &Schedule) -> Result<Vec<f64>, SimError> {
    let p = problem.settings.parameters;
    let g = problem.settings.gains;
    let mut gram = vec![0.0; packed_len(p)];
    let mut rhs = vec![0.0; p];
    for node in &problem.nodes {
        let log = &node.log;
        let y = log
            .y
            .as_ref()
            .ok_or_else(|| SimError::NoOutputs(node.id.clone()))?;
        let mut add = |row: usize, w: f64| {
            let psi = log.row(row);
            for r in 0..p {
                rhs[r] += w * psi[r] * y[row];
                for c in r..p {
                    gram[packed_index(p, r, c)] += w * psi[r] * psi[c];
                }
            }
        };
        let (h0, h1) = schedule.horizon();
        for k in 0..log.len().saturating_sub(1) {
            let (a, b) = (log.t[k].max(h0), log.t[k + 1].min(h1));
            if log.j[k] == log.j[k + 1] && b > a {
                add(k, g.flow_gain * (b - a));
            } else if log.j[k + 1] == log.j[k] + 1 && log.t[k] >= h0 && log.t[k] <= h1 {
                let sq: f64 = log.row(k).iter().map(|v| v * v).sum();
                add(k, g.jump_gain / (1.0 + sq));
            }
        }
    }
    let (lmin, _) = min_eigen(p, &gram);
    let lmax = gram
        .iter()
        .map(|v| v.abs())
        .fold(0.0f64, f64::max)
        .max(f64::MIN_POSITIVE);
    if lmin <= 1e-12 * lmax * p as f64 {
        return Err(SimError::Underdetermined);
    }
    let m = unpack(p, &gram);
    let sol = m
        .cholesky()
        .ok_or(SimError::Underdetermined)?
        .solve(&nalgebra::DVector::from_vec(rhs));
    Ok(sol.iter().copied().collect())
}

/// A vector the caller gives to a simulation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Given {
    /// [`SimOptions::truth`].
    Truth,
    /// [`SimOptions::initial`].
    Initial,
}

impl std::fmt::Display for Given {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Given::Truth => "the true parameter",
            Given::Initial => "the initial estimate",
        })
    }
}

fn check_len(which: Given, v: &[f64], p: usize) -> Result<(), SimError> {
    if v.len() == p {
        Ok(())
    } else {
        Err(SimError::Dimension {
            which,
            got: v.len(),
            expected: p,
        })
    }
}

/// Runs the estimators of every unit over the whole horizon.
///
/// # Errors
/// [`SimError`] for a vector of the wrong length, logs without outputs when
/// no truth is given, or logs that do not determine the parameter.
///
/// # Complexity
/// One forward pass over the merged grid: O(S·m·(np + A·p)) for S steps,
/// m Taylor terms and A arcs.
// Long function: The estimators' run over the merged grid: flows and jumps share the
// state vectors and the output buffers step after step.
pub fn simulate(
    problem: &Problem,
    set: &LinkSet,
    certificate: Option<&Certificate>,
    options: &SimOptions,
) -> Result<Trajectory, SimError> {
    let p = problem.settings.parameters;
    let n = problem.n();
    let schedule = Schedule::new(problem);
    if let Some(t) = &options.truth {
        check_len(Given::Truth, t, p)?;
    }
    if let Some(t) = &options.initial {
        check_len(Given::Initial, t, p)?;
    }
    let (reference, kind) = match &options.truth {
        Some(t) => (t.clone(), Reference::Truth),
        None => (pooled_fit(problem, &schedule)?, Reference::PooledFit),
    };
    let system = ErrorSystem::of_links(&schedule, problem, set);
    if let Some(reason) = system.too_stiff() {
        return Err(SimError::TooStiff(reason));
    }
    let initial = options.initial.clone().unwrap_or_else(|| vec![0.0; p]);
    // With a truth the run is the error system; otherwise the estimates.
    let mut x: Vec<f64> = match kind {
        Reference::Truth => (0..n)
            .flat_map(|_| initial.iter().zip(&reference).map(|(a, b)| a - b))
            .collect(),
        Reference::PooledFit => (0..n).flat_map(|_| initial.iter().copied()).collect(),
    };
    let outputs: Vec<Vec<f64>> = problem
        .nodes
        .iter()
        .map(|v| v.log.y.clone().unwrap_or_default())
        .collect();
    let errors_of = |x: &[f64]| -> Vec<f64> {
        x.chunks_exact(p)
            .map(|xi| match kind {
                Reference::Truth => xi.iter().map(|v| v * v).sum::<f64>().sqrt(),
                Reference::PooledFit => xi
                    .iter()
                    .zip(&reference)
                    .map(|(a, b)| (a - b) * (a - b))
                    .sum::<f64>()
                    .sqrt(),
            })
            .collect()
    };
    let (h0, h1) = schedule.horizon();
    let mut steps = Vec::new();
    schedule.steps(
        &Window {
            start: h0,
            end: h1,
            jumps_through_end: true,
        },
        &mut steps,
    );
    let flows = steps
        .iter()
        .filter(|s| matches!(s, Step::Flow { .. }))
        .count();
    let every = flows.div_ceil(MAX_SAMPLES - 1).max(1);
    let mut times = vec![h0];
    let mut errors: Vec<Vec<f64>> = errors_of(&x).into_iter().map(|e| vec![e]).collect();
    let mut work = Work::default();
    let mut t = h0;
    let mut flow_count = 0usize;
    for (idx, step) in steps.iter().enumerate() {
        match kind {
            Reference::Truth => {
                system.propagate(
                    Direction::Forward,
                    std::slice::from_ref(step),
                    &mut x,
                    &mut work,
                );
            }
            Reference::PooledFit => system.step_estimates(step, &mut x, &outputs, &mut work),
        }
        if let Step::Flow { h, .. } = *step {
            t += h;
            flow_count += 1;
        }
        let last = idx + 1 == steps.len();
        if (matches!(step, Step::Flow { .. }) && flow_count.is_multiple_of(every)) || last {
            if times.last() == Some(&t) {
                times.pop();
                errors.iter_mut().for_each(|e| {
                    e.pop();
                });
            }
            times.push(t);
            for (e, v) in errors.iter_mut().zip(errors_of(&x)) {
                e.push(v);
            }
        }
    }
    let total: Vec<f64> = (0..times.len())
        .map(|k| errors.iter().map(|e| e[k] * e[k]).sum::<f64>().sqrt())
        .collect();
    let (first, last) = (total[0], total[total.len() - 1]);
    let observed_rate = (first > 0.0 && last > 0.0).then(|| -(last / first).ln() / (h1 - h0));
    let certified_rate = certificate.and_then(|c| c.rate);
    let envelope = match (certified_rate, certificate.and_then(|c| c.transient_factor)) {
        (Some(rate), Some(c)) => Some(
            times
                .iter()
                .map(|&t| c * (-rate * (t - h0)).exp() * first)
                .collect::<Vec<f64>>(),
        ),
        _ => None,
    };
    // The envelope bounds the error system; with logged outputs (noise,
    // model mismatch) it is shown for reference only.
    let within_envelope = envelope
        .as_ref()
        .filter(|_| kind == Reference::Truth)
        .map(|env| {
            total
                .iter()
                .zip(env)
                .all(|(e, b)| *e <= b * (1.0 + 1e-9) + 1e-12 * first)
        });
    let units = problem
        .nodes
        .iter()
        .enumerate()
        .map(|(i, v)| UnitRun {
            node: v.id.clone(),
            initial_error: errors[i][0],
            final_error: errors[i][errors[i].len() - 1],
            estimate: match kind {
                Reference::Truth => x[i * p..(i + 1) * p]
                    .iter()
                    .zip(&reference)
                    .map(|(a, b)| a + b)
                    .collect(),
                Reference::PooledFit => x[i * p..(i + 1) * p].to_vec(),
            },
        })
        .collect();
    Ok(Trajectory {
        reference,
        reference_kind: kind,
        times,
        errors,
        total,
        envelope,
        units,
        observed_rate,
        certified_rate,
        within_envelope,
    })
}

/// Writes the trajectory as CSV: `t`, one error column per unit, `total`,
/// and `envelope` (empty when not certified).
///
/// # Errors
/// Any I/O error of `out`.
pub fn write_csv(
    problem: &Problem,
    traj: &Trajectory,
    out: &mut impl std::io::Write,
) -> std::io::Result<()> {
    // The cautions as `#` lines first (spreadsheets show them as text
    // rows; exmesh's own CSV reader skips `#` lines).
    for c in crate::report::CAUTIONS {
        writeln!(out, "# Caution: {c}")?;
    }
    let mut header = vec!["t".to_string()];
    header.extend(problem.nodes.iter().map(|v| format!("err_{}", v.id)));
    header.push("total".into());
    header.push("envelope".into());
    writeln!(out, "{}", header.join(","))?;
    for (k, t) in traj.times.iter().enumerate() {
        write!(out, "{t}")?;
        for e in &traj.errors {
            write!(out, ",{:.9e}", e[k])?;
        }
        write!(out, ",{:.9e},", traj.total[k])?;
        if let Some(env) = &traj.envelope {
            write!(out, "{:.9e}", env[k])?;
        }
        writeln!(out)?;
    }
    Ok(())
}
