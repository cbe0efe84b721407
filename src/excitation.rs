//! Gain-weighted hybrid Gramians per unit and window, excitation levels of
//! unit sets, and weakest directions (docs/theory.md §3).
//!
//! For window w and unit i,
//! `G_i^w = γ_c ∫_{flows in w} ψψᵀ dt + γ_d Σ_{jumps in w} ψψᵀ/(1+|ψ|²)`;
//! the level of a set S is `μ(S) = min_w λ_min(Σ_{i∈S} G_i^w)`.

use crate::problem::{NodeId, Problem};
use crate::signal::{Log, Window};
use nalgebra::{DMatrix, SymmetricEigen};
use rayon::prelude::*;

/// Relative tolerance for the default required excitation: μ_req defaults to
/// this times the largest trace of any unit's window Gramian.
pub const DEFAULT_RELATIVE_MIN_EXCITATION: f64 = 1e-6;

/// Number of entries of a packed symmetric p×p matrix (upper triangle).
pub fn packed_len(p: usize) -> usize {
    p * (p + 1) / 2
}

/// Position of entry (r, c) in the packed upper triangle, row-major.
pub fn packed_index(p: usize, r: usize, c: usize) -> usize {
    let (r, c) = if r <= c { (r, c) } else { (c, r) };
    r * p - r * (r + 1) / 2 + c
}

/// Unpacks a packed symmetric matrix.
pub fn unpack(p: usize, packed: &[f64]) -> DMatrix<f64> {
    DMatrix::from_fn(p, p, |r, c| packed[packed_index(p, r, c)])
}

fn add_outer(p: usize, out: &mut [f64], psi: &[f64], scale: f64) {
    let mut k = 0;
    for (r, &a) in psi.iter().enumerate().take(p) {
        let s = scale * a;
        for &b in &psi[r..p] {
            out[k] += s * b;
            k += 1;
        }
    }
}

/// Cumulative Gramians of one unit, for O(p² + log m) window evaluation.
struct UnitPrefix {
    p: usize,
    /// Distinct flow breakpoints (sample times).
    breaks: Vec<f64>,
    /// Regressor held from each breakpoint on (last row at that time).
    held: Vec<f64>,
    /// γ_c ∫ ψψᵀ from the first sample to each breakpoint, packed.
    flow_cum: Vec<f64>,
    /// Jump instants, sorted.
    jump_times: Vec<f64>,
    /// γ_d Σ ψψᵀ/(1+|ψ|²) over jumps before index k, packed (len+1 entries).
    jump_cum: Vec<f64>,
}

impl UnitPrefix {
    fn new(log: &Log, flow_gain: f64, jump_gain: f64) -> Self {
        let p = log.p;
        let q = packed_len(p);
        let mut breaks: Vec<f64> = Vec::with_capacity(log.len());
        let mut held: Vec<f64> = Vec::with_capacity(log.len() * p);
        for k in 0..log.len() {
            if breaks.last() == Some(&log.t[k]) {
                let start = held.len() - p;
                held[start..].copy_from_slice(log.row(k));
            } else {
                breaks.push(log.t[k]);
                held.extend_from_slice(log.row(k));
            }
        }
        let mut flow_cum = vec![0.0; breaks.len() * q];
        for m in 1..breaks.len() {
            let (done, rest) = flow_cum.split_at_mut(m * q);
            rest[..q].copy_from_slice(&done[(m - 1) * q..]);
            let dt = breaks[m] - breaks[m - 1];
            add_outer(p, &mut rest[..q], &held[(m - 1) * p..m * p], flow_gain * dt);
        }
        let mut jump_times = Vec::new();
        let mut jump_cum = vec![0.0; q];
        for e in log.jumps() {
            jump_times.push(e.time);
            let base = jump_cum.len() - q;
            jump_cum.extend_from_within(base..);
            let norm2: f64 = e.psi.iter().map(|x| x * x).sum();
            let start = jump_cum.len() - q;
            add_outer(p, &mut jump_cum[start..], e.psi, jump_gain / (1.0 + norm2));
        }
        UnitPrefix {
            p,
            breaks,
            held,
            flow_cum,
            jump_times,
            jump_cum,
        }
    }

    /// Adds `sign` times the flow integral from the first sample to `t`.
    fn add_flow_to(&self, t: f64, sign: f64, flow_gain: f64, out: &mut [f64]) {
        let q = out.len();
        let m = self.breaks.partition_point(|&b| b <= t).saturating_sub(1);
        for (o, v) in out.iter_mut().zip(&self.flow_cum[m * q..(m + 1) * q]) {
            *o += sign * v;
        }
        if m + 1 < self.breaks.len() {
            let dt = t - self.breaks[m];
            if dt > 0.0 {
                add_outer(
                    self.p,
                    out,
                    &self.held[m * self.p..(m + 1) * self.p],
                    sign * flow_gain * dt,
                );
            }
        }
    }

    /// Adds `sign` times the jump sum over jumps before `t` (or at or before).
    fn add_jumps_to(&self, t: f64, inclusive: bool, sign: f64, out: &mut [f64]) {
        let q = out.len();
        let k = if inclusive {
            self.jump_times.partition_point(|&x| x <= t)
        } else {
            self.jump_times.partition_point(|&x| x < t)
        };
        for (o, v) in out.iter_mut().zip(&self.jump_cum[k * q..(k + 1) * q]) {
            *o += sign * v;
        }
    }

    fn window(&self, w: &Window, flow_gain: f64, out: &mut [f64]) {
        self.add_flow_to(w.end, 1.0, flow_gain, out);
        self.add_flow_to(w.start, -1.0, flow_gain, out);
        self.add_jumps_to(w.end, w.jumps_through_end, 1.0, out);
        self.add_jumps_to(w.start, false, -1.0, out);
    }
}

/// Excitation level of a unit set.
#[derive(Debug, Clone, PartialEq)]
pub struct Level {
    /// μ(S) = min over windows of λ_min of the pooled Gramian.
    pub value: f64,
    /// Index of the window where the minimum is reached (first on a tie).
    pub window: usize,
    /// Unit eigenvector of that minimum, sign fixed so that its largest
    /// component (first on a tie) is positive.
    pub direction: Vec<f64>,
}

/// Per-window Gramians of every unit, with the required excitation.
#[derive(Debug, Clone)]
pub struct ExcitationTable {
    n: usize,
    p: usize,
    windows: Vec<Window>,
    /// Packed Gramians, index `(w * n + i) * q`.
    gram: Vec<f64>,
    /// Flow part over the whole horizon per unit, packed.
    flow_total: Vec<f64>,
    /// Jump part over the whole horizon per unit, packed.
    jump_total: Vec<f64>,
    min_excitation: f64,
    min_excitation_given: bool,
}

impl ExcitationTable {
    /// Computes every unit's Gramian on every window of the problem.
    ///
    /// # Complexity
    /// O(R p² + n W (p² + log R)) for R log rows, n units, W windows;
    /// memory n W p(p+1)/2 numbers.
    pub fn build(problem: &Problem) -> Self {
        let p = problem.settings.parameters;
        let q = packed_len(p);
        let n = problem.n();
        let g = problem.settings.gains;
        let windows = problem.windows.clone();
        let horizon = Window {
            start: problem.domain.h0,
            end: problem.domain.h1,
            jumps_through_end: false,
        };
        let columns: Vec<(Vec<f64>, Vec<f64>, Vec<f64>)> = problem
            .nodes
            .par_iter()
            .map(|node| {
                let pre = UnitPrefix::new(&node.log, g.flow_gain, g.jump_weight());
                let mut col = vec![0.0; windows.len() * q];
                for (w, out) in windows.iter().zip(col.chunks_exact_mut(q)) {
                    pre.window(w, g.flow_gain, out);
                }
                let mut flow = vec![0.0; q];
                pre.add_flow_to(horizon.end, 1.0, g.flow_gain, &mut flow);
                pre.add_flow_to(horizon.start, -1.0, g.flow_gain, &mut flow);
                let mut jump = vec![0.0; q];
                pre.add_jumps_to(horizon.end, false, 1.0, &mut jump);
                pre.add_jumps_to(horizon.start, false, -1.0, &mut jump);
                (col, flow, jump)
            })
            .collect();
        let mut gram = vec![0.0; windows.len() * n * q];
        let mut flow_total = Vec::with_capacity(n * q);
        let mut jump_total = Vec::with_capacity(n * q);
        for (i, (col, flow, jump)) in columns.into_iter().enumerate() {
            for w in 0..windows.len() {
                gram[(w * n + i) * q..(w * n + i + 1) * q]
                    .copy_from_slice(&col[w * q..(w + 1) * q]);
            }
            flow_total.extend(flow);
            jump_total.extend(jump);
        }
        Self::assemble(
            n,
            p,
            windows,
            gram,
            flow_total,
            jump_total,
            problem.settings.min_excitation,
        )
    }

    /// The same table with another required excitation μ_req (marked as
    /// given).
    pub fn with_min_excitation(&self, min_excitation: f64) -> Self {
        let mut t = self.clone();
        t.min_excitation = min_excitation;
        t.min_excitation_given = true;
        t
    }

    /// The table of the units `keep` only (in that order), on the same
    /// windows and with the same μ_req.
    pub fn restricted(&self, keep: &[NodeId]) -> Self {
        let mut gram = Vec::with_capacity(self.windows().len() * keep.len() * packed_len(self.p()));
        for w in 0..self.windows().len() {
            for &i in keep {
                gram.extend_from_slice(self.gramian(w, i));
            }
        }
        Self::from_gramians(
            keep.len(),
            self.p(),
            self.windows().to_vec(),
            gram,
            Some(self.min_excitation()),
        )
    }

    /// A table from given packed Gramians (index `(w * n + i) * q`), for
    /// synthetic studies and tests. The whole-horizon parts are taken as the
    /// sum over windows, all counted as flow.
    ///
    /// # Panics
    /// When `gram` does not hold `windows.len() * n` packed p×p matrices.
    pub fn from_gramians(
        n: usize,
        p: usize,
        windows: Vec<Window>,
        gram: Vec<f64>,
        min_excitation: Option<f64>,
    ) -> Self {
        let q = packed_len(p);
        assert_eq!(
            gram.len(),
            windows.len() * n * q,
            "gram has the wrong length"
        );
        let mut flow_total = vec![0.0; n * q];
        for w in 0..windows.len() {
            for (t, g) in flow_total.iter_mut().zip(&gram[w * n * q..(w + 1) * n * q]) {
                *t += g;
            }
        }
        let jump_total = vec![0.0; n * q];
        Self::assemble(n, p, windows, gram, flow_total, jump_total, min_excitation)
    }

    fn assemble(
        n: usize,
        p: usize,
        windows: Vec<Window>,
        gram: Vec<f64>,
        flow_total: Vec<f64>,
        jump_total: Vec<f64>,
        min_excitation: Option<f64>,
    ) -> Self {
        let q = packed_len(p);
        let diag: Vec<usize> = (0..p).map(|r| packed_index(p, r, r)).collect();
        let max_trace = gram
            .chunks_exact(q)
            .map(|g| diag.iter().map(|&k| g[k]).sum::<f64>())
            .fold(0.0_f64, f64::max);
        let (min_excitation, given) = match min_excitation {
            Some(m) => (m, true),
            None if max_trace > 0.0 => (DEFAULT_RELATIVE_MIN_EXCITATION * max_trace, false),
            None => (f64::MIN_POSITIVE, false),
        };
        ExcitationTable {
            n,
            p,
            windows,
            gram,
            flow_total,
            jump_total,
            min_excitation,
            min_excitation_given: given,
        }
    }

    /// Number of units.
    pub fn n(&self) -> usize {
        self.n
    }

    /// Parameter dimension p.
    pub fn p(&self) -> usize {
        self.p
    }

    /// The windows.
    pub fn windows(&self) -> &[Window] {
        &self.windows
    }

    /// Required excitation μ_req in use.
    pub fn min_excitation(&self) -> f64 {
        self.min_excitation
    }

    /// True when μ_req came from the problem file, false when defaulted.
    pub fn min_excitation_given(&self) -> bool {
        self.min_excitation_given
    }

    /// Packed Gramian of unit `i` on window `w`.
    pub fn gramian(&self, w: usize, i: NodeId) -> &[f64] {
        let q = packed_len(self.p);
        let k = (w * self.n + i.index()) * q;
        &self.gram[k..k + q]
    }

    /// Packed sum of the units' Gramians on window `w`.
    pub fn pooled(&self, w: usize, nodes: &[NodeId]) -> Vec<f64> {
        let mut sum = vec![0.0; packed_len(self.p)];
        self.pool_into(w, nodes, &mut sum);
        sum
    }

    fn pool_into(&self, w: usize, nodes: &[NodeId], sum: &mut [f64]) {
        sum.fill(0.0);
        for &i in nodes {
            for (s, g) in sum.iter_mut().zip(self.gramian(w, i)) {
                *s += g;
            }
        }
    }

    /// Whole-horizon flow and jump Gramians of a unit, packed.
    pub fn horizon_parts(&self, i: NodeId) -> (&[f64], &[f64]) {
        let q = packed_len(self.p);
        let r = i.index() * q..(i.index() + 1) * q;
        (&self.flow_total[r.clone()], &self.jump_total[r])
    }

    /// Whether every source component of `set`'s digraph is jointly
    /// excited (the convergence condition of docs/theory.md §3).
    pub fn sources_excited(&self, problem: &Problem, set: &crate::problem::LinkSet) -> bool {
        crate::topology::Topology::analyse(problem.n(), &problem.arcs(set))
            .sources()
            .all(|c| self.level(&c.nodes).value >= self.min_excitation())
    }

    /// Excitation level, minimising window and weakest direction of a set.
    /// The empty set has level 0 on window 0.
    ///
    /// # Complexity
    /// O(W (|S| p² + p³)).
    pub fn level(&self, nodes: &[NodeId]) -> Level {
        let mut best: Option<(f64, usize, Vec<f64>)> = None;
        let mut sum = vec![0.0; packed_len(self.p)];
        for w in 0..self.windows.len() {
            self.pool_into(w, nodes, &mut sum);
            let (value, vector) = min_eigen(self.p, &sum);
            if best.as_ref().is_none_or(|b| value < b.0) {
                best = Some((value, w, vector));
            }
        }
        let (value, window, direction) = best.unwrap_or((0.0, 0, vec![0.0; self.p]));
        Level {
            value,
            window,
            direction,
        }
    }

    /// True when the set's level is at least μ_req; stops at the first
    /// window below it. Uses a Cholesky factorisation of `G − μ_req I`.
    ///
    /// # Complexity
    /// O(W (|S| p² + p³)) at worst.
    pub fn is_excited(&self, nodes: &[NodeId]) -> bool {
        self.first_weak_window(nodes, 0..self.windows.len())
            .is_none()
    }

    /// The first window, in the given order, where the set's pooled Gramian
    /// has λ_min below μ_req (`None`: the set is excited on all of them).
    /// Callers that keep the windows that failed recently at the front make
    /// rejections cheap.
    pub fn first_weak_window(
        &self,
        nodes: &[NodeId],
        order: impl IntoIterator<Item = usize>,
    ) -> Option<usize> {
        let mut sum = vec![0.0; packed_len(self.p)];
        let mut work = vec![0.0; self.p * self.p];
        order.into_iter().find(|&w| {
            self.pool_into(w, nodes, &mut sum);
            !excited_window(self.p, &sum, self.min_excitation, &mut work)
        })
    }
}

/// Smallest eigenvalue of a packed symmetric matrix and its unit
/// eigenvector (sign fixed: largest-magnitude component positive).
pub fn min_eigen(p: usize, packed: &[f64]) -> (f64, Vec<f64>) {
    let eig = SymmetricEigen::new(unpack(p, packed));
    let k = (0..p)
        .min_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]))
        .unwrap_or(0);
    let mut v: Vec<f64> = eig.eigenvectors.column(k).iter().copied().collect();
    let lead = (0..p).fold(0, |m, r| {
        if v[r].abs() > v[m].abs() + 1e-12 {
            r
        } else {
            m
        }
    });
    if v[lead] < 0.0 {
        v.iter_mut().for_each(|x| *x = -*x);
    }
    (eig.eigenvalues[k], v)
}

/// Eigenvalues of a packed symmetric matrix, ascending.
pub fn eigenvalues(p: usize, packed: &[f64]) -> Vec<f64> {
    let mut v: Vec<f64> = SymmetricEigen::new(unpack(p, packed))
        .eigenvalues
        .iter()
        .copied()
        .collect();
    v.sort_by(f64::total_cmp);
    v
}

/// True when `λ_min(G) ≥ mu`, decided by Cholesky of `G − mu I` (the
/// boundary case λ_min = mu exactly may go either way).
/// The one tie rule (docs/theory.md §3): a window's pooled Gramian is
/// excited when its smallest eigenvalue, as computed by [`min_eigen`], is
/// at least `mu` — the same number `level` reports, so `check`, `plan` and
/// every heuristic decide a tie the same way. Cholesky factorisations of
/// `G − (mu ± margin) I` settle the clear cases first; only values within
/// the margin (10⁻⁹ of the trace, far above the eigenvalue's rounding
/// error) are decided by the eigenvalue itself.
pub fn excited_window(p: usize, packed: &[f64], mu: f64, work: &mut [f64]) -> bool {
    let trace: f64 = (0..p).map(|r| packed[packed_index(p, r, r)].abs()).sum();
    let margin = 1e-9 * (trace + mu.abs()) + f64::MIN_POSITIVE;
    if at_least(p, packed, mu + margin, work) {
        return true;
    }
    if !at_least(p, packed, mu - margin, work) {
        return false;
    }
    min_eigen(p, packed).0 >= mu
}

fn at_least(p: usize, packed: &[f64], mu: f64, a: &mut [f64]) -> bool {
    for r in 0..p {
        for c in 0..=r {
            let mut s = packed[packed_index(p, r, c)] - if r == c { mu } else { 0.0 };
            for k in 0..c {
                s -= a[r * p + k] * a[c * p + k];
            }
            if r == c {
                if s <= 0.0 {
                    return false;
                }
                a[r * p + r] = s.sqrt();
            } else {
                a[r * p + c] = s / a[c * p + c];
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn packed_indexing_is_symmetric() {
        let p = 4;
        let mut seen = vec![false; packed_len(p)];
        for r in 0..p {
            for c in r..p {
                let k = packed_index(p, r, c);
                assert!(!seen[k]);
                seen[k] = true;
                assert_eq!(k, packed_index(p, c, r));
            }
        }
        assert!(seen.iter().all(|&s| s));
    }

    #[test]
    fn cholesky_test_agrees_with_eigenvalues() {
        let p = 3;
        let g = [4.0, 1.0, 0.5, 3.0, 0.2, 2.0];
        let lmin = eigenvalues(p, &g)[0];
        let mut work = vec![0.0; 9];
        assert!(at_least(p, &g, lmin - 1e-9, &mut work));
        assert!(!at_least(p, &g, lmin + 1e-9, &mut work));
    }
}
