//! The merged hybrid time domain of a problem as a schedule of steps for
//! the error system (docs/theory.md §1–2): flow intervals with each unit's
//! regressor held, and network jumps with their pre-jump regressors.

use crate::problem::Problem;
use crate::signal::Window;
use rayon::prelude::*;

/// One network jump (a jump instant with multiplicity c gives c of these).
#[derive(Debug, Clone)]
pub(super) struct NetJump {
    pub(super) time: f64,
    /// Units that take a real jump, with their pre-jump log row.
    pub(super) units: Vec<(u32, u32)>,
}

/// The link-set independent part of the error system: which regressor row
/// every unit holds on every interval of the merged grid, and the network
/// jumps.
#[derive(Debug, Clone)]
pub struct Schedule<'p> {
    pub(super) n: usize,
    pub(super) p: usize,
    pub(super) grid: Vec<f64>,
    /// `rows[k * n + i]`: log row of unit i held on `[grid[k], grid[k+1])`.
    pub(super) rows: Vec<u32>,
    pub(super) jumps: Vec<NetJump>,
    /// Per unit, its regressor rows (borrowed from the log).
    pub(super) psi: Vec<&'p [f64]>,
    /// The regressors of all units laid out by grid interval
    /// (`[k][i][p]`), so that a flow step reads one contiguous block; built
    /// when it takes at most [`BY_INTERVAL_LIMIT`] bytes.
    pub(super) by_interval: Option<Vec<f64>>,
}

/// Largest copy of the regressors by grid interval (bytes); above it a flow
/// step gathers its regressors from the logs.
pub const BY_INTERVAL_LIMIT: usize = 512 << 20;

/// One step of a propagation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Step {
    /// Flow on grid interval `k` for `h` seconds.
    Flow {
        /// Grid interval.
        k: u32,
        /// Duration.
        h: f64,
    },
    /// Network jump number `q`.
    Jump {
        /// Index among the network jumps.
        q: u32,
    },
}

impl<'p> Schedule<'p> {
    /// Builds the schedule of a problem.
    ///
    /// # Complexity
    /// O(n·G + R) for G grid points and R log rows.
    pub fn new(problem: &'p Problem) -> Self {
        Self::with_copy_limit(problem, BY_INTERVAL_LIMIT)
    }

    /// Like [`Schedule::new`], keeping the copy of the regressors by grid
    /// interval only when it takes at most `bytes` (0: never). Results do
    /// not depend on it; only speed and memory do.
    pub fn with_copy_limit(problem: &'p Problem, bytes: usize) -> Self {
        let n = problem.n();
        let p = problem.settings.parameters;
        let grid = problem.domain.grid.clone();
        let intervals = grid.len().saturating_sub(1);
        let mut rows = vec![0u32; intervals * n];
        let mut own: Vec<(f64, u32, u32)> = Vec::new();
        for (i, node) in problem.nodes.iter().enumerate() {
            let log = &node.log;
            let mut r = 0usize;
            for k in 0..intervals {
                let g = grid[k];
                while r + 1 < log.len() && log.t[r + 1] <= g {
                    r += 1;
                }
                rows[k * n + i] = r as u32;
            }
            for k in 0..log.len().saturating_sub(1) {
                if log.j[k + 1] == log.j[k] + 1
                    && log.t[k] >= problem.domain.h0
                    && log.t[k] <= problem.domain.h1
                {
                    own.push((log.t[k], i as u32, k as u32));
                }
            }
        }
        own.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
        let mut jumps = Vec::new();
        let mut at = 0usize;
        for &(tau, count) in &problem.domain.jumps {
            while at < own.len() && own[at].0 < tau {
                at += 1;
            }
            let end = at + own[at..].iter().take_while(|o| o.0 == tau).count();
            let here = &own[at..end];
            for q in 0..count as usize {
                // The q-th own jump of every unit at this instant.
                let mut units = Vec::new();
                let mut s = 0;
                while s < here.len() {
                    let run = here[s..].iter().take_while(|o| o.1 == here[s].1).count();
                    if q < run {
                        units.push((here[s].1, here[s + q].2));
                    }
                    s += run;
                }
                jumps.push(NetJump { time: tau, units });
            }
            at = end;
        }
        let psi: Vec<&[f64]> = problem.nodes.iter().map(|v| v.log.psi.as_slice()).collect();
        let by_interval = (bytes > 0 && intervals * n * p * std::mem::size_of::<f64>() <= bytes)
            .then(|| {
                let mut out = vec![0.0; intervals * n * p];
                out.par_chunks_mut(n * p)
                    .enumerate()
                    .for_each(|(k, block)| {
                        for (i, b) in block.chunks_exact_mut(p).enumerate() {
                            let r = rows[k * n + i] as usize;
                            b.copy_from_slice(&psi[i][r * p..(r + 1) * p]);
                        }
                    });
                out
            });
        Schedule {
            by_interval,
            n,
            p,
            grid,
            rows,
            jumps,
            psi,
        }
    }

    /// The schedule of the units `units` alone (in that order), for
    /// certifying one weakly connected block of the error system: every
    /// network jump is kept (a unit without its own jump takes a virtual
    /// one), so the block's steps are exactly the restriction of the whole
    /// system's.
    pub fn restrict(&self, units: &[u32]) -> Schedule<'p> {
        let (n, p) = (self.n, self.p);
        let m = units.len();
        let mut local = vec![u32::MAX; n];
        for (k, &u) in units.iter().enumerate() {
            local[u as usize] = k as u32;
        }
        let intervals = self.grid.len().saturating_sub(1);
        let mut rows = Vec::with_capacity(intervals * m);
        for k in 0..intervals {
            rows.extend(units.iter().map(|&u| self.rows[k * n + u as usize]));
        }
        let jumps = self
            .jumps
            .iter()
            .map(|j| NetJump {
                time: j.time,
                units: j
                    .units
                    .iter()
                    .filter(|(i, _)| local[*i as usize] != u32::MAX)
                    .map(|&(i, r)| (local[i as usize], r))
                    .collect(),
            })
            .collect();
        let psi: Vec<&'p [f64]> = units.iter().map(|&u| self.psi[u as usize]).collect();
        let by_interval = self.by_interval.as_ref().map(|all| {
            let mut out = Vec::with_capacity(intervals * m * p);
            for k in 0..intervals {
                for &u in units {
                    let at = (k * n + u as usize) * p;
                    out.extend_from_slice(&all[at..at + p]);
                }
            }
            out
        });
        Schedule {
            n: m,
            p,
            grid: self.grid.clone(),
            rows,
            jumps,
            psi,
            by_interval,
        }
    }

    /// Number of units.
    pub fn n(&self) -> usize {
        self.n
    }

    /// Parameter dimension.
    pub fn p(&self) -> usize {
        self.p
    }

    /// Start and end of the horizon.
    pub fn horizon(&self) -> (f64, f64) {
        (self.grid[0], self.grid[self.grid.len() - 1])
    }

    /// Regressor of unit `i` on grid interval `k`.
    pub fn psi_at(&self, k: usize, i: usize) -> &[f64] {
        let r = self.rows[k * self.n + i] as usize;
        &self.psi[i][r * self.p..(r + 1) * self.p]
    }

    /// The regressors of all units on grid interval `k` (`[i][p]`), from
    /// the copy by interval or gathered into `buffer`.
    pub(super) fn interval_psi<'s>(&'s self, k: usize, buffer: &'s mut Vec<f64>) -> &'s [f64] {
        let (n, p) = (self.n, self.p);
        if let Some(all) = &self.by_interval {
            return &all[k * n * p..(k + 1) * n * p];
        }
        buffer.clear();
        for i in 0..n {
            buffer.extend_from_slice(self.psi_at(k, i));
        }
        buffer
    }

    /// The steps of `window`, in time order: flows on `[start, end)` cut at
    /// grid points, jumps at instants in `[start, end)` (or `[start, end]`).
    pub fn steps(&self, window: &Window, out: &mut Vec<Step>) {
        out.clear();
        let (a, b) = (window.start, window.end);
        let last = self.grid.len() - 1;
        let mut k = self.grid.partition_point(|&g| g <= a).saturating_sub(1);
        let mut q = self.jumps.partition_point(|j| j.time < a);
        let mut t = a;
        loop {
            while q < self.jumps.len()
                && self.jumps[q].time <= t
                && (self.jumps[q].time < b || (window.jumps_through_end && self.jumps[q].time <= b))
            {
                out.push(Step::Jump { q: q as u32 });
                q += 1;
            }
            if t >= b || k >= last {
                break;
            }
            let end = self.grid[k + 1].min(b);
            if end > t {
                out.push(Step::Flow {
                    k: k as u32,
                    h: end - t,
                });
            }
            t = end;
            if end >= self.grid[k + 1] {
                k += 1;
            }
        }
    }
}
