//! A covering row of the planning model and its tests against an LP point.

/// A row `Σ_{k ∈ links} y_k ≥ rhs` over links that are not installed.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub(crate) struct Row {
    pub links: Vec<u32>,
    pub rhs: u32,
}

impl Row {
    pub fn activity(&self, y: &[f64]) -> f64 {
        self.links.iter().map(|&k| y[k as usize]).sum()
    }

    pub fn violation(&self, y: &[f64]) -> f64 {
        self.rhs as f64 - self.activity(y)
    }

    /// The violation when it exceeds `tol`, else `None`. Stops summing once
    /// the partial sum reaches the right-hand side: the pool holds thousands
    /// of rows and most are satisfied well before their last link. (LP
    /// values are at least about −1e−9, so what the skipped terms could
    /// subtract stays far below `tol`.)
    pub fn violated_by(&self, y: &[f64], tol: f64) -> Option<f64> {
        let rhs = self.rhs as f64;
        let mut sum = 0.0;
        for &k in &self.links {
            sum += y[k as usize];
            if sum >= rhs {
                return None;
            }
        }
        let v = rhs - sum;
        (v > tol).then_some(v)
    }
}
