//! A second lower bound for networks of two-way links, from small
//! components as columns.
//!
//! Every component of a valid plan is excited. Components of at most `k`
//! units become columns: a column is an excited connected unit set, costed
//! at its minimum spanning tree over the candidate links inside it.
//! Larger components stay in link variables `z`. With `x_S` for columns and
//! `u_i` = 1 when unit i lies in a large component:
//!
//! - coverage: `Σ_{S ∋ i} x_S + u_i = 1` for every unit;
//! - every row of the covering model on the links both use,
//!   `z + Σ_S x_S · tree(S)` (a plan with its small components replaced by
//!   their spanning trees is still valid, so the rows hold for it);
//! - size rows: `z(δ(S)) ≥ u_i` for a connected set S ∋ i of at most `k`
//!   units (a larger component leaves S through one of its own links);
//! - large-component rows: `z(links touching S) ≥ k/(k+1) · u(S)` for any
//!   set S (contract the outside of S to one vertex: the large components'
//!   links touching S span the units of S in large components plus that
//!   vertex, with one piece per large component inside S, each of more than
//!   k units, and one more for the rest).
//!
//! The LP is solved by column generation (Dantzig & Wolfe, "Decomposition
//! principle for linear programs", Oper. Res. 8, 1960; Gilmore & Gomory,
//! "A linear programming approach to the cutting-stock problem", Oper. Res.
//! 9, 1961) with rows separated on its points. Every excited connected set
//! of at most `k` units is listed, so pricing is exact, and each round's LP
//! value plus `n` times the least reduced cost is a lower bound (a plan has
//! at most `n` columns), whether or not the rounds run to the end.

mod columns;
mod rows;

use columns::{list_columns, price};
use rows::{large_rows, round_lp, size_rows, take_most};

use super::cuts::{Pool, grow_separate, separate, support_separate};
use super::instance::{Instance, Survive};
use super::lp::{Basis, Outcome, Solved};
use std::collections::HashSet;
use std::sync::atomic::{AtomicBool, Ordering as AtomicOrdering};
use std::time::{Duration, Instant};

/// Most new columns, covering-model rows, size rows and large-component
/// rows taken per round.
const NEW_COLUMNS: usize = 200;
const NEW_CUTS: usize = 100;
const NEW_SIZE_ROWS: usize = 200;
const NEW_LARGE_ROWS: usize = 100;
const TOL: f64 = 1e-6;
/// Longest LP solve of one round, and of its restart from the last basis.
const ROUND_TIME: Duration = Duration::from_secs(20);
const WARM_TIME: Duration = Duration::from_secs(2);

/// What the bound computation did.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct BoundStats {
    /// Best lower bound over the rounds (not rounded).
    pub bound: f64,
    /// Largest component size taken as columns.
    pub k: usize,
    pub rounds: u32,
    /// Connected sets of at most `k` units, and the excited ones (columns).
    pub sets: usize,
    pub columns: usize,
    /// Columns that entered the LP.
    pub used_columns: usize,
    /// The rounds ran until nothing was priced or separated.
    pub converged: bool,
    pub time: Duration,
}

/// Whether the bound applies: every link two-way and not installed, and
/// no failure to survive (whose rows need not hold once small components
/// are replaced by their spanning trees).
pub(crate) fn applies(inst: &Instance) -> bool {
    inst.survive == Survive::Nothing && inst.links.iter().all(|l| l.arcs.len() == 2 && !l.installed)
}

struct Column {
    set: u32,
    tree: Vec<u32>,
    cost: f64,
}

/// A row of the LP after the coverage rows.
#[derive(PartialEq, Eq, Hash, Clone)]
enum Extra {
    /// A covering-model row (pool index).
    Cut(usize),
    /// `z(δ(S)) ≥ u_i` for listed set S and unit i.
    Size(u32, u32),
    /// `z(links touching S) ≥ k/(k+1) · u(S)` (≥ `u(S)` for `|S| ≤ k`).
    Large(Vec<u32>),
    /// `z(links touching S) ≥ u(S) − ⌊|S|/(k+1)⌋`.
    Count(Vec<u32>),
}

/// The bound with components of at most `k` units as columns, starting from
/// the pool rows `start`; rows found on the way join the pool. Returns the
/// figures and the last LP point on the links (`z + Σ x_S·tree(S)`). `None` when
/// the deadline passes before a first LP is solved, or on solver trouble
/// before that.
#[allow(clippy::too_many_arguments)]
// Long function: The column-generation rounds; active columns, extra rows, the warm basis
// and the last point live across rounds. Listing columns, a round's LP, pricing and the
// row separations are functions of their own.
pub(crate) fn component_bound(
    inst: &Instance,
    pool: &mut Pool,
    start: &[u32],
    max_k: usize,
    max_sets: usize,
    thresholds: &[f64],
    deadline: Option<Instant>,
    stop: &AtomicBool,
    sink: &crate::progress::Sink,
) -> Option<(BoundStats, Vec<f64>)> {
    let t0 = Instant::now();
    let late =
        || stop.load(AtomicOrdering::Relaxed) || deadline.is_some_and(|d| Instant::now() >= d);
    // Time for one LP solve: until the deadline, at most ROUND_TIME.
    let time_left = || {
        deadline.map_or(ROUND_TIME, |d| {
            d.saturating_duration_since(Instant::now()).min(ROUND_TIME)
        })
    };
    let debug = sink.wants_debug();
    let n = inst.n;
    let m = inst.links.len();
    let ends: Vec<(u32, u32)> = inst.links.iter().map(|l| l.arcs[0]).collect();
    let nbrs = inst.neighbours();
    // incident[v]: links with an end at v (two-way links: those into v).
    let incident = &inst.heads;

    let (k, sets, columns) = list_columns(inst, &nbrs, &ends, max_k, max_sets, &late, sink, t0)?;
    let mut stats = BoundStats {
        bound: f64::NEG_INFINITY,
        k,
        sets: sets.len(),
        columns: columns.len(),
        ..BoundStats::default()
    };

    // Start with the columns of at most two units.
    let mut active: Vec<u32> = (0..columns.len() as u32)
        .filter(|&c| sets[columns[c as usize].set as usize].len() <= 2)
        .collect();
    let mut is_active = vec![false; columns.len()];
    active.iter().for_each(|&c| is_active[c as usize] = true);
    let mut extras: Vec<Extra> = start.iter().map(|&i| Extra::Cut(i as usize)).collect();
    let mut present: HashSet<Extra> = extras.iter().cloned().collect();
    let mut warm: Option<(Basis, usize, usize)> = None;
    let mut last_point: Vec<f64> = Vec::new();

    loop {
        if late() {
            break;
        }
        stats.rounds += 1;
        let (mut p, z, u, x) = round_lp(inst, k, &active, &columns, &sets, &extras, pool, &ends);
        let vars = m + n + active.len();
        let rows = n + extras.len();
        // Each solve within the deadline and at most ROUND_TIME: a solve
        // that stalls ends the rounds with the bound so far.
        let limit = time_left();
        // A restart from the grown basis takes well under a second at
        // 150 units, but now and then stalls: after WARM_TIME, a cold solve.
        p.set_time_limit(if warm.is_some() {
            limit.min(WARM_TIME)
        } else {
            limit
        });
        let optimal = |solved: Outcome| solved.solved().filter(Solved::proven_optimal);
        let ts = Instant::now();
        let solved = match &warm {
            // On trouble from the grown basis, a cold solve in the time left.
            Some((w, old_vars, old_rows)) => {
                optimal(p.solve(Some(&w.grown(*old_vars, vars - old_vars, rows - old_rows))))
                    .or_else(|| {
                        if debug {
                            sink.debug(|| {
                                format!("[groups] warm solve failed after {:.1?}", ts.elapsed())
                            });
                        }
                        p.set_time_limit(time_left());
                        optimal(p.solve(None))
                    })
            }
            None => optimal(p.solve(None)),
        };
        let Some(sol) = solved else {
            if debug {
                sink.debug(|| format!("[groups] round {}: no optimal LP", stats.rounds));
            }
            break;
        };
        let value = sol.objective();
        let Some(duals) = sol.row_duals() else { break };
        warm = sol.basis().map(|w| (w, vars, rows));

        // Pricing over every listed column.
        let (least, mut priced) = price(inst, pool, &extras, &columns, &sets, &is_active, &duals);
        stats.bound = stats.bound.max(value + n as f64 * least);
        priced.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        priced.truncate(NEW_COLUMNS);

        // The point, and rows it violates.
        let zv: Vec<f64> = z.iter().map(|&v| sol.value(v)).collect();
        let uv: Vec<f64> = u.iter().map(|&v| sol.value(v)).collect();
        let mut y = zv.clone();
        for (j, &c) in active.iter().enumerate() {
            let xj = sol.value(x[j]);
            if xj > 0.0 {
                for &e in &columns[c as usize].tree {
                    y[e as usize] += xj;
                }
            }
        }
        last_point.clone_from(&y);
        let mut new_rows: Vec<Extra> = Vec::new();
        // Covering-model rows on y, from the pool first.
        let mut cuts: Vec<(f64, usize)> = pool
            .rows
            .iter()
            .enumerate()
            .filter(|(i, _)| !present.contains(&Extra::Cut(*i)))
            .filter_map(|(i, r)| r.violated_by(&y, TOL).map(|v| (v, i)))
            .collect();
        if cuts.is_empty() {
            let mut found = Vec::new();
            separate(inst, &y, thresholds, &mut found);
            support_separate(inst, &y, 5, &mut found);
            for row in found {
                if let Some(i) = pool.add(row)
                    && let Some(v) = pool.rows[i].violated_by(&y, TOL)
                {
                    cuts.push((v, i));
                }
            }
        }
        cuts.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        cuts.truncate(NEW_CUTS);
        new_rows.extend(cuts.iter().map(|&(_, i)| Extra::Cut(i)));
        // Size rows.
        let mut size = size_rows(&sets, &uv, &zv, incident, &ends, &present);
        take_most(&mut size, NEW_SIZE_ROWS, &mut new_rows);
        // Large-component rows: pieces of the z support, and listed sets.
        let mut large = large_rows(n, k, &sets, &uv, &zv, incident, &ends, &present);
        take_most(&mut large, NEW_LARGE_ROWS, &mut new_rows);

        if debug {
            sink.debug(|| format!("[groups] solve {:.2?}", ts.elapsed()));
            let xs: Vec<f64> = x.iter().map(|&v| sol.value(v)).collect();
            sink.debug(|| format!(
                "[groups] large units {:.2} (fractional u {}), columns used {} (fractional {}), z total {:.2}",
                uv.iter().sum::<f64>(),
                uv.iter().filter(|&&v| v > TOL && v < 1.0 - TOL).count(),
                xs.iter().filter(|&&v| v > TOL).count(),
                xs.iter().filter(|&&v| v > TOL && v < 1.0 - TOL).count(),
                zv.iter().sum::<f64>()
            ));
            sink.debug(|| format!(
                "[groups] round {} value {value:.1} least {least:.2} bound {:.1} columns {} (+{}) rows {} (+{}) at {:.1?}",
                stats.rounds,
                stats.bound,
                active.len(),
                priced.len(),
                extras.len(),
                new_rows.len(),
                t0.elapsed()
            ));
        }
        if !priced.is_empty() {
            // Columns alone this round: the grown basis then stays primal
            // feasible (rows alone: dual feasible), so that one simplex
            // restarts from it; with both it could be neither.
            new_rows.clear();
        }
        if priced.is_empty() && new_rows.is_empty() {
            // Before stopping, the root's deeper separators on y.
            let mut found = Vec::new();
            grow_separate(inst, &y, 8, &mut found);
            support_separate(inst, &y, 9, &mut found);
            let added: Vec<usize> = found.into_iter().filter_map(|row| pool.add(row)).collect();
            let mut deep: Vec<(f64, usize)> = added
                .into_iter()
                .filter_map(|i| pool.rows[i].violated_by(&y, TOL).map(|v| (v, i)))
                .collect();
            deep.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            deep.truncate(NEW_CUTS);
            new_rows.extend(deep.iter().map(|&(_, i)| Extra::Cut(i)));
        }
        if priced.is_empty() && new_rows.is_empty() {
            stats.bound = stats.bound.max(value);
            stats.converged = true;
            break;
        }
        for &(_, c) in &priced {
            is_active[c as usize] = true;
            active.push(c);
        }
        for row in new_rows {
            present.insert(row.clone());
            extras.push(row);
        }
    }
    stats.used_columns = active.len();
    stats.time = t0.elapsed();
    (stats.bound > f64::NEG_INFINITY).then_some((stats, last_point))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::excitation::ExcitationTable;
    use crate::plan::instance::PlanLink;
    use crate::rng::Rng;
    use crate::signal::Window;

    fn windows(count: usize) -> Vec<Window> {
        (0..count)
            .map(|w| Window {
                start: w as f64,
                end: w as f64 + 1.0,
                jumps_through_end: false,
            })
            .collect()
    }

    fn two_way(a: u32, b: u32, cost: f64) -> PlanLink {
        PlanLink {
            arcs: vec![(a, b), (b, a)],
            cost,
            installed: false,
            weight: 1.0,
        }
    }

    fn bound(inst: &Instance, k: usize) -> BoundStats {
        let mut pool = Pool::default();
        let stop = AtomicBool::new(false);
        component_bound(
            inst,
            &mut pool,
            &[],
            k,
            usize::MAX,
            &[0.999, 0.5, 0.2, 1e-6],
            None,
            &stop,
            &crate::progress::Sink::silent(),
        )
        .expect("a bound")
        .0
    }

    /// Cormen, Leiserson, Rivest & Stein, "Introduction to Algorithms", 3rd
    /// ed., 2009, Fig. 23.1: with only unit a excited, every component must
    /// hold a, so the cheapest plan is the minimum spanning tree, 37. With
    /// columns of up to 9 units the whole network is one column and the LP
    /// is exact; with smaller columns the bound may not pass it.
    #[test]
    fn clrs_figure_23_1_bound_is_the_spanning_tree() {
        let names = "abcdefghi";
        let edges = [
            ("ab", 4.0),
            ("ah", 8.0),
            ("bc", 8.0),
            ("bh", 11.0),
            ("cd", 7.0),
            ("cf", 4.0),
            ("ci", 2.0),
            ("de", 9.0),
            ("df", 14.0),
            ("ef", 10.0),
            ("fg", 2.0),
            ("gh", 1.0),
            ("gi", 6.0),
            ("hi", 7.0),
        ];
        let id = |c: char| names.find(c).unwrap() as u32;
        let links: Vec<PlanLink> = edges
            .iter()
            .map(|(e, c)| {
                let mut ch = e.chars();
                two_way(id(ch.next().unwrap()), id(ch.next().unwrap()), *c)
            })
            .collect();
        // p = 2: unit a has the identity Gramian, the others nothing.
        let mut gram = vec![0.0; 9 * 3];
        gram[0] = 1.0;
        gram[2] = 1.0;
        let table = ExcitationTable::from_gramians(9, 2, windows(1), gram, Some(0.5));
        let inst = Instance::from_links(9, links, &table);
        let exact = bound(&inst, 9);
        assert!(exact.converged);
        assert!((exact.bound - 37.0).abs() < 1e-6, "{exact:?}");
        // Its last LP point is then the spanning tree itself: a valid plan
        // at that cost.
        let stop = AtomicBool::new(false);
        let (_, y) = component_bound(
            &inst,
            &mut Pool::default(),
            &[],
            9,
            usize::MAX,
            &[0.5],
            None,
            &stop,
            &crate::progress::Sink::silent(),
        )
        .expect("a bound");
        let chosen: Vec<bool> = y.iter().map(|&v| v > 0.5).collect();
        assert!(inst.holds(&chosen));
        assert!((inst.cost(&chosen) - 37.0).abs() < 1e-9);
        for k in 1..9 {
            let b = bound(&inst, k);
            assert!(b.bound <= 37.0 + 1e-6, "k {k}: {b:?}");
        }
    }

    /// Validity against brute force (common practice: the bound of a
    /// relaxation never passes the optimum found by trying every subset):
    /// random small networks of two-way links with integer costs and
    /// rank-1 Gramians in R² on two windows, so that units must pair up.
    #[test]
    fn bound_never_passes_the_brute_force_optimum() {
        let mut rng = Rng(17);
        let mut checked = 0;
        let mut tight = 0;
        for _case in 0..80 {
            let n = 4 + rng.below(4);
            let mut gram = Vec::new();
            for _ in 0..2 * n {
                let on = rng.uniform() < 0.85;
                let u = rng.unit_vector(2);
                let s = if on { 1.0 } else { 0.0 };
                gram.extend_from_slice(&[s * u[0] * u[0], s * u[0] * u[1], s * u[1] * u[1]]);
            }
            let table = ExcitationTable::from_gramians(n, 2, windows(2), gram, Some(0.05));
            let mut links = Vec::new();
            let mut seen = HashSet::new();
            for _ in 0..(n + 2 + rng.below(5)) {
                let (a, b) = (rng.below(n) as u32, rng.below(n) as u32);
                if a == b || !seen.insert((a.min(b), a.max(b))) {
                    continue;
                }
                links.push(two_way(a, b, (1 + rng.below(9)) as f64));
            }
            let inst = Instance::from_links(n, links, &table);
            let m = inst.links.len();
            let optimum = (0u32..1 << m)
                .map(|mask| (0..m).map(|k| mask & (1 << k) != 0).collect::<Vec<bool>>())
                .filter(|c| inst.holds(c))
                .map(|c| inst.cost(&c))
                .fold(f64::INFINITY, f64::min);
            if !optimum.is_finite() {
                continue;
            }
            for k in 1..=3 {
                let b = bound(&inst, k);
                assert!(b.bound <= optimum + 1e-6, "k {k}: {b:?} optimum {optimum}");
                checked += 1;
                tight += usize::from(b.bound > optimum - 1e-6);
            }
        }
        assert!(checked > 60, "only {checked} checks ran");
        // The bound is not trivially low either.
        assert!(tight * 2 > checked, "tight in {tight} of {checked}");
    }
}
