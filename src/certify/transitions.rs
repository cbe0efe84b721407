//! Dense transition matrices of a small block, swept once from evenly
//! spaced boundaries, so that each certificate window's Φ is a product of
//! at most three matrices (docs/theory.md §6, "Window products").
//!
//! A block's certificate windows overlap heavily (a 30 s window every 2 s),
//! so propagating every column of every window repeats the same flows many
//! times. For windows of length at most L, boundaries `b_j = h0 + jL` are
//! laid over the horizon. From each boundary, d forward passes give
//! `Φ(t, b_j)` for every window end t in `(b_j, b_j + L]`, and d adjoint
//! passes give `Φ(b_j, t)` for every window start t in `[b_j − L, b_j)`
//! (row by row): 2d passes over the horizon in all. A window `[a, c)` that
//! crosses a boundary b is then `Φ(c, b)·Φ(b, a)`, times the jumps at c
//! when the window closes with them. (The error system is linear and the
//! steps of `[a, c)` are those of `[a, b)` followed by those of `[b, c)`:
//! jumps at b belong to the second piece, and a flow cut at b is the
//! product of its two parts, the regressor being constant on a grid
//! interval.) Windows that cross no boundary fall back to column
//! propagation.
//!
//! The bound of a window of factors Â_1…Â_m (m ≤ 3, computed matrices) is
//! `‖fl(Â_m⋯Â_1)‖₂ + E` with
//! `E = [Π(F_k + δ_k) − Π F_k] + [(1 + γ_d)^{m−1} − 1]·Π F_k`, where
//! `F_k = ‖Â_k‖_F ≥ ‖|Â_k|‖₂`, δ_k is factor k's propagation allowance (its
//! substeps times [`STEP_ERROR`] times F_k, the same per-substep allowance
//! as column propagation, for each column or row) and γ_d = d·u/(1 − d·u).
//! The second term bounds the rounding of the products:
//! |fl(AB) − AB| ≤ γ_d |A||B| elementwise (Higham, "Accuracy and Stability
//! of Numerical Algorithms", 2nd ed., SIAM 2002, §3.5), applied m − 1 times
//! by induction. A window whose allowance exceeds [`MAX_ALLOWANCE`] of its
//! norm falls back to column propagation.

use super::bound::{EXACT_DIM, NormBound, STEP_ERROR};
use super::lanczos::top_eigen;
use super::propagate::{Direction, ErrorSystem, Step, Work};
use crate::signal::Window;
use nalgebra::DMatrix;
use rayon::prelude::*;

/// Largest allowance E accepted, relative to the window's computed norm.
pub(super) const MAX_ALLOWANCE: f64 = 1e-6;

/// Most bytes of stored matrices per sweep (else windows are propagated).
const MAX_BYTES: usize = 256 << 20;

/// Unit roundoff of `f64`.
const U: f64 = f64::EPSILON / 2.0;

/// γ_d of Higham 2002, §3.1.
fn gamma(d: usize) -> f64 {
    d as f64 * U / (1.0 - d as f64 * U)
}

/// One computed factor: the transition matrix is `m·exp(log)`.
struct Factor {
    m: DMatrix<f64>,
    log: f64,
    /// ‖m‖_F.
    fro: f64,
    /// Propagation substeps behind the factor.
    substeps: usize,
}

impl Factor {
    /// From d vectors with their own ln scales, as columns (forward) or
    /// rows (adjoint).
    fn of_vectors(vectors: &[Vec<f64>], logs: &[f64], rows: bool, substeps: usize) -> Factor {
        let d = vectors.len();
        let top = logs
            .iter()
            .zip(vectors)
            .filter(|(_, v)| v.iter().any(|&x| x != 0.0))
            .map(|(&l, _)| l)
            .fold(f64::NEG_INFINITY, f64::max);
        let top = if top.is_finite() { top } else { 0.0 };
        let at = |k: usize, i: usize| vectors[k][i] * (logs[k] - top).exp();
        let m = if rows {
            DMatrix::from_fn(d, d, &at)
        } else {
            DMatrix::from_fn(d, d, |r, c| at(c, r))
        };
        Factor {
            fro: m.norm(),
            m,
            log: top,
            substeps,
        }
    }

    /// The product of `steps` (in time order), column by column.
    fn of_steps(system: &ErrorSystem, steps: &[Step]) -> Factor {
        let d = system.dim();
        let mut work = Work::default();
        let mut columns = Vec::with_capacity(d);
        let mut logs = Vec::with_capacity(d);
        for c in 0..d {
            let mut x = vec![0.0; d];
            x[c] = 1.0;
            logs.push(system.propagate(Direction::Forward, steps, &mut x, &mut work));
            columns.push(x);
        }
        let substeps = steps.iter().map(|s| system.substeps(s)).sum();
        Factor::of_vectors(&columns, &logs, false, substeps)
    }
}

/// Factors at points (index into the sweep's points).
type Snapshots = Vec<(usize, Factor)>;

/// The matrices of one window length L.
struct Sweep {
    length: f64,
    /// Sorted window ends and boundaries.
    points: Vec<f64>,
    /// Indices (into `points`) of the boundaries h0 + jL.
    boundaries: Vec<usize>,
    /// For point k: Φ(t_k, b) from the last boundary b < t_k.
    forward: Vec<Option<Factor>>,
    /// For point k: Φ(b, t_k) to the first boundary b > t_k.
    backward: Vec<Option<Factor>>,
    /// Jumps at point k, for windows that close with them: `None` where
    /// not computed, `Some(None)` where there is no jump.
    closing: Vec<Option<Option<Factor>>>,
}

/// The swept matrices of one block, one sweep per window length.
pub(super) struct Transitions {
    sweeps: Vec<Sweep>,
    /// Forward and adjoint passes spent.
    pub(super) passes: usize,
}

impl Transitions {
    /// Sweeps for the window lengths of `groups` (each a list of windows
    /// of length at most its L), on blocks small enough for dense
    /// matrices; `None` when the block is too large.
    pub(super) fn build(
        system: &ErrorSystem,
        h0: f64,
        h1: f64,
        groups: &[(f64, Vec<Window>)],
    ) -> Option<Transitions> {
        let d = system.dim();
        if d > EXACT_DIM {
            return None;
        }
        let mut sweeps = Vec::new();
        let mut passes = 0;
        for (length, windows) in groups {
            if let Some((s, p)) = Sweep::build(system, h0, h1, *length, windows) {
                sweeps.push(s);
                passes += p;
            }
        }
        (!sweeps.is_empty()).then_some(Transitions { sweeps, passes })
    }

    /// Φ(w) as a product: the matrix, ln of its scale, and the allowance E
    /// in the same scale. `None` when no sweep covers w.
    fn product(&self, w: &Window) -> Option<(DMatrix<f64>, f64, f64)> {
        self.sweeps.iter().find_map(|s| s.product(w))
    }

    /// An upper bound on ‖Φ(w)‖₂ from products, or `None` when no sweep
    /// covers w or the allowance is too large.
    pub(super) fn norm(&self, w: &Window) -> Option<NormBound> {
        let (p, log, e) = self.product(w)?;
        let d = p.nrows();
        let fro2 = p.norm_squared();
        let (largest, right) = top_eigen(p.transpose() * &p);
        // Forming PᵀP (γ_d|Pᵀ||P|) and the symmetric eigensolver (backward
        // stable: Golub & Van Loan, "Matrix Computations", 4th ed., 2013,
        // §8.3) each err by a few d·u·‖P‖²_F at most.
        let eig = (gamma(d) + 16.0 * d as f64 * U) * fro2;
        let value = largest.max(0.0).sqrt();
        if value.is_nan() || value <= 0.0 || e > MAX_ALLOWANCE * value {
            return None;
        }
        let upper = (largest.max(0.0) + eig).sqrt() + e;
        let lower = (largest - eig).max(0.0).sqrt() - e;
        Some(NormBound {
            log_upper: upper.ln() + log,
            log_lower: if lower > 0.0 {
                lower.ln() + log
            } else {
                f64::NEG_INFINITY
            },
            right,
            passes: 0,
            tests: 0,
            exact: true,
        })
    }

    /// ln ‖Φ‖₂ over the whole horizon (jumps at its end included) as
    /// computed from the first sweep's block matrices, without allowance
    /// (an estimate); `None` when rounding may have swamped it.
    pub(super) fn horizon_estimate(&self) -> Option<f64> {
        let s = self.sweeps.first()?;
        let mut factors: Vec<&Factor> = s
            .boundaries
            .iter()
            .skip(1)
            .map(|&b| s.forward[b].as_ref())
            .collect::<Option<_>>()?;
        let last = *s.boundaries.last()?;
        if last + 1 < s.points.len() {
            factors.push(s.forward[s.points.len() - 1].as_ref()?);
        }
        if let Some(Some(j)) = &s.closing[s.points.len() - 1] {
            factors.push(j);
        }
        let (p, log, e) = multiply(&factors)?;
        let (largest, _) = top_eigen(p.transpose() * &p);
        let value = largest.max(0.0).sqrt();
        (value > 0.0 && e <= 1e-3 * value).then(|| value.ln() + log)
    }
}

/// `factors` (in time order) multiplied: the matrix, ln of its scale and
/// the allowance E in the same scale.
fn multiply(factors: &[&Factor]) -> Option<(DMatrix<f64>, f64, f64)> {
    let (first, rest) = factors.split_first()?;
    let d = first.m.nrows();
    let mut p = first.m.clone();
    let mut log = first.log;
    for f in rest {
        p = &f.m * &p;
        log += f.log;
        let top = p.amax();
        if top > 0.0 && top.is_finite() {
            // Rescale by a power of two (exact).
            let e = top.log2().floor() as i32;
            p *= 2f64.powi(-e);
            log += f64::from(e) * std::f64::consts::LN_2;
        }
    }
    let m = factors.len() as f64;
    if factors.iter().any(|f| f.fro <= 0.0) {
        return Some((p, log, 0.0));
    }
    let log_f: f64 = factors.iter().map(|f| f.fro.ln() + f.log).sum();
    let grow: f64 = factors
        .iter()
        .map(|f| (f.substeps as f64 * STEP_ERROR).ln_1p())
        .sum();
    let e = grow.exp_m1() + ((m - 1.0) * gamma(d).ln_1p()).exp_m1();
    Some((p, log, e * (log_f - log).exp()))
}

impl Sweep {
    /// The sweep for windows of length at most `length`, and the passes it
    /// took; `None` when its matrices would take too much memory.
    fn build(
        system: &ErrorSystem,
        h0: f64,
        h1: f64,
        length: f64,
        windows: &[Window],
    ) -> Option<(Sweep, usize)> {
        let d = system.dim();
        if length.is_nan() || length <= 0.0 || windows.is_empty() {
            return None;
        }
        let mut points: Vec<f64> = windows.iter().flat_map(|w| [w.start, w.end]).collect();
        let mut j = 0;
        loop {
            let b = h0 + j as f64 * length;
            if b > h1 {
                break;
            }
            points.push(b);
            j += 1;
        }
        points.push(h1);
        points.sort_by(f64::total_cmp);
        points.dedup();
        if 3 * points.len() * d * d * 8 > MAX_BYTES {
            return None;
        }
        let boundaries: Vec<usize> = (0..j)
            .filter_map(|k| {
                let b = h0 + k as f64 * length;
                points.binary_search_by(|p| p.total_cmp(&b)).ok()
            })
            .collect();
        let schedule = system.schedule();
        let mut steps = Vec::new();
        let pieces: Vec<Vec<Step>> = points
            .windows(2)
            .map(|p| {
                schedule.steps(
                    &Window {
                        start: p[0],
                        end: p[1],
                        jumps_through_end: false,
                    },
                    &mut steps,
                );
                steps.clone()
            })
            .collect();
        let substeps: Vec<usize> = pieces
            .iter()
            .map(|s| s.iter().map(|x| system.substeps(x)).sum())
            .collect();
        let n = points.len();
        // Forward from each boundary to the next one (or h1); adjoint from
        // each boundary back to the previous one.
        let runs: Vec<(Snapshots, Snapshots)> = boundaries
            .par_iter()
            .enumerate()
            .map(|(j, &b)| {
                let next = boundaries.get(j + 1).copied().unwrap_or(n - 1);
                let prev = j.checked_sub(1).map(|i| boundaries[i]);
                let fwd = sweep(system, &pieces, &substeps, b, next, Direction::Forward);
                let bwd = prev.map_or_else(Vec::new, |p| {
                    sweep(system, &pieces, &substeps, b, p, Direction::Adjoint)
                });
                (fwd, bwd)
            })
            .collect();
        let mut forward: Vec<Option<Factor>> = (0..n).map(|_| None).collect();
        let mut backward: Vec<Option<Factor>> = (0..n).map(|_| None).collect();
        let mut passes = 0;
        for (fwd, bwd) in runs {
            passes += if fwd.is_empty() { 0 } else { d } + if bwd.is_empty() { 0 } else { d };
            for (k, f) in fwd {
                forward[k] = Some(f);
            }
            for (k, f) in bwd {
                backward[k] = Some(f);
            }
        }
        let mut closing_at = vec![false; n];
        for w in windows.iter().filter(|w| w.jumps_through_end) {
            if let Ok(k) = points.binary_search_by(|p| p.total_cmp(&w.end)) {
                closing_at[k] = true;
            }
        }
        closing_at[n - 1] = true;
        let closing: Vec<Option<Option<Factor>>> = points
            .par_iter()
            .zip(&closing_at)
            .map(|(&t, &needed)| {
                if !needed {
                    return None;
                }
                let mut steps = Vec::new();
                schedule.steps(
                    &Window {
                        start: t,
                        end: t,
                        jumps_through_end: true,
                    },
                    &mut steps,
                );
                Some((!steps.is_empty()).then(|| Factor::of_steps(system, &steps)))
            })
            .collect();
        passes += d * closing.iter().flatten().flatten().count();
        Some((
            Sweep {
                length,
                points,
                boundaries,
                forward,
                backward,
                closing,
            },
            passes,
        ))
    }

    fn index(&self, t: f64) -> Option<usize> {
        self.points.binary_search_by(|p| p.total_cmp(&t)).ok()
    }

    /// Φ(w) from this sweep, when w's ends are points and it crosses (or
    /// starts at) a boundary within reach.
    fn product(&self, w: &Window) -> Option<(DMatrix<f64>, f64, f64)> {
        if w.end - w.start > self.length * (1.0 + 1e-12) {
            return None;
        }
        let (a, c) = (self.index(w.start)?, self.index(w.end)?);
        // The first boundary at or after a.
        let b = self.boundaries[self.boundaries.partition_point(|&b| b < a)..]
            .first()
            .copied()?;
        if b > c {
            return None;
        }
        // Φ(c, b) is stored from the last boundary before c: it must be b.
        if c > b && self.boundaries[self.boundaries.partition_point(|&x| x < c) - 1] != b {
            return None;
        }
        let mut factors: Vec<&Factor> = Vec::with_capacity(3);
        if a < b {
            factors.push(self.backward[a].as_ref()?);
        }
        if c > b {
            factors.push(self.forward[c].as_ref()?);
        }
        if w.jumps_through_end {
            // Jumps at c, when this sweep computed them.
            if let Some(j) = self.closing[c].as_ref()? {
                factors.push(j);
            }
        }
        if factors.is_empty() {
            let d = self.forward.iter().flatten().next()?.m.nrows();
            return Some((DMatrix::identity(d, d), 0.0, 0.0));
        }
        multiply(&factors)
    }
}

/// d passes from point `from` to point `to` (forward when `to > from`,
/// adjoint otherwise) through the segments `pieces`, with a snapshot at
/// every point passed: Φ(t_k, t_from) forward, Φ(t_from, t_k) adjoint.
fn sweep(
    system: &ErrorSystem,
    pieces: &[Vec<Step>],
    substeps: &[usize],
    from: usize,
    to: usize,
    dir: Direction,
) -> Snapshots {
    let d = system.dim();
    let mut work = Work::default();
    let mut vectors: Vec<Vec<f64>> = (0..d)
        .map(|c| (0..d).map(|r| if r == c { 1.0 } else { 0.0 }).collect())
        .collect();
    let mut logs = vec![0.0; d];
    let mut out = Vec::new();
    let mut count = 0;
    let mut k = from;
    while k != to {
        // The segment between k and the next point towards `to`.
        let (segment, next) = if to > k { (k, k + 1) } else { (k - 1, k - 1) };
        for (v, l) in vectors.iter_mut().zip(logs.iter_mut()) {
            *l += system.propagate(dir, &pieces[segment], v, &mut work);
        }
        count += substeps[segment];
        out.push((
            next,
            Factor::of_vectors(&vectors, &logs, dir == Direction::Adjoint, count),
        ));
        k = next;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::certify::bound::exact_norm;
    use crate::certify::propagate::Schedule;
    use crate::certify::trials::{certificate_windows, chain_length};

    /// Products of segment matrices agree with column propagation of each
    /// whole window (an independent computation: every window's Φ built
    /// from its own steps), and the bound is above it.
    #[test]
    fn products_match_whole_window_propagation() {
        use crate::signal::WindowKind;
        // Jumps every 10 s fall on the window ends (stride 10 s), and the
        // hybrid windows end on jumps.
        for (n, seed, kind) in [
            (4usize, 3u64, WindowKind::Time),
            (6, 11, WindowKind::Time),
            (3, 5, WindowKind::Hybrid),
            (5, 7, WindowKind::Hybrid),
        ] {
            let mut problem = crate::synth::bench_problem_sized(n, seed, 0.1, 0.5);
            problem.settings.stride = Some(10.0);
            problem.settings.window_kind = kind;
            let problem = crate::problem::Problem::from_parts(
                problem.path.clone(),
                problem.settings.clone(),
                problem.nodes.clone(),
                problem.links.clone(),
            )
            .unwrap();
            let schedule = Schedule::new(&problem);
            let system = ErrorSystem::of_links(&schedule, &problem, &problem.all_links());
            let groups: Vec<(f64, Vec<Window>)> = [1usize, 2]
                .iter()
                .map(|&m| {
                    let w = certificate_windows(&problem, m);
                    (chain_length(&problem, m, &w), w)
                })
                .collect();
            let (h0, h1) = (problem.domain.h0, problem.domain.h1);
            let t = Transitions::build(&system, h0, h1, &groups).expect("small block");
            let windows: Vec<Window> = groups.iter().flat_map(|g| g.1.clone()).collect();
            let mut steps = Vec::new();
            let mut covered = 0;
            for w in &windows {
                schedule.steps(w, &mut steps);
                let direct = exact_norm(&system, &steps, &mut Work::default());
                let Some(b) = t.norm(w) else {
                    // Only windows inside one block may be left to column
                    // propagation.
                    assert_eq!(kind, WindowKind::Hybrid, "{w:?}");
                    continue;
                };
                covered += 1;
                assert!(
                    b.log_upper >= direct.log_lower - 1e-10,
                    "{w:?}: {} < {}",
                    b.log_upper,
                    direct.log_lower
                );
                assert!(
                    (b.log_upper - direct.log_upper).abs() < 1e-8,
                    "{w:?}: {} vs {}",
                    b.log_upper,
                    direct.log_upper
                );
            }
            assert!(
                covered * 2 > windows.len(),
                "{covered} of {}",
                windows.len()
            );
        }
    }
}
