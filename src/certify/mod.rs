//! Certified convergence rate of a link set on the recorded data
//! (docs/theory.md §6) and the gain conditions.
//!
//! The error system is block-diagonal over the weakly connected components
//! of the chosen digraph; each block is certified on its own. For every
//! certificate window w, an **upper bound** on `‖Φ(w)‖₂` comes from
//! [`bound`]: exact for small blocks, a deflated Lanczos run with a
//! randomized tail bound for larger ones. With `ρ = max_w ‖Φ(w)‖₂ < 1`
//! over windows of length `T_c`, the block's certified rate is
//! `λ = −ln ρ / T_c`, and `|e(t)| ≤ c·e^{−λ(t−h0)}|e(h0)|` for every t of
//! the horizon (its last jumps included) with the transient factor
//! `c = M/ρ`, M a bound on `‖Φ‖₂` over every piece of the chain of
//! windows from h0 through the horizon's end. The network's rate is the
//! smallest block rate and its transient factor the largest.
//!
//! # References
//! Khalil, "Nonlinear Systems", 3rd ed., 2002, §4.6 (uniform exponential
//! stability of linear time-varying systems from the transition matrix);
//! Kuczyński & Woźniakowski, SIAM J. Matrix Anal. Appl. 13(4), 1992
//! (random-start Lanczos tail bound).

pub mod bound;
mod estimate;
mod lanczos;
pub mod propagate;

pub use estimate::window_log_norm;

use crate::excitation::ExcitationTable;
use crate::problem::{LinkSet, Problem};
use crate::progress::Sink;
use crate::signal::{Window, WindowKind, window_at};
use bound::NormBound;
use propagate::{Direction, ErrorSystem, Schedule, Work};
use rayon::prelude::*;
use serde::Serialize;

/// Windows handled one after another by one thread, each warm-starting the
/// next one's Lanczos run from its singular vector: at most this many, and
/// the windows of a batch are split into at least `PIECES` chunks so that
/// both cores of a small machine stay busy. The split depends only on the
/// number of windows, so results do not depend on the number of threads.
const CHUNK: usize = 16;

/// Fewest chunks a batch of windows is split into.
const PIECES: usize = 4;

/// Blocks with more unknowns than this choose T_c from Lanczos estimates
/// and bound only the chosen trial's windows (exact or randomized); smaller
/// blocks bound every window they evaluate.
const ESTIMATE_FIRST: usize = 16;

/// Multiples of the excitation window tried as the certificate window.
pub const MULTIPLES: [usize; 5] = [1, 2, 4, 8, 16];

/// A window bound counts as loose when its upper bound exceeds its lower
/// bound by more than this factor (reported, still a valid bound).
const LOOSE: f64 = 1.001;

/// One gain condition.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GainCheck {
    /// What is checked.
    pub condition: String,
    /// The value checked.
    pub value: f64,
    /// The limit the value is checked against.
    pub limit: f64,
    /// The condition holds.
    pub ok: bool,
    /// The unit concerned, for a per-unit condition.
    pub node: Option<String>,
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

/// How the window norms behind a certificate are bounded.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum NormBoundKind {
    /// Every norm computed exactly (plus a margin for rounding).
    Exact,
    /// Some norms bounded by randomized tail tests; the bound fails with
    /// at most the stated probability.
    Randomized,
}

/// The certificate of one weakly connected block of the chosen digraph.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BlockCertificate {
    /// Units of the block.
    pub units: Vec<String>,
    /// Certified rate of the block in 1/s.
    pub rate: Option<f64>,
    /// The block's certificate window T_c in seconds.
    pub window: f64,
    /// Upper bound on ρ for the block.
    pub contraction: f64,
    /// The block's transient factor (from h0).
    pub transient_factor: Option<f64>,
    /// How the block's norms are bounded.
    pub norm_bound: NormBoundKind,
}

/// The certificate of a link set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Certificate {
    /// Certified rate λ in 1/s (the smallest over the blocks); `None` when
    /// not certified on this horizon.
    pub rate: Option<f64>,
    /// Certificate window T_c in seconds of the slowest block (the one
    /// giving its best rate, or the longest tried when none certifies).
    pub window: f64,
    /// Upper bound on ρ = max over windows of ‖Φ(w)‖₂ of the slowest block.
    pub contraction: f64,
    /// Transient factor c: `|e(t)| ≤ c e^{−λ(t−h0)} |e(h0)|` for every t
    /// in the horizon, jumps at its end included.
    pub transient_factor: Option<f64>,
    /// The start of the horizon h0: the envelope with `transient_factor`
    /// holds from this time, for every later t through h1 (jumps at h1
    /// included).
    pub envelope_from: f64,
    /// Transient factor for any start s in the horizon (not only h0):
    /// `|e(t)| ≤ c' e^{−λ(t−s)} |e(s)|`.
    pub transient_factor_any_start: Option<f64>,
    /// Time for the certified bound to fall to 1 % (seconds).
    pub time_to_1pct: Option<f64>,
    /// The time to 1 % lies beyond the recorded horizon (an extrapolation
    /// that assumes the data keep behaving as recorded).
    pub time_to_1pct_extrapolated: bool,
    /// All gain conditions hold.
    pub gains_ok: bool,
    /// The gain conditions.
    pub gains: Vec<GainCheck>,
    /// Estimated decay rate over the whole horizon,
    /// `−ln ‖Φ(h1, h0)‖₂ / (h1 − h0)` with the norm estimated by Lanczos
    /// (an estimate, not a bound: it can overstate the decay).
    pub asymptotic_rate: Option<f64>,
    /// Number of certificate windows of length `window` (slowest block).
    pub windows: usize,
    /// How many of them needed their norm bounded (the others are bounded
    /// below the worst by products of half-length windows).
    pub evaluated_windows: usize,
    /// Start of the worst window.
    pub worst_window_start: Option<f64>,
    /// Units by share of the slowest mode, largest first.
    pub units: Vec<UnitShare>,
    /// Why there is no rate, when there is none.
    pub reason: Option<String>,
    /// Windows whose upper bound exceeds its lower bound by more than
    /// 0.1 % (still valid bounds, only looser).
    pub unconverged_windows: usize,
    /// Work measure: propagation passes over windows, divided by two (one
    /// Lanczos step is one forward and one adjoint pass).
    pub lanczos_steps: usize,
    /// How the window norms are bounded: `exact` or `randomized`.
    pub norm_bound: NormBoundKind,
    /// Probability that a randomized bound fails (0 when exact): the number
    /// of randomized tail tests times their failure probability.
    pub failure_probability: f64,
    /// The certificate of every weakly connected block, in order of
    /// their smallest unit.
    pub blocks: Vec<BlockCertificate>,
    /// The worst certificate windows of the slowest block, worst first (at
    /// most three).
    #[serde(skip)]
    pub worst_windows: Vec<Window>,
    /// The right singular vector estimate of the worst window (a warm
    /// start for nearby systems; zero outside the slowest block).
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

/// For every unit, the largest `|ψ|²/(1 + |ψ|²)` over its own jumps in the
/// horizon (0 for a unit that never jumps): the share of the jump gain its
/// jump map applies along ψ.
pub fn jump_shares(problem: &Problem) -> Vec<f64> {
    let (h0, h1) = (problem.domain.h0, problem.domain.h1);
    problem
        .nodes
        .iter()
        .map(|v| {
            v.log
                .jumps()
                .filter(|e| e.time >= h0 && e.time <= h1)
                .map(|e| {
                    let sq: f64 = e.psi.iter().map(|x| x * x).sum();
                    sq / (1.0 + sq)
                })
                .fold(0.0, f64::max)
        })
        .collect()
}

/// Weighted in-degree of every unit under the links of `set`.
pub fn in_degrees(problem: &Problem, set: &LinkSet) -> Vec<f64> {
    let mut degree = vec![0.0f64; problem.n()];
    for a in problem.arcs(set) {
        degree[a.to.index()] += a.weight;
    }
    degree
}

/// The largest weighted in-degree each unit may have for its jump map to
/// stay non-expansive: `(1 − γ_d s_i / 2)/δ` (infinite when δ = 0), with
/// `s_i` from [`jump_shares`] (docs/theory.md §6, "Gains").
pub fn degree_caps(problem: &Problem) -> Vec<f64> {
    let g = problem.settings.gains;
    jump_shares(problem)
        .into_iter()
        .map(|s| {
            let room = 1.0 - g.jump_gain * s / 2.0;
            if g.jump_coupling > 0.0 {
                room / g.jump_coupling
            } else if room >= 0.0 {
                f64::INFINITY
            } else {
                f64::NEG_INFINITY
            }
        })
        .collect()
}

/// The gain conditions for the arcs of a link set: every unit's jump map
/// row is non-expansive when `δ·d_i + γ_d·s_i/2 ≤ 1` (d_i its weighted
/// in-degree, s_i from [`jump_shares`]; docs/theory.md §6). Lists every
/// unit that fails, or the unit closest to its limit when all pass.
///
/// # References
/// Horn & Johnson, "Matrix Analysis", 2nd ed., 2013, §5.6 (induced norms;
/// the block max norm of a block matrix is at most the largest block-row
/// sum of block norms).
pub fn gain_checks(problem: &Problem, set: &LinkSet) -> Vec<GainCheck> {
    let g = problem.settings.gains;
    let degree = in_degrees(problem, set);
    let shares = jump_shares(problem);
    let rows: Vec<GainCheck> = degree
        .iter()
        .zip(&shares)
        .zip(&problem.nodes)
        .map(|((&d, &s), v)| {
            let value = g.jump_coupling * d + g.jump_gain * s / 2.0;
            GainCheck {
                condition: "jump coupling × weighted in-degree + jump gain × share/2 ≤ 1 \
                            (the unit's jump map is non-expansive)"
                    .into(),
                value,
                limit: 1.0,
                ok: value <= 1.0,
                node: Some(v.id.clone()),
            }
        })
        .collect();
    let failing: Vec<GainCheck> = rows.iter().filter(|r| !r.ok).cloned().collect();
    if !failing.is_empty() {
        return failing;
    }
    rows.into_iter()
        .max_by(|a, b| a.value.total_cmp(&b.value).then(b.node.cmp(&a.node)))
        .into_iter()
        .collect()
}

/// Bounds for every window, in parallel over fixed chunks. The first
/// window of each chunk starts from `warm(window)` when given, else from a
/// fixed vector; window k of the batch draws its random starts from
/// `seeds[k]`. A window whose bound falls to `accept` (ln) stops early.
fn window_norms(
    system: &ErrorSystem,
    windows: &[Window],
    seeds: &[u64],
    accept: f64,
    warm: &(dyn Fn(&Window) -> Option<Vec<f64>> + Sync),
    mode: Mode,
) -> Vec<NormBound> {
    let d = system.dim();
    let size = windows.len().div_ceil(PIECES).clamp(1, CHUNK);
    windows
        .par_chunks(size)
        .zip(seeds.par_chunks(size))
        .flat_map_iter(|(chunk, seeds)| {
            let mut x = warm(&chunk[0])
                .filter(|v| v.len() == d)
                .unwrap_or_else(|| lanczos::start_vector(d));
            let mut work = Work::default();
            let mut steps = Vec::new();
            chunk
                .iter()
                .zip(seeds)
                .map(|(w, &seed)| {
                    system.schedule().steps(w, &mut steps);
                    let b = match mode {
                        Mode::Bound => {
                            bound::window_bound(system, &steps, &x, seed, accept, &mut work)
                        }
                        Mode::Estimate => {
                            let mut v = x.clone();
                            let mut passes = 0;
                            let log = estimate::lanczos_estimate(
                                system,
                                &steps,
                                &mut v,
                                &mut work,
                                &mut passes,
                            );
                            NormBound {
                                log_upper: log,
                                log_lower: log,
                                right: v,
                                passes,
                                tests: 0,
                                exact: false,
                            }
                        }
                    };
                    if b.right.len() == d {
                        x.clone_from(&b.right);
                    }
                    b
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
    let chain = chain_length(problem, multiple, &out);
    out.extend(chain_pieces(problem, chain).0);
    out.sort_by(|a, b| {
        a.start
            .total_cmp(&b.start)
            .then(a.end.total_cmp(&b.end))
            .then(a.jumps_through_end.cmp(&b.jumps_through_end))
    });
    out.dedup();
    out
}

/// Length of the chain windows for `multiple` × T: that length for time
/// windows; for hybrid windows, time windows as long as the longest hybrid
/// one (the rate is per second of that length).
fn chain_length(problem: &Problem, multiple: usize, windows: &[Window]) -> f64 {
    match problem.settings.window_kind {
        WindowKind::Time => problem.settings.window * multiple as f64,
        WindowKind::Hybrid => windows.iter().map(|w| w.end - w.start).fold(0.0, f64::max),
    }
}

/// The chain of whole windows `[h0 + kL, h0 + (k+1)L)` that fit in the
/// horizon, and the last piece after them: from the end of the chain to
/// h1, jumps at h1 included (possibly only those jumps).
pub fn chain_pieces(problem: &Problem, length: f64) -> (Vec<Window>, Window) {
    let domain = &problem.domain;
    let mut chain = Vec::new();
    if length > 0.0 {
        while let Some(w) = window_at(
            domain,
            WindowKind::Time,
            length,
            domain.h0 + chain.len() as f64 * length,
        ) {
            chain.push(w);
        }
    }
    let start = chain.last().map_or(domain.h0, |w: &Window| w.end);
    let last = Window {
        start,
        end: domain.h1.max(start),
        jumps_through_end: true,
    };
    (chain, last)
}

/// How a trial's windows are evaluated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Mode {
    /// Upper bounds (the certificate).
    Bound,
    /// Lanczos estimates from below, to choose T_c cheaply on large
    /// blocks; never printed as certified.
    Estimate,
}

struct Trial {
    /// Length of the chain windows, T_c (the rate's time unit).
    length: f64,
    /// Upper bounds or estimates.
    mode: Mode,
    /// Windows whose bound falls to this (ln) may stop early: a lower
    /// bound on ρ known beforehand.
    accept_floor: f64,
    log_rho: f64,
    worst: usize,
    windows: Vec<Window>,
    /// ln of an upper bound on ‖Φ(w)‖₂: the window's own bound where
    /// evaluated, else a product of half-length bounds (or +∞).
    upper: Vec<f64>,
    /// Evaluated windows (the others cannot be the worst).
    norms: Vec<Option<NormBound>>,
    /// Seed of this trial's random starts.
    seed: u64,
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
    /// (+∞ where a half is not bounded). Nothing is evaluated yet.
    fn new(problem: &Problem, multiple: usize, prev: Option<&Trial>, seed: u64) -> Option<Trial> {
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
        let length = chain_length(problem, multiple, &windows);
        Some(Trial {
            length,
            mode: Mode::Bound,
            accept_floor: f64::NEG_INFINITY,
            log_rho: f64::NEG_INFINITY,
            worst: 0,
            norms: vec![None; windows.len()],
            windows,
            upper,
            seed: seed ^ (multiple as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15),
        })
    }

    /// Largest evaluated lower bound (a lower bound on ln ρ).
    fn lower(&self) -> f64 {
        self.norms
            .iter()
            .flatten()
            .fold(f64::NEG_INFINITY, |m, n| m.max(n.log_lower))
    }

    /// Every window that could still be the worst (its bound is above the
    /// largest lower bound found) is evaluated.
    fn complete(&self) -> bool {
        let best = self.lower();
        self.norms
            .iter()
            .zip(&self.upper)
            .all(|(n, &u)| n.is_some() || u <= best)
    }

    /// Evaluates windows, those with the largest bounds first, in batches
    /// (all unbounded windows at once unless `sample`), skipping windows
    /// whose bound is below the largest lower bound found. Stops when the
    /// trial is complete, after one batch when `sample`, or as soon as a
    /// lower bound above `stop_above` is found. Sets ρ and the worst window
    /// when complete.
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
            let seeds: Vec<u64> = todo
                .iter()
                .map(|&k| self.seed ^ (k as u64 + 1).wrapping_mul(0xD1B5_4A32_D192_ED03))
                .collect();
            // Warm start: the right singular vector of the half-length
            // window at the same start (the slow direction there), when
            // evaluated.
            let warm = |w: &Window| -> Option<Vec<f64>> {
                let p = prev?;
                let k = p.index_at(w.start)?;
                p.norms[k].as_ref().map(|n| n.right.clone())
            };
            for (k, r) in todo.into_iter().zip(window_norms(
                system,
                &batch,
                &seeds,
                best.max(self.accept_floor),
                &warm,
                self.mode,
            )) {
                self.upper[k] = self.upper[k].min(r.log_upper);
                self.norms[k] = Some(r);
            }
            if sample {
                break;
            }
        }
        if self.complete() {
            let mut worst = None;
            for (k, n) in self.norms.iter().enumerate() {
                if n.is_some() && worst.is_none_or(|w: usize| self.upper[k] > self.upper[w]) {
                    worst = Some(k);
                }
            }
            self.worst = worst.unwrap_or(0);
            self.log_rho = self.upper.iter().fold(f64::NEG_INFINITY, |m, &u| m.max(u));
        }
    }

    /// Propagation passes spent on this trial.
    fn passes(&self) -> usize {
        self.norms.iter().flatten().map(|w| w.passes).sum()
    }

    /// Randomized tail tests made in this trial.
    fn tests(&self) -> usize {
        self.norms.iter().flatten().map(|w| w.tests).sum()
    }
}

/// ln of a bound on ‖Φ(s+τ, s)‖₂ over every piece of `pieces` and every τ
/// inside it (jumps at its end included when it says so): the smaller of
/// the product of 2-norm step bounds and √n times the product of step
/// bounds in the norm `max_i |e_i|` (since `|x|_max ≤ |x|₂ ≤ √n |x|_max`).
/// Factors below 1 are taken as 1, so the bound covers every partial piece.
fn log_partial_bound(system: &ErrorSystem, pieces: &[Window]) -> f64 {
    let mut steps = Vec::new();
    let (mut two, mut sup) = (0.0f64, 0.0f64);
    for w in pieces {
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
    progress: &Sink,
    seed: u64,
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
        progress.update(|| {
            format!(
                "certificate: windows of {} s ({} tried so far)",
                problem.settings.window * m as f64,
                trials.len()
            )
        });
        let Some(mut t) = Trial::new(problem, m, trials.last(), seed) else {
            break;
        };
        t.mode = trials[0].mode;
        t.evaluate(system, trials.last(), false, f64::INFINITY);
        if first_pending {
            first_pending = false;
            let first = &mut trials[0];
            // `t` improves on the first trial by more than 1 % for sure
            // once one of the first trial's windows has a lower bound above
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

/// The certificate of one block (units in local order).
struct Block {
    units: Vec<u32>,
    rate: Option<f64>,
    length: f64,
    log_rho: f64,
    /// ln M over the chain from h0 and its last piece.
    log_m: f64,
    /// ln of the bound over any piece of any window (for any start).
    log_m_any: f64,
    windows: usize,
    evaluated: usize,
    loose: usize,
    worst_windows: Vec<Window>,
    /// Right singular vector estimate of the worst window (block-local).
    right: Vec<f64>,
    /// Left singular vector of the worst window (block-local).
    left: Vec<f64>,
    log_horizon: f64,
    passes: usize,
    tests: usize,
    exact: bool,
    reason: Option<String>,
    windows_time: std::time::Duration,
    horizon_time: std::time::Duration,
}

/// Certifies one weakly connected block.
fn certify_block(
    problem: &Problem,
    system: &ErrorSystem,
    units: Vec<u32>,
    seed: u64,
    sink: &Sink,
) -> Block {
    let horizon = problem.domain.h1 - problem.domain.h0;
    // A progress line on a terminal when the block is large enough for
    // the certificate to take a while.
    let silent = Sink::silent();
    let progress = if system.dim() * problem.domain.grid.len() > 2_000_000 {
        sink
    } else {
        &silent
    };
    let t0 = std::time::Instant::now();
    // The first trial is only sampled while a longer one follows: its exact
    // ρ matters only when the longer window does not improve the rate by
    // 1 %, which a sampled window can rule out.
    let lazy = MULTIPLES.get(1).is_some_and(|&m| fits(problem, m));
    progress.update(|| {
        format!(
            "certificate: windows of {} s",
            problem.settings.window * MULTIPLES[0] as f64
        )
    });
    // On blocks too large for exact norms, T_c is chosen from Lanczos
    // estimates (cheap), and only the chosen trial's windows are bounded.
    let mode = if system.dim() > ESTIMATE_FIRST {
        Mode::Estimate
    } else {
        Mode::Bound
    };
    let first = Trial::new(problem, MULTIPLES[0], None, seed).map(|mut t| {
        t.mode = mode;
        t.evaluate(system, None, lazy, f64::INFINITY);
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
            let (trials, best) = longer_trials(problem, system, first, lazy, progress, seed);
            (trials, best, first_time + t1.elapsed())
        },
        || {
            let t0 = std::time::Instant::now();
            let w = Window {
                start: problem.domain.h0,
                end: problem.domain.h1,
                jumps_through_end: true,
            };
            let mut steps = Vec::new();
            system.schedule().steps(&w, &mut steps);
            let start = horizon_start
                .filter(|v| v.len() == system.dim())
                .unwrap_or_else(|| lanczos::start_vector(system.dim()));
            // Informative only, and labelled an estimate: a Lanczos value
            // from below (a bound would cost a full tail test on the
            // longest window of all).
            let log = estimate::window_log_norm(system, &w, &start);
            (log, t0.elapsed())
        },
    );
    progress.done();
    let mut block = Block {
        units,
        rate: None,
        length: problem.settings.window,
        log_rho: 0.0,
        log_m: 0.0,
        log_m_any: 0.0,
        windows: 0,
        evaluated: 0,
        loose: 0,
        worst_windows: Vec::new(),
        right: Vec::new(),
        left: Vec::new(),
        log_horizon: log_h,
        passes: trials.iter().map(Trial::passes).sum::<usize>(),
        tests: trials.iter().map(Trial::tests).sum::<usize>(),
        exact: true,
        reason: None,
        windows_time,
        horizon_time,
    };
    block.exact = block.exact && block.tests == 0;
    let Some(chosen) = best.or(trials.len().checked_sub(1)) else {
        block.reason = Some("no certificate window fits in the horizon".into());
        return block;
    };
    let bounded;
    let t = if trials[chosen].mode == Mode::Estimate {
        // Bound every window of the chosen length; the largest estimate is
        // a lower bound on ρ, so windows whose bound falls below it stop
        // early; each starts from its estimate's singular vector.
        let estimate = &trials[chosen];
        let multiple = MULTIPLES[chosen];
        let t0 = std::time::Instant::now();
        let mut t = Trial::new(problem, multiple, None, seed ^ 0xB0_0B)
            .expect("the estimated trial has windows");
        t.accept_floor = estimate.lower();
        t.evaluate(system, Some(estimate), false, f64::INFINITY);
        block.passes += t.passes();
        block.tests += t.tests();
        block.exact = block.exact && t.tests() == 0;
        block.windows_time += t0.elapsed();
        bounded = t;
        &bounded
    } else {
        &trials[chosen]
    };
    block.length = t.length;
    block.log_rho = t.log_rho;
    block.windows = t.windows.len();
    block.evaluated = t.norms.iter().flatten().count();
    block.loose = t
        .norms
        .iter()
        .flatten()
        .filter(|n| n.log_upper > n.log_lower + LOOSE.ln())
        .count();
    let mut order: Vec<usize> = (0..t.windows.len())
        .filter(|&k| t.norms[k].is_some())
        .collect();
    order.sort_by(|&a, &b| t.upper[b].total_cmp(&t.upper[a]).then(a.cmp(&b)));
    block.worst_windows = order.iter().take(3).map(|&k| t.windows[k]).collect();
    if let Some(n) = t.norms[t.worst].as_ref() {
        block.right = n.right.clone();
        // The left singular vector: the image of the right one, normalised.
        let mut left = n.right.clone();
        let mut steps = Vec::new();
        system.schedule().steps(&t.windows[t.worst], &mut steps);
        system.propagate(Direction::Forward, &steps, &mut left, &mut Work::default());
        lanczos::normalise(&mut left);
        block.left = left;
    }
    match t.rate() {
        Some(rate) => {
            let (chain, last) = chain_pieces(problem, t.length);
            let mut pieces = chain;
            pieces.push(last);
            block.log_m = log_partial_bound(system, &pieces);
            block.log_m_any = block.log_m.max(log_partial_bound(system, &t.windows));
            block.rate = Some(rate);
        }
        None => {
            block.reason = Some(format!(
                "no window up to {} s that fits in the {} s horizon shows contraction \
                 (largest ‖Φ‖ bound = {:.6}): the log is too short for this network, or \
                 its units are too weakly excited or coupled",
                t.length,
                horizon,
                t.log_rho.exp()
            ));
        }
    }
    block
}

/// The weakly connected components of the arcs `(from, to)` on n units,
/// each sorted, ordered by smallest unit (isolated units are components).
fn weak_components(n: usize, arcs: &[(u32, u32, f64)]) -> Vec<Vec<u32>> {
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(parent: &mut [usize], mut x: usize) -> usize {
        while parent[x] != x {
            parent[x] = parent[parent[x]];
            x = parent[x];
        }
        x
    }
    for &(a, b, _) in arcs {
        let (ra, rb) = (find(&mut parent, a as usize), find(&mut parent, b as usize));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    }
    let mut groups: Vec<Vec<u32>> = vec![Vec::new(); n];
    for v in 0..n {
        let r = find(&mut parent, v);
        groups[r].push(v as u32);
    }
    groups.into_iter().filter(|g| !g.is_empty()).collect()
}

/// Certifies the convergence rate of `set` on the recorded data.
///
/// When the structural condition fails the rate is not computed (a
/// non-excited source component keeps its weakest direction forever).
///
/// # Complexity
/// Per block of b units, for W windows of S steps: O(W·S·(bp)²) for exact
/// blocks, O(W·S·I·m·(bp + A·p)) with I Lanczos steps and m Taylor terms
/// for larger ones; windows and blocks run in parallel.
pub fn certify(problem: &Problem, table: &ExcitationTable, set: &LinkSet) -> Certificate {
    certify_showing(problem, table, set, &Sink::silent())
}

/// Like [`certify`], reporting the longer blocks' progress to `progress`.
pub fn certify_showing(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    progress: &Sink,
) -> Certificate {
    let schedule = Schedule::new(problem);
    certify_with(problem, table, &schedule, set, progress)
}

/// Like [`certify_showing`], with a prepared schedule (for repeated use).
pub fn certify_with(
    problem: &Problem,
    table: &ExcitationTable,
    schedule: &Schedule,
    set: &LinkSet,
    progress: &Sink,
) -> Certificate {
    let gains = gain_checks(problem, set);
    let gains_ok = gains.iter().all(|g| g.ok);
    let mut cert = Certificate {
        rate: None,
        window: problem.settings.window,
        contraction: 1.0,
        transient_factor: None,
        envelope_from: problem.domain.h0,
        transient_factor_any_start: None,
        time_to_1pct: None,
        time_to_1pct_extrapolated: false,
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
        norm_bound: NormBoundKind::Exact,
        failure_probability: 0.0,
        blocks: Vec::new(),
        worst_windows: Vec::new(),
        worst_vector: Vec::new(),
        timing: CertTiming::default(),
    };
    let started = std::time::Instant::now();
    if !table.sources_excited(problem, set) {
        cert.reason = Some(
            "a source component is not jointly excited: the error along its weakest \
             direction never decays"
                .into(),
        );
        return cert;
    }
    let horizon = problem.domain.h1 - problem.domain.h0;
    let p = problem.settings.parameters;
    let arcs: Vec<(u32, u32, f64)> = problem
        .arcs(set)
        .into_iter()
        .map(|a| (a.from.0, a.to.0, a.weight))
        .collect();
    let components = weak_components(problem.n(), &arcs);
    let blocks: Vec<Block> = components
        .into_par_iter()
        .enumerate()
        .map(|(b, units)| {
            let mut local = vec![u32::MAX; problem.n()];
            for (k, &u) in units.iter().enumerate() {
                local[u as usize] = k as u32;
            }
            let sub_arcs: Vec<(u32, u32, f64)> = arcs
                .iter()
                .filter(|a| local[a.1 as usize] != u32::MAX)
                .map(|&(f, t, w)| (local[f as usize], local[t as usize], w))
                .collect();
            let sub = schedule.restrict(&units);
            let system = ErrorSystem::new(&sub, problem.settings.gains, sub_arcs);
            let seed = 0x5eed_cafe_u64 ^ (b as u64 + 1).wrapping_mul(0xA24B_AED4_963E_E407);
            certify_block(problem, &system, units, seed, progress)
        })
        .collect();
    // The slowest block: one without a rate first, else the smallest rate
    // (ties: the first).
    let slowest = (0..blocks.len())
        .min_by(|&a, &b| {
            let r = |k: usize| blocks[k].rate.unwrap_or(f64::NEG_INFINITY);
            r(a).total_cmp(&r(b)).then(a.cmp(&b))
        })
        .expect("a problem has units");
    let s = &blocks[slowest];
    cert.window = s.length;
    cert.contraction = s.log_rho.exp();
    cert.windows = s.windows;
    cert.evaluated_windows = s.evaluated;
    cert.worst_windows = s.worst_windows.clone();
    cert.worst_window_start = s.worst_windows.first().map(|w| w.start);
    cert.unconverged_windows = blocks.iter().map(|b| b.loose).sum();
    cert.lanczos_steps = blocks.iter().map(|b| b.passes).sum::<usize>().div_ceil(2);
    let tests: usize = blocks.iter().map(|b| b.tests).sum();
    if blocks.iter().any(|b| !b.exact) {
        cert.norm_bound = NormBoundKind::Randomized;
        cert.failure_probability = tests as f64 * bound::TEST_FAILURE;
    }
    cert.timing.windows = blocks.iter().map(|b| b.windows_time).sum();
    cert.timing.horizon = blocks.iter().map(|b| b.horizon_time).sum();
    let mut full = vec![0.0; problem.n() * p];
    let mut shares = vec![0.0; problem.n()];
    for (k, &u) in s.units.iter().enumerate() {
        let u = u as usize;
        if s.right.len() == s.units.len() * p {
            full[u * p..(u + 1) * p].copy_from_slice(&s.right[k * p..(k + 1) * p]);
        }
        if s.left.len() == s.units.len() * p {
            shares[u] = s.left[k * p..(k + 1) * p].iter().map(|x| x * x).sum();
        }
    }
    cert.worst_vector = full;
    let mut units: Vec<UnitShare> = problem
        .nodes
        .iter()
        .zip(&shares)
        .map(|(v, &share)| UnitShare {
            node: v.id.clone(),
            share,
        })
        .collect();
    units.sort_by(|a, b| b.share.total_cmp(&a.share).then(a.node.cmp(&b.node)));
    cert.units = units;
    cert.blocks = blocks
        .iter()
        .map(|b| BlockCertificate {
            units: b
                .units
                .iter()
                .map(|&u| problem.nodes[u as usize].id.clone())
                .collect(),
            rate: b.rate,
            window: b.length,
            contraction: b.log_rho.exp(),
            transient_factor: b.rate.map(|_| (b.log_m - b.log_rho).exp()),
            norm_bound: if b.exact {
                NormBoundKind::Exact
            } else {
                NormBoundKind::Randomized
            },
        })
        .collect();
    let log_h = blocks
        .iter()
        .map(|b| b.log_horizon)
        .fold(f64::NEG_INFINITY, f64::max);
    if log_h < 0.0 {
        cert.asymptotic_rate = Some(-log_h / horizon);
    }
    match s.rate {
        Some(rate) => {
            // Every block has a rate: the network's envelope takes the
            // smallest rate and the largest factor (each block's error
            // obeys its own envelope, and rates only get smaller).
            let c = blocks
                .iter()
                .map(|b| (b.log_m - b.log_rho).exp())
                .fold(0.0, f64::max);
            let c_any = blocks
                .iter()
                .map(|b| (2.0 * (b.log_m_any - b.log_rho)).exp())
                .fold(0.0, f64::max);
            cert.rate = Some(rate);
            cert.transient_factor = Some(c);
            cert.transient_factor_any_start = Some(c_any);
            let t = (100.0 * c).ln().max(0.0) / rate;
            cert.time_to_1pct = Some(t);
            cert.time_to_1pct_extrapolated = t > horizon;
        }
        None => {
            cert.reason = s.reason.clone().map(|r| {
                if blocks.len() > 1 {
                    let names: Vec<&str> = s
                        .units
                        .iter()
                        .map(|&u| problem.nodes[u as usize].id.as_str())
                        .collect();
                    format!("block of units {}: {r}", names.join(", "))
                } else {
                    r
                }
            });
        }
    }
    cert.timing.total = started.elapsed();
    cert
}
