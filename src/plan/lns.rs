//! Neighbourhood search: re-plan one region of the network at a time with
//! everything outside it held as in the incumbent, by branch and cut on the
//! small sub-problem (large-neighbourhood search; Shaw, "Using constraint
//! programming and local search methods to solve vehicle routing problems",
//! CP 1998).

use super::bnc::{Limits, search};
use super::instance::{Instance, PlanLink};
use std::collections::VecDeque;
use std::sync::atomic::{AtomicBool, Ordering::Relaxed};
use std::time::Instant;

/// Networks at least this large get neighbourhood search (on a second
/// thread, see `bnc::search`).
pub(crate) const MIN_UNITS: usize = 60;
/// Units per region: small networks leave more time to branch and cut,
/// large ones (at or above `LARGE` units) need bigger moves. Measured on
/// the planning benchmark (60 s): at 500 units 40-unit regions reached
/// 231.1–231.4k against 232.2k with 24; at 150 units 40 left too little
/// time for branching (gap 1.43 % against 1.22 %).
const REGION: usize = 24;
const LARGE_REGION: usize = 40;
const LARGE: usize = 300;
/// Branch-and-bound nodes per region (a deterministic effort limit).
const REGION_NODES: u64 = 60;
/// Most passes over the seeds; a pass that improves nothing ends the search.
const PASSES: usize = 10;

/// Improves a feasible link set region by region, in passes over seeds
/// taken from the units with the dearest chosen links, until a pass finds
/// nothing (at most [`PASSES`]). Stops at the deadline or once `stop` is
/// set (checked between regions).
pub(crate) fn improve(
    inst: &Instance,
    start: &[bool],
    deadline: Option<Instant>,
    stop: &AtomicBool,
) -> Vec<bool> {
    let mut best = start.to_vec();
    let mut best_cost = inst.cost(&best);
    let nbrs = inst.neighbours();
    // Seeds: units by decreasing cost of the chosen links at them.
    let mut weight = vec![0.0; inst.n];
    for (k, l) in inst.links.iter().enumerate() {
        if best[k] {
            for &(a, b) in &l.arcs {
                weight[a as usize] += l.cost;
                weight[b as usize] += l.cost;
            }
        }
    }
    let mut seeds: Vec<usize> = (0..inst.n).collect();
    seeds.sort_by(|&a, &b| weight[b].total_cmp(&weight[a]).then(a.cmp(&b)));
    let region_size = if inst.n >= LARGE {
        LARGE_REGION
    } else {
        REGION
    };
    for _pass in 0..PASSES {
        let before_pass = best_cost;
        let mut covered = vec![false; inst.n];
        for &seed in &seeds {
            if covered[seed] {
                continue;
            }
            if deadline.is_some_and(|d| Instant::now() >= d) || stop.load(Relaxed) {
                break;
            }
            let region = bfs_region(&nbrs, seed, region_size);
            // A seed inside an earlier region is skipped, so regions spread out.
            covered[seed] = true;
            for &v in region.iter().take(region_size / 3) {
                covered[v] = true;
            }
            if let Some(candidate) = reoptimise(inst, &best, &region, deadline) {
                let cost = inst.cost(&candidate);
                if cost < best_cost - 1e-9 && inst.holds(&candidate) {
                    best = candidate;
                    best_cost = cost;
                }
            }
        }
        if best_cost >= before_pass - 1e-9 {
            break;
        }
    }
    best
}

/// Up to `size` units around `seed` in breadth-first order.
fn bfs_region(nbrs: &[Vec<u32>], seed: usize, size: usize) -> Vec<usize> {
    let mut seen = vec![false; nbrs.len()];
    let mut order = Vec::with_capacity(size);
    let mut queue = VecDeque::from([seed]);
    seen[seed] = true;
    while let Some(v) = queue.pop_front() {
        order.push(v);
        if order.len() == size {
            break;
        }
        for &u in &nbrs[v] {
            if !seen[u as usize] {
                seen[u as usize] = true;
                queue.push_back(u as usize);
            }
        }
    }
    order
}

/// The cheapest link set that agrees with `current` outside `region`
/// (links with an end outside it are kept as they are), within the node
/// limit; `None` when the sub-search found nothing better.
fn reoptimise(
    inst: &Instance,
    current: &[bool],
    region: &[usize],
    deadline: Option<Instant>,
) -> Option<Vec<bool>> {
    let mut inside = vec![false; inst.n];
    region.iter().for_each(|&v| inside[v] = true);
    let mut map = Vec::new();
    let mut links = Vec::new();
    for (k, l) in inst.links.iter().enumerate() {
        let free = !l.installed
            && l.arcs
                .iter()
                .all(|&(a, b)| inside[a as usize] && inside[b as usize]);
        if free {
            map.push(k);
            links.push(l.clone());
        } else if current[k] {
            map.push(k);
            links.push(PlanLink {
                arcs: l.arcs.clone(),
                cost: 0.0,
                installed: true,
                weight: l.weight,
            });
        }
    }
    let sub = Instance::with_oracle(inst.n, links, inst.oracle.clone())
        .with_caps(inst.caps.clone())
        .with_ports(inst.ports.clone());
    let start: Vec<bool> = map.iter().map(|&k| current[k]).collect();
    let before = sub.cost(&start);
    let limits = Limits {
        deadline,
        nodes: Some(REGION_NODES),
        neighbourhood: None,
        root_deadline: None,
    };
    let result = search(&sub, start, limits, &crate::progress::Sink::silent());
    if sub.cost(&result.best) >= before - 1e-9 {
        return None;
    }
    let mut out: Vec<bool> = current
        .iter()
        .enumerate()
        .map(|(k, &c)| c && inst.links[k].installed)
        .collect();
    for (j, &k) in map.iter().enumerate() {
        out[k] = result.best[j];
    }
    Some(out)
}
