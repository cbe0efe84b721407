//! The small dense pieces shared by the Lanczos runs of the norm bound
//! (`bound`) and the norm estimate (`estimate`): vector operations, a
//! deterministic start vector and the top eigenpair of a small symmetric
//! matrix.
//!
//! # References
//! Golub & Van Loan, "Matrix Computations", 4th ed., 2013, §10.1.

/// A deterministic starting vector with no special structure.
pub(crate) fn start_vector(d: usize) -> Vec<f64> {
    let mut rng = crate::rng::Rng(0x5eed_cafe);
    let mut x: Vec<f64> = (0..d).map(|_| rng.uniform() - 0.5).collect();
    normalise(&mut x);
    x
}

pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

pub(crate) fn normalise(x: &mut [f64]) -> f64 {
    let n = dot(x, x).sqrt();
    if n > 0.0 {
        x.iter_mut().for_each(|v| *v /= n);
    }
    n
}

/// `Σ_i coeffs[i]·basis[i]` (vectors of length d), normalised.
pub(crate) fn combine(basis: &[Vec<f64>], coeffs: &[f64], d: usize) -> Vec<f64> {
    let mut x = vec![0.0; d];
    for (q, &c) in basis.iter().zip(coeffs) {
        x.iter_mut().zip(q).for_each(|(p, r)| *p += c * r);
    }
    normalise(&mut x);
    x
}

/// Subtracts the components along the orthonormal `basis` (twice).
pub(crate) fn orthogonalise(x: &mut [f64], basis: &[Vec<f64>]) {
    for _ in 0..2 {
        for q in basis {
            let c = dot(x, q);
            x.iter_mut().zip(q).for_each(|(p, r)| *p -= c * r);
        }
    }
}

/// Largest eigenvalue of the symmetric tridiagonal matrix (diagonal `a`,
/// off-diagonal `b`) and its eigenvector.
pub fn top_ritz(a: &[f64], b: &[f64]) -> (f64, Vec<f64>) {
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
    top_eigen(t)
}

/// Largest eigenvalue of a symmetric matrix and its eigenvector.
pub(crate) fn top_eigen(m: nalgebra::DMatrix<f64>) -> (f64, Vec<f64>) {
    let k = m.nrows();
    let e = nalgebra::SymmetricEigen::new(m);
    let best = (0..k)
        .max_by(|&x, &y| e.eigenvalues[x].total_cmp(&e.eigenvalues[y]))
        .unwrap_or(0);
    (
        e.eigenvalues[best],
        e.eigenvectors.column(best).iter().copied().collect(),
    )
}
