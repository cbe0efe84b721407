//! The planner's view of a problem: links as arc lists with costs, the
//! excitation oracle with its cache and rank table, and the condition check
//! of a link set.

use crate::excitation::{ExcitationTable, eigenvalues};
use crate::problem::{NodeId, Problem};
use crate::topology::{pieces, scc};
use rayon::prelude::*;
use rustc_hash::FxHashMap as HashMap;
use std::cell::RefCell;
use std::rc::Rc;
use std::time::{Duration, Instant};

/// A candidate link as the planner sees it.
#[derive(Debug, Clone)]
pub(crate) struct PlanLink {
    /// Arcs (from, to) of the link: one or two.
    pub arcs: Vec<(u32, u32)>,
    /// Cost in the objective (0 for installed links).
    pub cost: f64,
    /// Already in place: always chosen.
    pub installed: bool,
    /// Weight of each of its arcs (the listener's in-degree grows by it).
    pub weight: f64,
}

impl PlanLink {
    /// The two units the link joins (a radio port at each).
    pub fn ends(&self) -> [u32; 2] {
        [self.arcs[0].0, self.arcs[0].1]
    }

    /// What the link adds to unit `to`'s weighted in-degree.
    pub fn weight_into(&self, to: u32) -> f64 {
        self.weight * self.arcs.iter().filter(|a| a.1 == to).count() as f64
    }
}

/// Counters of the oracle's work.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct OracleStats {
    pub queries: u64,
    pub scans: u64,
    pub time: Duration,
}

impl OracleStats {
    pub fn add(&mut self, other: &OracleStats) {
        self.queries += other.queries;
        self.scans += other.scans;
        self.time += other.time;
    }
}

/// Answers "is this unit set excited?" with a cache, a rank-sum pre-test and
/// an upper bound on the number of disjoint excited subsets.
pub(crate) struct Oracle<'a> {
    table: &'a ExcitationTable,
    /// r_i(w): eigenvalues of G_i^w at least μ_req/n, index `i * W + w`.
    ranks: Vec<u8>,
    /// max over windows of r_i(w): a set whose maxima sum below p is
    /// surely not excited.
    top_rank: Vec<u8>,
    /// Per unit, the windows where r_i(w) is below its maximum.
    dips: Vec<Vec<u32>>,
    windows: usize,
    p: usize,
    cache: RefCell<HashMap<Vec<u32>, bool>>,
    /// Windows in scan order: those that rejected a set recently move to
    /// the front.
    order: RefCell<Vec<usize>>,
    /// Small excited sets seen, indexed by their smallest unit: a set that
    /// contains one of them is excited (monotonicity).
    small_excited: RefCell<Vec<Vec<Vec<u32>>>>,
    pub stats: RefCell<OracleStats>,
}

/// Largest excited set remembered for containment tests.
const SMALL: usize = 4;

/// Most parts in a connected piece that [`Instance::packing`] counts
/// exactly (the recursion costs 3^k steps).
const EXACT_PARTS: usize = 10;

impl<'a> Oracle<'a> {
    /// A copy with empty caches, for use on another thread (the caches are
    /// memos: answers do not depend on them).
    pub fn fresh(&self) -> Self {
        Oracle {
            table: self.table,
            ranks: self.ranks.clone(),
            top_rank: self.top_rank.clone(),
            dips: self.dips.clone(),
            windows: self.windows,
            p: self.p,
            cache: RefCell::new(HashMap::default()),
            order: RefCell::new((0..self.windows).collect()),
            small_excited: RefCell::new(vec![Vec::new(); self.top_rank.len()]),
            stats: RefCell::new(OracleStats::default()),
        }
    }

    pub fn new(table: &'a ExcitationTable) -> Self {
        let (n, w, p) = (table.n(), table.windows().len(), table.p());
        let threshold = table.min_excitation() / n as f64;
        let ranks: Vec<u8> = (0..n)
            .into_par_iter()
            .flat_map_iter(|i| {
                (0..w).map(move |k| {
                    eigenvalues(p, table.gramian(k, NodeId(i as u32)))
                        .iter()
                        .filter(|&&l| l >= threshold)
                        .count() as u8
                })
            })
            .collect();
        let top_rank: Vec<u8> = (0..n)
            .map(|i| ranks[i * w..(i + 1) * w].iter().copied().max().unwrap_or(0))
            .collect();
        let dips: Vec<Vec<u32>> = (0..n)
            .map(|i| {
                (0..w as u32)
                    .filter(|&k| ranks[i * w + k as usize] < top_rank[i])
                    .collect()
            })
            .collect();
        Oracle {
            table,
            ranks,
            top_rank,
            dips,
            windows: w,
            p,
            cache: RefCell::new(HashMap::default()),
            order: RefCell::new((0..w).collect()),
            small_excited: RefCell::new(vec![Vec::new(); n]),
            stats: RefCell::new(OracleStats::default()),
        }
    }

    /// Is the (sorted) set excited?
    pub fn excited(&self, set: &[u32]) -> bool {
        if set.is_empty() {
            return false;
        }
        let mut stats = self.stats.borrow_mut();
        stats.queries += 1;
        if self.top_rank_sum(set) < self.p {
            return false;
        }
        if let Some(&v) = self.cache.borrow().get(set) {
            return v;
        }
        let start = Instant::now();
        let v = self.contains_small_excited(set)
            || (self.rank_bound(set, usize::MAX) >= 1 && {
                stats.scans += 1;
                let nodes: Vec<NodeId> = set.iter().map(|&i| NodeId(i)).collect();
                let mut order = self.order.borrow_mut();
                match self.table.first_weak_window(&nodes, order.iter().copied()) {
                    Some(w) => {
                        // Move the rejecting window to the front.
                        let pos = order.iter().position(|&x| x == w).expect("window in order");
                        order[..=pos].rotate_right(1);
                        false
                    }
                    None => true,
                }
            });
        stats.time += start.elapsed();
        if v && set.len() <= SMALL {
            self.small_excited.borrow_mut()[set[0] as usize].push(set.to_vec());
        }
        self.cache.borrow_mut().insert(set.to_vec(), v);
        v
    }

    /// True when a remembered small excited set lies inside `set` (sorted).
    fn contains_small_excited(&self, set: &[u32]) -> bool {
        let small = self.small_excited.borrow();
        set.iter().any(|&v| {
            small[v as usize]
                .iter()
                .any(|e| e.iter().all(|x| set.binary_search(x).is_ok()))
        })
    }

    /// min over windows of ⌊Σ_{parts} min(Σ_{i∈part} r_i(w), p) / p⌋, capped
    /// at `cap`: an upper bound on the number of disjoint excited unions of
    /// parts (Weyl: a group whose ranks sum below p has λ_min below μ_req).
    pub fn parts_bound(&self, parts: &[&[u32]], cap: usize) -> usize {
        let mut best = cap.min(parts.len());
        // Windows where every member is at its top rank give the largest
        // value; only the members' dips can lower it.
        let top: usize = parts.iter().map(|part| self.top_rank_sum(part)).sum();
        best = best.min(top / self.p);
        let mut windows: Vec<u32> = parts
            .iter()
            .flat_map(|part| {
                part.iter()
                    .flat_map(|&i| self.dips[i as usize].iter().copied())
            })
            .collect();
        windows.sort_unstable();
        windows.dedup();
        for w in windows.into_iter().map(|w| w as usize) {
            let total: usize = parts
                .iter()
                .map(|part| {
                    part.iter()
                        .map(|&i| self.ranks[i as usize * self.windows + w] as usize)
                        .sum::<usize>()
                        .min(self.p)
                })
                .sum();
            best = best.min(total / self.p);
            if best == 0 {
                break;
            }
        }
        best
    }

    /// Σ of the members' top ranks, capped at p.
    fn top_rank_sum(&self, part: &[u32]) -> usize {
        part.iter()
            .map(|&i| self.top_rank[i as usize] as usize)
            .sum::<usize>()
            .min(self.p)
    }

    /// Upper bound on the number of disjoint excited subsets of `set`.
    pub fn rank_bound(&self, set: &[u32], cap: usize) -> usize {
        let singles: Vec<&[u32]> = set.chunks(1).collect();
        self.parts_bound(&singles, cap)
    }

    /// The most disjoint excited unions of parts, each connected through
    /// `adj` (bit masks of neighbouring parts): exact, by the oracle on
    /// every union and a packing recursion over subsets, for at most 16
    /// parts. A union containing an excited one is excited (monotone).
    fn exact_packing(&self, parts: &[&[u32]], adj: &[u32]) -> usize {
        let k = parts.len();
        let full = (1usize << k) - 1;
        let mut excited = vec![false; full + 1];
        let mut usable = vec![false; full + 1];
        let mut union: Vec<u32> = Vec::new();
        // Sum of the parts' top ranks (capped at p): below p, not excited.
        let part_top: Vec<usize> = parts.iter().map(|part| self.top_rank_sum(part)).collect();
        let mut top = vec![0usize; full + 1];
        for m in 1..=full {
            let low = m.trailing_zeros() as usize;
            top[m] = (top[m & (m - 1)] + part_top[low]).min(self.p);
            excited[m] = if top[m] < self.p {
                false
            } else if (0..k).any(|b| m & (1 << b) != 0 && m != 1 << b && excited[m ^ (1 << b)]) {
                true
            } else {
                union.clear();
                (0..k)
                    .filter(|b| m & (1 << b) != 0)
                    .for_each(|b| union.extend_from_slice(parts[b]));
                union.sort_unstable();
                self.excited(&union)
            };
            usable[m] = excited[m] && connected(m as u32, adj);
        }
        // A packing can use minimal usable unions only (a usable union
        // holds one). contains[m]: some usable union lies inside m.
        let mut contains = usable.clone();
        for b in 0..k {
            for m in 1..=full {
                if m & (1 << b) != 0 && contains[m ^ (1 << b)] {
                    contains[m] = true;
                }
            }
        }
        // Minimal usable unions, by their lowest part.
        let mut minimal: Vec<Vec<usize>> = vec![Vec::new(); k];
        for m in 1..=full {
            if usable[m] && (0..k).all(|b| m & (1 << b) == 0 || !contains[m ^ (1 << b)]) {
                minimal[m.trailing_zeros() as usize].push(m);
            }
        }
        // best[m]: most disjoint minimal unions inside m. The part with the
        // lowest index is either in none or in one union with it (whose
        // lowest part it then is).
        let mut best = vec![0u8; full + 1];
        for m in 1..=full {
            let low = m.trailing_zeros() as usize;
            let mut b = best[m & (m - 1)];
            for &t in &minimal[low] {
                if t & !m == 0 {
                    b = b.max(1 + best[m ^ t]);
                }
            }
            best[m] = b;
        }
        best[full] as usize
    }
}

/// Is the part set `m` connected through the neighbour masks `adj`?
fn connected(m: u32, adj: &[u32]) -> bool {
    let mut reached = m & m.wrapping_neg();
    loop {
        let mut next = reached;
        let mut r = reached;
        while r != 0 {
            let b = r.trailing_zeros() as usize;
            next |= adj[b] & m;
            r &= r - 1;
        }
        if next == reached {
            return reached == m;
        }
        reached = next;
    }
}

/// The planning instance.
pub(crate) struct Instance<'a> {
    pub n: usize,
    pub links: Vec<PlanLink>,
    /// For each unit, the links with an arc into it.
    pub heads: Vec<Vec<usize>>,
    /// Shared with the sub-instances of neighbourhood search.
    pub oracle: Rc<Oracle<'a>>,
    /// Every link cost is a whole number (bounds can be rounded up).
    pub integral_costs: bool,
    /// Which single failure the plan must survive.
    pub survive: Survive,
    /// ν of partitions already counted, keyed by the parts joined with
    /// `u32::MAX` separators.
    packings: RefCell<HashMap<Vec<u32>, usize>>,
    /// Largest weighted in-degree per unit (the jump gain condition), when
    /// some cap can bind.
    pub caps: Option<Vec<f64>>,
    /// Most links per unit (radio ports, `max_links`), when some limit can
    /// bind; a unit without a limit has infinity.
    pub ports: Option<Vec<f64>>,
    /// For each unit, the links that touch it (either end).
    pub touching: Vec<Vec<usize>>,
}

/// A weighted in-degree within its cap (with a relative tolerance for the
/// rounding of the sum).
pub(crate) fn within(degree: f64, cap: f64) -> bool {
    degree <= cap + 1e-12 * cap.abs().max(1.0)
}

/// Which single failure a plan must survive (docs/theory.md §9).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Survive {
    /// No failure: the plain condition.
    #[default]
    Nothing,
    /// Any one link failing.
    Link,
    /// Any one unit lost (its own estimate excepted).
    Unit,
}

/// A failure scenario under which a set of units is a non-excited source
/// component.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Failure {
    /// Link k failed.
    Link(usize),
    /// Unit v was lost.
    Unit(u32),
}

impl<'a> Instance<'a> {
    pub fn new(problem: &Problem, table: &'a ExcitationTable) -> Self {
        let n = problem.n();
        let links: Vec<PlanLink> = problem
            .links
            .iter()
            .map(|l| PlanLink {
                arcs: l.arcs().map(|a| (a.from.0, a.to.0)).collect(),
                // A required link is forced in like an installed one; its
                // cost is a constant the structural stage adds back.
                cost: if l.installed || l.required {
                    0.0
                } else {
                    l.cost
                },
                installed: l.installed || l.required,
                weight: l.weight,
            })
            .collect();
        let caps = crate::certify::degree_caps(problem);
        // Caps matter only where all candidates together could exceed them.
        let mut room = vec![0.0f64; n];
        for l in &links {
            for &(_, to) in &l.arcs {
                room[to as usize] += l.weight;
            }
        }
        let binding = caps.iter().zip(&room).any(|(c, r)| *r > *c);
        let ports = port_limits(problem);
        Self::from_links(n, links, table)
            .with_caps(binding.then_some(caps))
            .with_ports(ports)
    }

    /// The instance with per-unit weighted in-degree caps (`None`: none).
    pub fn with_caps(mut self, caps: Option<Vec<f64>>) -> Self {
        self.caps = caps;
        self
    }

    /// The instance with per-unit port limits (`None`: none).
    pub fn with_ports(mut self, ports: Option<Vec<f64>>) -> Self {
        self.ports = ports;
        self
    }

    /// Chosen links touching unit `v`, plus `extra` when given.
    fn ports_used(&self, chosen: &[bool], v: u32, extra: Option<usize>) -> f64 {
        self.touching[v as usize]
            .iter()
            .filter(|&&j| chosen[j] || Some(j) == extra)
            .count() as f64
    }

    /// Unit `v` uses more links than its ports allow under `chosen`.
    pub fn over_ports(&self, chosen: &[bool], v: u32) -> bool {
        self.ports
            .as_ref()
            .is_some_and(|p| self.ports_used(chosen, v, None) > p[v as usize])
    }

    /// Link `k` breaks a cap or a port limit at one of its ends under
    /// `chosen` (dropping it helps).
    pub fn at_a_limit(&self, chosen: &[bool], k: usize) -> bool {
        let l = &self.links[k];
        l.arcs.iter().any(|&(_, t)| self.over_cap(chosen, t))
            || l.ends().iter().any(|&v| self.over_ports(chosen, v))
    }

    /// Weighted in-degree of every unit under `chosen`.
    fn in_degrees(&self, chosen: &[bool]) -> Vec<f64> {
        let mut d = vec![0.0; self.n];
        for (l, _) in self.links.iter().zip(chosen).filter(|(_, c)| **c) {
            for &(_, to) in &l.arcs {
                d[to as usize] += l.weight;
            }
        }
        d
    }

    /// Every unit's weighted in-degree is within its cap (the jump gain
    /// condition, docs/theory.md §6).
    pub fn fits(&self, chosen: &[bool]) -> bool {
        let ports_ok = self.ports.as_ref().is_none_or(|p| {
            (0..self.n as u32).all(|v| self.ports_used(chosen, v, None) <= p[v as usize])
        });
        let Some(caps) = &self.caps else {
            return ports_ok;
        };
        ports_ok
            && self
                .in_degrees(chosen)
                .iter()
                .zip(caps)
                .all(|(&d, &c)| within(d, c))
    }

    /// Weighted in-degree of unit `to` under `chosen` plus link `extra`.
    fn degree_at(&self, chosen: &[bool], to: u32, extra: Option<usize>) -> f64 {
        self.heads[to as usize]
            .iter()
            .filter(|&&j| chosen[j] || Some(j) == extra)
            .map(|&j| self.links[j].weight_into(to))
            .sum()
    }

    /// Adding link `k` to `chosen` keeps the caps of its listeners (only
    /// they change).
    pub fn fits_with(&self, chosen: &[bool], k: usize) -> bool {
        if let Some(p) = &self.ports
            && self.links[k]
                .ends()
                .iter()
                .any(|&v| self.ports_used(chosen, v, Some(k)) > p[v as usize])
        {
            return false;
        }
        let Some(caps) = &self.caps else {
            return true;
        };
        self.links[k]
            .arcs
            .iter()
            .all(|&(_, to)| within(self.degree_at(chosen, to, Some(k)), caps[to as usize]))
    }

    /// Unit `t` is over its cap under `chosen`.
    pub fn over_cap(&self, chosen: &[bool], t: u32) -> bool {
        self.caps
            .as_ref()
            .is_some_and(|caps| !within(self.degree_at(chosen, t, None), caps[t as usize]))
    }

    pub fn from_links(n: usize, links: Vec<PlanLink>, table: &'a ExcitationTable) -> Self {
        Self::with_oracle(n, links, Rc::new(Oracle::new(table)))
    }

    /// An instance on the same units and excitation with other links.
    pub fn with_oracle(n: usize, links: Vec<PlanLink>, oracle: Rc<Oracle<'a>>) -> Self {
        let mut heads = vec![Vec::new(); n];
        let mut touching = vec![Vec::new(); n];
        for (k, l) in links.iter().enumerate() {
            for &(_, to) in &l.arcs {
                if heads[to as usize].last() != Some(&k) {
                    heads[to as usize].push(k);
                }
            }
            for v in l.ends() {
                if touching[v as usize].last() != Some(&k) {
                    touching[v as usize].push(k);
                }
            }
        }
        let integral_costs = links
            .iter()
            .all(|l| l.cost.fract() == 0.0 && l.cost.abs() < 1e15);
        Instance {
            n,
            links,
            heads,
            oracle,
            integral_costs,
            survive: Survive::Nothing,
            packings: RefCell::new(HashMap::default()),
            caps: None,
            ports: None,
            touching,
        }
    }

    /// An upper bound on ν(parts): the most disjoint excited unions of
    /// parts that are connected through candidate links between the parts
    /// (only such unions can be source-closed pieces of a plan, see
    /// `cuts`). The parts split into the connected pieces of that quotient
    /// graph; a piece of at most `EXACT_PARTS` parts is counted exactly,
    /// a larger one by the rank bound.
    pub fn packing(&self, parts: &[&[u32]]) -> usize {
        let mut key: Vec<u32> = Vec::with_capacity(parts.iter().map(|p| p.len() + 1).sum());
        for part in parts {
            key.extend_from_slice(part);
            key.push(u32::MAX);
        }
        if let Some(&nu) = self.packings.borrow().get(&key) {
            return nu;
        }
        let nu = self.count_packing(parts);
        self.packings.borrow_mut().insert(key, nu);
        nu
    }

    fn count_packing(&self, parts: &[&[u32]]) -> usize {
        let k = parts.len();
        let mut part_of: HashMap<u32, usize> = HashMap::default();
        for (j, part) in parts.iter().enumerate() {
            for &v in *part {
                part_of.insert(v, j);
            }
        }
        let mut nbrs: Vec<Vec<u32>> = vec![Vec::new(); k];
        for (j, part) in parts.iter().enumerate() {
            for &b in *part {
                for &l in &self.heads[b as usize] {
                    for &(from, to) in &self.links[l].arcs {
                        if to == b
                            && let Some(&i) = part_of.get(&from)
                            && i != j
                        {
                            nbrs[j].push(i as u32);
                            nbrs[i].push(j as u32);
                        }
                    }
                }
            }
        }
        // Connected pieces of the quotient graph.
        let mut total = 0;
        for members in pieces(&nbrs) {
            let sub: Vec<&[u32]> = members.iter().map(|&j| parts[j as usize]).collect();
            let bound = self.oracle.parts_bound(&sub, sub.len());
            total += if bound == 0 || members.len() > EXACT_PARTS {
                bound
            } else if members.len() == 1 {
                usize::from(self.oracle.excited(sub[0]))
            } else if bound == 1 {
                // The piece is connected: one union exactly when it is
                // excited as a whole.
                let mut union: Vec<u32> = sub.iter().flat_map(|p| p.iter().copied()).collect();
                union.sort_unstable();
                usize::from(self.oracle.excited(&union))
            } else {
                let adj: Vec<u32> = members
                    .iter()
                    .map(|&j| {
                        nbrs[j as usize]
                            .iter()
                            .map(|x| 1u32 << members.binary_search(x).expect("same piece"))
                            .fold(0, |a, b| a | b)
                    })
                    .collect();
                self.oracle.exact_packing(&sub, &adj).min(bound)
            };
        }
        total
    }

    /// For each unit, the units it shares a candidate link with (sorted).
    pub fn neighbours(&self) -> Vec<Vec<u32>> {
        let mut nbrs: Vec<Vec<u32>> = vec![Vec::new(); self.n];
        for l in &self.links {
            for &(a, b) in &l.arcs {
                nbrs[a as usize].push(b);
                nbrs[b as usize].push(a);
            }
        }
        for v in nbrs.iter_mut() {
            v.sort_unstable();
            v.dedup();
        }
        nbrs
    }

    pub fn cost(&self, chosen: &[bool]) -> f64 {
        0.0 + self
            .links
            .iter()
            .zip(chosen)
            .filter(|(_, c)| **c)
            .map(|(l, _)| l.cost)
            .sum::<f64>()
    }

    /// Source components of the digraph of the links with `chosen[k]`, each
    /// sorted, ordered by smallest unit.
    pub fn source_components(&self, chosen: &[bool]) -> Vec<Vec<u32>> {
        let mut adj: Vec<Vec<u32>> = vec![Vec::new(); self.n];
        for (l, _) in self.links.iter().zip(chosen).filter(|(_, c)| **c) {
            for &(a, b) in &l.arcs {
                adj[a as usize].push(b);
            }
        }
        let comp = scc(&adj);
        let count = comp.iter().copied().max().map_or(0, |m| m + 1);
        let mut entered = vec![false; count];
        for (a, outs) in adj.iter().enumerate() {
            for &b in outs {
                if comp[a] != comp[b as usize] {
                    entered[comp[b as usize]] = true;
                }
            }
        }
        let mut sets: Vec<Vec<u32>> = vec![Vec::new(); count];
        for (v, &c) in comp.iter().enumerate() {
            if !entered[c] {
                sets[c].push(v as u32);
            }
        }
        let mut out: Vec<Vec<u32>> = sets.into_iter().filter(|s| !s.is_empty()).collect();
        out.sort();
        out
    }

    /// Non-excited source components of a link set (empty: condition holds).
    /// Non-excited source components of the chosen links, and, under a
    /// survival requirement, those of every single failure (sorted sets,
    /// no repeats).
    pub fn violations(&self, chosen: &[bool]) -> Vec<Vec<u32>> {
        self.violations_until(chosen, None)
            .expect("no deadline, no early stop")
    }

    /// [`Self::violations`], or `None` when `deadline` passes while the
    /// single failures are checked (one source-component pass each).
    pub fn violations_until(
        &self,
        chosen: &[bool],
        deadline: Option<std::time::Instant>,
    ) -> Option<Vec<Vec<u32>>> {
        let mut out: Vec<Vec<u32>> = self
            .source_components(chosen)
            .into_iter()
            .filter(|c| !self.oracle.excited(c))
            .collect();
        if self.survive != Survive::Nothing && out.is_empty() {
            out.extend(
                self.failures_until(chosen, false, deadline)?
                    .into_iter()
                    .map(|f| f.0),
            );
            out.sort();
            out.dedup();
        }
        Some(out)
    }

    /// The condition, the caps and, under a survival requirement, every
    /// single failure.
    pub fn holds(&self, chosen: &[bool]) -> bool {
        self.fits(chosen) && self.holds_structure(chosen)
    }

    /// The condition (and survival) without the caps.
    pub fn holds_structure(&self, chosen: &[bool]) -> bool {
        let plain = self
            .source_components(chosen)
            .iter()
            .all(|c| self.oracle.excited(c));
        plain && (self.survive == Survive::Nothing || self.failures(chosen, true).is_empty())
    }

    /// Failure scenarios under which a non-excited source component appears
    /// (at most one when `first_only`).
    pub fn failures(&self, chosen: &[bool], first_only: bool) -> Vec<(Vec<u32>, Failure)> {
        self.failures_until(chosen, first_only, None)
            .expect("no deadline, no early stop")
    }

    /// [`Self::failures`], or `None` when `deadline` passes first.
    pub fn failures_until(
        &self,
        chosen: &[bool],
        first_only: bool,
        deadline: Option<std::time::Instant>,
    ) -> Option<Vec<(Vec<u32>, Failure)>> {
        let late = || deadline.is_some_and(|d| std::time::Instant::now() >= d);
        let mut out = Vec::new();
        let mut mask = chosen.to_vec();
        match self.survive {
            Survive::Nothing => {}
            Survive::Link => {
                for k in (0..self.links.len()).filter(|&k| chosen[k]) {
                    if late() {
                        return None;
                    }
                    mask[k] = false;
                    for c in self.source_components(&mask) {
                        if !self.oracle.excited(&c) {
                            out.push((c, Failure::Link(k)));
                            if first_only {
                                return Some(out);
                            }
                        }
                    }
                    mask[k] = true;
                }
            }
            Survive::Unit => {
                for v in 0..self.n as u32 {
                    if late() {
                        return None;
                    }
                    for (k, l) in self.links.iter().enumerate() {
                        mask[k] = chosen[k] && !l.arcs.iter().any(|&(a, b)| a == v || b == v);
                    }
                    for c in self.source_components(&mask) {
                        if c != [v] && !self.oracle.excited(&c) {
                            out.push((c, Failure::Unit(v)));
                            if first_only {
                                return Some(out);
                            }
                        }
                    }
                }
            }
        }
        Some(out)
    }

    /// The row a failure scenario violates: two distinct links entering U
    /// (any one link failing), or one entering link whose tail is not the
    /// lost unit. Installed links count as chosen. `None` when installed
    /// links already satisfy it.
    pub fn failure_row(&self, set: &[u32], failure: Failure) -> Option<super::row::Row> {
        let mut inside = vec![false; self.n];
        set.iter().for_each(|&v| inside[v as usize] = true);
        let (lost, mut rhs) = match failure {
            Failure::Link(_) => (None, 2i64),
            Failure::Unit(v) => (Some(v), 1i64),
        };
        let mut links = Vec::new();
        for (k, l) in self.links.iter().enumerate() {
            let enters = l
                .arcs
                .iter()
                .any(|&(a, b)| inside[b as usize] && !inside[a as usize] && Some(a) != lost);
            if enters {
                if l.installed {
                    rhs -= 1;
                } else {
                    links.push(k as u32);
                }
            }
        }
        (rhs > 0).then_some(super::row::Row {
            links,
            rhs: rhs as u32,
        })
    }
}

/// Per-unit port limits (`max_links`) as numbers, infinity where none;
/// `None` when no unit has a limit its candidates could exceed.
pub(crate) fn port_limits(problem: &Problem) -> Option<Vec<f64>> {
    let count = problem.links_per_unit((0..problem.links.len() as u32).map(crate::problem::LinkId));
    let limits: Vec<f64> = problem
        .nodes
        .iter()
        .map(|n| n.max_links.map_or(f64::INFINITY, f64::from))
        .collect();
    limits
        .iter()
        .zip(&count)
        .any(|(&m, &c)| f64::from(c) > m)
        .then_some(limits)
}
