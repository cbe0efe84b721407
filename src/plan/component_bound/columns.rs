//! The columns of the component bound: excited connected unit sets of at
//! most k units, each at its minimum spanning tree, and their pricing.

use super::super::connected_sets::walk_connected_sets;
use super::super::cuts::Pool;
use super::super::instance::Instance;
use super::{Column, Extra, TOL};
use std::time::Instant;

/// Prices every listed column at the duals of a round's LP: the least
/// reduced cost, and the inactive columns with negative reduced cost.
pub(super) fn price(
    inst: &Instance,
    pool: &Pool,
    extras: &[Extra],
    columns: &[Column],
    sets: &[Vec<u32>],
    is_active: &[bool],
    duals: &[f64],
) -> (f64, Vec<(f64, u32)>) {
    let n = inst.n;
    let pi = &duals[..n];
    let mut w: Vec<f64> = inst.links.iter().map(|l| l.cost).collect();
    for (extra, &mu) in extras.iter().zip(&duals[n..]) {
        if let Extra::Cut(r) = extra {
            for &e in &pool.rows[*r].links {
                w[e as usize] -= mu.max(0.0);
            }
        }
    }
    let mut priced: Vec<(f64, u32)> = Vec::new();
    let mut least = 0.0f64;
    for (c, col) in columns.iter().enumerate() {
        let rc = col.tree.iter().map(|&e| w[e as usize]).sum::<f64>()
            - sets[col.set as usize]
                .iter()
                .map(|&v| pi[v as usize])
                .sum::<f64>();
        least = least.min(rc);
        if rc < -TOL && !is_active[c] {
            priced.push((rc, c as u32));
        }
    }
    (least, priced)
}

/// Every connected set of at most k units, and the excited ones as
/// columns (each at its minimum spanning tree). k is the largest size up
/// to `max_k` whose sets, with the smaller ones, number at most `max_sets`
/// (counted first; a size is listed whole or not at all, so that pricing
/// stays exact). `None` when no size fits or `late()` stops the listing.
#[allow(clippy::too_many_arguments)]
pub(super) fn list_columns(
    inst: &Instance,
    nbrs: &[Vec<u32>],
    ends: &[(u32, u32)],
    max_k: usize,
    max_sets: usize,
    late: &dyn Fn() -> bool,
    sink: &crate::progress::Sink,
    t0: Instant,
) -> Option<(usize, Vec<Vec<u32>>, Vec<Column>)> {
    // Every connected set of at most k units; the excited ones are columns.
    // k is the largest size up to `max_k` whose sets, with the smaller
    // ones, number at most `max_sets` (counted first; a size is listed whole
    // or not at all, so that pricing stays exact).
    // Counting stops at max_sets, so dense networks cost no long walk.
    let mut k = 0;
    let mut total = 0;
    for size in 1..=max_k {
        let mut count = 0;
        walk_connected_sets(nbrs, size, |_, _| {
            count += 1;
            (count <= max_sets).then_some(false)
        });
        if count > max_sets || late() {
            break;
        }
        (k, total) = (size, count);
    }
    if k == 0 {
        return None;
    }
    let mut sets: Vec<Vec<u32>> = Vec::with_capacity(total);
    let mut columns: Vec<Column> = Vec::new();
    let mut stopped = false;
    walk_connected_sets(nbrs, k, |set, parent_excited| {
        if sets.len().is_multiple_of(1024) && late() {
            stopped = true;
            return None;
        }
        let id = sets.len() as u32;
        sets.push(set.to_vec());
        // Excitation is monotone: a set holding an excited one is excited.
        let excited = parent_excited || inst.oracle.excited(set);
        if excited {
            let (tree, cost) = spanning_tree(inst, ends, set);
            columns.push(Column {
                set: id,
                tree,
                cost,
            });
        }
        Some(excited)
    });
    if sink.wants_debug() {
        sink.debug(|| {
            format!(
                "[groups] k {k}: {} sets, {} columns listed in {:.1?}{}",
                sets.len(),
                columns.len(),
                t0.elapsed(),
                if stopped { " (stopped)" } else { "" }
            )
        });
    }
    if stopped {
        return None;
    }
    Some((k, sets, columns))
}

/// Minimum spanning tree (Kruskal) over the links inside the connected,
/// sorted `set`: its links and cost.
pub(super) fn spanning_tree(inst: &Instance, ends: &[(u32, u32)], set: &[u32]) -> (Vec<u32>, f64) {
    let inside = |v: u32| set.binary_search(&v).ok();
    let mut links: Vec<u32> = set
        .iter()
        .flat_map(|&v| inst.heads[v as usize].iter().map(|&e| e as u32))
        .filter(|&e| {
            let (a, b) = ends[e as usize];
            a < b && inside(a).is_some() && inside(b).is_some()
        })
        .collect();
    links.sort_by(|&a, &b| {
        inst.links[a as usize]
            .cost
            .total_cmp(&inst.links[b as usize].cost)
            .then(a.cmp(&b))
    });
    links.dedup();
    let mut label: Vec<usize> = (0..set.len()).collect();
    let mut tree = Vec::with_capacity(set.len().saturating_sub(1));
    let mut cost = 0.0;
    for e in links {
        let (a, b) = ends[e as usize];
        let (la, lb) = (
            label[inside(a).expect("inside")],
            label[inside(b).expect("inside")],
        );
        if la != lb {
            label.iter_mut().filter(|l| **l == lb).for_each(|l| *l = la);
            tree.push(e);
            cost += inst.links[e as usize].cost;
        }
    }
    (tree, cost)
}
