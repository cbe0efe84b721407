//! The second thread of a search: neighbourhood search on incumbents and,
//! on large two-way networks, the bound from small components as columns.

use super::super::component_bound;
use super::super::cuts::{Pool, Row};
use super::super::heuristics::repair;
use super::super::instance::{Instance, OracleStats};
use super::{GROUP_SETS, GROUP_SIZE, Improve, Limits, Search, THRESHOLDS};
use crate::progress::Sink;
use std::rc::Rc;
use std::sync::atomic::{AtomicBool, Ordering as AtomicOrdering};
use std::sync::{Arc, mpsc};
use std::time::{Duration, Instant};

/// Work on a second thread, with its own excitation oracle (the oracle's
/// caches are not shared between threads): neighbourhood search from the
/// starting incumbent while the root is cut, and from the incumbent after
/// the root while branch and bound goes on; then, on large two-way
/// networks, the bound from small components as columns and a
/// neighbourhood search from its LP point. The search takes each result at
/// a fixed point (after the root; after [`HELPER_NODES`] nodes or when the
/// tree is done; the bound when the tree is done), waiting for it if need
/// be, so the plan does not depend on timing unless the deadline stops the
/// work.
pub(super) struct Helper {
    to: mpsc::Sender<Job>,
    from: mpsc::Receiver<Done>,
    stop: Arc<AtomicBool>,
    /// A run was started and its result not taken yet.
    pending: bool,
    /// A bound was asked for and not taken yet.
    bound_pending: bool,
}

/// Work for the helper thread, done in the order sent.
enum Job {
    /// Neighbourhood search from this incumbent.
    Improve(Vec<bool>),
    /// The bound from small components as columns: the pool's rows, and
    /// those of the LP to start from.
    Bound(Vec<Row>, Vec<u32>),
}

/// A finished job: its result (the bound's job: the bound and the plan
/// from its neighbourhood search), time and excitation-check counts.
enum Done {
    Improved(Vec<bool>, Duration, OracleStats),
    Bound(
        Option<component_bound::BoundStats>,
        Option<Vec<bool>>,
        OracleStats,
    ),
}

/// Branch-and-bound nodes after which the second neighbourhood search's
/// result is taken.
pub(super) const HELPER_NODES: u64 = 100;

impl Helper {
    /// The next finished job; `cancel` asks the work to stop first.
    fn receive(&mut self, cancel: bool) -> Option<Done> {
        if cancel {
            self.stop.store(true, AtomicOrdering::Relaxed);
        }
        self.from.recv().ok()
    }

    pub(super) fn start(&mut self, from: &[bool]) {
        if self.to.send(Job::Improve(from.to_vec())).is_ok() {
            self.pending = true;
        }
    }

    pub(super) fn start_bound(&mut self, rows: Vec<Row>, start: Vec<u32>) {
        if self.to.send(Job::Bound(rows, start)).is_ok() {
            self.bound_pending = true;
        }
    }

    /// Waits for the asked bound (after any pending run, see
    /// [`Helper::take`]); `cancel` as there.
    pub(super) fn take_bound(
        &mut self,
        s: &mut Search,
        cancel: bool,
    ) -> Option<component_bound::BoundStats> {
        if !std::mem::take(&mut self.bound_pending) {
            return None;
        }
        match self.receive(cancel) {
            // A stopped computation's figures depend on when it stopped:
            // they are left out, so that the output stays deterministic.
            Some(Done::Bound(group, plan, checks)) if !cancel => {
                s.inst.oracle.stats.borrow_mut().add(&checks);
                if let Some(plan) = plan {
                    s.offer(plan);
                }
                group
            }
            _ => None,
        }
    }

    /// Waits for the pending run and offers its result; `cancel` asks the
    /// run to stop first (only when its result can no longer matter).
    pub(super) fn take(&mut self, s: &mut Search, cancel: bool) {
        if !std::mem::take(&mut self.pending) {
            return;
        }
        if let Some(Done::Improved(improved, time, checks)) = self.receive(cancel) {
            // Both summed over the two threads. A stopped run's check
            // counts depend on when it stopped; they are left out so that
            // the reported figures stay deterministic.
            s.stats.heuristic_time += time;
            if !cancel {
                s.inst.oracle.stats.borrow_mut().add(&checks);
            }
            s.offer(improved);
        }
    }
}

impl Drop for Helper {
    fn drop(&mut self) {
        // An early return: the thread's work is no longer wanted.
        self.stop.store(true, AtomicOrdering::Relaxed);
    }
}

impl Helper {
    /// Starts the second thread (within `scope`, so it ends with the
    /// search) with its own oracle and a copy of the instance.
    pub(super) fn spawn<'scope, 'b: 'scope>(
        scope: &'scope std::thread::Scope<'scope, '_>,
        inst: &Instance<'b>,
        limits: Limits,
        improve: Improve,
        progress: &Sink,
    ) -> Helper {
        let oracle = inst.oracle.fresh();
        let (n, links, caps) = (inst.n, inst.links.clone(), inst.caps.clone());
        let ports = inst.ports.clone();
        let (to, jobs) = mpsc::channel::<Job>();
        let (done, from) = mpsc::channel();
        let stop = Arc::new(AtomicBool::new(false));
        let flag = stop.clone();
        let sink = progress.clone();
        scope.spawn(move || {
            let sub = Instance::with_oracle(n, links, Rc::new(oracle))
                .with_caps(caps)
                .with_ports(ports);
            for job in jobs {
                let result = serve(&sub, job, limits, improve, &flag, &sink);
                if done.send(result).is_err() {
                    break;
                }
            }
        });
        Helper {
            to,
            from,
            stop,
            pending: false,
            bound_pending: false,
        }
    }
}

/// Does one job on the second thread.
fn serve(
    sub: &Instance,
    job: Job,
    limits: Limits,
    improve: Improve,
    flag: &AtomicBool,
    sink: &Sink,
) -> Done {
    let t = Instant::now();
    match job {
        Job::Improve(from) => {
            let improved = improve(sub, &from, limits.deadline, flag);
            let checks = std::mem::take(&mut *sub.oracle.stats.borrow_mut());
            Done::Improved(improved, t.elapsed(), checks)
        }
        Job::Bound(rows, start) => {
            // The pool's rows are distinct, so they keep their indices.
            let mut pool = Pool::default();
            rows.into_iter().for_each(|r| {
                pool.add(r);
            });
            let group = component_bound::component_bound(
                sub,
                &mut pool,
                &start,
                GROUP_SIZE,
                GROUP_SETS,
                &THRESHOLDS,
                limits.deadline,
                flag,
                sink,
            );
            // Its LP point, rounded and repaired, starts one more
            // neighbourhood search (another basin than the root's roundings).
            let plan = group
                .as_ref()
                .and_then(|(_, y)| repair(sub, y, limits.deadline))
                .map(|start| improve(sub, &start, limits.deadline, flag));
            let checks = std::mem::take(&mut *sub.oracle.stats.borrow_mut());
            Done::Bound(group.map(|(g, _)| g), plan, checks)
        }
    }
}
