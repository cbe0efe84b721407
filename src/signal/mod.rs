//! Hybrid regressor logs: reading the per-unit CSV files and merging them
//! into one common hybrid time domain.
//!
//! A log row is `t, j, psi1..psiP[, y]`. Rows that share `j` are flow samples;
//! a jump from `j` to `j + 1` happens at τ when the last row of `j` and the
//! first row of `j + 1` both have `t = τ`. Between samples the regressor is
//! held at the value of the left sample (zero-order hold); the regressor used
//! by a jump is the pre-jump one, i.e. the last row of `j`.

mod csvlog;
mod domain;
mod windows;

pub use csvlog::{parse_log, parse_log_within};
pub use domain::TimeDomain;
pub use windows::{MAX_DEFAULT_WINDOWS, Window, WindowKind, window_at, windows};

use std::path::PathBuf;

/// One unit's recorded hybrid regressor signal, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct Log {
    /// Where the log came from (for messages).
    pub path: PathBuf,
    /// Regressor dimension p.
    pub p: usize,
    /// Sample time of each row, seconds.
    pub t: Vec<f64>,
    /// Jump counter of each row.
    pub j: Vec<u32>,
    /// Regressor rows, row-major, `p` values per row.
    pub psi: Vec<f64>,
    /// Measured output of each row, when the log has a `y` column.
    pub y: Option<Vec<f64>>,
}

/// A constant-regressor flow piece `[start, end)` of a log.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FlowPiece<'a> {
    /// Left end (inclusive).
    pub start: f64,
    /// Right end (exclusive).
    pub end: f64,
    /// Regressor held on the piece.
    pub psi: &'a [f64],
}

/// A jump of a log: instant and pre-jump regressor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct JumpEvent<'a> {
    /// Jump instant τ.
    pub time: f64,
    /// Pre-jump regressor ψ(τ, j−1).
    pub psi: &'a [f64],
}

impl Log {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.t.len()
    }

    /// True when the log has no rows (never the case for a parsed log).
    pub fn is_empty(&self) -> bool {
        self.t.is_empty()
    }

    /// Regressor of row `k`.
    pub fn row(&self, k: usize) -> &[f64] {
        &self.psi[k * self.p..(k + 1) * self.p]
    }

    /// First and last sample time.
    pub fn span(&self) -> (f64, f64) {
        (self.t[0], self.t[self.t.len() - 1])
    }

    /// Flow pieces of positive length, in time order. The regressor held on
    /// `[t_k, t_{k+1})` is row `k` (zero-order hold of the left sample).
    pub fn flow_pieces(&self) -> impl Iterator<Item = FlowPiece<'_>> + '_ {
        (0..self.len().saturating_sub(1))
            .filter(move |&k| self.j[k] == self.j[k + 1] && self.t[k + 1] > self.t[k])
            .map(move |k| FlowPiece {
                start: self.t[k],
                end: self.t[k + 1],
                psi: self.row(k),
            })
    }

    /// Jumps in time order, each with its pre-jump regressor.
    pub fn jumps(&self) -> impl Iterator<Item = JumpEvent<'_>> + '_ {
        (0..self.len().saturating_sub(1))
            .filter(move |&k| self.j[k + 1] == self.j[k] + 1)
            .map(move |k| JumpEvent {
                time: self.t[k],
                psi: self.row(k),
            })
    }
}
