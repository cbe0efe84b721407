//! The certified rate and the error propagation against closed forms, a
//! general-purpose matrix library (nalgebra) and a published bound.

use approx::assert_abs_diff_eq;
use exmesh::certify::propagate::{Direction, ErrorSystem, Schedule, Step, Work};
use exmesh::certify::{MULTIPLES, certificate_windows, certify, certify_with, window_log_norm};
use exmesh::problem::{Ends, Gains, Link, LinkSet, Node, NodeId, Problem, Settings};
use exmesh::signal::{Log, Window, WindowKind};
use exmesh::synth::Rng;
use exmesh::{ExcitationTable, excitation::eigenvalues};
use nalgebra::{DMatrix, DVector, SymmetricEigen};
use proptest::prelude::*;
use std::path::PathBuf;

/// A flow-only log sampled every `h` on `[0, end]` with regressor `f(t)`.
pub fn flow_log(p: usize, h: f64, end: f64, f: impl Fn(f64) -> Vec<f64>) -> Log {
    let rows = (end / h).round() as usize;
    let mut t = Vec::new();
    let mut psi = Vec::new();
    for k in 0..=rows {
        let tk = k as f64 * h;
        t.push(tk);
        psi.extend(f(tk));
    }
    Log {
        path: PathBuf::from("u.csv"),
        p,
        j: vec![0; t.len()],
        t,
        psi,
        y: None,
    }
}

/// A problem from in-memory logs and two-way links of weight 1.
pub fn network(
    logs: Vec<Log>,
    edges: &[(usize, usize)],
    window: f64,
    stride: f64,
    gains: Gains,
) -> Problem {
    let p = logs[0].p;
    let nodes = logs
        .into_iter()
        .enumerate()
        .map(|(i, log)| Node {
            id: format!("u{i}"),
            log,
            position: None,
            lat_lon: None,
            max_links: None,
        })
        .collect();
    let links = edges
        .iter()
        .enumerate()
        .map(|(k, &(a, b))| Link {
            id: format!("l{k}"),
            ends: Ends::TwoWay(NodeId(a as u32), NodeId(b as u32)),
            cost: 1.0,
            weight: 1.0,
            installed: false,
            required: false,
            generated: false,
        })
        .collect();
    let settings = Settings {
        name: "test".into(),
        parameters: p,
        window,
        window_kind: WindowKind::Time,
        stride: Some(stride),
        min_excitation: Some(1e-9),
        target_rate: None,
        gains,
    };
    Problem::from_parts(PathBuf::from("t.toml"), settings, nodes, links).unwrap()
}

fn gains(flow_gain: f64, flow_coupling: f64) -> Gains {
    Gains {
        flow_gain,
        flow_coupling,
        ..Gains::default()
    }
}

/// Closed form: a scalar unit with constant ψ and no links has
/// e(t) = exp(−γ_c ψ² t) e(0), so every window norm is exp(−γ_c ψ² T) and
/// the certified rate is γ_c ψ² (common practice, linear scalar ODE).
#[test]
fn scalar_unit_rate_is_gain_times_psi_squared() {
    for (g, psi) in [(1.0, 0.5), (0.3, 2.0), (2.0, 1.0)] {
        let log = flow_log(1, 0.1, 40.0, |_| vec![psi]);
        let p = network(vec![log], &[], 5.0, 1.0, gains(g, 1.0));
        let table = ExcitationTable::build(&p);
        let c = certify(&p, &table, &LinkSet::default());
        let rate = c.rate.expect("certified");
        // The certified rate is a bound: never above the exact one, and
        // below it only by the propagation's rounding margin.
        assert!(rate <= g * psi * psi + 1e-12, "{rate}");
        assert!(rate >= g * psi * psi * (1.0 - 1e-6), "{rate}");
        assert_abs_diff_eq!(c.asymptotic_rate.unwrap(), g * psi * psi, epsilon = 1e-9);
        assert!(c.gains_ok);
    }
}

/// ψ = [sin ωt, cos ωt]: in the frame (ψ, ψ⊥) the error obeys ż = −M z with
/// M = [[γ, −ω], [ω, 0]] (derived in docs/theory.md), and the frame change is
/// a rotation, so ‖Φ(H)‖ = ‖exp(−M H)‖ (computed with nalgebra's matrix
/// exponential) and the asymptotic rate is (γ − Re√(γ² − 4ω²))/2. The log is
/// a zero-order hold with step h: agreement within O(h).
#[test]
fn sine_cosine_asymptotic_rate() {
    for (g, omega) in [(1.0, 1.0), (3.0, 1.0), (0.8, 0.25)] {
        let horizon = 200.0;
        let h = 0.002;
        let log = flow_log(2, h, horizon, |t| {
            vec![(omega * t).sin(), (omega * t).cos()]
        });
        let p = network(vec![log], &[], 10.0, 50.0, gains(g, 1.0));
        let table = ExcitationTable::build(&p);
        let c = certify(&p, &table, &LinkSet::default());
        let m = DMatrix::from_row_slice(2, 2, &[g, -omega, omega, 0.0]);
        let phi = (-m * horizon).exp();
        let exact = -phi.singular_values().max().ln() / horizon;
        let got = c.asymptotic_rate.unwrap();
        assert!((got - exact).abs() <= 1e-4 * exact, "{got} vs {exact}");
        let disc = g * g - 4.0 * omega * omega;
        let closed = (g - if disc > 0.0 { disc.sqrt() } else { 0.0 }) / 2.0;
        // exp(−MH) = V e^{−ΛH} V⁻¹: the finite-horizon rate differs from the
        // asymptotic one by at most ln κ(V)/H.
        assert!(
            (exact - closed).abs() <= 3.0 / horizon,
            "{exact} vs {closed}"
        );
        assert!((got - closed).abs() <= 0.01 * closed + 3.0 / horizon);
        // The certificate over windows is never faster than the decay over
        // the whole horizon allows.
        assert!(c.rate.unwrap() <= got * 1.01 + 3.0 / horizon);
    }
}

/// Brouwer & Haemers, "Spectra of Graphs", 2012, §1.4: the Laplacian of the
/// complete graph K_n has eigenvalues 0 and n (multiplicity n − 1). With one
/// excited unit (unit 0), every error with e_0 = 0 and Σ e_i = 0 is an
/// eigenvector of Γ + κL with eigenvalue κn, so it decays exactly as
/// exp(−κ n t). The constant system is symmetric, so the certified rate is
/// λ_min(Γ + κL) (nalgebra's symmetric eigensolver).
#[test]
fn complete_graph_disagreement_decays_at_kappa_n() {
    for (n, kappa) in [(3usize, 0.5), (5, 1.0), (6, 0.2)] {
        let logs: Vec<Log> = (0..n)
            .map(|i| flow_log(1, 0.1, 30.0, move |_| vec![if i == 0 { 1.0 } else { 0.0 }]))
            .collect();
        let edges: Vec<(usize, usize)> = (0..n)
            .flat_map(|a| (a + 1..n).map(move |b| (a, b)))
            .collect();
        let p = network(logs, &edges, 3.0, 1.0, gains(1.0, kappa));
        let set = p.all_links();
        let schedule = Schedule::new(&p);
        let system = ErrorSystem::of_links(&schedule, &p, &set);
        let w = Window {
            start: 0.0,
            end: 2.0,
            jumps_through_end: false,
        };
        let mut steps: Vec<Step> = Vec::new();
        schedule.steps(&w, &mut steps);
        let mut x: Vec<f64> = (0..n).map(|i| if i == 0 { 0.0 } else { 1.0 }).collect();
        x[n - 1] = -((n - 2) as f64);
        let before: f64 = x.iter().map(|v| v * v).sum::<f64>().sqrt();
        let s = system.propagate(Direction::Forward, &steps, &mut x, &mut Work::default());
        assert_eq!(s, 0.0);
        let after: f64 = x.iter().map(|v| v * v).sum::<f64>().sqrt();
        assert_abs_diff_eq!(
            after / before,
            (-kappa * n as f64 * 2.0).exp(),
            epsilon = 1e-12
        );

        let mut a = DMatrix::<f64>::zeros(n, n);
        for i in 0..n {
            for k in 0..n {
                a[(i, k)] = if i == k {
                    kappa * (n - 1) as f64
                } else {
                    -kappa
                };
            }
        }
        a[(0, 0)] += 1.0;
        let lmin = SymmetricEigen::new(a).eigenvalues.min();
        let table = ExcitationTable::build(&p);
        let c = certify(&p, &table, &set);
        assert_abs_diff_eq!(c.rate.unwrap(), lmin, epsilon = 1e-8);
    }
}

/// Dense reference: the Taylor propagation of one held flow step equals
/// nalgebra's matrix exponential (Padé with scaling and squaring) of the
/// stacked generator, forward and transposed, on random small networks with
/// one-way arcs.
#[test]
fn taylor_flow_step_matches_dense_exponential() {
    let mut rng = Rng(7);
    // p = 1..=7 covers every specialised kernel and the general one.
    for case in 0..14 {
        let n = 2 + case % 3;
        let p = 1 + case % 7;
        let psis: Vec<Vec<f64>> = (0..n)
            .map(|_| (0..p).map(|_| rng.range(-2.0, 2.0)).collect())
            .collect();
        let logs: Vec<Log> = psis
            .iter()
            .map(|v| {
                let v = v.clone();
                flow_log(p, 3.0, 6.0, move |_| v.clone())
            })
            .collect();
        let g = gains(rng.range(0.2, 2.0), rng.range(0.2, 2.0));
        let p_ = network(logs, &[], 3.0, 3.0, g);
        let schedule = Schedule::new(&p_);
        let mut arcs = Vec::new();
        for to in 0..n {
            for from in 0..n {
                if from != to && rng.uniform() < 0.6 {
                    arcs.push((from as u32, to as u32, rng.range(0.1, 1.5)));
                }
            }
        }
        let system = ErrorSystem::new(&schedule, g, arcs.clone());
        // Dense A = −(Γ + κ L⊗I).
        let d = n * p;
        let mut a = DMatrix::<f64>::zeros(d, d);
        for i in 0..n {
            for r in 0..p {
                for c in 0..p {
                    a[(i * p + r, i * p + c)] -= g.flow_gain * psis[i][r] * psis[i][c];
                }
            }
        }
        for &(from, to, w) in &arcs {
            let (f, t) = (from as usize, to as usize);
            for c in 0..p {
                a[(t * p + c, t * p + c)] -= g.flow_coupling * w;
                a[(t * p + c, f * p + c)] += g.flow_coupling * w;
            }
        }
        let h = 3.0;
        let exact = (&a * h).exp();
        let steps = [Step::Flow { k: 0, h }];
        for (dir, reference) in [
            (Direction::Forward, exact.clone()),
            (Direction::Adjoint, exact.transpose()),
        ] {
            for col in 0..d {
                let mut x = vec![0.0; d];
                x[col] = 1.0;
                system.propagate(dir, &steps, &mut x, &mut Work::default());
                let got = DVector::from_vec(x);
                let want = reference.column(col).into_owned();
                assert!(
                    (&got - &want).norm() <= 1e-11 * want.norm().max(1.0),
                    "case {case} column {col}"
                );
            }
        }
    }
}

/// A hybrid log: flows sampled every `h` on `[0, end]` with regressor
/// `f(t)`, and a jump at each of `jumps` (pre-jump regressor `g(k)`).
pub(super) fn hybrid_log(
    p: usize,
    h: f64,
    end: f64,
    jumps: &[f64],
    f: impl Fn(f64) -> Vec<f64>,
    g: impl Fn(usize) -> Vec<f64>,
) -> Log {
    let mut log = flow_log(p, h, end, f);
    let (mut t, mut j, mut psi) = (Vec::new(), Vec::new(), Vec::new());
    let mut next = 0;
    let mut level = 0u32;
    for k in 0..log.t.len() {
        let tk = log.t[k];
        if next < jumps.len() && (jumps[next] - tk).abs() < 1e-9 && k > 0 {
            t.push(tk);
            j.push(level);
            psi.extend(g(next));
            level += 1;
            next += 1;
        }
        t.push(tk);
        j.push(level);
        psi.extend_from_slice(log.row(k));
    }
    log.t = t;
    log.j = j;
    log.psi = psi;
    log
}

/// A random small network: piecewise-constant regressors (zero 40 % of the
/// time), four jumps per unit, a random tree plus maybe one more link, every
/// other link one-way when `one_way`, hybrid windows of 2 s plus jumps when
/// `hybrid` (else 2 s time windows), stride 0.5 s, 20 s logs.
fn random_network(seed: u64, n: usize, p: usize, one_way: bool, hybrid: bool) -> (Problem, Rng) {
    let mut rng = Rng(seed);
    let logs: Vec<Log> = (0..n)
        .map(|_| {
            let values: Vec<Vec<f64>> = (0..41)
                .map(|_| {
                    (0..p)
                        .map(|_| rng.range(-1.5, 1.5) * f64::from(rng.uniform() < 0.6))
                        .collect()
                })
                .collect();
            let kicks: Vec<Vec<f64>> = (0..8)
                .map(|_| (0..p).map(|_| rng.range(-2.0, 2.0)).collect())
                .collect();
            let jumps: Vec<f64> = (0..4)
                .map(|k| 2.5 + 5.0 * k as f64 + 0.5 * rng.below(3) as f64)
                .collect();
            hybrid_log(
                p,
                0.1,
                20.0,
                &jumps,
                move |t| values[((t + 1e-9) / 0.5) as usize].clone(),
                move |k| kicks[k].clone(),
            )
        })
        .collect();
    let mut edges: Vec<(usize, usize)> = (1..n).map(|i| (rng.below(i), i)).collect();
    if rng.uniform() < 0.5 {
        edges.push((0, n - 1));
    }
    let mut problem = network(logs, &edges, 2.0, 0.5, Gains::default());
    if one_way {
        for l in problem.links.iter_mut().step_by(2) {
            if let Ends::TwoWay(a, b) = l.ends {
                l.ends = Ends::OneWay { from: a, to: b };
            }
        }
    }
    if hybrid {
        // Hybrid windows: 2 s of flow plus jumps.
        let mut settings = problem.settings.clone();
        settings.window_kind = WindowKind::Hybrid;
        settings.window = 3.0;
        problem = Problem::from_parts(
            problem.path.clone(),
            settings,
            problem.nodes.clone(),
            problem.links.clone(),
        )
        .unwrap();
    }
    (problem, rng)
}

/// Arguments of [`random_network`]: seed, units, parameters, one-way
/// links, hybrid windows.
fn network_cases() -> impl Strategy<Value = (u64, usize, usize, bool, bool)> {
    (
        0u64..10_000,
        2usize..5,
        1usize..4,
        proptest::bool::ANY,
        proptest::bool::ANY,
    )
}

/// The regressors copied by grid interval (the fast layout) and gathered
/// from the logs at every step give the same propagation, bit for bit.
#[test]
fn propagation_does_not_depend_on_the_regressor_layout() {
    for seed in 0..6 {
        let (problem, _) = random_network(seed, 3, 1 + seed as usize % 4, seed % 2 == 0, false);
        let set = problem.all_links();
        let copied = Schedule::new(&problem);
        let gathered = Schedule::with_copy_limit(&problem, 0);
        let (h0, h1) = copied.horizon();
        let window = Window {
            start: h0,
            end: h1,
            jumps_through_end: true,
        };
        let mut steps = Vec::new();
        copied.steps(&window, &mut steps);
        let d = problem.n() * problem.settings.parameters;
        for dir in [Direction::Forward, Direction::Adjoint] {
            let mut a: Vec<f64> = (0..d).map(|k| 1.0 + k as f64).collect();
            let mut b = a.clone();
            ErrorSystem::of_links(&copied, &problem, &set).propagate(
                dir,
                &steps,
                &mut a,
                &mut Work::default(),
            );
            ErrorSystem::of_links(&gathered, &problem, &set).propagate(
                dir,
                &steps,
                &mut b,
                &mut Work::default(),
            );
            assert_eq!(a, b, "seed {seed} {dir:?}");
        }
    }
}

/// Exhaustive reference for the certificate window: every certificate window
/// of every multiple tried is evaluated, and the rule of docs/theory.md §6
/// (the first multiple whose successor does not improve the rate by 1 %) is
/// applied. Returns (window length, ln ρ).
fn exhaustive_choice(problem: &Problem, set: &LinkSet) -> Option<(f64, f64)> {
    let schedule = Schedule::new(problem);
    let system = ErrorSystem::of_links(&schedule, problem, set);
    let horizon = problem.domain.h1 - problem.domain.h0;
    // (length, ln ρ) of every multiple tried, in order.
    let mut tried: Vec<(f64, f64)> = Vec::new();
    for &m in &MULTIPLES {
        if m > 1 && problem.settings.window * m as f64 > horizon / 2.0 {
            break;
        }
        let windows = certificate_windows(problem, m);
        if windows.is_empty() {
            break;
        }
        let length = windows.iter().map(|w| w.end - w.start).fold(0.0, f64::max);
        let log_rho = windows
            .iter()
            .map(|w| window_log_norm(&system, w, &[]))
            .fold(f64::NEG_INFINITY, f64::max);
        tried.push((length, log_rho));
    }
    if tried.is_empty() {
        return None;
    }
    let rate = |k: usize| (tried[k].1 < 0.0).then(|| -tried[k].1 / tried[k].0);
    let mut best: Option<usize> = None;
    for k in 0..tried.len() {
        let improved = match (best, rate(k)) {
            (_, None) => false,
            (None, Some(_)) => true,
            (Some(b), Some(r)) => r > rate(b).unwrap_or(0.0) * 1.01,
        };
        let stop = best.is_some() && !improved;
        if improved {
            best = Some(k);
        }
        if stop {
            break;
        }
    }
    Some(tried[best.unwrap_or(tried.len() - 1)])
}

/// Time-invariant networks (constant regressors): the rate hardly changes
/// with the window length, so the shortest window is chosen — the case
/// where the sampled first trial must be completed. Checked against the
/// exhaustive reference.
#[test]
fn steady_networks_keep_the_shortest_window_when_longer_ones_do_not_help() {
    let mut shortest = 0;
    for case in 0..8 {
        let n = 2 + case % 3;
        let logs: Vec<Log> = (0..n)
            .map(|i| {
                let c = 0.3 + 0.4 * ((i + case) % 3) as f64;
                flow_log(1, 0.1, 24.0, move |_| vec![c])
            })
            .collect();
        let edges: Vec<(usize, usize)> = (1..n).map(|i| (i - 1, i)).collect();
        let mut problem = network(logs, &edges, 2.0, 1.0, gains(1.0, 0.5));
        if case % 2 == 1 {
            for l in &mut problem.links {
                if let Ends::TwoWay(a, b) = l.ends {
                    l.ends = Ends::OneWay { from: a, to: b };
                }
            }
        }
        let table = ExcitationTable::build(&problem);
        let set = problem.all_links();
        let c = certify(&problem, &table, &set);
        let (length, log_rho) = exhaustive_choice(&problem, &set).unwrap();
        assert!(
            (c.window - length).abs() < 1e-9,
            "case {case}: window {} vs {length}",
            c.window
        );
        assert!(
            (c.contraction.ln() - log_rho).abs() <= 1e-6 * log_rho.abs(),
            "case {case}: ln ρ {} vs {log_rho}",
            c.contraction.ln()
        );
        shortest += usize::from(length == 2.0);
    }
    // The family exercises the completed first trial.
    assert!(
        shortest >= 4,
        "only {shortest} cases keep the shortest window"
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]

    /// The window choice (the first multiple whose successor does not
    /// improve the rate by 1 %) and ρ match an exhaustive evaluation of
    /// every certificate window of every multiple: sampling the first
    /// trial and skipping windows by product bounds change neither
    /// (reference: the rule of docs/theory.md §6 applied by brute force).
    #[test]
    fn window_choice_matches_exhaustive_evaluation(
        (seed, n, p, one_way, hybrid) in network_cases(),
    ) {
        let (problem, _) = random_network(seed, n, p, one_way, hybrid);
        let table = ExcitationTable::build(&problem);
        let set = problem.all_links();
        let c = certify(&problem, &table, &set);
        prop_assume!(c.windows > 0);
        let Some((length, log_rho)) = exhaustive_choice(&problem, &set) else {
            return Ok(());
        };
        prop_assert!((c.window - length).abs() < 1e-9, "window {} vs {}", c.window, length);
        prop_assert!(
            (c.contraction.ln() - log_rho).abs() <= 1e-6 * log_rho.abs().max(1e-3),
            "ln ρ {} vs {}", c.contraction.ln(), log_rho
        );
    }

    /// The certificate is a bound: on random small hybrid networks the
    /// simulated stacked error never leaves c·e^{−λt}·|e(0)| (the definition
    /// of the certificate, docs/theory.md §6; Khalil, "Nonlinear Systems", 3rd ed.,
    /// 2002, §4.6 for uniform exponential stability from the transition
    /// matrix).
    #[test]
    fn simulation_stays_under_the_certified_envelope(
        (seed, n, p, one_way, hybrid) in network_cases(),
    ) {
        let (problem, mut rng) = random_network(seed, n, p, one_way, hybrid);
        let table = ExcitationTable::build(&problem);
        let set = problem.all_links();
        let c = certify(&problem, &table, &set);
        prop_assume!(c.rate.is_some());
        let truth: Vec<f64> = (0..p).map(|_| rng.range(-3.0, 3.0)).collect();
        let options = exmesh::simulate::SimOptions { truth: Some(truth), initial: None };
        let t = exmesh::simulate::simulate(&problem, &set, Some(&c), &options).unwrap();
        prop_assert_eq!(t.within_envelope, Some(true));
        let (rate, factor) = (c.rate.unwrap(), c.transient_factor.unwrap());
        for (k, &time) in t.times.iter().enumerate() {
            let bound = factor * (-rate * (time - t.times[0])).exp() * t.total[0];
            prop_assert!(t.total[k] <= bound * (1.0 + 1e-9), "t = {}: {} > {}", time, t.total[k], bound);
        }
    }

    /// Single-unit guarantee (derived in docs/theory.md §6 with the
    /// Cauchy–Schwarz inequality, the classical argument for gradient
    /// identifiers; Anderson, "Exponential stability of linear equations
    /// arising in adaptive identification", IEEE TAC 22(1), 1977, cited from
    /// memory): if ∫ψψᵀ ≥ μ I over every window of length T and |ψ| ≤ β, then
    /// |e(t+T)|² ≤ (1 − 2γμ/(2 + γ²β⁴T²)) |e(t)|². The numerical certificate is
    /// never slower.
    #[test]
    fn certificate_never_below_the_single_unit_bound(
        seed in 0u64..10_000,
        p in 2usize..4,
        g in 0.2f64..3.0,
    ) {
        let mut rng = Rng(seed);
        // Piecewise-constant random regressor, new value every 0.5 s.
        let values: Vec<Vec<f64>> = (0..61)
            .map(|_| (0..p).map(|_| rng.range(-1.5, 1.5)).collect())
            .collect();
        let log = flow_log(p, 0.1, 30.0, move |t| values[((t + 1e-9) / 0.5) as usize].clone());
        let problem = network(vec![log], &[], 3.0, 0.5, gains(g, 1.0));
        let table = ExcitationTable::build(&problem);
        let mu = (0..table.windows().len())
            .map(|w| eigenvalues(p, table.gramian(w, NodeId(0)))[0] / g)
            .fold(f64::INFINITY, f64::min);
        let beta2 = problem.nodes[0]
            .log
            .psi
            .chunks(p)
            .map(|r| r.iter().map(|v| v * v).sum::<f64>())
            .fold(0.0f64, f64::max);
        let t = problem.settings.window;
        let factor = 1.0 - 2.0 * g * mu / (2.0 + g * g * beta2 * beta2 * t * t);
        prop_assume!(mu > 1e-6 && factor > 0.0);
        let analytic = -0.5 * factor.ln() / t;
        let schedule = Schedule::new(&problem);
        let c = certify_with(&problem, &table, &schedule, &LinkSet::default(), &Default::default());
        let rate = c.rate.expect("a PE unit is certified");
        prop_assert!(rate >= analytic * (1.0 - 1e-9), "{} < {}", rate, analytic);
    }
}
