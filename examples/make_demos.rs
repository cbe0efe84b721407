//! Writes the demo problems under `problems/` from a fixed seed.
//!
//! Run: `cargo run --example make_demos` (rewrites `problems/plateau-masts`
//! and `problems/delta-substations`). The scenarios are invented. Logs are
//! noise-free: `y = ψᵀθ` with the true parameter vector stated in each
//! problem file's header comment.

use std::f64::consts::PI;
use std::fmt::Write as _;
use std::fs;
use std::path::Path;

/// splitmix64: a small, fixed pseudo-random generator (Steele, Lea & Flood,
/// "Fast splittable pseudorandom number generators", OOPSLA 2014).
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    fn range(&mut self, a: f64, b: f64) -> f64 {
        a + (b - a) * self.uniform()
    }
    fn unit_vector(&mut self, p: usize) -> Vec<f64> {
        loop {
            let v: Vec<f64> = (0..p).map(|_| self.range(-1.0, 1.0)).collect();
            let n = v.iter().map(|x| x * x).sum::<f64>().sqrt();
            if n > 0.2 {
                return v.into_iter().map(|x| x / n).collect();
            }
        }
    }
}

/// How a unit's regressor behaves.
#[derive(Clone)]
struct Pattern {
    /// Flow directions: ψ = Σ_k a_k(t) u_k with a_k sinusoids in quadrature.
    flow: Vec<Vec<f64>>,
    /// Jump directions, used in turn at the unit's jumps.
    jump: Vec<Vec<f64>>,
    omega: f64,
    phase: f64,
    amplitude: f64,
}

impl Pattern {
    fn flow_psi(&self, t: f64, p: usize) -> Vec<f64> {
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
}

struct Unit {
    id: String,
    pattern: Pattern,
    dt: f64,
    start: f64,
    end: f64,
    jumps: Vec<f64>,
    position: Option<[f64; 2]>,
}

fn fmt_num(x: f64) -> String {
    let s = format!("{x:.6}");
    if s == "-0.000000" {
        "0.000000".to_string()
    } else {
        s
    }
}

fn write_log(path: &Path, unit: &Unit, p: usize, theta: &[f64]) {
    let mut text = String::new();
    writeln!(
        text,
        "# regressor log of unit {} (demo data, generated)",
        unit.id
    )
    .unwrap();
    let header: Vec<String> = (1..=p).map(|k| format!("psi{k}")).collect();
    writeln!(text, "t,j,{},y", header.join(",")).unwrap();
    let row = |text: &mut String, t: f64, j: u32, psi: &[f64]| {
        let y: f64 = psi.iter().zip(theta).map(|(a, b)| a * b).sum();
        let cols: Vec<String> = psi.iter().map(|&x| fmt_num(x)).collect();
        writeln!(text, "{t:.3},{j},{},{}", cols.join(","), fmt_num(y)).unwrap();
    };
    let steps = ((unit.end - unit.start) / unit.dt).round() as u64;
    let mut jumps = unit.jumps.iter().copied().peekable();
    let mut j = 0u32;
    for k in 0..=steps {
        let t = unit.start + k as f64 * unit.dt;
        while let Some(&tau) = jumps.peek() {
            if tau > t + 1e-9 {
                break;
            }
            jumps.next();
            let dir = &unit.pattern.jump[j as usize % unit.pattern.jump.len()];
            let pre: Vec<f64> = dir.iter().map(|x| 1.5 * x).collect();
            row(&mut text, tau, j, &pre);
            j += 1;
            row(&mut text, tau, j, &unit.pattern.flow_psi(tau, p));
        }
        let last_tau_here = unit.jumps.iter().any(|&tau| (tau - t).abs() < 1e-9);
        if !last_tau_here {
            row(&mut text, t, j, &unit.pattern.flow_psi(t, p));
        }
    }
    fs::write(path, text).unwrap();
}

fn basis(p: usize, k: usize) -> Vec<f64> {
    (0..p).map(|r| if r == k { 1.0 } else { 0.0 }).collect()
}

fn pattern(flow: Vec<Vec<f64>>, jump: Vec<Vec<f64>>, rng: &mut Rng) -> Pattern {
    Pattern {
        flow,
        jump,
        omega: rng.range(0.25, 0.8),
        phase: rng.range(0.0, 2.0 * PI),
        amplitude: rng.range(0.8, 1.2),
    }
}

fn jump_times(rng: &mut Rng, shared: &[f64], own: usize, start: f64, end: f64) -> Vec<f64> {
    let mut v: Vec<f64> = shared.to_vec();
    for _ in 0..own {
        v.push((rng.range(start + 1.0, end - 1.0) * 10.0).round() / 10.0);
    }
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
}

fn plateau(root: &Path) {
    let dir = root.join("plateau-masts");
    fs::create_dir_all(dir.join("logs")).unwrap();
    let mut rng = Rng(0x5EED_0001);
    let p = 3;
    let theta = [0.8, -1.3, 2.1];
    let e = |k| basis(p, k);
    let diag = vec![
        std::f64::consts::FRAC_1_SQRT_2,
        std::f64::consts::FRAC_1_SQRT_2,
        0.0,
    ];
    let shared: Vec<f64> = (1..6).map(|k| 40.0 * k as f64).collect();
    // (id, flow directions, jump directions, own jumps, sample step, position)
    type Spec = (
        &'static str,
        Vec<Vec<f64>>,
        Vec<Vec<f64>>,
        usize,
        f64,
        [f64; 2],
    );
    let specs: Vec<Spec> = vec![
        ("mast-north", vec![e(0), e(1)], vec![], 0, 0.1, [0.0, 3.0]),
        ("mast-cairn", vec![e(2)], vec![], 0, 0.2, [1.1, 2.6]),
        ("mast-fold", vec![], vec![e(1), e(2)], 6, 0.1, [2.0, 3.1]),
        ("mast-weir", vec![e(0)], vec![e(2)], 4, 0.25, [0.4, 1.6]),
        ("mast-heath", vec![diag.clone()], vec![], 0, 0.2, [1.5, 1.2]),
        ("mast-relay", vec![], vec![e(0)], 0, 0.1, [2.6, 1.8]),
        (
            "mast-summit",
            vec![e(0), e(1), e(2)],
            vec![],
            0,
            0.1,
            [3.4, 0.6],
        ),
        ("mast-ford", vec![], vec![e(0)], 5, 0.2, [2.2, 0.2]),
    ];
    let mut toml = String::new();
    writeln!(
        toml,
        "# Demo scenario (invented): eight weather masts on the Vellamark plateau share"
    )
    .unwrap();
    writeln!(
        toml,
        "# estimates of a 3-parameter wind-correction model over radio links."
    )
    .unwrap();
    writeln!(
        toml,
        "# Logs are generated by `cargo run --example make_demos`; true parameter"
    )
    .unwrap();
    writeln!(toml, "# theta = {theta:?}.").unwrap();
    writeln!(toml, "\n[network]\nname = \"Vellamark plateau masts\"\nparameters = {p}\nwindow = 30.0\nwindow_kind = \"time\"\nstride = 2.0\nmin_excitation = 0.05\n").unwrap();
    writeln!(toml, "[estimator]\nflow_gain = 1.0\njump_gain = 1.0\nflow_coupling = 1.0\njump_coupling = 0.2\nlink_weight = 1.0\n").unwrap();
    for (k, (id, flow, jump, own, dt, pos)) in specs.into_iter().enumerate() {
        let has_jumps = !jump.is_empty();
        let start = if k % 3 == 1 { 0.5 } else { 0.0 };
        let unit = Unit {
            id: id.to_string(),
            pattern: pattern(
                flow,
                if has_jumps { jump } else { vec![vec![0.0; p]] },
                &mut rng,
            ),
            dt,
            start,
            end: 240.0,
            jumps: if has_jumps {
                jump_times(&mut rng, &shared, own, start, 240.0)
            } else {
                vec![]
            },
            position: Some(pos),
        };
        write_log(&dir.join(format!("logs/{id}.csv")), &unit, p, &theta);
        let pos = unit.position.unwrap();
        writeln!(
            toml,
            "[[node]]\nid = \"{id}\"\nlog = \"logs/{id}.csv\"\nposition = [{:.2}, {:.2}]\n",
            pos[0], pos[1]
        )
        .unwrap();
    }
    let links: [(&str, &str, f64, bool, bool); 15] = [
        ("mast-north", "mast-cairn", 1300.0, true, true),
        ("mast-cairn", "mast-fold", 1100.0, true, false),
        ("mast-north", "mast-weir", 1500.0, true, false),
        ("mast-weir", "mast-heath", 1250.0, true, false),
        ("mast-heath", "mast-cairn", 1400.0, true, false),
        ("mast-heath", "mast-relay", 1200.0, true, false),
        ("mast-fold", "mast-relay", 1450.0, true, false),
        ("mast-relay", "mast-summit", 1150.0, true, false),
        ("mast-summit", "mast-ford", 1350.0, true, false),
        ("mast-ford", "mast-heath", 1700.0, true, false),
        ("mast-weir", "mast-ford", 2100.0, true, false),
        ("mast-summit", "mast-heath", 900.0, false, false),
        ("mast-summit", "mast-fold", 1000.0, false, false),
        ("mast-fold", "mast-north", 950.0, false, false),
        ("mast-ford", "mast-weir", 800.0, false, false),
    ];
    for (a, b, cost, two_way, installed) in links {
        if two_way {
            writeln!(
                toml,
                "[[link]]\nbetween = [\"{a}\", \"{b}\"]\ncost = {cost:.1}"
            )
            .unwrap();
        } else {
            writeln!(
                toml,
                "[[link]]\nfrom = \"{a}\"\nto = \"{b}\"\ncost = {cost:.1}"
            )
            .unwrap();
        }
        if installed {
            writeln!(toml, "installed = true").unwrap();
        }
        writeln!(toml).unwrap();
    }
    fs::write(dir.join("problem.toml"), toml).unwrap();
}

fn delta(root: &Path) {
    let dir = root.join("delta-substations");
    fs::create_dir_all(dir.join("logs")).unwrap();
    let mut rng = Rng(0x5EED_0002);
    let p = 4;
    let theta = [1.2, -0.4, 0.9, -2.0];
    let n = 40;
    let side = (n as f64).sqrt();
    let shared: Vec<f64> = (1..8).map(|k| 30.0 * k as f64).collect();
    let mut toml = String::new();
    writeln!(
        toml,
        "# Demo scenario (invented): forty substations of the Orrin delta grid share"
    )
    .unwrap();
    writeln!(
        toml,
        "# estimates of a 4-parameter load model; links are generated within range."
    )
    .unwrap();
    writeln!(
        toml,
        "# Logs are generated by `cargo run --example make_demos`; true parameter"
    )
    .unwrap();
    writeln!(toml, "# theta = {theta:?}.").unwrap();
    writeln!(toml, "\n[network]\nname = \"Orrin delta substations\"\nparameters = {p}\nwindow = 40.0\nwindow_kind = \"time\"\nstride = 2.0\nmin_excitation = 0.5\n").unwrap();
    writeln!(
        toml,
        "[candidates]\nrange = 1.9\nfixed_cost = 500.0\ncost_per_km = 300.0\n"
    )
    .unwrap();
    for k in 0..n {
        let id = format!("sub-{:02}", k + 1);
        let pos = [rng.range(0.0, side), rng.range(0.0, side)];
        // About 30 % rank 1, 40 % rank 2, 10 % full rank, 20 % none.
        let class = k % 10;
        let (flow, jump, own) = match class {
            0 | 3 | 6 => {
                let u = rng.unit_vector(p);
                if class == 3 {
                    (vec![], vec![u], 3)
                } else {
                    (vec![u], vec![], 0)
                }
            }
            1 | 4 | 7 | 8 => {
                let (u, v) = (rng.unit_vector(p), rng.unit_vector(p));
                match class {
                    1 => (vec![u, v], vec![], 0),
                    4 => (vec![u], vec![v], 4),
                    7 => (vec![], vec![u, v], 6),
                    _ => (vec![u, v], vec![], 0),
                }
            }
            9 => ((0..p).map(|r| basis(p, r)).collect(), vec![], 0),
            _ => (vec![], vec![], 0),
        };
        let has_jumps = !jump.is_empty();
        let start = [0.0, 0.25, 0.5][k % 3];
        let silent = flow.is_empty() && !has_jumps;
        let mut pat = pattern(
            if silent { vec![vec![0.0; p]] } else { flow },
            if has_jumps { jump } else { vec![vec![0.0; p]] },
            &mut rng,
        );
        if silent {
            pat.amplitude = 0.0;
        }
        let unit = Unit {
            id: id.clone(),
            pattern: pat,
            dt: if k % 2 == 0 { 0.5 } else { 0.4 },
            start,
            end: 240.0,
            jumps: if has_jumps {
                jump_times(&mut rng, &shared, own, start, 240.0)
            } else {
                vec![]
            },
            position: Some(pos),
        };
        write_log(&dir.join(format!("logs/{id}.csv")), &unit, p, &theta);
        writeln!(
            toml,
            "[[node]]\nid = \"{id}\"\nlog = \"logs/{id}.csv\"\nposition = [{:.3}, {:.3}]\n",
            pos[0], pos[1]
        )
        .unwrap();
    }
    // A control house listens to two feeders one way (cheap receive-only radios).
    for (from, to, cost) in [
        ("sub-10", "sub-05", 450.0),
        ("sub-20", "sub-15", 420.0),
        ("sub-30", "sub-25", 480.0),
    ] {
        writeln!(
            toml,
            "[[link]]\nfrom = \"{from}\"\nto = \"{to}\"\ncost = {cost:.1}\n"
        )
        .unwrap();
    }
    fs::write(dir.join("problem.toml"), toml).unwrap();
}

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("problems");
    plateau(&root);
    delta(&root);
    println!("wrote {}", root.display());
}
