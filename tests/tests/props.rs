//! Property tests against independent methods: petgraph's Kosaraju, direct
//! summation, eigen residuals, monotonicity.

use super::fixtures::{Folder, log_text};
use exmesh::ExcitationTable;
use exmesh::excitation::{packed_len, unpack};
use exmesh::problem::{self, Arc, NodeId};
use exmesh::signal::{Window, WindowKind};
use exmesh::topology::Topology;
use petgraph::algo::kosaraju_scc;
use petgraph::graph::{DiGraph, NodeIndex};
use proptest::prelude::*;
use std::collections::BTreeSet;

fn arcs_strategy() -> impl Strategy<Value = (usize, Vec<(usize, usize)>)> {
    (1usize..12).prop_flat_map(|n| (Just(n), prop::collection::vec((0..n, 0..n), 0..3 * n)))
}

proptest! {
    /// Components equal petgraph's Kosaraju (an independent algorithm);
    /// a component is a source exactly when no arc enters it.
    #[test]
    fn condensation_matches_kosaraju((n, pairs) in arcs_strategy()) {
        let arcs: Vec<Arc> = pairs.iter().map(|&(a, b)| Arc { from: NodeId(a as u32), to: NodeId(b as u32), weight: 1.0 }).collect();
        let topo = Topology::analyse(n, &arcs);
        let mut g: DiGraph<(), ()> = DiGraph::new();
        for _ in 0..n { g.add_node(()); }
        for &(a, b) in &pairs { g.add_edge(NodeIndex::new(a), NodeIndex::new(b), ()); }
        let theirs: BTreeSet<BTreeSet<usize>> = kosaraju_scc(&g).into_iter().map(|c| c.into_iter().map(|x| x.index()).collect()).collect();
        let ours: BTreeSet<BTreeSet<usize>> = topo.components.iter().map(|c| c.nodes.iter().map(|v| v.index()).collect()).collect();
        prop_assert_eq!(&ours, &theirs);
        for c in &topo.components {
            let inside: BTreeSet<usize> = c.nodes.iter().map(|v| v.index()).collect();
            let entered = pairs.iter().any(|&(a, b)| !inside.contains(&a) && inside.contains(&b));
            prop_assert_eq!(c.source, !entered);
        }
    }

    /// μ is monotone: S ⊆ U implies μ(S) ≤ μ(U); and the reported direction
    /// is an eigenvector: ‖Gv − λv‖ small, |v| = 1.
    #[test]
    fn level_is_monotone_and_directions_are_eigenvectors(
        p in 2usize..5,
        n in 1usize..6,
        windows in 1usize..5,
        factors in prop::collection::vec(-2.0f64..2.0, 200),
        pick in prop::collection::vec(any::<bool>(), 6),
    ) {
        let q = packed_len(p);
        let mut gram = Vec::with_capacity(windows * n * q);
        let mut next = factors.iter().cycle();
        for _ in 0..windows * n {
            // G = Σ of two outer products: positive semidefinite, often rank deficient.
            let mut g = vec![0.0; q];
            for _ in 0..2 {
                let v: Vec<f64> = (0..p).map(|_| *next.next().unwrap()).collect();
                let mut k = 0;
                for r in 0..p { for c in r..p { g[k] += v[r] * v[c]; k += 1; } }
            }
            gram.extend(g);
        }
        let ws: Vec<Window> = (0..windows).map(|k| Window { start: k as f64, end: k as f64 + 1.0, jumps_through_end: false }).collect();
        let table = ExcitationTable::from_gramians(n, p, ws, gram, Some(0.1));
        let all: Vec<NodeId> = (0..n as u32).map(NodeId).collect();
        let sub: Vec<NodeId> = all.iter().copied().filter(|v| pick[v.index()]).collect();
        let (ls, lu) = (table.level(&sub), table.level(&all));
        prop_assert!(ls.value <= lu.value + 1e-9 * (1.0 + lu.value.abs()));
        prop_assert_eq!(table.is_excited(&sub) && !sub.is_empty(), ls.value >= 0.1 && !sub.is_empty());
        let g = unpack(p, &table.pooled(lu.window, &all));
        let v = nalgebra::DVector::from_vec(lu.direction.clone());
        let residual = (&g * &v - &v * lu.value).norm();
        prop_assert!(residual <= 1e-9 * (1.0 + g.norm()), "residual {}", residual);
        prop_assert!((v.norm() - 1.0).abs() < 1e-12);
    }

    /// Prefix-sum Gramians equal direct sums over the log's flow pieces
    /// (clipped to the window) and its jumps in the window.
    #[test]
    fn prefix_sums_equal_direct_sums(
        steps in prop::collection::vec((1u32..5, 0u32..6, -2.0f64..2.0, -2.0f64..2.0), 4..40),
        window in 1.0f64..6.0,
        stride in 0.3f64..2.0,
        kind in prop_oneof![Just(WindowKind::Time), Just(WindowKind::Hybrid)],
        gains in (0.1f64..2.0, 0.1f64..1.9),
    ) {
        // Rows at multiples of 0.25 s; a step code of 0 means "jump here".
        let mut rows = vec![(0.0, 0u32, vec![steps[0].2, steps[0].3])];
        let (mut t, mut j) = (0.0, 0u32);
        for &(dt, code, a, b) in &steps[1..] {
            if code == 0 {
                j += 1;
            } else {
                t += 0.25 * f64::from(dt);
            }
            rows.push((t, j, vec![a, b]));
        }
        prop_assume!(t > window + 0.5);
        let folder = Folder::new();
        folder.write("u.csv", &log_text(2, &rows));
        let kind_name = if kind == WindowKind::Time { "time" } else { "hybrid" };
        let toml = format!(
            "[network]\nparameters = 2\nwindow = {window}\nwindow_kind = \"{kind_name}\"\nstride = {stride}\n[estimator]\nflow_gain = {}\njump_gain = {}\n[[node]]\nid = \"u\"\nlog = \"u.csv\"\n",
            gains.0, gains.1
        );
        let path = folder.write("p.toml", &toml);
        let prob = match problem::load(&path) {
            Ok(p) => p,
            // A hybrid window can be too long for a log with few jumps.
            Err(e) if e.message.contains("no window fits") => return Ok(()),
            Err(e) => return Err(TestCaseError::fail(e.to_string())),
        };
        let table = ExcitationTable::build(&prob);
        let log = &prob.nodes[0].log;
        for (w, win) in table.windows().iter().enumerate() {
            let mut direct = [0.0; 3];
            for piece in log.flow_pieces() {
                let len = piece.end.min(win.end) - piece.start.max(win.start);
                if len > 0.0 {
                    let s = gains.0 * len;
                    direct[0] += s * piece.psi[0] * piece.psi[0];
                    direct[1] += s * piece.psi[0] * piece.psi[1];
                    direct[2] += s * piece.psi[1] * piece.psi[1];
                }
            }
            for e in log.jumps() {
                let inside = e.time >= win.start && (e.time < win.end || (win.jumps_through_end && e.time == win.end));
                if inside {
                    // The jump gain enters as min(γ_d, 2 − γ_d) (docs/theory.md §3).
                    let weight = gains.1.min(2.0 - gains.1);
                    let s = weight / (1.0 + e.psi[0] * e.psi[0] + e.psi[1] * e.psi[1]);
                    direct[0] += s * e.psi[0] * e.psi[0];
                    direct[1] += s * e.psi[0] * e.psi[1];
                    direct[2] += s * e.psi[1] * e.psi[1];
                }
            }
            let ours = table.gramian(w, NodeId(0));
            for k in 0..3 {
                prop_assert!((ours[k] - direct[k]).abs() <= 1e-9 * (1.0 + direct[k].abs()), "window {:?}: {:?} vs {:?}", win, ours, direct);
            }
        }
    }
}
