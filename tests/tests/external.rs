//! Checks against sources outside the project: textbook examples and closed
//! forms.

use super::fixtures::{Folder, log_text};
use approx::assert_abs_diff_eq;
use exmesh::excitation::{eigenvalues, unpack};
use exmesh::problem::{self, Arc, NodeId};
use exmesh::topology::Topology;
use exmesh::{ExcitationTable, Problem};

fn arc(from: usize, to: usize) -> Arc {
    Arc {
        from: NodeId(from as u32),
        to: NodeId(to as u32),
        weight: 1.0,
    }
}

/// Cormen, Leiserson, Rivest & Stein, "Introduction to Algorithms", 3rd ed.,
/// 2009, Fig. 22.9: the 8-vertex digraph whose strongly connected components
/// are {a,b,e}, {c,d}, {f,g}, {h}. Edge list as recalled from the figure
/// (from memory; the components match the figure's caption).
#[test]
fn clrs_figure_22_9_condensation() {
    let (a, b, c, d, e, f, g, h) = (0, 1, 2, 3, 4, 5, 6, 7);
    let arcs = [
        arc(a, b),
        arc(b, c),
        arc(b, e),
        arc(b, f),
        arc(c, d),
        arc(c, g),
        arc(d, c),
        arc(d, h),
        arc(e, a),
        arc(e, f),
        arc(f, g),
        arc(g, f),
        arc(g, h),
        arc(h, h),
    ];
    let topo = Topology::analyse(8, &arcs);
    let comps: Vec<Vec<u32>> = topo
        .components
        .iter()
        .map(|c| c.nodes.iter().map(|v| v.0).collect())
        .collect();
    assert_eq!(comps, vec![vec![0, 1, 4], vec![2, 3], vec![5, 6], vec![7]]);
    let sources: Vec<Vec<u32>> = topo
        .sources()
        .map(|c| c.nodes.iter().map(|v| v.0).collect())
        .collect();
    assert_eq!(sources, vec![vec![0, 1, 4]]);
    // The source component reaches every vertex.
    assert_eq!(topo.sources().next().unwrap().reaches.len(), 8);
}

/// Loads a one-unit problem from an inline log.
fn one_unit(p: usize, log: String, window: f64, extra: &str) -> Problem {
    let folder = Folder::new();
    folder.write("u.csv", &log);
    let toml = format!(
        "[network]\nparameters = {p}\nwindow = {window}\n{extra}\n[[node]]\nid = \"u\"\nlog = \"u.csv\"\n"
    );
    let path = folder.write("p.toml", &toml);
    problem::load(&path).unwrap()
}

/// Closed form (derived in docs/theory.md): for ψ = [sin ωt, cos ωt],
/// ∫_s^{s+T} ψψᵀ dt has eigenvalues T/2 ± |sin ωT|/(2ω), for every s; over a
/// full period 2π/ω it is (π/ω) I. The log is a zero-order-hold sampling
/// with step h, so agreement is within O(h).
#[test]
fn sine_cosine_gramian_closed_form() {
    let omega = 0.7;
    let h = 0.001;
    let rows: Vec<(f64, u32, Vec<f64>)> = (0..=30_000)
        .map(|k| {
            let t = k as f64 * h;
            (t, 0, vec![(omega * t).sin(), (omega * t).cos()])
        })
        .collect();
    let log = log_text(2, &rows);
    let window = 5.0;
    let p = one_unit(2, log.clone(), window, "stride = 1.7");
    let table = ExcitationTable::build(&p);
    let expected = window / 2.0 - (omega * window).sin().abs() / (2.0 * omega);
    assert!(table.windows().len() > 10);
    for w in 0..table.windows().len() {
        let lmin = eigenvalues(2, table.gramian(w, NodeId(0)))[0];
        assert_abs_diff_eq!(lmin, expected, epsilon = 2.0 * h);
    }
    // Full period: (π/ω) I.
    let period = 2.0 * std::f64::consts::PI / omega;
    let p = one_unit(2, log, period, "stride = 3.0");
    let table = ExcitationTable::build(&p);
    let g = unpack(2, table.gramian(0, NodeId(0)));
    assert_abs_diff_eq!(g[(0, 0)], std::f64::consts::PI / omega, epsilon = 2.0 * h);
    assert_abs_diff_eq!(g[(1, 1)], std::f64::consts::PI / omega, epsilon = 2.0 * h);
    assert_abs_diff_eq!(g[(0, 1)], 0.0, epsilon = 2.0 * h);
}

/// Goodwin & Sin, "Adaptive Filtering, Prediction and Control", 1984, the
/// normalised projection algorithm: with gain 1 and ψ = k e_i, one step
/// multiplies the error component along e_i by exactly 1/(1 + k²). The jump
/// term of the Gramian is J = γ_d ψψᵀ/(1+|ψ|²), and the jump map is I − J.
#[test]
fn normalised_projection_jump_step() {
    for (k, i) in [(0.5, 0), (2.0, 1), (3.0, 2)] {
        let mut psi = vec![0.0; 3];
        psi[i] = k;
        // One jump at t = 1 with pre-jump regressor ψ; no flow excitation.
        let rows = vec![
            (0.0, 0, vec![0.0; 3]),
            (1.0, 0, psi.clone()),
            (1.0, 1, vec![0.0; 3]),
            (4.0, 1, vec![0.0; 3]),
        ];
        let p = one_unit(3, log_text(3, &rows), 2.0, "stride = 1.0");
        let table = ExcitationTable::build(&p);
        // Window [0, 2) holds the jump.
        let w = table.windows().iter().position(|w| w.start == 0.0).unwrap();
        let jmat = unpack(3, table.gramian(w, NodeId(0)));
        let map = nalgebra::DMatrix::<f64>::identity(3, 3) - jmat;
        let mut e = nalgebra::DVector::<f64>::zeros(3);
        e[i] = 1.0;
        let after = &map * &e;
        assert_abs_diff_eq!(after[i], 1.0 / (1.0 + k * k), epsilon = 1e-15);
        for r in (0..3).filter(|&r| r != i) {
            assert_eq!(after[r], 0.0);
        }
    }
}
