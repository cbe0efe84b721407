//! The common hybrid time domain of a set of logs.

use super::Log;

/// The merged hybrid time domain of all units over the horizon `[h0, h1]`
/// (the overlap of all logs).
///
/// The network jumps at the union of all units' jump instants; at an instant
/// where a unit has no jump of its own it takes a virtual jump (no excitation,
/// consensus part still applied). When several units jump at the same instant
/// the network jumps as many times there as the unit with the most jumps.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeDomain {
    /// Start of the horizon (latest first sample).
    pub h0: f64,
    /// End of the horizon (earliest last sample).
    pub h1: f64,
    /// Distinct sample times of all units inside `[h0, h1]`, sorted; always
    /// holds `h0` and `h1`.
    pub grid: Vec<f64>,
    /// Network jump instants inside `[h0, h1]`, sorted, each with the number
    /// of network jumps at that instant.
    pub jumps: Vec<(f64, u32)>,
}

impl TimeDomain {
    /// Merges the logs. Returns `None` when the logs do not overlap on an
    /// interval of positive length.
    ///
    /// # Complexity
    /// O(R log R) for R rows in all logs.
    pub fn merge<'a>(logs: impl IntoIterator<Item = &'a Log> + Clone) -> Option<Self> {
        let (mut h0, mut h1) = (f64::NEG_INFINITY, f64::INFINITY);
        for log in logs.clone() {
            let (a, b) = log.span();
            h0 = h0.max(a);
            h1 = h1.min(b);
        }
        if h0.partial_cmp(&h1) != Some(std::cmp::Ordering::Less) {
            return None;
        }
        let mut grid = vec![h0, h1];
        let mut jumps: Vec<(f64, u32)> = Vec::new();
        for log in logs {
            grid.extend(log.t.iter().copied().filter(|&t| t >= h0 && t <= h1));
            let mut own: Vec<f64> = log
                .jumps()
                .map(|e| e.time)
                .filter(|&t| t >= h0 && t <= h1)
                .collect();
            own.sort_by(f64::total_cmp);
            let mut k = 0;
            while k < own.len() {
                let run = own[k..].iter().take_while(|&&t| t == own[k]).count();
                jumps.push((own[k], run as u32));
                k += run;
            }
        }
        grid.sort_by(f64::total_cmp);
        grid.dedup();
        jumps.sort_by(|a, b| a.0.total_cmp(&b.0).then(b.1.cmp(&a.1)));
        jumps.dedup_by(|later, first| later.0 == first.0);
        Some(TimeDomain {
            h0,
            h1,
            grid,
            jumps,
        })
    }

    /// Index of the grid point nearest to `t` (the earlier one on a tie).
    pub fn nearest_grid_index(&self, t: f64) -> usize {
        let k = self.grid.partition_point(|&g| g < t);
        if k == 0 {
            0
        } else if k == self.grid.len() || t - self.grid[k - 1] <= self.grid[k] - t {
            k - 1
        } else {
            k
        }
    }

    /// Number of network jumps at instants in `[a, b)` (or `[a, b]` when
    /// `inclusive`).
    pub fn jump_count(&self, a: f64, b: f64, inclusive: bool) -> u32 {
        let lo = self.jumps.partition_point(|j| j.0 < a);
        let hi = if inclusive {
            self.jumps.partition_point(|j| j.0 <= b)
        } else {
            self.jumps.partition_point(|j| j.0 < b)
        };
        self.jumps[lo..hi.max(lo)].iter().map(|j| j.1).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::parse_log;
    use std::path::Path;

    #[test]
    fn merges_grids_and_jumps() {
        let a = parse_log(Path::new("a"), "t,j,psi1\n0,0,1\n1,0,1\n1,1,0\n3,1,0\n", 1).unwrap();
        let b = parse_log(
            Path::new("b"),
            "t,j,psi1\n0.5,0,1\n1,0,1\n1,1,1\n1,2,1\n2,2,1\n4,2,1\n",
            1,
        )
        .unwrap();
        let d = TimeDomain::merge([&a, &b]).unwrap();
        assert_eq!((d.h0, d.h1), (0.5, 3.0));
        assert_eq!(d.grid, vec![0.5, 1.0, 2.0, 3.0]);
        assert_eq!(d.jumps, vec![(1.0, 2)]);
        assert_eq!(d.jump_count(0.5, 1.0, false), 0);
        assert_eq!(d.jump_count(0.5, 1.0, true), 2);
        assert_eq!(d.nearest_grid_index(1.5), 1);
        assert_eq!(d.nearest_grid_index(1.6), 2);
    }

    #[test]
    fn disjoint_logs_have_no_horizon() {
        let a = parse_log(Path::new("a"), "t,j,psi1\n0,0,1\n1,0,1\n", 1).unwrap();
        let b = parse_log(Path::new("b"), "t,j,psi1\n1,0,1\n2,0,1\n", 1).unwrap();
        assert!(TimeDomain::merge([&a, &b]).is_none());
    }
}
