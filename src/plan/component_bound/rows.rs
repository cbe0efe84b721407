//! One round's LP of the component bound and the rows separated on its
//! points (size rows and large-component rows).

use super::super::cuts::Pool;
use super::super::instance::Instance;
use super::super::lp::{Col, Lp, Sense};
use super::{Column, Extra, TOL};
use crate::topology::pieces;
use std::collections::HashSet;

/// The LP of one round: z (one per link), u (one per unit), then the
/// active columns; coverage rows, then the extra rows in the order they
/// came. `ends`: each link's first arc.
#[allow(clippy::too_many_arguments)]
pub(super) fn round_lp(
    inst: &Instance,
    k: usize,
    active: &[u32],
    columns: &[Column],
    sets: &[Vec<u32>],
    extras: &[Extra],
    pool: &Pool,
    ends: &[(u32, u32)],
) -> (Lp, Vec<Col>, Vec<Col>, Vec<Col>) {
    let (n, m) = (inst.n, inst.links.len());
    let incident = &inst.heads;
    let mut p = Lp::minimise();
    let z: Vec<Col> = inst
        .links
        .iter()
        .map(|l| p.column(l.cost, 0.0, 1.0))
        .collect();
    let u: Vec<Col> = (0..n).map(|_| p.column(0.0, 0.0, 1.0)).collect();
    let x: Vec<Col> = active
        .iter()
        .map(|&c| p.column(columns[c as usize].cost, 0.0, f64::INFINITY))
        .collect();
    let mut cover: Vec<Vec<(Col, f64)>> = (0..n).map(|i| vec![(u[i], 1.0)]).collect();
    // by_link[e]: active columns whose tree holds link e.
    let mut by_link: Vec<Vec<u32>> = vec![Vec::new(); m];
    for (j, &c) in active.iter().enumerate() {
        let col = &columns[c as usize];
        for &v in &sets[col.set as usize] {
            cover[v as usize].push((x[j], 1.0));
        }
        for &e in &col.tree {
            by_link[e as usize].push(j as u32);
        }
    }
    for row in &cover {
        p.row(row, Sense::Eq, 1.0);
    }
    let mut hits: Vec<f64> = vec![0.0; active.len()];
    for extra in extras {
        let mut expr: Vec<(Col, f64)> = Vec::new();
        let rhs = match extra {
            Extra::Cut(r) => {
                let row = &pool.rows[*r];
                let mut touched = Vec::new();
                for &e in &row.links {
                    expr.push((z[e as usize], 1.0));
                    for &j in &by_link[e as usize] {
                        if hits[j as usize] == 0.0 {
                            touched.push(j);
                        }
                        hits[j as usize] += 1.0;
                    }
                }
                touched.sort_unstable();
                for j in touched {
                    expr.push((x[j as usize], hits[j as usize]));
                    hits[j as usize] = 0.0;
                }
                row.rhs as f64
            }
            Extra::Size(s, i) => {
                boundary(&sets[*s as usize], incident, ends, |e| {
                    expr.push((z[e], 1.0))
                });
                expr.push((u[*i as usize], -1.0));
                0.0
            }
            Extra::Count(set) => {
                touching(set, incident, ends, |e| expr.push((z[e], 1.0)));
                expr.extend(set.iter().map(|&v| (u[v as usize], -1.0)));
                -((set.len() / (k + 1)) as f64)
            }
            Extra::Large(set) => {
                touching(set, incident, ends, |e| expr.push((z[e], 1.0)));
                let r = ratio(set.len(), k);
                expr.extend(set.iter().map(|&v| (u[v as usize], -r)));
                0.0
            }
        };
        p.row(&expr, Sense::Ge, rhs);
    }
    (p, z, u, x)
}

/// A set of at most k units holds no large component: all its units in
/// large components reach outside, so the links touching it span them
/// (share 1); a larger set's units need a share k/(k+1).
pub(super) fn ratio(len: usize, k: usize) -> f64 {
    if len <= k {
        1.0
    } else {
        k as f64 / (k as f64 + 1.0)
    }
}

/// Violated size rows at the point (z, u): for each listed set, its unit
/// with the largest u against the z on the set's boundary.
pub(super) fn size_rows(
    sets: &[Vec<u32>],
    uv: &[f64],
    zv: &[f64],
    incident: &[Vec<usize>],
    ends: &[(u32, u32)],
    present: &HashSet<Extra>,
) -> Vec<(f64, Extra)> {
    let mut size: Vec<(f64, Extra)> = Vec::new();
    for (s, set) in sets.iter().enumerate() {
        let (most, unit) = set
            .iter()
            .map(|&v| (uv[v as usize], v))
            .fold((0.0, 0), |a, b| if b.0 > a.0 { b } else { a });
        if most <= TOL {
            continue;
        }
        let mut out = 0.0;
        boundary(set, incident, ends, |e| out += zv[e]);
        let row = Extra::Size(s as u32, unit);
        if most - out > TOL && !present.contains(&row) {
            size.push((most - out, row));
        }
    }
    size
}

/// Violated large-component rows at the point (z, u), over the pieces of
/// the z support at three thresholds and the listed sets.
#[allow(clippy::too_many_arguments)]
pub(super) fn large_rows(
    n: usize,
    k: usize,
    sets: &[Vec<u32>],
    uv: &[f64],
    zv: &[f64],
    incident: &[Vec<usize>],
    ends: &[(u32, u32)],
    present: &HashSet<Extra>,
) -> Vec<(f64, Extra)> {
    let mut large: Vec<(f64, Extra)> = Vec::new();
    let mut candidates: Vec<Vec<u32>> = Vec::new();
    for t in [TOL, 0.2, 0.5] {
        let mut adj: Vec<Vec<u32>> = vec![Vec::new(); n];
        for (e, &(a, b)) in ends.iter().enumerate() {
            if zv[e] > t {
                adj[a as usize].push(b);
                adj[b as usize].push(a);
            }
        }
        candidates.extend(pieces(&adj));
    }
    let mut seen: HashSet<Vec<u32>> = HashSet::new();
    for set in candidates.iter().chain(sets.iter()) {
        let units = set.iter().map(|&v| uv[v as usize]).sum::<f64>();
        let need = ratio(set.len(), k) * units;
        // At most |S|/(k+1) large components fit inside S.
        let counted = units - (set.len() / (k + 1)) as f64;
        if need.max(counted) <= TOL {
            continue;
        }
        let mut have = 0.0;
        touching(set, incident, ends, |e| have += zv[e]);
        if need.max(counted) - have > TOL && seen.insert(set.clone()) {
            let (violation, row) = if counted > need {
                (counted - have, Extra::Count(set.clone()))
            } else {
                (need - have, Extra::Large(set.clone()))
            };
            if !present.contains(&row) {
                large.push((violation, row));
            }
        }
    }
    large
}

/// Moves the `most` most violated rows (ties: first found) into `out`.
pub(super) fn take_most(found: &mut Vec<(f64, Extra)>, most: usize, out: &mut Vec<Extra>) {
    found.sort_by(|a, b| b.0.total_cmp(&a.0));
    out.extend(found.drain(..).take(most).map(|(_, row)| row));
}

/// Calls `f` with each link leaving the sorted `set`.
pub(super) fn boundary(
    set: &[u32],
    incident: &[Vec<usize>],
    ends: &[(u32, u32)],
    mut f: impl FnMut(usize),
) {
    for &v in set {
        for &e in &incident[v as usize] {
            let (a, b) = ends[e];
            let other = if a == v { b } else { a };
            if set.binary_search(&other).is_err() {
                f(e);
            }
        }
    }
}

/// Calls `f` once with each link that has an end in the sorted `set`.
pub(super) fn touching(
    set: &[u32],
    incident: &[Vec<usize>],
    ends: &[(u32, u32)],
    mut f: impl FnMut(usize),
) {
    for &v in set {
        for &e in &incident[v as usize] {
            let (a, b) = ends[e];
            let other = if a == v { b } else { a };
            // A link inside the set is reported from its lower end.
            if other > v || set.binary_search(&other).is_err() {
                f(e);
            }
        }
    }
}
