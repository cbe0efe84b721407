//! Valid inequalities of the covering model and their separation.
//!
//! One family covers everything. Let `parts` be disjoint unit sets and `rest`
//! the units in none of them. Count the chosen links that have an arc
//! between two different classes (parts and rest) whose head is not in the
//! rest (when the rest is empty, every crossing arc). Contract every class:
//! a component of the contracted graph avoiding the rest has no entering arc,
//! so it holds a source component and is excited. Hence
//!
//!   Σ_{counted links} y ≥ k − ν(parts),
//!
//! with k the number of parts and ν(parts) an upper bound on the number of
//! disjoint excited unions of parts. One non-excited part gives the cut
//! `y(δ^in(U)) ≥ 1`; the singletons of S give the partition inequality
//! `y(links with a head in S) ≥ |S| − ν(S)`.

use super::connected_sets::{connected_sets, each_connected_set};
use super::instance::Instance;
use std::collections::HashSet;

pub(crate) use super::row::Row;

const REST: u32 = u32::MAX;

/// The row for `parts` (see the module notes), or `None` when installed
/// links already satisfy it.
pub(crate) fn partition_row(
    inst: &Instance,
    parts: &[Vec<u32>],
    part_of: &mut Vec<u32>,
) -> Option<Row> {
    if parts.is_empty() {
        return None;
    }
    part_of.clear();
    part_of.resize(inst.n, REST);
    let mut covered = 0;
    for (j, part) in parts.iter().enumerate() {
        for &v in part {
            part_of[v as usize] = j as u32;
            covered += 1;
        }
    }
    let rest_empty = covered == inst.n;
    let slices: Vec<&[u32]> = parts.iter().map(|p| p.as_slice()).collect();
    let nu = if parts.len() == 1 {
        usize::from(inst.oracle.excited(&parts[0]))
    } else {
        let mut union: Vec<u32> = parts.iter().flatten().copied().collect();
        union.sort_unstable();
        if inst.oracle.excited(&union) {
            inst.packing(&slices)
        } else {
            0
        }
    };
    let mut rhs = parts.len().saturating_sub(nu) as i64;
    if rhs <= 0 {
        return None;
    }
    let mut links: Vec<u32> = Vec::new();
    for part in parts {
        for &b in part {
            for &k in &inst.heads[b as usize] {
                let crosses = inst.links[k]
                    .arcs
                    .iter()
                    .any(|&(from, to)| to == b && part_of[from as usize] != part_of[b as usize]);
                if crosses {
                    links.push(k as u32);
                }
            }
        }
    }
    debug_assert!(rest_empty || parts.iter().flatten().all(|&v| part_of[v as usize] != REST));
    links.sort_unstable();
    links.dedup();
    links.retain(|&k| {
        if inst.links[k as usize].installed {
            rhs -= 1;
            false
        } else {
            true
        }
    });
    (rhs > 0).then_some(Row {
        links,
        rhs: rhs as u32,
    })
}

/// The cut `y(δ^in(U)) ≥ 1` of a non-excited set.
pub(crate) fn cover_row(inst: &Instance, set: &[u32], part_of: &mut Vec<u32>) -> Option<Row> {
    partition_row(inst, &[set.to_vec()], part_of)
}

/// The partition row over the singletons of `set`.
pub(crate) fn singleton_row(inst: &Instance, set: &[u32], part_of: &mut Vec<u32>) -> Option<Row> {
    let parts: Vec<Vec<u32>> = set.iter().map(|&v| vec![v]).collect();
    partition_row(inst, &parts, part_of)
}

/// The pool of rows found so far, with de-duplication. A row is `used` once
/// some LP point violated it; only used rows go into the master LP.
#[derive(Default)]
pub(crate) struct Pool {
    pub rows: Vec<Row>,
    pub used: Vec<bool>,
    seen: HashSet<Row>,
}

impl Pool {
    /// Adds a row; returns its index when it is new.
    pub fn add(&mut self, row: Row) -> Option<usize> {
        if self.seen.contains(&row) {
            return None;
        }
        self.seen.insert(row.clone());
        self.rows.push(row);
        self.used.push(false);
        Some(self.rows.len() - 1)
    }
}

/// Finds rows violated by `y` (fractional or integer) from the source
/// components of the link sets `{y ≥ t}` for several thresholds: the cut and
/// the singleton-partition row of every non-excited source component, the
/// singleton-partition row of excited ones, the partition into all
/// components, and for non-excited components their growth by cheapest
/// neighbours and unions with each other while they stay non-excited.
pub(crate) fn separate(inst: &Instance, y: &[f64], thresholds: &[f64], out: &mut Vec<Row>) {
    let mut part_of = Vec::new();
    let mut seen: HashSet<Vec<u32>> = HashSet::new();
    let push = |row: Option<Row>, out: &mut Vec<Row>| {
        if let Some(r) = row
            && r.violation(y) > 1e-6
            && !out.contains(&r)
        {
            out.push(r);
        }
    };
    for &t in thresholds {
        let chosen: Vec<bool> = inst
            .links
            .iter()
            .zip(y)
            .map(|(l, &v)| l.installed || v >= t)
            .collect();
        let sources = inst.source_components(&chosen);
        let mut bad: Vec<Vec<u32>> = Vec::new();
        for c in &sources {
            if !seen.insert(c.clone()) {
                continue;
            }
            if inst.oracle.excited(c) {
                if c.len() > 1 {
                    push(singleton_row(inst, c, &mut part_of), out);
                }
            } else {
                push(cover_row(inst, c, &mut part_of), out);
                if c.len() > 1 {
                    push(singleton_row(inst, c, &mut part_of), out);
                }
                bad.push(c.clone());
            }
        }
        // All components of {y ≥ t} as one partition.
        let all = components_partition(inst, &chosen);
        if all.len() > 1 {
            push(partition_row(inst, &all, &mut part_of), out);
        }
        // Unions of adjacent non-excited components that stay non-excited.
        let mut which = vec![usize::MAX; inst.n];
        for (k, c) in bad.iter().enumerate() {
            c.iter().for_each(|&v| which[v as usize] = k);
        }
        let mut pairs: Vec<(usize, usize)> = inst
            .links
            .iter()
            .flat_map(|l| l.arcs.iter())
            .map(|&(f, t)| (which[f as usize], which[t as usize]))
            .filter(|&(a, b)| a != usize::MAX && b != usize::MAX && a != b)
            .map(|(a, b)| (a.min(b), a.max(b)))
            .collect();
        pairs.sort_unstable();
        pairs.dedup();
        for (a, b) in pairs {
            {
                let mut u: Vec<u32> = bad[a].iter().chain(&bad[b]).copied().collect();
                u.sort_unstable();
                if !inst.oracle.excited(&u) {
                    push(cover_row(inst, &u, &mut part_of), out);
                }
            }
        }
    }
}

/// Greedy growth on the LP point: from every unit as a seed, add the
/// neighbour that most lowers the slack of the singleton-partition row
/// (`activity − (|S| − ν(S))`), and separately of the cut row while the set
/// stays non-excited; keep the rows of sets whose slack is negative.
pub(crate) fn grow_separate(inst: &Instance, y: &[f64], max_size: usize, out: &mut Vec<Row>) {
    let n = inst.n;
    // y-weight of the arcs into each unit, per link.
    let mut in_y = vec![0.0; n];
    for (b, links) in inst.heads.iter().enumerate() {
        in_y[b] = links
            .iter()
            .map(|&k| if inst.links[k].installed { 1.0 } else { y[k] })
            .sum();
    }
    let yk = |k: usize| if inst.links[k].installed { 1.0 } else { y[k] };
    let mut part_of = Vec::new();
    let mut inside = vec![false; n];
    let mut found: HashSet<Vec<u32>> = HashSet::new();
    for seed in 0..n as u32 {
        // Partition growth.
        let mut set = vec![seed];
        inside[seed as usize] = true;
        let mut activity = in_y[seed as usize];
        loop {
            let s = sorted(&set);
            let nu = if inst.oracle.excited(&s) {
                let singles: Vec<&[u32]> = s.chunks(1).collect();
                inst.packing(&singles)
            } else {
                0
            };
            let violation = set.len() as f64 - nu as f64 - activity;
            if violation > 1e-6
                && found.insert(sorted(&set))
                && let Some(r) = singleton_row(inst, &sorted(&set), &mut part_of)
            {
                out.push(r);
            }
            if set.len() >= max_size {
                break;
            }
            // Candidate: neighbour u maximising 1 − Δactivity(u).
            let mut best: Option<(f64, u32)> = None;
            for &v in &set {
                for &k in inst.heads[v as usize].iter() {
                    for &(from, to) in &inst.links[k].arcs {
                        if to != v || inside[from as usize] {
                            continue;
                        }
                        let u = from;
                        // Links with a head at u that are already counted
                        // (they also have a head in the set).
                        let counted: f64 = inst.heads[u as usize]
                            .iter()
                            .filter(|&&l| {
                                inst.links[l].arcs.iter().any(|&(_, t)| inside[t as usize])
                            })
                            .map(|&l| yk(l))
                            .sum();
                        let gain = 1.0 - (in_y[u as usize] - counted);
                        if best.is_none_or(|(g, bu)| {
                            gain > g + 1e-12 || ((gain - g).abs() <= 1e-12 && u < bu)
                        }) {
                            best = Some((gain, u));
                        }
                    }
                }
            }
            let Some((_, u)) = best else { break };
            let counted: f64 = inst.heads[u as usize]
                .iter()
                .filter(|&&l| inst.links[l].arcs.iter().any(|&(_, t)| inside[t as usize]))
                .map(|&l| yk(l))
                .sum();
            activity += in_y[u as usize] - counted;
            set.push(u);
            inside[u as usize] = true;
        }
        for &v in &set {
            inside[v as usize] = false;
        }
        // Cut growth: keep the set non-excited, lower y(δ^in(S)).
        let mut set = vec![seed];
        inside[seed as usize] = true;
        while set.len() < max_size {
            let s = sorted(&set);
            if inst.oracle.excited(&s) {
                break;
            }
            if let Some(r) = cover_row(inst, &s, &mut part_of)
                && r.violation(y) > 1e-6
                && found.insert(s.clone())
            {
                out.push(r);
            }
            // Add the outside unit with the most y on arcs into the set.
            let mut weight: Vec<(u32, f64)> = Vec::new();
            for &v in &set {
                for &k in &inst.heads[v as usize] {
                    for &(from, to) in &inst.links[k].arcs {
                        if to == v && !inside[from as usize] {
                            match weight.iter_mut().find(|(u, _)| *u == from) {
                                Some(w) => w.1 += yk(k),
                                None => weight.push((from, yk(k))),
                            }
                        }
                    }
                }
            }
            let Some(&(u, _)) = weight
                .iter()
                .max_by(|a, b| a.1.total_cmp(&b.1).then(b.0.cmp(&a.0)))
            else {
                break;
            };
            set.push(u);
            inside[u as usize] = true;
        }
        for &v in &set {
            inside[v as usize] = false;
        }
    }
}

/// Rows of sets connected through links carrying LP weight. Links at 1
/// first join their ends into groups (a row over groups is at least as
/// violated as the row over their units, and its packing number can only
/// be smaller); then every connected set of up to `max_size` groups gives
/// its partition row (the groups as parts) and, when its units are not
/// excited, its cut row, when `y` violates them.
// Long function: One separation pass: merge units joined at 1, list the support-connected
// sets, build and rank their rows; the steps share the merged groups and the row buffer.
pub(crate) fn support_separate(inst: &Instance, y: &[f64], max_size: usize, out: &mut Vec<Row>) {
    let n = inst.n;
    let weight = |k: usize| if inst.links[k].installed { 1.0 } else { y[k] };
    // Groups: components of the links at 1.
    let mut adj: Vec<Vec<u32>> = vec![Vec::new(); n];
    for (k, l) in inst.links.iter().enumerate() {
        if weight(k) > 1.0 - 1e-6 {
            for &(a, b) in &l.arcs {
                adj[a as usize].push(b);
                adj[b as usize].push(a);
            }
        }
    }
    let members = crate::topology::pieces(&adj);
    let mut group = vec![0u32; n];
    for (g, list) in members.iter().enumerate() {
        list.iter().for_each(|&v| group[v as usize] = g as u32);
    }
    // Support graph between groups.
    let mut nbrs: Vec<Vec<u32>> = vec![Vec::new(); members.len()];
    for (k, l) in inst.links.iter().enumerate() {
        if weight(k) > 1e-6 {
            for &(a, b) in &l.arcs {
                let (ga, gb) = (group[a as usize], group[b as usize]);
                if ga != gb {
                    nbrs[ga as usize].push(gb);
                    nbrs[gb as usize].push(ga);
                }
            }
        }
    }
    for list in &mut nbrs {
        list.sort_unstable();
        list.dedup();
    }
    let mut part_of = Vec::new();
    // Class of each unit in the current set: its group, or u32::MAX.
    let mut class = vec![u32::MAX; n];
    let mut counted: Vec<usize> = Vec::new();
    let mut units: Vec<u32> = Vec::new();
    // Partition rows found violated, ranked by their violation (with ν from
    // the rank bound where that decided, a lower estimate), built exactly
    // for the most violated only.
    let mut candidates: Vec<(f64, Vec<Vec<u32>>)> = Vec::new();
    each_connected_set(&nbrs, max_size, |set| {
        units.clear();
        for &g in set {
            units.extend_from_slice(&members[g as usize]);
            members[g as usize]
                .iter()
                .for_each(|&v| class[v as usize] = g);
        }
        units.sort_unstable();
        // y on links with an arc into a group from another class, and on
        // links entering the whole set.
        counted.clear();
        let (mut activity, mut entering) = (0.0, 0.0);
        for &b in &units {
            for &k in &inst.heads[b as usize] {
                if counted.contains(&k) {
                    continue;
                }
                let arcs = &inst.links[k].arcs;
                if arcs.iter().any(|&(f, t)| {
                    class[t as usize] != u32::MAX && class[f as usize] != class[t as usize]
                }) {
                    counted.push(k);
                    activity += weight(k);
                    if arcs.iter().any(|&(f, t)| {
                        class[t as usize] != u32::MAX && class[f as usize] == u32::MAX
                    }) {
                        entering += weight(k);
                    }
                }
            }
        }
        units.iter().for_each(|&v| class[v as usize] = u32::MAX);
        let partition_possible = set.len() > 1 && set.len() as f64 - activity > 1e-6;
        if !partition_possible && entering >= 1.0 - 1e-6 {
            return;
        }
        let excited = inst.oracle.excited(&units);
        if partition_possible {
            // The row is violated when ν is at most `most`.
            let most = (set.len() as f64 - activity - 1e-6).ceil() as usize - 1;
            let parts: Vec<Vec<u32>> = set.iter().map(|&g| members[g as usize].clone()).collect();
            let slices: Vec<&[u32]> = parts.iter().map(|p| p.as_slice()).collect();
            // The set is connected, so ν ≥ 1 when its units are excited;
            // the exact count is needed only when the rank bound is too
            // weak to decide.
            let nu = if !excited {
                Some(0)
            } else if most == 0 {
                None
            } else {
                let rank = inst.oracle.parts_bound(&slices, slices.len());
                if rank <= most {
                    Some(rank)
                } else {
                    Some(inst.packing(&slices)).filter(|&nu| nu <= most)
                }
            };
            if let Some(nu) = nu {
                let violation = (set.len() - nu) as f64 - activity;
                candidates.push((violation, parts));
            }
        }
        if entering < 1.0 - 1e-6
            && !excited
            && let Some(r) = cover_row(inst, &units, &mut part_of)
        {
            out.push(r);
        }
    });
    candidates.sort_by(|a, b| b.0.total_cmp(&a.0).then_with(|| a.1.cmp(&b.1)));
    for (_, parts) in candidates.into_iter().take(SUPPORT_ROWS) {
        if let Some(r) = partition_row(inst, &parts, &mut part_of)
            && r.violation(y) > 1e-6
        {
            out.push(r);
        }
    }
}

/// Most partition rows one call of [`support_separate`] builds.
const SUPPORT_ROWS: usize = 200;

fn sorted(set: &[u32]) -> Vec<u32> {
    let mut s = set.to_vec();
    s.sort_unstable();
    s
}

/// Rows for a non-excited set grown by its cheapest entering neighbour while
/// it stays non-excited (valid cuts that need not be violated now).
pub(crate) fn grown_rows(inst: &Instance, set: &[u32], out: &mut Vec<Row>) {
    let mut part_of = Vec::new();
    let mut s: Vec<u32> = set.to_vec();
    let mut inside = vec![false; inst.n];
    for &v in &s {
        inside[v as usize] = true;
    }
    loop {
        // Cheapest link entering s from outside.
        let mut best: Option<(f64, u32)> = None;
        for &b in &s {
            for &k in &inst.heads[b as usize] {
                for &(from, to) in &inst.links[k].arcs {
                    if to == b && !inside[from as usize] {
                        let c = inst.links[k].cost;
                        if best.is_none_or(|(bc, bv)| c < bc || (c == bc && from < bv)) {
                            best = Some((c, from));
                        }
                    }
                }
            }
        }
        let Some((_, v)) = best else { return };
        s.push(v);
        s.sort_unstable();
        inside[v as usize] = true;
        if inst.oracle.excited(&s) {
            return;
        }
        if let Some(r) = cover_row(inst, &s, &mut part_of) {
            out.push(r);
        }
        if let Some(r) = singleton_row(inst, &s, &mut part_of) {
            out.push(r);
        }
    }
}

/// The strongly connected components of the chosen links as a partition of
/// all units.
fn components_partition(inst: &Instance, chosen: &[bool]) -> Vec<Vec<u32>> {
    let mut adj: Vec<Vec<u32>> = vec![Vec::new(); inst.n];
    for (l, _) in inst.links.iter().zip(chosen).filter(|(_, c)| **c) {
        for &(a, b) in &l.arcs {
            adj[a as usize].push(b);
        }
    }
    let comp = crate::topology::scc(&adj);
    let count = comp.iter().copied().max().map_or(0, |m| m + 1);
    let mut parts = vec![Vec::new(); count];
    for (v, &c) in comp.iter().enumerate() {
        parts[c].push(v as u32);
    }
    parts.sort();
    parts
}

/// Every connected unit set of the candidate graph up to `max_size` units:
/// its cut row (when not excited) and singleton-partition row. Used on
/// networks small enough for the enumeration to be cheap; the rows wait in
/// the pool until a point violates them.
pub(crate) fn enumerate_rows(inst: &Instance, max_size: usize, out: &mut Vec<Row>) {
    let mut part_of = Vec::new();
    connected_sets(&inst.neighbours(), max_size, |s| {
        if let Some(r) = singleton_row(inst, s, &mut part_of) {
            out.push(r);
        }
        if s.len() > 1
            && !inst.oracle.excited(s)
            && let Some(r) = cover_row(inst, s, &mut part_of)
        {
            out.push(r);
        }
        true
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::excitation::ExcitationTable;
    use crate::plan::instance::PlanLink;
    use crate::rng::Rng;
    use crate::signal::Window;

    /// The early-stopping scan agrees with the full sum (common practice:
    /// a shortcut is checked against the plain computation): on random rows
    /// and LP-like points (values in [0, 1], many at 0 or 1, a few at
    /// −1e−12), it reports exactly the rows whose full violation exceeds the
    /// tolerance, with the same value.
    #[test]
    fn early_stopping_scan_matches_the_full_sum() {
        let mut rng = Rng(11);
        for _ in 0..2000 {
            let m = 1 + rng.below(30);
            let y: Vec<f64> = (0..m)
                .map(|_| match rng.below(5) {
                    0 => 0.0,
                    1 => 1.0,
                    2 => -1e-12,
                    _ => (rng.below(8) as f64) / 8.0,
                })
                .collect();
            let links: Vec<u32> = (0..1 + rng.below(m)).map(|_| rng.below(m) as u32).collect();
            let row = Row {
                links,
                rhs: 1 + rng.below(4) as u32,
            };
            let full = row.violation(&y);
            let expected = (full > 1e-6).then_some(full);
            assert_eq!(row.violated_by(&y, 1e-6), expected, "{row:?} {y:?}");
        }
    }

    /// Validity against brute force: on random small instances (rank-1
    /// Gramians in R², two windows, random one- and two-way links), every
    /// partition row of random parts holds for every link subset that
    /// satisfies the condition. The rows use the exact packing ν, so this
    /// checks the connected-union argument of the module notes.
    #[test]
    fn partition_rows_hold_for_every_feasible_plan() {
        let mut rng = Rng(7);
        let mut checked = 0;
        for _case in 0..60 {
            let (n, p) = (3 + rng.below(4), 2);
            let mut gram = Vec::new();
            for _ in 0..2 * n {
                let on = rng.uniform() < 0.8;
                let u = rng.unit_vector(p);
                let s = if on { 1.0 } else { 0.0 };
                gram.extend_from_slice(&[s * u[0] * u[0], s * u[0] * u[1], s * u[1] * u[1]]);
            }
            let windows = (0..2)
                .map(|w| Window {
                    start: w as f64,
                    end: w as f64 + 1.0,
                    jumps_through_end: false,
                })
                .collect();
            let table = ExcitationTable::from_gramians(n, p, windows, gram, Some(0.05));
            let mut links = Vec::new();
            for _ in 0..(n + 1 + rng.below(4)) {
                let (a, b) = (rng.below(n) as u32, rng.below(n) as u32);
                if a == b {
                    continue;
                }
                let arcs = if rng.uniform() < 0.5 {
                    vec![(a, b), (b, a)]
                } else {
                    vec![(a, b)]
                };
                links.push(PlanLink {
                    arcs,
                    cost: 1.0,
                    installed: false,
                    weight: 1.0,
                });
            }
            let inst = Instance::from_links(n, links, &table);
            let m = inst.links.len();
            let feasible: Vec<Vec<bool>> = (0u32..1 << m)
                .map(|mask| (0..m).map(|k| mask & (1 << k) != 0).collect::<Vec<bool>>())
                .filter(|c| inst.holds(c))
                .collect();
            let mut part_of = Vec::new();
            for _ in 0..20 {
                // Units to classes 0..n (class n: the rest).
                let class: Vec<usize> = (0..n).map(|_| rng.below(n + 1)).collect();
                let parts: Vec<Vec<u32>> = (0..n)
                    .map(|c| (0..n as u32).filter(|&v| class[v as usize] == c).collect())
                    .filter(|p: &Vec<u32>| !p.is_empty())
                    .collect();
                let Some(row) = partition_row(&inst, &parts, &mut part_of) else {
                    continue;
                };
                for c in &feasible {
                    let y: Vec<f64> = c.iter().map(|&b| f64::from(u8::from(b))).collect();
                    assert!(
                        row.violation(&y) <= 1e-9,
                        "parts {parts:?} row {row:?} cuts off the plan {c:?}"
                    );
                    checked += 1;
                }
            }
        }
        assert!(checked > 100, "only {checked} checks ran");
    }
}
