//! Certified convergence rate of a link set on the recorded data (DESIGN §4)
//! and the gain conditions.
//!
//! For every certificate window w, `‖Φ(w)‖₂` is found by the Lanczos method
//! (an accelerated power iteration) on `ΦᵀΦ` (forward and adjoint
//! propagation, see [`propagate`]). With
//! `ρ = max_w ‖Φ(w)‖₂ < 1` over windows of length `T_c`, the certified rate
//! is `λ = −ln ρ / T_c`, and `|e(t)| ≤ c·e^{−λ(t−s)}|e(s)|` with the transient
//! factor `c = M/ρ`, M a bound on `‖Φ‖₂` over partial windows.
//!
//! # References
//! Golub & Van Loan, "Matrix Computations", 4th ed., 2013, §8.2 (power
//! method); Khalil, "Nonlinear Systems", 3rd ed., 2002, §4.6 (uniform
//! exponential stability of linear time-varying systems from the transition
//! matrix).

pub mod propagate;

use crate::analysis;
use crate::excitation::ExcitationTable;
use crate::problem::{LinkSet, Problem};
use crate::signal::{Window, WindowKind, window_at};
use propagate::{Direction, ErrorSystem, Schedule, Step, Work};
use rayon::prelude::*;
use serde::Serialize;
use std::io::IsTerminal;

/// Windows handled one after another by one thread, each warm-starting the
/// Lanczos iteration from the previous one's singular vector: at most this
/// many, and the windows of a batch are split into at least `PIECES`
/// chunks so that both cores of a small machine stay busy. The split depends
/// only on the number of windows, so results do not depend on the number of
/// threads.
const CHUNK: usize = 16;

/// Fewest chunks a batch of windows is split into (4: each chunk head
/// starts cold or from another trial's vector; 8 took 101 Lanczos steps
/// instead of 89 on the certificate benchmark, one window per chunk 126).
const PIECES: usize = 4;

/// Lanczos stops when the Ritz residual is below this times the Ritz value
/// (the value itself is then accurate to about the square of it).
const LANCZOS_TOLERANCE: f64 = 1e-4;

/// Largest Krylov dimension before a restart from the Ritz vector.
const LANCZOS_DIMENSION: usize = 30;

/// Most restarts.
const LANCZOS_RESTARTS: usize = 20;

/// Multiples of the excitation window tried as the certificate window.
pub const MULTIPLES: [usize; 5] = [1, 2, 4, 8, 16];

/// One gain condition.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GainCheck {
    /// What is checked.
    pub condition: String,
    /// The value checked.
    pub value: f64,
    /// The condition holds.
    pub ok: bool,
}

/// A unit's share of the slowest mode.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitShare {
    /// Unit id.
    pub node: String,
    /// Share of the squared error left in this unit after the worst window,
    /// along the slowest mode (shares sum to 1).
    pub share: f64,
}

/// The certificate of a link set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Certificate {
    /// Certified rate λ in 1/s; `None` when not certified on this horizon.
    pub rate: Option<f64>,
    /// Certificate window T_c in seconds (the one giving the best rate, or
    /// the longest tried when none certifies).
    pub window: f64,
    /// ρ = max over windows of ‖Φ(w)‖₂ for that window length.
    pub contraction: f64,
    /// Transient factor c: `|e(t)| ≤ c e^{−λ(t−s)} |e(s)|`.
    pub transient_factor: Option<f64>,
    /// Time for the certified bound to fall to 1 % (seconds).
    pub time_to_1pct: Option<f64>,
    /// All gain conditions hold.
    pub gains_ok: bool,
    /// The gain conditions.
    pub gains: Vec<GainCheck>,
    /// `−ln ‖Φ(h1, h0)‖₂ / (h1 − h0)` over the whole horizon.
    pub asymptotic_rate: Option<f64>,
    /// Number of certificate windows of length `window`.
    pub windows: usize,
    /// How many of them needed their norm computed (the others are bounded
    /// below the worst by products of half-length windows).
    pub evaluated_windows: usize,
    /// Start of the worst window.
    pub worst_window_start: Option<f64>,
    /// Units by share of the slowest mode, largest first.
    pub units: Vec<UnitShare>,
    /// Why there is no rate, when there is none.
    pub reason: Option<String>,
    /// Windows whose Lanczos iteration stopped at its restart limit.
    pub unconverged_windows: usize,
    /// Lanczos steps (one forward and one adjoint pass each) over all
    /// windows of every window length tried.
    pub lanczos_steps: usize,
    /// The worst certificate windows, worst first (at most three).
    #[serde(skip)]
    pub worst_windows: Vec<Window>,
    /// The right singular vector of the worst window (a warm start for
    /// nearby systems).
    #[serde(skip)]
    pub worst_vector: Vec<f64>,
    /// Wall-clock split (text and benchmarks only, never JSON).
    #[serde(skip)]
    pub timing: CertTiming,
}

/// Where the certificate's time went.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CertTiming {
    /// Window norms of every window length tried.
    pub windows: std::time::Duration,
    /// The whole-horizon norm.
    pub horizon: std::time::Duration,
    /// Everything, structural check included.
    pub total: std::time::Duration,
}

/// The gain conditions of DESIGN §4 for the arcs of a link set.
///
/// # References
/// Olfati-Saber, Fax & Murray, "Consensus and cooperation in networked
/// multi-agent systems", Proc. IEEE 95(1), 2007 (discrete consensus step
/// below the inverse of the largest degree).
pub fn gain_checks(problem: &Problem, set: &LinkSet) -> Vec<GainCheck> {
    let g = problem.settings.gains;
    let mut degree = vec![0.0f64; problem.n()];
    for a in problem.arcs(set) {
        degree[a.to.index()] += a.weight;
    }
    let max_degree = degree.iter().fold(0.0f64, |m, &d| m.max(d));
    vec![
        GainCheck {
            condition: "jump gain in (0, 2)".into(),
            value: g.jump_gain,
            ok: g.jump_gain > 0.0 && g.jump_gain < 2.0,
        },
        GainCheck {
            condition: "jump coupling × largest weighted in-degree < 1".into(),
            value: g.jump_coupling * max_degree,
            ok: g.jump_coupling * max_degree < 1.0,
        },
    ]
}

/// Result of the Lanczos iteration on one window.
#[derive(Debug, Clone)]
struct WindowNorm {
    log_norm: f64,
    converged: bool,
    iterations: usize,
    /// Right singular vector (unit length).
    right: Vec<f64>,
}

fn normalise(x: &mut [f64]) -> f64 {
    let n = x.iter().map(|v| v * v).sum::<f64>().sqrt();
    if n > 0.0 {
        x.iter_mut().for_each(|v| *v /= n);
    }
    n
}

/// A deterministic starting vector with no special structure.
fn start_vector(d: usize) -> Vec<f64> {
    let mut rng = crate::synth::Rng(0x5eed_cafe);
    let mut x: Vec<f64> = (0..d).map(|_| rng.uniform() - 0.5).collect();
    normalise(&mut x);
    x
}

/// `y ← ΦᵀΦ x`, returning ln of the scale taken out (the true product is
/// `y · exp(2·returned)` relative to `reference`).
fn normal_product(
    system: &ErrorSystem,
    steps: &[Step],
    x: &[f64],
    y: &mut [f64],
    work: &mut Work,
) -> f64 {
    y.copy_from_slice(x);
    let a = system.propagate(Direction::Forward, steps, y, work);
    let b = system.propagate(Direction::Adjoint, steps, y, work);
    a + b
}

/// ln ‖Φ‖₂ for the steps, by the Lanczos method on `ΦᵀΦ` with full
/// reorthogonalisation, restarted from the Ritz vector, starting from `x`
/// (which holds the right singular vector estimate on return).
fn power_norm(
    system: &ErrorSystem,
    steps: &[Step],
    x: &mut Vec<f64>,
    work: &mut Work,
    tolerance: f64,
) -> WindowNorm {
    let d = x.len();
    let mut iterations = 0;
    let mut converged = false;
    let mut theta = 0.0f64;
    let mut log_ref = 0.0f64;
    if normalise(x) == 0.0 {
        *x = start_vector(d);
    }
    'restarts: for restart in 0..LANCZOS_RESTARTS {
        let mut basis: Vec<Vec<f64>> = vec![x.clone()];
        let mut alpha: Vec<f64> = Vec::new();
        let mut beta: Vec<f64> = Vec::new();
        let mut w = vec![0.0; d];
        for j in 0..LANCZOS_DIMENSION {
            iterations += 1;
            let scale = normal_product(system, steps, &basis[j], &mut w, work);
            if restart == 0 && j == 0 {
                log_ref = scale;
            }
            let f = (scale - log_ref).exp();
            w.iter_mut().for_each(|v| *v *= f);
            let a: f64 = w.iter().zip(&basis[j]).map(|(p, q)| p * q).sum();
            alpha.push(a);
            // Full reorthogonalisation (twice is enough, Parlett).
            for _ in 0..2 {
                for q in &basis {
                    let c: f64 = w.iter().zip(q).map(|(p, r)| p * r).sum();
                    w.iter_mut().zip(q).for_each(|(p, r)| *p -= c * r);
                }
            }
            let b = normalise(&mut w);
            let (t, s) = top_ritz(&alpha, &beta);
            theta = t;
            let residual = b * s[s.len() - 1].abs();
            let done = residual <= tolerance * t || b <= f64::MIN_POSITIVE * 1e10;
            if done || j + 1 == LANCZOS_DIMENSION || j + 1 == d {
                // Ritz vector.
                let mut v = vec![0.0; d];
                for (q, &c) in basis.iter().zip(&s) {
                    v.iter_mut().zip(q).for_each(|(p, r)| *p += c * r);
                }
                normalise(&mut v);
                *x = v;
                if done || j + 1 == d {
                    converged = true;
                    break 'restarts;
                }
                continue 'restarts;
            }
            beta.push(b);
            basis.push(w.clone());
        }
    }
    // The Ritz value is a lower estimate of ‖Φ‖², accurate to about the
    // square of the residual.
    let log_norm = if theta > 0.0 {
        0.5 * (theta.ln() + log_ref)
    } else {
        f64::NEG_INFINITY
    };
    WindowNorm {
        log_norm,
        converged,
        iterations,
        right: x.clone(),
    }
}

/// Largest eigenvalue of the symmetric tridiagonal matrix (diagonal `a`,
/// off-diagonal `b`) and its eigenvector.
fn top_ritz(a: &[f64], b: &[f64]) -> (f64, Vec<f64>) {
    let k = a.len();
    let t = nalgebra::DMatrix::from_fn(k, k, |r, c| {
        if r == c {
            a[r]
        } else if r + 1 == c {
            b[r]
        } else if c + 1 == r {
            b[c]
        } else {
            0.0
        }
    });
    let e = nalgebra::SymmetricEigen::new(t);
    let mut best = 0;
    for i in 1..k {
        if e.eigenvalues[i] > e.eigenvalues[best] {
            best = i;
        }
    }
    (
        e.eigenvalues[best],
        e.eigenvectors.column(best).iter().copied().collect(),
    )
}

/// ln ‖Φ(w)‖₂ for every window, in parallel over fixed chunks.
/// The first window of each chunk starts from `warm(window)` when given
/// (a singular vector of a related window), else from a fixed vector.
fn window_norms(
    system: &ErrorSystem,
    windows: &[Window],
    warm: &(dyn Fn(&Window) -> Option<Vec<f64>> + Sync),
) -> Vec<WindowNorm> {
    let d = system.dim();
    windows
        .par_chunks(windows.len().div_ceil(PIECES).clamp(1, CHUNK))
        .flat_map_iter(|chunk| {
            let mut x = warm(&chunk[0])
                .filter(|v| v.len() == d)
                .unwrap_or_else(|| start_vector(d));
            let mut work = Work::default();
            let mut steps = Vec::new();
            chunk
                .iter()
                .map(|w| {
                    system.schedule().steps(w, &mut steps);
                    power_norm(system, &steps, &mut x, &mut work, LANCZOS_TOLERANCE)
                })
                .collect::<Vec<_>>()
        })
        .collect()
}

/// Certificate windows of `multiple` × T: every excitation-window start whose
/// longer window fits, plus the chain `h0 + k·T_c` so that the bound holds
/// from the start of the horizon (sorted by start, without repeats).
pub fn certificate_windows(problem: &Problem, multiple: usize) -> Vec<Window> {
    let s = &problem.settings;
    let length = s.window * multiple as f64;
    let mut out: Vec<Window> = problem
        .windows
        .iter()
        .filter_map(|w| window_at(&problem.domain, s.window_kind, length, w.start))
        .collect();
    // The chain from h0: windows of the trial's length for time windows;
    // for hybrid windows, time windows as long as the longest hybrid one
    // (the rate is per second of that length).
    let chain = match s.window_kind {
        WindowKind::Time => length,
        WindowKind::Hybrid => out.iter().map(|w| w.end - w.start).fold(0.0, f64::max),
    };
    if chain > 0.0 {
        let mut k = 0usize;
        while let Some(w) = window_at(
            &problem.domain,
            WindowKind::Time,
            chain,
            problem.domain.h0 + k as f64 * chain,
        ) {
            out.push(w);
            k += 1;
        }
    }
    out.sort_by(|a, b| {
        a.start
            .total_cmp(&b.start)
            .then(a.end.total_cmp(&b.end))
            .then(a.jumps_through_end.cmp(&b.jumps_through_end))
    });
    out.dedup();
    out
}

struct Trial {
    length: f64,
    log_rho: f64,
    worst: usize,
    windows: Vec<Window>,
    /// ln ‖Φ(w)‖₂ where evaluated, else an upper bound on it.
    upper: Vec<f64>,
    /// Evaluated windows (the others cannot be the worst).
    norms: Vec<Option<WindowNorm>>,
}

impl Trial {
    fn rate(&self) -> Option<f64> {
        (self.log_rho < 0.0).then(|| -self.log_rho / self.length)
    }

    /// Index of the window starting at `t`, if any.
    fn index_at(&self, t: f64) -> Option<usize> {
        let tol = 1e-7 * self.length.max(1.0);
        let k = self.windows.partition_point(|w| w.start < t - tol);
        self.windows
            .get(k)
            .filter(|w| (w.start - t).abs() <= tol)
            .map(|_| k)
    }

    /// `upper` of the window starting at `t`, or +∞ when there is none.
    fn upper_at(&self, t: f64) -> f64 {
        self.index_at(t).map_or(f64::INFINITY, |k| self.upper[k])
    }
}

/// Windows evaluated together once bounds can rule windows out (largest
/// bound first, so the rest can be ruled out early; two per core on a
/// two-core machine), and windows sampled from the first trial.
const BATCH: usize = 4;

impl Trial {
    /// The certificate windows of `multiple` × T with their bounds: a time
    /// window of length 2L is the product of two windows of length L, so
    /// `‖Φ‖ ≤ ‖Φ_first‖·‖Φ_second‖` from the previous (half-length) trial
    /// (+∞ where a half is not evaluated). Nothing is evaluated yet.
    fn new(problem: &Problem, multiple: usize, prev: Option<&Trial>) -> Option<Trial> {
        let windows = certificate_windows(problem, multiple);
        if windows.is_empty() {
            return None;
        }
        let time = problem.settings.window_kind == WindowKind::Time;
        let upper: Vec<f64> = windows
            .iter()
            .map(|w| match prev {
                Some(p) if time => {
                    p.upper_at(w.start) + p.upper_at(w.start + (w.end - w.start) / 2.0)
                }
                _ => f64::INFINITY,
            })
            .collect();
        let length = windows
            .iter()
            .map(|w| w.end - w.start)
            .fold(0.0f64, f64::max);
        Some(Trial {
            length,
            log_rho: f64::NEG_INFINITY,
            worst: 0,
            norms: vec![None; windows.len()],
            windows,
            upper,
        })
    }

    /// Largest evaluated ln-norm (a lower bound on ln ρ).
    fn lower(&self) -> f64 {
        self.norms
            .iter()
            .flatten()
            .fold(f64::NEG_INFINITY, |m, n| m.max(n.log_norm))
    }

    /// Every window that could still be the worst (its bound is above the
    /// largest norm found) is evaluated.
    fn complete(&self) -> bool {
        let best = self.lower();
        self.norms
            .iter()
            .zip(&self.upper)
            .all(|(n, &u)| n.is_some() || u <= best)
    }

    /// Evaluates windows, those with the largest bounds first, in batches
    /// (all unbounded windows at once unless `sample`), skipping windows
    /// whose bound is below the largest norm found. Stops when the trial is
    /// complete, after one batch when `sample`, or as soon as a norm above
    /// `stop_above` is found. Sets ρ and the worst window when complete.
    fn evaluate(
        &mut self,
        system: &ErrorSystem,
        prev: Option<&Trial>,
        sample: bool,
        stop_above: f64,
    ) {
        loop {
            let best = self.lower();
            if best > stop_above {
                break;
            }
            let mut todo: Vec<usize> = (0..self.windows.len())
                .filter(|&k| self.norms[k].is_none() && self.upper[k] > best)
                .collect();
            if todo.is_empty() {
                break;
            }
            if sample {
                // Spread over the horizon: every (len/BATCH)-th window.
                let step = todo.len().div_ceil(BATCH).max(1);
                todo = todo.into_iter().step_by(step).collect();
            } else {
                todo.sort_by(|&a, &b| self.upper[b].total_cmp(&self.upper[a]).then(a.cmp(&b)));
                let batch = if stop_above.is_finite() {
                    BATCH
                } else {
                    let unbounded = todo.iter().filter(|&&k| self.upper[k].is_infinite());
                    unbounded.count().max(BATCH)
                };
                todo.truncate(batch);
                todo.sort_unstable();
            }
            let batch: Vec<Window> = todo.iter().map(|&k| self.windows[k]).collect();
            // Warm start: the right singular vector of the half-length
            // window at the same start (the slow direction there), when
            // evaluated.
            let warm = |w: &Window| -> Option<Vec<f64>> {
                let p = prev?;
                let k = p.index_at(w.start)?;
                p.norms[k].as_ref().map(|n| n.right.clone())
            };
            for (k, r) in todo.into_iter().zip(window_norms(system, &batch, &warm)) {
                self.upper[k] = r.log_norm;
                self.norms[k] = Some(r);
            }
            if sample {
                break;
            }
        }
        if self.complete() {
            let mut worst = 0;
            for (k, n) in self.norms.iter().enumerate() {
                if let Some(n) = n
                    && (self.norms[worst].is_none() || n.log_norm > self.upper[worst])
                {
                    worst = k;
                }
            }
            self.worst = worst;
            self.log_rho = self.upper.iter().fold(f64::NEG_INFINITY, |m, &u| m.max(u));
        }
    }

    /// Lanczos steps spent on this trial.
    fn iterations(&self) -> usize {
        self.norms.iter().flatten().map(|w| w.iterations).sum()
    }
}

/// ln of a bound M on ‖Φ(s+τ, s)‖₂ over all windows and all τ inside them:
/// the smaller of the product of 2-norm step bounds and √n times the
/// product of step bounds in the norm `max_i |e_i|` (since
/// `|x|_max ≤ |x|₂ ≤ √n |x|_max`). Factors below 1 are taken as 1, so the
/// bound covers every partial window.
fn log_partial_bound(system: &ErrorSystem, windows: &[Window]) -> f64 {
    let mut steps = Vec::new();
    let (mut two, mut sup) = (0.0f64, 0.0f64);
    for w in windows {
        system.schedule().steps(w, &mut steps);
        let a: f64 = steps
            .iter()
            .map(|s| system.step_bound(s).ln().max(0.0))
            .sum();
        let b: f64 = steps
            .iter()
            .map(|s| system.step_bound_sup(s).ln().max(0.0))
            .sum();
        two = two.max(a);
        sup = sup.max(b);
    }
    two.min(sup + 0.5 * (system.schedule().n() as f64).ln())
}

/// ln ‖Φ(w)‖₂ of one window for the error system (Lanczos from `start`,
/// or a fixed vector when it is empty or of the wrong length).
pub fn window_log_norm(system: &ErrorSystem, window: &Window, start: &[f64]) -> f64 {
    let mut steps = Vec::new();
    system.schedule().steps(window, &mut steps);
    let mut x = if start.len() == system.dim() {
        start.to_vec()
    } else {
        start_vector(system.dim())
    };
    power_norm(
        system,
        &steps,
        &mut x,
        &mut Work::default(),
        LANCZOS_TOLERANCE,
    )
    .log_norm
}

/// ln ‖Φ(h1, h0)‖₂ over the whole horizon, Lanczos from `start` (or a
/// fixed vector).
fn horizon_log_norm(problem: &Problem, system: &ErrorSystem, start: Option<Vec<f64>>) -> f64 {
    let w = Window {
        start: problem.domain.h0,
        end: problem.domain.h1,
        jumps_through_end: true,
    };
    let mut steps = Vec::new();
    system.schedule().steps(&w, &mut steps);
    let mut x = start
        .filter(|v| v.len() == system.dim())
        .unwrap_or_else(|| start_vector(system.dim()));
    // Informative only: a looser residual (the Ritz value is then still
    // accurate to about its square, far below the rate's printed digits).
    power_norm(system, &steps, &mut x, &mut Work::default(), 1e-3).log_norm
}

/// A certificate window of `multiple` × T is tried: the shortest always, the
/// longer ones while they fit in half the horizon.
fn fits(problem: &Problem, multiple: usize) -> bool {
    let horizon = problem.domain.h1 - problem.domain.h0;
    multiple == MULTIPLES[0] || problem.settings.window * multiple as f64 <= horizon / 2.0
}

/// The trials after the first (`first`, sampled when `lazy`), each window
/// length twice the previous while it fits in half the horizon, until one
/// does not improve the rate by 1 %. Returns the trials and the index of
/// the chosen one.
fn longer_trials(
    problem: &Problem,
    system: &ErrorSystem,
    first: Option<Trial>,
    lazy: bool,
    progress: bool,
) -> (Vec<Trial>, Option<usize>) {
    let Some(first) = first else {
        return (Vec::new(), None);
    };
    let mut best = (!lazy && first.rate().is_some()).then_some(0);
    let mut trials = vec![first];
    let mut first_pending = lazy;
    for &m in &MULTIPLES[1..] {
        if !fits(problem, m) {
            break;
        }
        if progress {
            eprint!(
                "\rcertificate: windows of {} s ({} tried so far)   ",
                problem.settings.window * m as f64,
                trials.len()
            );
        }
        let Some(mut t) = Trial::new(problem, m, trials.last()) else {
            break;
        };
        t.evaluate(system, trials.last(), false, f64::INFINITY);
        if first_pending {
            first_pending = false;
            let first = &mut trials[0];
            // `t` improves on the first trial by more than 1 % for sure
            // once one of the first trial's windows has an ln-norm above
            // this (its rate is then below −ln-norm/length); 0 when `t` has
            // no rate (the first trial then has none either).
            let above = t.rate().map_or(0.0, |r| -r * first.length / 1.01);
            if first.lower() <= above {
                first.evaluate(system, None, false, above);
            }
            if first.complete() && first.rate().is_some() {
                best = Some(0);
            }
        }
        let improved = match (best.map(|b| &trials[b]), t.rate()) {
            (_, None) => false,
            (None, Some(_)) => true,
            (Some(b), Some(r)) => r > b.rate().unwrap_or(0.0) * 1.01,
        };
        let stop = best.is_some() && !improved;
        trials.push(t);
        if improved {
            best = Some(trials.len() - 1);
        }
        if stop {
            break;
        }
    }
    if first_pending {
        trials[0].evaluate(system, None, false, f64::INFINITY);
        if trials[0].rate().is_some() {
            best = Some(0);
        }
    }
    (trials, best)
}

/// Certifies the convergence rate of `set` on the recorded data.
///
/// When the structural condition fails the rate is not computed (a
/// non-excited source component keeps its weakest direction forever).
///
/// # Complexity
/// For W windows of S steps, np unknowns and A arcs:
/// O(W·S·I·m·(np + A·p)) with I Lanczos steps (few, warm-started) and m
/// Taylor terms per step; windows run in parallel.
pub fn certify(problem: &Problem, table: &ExcitationTable, set: &LinkSet) -> Certificate {
    let schedule = Schedule::new(problem);
    certify_with(problem, table, &schedule, set)
}

/// Like [`certify`], with a prepared schedule (for repeated use).
pub fn certify_with(
    problem: &Problem,
    table: &ExcitationTable,
    schedule: &Schedule,
    set: &LinkSet,
) -> Certificate {
    let gains = gain_checks(problem, set);
    let gains_ok = gains.iter().all(|g| g.ok);
    let mut cert = Certificate {
        rate: None,
        window: problem.settings.window,
        contraction: 1.0,
        transient_factor: None,
        time_to_1pct: None,
        gains_ok,
        gains,
        asymptotic_rate: None,
        windows: 0,
        evaluated_windows: 0,
        worst_window_start: None,
        units: Vec::new(),
        reason: None,
        unconverged_windows: 0,
        lanczos_steps: 0,
        worst_windows: Vec::new(),
        worst_vector: Vec::new(),
        timing: CertTiming::default(),
    };
    let started = std::time::Instant::now();
    let structural = analysis::check(problem, table, set);
    if !structural.condition_holds {
        cert.reason = Some(
            "a source component is not jointly excited: the error along its weakest \
             direction never decays"
                .into(),
        );
        return cert;
    }
    let system = ErrorSystem::of_links(schedule, problem, set);
    let horizon = problem.domain.h1 - problem.domain.h0;
    // A progress line on a terminal when the network is large enough for
    // the certificate to take a while.
    let progress =
        std::io::stderr().is_terminal() && system.dim() * problem.domain.grid.len() > 2_000_000;
    // The first (shortest) trial runs alone; then the longer ones run
    // beside the whole-horizon norm, which starts from the singular vector
    // of the first window (the slow direction at h0).
    let t0 = std::time::Instant::now();
    // The first trial is only sampled while a longer one follows: its exact
    // ρ matters only when the longer window does not improve the rate by
    // 1 %, which a sampled window can rule out.
    let lazy = MULTIPLES.get(1).is_some_and(|&m| fits(problem, m));
    if progress {
        eprint!(
            "\rcertificate: windows of {} s   ",
            problem.settings.window * MULTIPLES[0] as f64
        );
    }
    let first = Trial::new(problem, MULTIPLES[0], None).map(|mut t| {
        t.evaluate(&system, None, lazy, f64::INFINITY);
        t
    });
    let horizon_start = first
        .as_ref()
        .and_then(|t| t.norms[t.index_at(problem.domain.h0)?].as_ref())
        .map(|n| n.right.clone());
    let first_time = t0.elapsed();
    let ((trials, best, windows_time), (log_h, horizon_time)) = rayon::join(
        || {
            let t1 = std::time::Instant::now();
            let (trials, best) = longer_trials(problem, &system, first, lazy, progress);
            (trials, best, first_time + t1.elapsed())
        },
        || {
            let t0 = std::time::Instant::now();
            (
                horizon_log_norm(problem, &system, horizon_start),
                t0.elapsed(),
            )
        },
    );
    let iterations = trials.iter().map(Trial::iterations).sum::<usize>();
    if progress {
        eprintln!();
    }
    cert.lanczos_steps += iterations;
    cert.timing.windows = windows_time;
    cert.timing.horizon = horizon_time;
    if log_h < 0.0 {
        cert.asymptotic_rate = Some(-log_h / horizon);
    }
    let Some(t) = best.or(trials.len().checked_sub(1)).map(|k| &trials[k]) else {
        cert.reason = Some("no certificate window fits in the horizon".into());
        return cert;
    };
    cert.window = t.length;
    cert.contraction = t.log_rho.exp();
    cert.windows = t.windows.len();
    cert.evaluated_windows = t.norms.iter().flatten().count();
    cert.worst_window_start = Some(t.windows[t.worst].start);
    let mut order: Vec<usize> = (0..t.windows.len())
        .filter(|&k| t.norms[k].is_some())
        .collect();
    order.sort_by(|&a, &b| t.upper[b].total_cmp(&t.upper[a]).then(a.cmp(&b)));
    cert.worst_windows = order.iter().take(3).map(|&k| t.windows[k]).collect();
    cert.unconverged_windows = t.norms.iter().flatten().filter(|w| !w.converged).count();
    let p = problem.settings.parameters;
    // The left singular vector of the worst window: the image of its right
    // one, normalised.
    cert.worst_vector = t.norms[t.worst]
        .as_ref()
        .expect("the worst window is evaluated")
        .right
        .clone();
    let mut left = cert.worst_vector.clone();
    let mut steps = Vec::new();
    schedule.steps(&t.windows[t.worst], &mut steps);
    system.propagate(Direction::Forward, &steps, &mut left, &mut Work::default());
    normalise(&mut left);
    let mut units: Vec<UnitShare> = problem
        .nodes
        .iter()
        .enumerate()
        .map(|(i, v)| UnitShare {
            node: v.id.clone(),
            share: left[i * p..(i + 1) * p].iter().map(|x| x * x).sum(),
        })
        .collect();
    units.sort_by(|a, b| b.share.total_cmp(&a.share).then(a.node.cmp(&b.node)));
    cert.units = units;
    match t.rate() {
        Some(rate) => {
            let log_m = log_partial_bound(&system, &t.windows);
            let c = (log_m - t.log_rho).exp();
            cert.rate = Some(rate);
            cert.transient_factor = Some(c);
            cert.time_to_1pct = Some((100.0 * c).ln() / rate);
        }
        None => {
            cert.reason = Some(format!(
                "no window up to {} s that fits in the {} s horizon shows contraction \
                 (largest ‖Φ‖ = {:.6}): the log is too short for this network",
                t.length,
                horizon,
                t.log_rho.exp()
            ));
        }
    }
    cert.timing.total = started.elapsed();
    cert
}
