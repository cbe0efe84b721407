//! Certified convergence rate of a link set on the recorded data
//! (docs/theory.md §6) and the gain conditions.
//!
//! The error system is block-diagonal over the weakly connected components
//! of the chosen digraph; each block is certified on its own. For every
//! certificate window w, an **upper bound** on `‖Φ(w)‖₂` comes from
//! [`bound`]: exact for small blocks, a deflated Lanczos run with a
//! randomized tail bound for larger ones. With `ρ = max_w ‖Φ(w)‖₂ < 1`
//! over windows of length `T_c`, the block's certified rate is
//! `λ = −ln ρ / T_c`, and `|e(t)| ≤ c·e^{−λ(t−h0)}|e(h0)|` for every t of
//! the horizon (its last jumps included) with the transient factor
//! `c = M/ρ`, M a bound on `‖Φ‖₂` over every piece of the chain of
//! windows from h0 through the horizon's end. The network's rate is the
//! smallest block rate and its transient factor the largest.
//!
//! # References
//! Khalil, "Nonlinear Systems", 3rd ed., 2002, §4.6 (uniform exponential
//! stability of linear time-varying systems from the transition matrix);
//! Kuczyński & Woźniakowski, SIAM J. Matrix Anal. Appl. 13(4), 1992
//! (random-start Lanczos tail bound).

pub mod bound;
mod estimate;
mod gains;
mod lanczos;
pub mod propagate;
mod schedule;
mod transitions;
mod trials;

pub use estimate::window_log_norm;
pub use gains::{GainCheck, degree_caps, gain_checks, in_degrees, jump_shares};
use trials::{Mode, Trial, fits, log_partial_bound, longer_trials};
pub use trials::{certificate_windows, chain_pieces};

use crate::excitation::ExcitationTable;
use crate::problem::{LinkSet, Problem};
use crate::progress::Sink;
use crate::signal::{Window, WindowKind, window_at};
use bound::NormBound;
use propagate::{Direction, ErrorSystem, Schedule, Work};
use rayon::prelude::*;
use serde::Serialize;

/// Windows handled one after another by one thread, each warm-starting the
/// next one's Lanczos run from its singular vector: at most this many, and
/// the windows of a batch are split into at least `PIECES` chunks so that
/// both cores of a small machine stay busy. The split depends only on the
/// number of windows, so results do not depend on the number of threads.
const CHUNK: usize = 16;

/// Fewest chunks a batch of windows is split into.
const PIECES: usize = 4;

/// Blocks with more unknowns than this choose T_c from Lanczos estimates
/// and bound only the chosen trial's windows (exact or randomized); smaller
/// blocks bound every window they evaluate.
const ESTIMATE_FIRST: usize = 16;

/// Multiples of the excitation window tried as the certificate window.
pub const MULTIPLES: [usize; 5] = [1, 2, 4, 8, 16];

/// A window bound counts as loose when its upper bound exceeds its lower
/// bound by more than this factor (reported, still a valid bound).
const LOOSE: f64 = 1.001;

/// A unit's share of the slowest mode.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitShare {
    /// Unit id.
    pub node: String,
    /// Share of the squared error left in this unit after the worst window,
    /// along the slowest mode (shares sum to 1).
    pub share: f64,
}

/// How the window norms behind a certificate are bounded.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum NormBoundKind {
    /// Every norm computed exactly (plus a margin for rounding).
    Exact,
    /// Some norms bounded by randomized tail tests; the bound fails with
    /// at most the stated probability.
    Randomized,
}

/// The certificate of one weakly connected block of the chosen digraph.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BlockCertificate {
    /// Units of the block.
    pub units: Vec<String>,
    /// Certified rate of the block in 1/s.
    pub rate: Option<f64>,
    /// The block's certificate window T_c in seconds.
    pub window: f64,
    /// Upper bound on ρ for the block.
    pub contraction: f64,
    /// The block's transient factor (from h0).
    pub transient_factor: Option<f64>,
    /// How the block's norms are bounded.
    pub norm_bound: NormBoundKind,
}

/// The certificate of a link set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Certificate {
    /// Certified rate λ in 1/s (the smallest over the blocks); `None` when
    /// not certified on this horizon.
    pub rate: Option<f64>,
    /// Certificate window T_c in seconds of the slowest block (the one
    /// giving its best rate, or the longest tried when none certifies).
    pub window: f64,
    /// Upper bound on ρ = max over windows of ‖Φ(w)‖₂ of the slowest block.
    pub contraction: f64,
    /// Transient factor c: `|e(t)| ≤ c e^{−λ(t−h0)} |e(h0)|` for every t
    /// in the horizon, jumps at its end included.
    pub transient_factor: Option<f64>,
    /// The start of the horizon h0: the envelope with `transient_factor`
    /// holds from this time, for every later t through h1 (jumps at h1
    /// included).
    pub envelope_from: f64,
    /// Transient factor for any start s in the horizon (not only h0):
    /// `|e(t)| ≤ c' e^{−λ(t−s)} |e(s)|`.
    pub transient_factor_any_start: Option<f64>,
    /// Time for the certified bound to fall to 1 % (seconds).
    pub time_to_1pct: Option<f64>,
    /// The time to 1 % lies beyond the recorded horizon (an extrapolation
    /// that assumes the data keep behaving as recorded).
    pub time_to_1pct_extrapolated: bool,
    /// All gain conditions hold.
    pub gains_ok: bool,
    /// The gain conditions.
    pub gains: Vec<GainCheck>,
    /// Estimated decay rate over the whole horizon,
    /// `−ln ‖Φ(h1, h0)‖₂ / (h1 − h0)` with the norm estimated by Lanczos
    /// (an estimate, not a bound: it can overstate the decay).
    pub asymptotic_rate: Option<f64>,
    /// Number of certificate windows of length `window` (slowest block).
    pub windows: usize,
    /// How many of them needed their norm bounded (the others are bounded
    /// below the worst by products of half-length windows).
    pub evaluated_windows: usize,
    /// Start of the worst window.
    pub worst_window_start: Option<f64>,
    /// Units by share of the slowest mode, largest first.
    pub units: Vec<UnitShare>,
    /// Why there is no rate, when there is none.
    pub reason: Option<String>,
    /// Windows whose upper bound exceeds its lower bound by more than
    /// 0.1 % (still valid bounds, only looser).
    pub unconverged_windows: usize,
    /// Work measure: propagation passes over windows, divided by two (one
    /// Lanczos step is one forward and one adjoint pass).
    pub lanczos_steps: usize,
    /// How the window norms are bounded: `exact` or `randomized`.
    pub norm_bound: NormBoundKind,
    /// Probability that a randomized bound fails (0 when exact): the number
    /// of randomized tail tests times their failure probability.
    pub failure_probability: f64,
    /// The certificate of every weakly connected block, in order of
    /// their smallest unit.
    pub blocks: Vec<BlockCertificate>,
    /// The worst certificate windows of the slowest block, worst first (at
    /// most three).
    #[serde(skip)]
    pub worst_windows: Vec<Window>,
    /// The right singular vector estimate of the worst window (a warm
    /// start for nearby systems; zero outside the slowest block).
    #[serde(skip)]
    pub worst_vector: Vec<f64>,
    /// Wall-clock split (text and benchmarks only, never JSON).
    #[serde(skip)]
    pub timing: CertTiming,
}

impl Certificate {
    /// A certificate with no rate yet (nothing proven), for `problem`
    /// with these gain checks.
    fn unproven(problem: &Problem, gains: Vec<GainCheck>) -> Self {
        Certificate {
            rate: None,
            window: problem.settings.window,
            contraction: 1.0,
            transient_factor: None,
            envelope_from: problem.domain.h0,
            transient_factor_any_start: None,
            time_to_1pct: None,
            time_to_1pct_extrapolated: false,
            gains_ok: gains.iter().all(|g| g.ok),
            gains,
            asymptotic_rate: None,
            windows: 0,
            evaluated_windows: 0,
            worst_window_start: None,
            units: Vec::new(),
            reason: None,
            unconverged_windows: 0,
            lanczos_steps: 0,
            norm_bound: NormBoundKind::Exact,
            failure_probability: 0.0,
            blocks: Vec::new(),
            worst_windows: Vec::new(),
            worst_vector: Vec::new(),
            timing: CertTiming::default(),
        }
    }
}

/// Where the certificate's time went.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CertTiming {
    /// Window norms of every window length tried.
    pub windows: std::time::Duration,
    /// The whole-horizon norm.
    pub horizon: std::time::Duration,
    /// Everything, structural check included.
    pub total: std::time::Duration,
}

/// Certifies every weakly connected component of the link set's digraph
/// as a block of its own, in parallel.
fn certify_blocks(
    problem: &Problem,
    schedule: &Schedule,
    set: &LinkSet,
    progress: &Sink,
) -> Vec<Block> {
    let arcs: Vec<(u32, u32, f64)> = problem
        .arcs(set)
        .into_iter()
        .map(|a| (a.from.0, a.to.0, a.weight))
        .collect();
    let components = weak_components(problem.n(), &arcs);
    components
        .into_par_iter()
        .enumerate()
        .map(|(b, units)| {
            let mut local = vec![u32::MAX; problem.n()];
            for (k, &u) in units.iter().enumerate() {
                local[u as usize] = k as u32;
            }
            let sub_arcs: Vec<(u32, u32, f64)> = arcs
                .iter()
                .filter(|a| local[a.1 as usize] != u32::MAX)
                .map(|&(f, t, w)| (local[f as usize], local[t as usize], w))
                .collect();
            let sub = schedule.restrict(&units);
            let system = ErrorSystem::new(&sub, problem.settings.gains, sub_arcs);
            let seed = 0x5eed_cafe_u64 ^ (b as u64 + 1).wrapping_mul(0xA24B_AED4_963E_E407);
            certify_block(problem, &system, units, seed, progress)
        })
        .collect()
}

/// Each block's figures, for the report.
fn block_summaries(problem: &Problem, blocks: &[Block]) -> Vec<BlockCertificate> {
    blocks
        .iter()
        .map(|b| BlockCertificate {
            units: b
                .units
                .iter()
                .map(|&u| problem.nodes[u as usize].id.clone())
                .collect(),
            rate: b.rate,
            window: b.length,
            contraction: b.log_rho.exp(),
            transient_factor: b.rate.map(|_| (b.log_m - b.log_rho).exp()),
            norm_bound: if b.exact {
                NormBoundKind::Exact
            } else {
                NormBoundKind::Randomized
            },
        })
        .collect()
}

/// The slowest block's worst start vector on the whole network (zero
/// outside the block) and each unit's share of the slowest mode, largest
/// first.
fn slowest_mode(problem: &Problem, s: &Block) -> (Vec<f64>, Vec<UnitShare>) {
    let p = problem.settings.parameters;
    let mut full = vec![0.0; problem.n() * p];
    let mut shares = vec![0.0; problem.n()];
    for (k, &u) in s.units.iter().enumerate() {
        let u = u as usize;
        if s.right.len() == s.units.len() * p {
            full[u * p..(u + 1) * p].copy_from_slice(&s.right[k * p..(k + 1) * p]);
        }
        if s.left.len() == s.units.len() * p {
            shares[u] = s.left[k * p..(k + 1) * p].iter().map(|x| x * x).sum();
        }
    }
    let mut units: Vec<UnitShare> = problem
        .nodes
        .iter()
        .zip(&shares)
        .map(|(v, &share)| UnitShare {
            node: v.id.clone(),
            share,
        })
        .collect();
    units.sort_by(|a, b| b.share.total_cmp(&a.share).then(a.node.cmp(&b.node)));
    (full, units)
}

/// The certificate of one block (units in local order).
struct Block {
    units: Vec<u32>,
    rate: Option<f64>,
    length: f64,
    log_rho: f64,
    /// ln M over the chain from h0 and its last piece.
    log_m: f64,
    /// ln of the bound over any piece of any window (for any start).
    log_m_any: f64,
    windows: usize,
    evaluated: usize,
    loose: usize,
    worst_windows: Vec<Window>,
    /// Right singular vector estimate of the worst window (block-local).
    right: Vec<f64>,
    /// Left singular vector of the worst window (block-local).
    left: Vec<f64>,
    log_horizon: f64,
    passes: usize,
    tests: usize,
    exact: bool,
    reason: Option<String>,
    windows_time: std::time::Duration,
    horizon_time: std::time::Duration,
}

/// Certifies one weakly connected block.
// Long function: One block's certificate, stage after stage (trials, estimates, bounds of
// the chosen trial, chain, horizon); kept whole because every stage reads and updates the
// same trial list and block record.
fn certify_block(
    problem: &Problem,
    system: &ErrorSystem,
    units: Vec<u32>,
    seed: u64,
    sink: &Sink,
) -> Block {
    let horizon = problem.domain.h1 - problem.domain.h0;
    // A progress line on a terminal when the block is large enough for
    // the certificate to take a while.
    let silent = Sink::silent();
    let progress = if system.dim() * problem.domain.grid.len() > 2_000_000 {
        sink
    } else {
        &silent
    };
    let t0 = std::time::Instant::now();
    // The first trial is only sampled while a longer one follows: its exact
    // ρ matters only when the longer window does not improve the rate by
    // 1 %, which a sampled window can rule out.
    let lazy = MULTIPLES.get(1).is_some_and(|&m| fits(problem, m));
    progress.update(|| {
        format!(
            "certificate: windows of {} s",
            problem.settings.window * MULTIPLES[0] as f64
        )
    });
    // Small blocks: the transition matrices between window ends, once,
    // when products of them are cheaper than propagating every window.
    let dense = {
        let groups: Vec<(f64, Vec<Window>)> = MULTIPLES
            .iter()
            .filter(|&&m| fits(problem, m))
            .map(|&m| {
                let windows = certificate_windows(problem, m);
                (trials::chain_length(problem, m, &windows), windows)
            })
            .collect();
        transitions::Transitions::build(system, problem.domain.h0, problem.domain.h1, &groups)
    };
    let dense = dense.as_ref();
    // On blocks too large for exact norms, T_c is chosen from Lanczos
    // estimates (cheap), and only the chosen trial's windows are bounded
    // (with segment products every window's bound is cheap).
    let mode = if system.dim() > ESTIMATE_FIRST && dense.is_none() {
        Mode::Estimate
    } else {
        Mode::Bound
    };
    let first = Trial::new(problem, MULTIPLES[0], None, seed).map(|mut t| {
        t.mode = mode;
        t.evaluate(system, dense, None, lazy, f64::INFINITY);
        t
    });
    let horizon_start = first
        .as_ref()
        .and_then(|t| t.norms[t.index_at(problem.domain.h0)?].as_ref())
        .map(|n| n.right.clone());
    let first_time = t0.elapsed();
    let ((trials, best, windows_time), (log_h, horizon_time)) = rayon::join(
        || {
            let t1 = std::time::Instant::now();
            let (trials, best) = longer_trials(problem, system, dense, first, lazy, progress, seed);
            (trials, best, first_time + t1.elapsed())
        },
        || {
            let t0 = std::time::Instant::now();
            let w = Window {
                start: problem.domain.h0,
                end: problem.domain.h1,
                jumps_through_end: true,
            };
            if let Some(log) = dense.and_then(transitions::Transitions::horizon_estimate) {
                return (log, t0.elapsed());
            }
            let mut steps = Vec::new();
            system.schedule().steps(&w, &mut steps);
            let start = horizon_start
                .filter(|v| v.len() == system.dim())
                .unwrap_or_else(|| lanczos::start_vector(system.dim()));
            // Informative only, and labelled an estimate: a Lanczos value
            // from below (a bound would cost a full tail test on the
            // longest window of all).
            let log = estimate::window_log_norm(system, &w, &start);
            (log, t0.elapsed())
        },
    );
    progress.done();
    let mut block = Block {
        units,
        rate: None,
        length: problem.settings.window,
        log_rho: 0.0,
        log_m: 0.0,
        log_m_any: 0.0,
        windows: 0,
        evaluated: 0,
        loose: 0,
        worst_windows: Vec::new(),
        right: Vec::new(),
        left: Vec::new(),
        log_horizon: log_h,
        passes: trials.iter().map(Trial::passes).sum::<usize>() + dense.map_or(0, |t| t.passes),
        tests: trials.iter().map(Trial::tests).sum::<usize>(),
        exact: true,
        reason: None,
        windows_time,
        horizon_time,
    };
    block.exact = block.exact && block.tests == 0;
    let Some(chosen) = best.or(trials.len().checked_sub(1)) else {
        block.reason = Some("no certificate window fits in the horizon".into());
        return block;
    };
    let bounded;
    let t = if trials[chosen].mode == Mode::Estimate {
        // Bound every window of the chosen length; the largest estimate is
        // a lower bound on ρ, so windows whose bound falls below it stop
        // early; each starts from its estimate's singular vector.
        let estimate = &trials[chosen];
        let multiple = MULTIPLES[chosen];
        let t0 = std::time::Instant::now();
        let mut t = Trial::new(problem, multiple, None, seed ^ 0xB0_0B)
            .expect("the estimated trial has windows");
        t.accept_floor = estimate.lower();
        t.evaluate(system, dense, Some(estimate), false, f64::INFINITY);
        block.passes += t.passes();
        block.tests += t.tests();
        block.exact = block.exact && t.tests() == 0;
        block.windows_time += t0.elapsed();
        bounded = t;
        &bounded
    } else {
        &trials[chosen]
    };
    block.length = t.length;
    block.log_rho = t.log_rho;
    block.windows = t.windows.len();
    block.evaluated = t.norms.iter().flatten().count();
    block.loose = t
        .norms
        .iter()
        .flatten()
        .filter(|n| n.log_upper > n.log_lower + LOOSE.ln())
        .count();
    let mut order: Vec<usize> = (0..t.windows.len())
        .filter(|&k| t.norms[k].is_some())
        .collect();
    order.sort_by(|&a, &b| t.upper[b].total_cmp(&t.upper[a]).then(a.cmp(&b)));
    block.worst_windows = order.iter().take(3).map(|&k| t.windows[k]).collect();
    if let Some(n) = t.norms[t.worst].as_ref() {
        block.right = n.right.clone();
        // The left singular vector: the image of the right one, normalised.
        let mut left = n.right.clone();
        let mut steps = Vec::new();
        system.schedule().steps(&t.windows[t.worst], &mut steps);
        system.propagate(Direction::Forward, &steps, &mut left, &mut Work::default());
        lanczos::normalise(&mut left);
        block.left = left;
    }
    match t.rate() {
        Some(rate) => {
            let (chain, last) = chain_pieces(problem, t.length);
            let mut pieces = chain;
            pieces.push(last);
            block.log_m = log_partial_bound(system, &pieces);
            block.log_m_any = block.log_m.max(log_partial_bound(system, &t.windows));
            block.rate = Some(rate);
        }
        None => {
            block.reason = Some(format!(
                "no window up to {} s that fits in the {} s horizon shows contraction \
                 (largest ‖Φ‖ bound = {:.6}): the log is too short for this network, or \
                 its units are too weakly excited or coupled",
                t.length,
                horizon,
                t.log_rho.exp()
            ));
        }
    }
    block
}

/// The weakly connected components of the arcs `(from, to)` on n units,
/// each sorted, ordered by smallest unit (isolated units are components).
fn weak_components(n: usize, arcs: &[(u32, u32, f64)]) -> Vec<Vec<u32>> {
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(parent: &mut [usize], mut x: usize) -> usize {
        while parent[x] != x {
            parent[x] = parent[parent[x]];
            x = parent[x];
        }
        x
    }
    for &(a, b, _) in arcs {
        let (ra, rb) = (find(&mut parent, a as usize), find(&mut parent, b as usize));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    }
    let mut groups: Vec<Vec<u32>> = vec![Vec::new(); n];
    for v in 0..n {
        let r = find(&mut parent, v);
        groups[r].push(v as u32);
    }
    groups.into_iter().filter(|g| !g.is_empty()).collect()
}

/// Certifies the convergence rate of `set` on the recorded data.
///
/// When the structural condition fails the rate is not computed (a
/// non-excited source component keeps its weakest direction forever).
///
/// # Complexity
/// Per block of b units, for W windows of S steps: O(W·S·(bp)²) for exact
/// blocks, O(W·S·I·m·(bp + A·p)) with I Lanczos steps and m Taylor terms
/// for larger ones; windows and blocks run in parallel.
pub fn certify(problem: &Problem, table: &ExcitationTable, set: &LinkSet) -> Certificate {
    certify_showing(problem, table, set, &Sink::silent())
}

/// Like [`certify`], reporting the longer blocks' progress to `progress`.
pub fn certify_showing(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    progress: &Sink,
) -> Certificate {
    let schedule = Schedule::new(problem);
    certify_with(problem, table, &schedule, set, progress)
}

/// Like [`certify_showing`], with a prepared schedule (for repeated use).
pub fn certify_with(
    problem: &Problem,
    table: &ExcitationTable,
    schedule: &Schedule,
    set: &LinkSet,
    progress: &Sink,
) -> Certificate {
    let mut cert = Certificate::unproven(problem, gain_checks(problem, set));
    let started = std::time::Instant::now();
    if !table.sources_excited(problem, set) {
        cert.reason = Some(
            "a source component is not jointly excited: the error along its weakest \
             direction never decays"
                .into(),
        );
        return cert;
    }
    let whole = ErrorSystem::of_links(schedule, problem, set);
    if let Some(reason) = whole.too_stiff() {
        cert.reason = Some(reason);
        return cert;
    }
    drop(whole);
    let horizon = problem.domain.h1 - problem.domain.h0;
    let blocks = certify_blocks(problem, schedule, set, progress);
    // The slowest block: one without a rate first, else the smallest rate
    // (ties: the first).
    let slowest = (0..blocks.len())
        .min_by(|&a, &b| {
            let r = |k: usize| blocks[k].rate.unwrap_or(f64::NEG_INFINITY);
            r(a).total_cmp(&r(b)).then(a.cmp(&b))
        })
        .expect("a problem has units");
    let s = &blocks[slowest];
    cert.window = s.length;
    cert.contraction = s.log_rho.exp();
    cert.windows = s.windows;
    cert.evaluated_windows = s.evaluated;
    cert.worst_windows = s.worst_windows.clone();
    cert.worst_window_start = s.worst_windows.first().map(|w| w.start);
    cert.unconverged_windows = blocks.iter().map(|b| b.loose).sum();
    cert.lanczos_steps = blocks.iter().map(|b| b.passes).sum::<usize>().div_ceil(2);
    let tests: usize = blocks.iter().map(|b| b.tests).sum();
    if blocks.iter().any(|b| !b.exact) {
        cert.norm_bound = NormBoundKind::Randomized;
        cert.failure_probability = tests as f64 * bound::TEST_FAILURE;
    }
    cert.timing.windows = blocks.iter().map(|b| b.windows_time).sum();
    cert.timing.horizon = blocks.iter().map(|b| b.horizon_time).sum();
    (cert.worst_vector, cert.units) = slowest_mode(problem, s);
    cert.blocks = block_summaries(problem, &blocks);
    let log_h = blocks
        .iter()
        .map(|b| b.log_horizon)
        .fold(f64::NEG_INFINITY, f64::max);
    if log_h < 0.0 {
        cert.asymptotic_rate = Some(-log_h / horizon);
    }
    match s.rate {
        Some(rate) => {
            // Every block has a rate: the network's envelope takes the
            // smallest rate and the largest factor (each block's error
            // obeys its own envelope, and rates only get smaller).
            let c = blocks
                .iter()
                .map(|b| (b.log_m - b.log_rho).exp())
                .fold(0.0, f64::max);
            let c_any = blocks
                .iter()
                .map(|b| (2.0 * (b.log_m_any - b.log_rho)).exp())
                .fold(0.0, f64::max);
            cert.rate = Some(rate);
            cert.transient_factor = Some(c);
            cert.transient_factor_any_start = Some(c_any);
            let t = (100.0 * c).ln().max(0.0) / rate;
            cert.time_to_1pct = Some(t);
            cert.time_to_1pct_extrapolated = t > horizon;
        }
        None => {
            cert.reason = s.reason.clone().map(|r| {
                if blocks.len() > 1 {
                    let names: Vec<&str> = s
                        .units
                        .iter()
                        .map(|&u| problem.nodes[u as usize].id.as_str())
                        .collect();
                    format!("block of units {}: {r}", names.join(", "))
                } else {
                    r
                }
            });
        }
    }
    cert.timing.total = started.elapsed();
    cert
}
