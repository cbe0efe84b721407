//! Upper bounds on the window norm `‖Φ(w)‖₂` of one block of the error
//! system (docs/theory.md §6, "Window norms are upper bounds").
//!
//! Two methods, both giving a number that is at least the true norm:
//!
//! - **Exact** (blocks of at most [`EXACT_DIM`] unknowns): every column of
//!   Φ is propagated, and the largest eigenvalue of `ΦᵀΦ` is computed
//!   densely; a margin for the truncation and rounding of the propagation
//!   is added.
//! - **Deflated Lanczos with randomized tail tests** (larger blocks): a
//!   warm-started Lanczos run on `ΦᵀΦ` finds an orthonormal basis V of the
//!   slow directions; `‖Φ‖² ≤ ‖ΦV‖² + ‖Φ(I − VVᵀ)‖²` for any orthonormal V.
//!   The first term is computed exactly from the stored images ΦV; the
//!   second, ‖ΦP‖², is bounded first by Gaussian vectors through ΦP
//!   (Halko, Martinsson & Tropp 2011, Lemma 4.1) and, when that is too
//!   loose, as the largest eigenvalue of the deflated operator
//!   `PΦᵀΦP`, bounded from above by a Lanczos run from a uniformly random
//!   start in the complement with the Kuczyński–Woźniakowski tail bound:
//!   after k steps, the Ritz value θ satisfies `θ ≥ (1 − ε)λ_max` except
//!   with probability at most `1.648 √n' e^{−√ε (2k − 1)}`. exmesh fixes
//!   the failure probability per test and solves for ε. Random numbers
//!   come from a fixed seed, so results are deterministic; the probability
//!   is over the choice of seed.
//!
//! # References
//! Kuczyński & Woźniakowski, "Estimating the largest eigenvalue by the power
//! and Lanczos algorithms with a random start", SIAM J. Matrix Anal. Appl.
//! 13(4), 1992, Theorem 4.2; Golub & Van Loan, "Matrix Computations", 4th
//! ed., 2013, §10.1 (Lanczos with full reorthogonalisation).

pub use super::lanczos::top_ritz;
use super::lanczos::{combine, dot, normalise, orthogonalise, start_vector, top_eigen};
use super::propagate::{Direction, ErrorSystem, Step, Work};

/// Blocks with at most this many unknowns (units × p) get exact norms.
pub const EXACT_DIM: usize = 96;

/// Failure probability of one randomized tail test.
pub const TEST_FAILURE: f64 = 1e-12;

/// Lanczos stops the warm (estimating) run when the Ritz residual is below
/// this times the Ritz value.
const WARM_TOLERANCE: f64 = 1e-4;

/// Fewest steps of the warm run (its basis is the deflation space: the
/// more slow directions it holds, the shorter the tail test).
const WARM_MIN: usize = 20;

/// Most steps of the warm run.
const WARM_STEPS: usize = 30;

/// Most steps of one randomized tail test.
const TEST_STEPS: usize = 40;

/// Gaussian vectors of the cheap tail test: with α = 10, the bound
/// `‖B‖ ≤ α √(2/π) max_i |Bω_i|` fails with probability at most
/// α^{−r} = 10⁻¹² for r = 12 (Halko, Martinsson & Tropp, SIAM Review
/// 53(2), 2011, Lemma 4.1).
const GAUSS_SAMPLES: usize = 12;

/// α √(2/π) for α = 10.
const GAUSS_FACTOR: f64 = 10.0 * 0.797_884_560_802_865_4;

/// Most deflation rounds (each adds the tail test's basis to V and tests
/// again with a fresh random start).
const ROUNDS: usize = 3;

/// A window's bound is accepted once `upper² ≤ lower² (1 + SLACK)`.
const SLACK: f64 = 2e-3;

/// Allowance per propagation substep for truncation (1e−14) and rounding,
/// relative to the vector's norm.
pub const STEP_ERROR: f64 = 2e-13;

/// The bound of one window.
#[derive(Debug, Clone)]
pub struct NormBound {
    /// ln of an upper bound on ‖Φ(w)‖₂.
    pub log_upper: f64,
    /// ln of a lower bound on ‖Φ(w)‖₂ (a Rayleigh quotient).
    pub log_lower: f64,
    /// Estimate of the right singular vector of the largest singular value.
    pub right: Vec<f64>,
    /// Propagation passes spent (forward or adjoint, over the window).
    pub passes: usize,
    /// Randomized tail tests made (0 for an exact norm).
    pub tests: usize,
    /// The norm was computed exactly (up to the stated margin).
    pub exact: bool,
}

/// A deterministic generator of standard normal numbers (Box–Muller over
/// the project's splitmix generator).
struct Gaussian(crate::rng::Rng);

impl Gaussian {
    fn vector(&mut self, d: usize) -> Vec<f64> {
        (0..d)
            .map(|_| {
                let u = 1.0 - self.0.uniform();
                let v = self.0.uniform();
                (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
            })
            .collect()
    }
}

/// Relative allowance on a computed ‖Φ‖ for the truncation (below
/// 10⁻¹⁴ per substep, proven) and the rounding of the propagation over
/// `steps`: [`STEP_ERROR`] per substep, summed. The rounding part is an
/// allowance, not an interval-arithmetic proof (docs/theory.md §6).
pub fn propagation_margin(system: &ErrorSystem, steps: &[Step]) -> f64 {
    let substeps: usize = steps.iter().map(|s| system.substeps(s)).sum();
    substeps as f64 * STEP_ERROR
}

/// ‖Φ‖₂ computed exactly: every unit vector propagated, then the largest
/// eigenvalue of the d×d matrix `ΦᵀΦ`.
///
/// # Complexity
/// d forward passes and O(d³) for the eigenvalues.
pub fn exact_norm(system: &ErrorSystem, steps: &[Step], work: &mut Work) -> NormBound {
    let d = system.dim();
    let mut columns = Vec::with_capacity(d);
    let mut scales = Vec::with_capacity(d);
    for c in 0..d {
        let mut x = vec![0.0; d];
        x[c] = 1.0;
        let s = system.propagate(Direction::Forward, steps, &mut x, work);
        columns.push(x);
        scales.push(s);
    }
    let top = scales.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let phi = nalgebra::DMatrix::from_fn(d, d, |r, c| columns[c][r] * (scales[c] - top).exp());
    let (largest, right) = top_eigen(phi.transpose() * &phi);
    let value = largest.max(0.0).sqrt() * top.exp();
    let upper = value * (1.0 + propagation_margin(system, steps));
    NormBound {
        log_upper: upper.ln(),
        log_lower: value.ln(),
        right,
        passes: d,
        tests: 0,
        exact: true,
    }
}

/// A Lanczos run on `PΦᵀΦP` (P the projector onto the complement of the
/// orthonormal `against`), with full reorthogonalisation, keeping the
/// forward images of its basis.
struct Krylov {
    basis: Vec<Vec<f64>>,
    /// `Φ basis[j] = images[j] · exp(image_logs[j])`.
    images: Vec<Vec<f64>>,
    image_logs: Vec<f64>,
    /// Largest Ritz value is `theta · exp(2 log_ref)`.
    theta: f64,
    log_ref: f64,
    /// The Krylov space stopped growing (invariant subspace or whole
    /// complement).
    exhausted: bool,
}

impl Krylov {
    fn top(&self) -> f64 {
        if self.theta > 0.0 {
            self.theta.max(0.0) * (2.0 * self.log_ref).exp()
        } else {
            0.0
        }
    }
}

/// Runs Lanczos from `start` (projected and normalised) for at most `max`
/// steps; `stop(k, top_ritz_value, residual)` ends it early.
fn krylov(
    system: &ErrorSystem,
    steps: &[Step],
    start: Vec<f64>,
    against: &[Vec<f64>],
    max: usize,
    work: &mut Work,
    stop: &mut dyn FnMut(usize, f64, f64) -> bool,
) -> (Krylov, usize) {
    let d = system.dim();
    let room = d.saturating_sub(against.len());
    let mut out = Krylov {
        basis: Vec::new(),
        images: Vec::new(),
        image_logs: Vec::new(),
        theta: 0.0,
        log_ref: 0.0,
        exhausted: false,
    };
    let mut passes = 0;
    let mut v = start;
    orthogonalise(&mut v, against);
    if normalise(&mut v) == 0.0 || room == 0 {
        out.exhausted = true;
        return (out, passes);
    }
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    let mut first = true;
    loop {
        let mut image = v.clone();
        let a = system.propagate(Direction::Forward, steps, &mut image, work);
        let mut w = image.clone();
        let b = system.propagate(Direction::Adjoint, steps, &mut w, work);
        passes += 2;
        if first {
            out.log_ref = a + b;
            first = false;
        }
        let f = (a + b - out.log_ref).exp();
        w.iter_mut().for_each(|x| *x *= f);
        out.images.push(image);
        out.image_logs.push(a);
        out.basis.push(v.clone());
        orthogonalise(&mut w, against);
        alpha.push(dot(&w, &v));
        orthogonalise(&mut w, &out.basis);
        let norm = normalise(&mut w);
        let (t, s) = top_ritz(&alpha, &beta);
        out.theta = t;
        let k = out.basis.len();
        let residual = norm * s[s.len() - 1].abs();
        if k >= room || norm <= 1e-13 * t.abs().max(f64::MIN_POSITIVE) {
            out.exhausted = true;
            break;
        }
        if k >= max
            || stop(
                k,
                t * (2.0 * out.log_ref).exp(),
                residual * (2.0 * out.log_ref).exp(),
            )
        {
            break;
        }
        beta.push(norm);
        v = w;
    }
    (out, passes)
}

/// ε of the Kuczyński–Woźniakowski bound after a Krylov space of dimension
/// `k` on an operator of size `n`: the Ritz value is below `(1 − ε)λ_max`
/// with probability at most [`TEST_FAILURE`]. The bound is taken with k − 1
/// products (the space of dimension k uses k − 1 products before the last
/// one), which is conservative. `None` while ε ≥ 1.
pub fn tail_epsilon(k: usize, n: usize) -> Option<f64> {
    if k < 2 {
        return None;
    }
    let m = (k - 1) as f64;
    let e = ((1.648 * (n as f64).sqrt() / TEST_FAILURE).ln() / (2.0 * m - 1.0)).powi(2);
    (e < 1.0).then_some(e)
}

/// ‖ΦV‖² for the orthonormal basis V with images ΦV, and the top right
/// singular vector estimate `V y`.
fn projected_norm(basis: &[Vec<f64>], images: &[Vec<f64>], logs: &[f64]) -> (f64, Vec<f64>) {
    let k = basis.len();
    if k == 0 {
        return (0.0, Vec::new());
    }
    let top = logs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let g = nalgebra::DMatrix::from_fn(k, k, |r, c| {
        dot(&images[r], &images[c]) * (logs[r] + logs[c] - 2.0 * top).exp()
    });
    let (largest, y) = top_eigen(g);
    let x = combine(basis, &y, basis[0].len());
    (largest.max(0.0) * (2.0 * top).exp(), x)
}

/// An upper bound on ‖Φ‖₂ for a block too large for [`exact_norm`]: warm
/// Lanczos from `warm`, then randomized tail tests on the deflated operator
/// with random starts from `seed`. A bound whose log is at most `accept`
/// is taken as soon as it is reached (the window cannot be the worst).
pub fn randomized_norm(
    system: &ErrorSystem,
    steps: &[Step],
    warm: &[f64],
    seed: u64,
    accept: f64,
    work: &mut Work,
) -> NormBound {
    let d = system.dim();
    let mut passes = 0;
    let mut tests = 0;
    let (first, p) = krylov(
        system,
        steps,
        warm.to_vec(),
        &[],
        WARM_STEPS,
        work,
        &mut |k, t, r| k >= WARM_MIN && r <= WARM_TOLERANCE * t,
    );
    passes += p;
    let (mut basis, mut images, mut logs, exhausted) =
        (first.basis, first.images, first.image_logs, first.exhausted);
    let mut gauss = Gaussian(crate::rng::Rng(seed));
    let mut upper_sq = f64::INFINITY;
    let (mut lower_sq, mut right) = projected_norm(&basis, &images, &logs);
    if exhausted && basis.len() >= d {
        upper_sq = lower_sq;
    }
    // A cheap test first: Gaussian vectors through the deflated operator
    // (forward passes only). It settles the window when the deflated rest
    // is small, which it usually is after the warm run.
    if !upper_sq.is_finite() {
        let mut largest = 0.0f64;
        for _ in 0..GAUSS_SAMPLES {
            let mut x = gauss.vector(d);
            orthogonalise(&mut x, &basis);
            let s = system.propagate(Direction::Forward, steps, &mut x, work);
            largest = largest.max(dot(&x, &x) * (2.0 * s).exp());
        }
        passes += GAUSS_SAMPLES;
        tests += 1;
        let bound = lower_sq + GAUSS_FACTOR * GAUSS_FACTOR * largest;
        if bound <= lower_sq * (1.0 + SLACK) || bound <= (2.0 * accept).exp() {
            upper_sq = bound;
        }
    }
    for _ in 0..ROUNDS {
        if upper_sq.is_finite() && upper_sq <= lower_sq * (1.0 + SLACK) {
            break;
        }
        let room = d - basis.len();
        let start = gauss.vector(d);
        tests += 1;
        let target = lower_sq * (1.0 + SLACK);
        let accept_sq = (2.0 * accept).exp();
        let lower_now = lower_sq;
        let (tail, p) = krylov(
            system,
            steps,
            start,
            &basis,
            TEST_STEPS,
            work,
            &mut |k, t, _| {
                tail_epsilon(k, room).is_some_and(|e| {
                    let ub = lower_now + t.max(0.0) / (1.0 - e);
                    ub <= target || ub <= accept_sq
                })
            },
        );
        passes += p;
        let k = tail.basis.len();
        let tail_top = tail.top();
        let tail_upper = if tail.exhausted && basis.len() + k >= d {
            Some(tail_top)
        } else {
            tail_epsilon(k, room).map(|e| tail_top / (1.0 - e))
        };
        if let Some(t) = tail_upper {
            upper_sq = upper_sq.min(lower_sq + t);
        }
        // Deflate what the test found, then test again with a fresh start.
        basis.extend(tail.basis);
        images.extend(tail.images);
        logs.extend(tail.image_logs);
        let (l, r) = projected_norm(&basis, &images, &logs);
        if l >= lower_sq {
            lower_sq = l;
            right = r;
        }
        if upper_sq <= (2.0 * accept).exp() {
            break;
        }
        if basis.len() >= d {
            upper_sq = upper_sq.min(lower_sq);
        }
    }
    if !upper_sq.is_finite() && basis.len() < d {
        // Every tail test broke down early (a nearly invariant subspace):
        // compute the norm exactly instead.
        let mut e = exact_norm(system, steps, work);
        e.passes += passes;
        return e;
    }
    let margin = propagation_margin(system, steps);
    let upper = upper_sq.sqrt() * (1.0 + margin);
    NormBound {
        log_upper: upper.ln(),
        log_lower: 0.5 * lower_sq.ln(),
        right,
        passes,
        tests,
        exact: tests == 0,
    }
}

/// An upper bound on ‖Φ‖₂ over `steps`: exact for small blocks, else
/// randomized (see the module documentation).
pub fn window_bound(
    system: &ErrorSystem,
    steps: &[Step],
    warm: &[f64],
    seed: u64,
    accept: f64,
    work: &mut Work,
) -> NormBound {
    let d = system.dim();
    if d <= EXACT_DIM {
        exact_norm(system, steps, work)
    } else if warm.len() == d && warm.iter().any(|&x| x != 0.0) {
        randomized_norm(system, steps, warm, seed, accept, work)
    } else {
        let start = start_vector(d);
        randomized_norm(system, steps, &start, seed, accept, work)
    }
}
