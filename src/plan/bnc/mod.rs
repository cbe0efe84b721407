//! Branch and cut on the covering model, with the LP solver's incremental
//! solves (dual simplex after adding rows or fixing variables; see `lp`).

mod helper;
mod node;
mod pseudocosts;

use super::component_bound;
use super::cuts::{
    Pool, Row, enumerate_rows, grow_separate, grown_rows, separate, support_separate,
};
use super::heuristics::{exchange, repair};
use super::instance::Instance;
use super::lp;
use crate::progress::Sink;
use helper::{HELPER_NODES, Helper};
use node::{CoverLp, Node, NodeLp, Origin, build_lp, compact};
use pseudocosts::Pseudocosts;
use std::cell::Cell;
use std::collections::BinaryHeap;
use std::rc::Rc;
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

/// Counters and timings of a search.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct SearchStats {
    /// LP solves (and restarts after edits) and their time.
    pub lp: lp::Clock,
    pub rounds: u64,
    pub nodes: u64,
    pub cuts: u64,
    pub root_bound: f64,
    pub separation_time: Duration,
    /// Excitation checks made during separation (inside `separation_time`).
    pub separation_checks: Duration,
    pub heuristic_time: Duration,
    /// Links fixed by reduced cost, summed over nodes.
    pub fixed_by_cost: u64,
    /// The bound from small components as columns, when computed.
    pub component: Option<component_bound::BoundStats>,
}

/// Result of the search.
pub(crate) struct SearchResult {
    pub best: Vec<bool>,
    pub lower_bound: f64,
    pub timed_out: bool,
    pub stats: SearchStats,
}

const THRESHOLDS: [f64; 4] = [0.999, 0.5, 0.2, 1e-6];
/// Largest support-connected sets whose rows are checked at the root and
/// at other nodes (see `cuts::support_separate`).
const ROOT_SUPPORT: usize = 9;
const NODE_SUPPORT: usize = 4;
/// Support-set size at a root while the other separators still find rows
/// (measurements: docs/tuning.md, "Root").
const ROOT_SUPPLEMENT: usize = 5;
/// Separation rounds per node below the root (fractional points).
const NODE_ROUNDS: u32 = 8;
const INT_TOL: f64 = 1e-6;
/// A dive continues with the y = 1 child only while the child's bound lies
/// within this share of the way from the best open bound to the cutoff;
/// otherwise the child is queued with its LP and the best node is taken
/// (a limited plunge, as in best-first search with plunging; the value 0.25
/// is the quotient SCIP's best-first node selector uses, from memory;
/// measurements: docs/tuning.md, "Tree").
const PLUNGE_QUOT: f64 = 0.25;

/// The bound from small components as columns (`component_bound`) runs on two-way
/// networks of at least this many units, with components of up to
/// `GROUP_SIZE` units as columns, fewer when the connected sets of that
/// size would pass `GROUP_SETS`.
const GROUP_MIN_UNITS: usize = 100;
const GROUP_SIZE: usize = 6;
const GROUP_SETS: usize = 500_000;

/// Open nodes that keep the rows and basis of their LP (about 10 kB each
/// at 150 units); beyond this, nodes are rebuilt from the master LP and
/// their fixings.
const STORED_LPS: usize = 50_000;

struct Search<'a, 'b> {
    inst: &'a Instance<'b>,
    pool: Pool,
    best: Vec<bool>,
    best_cost: f64,
    stats: SearchStats,
    start: Instant,
    deadline: Option<Instant>,
    progress: Sink,
    last_progress: Instant,
    /// Objective of the last LP looked at by the cut loop.
    last_objective: f64,
    /// Best proven lower bound so far (for the progress line): the root
    /// LP value while the root is cut, then the smallest open node bound.
    shown_bound: f64,
    node_limit: Option<u64>,
    /// See [`CoverLp::lost`].
    lost: Rc<Cell<f64>>,
}

impl<'a, 'b> Search<'a, 'b> {
    fn new(inst: &'a Instance<'b>, start: Vec<bool>, limits: Limits, progress: &Sink) -> Self {
        let now = Instant::now();
        Search {
            inst,
            pool: Pool::default(),
            // A start that breaks the caps is no incumbent.
            best_cost: if inst.fits(&start) {
                inst.cost(&start)
            } else {
                f64::INFINITY
            },
            best: start,
            stats: SearchStats::default(),
            start: now,
            deadline: limits.deadline,
            progress: progress.clone(),
            last_progress: now,
            last_objective: f64::NEG_INFINITY,
            shown_bound: f64::NEG_INFINITY,
            node_limit: limits.nodes,
            lost: Rc::new(Cell::new(f64::INFINITY)),
        }
    }

    /// Seeds the pool: the cut of every unit that is not excited alone (in
    /// the root LP), and on small networks every connected set of up to 3
    /// units (kept in the pool until violated).
    fn seed_pool(&mut self) {
        let inst = self.inst;
        let mut part_of = Vec::new();
        let seed: Vec<Row> = (0..inst.n as u32)
            .filter(|&v| !inst.oracle.excited(&[v]))
            .filter_map(|v| super::cuts::cover_row(inst, &[v], &mut part_of))
            .collect();
        for i in self.pool_add(seed) {
            self.pool.used[i] = true;
        }
        if inst.n <= 200 {
            let mut rows = Vec::new();
            enumerate_rows(inst, 3, &mut rows);
            self.pool_add(rows);
        }
    }

    /// The root LP over the used pool rows, solved.
    fn root_lp(&mut self) -> Option<CoverLp> {
        let used: Vec<u32> = (0..self.pool.rows.len() as u32)
            .filter(|&i| self.pool.used[i as usize])
            .collect();
        // A failure here leaves the search without a bound (the caller's
        // answer), so nothing is recorded in `lost`.
        let (inst, pool, lost) = (self.inst, &self.pool, &self.lost);
        self.stats.lp.run(1, || {
            build_lp(inst, pool, &used, &[], None, lost, f64::INFINITY)
        })
    }

    fn timed_out(&self) -> bool {
        self.deadline.is_some_and(|d| Instant::now() >= d)
            || self.node_limit.is_some_and(|m| self.stats.nodes >= m)
    }

    /// Bound at or above which a node cannot improve the incumbent.
    fn cutoff(&self) -> f64 {
        if self.inst.integral_costs {
            self.best_cost - 1.0 + 1e-6
        } else {
            self.best_cost - 1e-9 * self.best_cost.abs().max(1.0)
        }
    }

    /// Offers a feasible link set as incumbent, after link exchange when it
    /// is within 3 % of the incumbent.
    fn offer(&mut self, chosen: Vec<bool>) {
        if !self.inst.fits(&chosen) {
            return;
        }
        let raw = self.inst.cost(&chosen);
        let chosen = if raw < 1.03 * self.best_cost {
            exchange(self.inst, &chosen, self.deadline)
        } else {
            chosen
        };
        let cost = self.inst.cost(&chosen);
        if cost < self.best_cost - 1e-9 {
            self.best_cost = cost;
            self.best = chosen;
        }
    }

    fn heuristic(&mut self, y: &[f64]) {
        let t = Instant::now();
        if let Some(chosen) = repair(self.inst, y, self.deadline) {
            self.offer(chosen);
        }
        self.stats.heuristic_time += t.elapsed();
    }

    /// Adds rows to the pool; returns the indices of the new ones.
    fn pool_add(&mut self, rows: Vec<Row>) -> Vec<usize> {
        let added: Vec<usize> = rows.into_iter().filter_map(|r| self.pool.add(r)).collect();
        self.stats.cuts = self.pool.rows.len() as u64;
        added
    }

    /// Rows violated by `y` that the LP lacks: first from the pool, then by
    /// separation.
    fn violated(&mut self, lp: &CoverLp, y: &[f64], deep: bool) -> Vec<usize> {
        let t = Instant::now();
        let checks = self.inst.oracle.stats.borrow().time;
        let mut found: Vec<(f64, usize)> = self
            .pool
            .rows
            .iter()
            .enumerate()
            .filter(|(i, _)| !lp.has(*i))
            .filter_map(|(i, r)| r.violated_by(y, 1e-6).map(|v| (v, i)))
            .collect();
        if found.is_empty() {
            let mut rows = Vec::new();
            // At a root every separator runs each round, so that one LP
            // solve takes many rows (the LP, not the separation, was the
            // bottleneck at 500 units: ~8 rows per 45 ms solve); support sets
            // are then listed up to ROOT_SUPPLEMENT groups, and up to
            // ROOT_SUPPORT once nothing else is violated.
            separate(self.inst, y, &THRESHOLDS, &mut rows);
            if deep {
                grow_separate(self.inst, y, 8, &mut rows);
                let size = if rows.is_empty() {
                    ROOT_SUPPORT
                } else {
                    ROOT_SUPPLEMENT
                };
                support_separate(self.inst, y, size, &mut rows);
            } else if rows.is_empty() {
                support_separate(self.inst, y, NODE_SUPPORT, &mut rows);
            }
            let integral = y.iter().all(|v| v.min(1.0 - v).abs() < INT_TOL);
            if integral {
                let chosen: Vec<bool> = y.iter().map(|&v| v > 0.5).collect();
                for c in self.inst.violations(&chosen) {
                    grown_rows(self.inst, &c, &mut rows);
                }
                for (set, failure) in self.inst.failures(&chosen, false) {
                    if let Some(r) = self.inst.failure_row(&set, failure) {
                        rows.push(r);
                    }
                }
            }
            let added = self.pool_add(rows);
            found = added
                .into_iter()
                .map(|i| (self.pool.rows[i].violation(y), i))
                .filter(|(v, _)| *v > 1e-6)
                .collect();
        }
        self.stats.separation_time += t.elapsed();
        self.stats.separation_checks += self.inst.oracle.stats.borrow().time - checks;
        // Most violated first; at most 60 rows per round.
        found.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        found.truncate(60);
        for &(_, i) in &found {
            self.pool.used[i] = true;
        }
        found.into_iter().map(|(_, i)| i).collect()
    }

    /// Cuts the node's LP until no violated row is found or the bound passes
    /// the cutoff. Returns the LP (None: infeasible or pruned) and its point.
    fn cut_loop(
        &mut self,
        mut lp: CoverLp,
        max_rounds: u32,
        deep: bool,
    ) -> Option<(CoverLp, Vec<f64>)> {
        let mut rounds = 0;
        loop {
            self.last_objective = lp.objective();
            if lp.objective() >= self.cutoff() {
                return None;
            }
            let y = lp.values();
            let rows = self.violated(&lp, &y, deep);
            self.stats.rounds += 1;
            // An integral point with violated rows must be cut further: it
            // is never returned as if it were feasible, unless time is up.
            let integral = y.iter().all(|v| v.min(1.0 - v).abs() < INT_TOL);
            if rows.is_empty() || (rounds >= max_rounds && !integral) || self.timed_out() {
                return Some((lp, y));
            }
            let batch: Vec<(usize, &Row)> = rows.iter().map(|&i| (i, &self.pool.rows[i])).collect();
            lp = self.stats.lp.run(1, || lp.add_all(&batch))?;
            rounds += 1;
            if rounds % if deep { 25 } else { 5 } == 0 {
                let y = lp.values();
                self.heuristic(&y);
            }
            // At a root every LP value is a bound.
            let shown = deep.then(|| bound_of(self.inst, lp.objective()));
            self.report(shown);
        }
    }

    fn report(&mut self, bound: Option<f64>) {
        if let Some(b) = bound {
            self.shown_bound = self.shown_bound.max(b);
        }
        if !self.progress.wants() || self.last_progress.elapsed() < Duration::from_millis(500) {
            return;
        }
        self.last_progress = Instant::now();
        let b = self.shown_bound.max(0.0);
        let (elapsed, stats, best) = (self.start.elapsed(), &self.stats, self.best_cost);
        self.progress.update(|| {
            format!(
                "  {:>6.1} s  nodes {:>6}  rounds {:>6}  rows {:>6}  best {:>12.2}  bound {:>12.2}",
                elapsed.as_secs_f64(),
                stats.nodes,
                stats.rounds,
                stats.cuts,
                best,
                b
            )
        });
    }
}

fn bound_of(inst: &Instance, obj: f64) -> f64 {
    if inst.integral_costs {
        (obj - 1e-6).ceil()
    } else {
        obj
    }
}

/// When a search stops.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct Limits {
    /// Wall-clock deadline.
    pub deadline: Option<Instant>,
    /// Most branch-and-bound nodes (deterministic stop for sub-searches).
    pub nodes: Option<u64>,
    /// Neighbourhood search to run on a second thread on the incumbent
    /// (see [`Helper`]); `None`: none.
    pub neighbourhood: Option<Improve>,
    /// When the root's cutting stops (its LP value is still a bound).
    pub root_deadline: Option<Instant>,
}

/// A neighbourhood search: the best plan it finds from an incumbent,
/// within the deadline, stopping early when the flag is raised.
pub(crate) type Improve = fn(&Instance, &[bool], Option<Instant>, &AtomicBool) -> Vec<bool>;

/// Runs branch and cut from the incumbent `start` (which satisfies the
/// condition), until optimality is proven or the limits stop it; with a
/// neighbourhood search in `limits`, a second thread runs it (see
/// [`Helper`]).
pub(crate) fn search(
    inst: &Instance,
    start: Vec<bool>,
    limits: Limits,
    progress: &Sink,
) -> SearchResult {
    let Some(improve) = limits.neighbourhood else {
        return search_with(inst, start, limits, progress, None);
    };
    std::thread::scope(|scope| {
        let mut helper = Helper::spawn(scope, inst, limits, improve, progress);
        helper.start(&start);
        search_with(inst, start, limits, progress, Some(helper))
    })
}

// Long function: The tree loop and its dive; the heap, pseudocosts, dive fixings and

// helper schedule live across iterations. The root, a node's LP, reduced-cost fixing and

// the final bound are functions of their own.

fn search_with(
    inst: &Instance,
    start: Vec<bool>,
    limits: Limits,
    progress: &Sink,
    mut helper: Option<Helper>,
) -> SearchResult {
    let mut s = Search::new(inst, start, limits, progress);
    let Rooted {
        master,
        lower,
        helper_at,
    } = match root(&mut s, &mut helper, limits) {
        Ok(rooted) => rooted,
        Err((lower_bound, timed_out)) => return finish(s, lower_bound, timed_out),
    };

    let mut heap = BinaryHeap::new();
    heap.push(Node {
        bound: lower,
        depth: 0,
        fixings: Vec::new(),
        lp: NodeLp::Rebuild,
        origin: None,
    });
    let mut pseudo = Pseudocosts::new(inst.links.len());
    let mut timed_out = false;
    while let Some(node) = heap.pop() {
        if let Some(h) = helper.as_mut().filter(|_| s.stats.nodes >= helper_at) {
            h.take(&mut s, false);
        }
        if node.bound >= s.cutoff() {
            continue;
        }
        if s.timed_out() {
            heap.push(node);
            timed_out = true;
            break;
        }
        let global = node.bound.max(lower);
        s.report(Some(global));
        let Some(mut current) = open_lp(&mut s, &master, node.lp, &node.fixings, global) else {
            continue;
        };
        let mut fixings = node.fixings;
        let mut depth = node.depth;
        let mut origin = node.origin;
        // A child's LP may lack rows its parent had (it is rebuilt from the
        // master), so its bound is at least its parent's.
        let mut parent_bound = global;
        // Dive: process, branch, continue with the y = 1 child.
        loop {
            s.stats.nodes += 1;
            let Some((lp, y)) = s.cut_loop(current, NODE_ROUNDS, false) else {
                if let Some(o) = origin {
                    // Pruned by bound: the gain was at least this much.
                    if s.last_objective.is_finite() {
                        pseudo.record(o, s.last_objective);
                    }
                }
                break;
            };
            let obj = lp.objective();
            if let Some(o) = origin {
                pseudo.record(o, obj);
            }
            // Reduced-cost fixing: a link whose move off its bound would
            // lift the LP above the cutoff keeps its value in this subtree.
            let cutoff = s.cutoff();
            let room = cutoff - obj + 1e-7 * cutoff.abs().max(1.0);
            let mut lp = lp;
            let start = fixings.len();
            fix_by_cost(inst, &lp, &y, room, &mut fixings);
            let fixed = fixings.len() - start;
            if fixed > 0 {
                let next = s.stats.lp.run(1, || lp.fix_all(&fixings[start..]));
                s.stats.fixed_by_cost += fixed as u64;
                match next {
                    Some(next) => lp = next,
                    None => break,
                }
            }
            match pseudo.choose(inst, &y) {
                None => {
                    // Integral and no violated row: feasible.
                    let chosen: Vec<bool> = y.iter().map(|&v| v > 0.5).collect();
                    if inst.holds(&chosen) {
                        let t = Instant::now();
                        s.offer(chosen);
                        s.stats.heuristic_time += t.elapsed();
                    } else {
                        // Cutting stopped on the deadline: keep the node open.
                        let b = bound_of(inst, obj).max(parent_bound);
                        heap.push(Node::reopened(b, depth, &fixings));
                        timed_out = true;
                    }
                    break;
                }
                Some(k) => {
                    if s.stats.nodes.is_multiple_of(20) {
                        s.heuristic(&y);
                    }
                    let b = bound_of(inst, obj).max(parent_bound);
                    parent_bound = b;
                    let mut zero = fixings.clone();
                    zero.push((k as u32, false));
                    let stored = if heap.len() < STORED_LPS {
                        lp.resume()
                    } else {
                        NodeLp::Rebuild
                    };
                    heap.push(Node {
                        bound: b,
                        depth: depth + 1,
                        fixings: zero,
                        lp: stored,
                        origin: Some(Origin {
                            var: k,
                            up: false,
                            parent_objective: obj,
                            distance: y[k],
                        }),
                    });
                    origin = Some(Origin {
                        var: k,
                        up: true,
                        parent_objective: obj,
                        distance: 1.0 - y[k],
                    });
                    fixings.push((k as u32, true));
                    depth += 1;
                    let next = s.stats.lp.run(1, || lp.fix(k, true));
                    let Some(next) = next else { break };
                    // Plunge only while the child stays near the best open
                    // bound; otherwise it waits in the queue with its LP.
                    let child = bound_of(inst, next.objective()).max(b);
                    if let Some(top) = heap.peek().filter(|_| heap.len() < STORED_LPS) {
                        let low = top.bound.max(lower);
                        if child > low + PLUNGE_QUOT * (s.cutoff() - low) {
                            heap.push(Node {
                                bound: child,
                                depth,
                                fixings: std::mem::take(&mut fixings),
                                lp: next.resume(),
                                origin,
                            });
                            break;
                        }
                    }
                    current = next;
                    if s.timed_out() {
                        heap.push(Node::reopened(b, depth, &fixings));
                        timed_out = true;
                        break;
                    }
                }
            }
        }
        if timed_out {
            break;
        }
    }
    conclude(s, helper, &heap, lower, timed_out)
}

/// The search's answer after the tree: the helper's last results (the
/// component bound among them) and the lower bound from the open nodes.
fn conclude(
    mut s: Search,
    mut helper: Option<Helper>,
    heap: &BinaryHeap<Node>,
    lower: f64,
    timed_out: bool,
) -> SearchResult {
    let inst = s.inst;
    let mut floor = f64::NEG_INFINITY;
    if let Some(h) = helper.as_mut() {
        // A finished tree proves the incumbent optimal: the runs cannot
        // find anything cheaper or a higher bound, so they are stopped
        // rather than awaited.
        h.take(&mut s, !timed_out);
        if let Some(g) = h.take_bound(&mut s, !timed_out) {
            // A relative margin for the LP's tolerances.
            floor = bound_of(inst, g.bound - 1e-9 * g.bound.abs());
            s.stats.component = Some(g);
            s.progress.debug(|| format!("[groups] {g:?}"));
        }
    }
    let open_bound = heap.iter().map(|n| n.bound).fold(f64::INFINITY, f64::min);
    let lb = if timed_out {
        open_bound.max(lower).max(floor).min(s.best_cost)
    } else {
        s.best_cost
    };
    finish(s, lb, timed_out)
}

/// A node's LP: rebuilt from its parent's rows and basis, or from the
/// master LP and the node's fixings.
fn open_lp(
    s: &mut Search,
    master: &CoverLp,
    lp: NodeLp,
    fixings: &[(u32, bool)],
    global: f64,
) -> Option<CoverLp> {
    let solves = match lp {
        NodeLp::Warm(_) => 1,
        NodeLp::Rebuild => fixings.len() as u64 + 1,
    };
    let (inst, pool, lost) = (s.inst, &s.pool, &s.lost);
    s.stats.lp.run(solves, || match lp {
        NodeLp::Warm(r) => build_lp(inst, pool, &r.rows, fixings, Some(&r.warm), lost, global),
        // Rebuild from the master (which holds every used pool row).
        NodeLp::Rebuild => master.duplicate().fix_all(fixings),
    })
}

/// Reduced-cost fixing: appends to `fixings` every free link whose move
/// off its bound would lift the LP value by more than `room`.
fn fix_by_cost(
    inst: &Instance,
    lp: &CoverLp,
    y: &[f64],
    room: f64,
    fixings: &mut Vec<(u32, bool)>,
) {
    for (k, l) in inst.links.iter().enumerate() {
        if l.installed || fixings.iter().any(|&(f, _)| f as usize == k) {
            continue;
        }
        let d = lp.reduced_cost(k);
        let value = if y[k] < INT_TOL && d > room {
            false
        } else if y[k] > 1.0 - INT_TOL && -d > room {
            true
        } else {
            continue;
        };
        fixings.push((k as u32, value));
    }
}

/// What the root leaves for the tree: the compacted master LP, the root
/// bound, and the node count at which the helper's second run is taken.
struct Rooted {
    master: CoverLp,
    lower: f64,
    helper_at: u64,
}

/// The root: seed rows, cutting to convergence (or the root deadline),
/// the helper's first result and second start, the compacted master LP and
/// the component bound's start. `Err((lower bound, timed out))` when the
/// search ends at the root.
fn root(
    s: &mut Search,
    helper: &mut Option<Helper>,
    limits: Limits,
) -> Result<Rooted, (f64, bool)> {
    // The incumbent changes only when something strictly cheaper is found.
    let start_cost = s.best_cost;
    s.seed_pool();
    let Some(root) = s.root_lp() else {
        // The seed rows are valid, so this only happens on numerical trouble.
        return Err((f64::NEG_INFINITY, true));
    };

    let mut lower = f64::NEG_INFINITY;
    // The root's cutting may stop early to leave time for what follows.
    s.deadline = limits.root_deadline.or(limits.deadline);
    let root_result = s.cut_loop(root, u32::MAX, true);
    s.deadline = limits.deadline;
    let Some((root, y)) = root_result else {
        // Root pruned: the incumbent is optimal.
        s.stats.root_bound = s.last_objective;
        return Err((s.best_cost, false));
    };
    s.stats.root_bound = root.objective();
    lower = lower.max(bound_of(s.inst, root.objective()));
    s.heuristic(&y);
    let mut helper_at = 0;
    if let Some(h) = helper.as_mut() {
        // The second run starts from the root's incumbent (roundings of LP
        // points), which leads the search elsewhere than the first run's
        // start, unless the root found nothing.
        let rooted = (s.best_cost < start_cost).then(|| s.best.clone());
        h.take(s, false);
        if !s.timed_out() {
            h.start(rooted.as_deref().unwrap_or(&s.best));
            helper_at = s.stats.nodes + HELPER_NODES;
        }
    }
    if s.timed_out() {
        return Err((lower, true));
    }
    let master = s.stats.lp.run(1, || compact(s.inst, &s.pool, root));

    // A second bound, from small components as columns, on large two-way
    // networks, computed by the helper thread after its second run. It lifts
    // the bound reported, not the tree's node bounds (which keep ordering
    // the search).
    if let Some(h) = helper.as_mut()
        && s.inst.n >= GROUP_MIN_UNITS
        && component_bound::applies(s.inst)
    {
        h.start_bound(s.pool.rows.clone(), master.rows.clone());
    }
    Ok(Rooted {
        master,
        lower,
        helper_at,
    })
}

fn finish(s: Search, lower_bound: f64, timed_out: bool) -> SearchResult {
    s.progress.done();
    SearchResult {
        best: s.best,
        lower_bound: lower_bound.min(s.best_cost).min(s.lost.get()),
        timed_out,
        stats: s.stats,
    }
}
