//! Exact propagation of the stacked error system over the merged hybrid time
//! domain (docs/theory.md §1–2), forward and adjoint, applied to vectors only.
//!
//! Flows: `ė = A e` with `A = −(Γ + κ L⊗I_p)` held constant on each interval
//! of the merged grid; `exp(hA) x` by a truncated Taylor series on substeps
//! with `a = h‖A‖ ≤ 1` (‖A‖ bounded from above). The series stops after
//! term m once a bound on the remainder is below 1e−14 relative to `|x|`:
//! a priori `a^{m+1}/(m+1)! · e^a` (the most terms ever taken), or a
//! posteriori `|T_m| r/(1−r)` with `r = a/(m+1)`, since the later terms are
//! `T_{m+j} = (hA)ʲ T_m · m!/(m+j)!`. Vectors near the slow modes (those
//! that matter for a certificate) have `|hA x| ≪ a|x|`, and the a
//! posteriori test stops after about 7 terms where the a priori count is 12
//! (measured on the certificate benchmark).
//! Jumps: `e⁺ = (I − J − δ L⊗I_p) e` with the pre-jump regressor, virtual
//! jumps (no excitation term) for units without a jump of their own.
//!
//! # References
//! Moler & Van Loan, "Nineteen dubious ways to compute the exponential of a
//! matrix, twenty-five years later", SIAM Review 45(1), 2003, §3 (Taylor
//! series with scaling).

pub use super::schedule::{BY_INTERVAL_LIMIT, Schedule, Step};
use crate::problem::{Gains, Problem};

/// Largest remainder allowed for one truncated Taylor substep, relative to
/// the vector it is applied to.
pub const TAYLOR_TOLERANCE: f64 = 1e-14;

/// Most Taylor substeps, beyond one per grid interval, that one pass over
/// the horizon may take (see [`ErrorSystem::too_stiff`]). A certificate
/// makes hundreds of passes over windows: at 2.4e6 substeps per pass the
/// 8-unit demo's check took 100 s on one core, so the cap is 1e6. The
/// demos need about 1 % of it (2,874 to 9,574 substeps per pass over
/// 2,413 to 2,875 grid intervals).
pub const SUBSTEP_BUDGET: f64 = 1e6;

/// First Taylor term whose norm is computed for the a posteriori stop.
const NORMS_FROM: usize = 4;

/// The error system of one link set: the schedule plus the weighted
/// in-degree Laplacian and the gains.
#[derive(Debug, Clone)]
pub struct ErrorSystem<'a> {
    schedule: &'a Schedule<'a>,
    gains: Gains,
    /// Arcs `(from, to, weight)`: `to` listens to `from`.
    arcs: Vec<(u32, u32, f64)>,
    /// Per unit, the units it listens to with the weights (rows of L), as
    /// offsets into `listens`.
    listen_start: Vec<usize>,
    listens: Vec<(u32, f64)>,
    /// Per unit, the units listening to it with the weights (rows of Lᵀ).
    talk_start: Vec<usize>,
    talks: Vec<(u32, f64)>,
    /// Weighted in-degree of each unit.
    in_degree: Vec<f64>,
    /// `listens` and `talks` with the weights times κ (flow generator).
    flow_listens: Vec<(u32, f64)>,
    flow_talks: Vec<(u32, f64)>,
    /// −κ times the weighted in-degree of each unit.
    flow_diagonal: Vec<f64>,
    /// Bound on the logarithmic norm μ₂(A) of every flow generator:
    /// κ·max(0, −λ_min(sym L)), with λ_min(sym L) ≥ min_i (d_in − d_out)/2 by
    /// Gershgorin.
    flow_growth: f64,
    /// Upper bound on ‖A‖₂ on each grid interval.
    generator_norms: Vec<f64>,
}

/// The inputs of one Taylor term (see `ErrorSystem::taylor_term`).
#[derive(Clone, Copy)]
struct TermInput<'x> {
    dir: Direction,
    /// Regressors of the grid interval, `[i][p]`.
    psi: &'x [f64],
    /// The factor h/m of this term.
    f: f64,
    /// The previous term.
    term: &'x [f64],
    /// Constant drive (first term of a driven step only).
    drive: Option<&'x [f64]>,
}

/// Which operator to apply: the error system or its transpose.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    /// `Φ x`.
    Forward,
    /// `Φᵀ x`.
    Adjoint,
}

/// Reusable work vectors for propagation.
#[derive(Debug, Clone, Default)]
pub struct Work {
    term: Vec<f64>,
    next: Vec<f64>,
    sum: Vec<f64>,
    psi: Vec<f64>,
}

impl<'a> ErrorSystem<'a> {
    /// The error system for the arcs `(from, to, weight)`.
    pub fn new(schedule: &'a Schedule<'a>, gains: Gains, arcs: Vec<(u32, u32, f64)>) -> Self {
        let n = schedule.n;
        let mut in_degree = vec![0.0; n];
        let mut out_degree = vec![0.0; n];
        for &(from, to, w) in &arcs {
            in_degree[to as usize] += w;
            out_degree[from as usize] += w;
        }
        // ‖A‖₂ ≤ √(‖B‖₁ ‖B‖_∞) for the matrix B of block norms of A:
        // row i sums γ_c|ψ_i|² + 2κ d_in, column i sums γ_c|ψ_i|² + κ(d_in + d_out).
        let (g, kappa) = (gains.flow_gain, gains.flow_coupling);
        let p = schedule.p;
        let generator_norms: Vec<f64> = (0..schedule.grid.len().saturating_sub(1))
            .map(|k| {
                let (mut row, mut col) = (0.0f64, 0.0f64);
                for i in 0..n {
                    let r = schedule.rows[k * n + i] as usize;
                    let sq: f64 = schedule.psi[i][r * p..(r + 1) * p]
                        .iter()
                        .map(|v| v * v)
                        .sum();
                    row = row.max(g * sq + 2.0 * kappa * in_degree[i]);
                    col = col.max(g * sq + kappa * (in_degree[i] + out_degree[i]));
                }
                (row * col).sqrt()
            })
            .collect();
        let csr = |key: fn(&(u32, u32, f64)) -> (u32, u32)| {
            let mut start = vec![0usize; n + 1];
            for a in &arcs {
                start[key(a).0 as usize + 1] += 1;
            }
            for i in 0..n {
                start[i + 1] += start[i];
            }
            let mut fill = start.clone();
            let mut list = vec![(0u32, 0.0f64); arcs.len()];
            for a in &arcs {
                let (row, col) = key(a);
                list[fill[row as usize]] = (col, a.2);
                fill[row as usize] += 1;
            }
            (start, list)
        };
        let (listen_start, listens) = csr(|a| (a.1, a.0));
        let (talk_start, talks) = csr(|a| (a.0, a.1));
        let flow_growth = -gains.flow_coupling
            * in_degree
                .iter()
                .zip(&out_degree)
                .fold(0.0f64, |m, (a, b)| m.min((a - b) / 2.0));
        let scaled = |list: &[(u32, f64)]| list.iter().map(|&(k, w)| (k, kappa * w)).collect();
        ErrorSystem {
            schedule,
            gains,
            flow_listens: scaled(&listens),
            flow_talks: scaled(&talks),
            flow_diagonal: in_degree.iter().map(|d| -kappa * d).collect(),
            flow_growth,
            listen_start,
            listens,
            talk_start,
            talks,
            arcs,
            in_degree,
            generator_norms,
        }
    }

    /// The error system of a problem's link set.
    pub fn of_links(
        schedule: &'a Schedule<'a>,
        problem: &Problem,
        set: &crate::problem::LinkSet,
    ) -> Self {
        let arcs = problem
            .arcs(set)
            .into_iter()
            .map(|a| (a.from.0, a.to.0, a.weight))
            .collect();
        Self::new(schedule, problem.settings.gains, arcs)
    }

    /// The schedule.
    pub fn schedule(&self) -> &Schedule<'a> {
        self.schedule
    }

    /// Length of the stacked error vector, n·p.
    pub fn dim(&self) -> usize {
        self.schedule.n * self.schedule.p
    }

    /// Taylor substeps of one pass over the whole horizon
    /// (`Σ_k max(1, ⌈h_k ‖A_k‖⌉)` over the grid intervals).
    pub fn substeps_per_pass(&self) -> f64 {
        let grid = &self.schedule.grid;
        self.generator_norms
            .iter()
            .zip(grid.windows(2))
            .map(|(a, g)| ((g[1] - g[0]) * a).ceil().max(1.0))
            .sum()
    }

    /// Why this system is too stiff to certify or simulate in bounded
    /// work, or `None`: one pass over the horizon may take at most
    /// [`SUBSTEP_BUDGET`] Taylor substeps beyond one per grid interval.
    pub fn too_stiff(&self) -> Option<String> {
        let intervals = self.generator_norms.len() as f64;
        let needed = self.substeps_per_pass();
        if needed <= SUBSTEP_BUDGET + intervals {
            return None;
        }
        let (k, norm) = self
            .generator_norms
            .iter()
            .enumerate()
            .fold((0, 0.0f64), |m, (k, &a)| if a > m.1 { (k, a) } else { m });
        Some(format!(
            "the error system is too stiff to step through in bounded work: one pass over \
             the horizon needs {needed:.3e} Taylor substeps (at most {:.3e} accepted); its \
             generator norm reaches {norm:.3e} 1/s at t = {}; expected smaller regressors, \
             gains or link weights (docs/formats.md, \"Accepted ranges\")",
            SUBSTEP_BUDGET + intervals,
            self.schedule.grid[k]
        ))
    }

    /// Largest weighted in-degree.
    pub fn max_in_degree(&self) -> f64 {
        self.in_degree.iter().fold(0.0f64, |m, &d| m.max(d))
    }

    /// `y += scale · (L⊗I) x` (or `(Lᵀ⊗I) x`).
    fn add_laplacian(&self, dir: Direction, scale: f64, x: &[f64], y: &mut [f64]) {
        let p = self.schedule.p;
        let (start, list) = self.neighbours(dir);
        for (i, (yi, xi)) in y.chunks_exact_mut(p).zip(x.chunks_exact(p)).enumerate() {
            let d = self.in_degree[i];
            if d != 0.0 {
                let s = scale * d;
                yi.iter_mut().zip(xi).for_each(|(a, b)| *a += s * b);
            }
            for &(k, w) in &list[start[i]..start[i + 1]] {
                let s = scale * w;
                let xk = &x[k as usize * p..(k as usize + 1) * p];
                yi.iter_mut().zip(xk).for_each(|(a, b)| *a -= s * b);
            }
        }
    }

    /// The neighbour lists of L (forward) or Lᵀ (adjoint).
    fn neighbours(&self, dir: Direction) -> (&[usize], &[(u32, f64)]) {
        match dir {
            Direction::Forward => (&self.listen_start, &self.listens),
            Direction::Adjoint => (&self.talk_start, &self.talks),
        }
    }

    /// One Taylor term: `next = f·(A term + b)` and `sum += next`, where
    /// `A term` is `−γ_c ψ_i (ψ_iᵀ term_i) − κ (d_i term_i − Σ_k a_ik term_k)`
    /// (or with Lᵀ) and `b` the optional drive; one pass over the units.
    /// Returns `|next|²` when `norms` (else 0 where p ≤ 6).
    fn taylor_term(&self, input: TermInput, next: &mut [f64], sum: &mut [f64], norms: bool) -> f64 {
        if norms {
            self.taylor_term_dispatch::<true>(input, next, sum)
        } else {
            self.taylor_term_dispatch::<false>(input, next, sum)
        }
    }

    /// [`Self::taylor_term`] with a kernel specialised for p ≤ 6.
    fn taylor_term_dispatch<const NORMS: bool>(
        &self,
        input: TermInput,
        next: &mut [f64],
        sum: &mut [f64],
    ) -> f64 {
        match self.schedule.p {
            1 => self.taylor_term_p::<1, NORMS>(input, next, sum),
            2 => self.taylor_term_p::<2, NORMS>(input, next, sum),
            3 => self.taylor_term_p::<3, NORMS>(input, next, sum),
            4 => self.taylor_term_p::<4, NORMS>(input, next, sum),
            5 => self.taylor_term_p::<5, NORMS>(input, next, sum),
            6 => self.taylor_term_p::<6, NORMS>(input, next, sum),
            _ => {
                self.generator_any(input.dir, input.psi, input.term, next);
                let b = input.drive.unwrap_or(&[]);
                let mut nsq = 0.0;
                for (j, (nx, s)) in next.iter_mut().zip(sum.iter_mut()).enumerate() {
                    *nx = input.f * (*nx + b.get(j).copied().unwrap_or(0.0));
                    *s += *nx;
                    nsq += *nx * *nx;
                }
                nsq
            }
        }
    }

    fn taylor_term_p<const P: usize, const NORMS: bool>(
        &self,
        input: TermInput,
        next: &mut [f64],
        sum: &mut [f64],
    ) -> f64 {
        let TermInput {
            dir,
            psi,
            f,
            term,
            drive,
        } = input;
        let g = self.gains.flow_gain;
        let (start, list) = match dir {
            Direction::Forward => (&self.listen_start, &self.flow_listens),
            Direction::Adjoint => (&self.talk_start, &self.flow_talks),
        };
        let x = term.as_chunks::<P>().0;
        let psi = psi.as_chunks::<P>().0;
        let b = drive.map(|b| b.as_chunks::<P>().0);
        let next = next.as_chunks_mut::<P>().0;
        let sum = sum.as_chunks_mut::<P>().0;
        // Squared norm per lane (one add per unit on each chain).
        let mut nsq = [0.0; P];
        for (i, (ni, si)) in next.iter_mut().zip(sum.iter_mut()).enumerate() {
            let xi = x[i];
            let psi = psi[i];
            let mut dot = 0.0;
            for c in 0..P {
                dot += psi[c] * xi[c];
            }
            let s = -g * dot;
            let d = self.flow_diagonal[i];
            let mut acc = [0.0; P];
            for c in 0..P {
                acc[c] = s * psi[c] + d * xi[c];
            }
            for &(nb, kw) in &list[start[i]..start[i + 1]] {
                let xk = x[nb as usize];
                for c in 0..P {
                    acc[c] += kw * xk[c];
                }
            }
            if let Some(b) = b {
                for c in 0..P {
                    acc[c] += b[i][c];
                }
            }
            for c in 0..P {
                ni[c] = f * acc[c];
                si[c] += ni[c];
                if NORMS {
                    nsq[c] += ni[c] * ni[c];
                }
            }
        }
        nsq.iter().sum()
    }

    /// `y = A x` for the flow generator with the interval's regressors
    /// `psi` (`[i][p]`, any p).
    fn generator_any(&self, dir: Direction, psi: &[f64], x: &[f64], y: &mut [f64]) {
        let p = self.schedule.p;
        let g = self.gains.flow_gain;
        for ((yi, xi), psi) in y
            .chunks_exact_mut(p)
            .zip(x.chunks_exact(p))
            .zip(psi.chunks_exact(p))
        {
            let dot: f64 = psi.iter().zip(xi).map(|(a, b)| a * b).sum();
            let s = -g * dot;
            yi.iter_mut().zip(psi).for_each(|(a, b)| *a = s * b);
        }
        self.add_laplacian(dir, -self.gains.flow_coupling, x, y);
    }

    /// Number of Taylor substeps (flows) or maps (jumps) a step takes.
    pub fn substeps(&self, step: &Step) -> usize {
        match *step {
            Step::Flow { k, h } => (h * self.generator_norm(k as usize)).ceil().max(1.0) as usize,
            Step::Jump { .. } => 1,
        }
    }

    /// Upper bound on ‖A‖₂ on grid interval `k`.
    fn generator_norm(&self, k: usize) -> f64 {
        self.generator_norms[k]
    }

    /// `x ← exp(hA) x` (or `exp(hAᵀ) x`) on grid interval `k`; with a
    /// constant drive b, `x ← exp(hA) x + h φ₁(hA) b`, written as
    /// `x + Σ_{m≥1} hᵐ A^{m−1} (Ax + b)/m!`.
    fn flow(
        &self,
        dir: Direction,
        k: usize,
        h: f64,
        x: &mut [f64],
        drive: Option<&[f64]>,
        work: &mut Work,
    ) {
        let bound = h * self.generator_norm(k);
        if bound == 0.0 && drive.is_none() {
            return;
        }
        let substeps = bound.ceil().max(1.0);
        let hs = h / substeps;
        let a = bound / substeps;
        let terms = taylor_terms(a.max(f64::MIN_POSITIVE));
        let d = x.len();
        let Work {
            term,
            next,
            sum,
            psi,
        } = work;
        let psi = self.schedule.interval_psi(k, psi);
        term.resize(d, 0.0);
        next.resize(d, 0.0);
        sum.resize(d, 0.0);
        for _ in 0..substeps as usize {
            sum.copy_from_slice(x);
            let xsq = if drive.is_none() { square_norm(x) } else { 0.0 };
            let mut tsq = self.taylor_term(
                TermInput {
                    dir,
                    psi,
                    f: hs,
                    term: x,
                    drive,
                },
                term,
                sum,
                NORMS_FROM <= 1,
            );
            // A posteriori stop (no drive): term m+j is (hA)ʲ term_m·m!/(m+j)!,
            // so the remainder after term m is at most
            // |term_m|·r/(1−r) with r = a/(m+1); stop once that is below the
            // tolerance relative to |x| (never later than the a priori count).
            let limit = TAYLOR_TOLERANCE * TAYLOR_TOLERANCE * xsq;
            for m in 2..=terms {
                if drive.is_none() && m > NORMS_FROM {
                    let r = a / m as f64;
                    let q = r / (1.0 - r);
                    if tsq * q * q <= limit {
                        break;
                    }
                }
                // The stop is never met this early in practice: skip the norm.
                let norm = drive.is_none() && m >= NORMS_FROM;
                tsq = self.taylor_term(
                    TermInput {
                        dir,
                        psi,
                        f: hs / m as f64,
                        term,
                        drive: None,
                    },
                    next,
                    sum,
                    norm,
                );
                std::mem::swap(term, next);
            }
            x.copy_from_slice(sum);
        }
    }

    /// One step of the estimators themselves (not their errors), driven by
    /// the measurements `y[i]` (unit i's logged outputs, one per log row):
    /// flows add `γ_c ψ_i y_i`, jumps `γ_d ψ_i y_i/(1+|ψ_i|²)` (docs/theory.md §1–2).
    pub fn step_estimates(&self, step: &Step, theta: &mut [f64], y: &[Vec<f64>], work: &mut Work) {
        let n = self.schedule.n;
        let p = self.schedule.p;
        match *step {
            Step::Flow { k, h } => {
                let k = k as usize;
                let mut b = vec![0.0; n * p];
                for (i, bi) in b.chunks_exact_mut(p).enumerate() {
                    let r = self.schedule.rows[k * n + i] as usize;
                    let s = self.gains.flow_gain * y[i][r];
                    bi.iter_mut()
                        .zip(self.schedule.psi_at(k, i))
                        .for_each(|(v, psi)| *v = s * psi);
                }
                self.flow(Direction::Forward, k, h, theta, Some(&b), work);
            }
            Step::Jump { q } => {
                let mut drive = vec![0.0; n * p];
                for &(i, r) in &self.schedule.jumps[q as usize].units {
                    let (i, r) = (i as usize, r as usize);
                    let psi = &self.schedule.psi[i][r * p..(r + 1) * p];
                    let sq: f64 = psi.iter().map(|v| v * v).sum();
                    let s = self.gains.jump_gain * y[i][r] / (1.0 + sq);
                    drive[i * p..(i + 1) * p]
                        .iter_mut()
                        .zip(psi)
                        .for_each(|(v, psi)| *v = s * psi);
                }
                self.jump(Direction::Forward, q as usize, theta, work);
                theta.iter_mut().zip(&drive).for_each(|(v, d)| *v += d);
            }
        }
    }

    /// `x ← (I − J − δ L⊗I) x` (or its transpose) for network jump `q`.
    fn jump(&self, dir: Direction, q: usize, x: &mut [f64], work: &mut Work) {
        let p = self.schedule.p;
        let d = x.len();
        work.next.resize(d, 0.0);
        work.next.iter_mut().for_each(|v| *v = 0.0);
        self.add_laplacian(dir, -self.gains.jump_coupling, x, &mut work.next);
        for &(i, r) in &self.schedule.jumps[q].units {
            let i = i as usize;
            let psi = &self.schedule.psi[i][r as usize * p..(r as usize + 1) * p];
            let xi = &x[i * p..(i + 1) * p];
            let sq: f64 = psi.iter().map(|v| v * v).sum();
            let dot: f64 = psi.iter().zip(xi).map(|(a, b)| a * b).sum();
            let s = -self.gains.jump_gain * dot / (1.0 + sq);
            work.next[i * p..(i + 1) * p]
                .iter_mut()
                .zip(psi)
                .for_each(|(a, b)| *a += s * b);
        }
        for (v, dv) in x.iter_mut().zip(&work.next) {
            *v += dv;
        }
    }

    /// Applies the steps (in time order) to `x`, or their adjoint (in reverse
    /// order). Returns the natural log of a scale factor taken out of `x` to
    /// avoid underflow: the true result is `x · exp(returned)`.
    pub fn propagate(&self, dir: Direction, steps: &[Step], x: &mut [f64], work: &mut Work) -> f64 {
        let mut log_scale = 0.0;
        let mut apply = |s: &Step, x: &mut [f64], n: usize| {
            match *s {
                Step::Flow { k, h } => self.flow(dir, k as usize, h, x, None, work),
                Step::Jump { q } => self.jump(dir, q as usize, x, work),
            }
            if n % 32 == 31 {
                let sq: f64 = x.iter().map(|v| v * v).sum();
                if sq > 0.0 && sq < 1e-200 {
                    let f = 1e100;
                    x.iter_mut().for_each(|v| *v *= f);
                    log_scale -= f.ln();
                }
            }
        };
        match dir {
            Direction::Forward => steps.iter().enumerate().for_each(|(n, s)| apply(s, x, n)),
            Direction::Adjoint => steps
                .iter()
                .rev()
                .enumerate()
                .for_each(|(n, s)| apply(s, x, n)),
        }
        log_scale
    }

    /// Upper bound on ‖Φ‖₂ of one step, from norms that need no
    /// propagation: for a flow `exp(h μ₂(A))` with the logarithmic norm
    /// bounded by Gershgorin on the symmetric part of `κL`; for a jump the
    /// 2-norm of the matrix of block norms, bounded by `√(‖·‖₁‖·‖_∞)`.
    pub fn step_bound(&self, step: &Step) -> f64 {
        match *step {
            Step::Flow { h, .. } => (h * self.flow_growth).exp(),
            Step::Jump { q } => {
                let delta = self.gains.jump_coupling;
                let diag = self.jump_diagonal_norms(q as usize);
                let mut row = diag.clone();
                let mut col = diag;
                for &(from, to, w) in &self.arcs {
                    row[to as usize] += delta * w;
                    col[from as usize] += delta * w;
                }
                let r = row.iter().fold(0.0f64, |m, &v| m.max(v));
                let c = col.iter().fold(0.0f64, |m, &v| m.max(v));
                (r * c).sqrt()
            }
        }
    }

    /// Upper bound on the step's gain in the norm `max_i |e_i|₂`: flows never
    /// increase it (a_ik ≥ 0, Γ ⪰ 0: at the largest |e_i| its derivative is
    /// ≤ 0); a jump gains at most `max_i ‖(1−δd_i)I − J_i‖ + δ d_i`.
    pub fn step_bound_sup(&self, step: &Step) -> f64 {
        match *step {
            Step::Flow { .. } => 1.0,
            Step::Jump { q } => {
                let delta = self.gains.jump_coupling;
                self.jump_diagonal_norms(q as usize)
                    .iter()
                    .zip(&self.in_degree)
                    .fold(0.0f64, |m, (b, d)| m.max(b + delta * d))
            }
        }
    }

    /// ‖(1 − δ d_i) I − J_i‖₂ for every unit at network jump `q`.
    fn jump_diagonal_norms(&self, q: usize) -> Vec<f64> {
        let p = self.schedule.p;
        let delta = self.gains.jump_coupling;
        let mut diag: Vec<f64> = self
            .in_degree
            .iter()
            .map(|d| (1.0 - delta * d).abs())
            .collect();
        for &(i, r) in &self.schedule.jumps[q].units {
            let psi = &self.schedule.psi[i as usize][r as usize * p..(r as usize + 1) * p];
            let sq: f64 = psi.iter().map(|v| v * v).sum();
            let j = self.gains.jump_gain * sq / (1.0 + sq);
            let base = 1.0 - delta * self.in_degree[i as usize];
            diag[i as usize] = base.abs().max((base - j).abs());
        }
        diag
    }
}

/// `|x|²`, summed in four lanes.
fn square_norm(x: &[f64]) -> f64 {
    let (chunks, rest) = x.as_chunks::<4>();
    let mut lanes = [0.0; 4];
    for c in chunks {
        for (l, v) in lanes.iter_mut().zip(c) {
            *l += v * v;
        }
    }
    lanes.iter().sum::<f64>() + rest.iter().map(|v| v * v).sum::<f64>()
}

/// Number of Taylor terms so that `a^{m+1}/(m+1)! · e^a ≤` [`TAYLOR_TOLERANCE`]
/// for `0 < a ≤ 1`.
pub fn taylor_terms(a: f64) -> usize {
    let mut m = 0usize;
    let mut term = a; // a^{m+1}/(m+1)!
    while term * a.exp() > TAYLOR_TOLERANCE && m < 40 {
        m += 1;
        term *= a / (m + 1) as f64;
    }
    m.max(1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn taylor_terms_meet_the_tolerance() {
        // Lagrange remainder of the exponential series: common practice.
        for &a in &[1e-6, 1e-3, 0.1, 0.5, 1.0] {
            let m = taylor_terms(a);
            let mut fact = 1.0;
            for k in 1..=m + 1 {
                fact *= k as f64;
            }
            assert!(a.powi(m as i32 + 1) / fact * a.exp() <= TAYLOR_TOLERANCE);
        }
        assert!(taylor_terms(1.0) <= 18);
    }
}
