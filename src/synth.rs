//! Seeded synthetic networks: the demo problems' logs and the planning
//! benchmark instances. Everything here is invented data for demos,
//! benchmarks and tests of internal consistency, never a reference.

use crate::problem::{Ends, Gains, Link, Node, NodeId, Problem, Settings};
use crate::signal::{Log, WindowKind};
use std::f64::consts::PI;
use std::fmt::Write as _;
use std::path::PathBuf;

pub use crate::rng::Rng;

/// The i-th standard basis vector of R^p.
pub fn basis(p: usize, i: usize) -> Vec<f64> {
    (0..p).map(|r| if r == i { 1.0 } else { 0.0 }).collect()
}

/// How a unit's regressor behaves: flows along `flow` directions with
/// sinusoidal amplitudes, jumps along `jump` directions in turn.
#[derive(Debug, Clone)]
pub struct Pattern {
    /// Flow directions (empty: ψ = 0 during flows).
    pub flow: Vec<Vec<f64>>,
    /// Jump directions, used in turn (empty: the unit does not jump).
    pub jump: Vec<Vec<f64>>,
    /// Base angular frequency, rad/s.
    pub omega: f64,
    /// Phase, rad.
    pub phase: f64,
    /// Amplitude of flows; jumps use 1.5 times the unit jump direction.
    pub amplitude: f64,
}

impl Pattern {
    /// A pattern with random frequency, phase and amplitude.
    pub fn random(flow: Vec<Vec<f64>>, jump: Vec<Vec<f64>>, rng: &mut Rng) -> Self {
        Pattern {
            flow,
            jump,
            omega: rng.range(0.25, 0.8),
            phase: rng.range(0.0, 2.0 * PI),
            amplitude: rng.range(0.8, 1.2),
        }
    }

    /// Regressor during flows at time t.
    pub fn flow_psi(&self, t: f64, p: usize) -> Vec<f64> {
        let mut psi = vec![0.0; p];
        let m = self.flow.len();
        for (k, u) in self.flow.iter().enumerate() {
            // One direction: a positive ripple. Two: sine and cosine (rank 2).
            // More: distinct frequencies, since sinusoids of one frequency
            // span only two dimensions.
            let kf = k as f64;
            let a = match m {
                1 => 1.0 + 0.5 * (self.omega * t + self.phase).sin(),
                2 => (self.omega * t + self.phase + PI * kf / 2.0).sin(),
                _ => (self.omega * (1.0 + 0.45 * kf) * t + self.phase + kf).sin(),
            };
            for (x, ui) in psi.iter_mut().zip(u) {
                *x += self.amplitude * a * ui;
            }
        }
        psi
    }

    /// Pre-jump regressor of the unit's k-th jump.
    pub fn jump_psi(&self, k: usize, p: usize) -> Vec<f64> {
        match self.jump.get(k % self.jump.len().max(1)) {
            Some(d) => d.iter().map(|x| 1.5 * x).collect(),
            None => vec![0.0; p],
        }
    }
}

/// A unit's signal: pattern, sampling and jump instants.
#[derive(Debug, Clone)]
pub struct UnitSignal {
    /// Regressor behaviour.
    pub pattern: Pattern,
    /// Sample step, s.
    pub dt: f64,
    /// First sample time.
    pub start: f64,
    /// Last sample time.
    pub end: f64,
    /// Jump instants, sorted, multiples of 1 ms.
    pub jumps: Vec<f64>,
}

impl UnitSignal {
    /// The rows (t, j, ψ) of the sampled signal. Times are rounded to 1 ms
    /// so that the CSV text and the in-memory log agree exactly.
    pub fn rows(&self, p: usize) -> Vec<(f64, u32, Vec<f64>)> {
        let ms = |t: f64| (t * 1000.0).round() / 1000.0;
        let steps = ((self.end - self.start) / self.dt).round() as u64;
        let mut out = Vec::with_capacity(steps as usize + 2 * self.jumps.len() + 1);
        let mut next_jump = 0;
        let mut j = 0u32;
        for k in 0..=steps {
            let t = ms(self.start + k as f64 * self.dt);
            while next_jump < self.jumps.len() && self.jumps[next_jump] <= t + 1e-9 {
                let tau = ms(self.jumps[next_jump]);
                out.push((tau, j, self.pattern.jump_psi(j as usize, p)));
                j += 1;
                out.push((tau, j, self.pattern.flow_psi(tau, p)));
                next_jump += 1;
            }
            if out.last().is_none_or(|r: &(f64, u32, Vec<f64>)| r.0 < t) {
                out.push((t, j, self.pattern.flow_psi(t, p)));
            }
        }
        out
    }

    /// The signal as a CSV log with a `y = ψᵀθ` column; numbers are written
    /// with 6 decimals, and `log` below parses the same text.
    pub fn csv(&self, p: usize, theta: &[f64], comment: &str) -> String {
        let mut text = String::new();
        for line in comment.lines() {
            writeln!(text, "# {line}").unwrap();
        }
        let header: Vec<String> = (1..=p).map(|k| format!("psi{k}")).collect();
        writeln!(text, "t,j,{},y", header.join(",")).unwrap();
        let num = |x: f64| {
            let s = format!("{x:.6}");
            if s == "-0.000000" {
                "0.000000".to_string()
            } else {
                s
            }
        };
        for (t, j, psi) in self.rows(p) {
            let y: f64 = psi.iter().zip(theta).map(|(a, b)| a * b).sum();
            let cols: Vec<String> = psi.iter().map(|&x| num(x)).collect();
            writeln!(text, "{t:.3},{j},{},{}", cols.join(","), num(y)).unwrap();
        }
        text
    }

    /// The signal as an in-memory log (full precision).
    pub fn log(&self, p: usize, theta: &[f64], path: PathBuf) -> Log {
        let rows = self.rows(p);
        let mut log = Log {
            path,
            p,
            t: Vec::with_capacity(rows.len()),
            j: Vec::with_capacity(rows.len()),
            psi: Vec::with_capacity(rows.len() * p),
            y: Some(Vec::with_capacity(rows.len())),
        };
        for (t, j, psi) in rows {
            log.t.push(t);
            log.j.push(j);
            log.y
                .as_mut()
                .unwrap()
                .push(psi.iter().zip(theta).map(|(a, b)| a * b).sum());
            log.psi.extend(psi);
        }
        log
    }
}

/// Shared jump instants plus `own` random ones in (start, end), rounded to
/// 0.1 s, sorted and distinct.
pub fn jump_times(rng: &mut Rng, shared: &[f64], own: usize, start: f64, end: f64) -> Vec<f64> {
    let mut v: Vec<f64> = shared.to_vec();
    for _ in 0..own {
        v.push((rng.range(start + 1.0, end - 1.0) * 10.0).round() / 10.0);
    }
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
}

/// Excitation class of a benchmark unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Class {
    /// No excitation at all.
    None,
    /// One direction.
    Rank1,
    /// Two directions.
    Rank2,
    /// Every direction.
    Full,
}

/// Excitation classes as cumulative shares: a draw below `[0]` is rank 1,
/// below `[1]` rank 2, below `[2]` full rank, the rest none.
pub type Mix = [f64; 3];

/// The benchmark's mix: 30 % rank 1, 40 % rank 2, 10 % full rank, 20 %
/// none.
pub const STANDARD_MIX: Mix = [0.3, 0.7, 0.8];

/// One benchmark unit's class and signal over 0–200 s sampled every `dt`:
/// rank-1 units flow or jump along one direction, rank-2 units flow, flow
/// and jump, or jump along two, full-rank units flow along every axis;
/// jumps come at the `shared` instants plus a few of their own.
pub fn unit_signal(
    rng: &mut Rng,
    mix: Mix,
    p: usize,
    dt: f64,
    shared: &[f64],
) -> (Class, UnitSignal) {
    let draw = rng.uniform();
    let class = match draw {
        x if x < mix[0] => Class::Rank1,
        x if x < mix[1] => Class::Rank2,
        x if x < mix[2] => Class::Full,
        _ => Class::None,
    };
    let style = rng.below(3);
    let (flow, jump, own) = match class {
        Class::None => (vec![], vec![], 0),
        Class::Rank1 => {
            let u = rng.unit_vector(p);
            if style == 0 {
                (vec![], vec![u], 3)
            } else {
                (vec![u], vec![], 0)
            }
        }
        Class::Rank2 => {
            let (u, v) = (rng.unit_vector(p), rng.unit_vector(p));
            match style {
                0 => (vec![u, v], vec![], 0),
                1 => (vec![u], vec![v], 4),
                _ => (vec![], vec![u, v], 6),
            }
        }
        Class::Full => ((0..p).map(|r| basis(p, r)).collect(), vec![], 0),
    };
    let mut pattern = Pattern::random(flow, jump, rng);
    if class == Class::None {
        pattern.amplitude = 0.0;
    }
    let jumps = if pattern.jump.is_empty() {
        vec![]
    } else {
        jump_times(rng, shared, own, 0.0, 200.0)
    };
    (
        class,
        UnitSignal {
            pattern,
            dt,
            start: 0.0,
            end: 200.0,
            jumps,
        },
    )
}

/// A two-way benchmark candidate between units a and b, d km apart, at
/// cost 500 + 300·d rounded to a whole number.
fn bench_link(nodes: &[Node], a: usize, b: usize, d: f64) -> Link {
    Link {
        id: format!("{}<->{}", nodes[a].id, nodes[b].id),
        ends: Ends::TwoWay(NodeId(a as u32), NodeId(b as u32)),
        cost: (500.0 + 300.0 * d).round(),
        weight: 1.0,
        installed: false,
        required: false,
        generated: true,
    }
}

/// The planning benchmark instance: `n` units uniform in a square of side
/// √n km, two-way candidates within the radius √(8/π) km (mean degree about
/// 8) at cost 500 + 300·km, p = 4, 200 s logs sampled every 0.1 s with jumps
/// shared every 10 s and a few own ones, classes drawn about 30 % rank 1,
/// 40 % rank 2, 10 % full rank, 20 % none, a 20 s window, and μ_req set to
/// `mu_fraction` times the median level of the full-rank units.
///
/// # Panics
/// Never for n ≥ 1.
pub fn bench_problem(n: usize, seed: u64, mu_fraction: f64) -> Problem {
    bench_problem_sized(n, seed, mu_fraction, 0.1)
}

/// [`bench_problem`] with the logs sampled every `dt` seconds over the same
/// 200 s (so 200/`dt` samples per unit), for the certificate benchmarks.
///
/// # Panics
/// Never for n ≥ 1 and 0 < dt ≤ 1.
// Long function: A seeded generator (positions, logs, candidates) whose random draws must
// stay in this order for the instances to stay the same.
pub fn bench_problem_sized(n: usize, seed: u64, mu_fraction: f64, dt: f64) -> Problem {
    let p = 4;
    let mut rng = Rng(seed);
    let theta = [1.0, -0.5, 0.25, 2.0];
    let side = (n as f64).sqrt();
    let shared: Vec<f64> = (1..20).map(|k| 10.0 * k as f64).collect();
    let mut nodes = Vec::with_capacity(n);
    let mut classes = Vec::with_capacity(n);
    for k in 0..n {
        let pos = [rng.range(0.0, side), rng.range(0.0, side)];
        let (class, signal) = unit_signal(&mut rng, STANDARD_MIX, p, dt, &shared);
        let id = format!("u{k:03}");
        nodes.push(Node {
            log: signal.log(p, &theta, PathBuf::from(format!("{id}.csv"))),
            id,
            position: Some(pos),
            lat_lon: None,
            max_links: None,
        });
        classes.push(class);
    }
    let radius = (8.0 / PI).sqrt();
    let mut links = Vec::new();
    for a in 0..n {
        for b in a + 1..n {
            let (pa, pb) = (nodes[a].position.unwrap(), nodes[b].position.unwrap());
            let d = (pa[0] - pb[0]).hypot(pa[1] - pb[1]);
            if d <= radius {
                links.push(bench_link(&nodes, a, b, d));
            }
        }
    }
    // Join the pieces of the radius graph (an isolated unit could never be
    // excited): link the closest pair between the first piece and the rest
    // until the candidate graph is connected.
    loop {
        let mut piece: Vec<usize> = (0..n).collect();
        for l in &links {
            if let Ends::TwoWay(a, b) = l.ends {
                join(&mut piece, a.index(), b.index());
            }
        }
        let roots: Vec<usize> = (0..n).map(|v| root(&mut piece, v)).collect();
        if roots.iter().all(|&r| r == roots[0]) {
            break;
        }
        let mut best: Option<(f64, usize, usize)> = None;
        for a in (0..n).filter(|&a| roots[a] == roots[0]) {
            for b in (0..n).filter(|&b| roots[b] != roots[0]) {
                let (pa, pb) = (nodes[a].position.unwrap(), nodes[b].position.unwrap());
                let d = (pa[0] - pb[0]).hypot(pa[1] - pb[1]);
                if best.is_none_or(|(bd, _, _)| d < bd) {
                    best = Some((d, a.min(b), a.max(b)));
                }
            }
        }
        let (d, a, b) = best.expect("two pieces have a closest pair");
        links.push(bench_link(&nodes, a, b, d));
    }
    with_required_excitation(
        format!("benchmark n={n} seed={seed}"),
        "bench.toml",
        p,
        (nodes, &classes, links),
        mu_fraction,
        |_| 1.0,
    )
}

/// Root of v's piece in a union–find forest (paths compressed on the way).
pub(crate) fn root(piece: &mut [usize], v: usize) -> usize {
    let mut r = v;
    while piece[r] != r {
        r = piece[r];
    }
    let mut x = v;
    while piece[x] != r {
        let next = piece[x];
        piece[x] = r;
        x = next;
    }
    r
}

/// Joins the pieces of a and b (the smaller root stays the root); true when
/// they were apart.
pub(crate) fn join(piece: &mut [usize], a: usize, b: usize) -> bool {
    let (ra, rb) = (root(piece, a), root(piece, b));
    piece[ra.max(rb)] = ra.min(rb);
    ra != rb
}

/// A synthetic problem (20 s time windows, default gains) with μ_req set
/// to `mu_fraction` times the median level of the full-rank units, or
/// `fallback(table)` times it when there are none.
///
/// # Panics
/// When the logs do not overlap (never for the generators here).
pub(crate) fn with_required_excitation(
    name: String,
    file: &str,
    p: usize,
    (nodes, classes, links): (Vec<Node>, &[Class], Vec<Link>),
    mu_fraction: f64,
    fallback: impl FnOnce(&crate::ExcitationTable) -> f64,
) -> Problem {
    let mut settings = Settings {
        name,
        parameters: p,
        window: 20.0,
        window_kind: WindowKind::Time,
        stride: None,
        min_excitation: None,
        target_rate: None,
        gains: Gains::default(),
    };
    let probe = Problem::from_parts(PathBuf::from(file), settings.clone(), nodes.clone(), vec![])
        .expect("synthetic logs overlap");
    let table = crate::ExcitationTable::build(&probe);
    let mut full: Vec<f64> = (0..nodes.len())
        .filter(|&k| classes[k] == Class::Full)
        .map(|k| table.level(&[NodeId(k as u32)]).value)
        .collect();
    full.sort_by(f64::total_cmp);
    let reference = match full.get(full.len() / 2) {
        Some(&r) => r,
        None => fallback(&table),
    };
    settings.min_excitation = Some(mu_fraction * reference);
    Problem::from_parts(PathBuf::from(file), settings, nodes, links)
        .expect("synthetic logs overlap")
}

/// The certificate benchmark: [`bench_problem_sized`] with a 10 s stride and
/// jump coupling 0.1, and a link set made of a structural plan (the
/// incumbent of a search stopped by a node limit of 0: greedy, repaired and
/// exchanged, the same on every machine) plus the cheapest other candidates
/// until the digraph has about 4·n arcs.
///
/// # Panics
/// Never for n ≥ 2 and 0 < dt ≤ 1.
pub fn certificate_bench(n: usize, seed: u64, dt: f64) -> (Problem, crate::problem::LinkSet) {
    use crate::problem::{LinkId, LinkSet};
    let base = bench_problem_sized(n, seed, 0.03, dt);
    let mut settings = base.settings.clone();
    settings.stride = Some(10.0);
    settings.gains.jump_coupling = 0.1;
    let problem = Problem::from_parts(base.path.clone(), settings, base.nodes, base.links)
        .expect("benchmark logs overlap");
    let table = crate::ExcitationTable::build(&problem);
    let plan = crate::plan::plan(
        &problem,
        &table,
        &crate::plan::Options {
            node_limit: Some(0),
            progress: crate::progress::Sink::silent(),
            ..Default::default()
        },
    );
    let all = problem.all_links();
    let mut ids: Vec<LinkId> = plan.link_set(&problem).ids().to_vec();
    let mut rest: Vec<LinkId> = all
        .ids()
        .iter()
        .copied()
        .filter(|l| !ids.contains(l))
        .collect();
    rest.sort_by(|&a, &b| {
        problem
            .link(a)
            .cost
            .total_cmp(&problem.link(b).cost)
            .then(a.cmp(&b))
    });
    for l in rest {
        if problem.arcs(&LinkSet::new(ids.clone())).len() >= 4 * n {
            break;
        }
        ids.push(l);
    }
    (problem, LinkSet::new(ids))
}
