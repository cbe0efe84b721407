//! The communication digraph of a link set: strongly connected components,
//! source components and what each source component reaches.
//!
//! A source component is a strongly connected component that receives no
//! arc from outside it. Every unit is reached by at least one source
//! component, so estimates converge when every source component is excited.

use crate::problem::{Arc, NodeId};

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
    /// Computing 1(2), 1972 (through the iterative `scc` below).
    pub fn analyse(n: usize, arcs: &[Arc]) -> Self {
        let mut adj: Vec<Vec<u32>> = vec![Vec::new(); n];
        for a in arcs {
            adj[a.from.index()].push(a.to.0);
        }
        let comp = scc(&adj);
        let count = comp.iter().map(|&c| c + 1).max().unwrap_or(0);
        let mut sccs: Vec<Vec<NodeId>> = vec![Vec::new(); count];
        for (v, &c) in comp.iter().enumerate() {
            sccs[c].push(NodeId(v as u32));
        }
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
                    let mut queue = vec![nodes[0].index()];
                    seen[nodes[0].index()] = true;
                    while let Some(v) = queue.pop() {
                        for &w in &adj[v] {
                            if !seen[w as usize] {
                                seen[w as usize] = true;
                                queue.push(w as usize);
                            }
                        }
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

/// The connected pieces of an undirected graph (each edge listed at both
/// ends), found breadth-first from the lowest unvisited vertex; members
/// sorted, pieces in order of their lowest vertex.
pub(crate) fn pieces(adj: &[Vec<u32>]) -> Vec<Vec<u32>> {
    let mut seen = vec![false; adj.len()];
    let mut out = Vec::new();
    for start in 0..adj.len() {
        if seen[start] {
            continue;
        }
        seen[start] = true;
        let mut members = vec![start as u32];
        let mut i = 0;
        while i < members.len() {
            let v = members[i] as usize;
            i += 1;
            for &x in &adj[v] {
                if !seen[x as usize] {
                    seen[x as usize] = true;
                    members.push(x);
                }
            }
        }
        members.sort_unstable();
        out.push(members);
    }
    out
}

/// Strongly connected components (iterative Tarjan); returns the component
/// index of each vertex.
///
/// # References
/// Tarjan, "Depth-first search and linear graph algorithms", SIAM J.
/// Computing 1(2), 1972.
pub(crate) fn scc(adj: &[Vec<u32>]) -> Vec<usize> {
    let n = adj.len();
    const NONE: usize = usize::MAX;
    let mut index = vec![NONE; n];
    let mut low = vec![0; n];
    let mut on_stack = vec![false; n];
    let mut comp = vec![NONE; n];
    let mut stack = Vec::new();
    let mut next = 0;
    let mut count = 0;
    let mut call: Vec<(usize, usize)> = Vec::new();
    for root in 0..n {
        if index[root] != NONE {
            continue;
        }
        call.push((root, 0));
        index[root] = next;
        low[root] = next;
        next += 1;
        stack.push(root);
        on_stack[root] = true;
        while let Some(&mut (v, ref mut k)) = call.last_mut() {
            if *k < adj[v].len() {
                let w = adj[v][*k] as usize;
                *k += 1;
                if index[w] == NONE {
                    index[w] = next;
                    low[w] = next;
                    next += 1;
                    stack.push(w);
                    on_stack[w] = true;
                    call.push((w, 0));
                } else if on_stack[w] {
                    low[v] = low[v].min(index[w]);
                }
            } else {
                call.pop();
                if let Some(&(u, _)) = call.last() {
                    low[u] = low[u].min(low[v]);
                }
                if low[v] == index[v] {
                    loop {
                        let w = stack.pop().expect("Tarjan stack");
                        on_stack[w] = false;
                        comp[w] = count;
                        if w == v {
                            break;
                        }
                    }
                    count += 1;
                }
            }
        }
    }
    comp
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

#[cfg(test)]
mod scc_tests {
    use super::scc;

    #[test]
    fn scc_of_two_cycles_and_a_tail() {
        let adj = vec![vec![1], vec![0, 2], vec![3], vec![2], vec![]];
        let c = scc(&adj);
        assert_eq!(c[0], c[1]);
        assert_eq!(c[2], c[3]);
        assert_ne!(c[0], c[2]);
        assert_ne!(c[4], c[0]);
        assert_ne!(c[4], c[2]);
    }
}
