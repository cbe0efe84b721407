//! Primal heuristics: reverse-delete and LP-guided repair.

use super::instance::Instance;
use std::time::Instant;

/// The chosen links that are not installed, by decreasing cost (larger
/// index first on a tie).
fn dearest_first(inst: &Instance, chosen: &[bool]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..inst.links.len())
        .filter(|&k| chosen[k] && !inst.links[k].installed)
        .collect();
    order.sort_by(|&a, &b| {
        inst.links[b]
            .cost
            .total_cmp(&inst.links[a].cost)
            .then(b.cmp(&a))
    });
    order
}

/// Drops links by decreasing cost (larger index first on a tie) while the
/// condition holds; the result is irreducible (no link can be dropped).
/// `start` must satisfy the condition (dropping links only lowers
/// in-degrees, so a start within the caps stays within them).
///
/// # Complexity
/// O(m (n + m)) plus the excitation checks, which are cached.
///
/// Stops dropping at `deadline` (checked before each link): the result
/// still satisfies the condition, but may then not be irreducible.
pub(crate) fn reverse_delete_until(
    inst: &Instance,
    start: &[bool],
    deadline: Option<Instant>,
) -> Vec<bool> {
    let mut chosen = start.to_vec();
    for k in dearest_first(inst, &chosen) {
        if deadline.is_some_and(|d| Instant::now() >= d) {
            break;
        }
        chosen[k] = false;
        if !inst.holds_structure(&chosen) {
            chosen[k] = true;
        }
    }
    chosen
}

/// Drops chosen links at units over their in-degree cap or port limit, the
/// links with the smallest `y` first (then dearer, then larger index), until
/// every cap and limit holds. Installed links stay.
fn within_caps(inst: &Instance, chosen: &mut [bool], y: &[f64]) {
    if inst.fits(chosen) {
        return;
    }
    let mut order: Vec<usize> = (0..inst.links.len())
        .filter(|&k| chosen[k] && !inst.links[k].installed)
        .collect();
    order.sort_by(|&a, &b| {
        y[a].total_cmp(&y[b])
            .then(inst.links[b].cost.total_cmp(&inst.links[a].cost))
            .then(b.cmp(&a))
    });
    for k in order {
        if inst.fits(chosen) {
            return;
        }
        if inst.at_a_limit(chosen, k) {
            chosen[k] = false;
        }
    }
}

/// Rounds an LP point to a feasible link set: keep links with y ≥ 1/2, then
/// while some source component is not excited, add the link entering it
/// with the least cost·(1 − y) (ties: cheaper, then lower index); finally
/// reverse-delete. Returns `None` when even all candidates fail, or when
/// `deadline` passes before a repaired set is found (the final
/// reverse-delete then stops early).
pub(crate) fn repair(inst: &Instance, y: &[f64], deadline: Option<Instant>) -> Option<Vec<bool>> {
    let mut chosen: Vec<bool> = inst
        .links
        .iter()
        .zip(y)
        .map(|(l, &v)| l.installed || v >= 0.5)
        .collect();
    within_caps(inst, &mut chosen, y);
    loop {
        if deadline.is_some_and(|d| Instant::now() >= d) {
            return None;
        }
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
                    if chosen[k] || !inst.fits_with(&chosen, k) {
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
    let chosen = reverse_delete_until(inst, &chosen, deadline);
    inst.holds(&chosen).then_some(chosen)
}

/// Link exchange: for each chosen link (dearest first), drop it and look
/// for the cheapest cheaper link that restores the condition; after each
/// pass reverse-delete, and repeat until a pass changes nothing.
/// `start` must satisfy the condition; stops early at the deadline.
///
/// # Complexity
/// Each pass O(|X| · d · (n + m)) condition checks for X chosen links and
/// d candidate links around the broken components.
pub(crate) fn exchange(inst: &Instance, start: &[bool], deadline: Option<Instant>) -> Vec<bool> {
    let mut chosen = start.to_vec();
    let mut improved = true;
    while improved && deadline.is_none_or(|d| Instant::now() < d) {
        improved = false;
        chosen = reverse_delete_until(inst, &chosen, deadline);
        for e in dearest_first(inst, &chosen) {
            if !chosen[e] || deadline.is_some_and(|d| Instant::now() >= d) {
                continue;
            }
            chosen[e] = false;
            let bad = inst.violations(&chosen);
            if bad.is_empty() {
                improved = true;
                continue;
            }
            // Candidate links entering a broken component.
            let mut inside = vec![false; inst.n];
            let mut candidates: Vec<usize> = Vec::new();
            for c in &bad {
                c.iter().for_each(|&v| inside[v as usize] = true);
                for &b in c {
                    for &k in &inst.heads[b as usize] {
                        if k != e
                            && !chosen[k]
                            && inst.links[k].cost < inst.links[e].cost
                            && inst.links[k]
                                .arcs
                                .iter()
                                .any(|&(f, t)| t == b && !inside[f as usize])
                        {
                            candidates.push(k);
                        }
                    }
                }
                c.iter().for_each(|&v| inside[v as usize] = false);
            }
            candidates.sort_by(|&a, &b| {
                inst.links[a]
                    .cost
                    .total_cmp(&inst.links[b].cost)
                    .then(a.cmp(&b))
            });
            candidates.dedup();
            let mut swapped = false;
            for f in candidates {
                chosen[f] = true;
                if inst.holds(&chosen) {
                    swapped = true;
                    break;
                }
                chosen[f] = false;
            }
            if swapped {
                improved = true;
            } else {
                chosen[e] = true;
            }
        }
    }
    chosen
}

/// Forward greedy: take links by increasing cost (lower index on a tie) and
/// keep a link when one of its arcs enters a source component that is not
/// excited; stop when the condition holds, then reverse-delete. The
/// constrained-forest greedy of Imielinska, Kalantari & Khachiyan ("A greedy
/// heuristic for a minimum-weight forest problem", Oper. Res. Letters 14,
/// 1993) generalised to directed links. Returns `None` when even all
/// candidates fail.
///
/// Gives up (`None`) at `deadline`, checked before each link; its final
/// reverse-delete stops there too.
pub(crate) fn forward_greedy(inst: &Instance, deadline: Option<Instant>) -> Option<Vec<bool>> {
    let mut chosen: Vec<bool> = inst.links.iter().map(|l| l.installed).collect();
    let mut order: Vec<usize> = (0..inst.links.len()).filter(|&k| !chosen[k]).collect();
    order.sort_by(|&a, &b| {
        inst.links[a]
            .cost
            .total_cmp(&inst.links[b].cost)
            .then(a.cmp(&b))
    });
    let mut bad_of = vec![usize::MAX; inst.n];
    let refresh = |chosen: &[bool], bad_of: &mut Vec<usize>| {
        bad_of.iter_mut().for_each(|b| *b = usize::MAX);
        let bad = inst.violations(chosen);
        for (k, c) in bad.iter().enumerate() {
            c.iter().for_each(|&v| bad_of[v as usize] = k);
        }
        bad.is_empty()
    };
    if refresh(&chosen, &mut bad_of) {
        return Some(chosen);
    }
    for k in order {
        if deadline.is_some_and(|d| Instant::now() >= d) {
            return None;
        }
        let useful = inst.links[k].arcs.iter().any(|&(f, t)| {
            bad_of[t as usize] != usize::MAX && bad_of[f as usize] != bad_of[t as usize]
        });
        if useful && inst.fits_with(&chosen, k) {
            chosen[k] = true;
            if refresh(&chosen, &mut bad_of) {
                return Some(reverse_delete_until(inst, &chosen, deadline));
            }
        }
    }
    None
}
