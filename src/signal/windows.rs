//! Excitation windows over the common hybrid time domain.

use super::TimeDomain;

/// How the length of an excitation window is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum WindowKind {
    /// Flow time only: the window is `[s, s + T)`.
    Time,
    /// Flow time plus number of network jumps: the window grows from `s`
    /// until elapsed time plus jumps taken reaches `T`.
    Hybrid,
}

/// One excitation window: flows on `[start, end)` and jumps at instants in
/// `[start, end)`, or `[start, end]` when `jumps_through_end` (a hybrid window
/// that closes on a jump).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Window {
    /// Start time s.
    pub start: f64,
    /// End time.
    pub end: f64,
    /// True when jumps at `end` belong to the window.
    pub jumps_through_end: bool,
}

/// Most windows taken when no stride is given (fixed by the design).
pub const MAX_DEFAULT_WINDOWS: usize = 2000;

/// The window of length `length` that starts at `s`, or `None` when it does
/// not fit before the end of the horizon.
pub fn window_at(domain: &TimeDomain, kind: WindowKind, length: f64, s: f64) -> Option<Window> {
    let slack = 1e-9 * (domain.h1 - domain.h0).abs().max(1.0);
    match kind {
        WindowKind::Time => (s + length <= domain.h1 + slack).then_some(Window {
            start: s,
            end: (s + length).min(domain.h1),
            jumps_through_end: false,
        }),
        WindowKind::Hybrid => {
            let mut remaining = length;
            let mut now = s;
            let first = domain.jumps.partition_point(|j| j.0 < s);
            for &(tau, count) in &domain.jumps[first..] {
                if remaining <= tau - now {
                    break;
                }
                remaining -= tau - now;
                now = tau;
                remaining -= f64::from(count);
                if remaining <= 0.0 {
                    return Some(Window {
                        start: s,
                        end: tau,
                        jumps_through_end: true,
                    });
                }
            }
            (now + remaining <= domain.h1 + slack).then_some(Window {
                start: s,
                end: (now + remaining).min(domain.h1),
                jumps_through_end: false,
            })
        }
    }
}

/// All window starts for the problem, per the fixed rule: with a stride,
/// `h0 + k·stride` snapped to the nearest merged grid point while the window
/// fits; without one, every merged grid point whose window fits, thinned
/// evenly by index to at most [`MAX_DEFAULT_WINDOWS`].
///
/// # Complexity
/// O(K log G) for K candidate starts and G grid points.
pub fn windows(
    domain: &TimeDomain,
    kind: WindowKind,
    length: f64,
    stride: Option<f64>,
) -> Vec<Window> {
    let mut out: Vec<Window> = Vec::new();
    match stride {
        Some(stride) => {
            let mut k = 0u64;
            loop {
                let target = domain.h0 + k as f64 * stride;
                if target > domain.h1 {
                    break;
                }
                let s = domain.grid[domain.nearest_grid_index(target)];
                if out.last().is_none_or(|w| w.start < s) {
                    match window_at(domain, kind, length, s) {
                        Some(w) => out.push(w),
                        None => break,
                    }
                }
                k += 1;
            }
        }
        None => {
            let fitting: Vec<Window> = domain
                .grid
                .iter()
                .map_while(|&s| window_at(domain, kind, length, s))
                .collect();
            let m = fitting.len();
            if m <= MAX_DEFAULT_WINDOWS {
                out = fitting;
            } else {
                let last = (MAX_DEFAULT_WINDOWS - 1) as u64;
                out = (0..=last)
                    .map(|k| fitting[((k * (m as u64 - 1) + last / 2) / last) as usize])
                    .collect();
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn domain(grid: Vec<f64>, jumps: Vec<(f64, u32)>) -> TimeDomain {
        TimeDomain {
            h0: grid[0],
            h1: *grid.last().unwrap(),
            grid,
            jumps,
        }
    }

    #[test]
    fn time_windows_fit_the_horizon() {
        let d = domain((0..=10).map(f64::from).collect(), vec![]);
        let w = windows(&d, WindowKind::Time, 4.0, None);
        assert_eq!(w.len(), 7);
        assert_eq!((w[6].start, w[6].end), (6.0, 10.0));
        let w = windows(&d, WindowKind::Time, 4.0, Some(2.4));
        let starts: Vec<f64> = w.iter().map(|w| w.start).collect();
        assert_eq!(starts, vec![0.0, 2.0, 5.0]);
    }

    #[test]
    fn thinning_keeps_ends_and_count() {
        let d = domain((0..=5000).map(|k| k as f64 * 0.1).collect(), vec![]);
        let w = windows(&d, WindowKind::Time, 10.0, None);
        assert_eq!(w.len(), MAX_DEFAULT_WINDOWS);
        assert_eq!(w[0].start, 0.0);
        assert!((w.last().unwrap().start - 490.0).abs() < 1e-9);
    }

    #[test]
    fn hybrid_window_counts_jumps() {
        let d = domain((0..=10).map(f64::from).collect(), vec![(1.0, 1), (2.0, 2)]);
        // from 0: 1 s of flow, 1 jump (2 so far), 1 s of flow (3), 2 jumps (5).
        let w = window_at(&d, WindowKind::Hybrid, 4.5, 0.0).unwrap();
        assert_eq!((w.end, w.jumps_through_end), (2.0, true));
        let w = window_at(&d, WindowKind::Hybrid, 6.0, 0.0).unwrap();
        assert_eq!((w.end, w.jumps_through_end), (3.0, false));
        assert!(window_at(&d, WindowKind::Hybrid, 9.0, 3.0).is_none());
    }
}
