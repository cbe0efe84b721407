//! Primal heuristics: reverse-delete and LP-guided repair.

use super::instance::Instance;

/// Drops links by decreasing cost (larger index first on a tie) while the
/// condition holds; the result is irreducible (no link can be dropped).
/// `start` must satisfy the condition.
///
/// # Complexity
/// O(m (n + m)) plus the excitation checks, which are cached.
pub(crate) fn reverse_delete(inst: &Instance, start: &[bool]) -> Vec<bool> {
    let mut chosen = start.to_vec();
    let mut order: Vec<usize> = (0..inst.links.len())
        .filter(|&k| chosen[k] && !inst.links[k].installed)
        .collect();
    order.sort_by(|&a, &b| {
        inst.links[b]
            .cost
            .total_cmp(&inst.links[a].cost)
            .then(b.cmp(&a))
    });
    for k in order {
        chosen[k] = false;
        if !inst.holds(&chosen) {
            chosen[k] = true;
        }
    }
    chosen
}

/// Rounds an LP point to a feasible link set: keep links with y ≥ 1/2, then
/// while some source component is not excited, add the link entering it
/// with the least cost·(1 − y) (ties: cheaper, then lower index); finally
/// reverse-delete. Returns `None` when even all candidates fail.
pub(crate) fn repair(inst: &Instance, y: &[f64]) -> Option<Vec<bool>> {
    let mut chosen: Vec<bool> = inst
        .links
        .iter()
        .zip(y)
        .map(|(l, &v)| l.installed || v >= 0.5)
        .collect();
    loop {
        let bad = inst.violations(&chosen);
        if bad.is_empty() {
            break;
        }
        let mut added = false;
        let mut inside = vec![false; inst.n];
        for c in &bad {
            c.iter().for_each(|&v| inside[v as usize] = true);
            let mut best: Option<(f64, f64, usize)> = None;
            for &b in c {
                for &k in &inst.heads[b as usize] {
                    if chosen[k] {
                        continue;
                    }
                    let enters = inst.links[k]
                        .arcs
                        .iter()
                        .any(|&(f, t)| t == b && !inside[f as usize]);
                    if enters {
                        let cost = inst.links[k].cost;
                        let score = cost * (1.0 - y[k].clamp(0.0, 1.0)) + 1e-9 * cost;
                        let key = (score, cost, k);
                        if best.is_none_or(|b| {
                            key.0 < b.0 || (key.0 == b.0 && (key.1, key.2) < (b.1, b.2))
                        }) {
                            best = Some(key);
                        }
                    }
                }
            }
            c.iter().for_each(|&v| inside[v as usize] = false);
            if let Some((_, _, k)) = best {
                chosen[k] = true;
                added = true;
            }
        }
        if !added {
            return None;
        }
    }
    Some(reverse_delete(inst, &chosen))
}
