//! The ranges of input that exmesh accepts, and why (docs/formats.md,
//! "Accepted ranges"). Values outside them are rejected at load with the
//! file and line, so that no later computation overflows to infinity or
//! NaN and no computation's work grows without bound.
//!
//! The products that matter stay far inside `f64`: a Gramian entry is at
//! most `MAX_SAMPLE² · MAX_TIME ≈ 1e21`, a cost sum over ten million links
//! at most `1e19`, and the error system's generator norm at most a few
//! times `MAX_STIFFNESS` per unit of weighted in-degree.

/// Largest |ψ_k| of a regressor sample. A sample of 1e6 already makes
/// `flow_gain·|ψ|²` exceed [`MAX_STIFFNESS`] unless the gain is tiny; the
/// cap keeps Gramians finite whatever the gain.
pub const MAX_SAMPLE: f64 = 1e6;

/// Largest |y| of a logged output.
pub const MAX_OUTPUT: f64 = 1e12;

/// Largest |t| of a log time and largest window, stride or horizon, in
/// seconds (about 31.7 years).
pub const MAX_TIME: f64 = 1e9;

/// Most excitation windows a `stride` may produce over the horizon.
pub const MAX_WINDOWS: usize = 1_000_000;

/// Most numbers the excitation table may hold: units × windows ×
/// p(p+1)/2 packed Gramian entries (4 GB of `f64`). The 10,000-unit
/// networks the planner targets need about 2e8 at p = 4 with 2,000
/// windows.
pub const MAX_TABLE: f64 = 5e8;

/// Largest rate, in 1/s, at which one term of the estimator may pull an
/// estimate: `flow_gain·|ψ|²` for a sample (the unit's own gradient), and
/// `flow_coupling·weight` for a link (time constants below 0.1 ms).
/// The certificate and the simulation step through each flow in substeps
/// of length 1/‖A‖ (docs/theory.md §2), so the work of one pass grows
/// with this rate; a log sampled for this tool (tenths of seconds) cannot
/// show a faster estimator anyway. Scale the regressor (a normalised
/// gradient) or lower the gain.
pub const MAX_STIFFNESS: f64 = 1e4;

/// Largest gain or weight (`flow_gain`, `flow_coupling`, `jump_coupling`,
/// `link_weight`, `weight`).
pub const MAX_GAIN: f64 = 1e4;

/// Largest cost of one link (fixed part, per-km part times range, or a
/// written cost).
pub const MAX_COST: f64 = 1e12;

/// Largest |coordinate| of a position and largest candidate range, in km.
pub const MAX_DISTANCE: f64 = 1e5;

/// Largest required rate (`target_rate`), in 1/s.
pub const MAX_RATE: f64 = MAX_STIFFNESS;

/// Largest |entry| of a `--truth` or `--initial` vector.
pub const MAX_VECTOR: f64 = 1e6;

/// Time limits above this (a century, in seconds) are clamped to it.
pub const MAX_TIME_LIMIT: f64 = 100.0 * 365.25 * 86_400.0;
