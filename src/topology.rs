//! The communication digraph of a link set: strongly connected components,
//! source components and what each source component reaches.
//!
//! A source component is a strongly connected component that receives no
//! arc from outside it. Every unit is reached by at least one source
//! component, so estimates converge when every source component is excited.

use crate::problem::{Arc, NodeId};
use petgraph::algo::tarjan_scc;
use petgraph::graph::{DiGraph, NodeIndex};
use petgraph::visit::Bfs;

/// A strongly connected component.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Component {
    /// Its units, increasing.
    pub nodes: Vec<NodeId>,
    /// True when no arc enters it from outside.
    pub source: bool,
    /// Units reachable from it (itself included), increasing.
    pub reaches: Vec<NodeId>,
}

/// The condensation of a digraph on units `0..n`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Topology {
    /// Components ordered by their smallest unit.
    pub components: Vec<Component>,
    /// Component index of each unit.
    pub component_of: Vec<usize>,
}

impl Topology {
    /// Condenses the digraph of `arcs` on `n` units.
    ///
    /// # Complexity
    /// O(n + m) for the components, O(c (n + m)) for the reach of c source
    /// components.
    ///
    /// # References
    /// Tarjan, "Depth-first search and linear graph algorithms", SIAM J.
    /// Computing 1(2), 1972 (through petgraph's `tarjan_scc`).
    pub fn analyse(n: usize, arcs: &[Arc]) -> Self {
        let mut g: DiGraph<(), ()> = DiGraph::with_capacity(n, arcs.len());
        for _ in 0..n {
            g.add_node(());
        }
        for a in arcs {
            g.add_edge(
                NodeIndex::new(a.from.index()),
                NodeIndex::new(a.to.index()),
                (),
            );
        }
        let mut sccs: Vec<Vec<NodeId>> = tarjan_scc(&g)
            .into_iter()
            .map(|c| {
                let mut v: Vec<NodeId> = c.into_iter().map(|x| NodeId(x.index() as u32)).collect();
                v.sort();
                v
            })
            .collect();
        sccs.sort();
        let mut component_of = vec![0; n];
        for (k, c) in sccs.iter().enumerate() {
            for v in c {
                component_of[v.index()] = k;
            }
        }
        let mut entered = vec![false; sccs.len()];
        for a in arcs {
            let (cf, ct) = (component_of[a.from.index()], component_of[a.to.index()]);
            if cf != ct {
                entered[ct] = true;
            }
        }
        let components = sccs
            .into_iter()
            .zip(entered)
            .map(|(nodes, entered)| {
                let reaches = if entered {
                    Vec::new()
                } else {
                    let mut seen = vec![false; n];
                    let mut bfs = Bfs::new(&g, NodeIndex::new(nodes[0].index()));
                    while let Some(x) = bfs.next(&g) {
                        seen[x.index()] = true;
                    }
                    (0..n as u32)
                        .map(NodeId)
                        .filter(|v| seen[v.index()])
                        .collect()
                };
                Component {
                    nodes,
                    source: !entered,
                    reaches,
                }
            })
            .collect();
        Topology {
            components,
            component_of,
        }
    }

    /// The source components.
    pub fn sources(&self) -> impl Iterator<Item = &Component> + '_ {
        self.components.iter().filter(|c| c.source)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn arc(from: u32, to: u32) -> Arc {
        Arc {
            from: NodeId(from),
            to: NodeId(to),
            weight: 1.0,
        }
    }

    #[test]
    fn chain_has_one_source() {
        let t = Topology::analyse(3, &[arc(0, 1), arc(1, 2)]);
        let sources: Vec<_> = t.sources().collect();
        assert_eq!(sources.len(), 1);
        assert_eq!(sources[0].nodes, vec![NodeId(0)]);
        assert_eq!(sources[0].reaches.len(), 3);
    }

    #[test]
    fn isolated_units_are_sources() {
        let t = Topology::analyse(2, &[]);
        assert_eq!(t.sources().count(), 2);
    }
}
