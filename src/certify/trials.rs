//! Candidate certificate windows (multiples of the excitation window) and
//! the trials that bound their norms and chain them over the horizon
//! (docs/theory.md §6).

use super::transitions::Transitions;
use super::*;

/// Bounds for every window, in parallel over fixed chunks. The first
/// window of each chunk starts from `warm(window)` when given, else from a
/// fixed vector; window k of the batch draws its random starts from
/// `seeds[k]`. A window whose bound falls to `accept` (ln) stops early.
pub(super) fn window_norms(
    system: &ErrorSystem,
    dense: Option<&Transitions>,
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
                        Mode::Bound if let Some(b) = dense.and_then(|t| t.norm(w)) => b,
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
pub(super) fn chain_length(problem: &Problem, multiple: usize, windows: &[Window]) -> f64 {
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
pub(super) enum Mode {
    /// Upper bounds (the certificate).
    Bound,
    /// Lanczos estimates from below, to choose T_c cheaply on large
    /// blocks; never printed as certified.
    Estimate,
}

pub(super) struct Trial {
    /// Length of the chain windows, T_c (the rate's time unit).
    pub(super) length: f64,
    /// Upper bounds or estimates.
    pub(super) mode: Mode,
    /// Windows whose bound falls to this (ln) may stop early: a lower
    /// bound on ρ known beforehand.
    pub(super) accept_floor: f64,
    pub(super) log_rho: f64,
    pub(super) worst: usize,
    pub(super) windows: Vec<Window>,
    /// ln of an upper bound on ‖Φ(w)‖₂: the window's own bound where
    /// evaluated, else a product of half-length bounds (or +∞).
    pub(super) upper: Vec<f64>,
    /// Evaluated windows (the others cannot be the worst).
    pub(super) norms: Vec<Option<NormBound>>,
    /// Seed of this trial's random starts.
    pub(super) seed: u64,
}

impl Trial {
    pub(super) fn rate(&self) -> Option<f64> {
        (self.log_rho < 0.0).then(|| -self.log_rho / self.length)
    }

    /// Index of the window starting at `t`, if any.
    pub(super) fn index_at(&self, t: f64) -> Option<usize> {
        let tol = 1e-7 * self.length.max(1.0);
        let k = self.windows.partition_point(|w| w.start < t - tol);
        self.windows
            .get(k)
            .filter(|w| (w.start - t).abs() <= tol)
            .map(|_| k)
    }

    /// `upper` of the window starting at `t`, or +∞ when there is none.
    pub(super) fn upper_at(&self, t: f64) -> f64 {
        self.index_at(t).map_or(f64::INFINITY, |k| self.upper[k])
    }
}

/// Windows evaluated together once bounds can rule windows out (largest
/// bound first, so the rest can be ruled out early; two per core on a
/// two-core machine), and windows sampled from the first trial.
pub(super) const BATCH: usize = 4;

impl Trial {
    /// The certificate windows of `multiple` × T with their bounds: a time
    /// window of length 2L is the product of two windows of length L, so
    /// `‖Φ‖ ≤ ‖Φ_first‖·‖Φ_second‖` from the previous (half-length) trial
    /// (+∞ where a half is not bounded). Nothing is evaluated yet.
    pub(super) fn new(
        problem: &Problem,
        multiple: usize,
        prev: Option<&Trial>,
        seed: u64,
    ) -> Option<Trial> {
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
    pub(super) fn lower(&self) -> f64 {
        self.norms
            .iter()
            .flatten()
            .fold(f64::NEG_INFINITY, |m, n| m.max(n.log_lower))
    }

    /// Every window that could still be the worst (its bound is above the
    /// largest lower bound found) is evaluated.
    pub(super) fn complete(&self) -> bool {
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
    pub(super) fn evaluate(
        &mut self,
        system: &ErrorSystem,
        dense: Option<&Transitions>,
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
                dense,
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
    pub(super) fn passes(&self) -> usize {
        self.norms.iter().flatten().map(|w| w.passes).sum()
    }

    /// Randomized tail tests made in this trial.
    pub(super) fn tests(&self) -> usize {
        self.norms.iter().flatten().map(|w| w.tests).sum()
    }
}

/// ln of a bound on ‖Φ(s+τ, s)‖₂ over every piece of `pieces` and every τ
/// inside it (jumps at its end included when it says so): the smaller of
/// the product of 2-norm step bounds and √n times the product of step
/// bounds in the norm `max_i |e_i|` (since `|x|_max ≤ |x|₂ ≤ √n |x|_max`).
/// Factors below 1 are taken as 1, so the bound covers every partial piece.
pub(super) fn log_partial_bound(system: &ErrorSystem, pieces: &[Window]) -> f64 {
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
pub(super) fn fits(problem: &Problem, multiple: usize) -> bool {
    let horizon = problem.domain.h1 - problem.domain.h0;
    multiple == MULTIPLES[0] || problem.settings.window * multiple as f64 <= horizon / 2.0
}

/// The trials after the first (`first`, sampled when `lazy`), each window
/// length twice the previous while it fits in half the horizon, until one
/// does not improve the rate by 1 %. Returns the trials and the index of
/// the chosen one.
pub(super) fn longer_trials(
    problem: &Problem,
    system: &ErrorSystem,
    dense: Option<&Transitions>,
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
        t.evaluate(system, dense, trials.last(), false, f64::INFINITY);
        if first_pending {
            first_pending = false;
            let first = &mut trials[0];
            // `t` improves on the first trial by more than 1 % for sure
            // once one of the first trial's windows has a lower bound above
            // this (its rate is then below −ln-norm/length); 0 when `t` has
            // no rate (the first trial then has none either).
            let above = t.rate().map_or(0.0, |r| -r * first.length / 1.01);
            if first.lower() <= above {
                first.evaluate(system, dense, None, false, above);
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
        trials[0].evaluate(system, dense, None, false, f64::INFINITY);
        if trials[0].rate().is_some() {
            best = Some(0);
        }
    }
    (trials, best)
}
