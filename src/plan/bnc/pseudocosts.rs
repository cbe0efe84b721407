//! Pseudocost branching: the variable to branch on, from the average
//! objective gain per unit of distance observed so far.

use super::super::instance::Instance;
use super::INT_TOL;
use super::node::Origin;

/// Pseudocosts: average objective gain per unit of distance, per variable
/// and direction (down, up).
pub(super) struct Pseudocosts {
    sum: Vec<[f64; 2]>,
    count: Vec<[u32; 2]>,
}

impl Pseudocosts {
    pub(super) fn new(m: usize) -> Self {
        Pseudocosts {
            sum: vec![[0.0; 2]; m],
            count: vec![[0; 2]; m],
        }
    }

    pub(super) fn record(&mut self, o: Origin, objective: f64) {
        let gain = (objective - o.parent_objective).max(0.0) / o.distance.max(1e-6);
        let d = usize::from(o.up);
        self.sum[o.var][d] += gain;
        self.count[o.var][d] += 1;
    }

    pub(super) fn mean(&self, d: usize) -> Option<f64> {
        let (s, c) = self
            .sum
            .iter()
            .zip(&self.count)
            .fold((0.0, 0u32), |(s, c), (x, n)| (s + x[d], c + n[d]));
        (c > 0).then(|| s / c as f64)
    }

    /// Branching variable by the product rule on pseudocosts (variables
    /// never branched on take the mean, or their cost before any record).
    pub(super) fn choose(&self, inst: &Instance, y: &[f64]) -> Option<usize> {
        let means = [self.mean(0), self.mean(1)];
        let mut best: Option<(f64, usize)> = None;
        for (k, &v) in y.iter().enumerate() {
            if v.min(1.0 - v) <= INT_TOL {
                continue;
            }
            let estimate = |d: usize| {
                if self.count[k][d] > 0 {
                    self.sum[k][d] / self.count[k][d] as f64
                } else {
                    means[d].unwrap_or(inst.links[k].cost + 1.0)
                }
            };
            let down = (estimate(0) * v).max(1e-6);
            let up = (estimate(1) * (1.0 - v)).max(1e-6);
            let score = down * up;
            if best.is_none_or(|(s, _)| score > s) {
                best = Some((score, k));
            }
        }
        best.map(|(_, k)| k)
    }
}
