//! A node's covering LP (link columns, cap rows, pool rows), built from
//! scratch or from a saved basis, and the open nodes of the tree.

use super::super::cuts::{Pool, Row};
use super::super::instance::Instance;
use super::super::lp::{self, Basis, Col, Sense, Solved};
use std::cell::Cell;
use std::cmp::Ordering;
use std::rc::Rc;

/// The covering LP of a node: link columns, cap rows and pool rows.
pub(super) struct CoverLp {
    pub(super) sol: Solved,
    pub(super) vars: Vec<Col>,
    /// Pool rows present in this LP.
    pub(super) has: Vec<bool>,
    /// The same rows in the LP's order (for restarting it from a basis).
    pub(super) rows: Vec<u32>,
    /// Shared by every LP of one search: the lowest objective of an LP
    /// lost to a numerical failure of the solver (not to infeasibility).
    /// Its subtree was not explored, so the final bound may not exceed it.
    pub(super) lost: Rc<Cell<f64>>,
}

impl CoverLp {
    pub(super) fn values(&self) -> Vec<f64> {
        self.vars.iter().map(|&v| self.sol.value(v)).collect()
    }

    pub(super) fn objective(&self) -> f64 {
        self.sol.objective()
    }

    /// Adds pool rows in one batch (one refactorisation and one dual
    /// simplex pass); `None` as for [`CoverLp::edit`].
    pub(super) fn add_all(mut self, rows: &[(usize, &Row)]) -> Option<Self> {
        let batch: Vec<lp::NewRow> = rows
            .iter()
            .map(|&(index, row)| {
                if self.has.len() <= index {
                    self.has.resize(index + 1, false);
                }
                self.has[index] = true;
                self.rows.push(index as u32);
                let terms = row
                    .links
                    .iter()
                    .map(|&k| (self.vars[k as usize], 1.0))
                    .collect();
                (terms, Sense::Ge, row.rhs as f64)
            })
            .collect();
        self.edit(|sol, _| sol.add_rows(batch))
    }

    /// Applies an edit to the solved LP: the LP when it solves, `None` when
    /// infeasible or lost (a numerical failure, recorded in `lost` with the
    /// objective before the edit, a bound for everything below it).
    pub(super) fn edit(self, change: impl FnOnce(Solved, &[Col]) -> lp::Outcome) -> Option<Self> {
        let before = self.objective();
        let CoverLp {
            sol,
            vars,
            has,
            rows,
            lost,
        } = self;
        match change(sol, &vars) {
            lp::Outcome::Solved(sol) => Some(CoverLp {
                sol,
                vars,
                has,
                rows,
                lost,
            }),
            lp::Outcome::NoSolution => None,
            lp::Outcome::Trouble => {
                lost.set(lost.get().min(before));
                None
            }
        }
    }

    pub(super) fn fix(self, k: usize, value: bool) -> Option<Self> {
        self.edit(|sol, vars| sol.fix(vars[k], if value { 1.0 } else { 0.0 }))
    }

    /// Applies fixings together (one dual-simplex pass).
    pub(super) fn fix_all(self, fixings: &[(u32, bool)]) -> Option<Self> {
        if fixings.is_empty() {
            return Some(self);
        }
        self.edit(|sol, vars| {
            let fixes: Vec<(Col, f64)> = fixings
                .iter()
                .map(|&(k, v)| (vars[k as usize], if v { 1.0 } else { 0.0 }))
                .collect();
            sol.fix_all(&fixes)
        })
    }

    pub(super) fn duplicate(&self) -> Self {
        CoverLp {
            sol: self.sol.clone(),
            vars: self.vars.clone(),
            has: self.has.clone(),
            rows: self.rows.clone(),
            lost: self.lost.clone(),
        }
    }

    /// What an open node keeps to restart this LP: its rows and basis
    /// (about 10 kB at 150 units, against about 1.5 MB for a copy of the
    /// solver with its matrix and factors).
    pub(super) fn resume(&self) -> NodeLp {
        match self.sol.basis() {
            Some(warm) => NodeLp::Warm(Box::new(Resume {
                rows: self.rows.clone(),
                warm,
            })),
            None => NodeLp::Rebuild,
        }
    }

    pub(super) fn reduced_cost(&self, k: usize) -> f64 {
        self.sol.reduced_cost(self.vars[k])
    }

    pub(super) fn has(&self, index: usize) -> bool {
        self.has.get(index).copied().unwrap_or(false)
    }
}

/// An open node: its fixings, the bound inherited from its parent, and
/// (while memory allows) an LP to start from.
pub(super) struct Node {
    pub(super) bound: f64,
    pub(super) depth: u32,
    pub(super) fixings: Vec<(u32, bool)>,
    pub(super) lp: NodeLp,
    /// The branching that made this node: variable, direction, parent LP
    /// objective and the distance moved (for pseudocosts).
    pub(super) origin: Option<Origin>,
}

/// Where an open node's LP comes from.
pub(super) enum NodeLp {
    /// Rebuilt from the master LP and the node's fixings.
    Rebuild,
    /// Rebuilt from the rows and basis of the parent's LP (or of the node's
    /// own, when a dive stopped there), with the node's fixings as bounds.
    Warm(Box<Resume>),
}

/// An LP's rows (pool indices, in the LP's order) and basis.
pub(super) struct Resume {
    pub(super) rows: Vec<u32>,
    pub(super) warm: Basis,
}

impl Node {
    /// A node left open at the deadline, to be rebuilt from the master LP.
    pub(super) fn reopened(bound: f64, depth: u32, fixings: &[(u32, bool)]) -> Self {
        Node {
            bound,
            depth,
            fixings: fixings.to_vec(),
            lp: NodeLp::Rebuild,
            origin: None,
        }
    }
}

#[derive(Debug, Clone, Copy)]
pub(super) struct Origin {
    pub(super) var: usize,
    pub(super) up: bool,
    pub(super) parent_objective: f64,
    pub(super) distance: f64,
}

impl PartialEq for Node {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}
impl Eq for Node {}
impl PartialOrd for Node {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Node {
    // BinaryHeap pops the greatest: smallest bound first, then deepest.
    fn cmp(&self, other: &Self) -> Ordering {
        other
            .bound
            .total_cmp(&self.bound)
            .then(self.depth.cmp(&other.depth))
            .then_with(|| other.fixings.cmp(&self.fixings))
    }
}

/// A fresh LP with the given pool rows and fixings, solved from scratch or
/// from a basis of an LP with the same rows. A numerical failure of the
/// solver (not infeasibility) records `bound` in `lost` (see [`CoverLp::lost`]).
pub(super) fn build_lp(
    inst: &Instance,
    pool: &Pool,
    rows: &[u32],
    fixings: &[(u32, bool)],
    warm: Option<&Basis>,
    lost: &Rc<Cell<f64>>,
    bound: f64,
) -> Option<CoverLp> {
    let mut problem = lp::Lp::minimise();
    let mut bounds: Vec<(f64, f64)> = inst
        .links
        .iter()
        .map(|l| (if l.installed { 1.0 } else { 0.0 }, 1.0))
        .collect();
    for &(k, v) in fixings {
        let v = if v { 1.0 } else { 0.0 };
        bounds[k as usize] = (v, v);
    }
    let vars: Vec<Col> = inst
        .links
        .iter()
        .zip(&bounds)
        .map(|(l, &(lo, hi))| problem.column(l.cost, lo, hi))
        .collect();
    // The caps: Σ w_k y_k ≤ cap_i at every unit where they can bind
    // (static rows, the same in every LP, ahead of the pool's rows).
    if let Some(caps) = &inst.caps {
        for (i, &cap) in caps.iter().enumerate() {
            let expr: Vec<(Col, f64)> = inst.heads[i]
                .iter()
                .map(|&k| (vars[k], inst.links[k].weight_into(i as u32)))
                .collect();
            let total: f64 = expr.iter().map(|e| e.1).sum();
            if total > cap {
                problem.row(&expr, Sense::Le, cap.max(0.0));
            }
        }
    }
    // Port limits: Σ y_k over the links touching unit i ≤ its limit.
    if let Some(ports) = &inst.ports {
        for (i, &limit) in ports.iter().enumerate() {
            if (inst.touching[i].len() as f64) > limit {
                let expr: Vec<(Col, f64)> =
                    inst.touching[i].iter().map(|&k| (vars[k], 1.0)).collect();
                problem.row(&expr, Sense::Le, limit.max(0.0));
            }
        }
    }
    let mut has = vec![false; pool.rows.len()];
    for &i in rows {
        let i = i as usize;
        let expr: Vec<(Col, f64)> = pool.rows[i]
            .links
            .iter()
            .map(|&k| (vars[k as usize], 1.0))
            .collect();
        problem.row(&expr, Sense::Ge, pool.rows[i].rhs as f64);
        has[i] = true;
    }
    match problem.solve(warm) {
        lp::Outcome::Solved(sol) => Some(CoverLp {
            sol,
            vars,
            has,
            rows: rows.to_vec(),
            lost: lost.clone(),
        }),
        lp::Outcome::NoSolution => None,
        lp::Outcome::Trouble => {
            lost.set(lost.get().min(bound));
            None
        }
    }
}

/// The LP rebuilt with only the rows it holds that are tight at its point
/// (dropping slack rows leaves the optimum unchanged and makes every later
/// dual-simplex step cheaper).
pub(super) fn compact(inst: &Instance, pool: &Pool, lp: CoverLp) -> CoverLp {
    let y = lp.values();
    let tight: Vec<u32> = (0..pool.rows.len() as u32)
        .filter(|&i| lp.has(i as usize) && pool.rows[i as usize].violation(&y) > -1e-7)
        .collect();
    if tight.len() * 3 >= 2 * lp.rows.len() {
        return lp;
    }
    let lost = lp.lost.clone();
    // On failure the uncompacted LP goes on, so nothing is lost.
    build_lp(inst, pool, &tight, &[], None, &lost, f64::INFINITY).unwrap_or(lp)
}
