//! Lanczos *estimates* of a window norm (lower estimates, never printed as
//! certified): used by the rate stage to screen candidate links before a
//! full certificate.

use super::lanczos::{combine, dot, normalise, orthogonalise, start_vector, top_ritz};
use super::propagate::{Direction, ErrorSystem, Step, Work};
use crate::signal::Window;

/// Lanczos stops when the Ritz residual is below this times the Ritz value.
const TOLERANCE: f64 = 1e-4;

/// Largest Krylov dimension.
const DIMENSION: usize = 30;

/// ln of the top Ritz value's square root for `ΦᵀΦ` over `steps`, from
/// `x`: a lower estimate of ln ‖Φ‖₂ (it can stop at a smaller singular
/// value when `x` is nearly orthogonal to the top one). On return `x`
/// holds the Ritz vector; `passes` counts the propagations.
pub(crate) fn lanczos_estimate(
    system: &ErrorSystem,
    steps: &[Step],
    x: &mut Vec<f64>,
    work: &mut Work,
    passes: &mut usize,
) -> f64 {
    let d = x.len();
    if normalise(x) == 0.0 {
        *x = start_vector(d);
    }
    let mut basis: Vec<Vec<f64>> = vec![x.clone()];
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    let mut log_ref = 0.0;
    let mut theta = 0.0;
    for j in 0..DIMENSION.min(d) {
        let mut w = basis[j].clone();
        let a = system.propagate(Direction::Forward, steps, &mut w, work);
        let b = system.propagate(Direction::Adjoint, steps, &mut w, work);
        *passes += 2;
        if j == 0 {
            log_ref = a + b;
        }
        let f = (a + b - log_ref).exp();
        w.iter_mut().for_each(|v| *v *= f);
        alpha.push(dot(&w, &basis[j]));
        orthogonalise(&mut w, &basis);
        let norm = normalise(&mut w);
        let (t, s) = top_ritz(&alpha, &beta);
        theta = t;
        let done = norm * s[s.len() - 1].abs() <= TOLERANCE * t || norm <= 1e-300;
        if done || j + 1 == DIMENSION.min(d) {
            *x = combine(&basis, &s, d);
            break;
        }
        beta.push(norm);
        basis.push(w);
    }
    if theta > 0.0 {
        0.5 * (theta.ln() + log_ref)
    } else {
        f64::NEG_INFINITY
    }
}

/// An *estimate* (from below) of ln ‖Φ(w)‖₂ of one window for the error
/// system, by Lanczos from `start` (or a fixed vector when it is empty or
/// of the wrong length). For screening only: certified norms come from
/// [`super::bound`].
pub fn window_log_norm(system: &ErrorSystem, window: &Window, start: &[f64]) -> f64 {
    let mut steps = Vec::new();
    system.schedule().steps(window, &mut steps);
    let mut x = if start.len() == system.dim() {
        start.to_vec()
    } else {
        start_vector(system.dim())
    };
    lanczos_estimate(system, &steps, &mut x, &mut Work::default(), &mut 0)
}
