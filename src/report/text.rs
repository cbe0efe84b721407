//! Plain-text output for people.

use super::CAUTIONS;
use super::number::{self as num, Round};
use crate::analysis::Verdict;
use crate::analysis::{Check, ExcitationSummary};
use crate::certify::{Certificate, NormBoundKind};
use crate::plan::{Plan, PlanStatus};
use crate::simulate::{Reference, Trajectory};
use std::io::{self, Write};

fn direction(v: &[f64]) -> String {
    let parts: Vec<String> = v
        .iter()
        .map(|x| {
            if x.abs() < 5e-4 {
                " 0.000".to_string()
            } else {
                format!("{x:+.3}")
            }
        })
        .collect();
    format!("[{}]", parts.join(", "))
}

/// Ids joined by commas, or "none".
fn names_or_none(v: &[String]) -> String {
    if v.is_empty() {
        "none".to_string()
    } else {
        v.join(", ")
    }
}

fn yes_no(b: bool) -> &'static str {
    if b { "yes" } else { "no" }
}

fn threshold(out: &mut impl Write, value: f64, given: bool, windows: usize) -> io::Result<()> {
    let origin = if given {
        "from the problem file"
    } else {
        "default: 1e-6 × the largest window Gramian trace of any unit"
    };
    writeln!(
        out,
        "required excitation μ_req = {} ({origin}); {windows} windows scanned",
        num::level(value)
    )
}

fn cautions(out: &mut impl Write) -> io::Result<()> {
    writeln!(out)?;
    writeln!(out, "Cautions:")?;
    for c in CAUTIONS {
        writeln!(out, "  - {c}")?;
    }
    Ok(())
}

/// Writes the excitation summary as a table.
///
/// # Errors
/// Any I/O error of `out`.
pub fn excitation(s: &ExcitationSummary, out: &mut impl Write) -> io::Result<()> {
    writeln!(
        out,
        "Excitation of {} (p = {}, window {} s, horizon {}–{} s)",
        s.network, s.parameters, s.window, s.horizon[0], s.horizon[1]
    )?;
    for side in ["start", "end"] {
        let cuts: Vec<&crate::analysis::HorizonCut> =
            s.horizon_cuts.iter().filter(|c| c.side == side).collect();
        let Some(c) = cuts.first() else { continue };
        let names: Vec<&str> = cuts.iter().map(|c| c.node.as_str()).collect();
        let whose = match (cuts.len(), side) {
            (1, "start") => "its log starts",
            (1, _) => "its log ends",
            (_, "start") => "their logs start",
            _ => "their logs end",
        };
        writeln!(
            out,
            "the horizon's {side} is set by {}: {whose} at {} s, {} s {} (the other units' data there is not used)",
            names.join(", "),
            c.at,
            num::sig(c.cut, 4, Round::Nearest),
            if side == "start" {
                "after the earliest log starts"
            } else {
                "before the latest log ends"
            }
        )?;
    }
    threshold(out, s.min_excitation, s.min_excitation_given, s.windows)?;
    writeln!(out)?;
    let width = s
        .units
        .iter()
        .map(|u| u.id.chars().count())
        .max()
        .unwrap_or(4)
        .max(9);
    writeln!(
        out,
        "{:<width$}  {:>11}  {:>7}  {:>4}  {:>5}  {:>5}  weakest direction (at t)",
        "unit", "level", "excited", "rank", "flow", "jump"
    )?;
    for u in s.units.iter().chain(std::iter::once(&s.pooled)) {
        writeln!(
            out,
            "{:<width$}  {:>11}  {:>7}  {:>4}  {:>4.0}%  {:>4.0}%  {} (t = {})",
            u.id,
            num::level_vs(u.excitation, s.min_excitation),
            yes_no(u.excited),
            u.rank,
            100.0 * u.flow_share,
            100.0 * u.jump_share,
            direction(&u.weakest_direction),
            u.weakest_window_start
        )?;
    }
    let alone = s.units.iter().filter(|u| u.excited).count();
    writeln!(out)?;
    writeln!(
        out,
        "{alone} of {} units are excited alone; all units pooled: {}.",
        s.units.len(),
        if s.pooled.excited {
            "excited"
        } else {
            "NOT excited — no link set can make the estimates converge"
        }
    )?;
    cautions(out)
}

/// Writes the verdict of a link-set check.
///
/// # Errors
/// Any I/O error of `out`.
pub fn check(c: &Check, out: &mut impl Write) -> io::Result<()> {
    writeln!(
        out,
        "Check of {}: {}, cost {}",
        c.network,
        num::count(c.links.len(), "link", "links"),
        num::cost(c.cost, Round::Nearest)
    )?;
    threshold(out, c.min_excitation, c.min_excitation_given, c.windows)?;
    writeln!(out)?;
    for (k, sc) in c.source_components.iter().enumerate() {
        writeln!(
            out,
            "source component {}: {}, level {}, excited: {}",
            k + 1,
            num::count(sc.nodes.len(), "unit", "units"),
            num::level_vs(sc.excitation, c.min_excitation),
            yes_no(sc.excited)
        )?;
        writeln!(out, "  units:   {}", sc.nodes.join(", "))?;
        if !sc.excited {
            writeln!(
                out,
                "  weakest direction {} in the window from t = {}",
                direction(&sc.weakest_direction),
                sc.weakest_window_start
            )?;
            if sc.entering_candidates.is_empty() {
                writeln!(out, "  no candidate link enters it")?;
            } else {
                writeln!(
                    out,
                    "  candidate links into it: {}",
                    sc.entering_candidates.join(", ")
                )?;
            }
        }
        writeln!(
            out,
            "  drives:  {}",
            num::count(sc.reaches.len(), "unit", "units")
        )?;
    }
    writeln!(out)?;
    if let Some(cert) = &c.certificate {
        certificate(cert, out)?;
        writeln!(out)?;
    }
    if c.certificate.is_none() {
        gain_lines(&c.gains, out)?;
    }
    let bad = c.source_components.iter().filter(|s| !s.excited).count();
    match c.verdict {
        Verdict::Converges => writeln!(
            out,
            "Verdict: structure, gains and certificate hold — every estimate converges (for these logs and this model)."
        )?,
        Verdict::StructureFails => {
            writeln!(
                out,
                "Verdict: {} not excited — the estimates they drive need not converge.",
                if bad == 1 {
                    "1 source component is".to_string()
                } else {
                    format!("{bad} source components are")
                }
            )?;
            writeln!(
                out,
                "Fix: add a link into each such component from an excited part of the network, or give its units more excitation along the weakest direction."
            )?;
        }
        Verdict::GainsFail => {
            writeln!(
                out,
                "Verdict: the gain condition fails at {} — a jump can expand the error there, so convergence is not guaranteed.",
                failing_units(&c.gains)
            )?;
            writeln!(
                out,
                "Fix: lower jump_coupling or jump_gain, or give these units fewer (or lighter) incoming links."
            )?;
        }
        Verdict::NotCertified => writeln!(
            out,
            "Verdict: structure and gains hold, but no window of the recorded horizon shows contraction — convergence is not certified on these logs."
        )?,
        Verdict::RateNotChecked => writeln!(
            out,
            "Verdict: every source component is excited and the gains hold; the rate was not checked (--skip-rate), so no convergence rate is certified."
        )?,
    }
    cautions(out)
}

/// Writes a certificate: rate, window, transient factor, time to 1 %, the
/// units that carry the slowest mode, and the gain conditions.
///
/// # Errors
/// Any I/O error of `out`.
pub fn certificate(c: &Certificate, out: &mut impl Write) -> io::Result<()> {
    match c.rate {
        Some(rate) => {
            writeln!(
                out,
                "Certified rate: {} over windows of {} s ({}, worst ‖Φ‖ ≤ {})",
                num::rate(rate),
                c.window,
                num::count(c.windows, "window", "windows"),
                num::sig(c.contraction, 6, Round::Up)
            )?;
            let r = num::sig(rate, 4, Round::Down);
            if let (Some(k), Some(t)) = (c.transient_factor, c.time_to_1pct) {
                let h = c.envelope_from;
                writeln!(
                    out,
                    "  |e(t)| ≤ {} · exp(−{r} (t − {h})) · |e({h})| for every t in the horizon, its last jumps included",
                    num::sig(k, 4, Round::Up)
                )?;
                writeln!(
                    out,
                    "  (the transient factor {} bounds how much the error can grow inside a window before the window's contraction applies)",
                    num::sig(k, 4, Round::Up)
                )?;
                if let Some(any) = c.transient_factor_any_start {
                    writeln!(
                        out,
                        "  from any start s in the horizon: |e(t)| ≤ {} · exp(−{r} (t − s)) · |e(s)|",
                        num::sig(any, 4, Round::Up)
                    )?;
                }
                if c.time_to_1pct_extrapolated {
                    writeln!(
                        out,
                        "  error below 1 % after {} s — extrapolated beyond the recorded horizon (assumes the signals keep behaving as recorded)",
                        num::sig(t, 4, Round::Up)
                    )?;
                } else {
                    writeln!(
                        out,
                        "  error below 1 % after {} s",
                        num::sig(t, 4, Round::Up)
                    )?;
                }
            }
        }
        None => writeln!(
            out,
            "Certified rate: none on this horizon — {}",
            c.reason.as_deref().unwrap_or("no window shows contraction")
        )?,
    }
    match c.norm_bound {
        NormBoundKind::Exact => writeln!(
            out,
            "  window norms: exact (dense transition matrices, plus a rounding margin)"
        )?,
        NormBoundKind::Randomized => writeln!(
            out,
            "  window norms: upper bounds from randomized tests; the certificate fails with probability at most {}",
            num::sig(c.failure_probability, 2, Round::Up)
        )?,
    }
    if c.blocks.len() > 1 {
        writeln!(
            out,
            "  {} separate groups certified one by one; the slowest sets the rate",
            c.blocks.len()
        )?;
    }
    if let Some(a) = c.asymptotic_rate {
        writeln!(
            out,
            "  decay over the whole horizon (estimate, not certified): {}",
            num::rate_nearest(a)
        )?;
    }
    if c.rate.is_some() {
        let top: Vec<String> = c
            .units
            .iter()
            .filter(|u| u.share >= 0.005)
            .take(3)
            .map(|u| format!("{} ({:.0} %)", u.node, 100.0 * u.share))
            .collect();
        writeln!(out, "  slowest mode sits mostly in: {}", top.join(", "))?;
    }
    if c.unconverged_windows > 0 {
        writeln!(
            out,
            "  note: on {} the upper bound is more than 0.1 % above the lower bound (still a valid bound)",
            num::count(c.unconverged_windows, "window", "windows")
        )?;
    }
    gain_lines(&c.gains, out)
}

/// The units whose gain condition fails, comma-separated.
fn failing_units(gains: &[crate::certify::GainCheck]) -> String {
    let units: Vec<&str> = gains
        .iter()
        .filter(|g| !g.ok)
        .filter_map(|g| g.node.as_deref())
        .collect();
    units.join(", ")
}

/// Writes the gain checks.
fn gain_lines(gains: &[crate::certify::GainCheck], out: &mut impl Write) -> io::Result<()> {
    for g in gains {
        writeln!(
            out,
            "  gain check{}: {} — value {} (limit {}): {}",
            g.node
                .as_deref()
                .map(|n| format!(" at {n}"))
                .unwrap_or_default(),
            g.condition,
            num::sig(g.value, 4, Round::Up),
            num::sig(g.limit, 4, Round::Nearest),
            if g.ok { "pass" } else { "FAIL" }
        )?;
    }
    Ok(())
}

/// Writes a simulation summary: reference, observed vs certified decay,
/// the units with the largest final error.
///
/// # Errors
/// Any I/O error of `out`.
pub fn simulation(t: &Trajectory, out: &mut impl Write) -> io::Result<()> {
    let reference = match t.reference_kind {
        Reference::Truth => "the given true parameter",
        Reference::PooledFit => "the pooled least-squares fit of all logs",
    };
    writeln!(
        out,
        "Simulation over [{}, {}] s, errors measured against {reference} {}",
        t.times[0],
        t.times[t.times.len() - 1],
        direction(&t.reference)
    )?;
    match (t.observed_rate, t.certified_rate) {
        (Some(o), Some(c)) => writeln!(
            out,
            "decay of the stacked error: observed {} (estimate), certified {}",
            num::rate_nearest(o),
            num::rate(c)
        )?,
        (Some(o), None) => writeln!(
            out,
            "decay of the stacked error: observed {} (estimate); no certified rate",
            num::rate_nearest(o)
        )?,
        _ => writeln!(out, "the stacked error did not decay")?,
    }
    match t.within_envelope {
        Some(true) => writeln!(
            out,
            "the error stays under the certified bound at every output time"
        )?,
        Some(false) => writeln!(
            out,
            "WARNING: the error leaves the certified bound — report this as a bug"
        )?,
        None if t.certified_rate.is_some() => writeln!(
            out,
            "(logged outputs: noise and model mismatch are outside the certificate; the bound is drawn for reference)"
        )?,
        None => {}
    }
    let mut units: Vec<&crate::simulate::UnitRun> = t.units.iter().collect();
    units.sort_by(|a, b| {
        b.final_error
            .total_cmp(&a.final_error)
            .then(a.node.cmp(&b.node))
    });
    writeln!(out)?;
    writeln!(
        out,
        "{:<20} {:>14} {:>14}",
        "unit", "initial error", "final error"
    )?;
    for u in units.iter().take(10) {
        writeln!(
            out,
            "{:<20} {:>14} {:>14}",
            u.node,
            num::sig(u.initial_error, 4, Round::Nearest),
            num::sig(u.final_error, 4, Round::Nearest)
        )?;
    }
    if units.len() > 10 {
        writeln!(
            out,
            "... {} more (all in the CSV)",
            num::count(units.len() - 10, "unit", "units")
        )?;
    }
    cautions(out)
}

/// Writes the cost–rate front as a table, and the answer for a budget.
///
/// # Errors
/// Any I/O error of `out`.
pub fn front(f: &crate::whatif::budget::Front, out: &mut impl Write) -> io::Result<()> {
    writeln!(out, "Cost–rate front for {}", f.network)?;
    let Some(cost) = f.structural_cost else {
        writeln!(
            out,
            "No link set meets the condition: run `exmesh plan` for the groups that cannot be excited."
        )?;
        return cautions(out);
    };
    let what = if f.structural_status == PlanStatus::Optimal {
        "structural optimum"
    } else {
        "structural plan (not proven optimal)"
    };
    writeln!(
        out,
        "{what} {} (proven lower bound {}); {} certified",
        num::cost(cost, Round::Nearest),
        num::cost(f.lower_bound.unwrap_or(cost), Round::Down),
        num::count(f.certified_sets, "set", "sets")
    )?;
    writeln!(out)?;
    writeln!(
        out,
        "{:>12}  {:>14}  {:>16}  {:>6}  change from the row above",
        "cost", "rate (1/s)", "time constant (s)", "links"
    )?;
    for (k, p) in f.front.iter().enumerate() {
        let (rate, tau) = p
            .rate
            .filter(|r| *r > 0.0)
            .map_or(("not certified".to_string(), "-".to_string()), |r| {
                (num::sig(r, 4, Round::Down), num::sig(1.0 / r, 4, Round::Up))
            });
        let change = match k.checked_sub(1).map(|j| &f.front[j]) {
            None => "  (the structural plan)".to_string(),
            Some(prev) => {
                let added: Vec<&str> = p
                    .links
                    .iter()
                    .filter(|l| !prev.links.contains(l))
                    .map(String::as_str)
                    .collect();
                let dropped: Vec<&str> = prev
                    .links
                    .iter()
                    .filter(|l| !p.links.contains(l))
                    .map(String::as_str)
                    .collect();
                let mut parts = Vec::new();
                if !added.is_empty() {
                    parts.push(format!("adds {}", added.join(", ")));
                }
                if !dropped.is_empty() {
                    parts.push(format!("drops {}", dropped.join(", ")));
                }
                format!("  {}", parts.join("; "))
            }
        };
        writeln!(
            out,
            "{:>12}  {rate:>14}  {tau:>16}  {:>6}{change}",
            num::cost(p.cost, Round::Nearest),
            p.links.len()
        )?;
    }
    if f.timed_out {
        writeln!(out, "(the time limit stopped the sweep)")?;
    }
    if let Some(b) = f.max_cost {
        writeln!(out)?;
        match &f.best_within_budget {
            Some(p) => {
                writeln!(
                    out,
                    "Within {}: cost {}, certified rate {}",
                    num::cost(b, Round::Nearest),
                    num::cost(p.cost, Round::Nearest),
                    p.rate.map_or("none".to_string(), num::rate)
                )?;
                writeln!(out, "  links: {}", p.links.join(", "))?;
            }
            None => writeln!(
                out,
                "Budget {} is too small: the cheapest plan found that meets the condition costs {}.",
                num::cost(b, Round::Nearest),
                num::cost(cost, Round::Nearest)
            )?,
        }
    }
    cautions(out)
}

/// Writes the single-failure report, worst first.
///
/// # Errors
/// Any I/O error of `out`.
pub fn stress(s: &crate::whatif::stress::Stress, out: &mut impl Write) -> io::Result<()> {
    use crate::whatif::stress::FailureKind;
    writeln!(out, "Single failures of the plan for {}", s.network)?;
    writeln!(
        out,
        "without failures: condition {}, certified rate {}",
        if s.baseline_holds { "holds" } else { "FAILS" },
        match (s.rates_checked, s.baseline_rate) {
            (false, _) => "skipped (--skip-rate)".to_string(),
            (true, None) => "none".to_string(),
            (true, Some(r)) => num::rate(r),
        }
    )?;
    writeln!(out, "critical links: {}", names_or_none(&s.critical_links))?;
    writeln!(out, "critical units: {}", names_or_none(&s.critical_units))?;
    if let Some(t) = s.target_rate {
        if s.rates_checked {
            writeln!(
                out,
                "below the target rate {} after: {}",
                num::rate_nearest(t),
                names_or_none(&s.below_target)
            )?;
        } else {
            writeln!(
                out,
                "target rate {}: not compared (--skip-rate)",
                num::rate_nearest(t)
            )?;
        }
    }
    writeln!(out)?;
    writeln!(
        out,
        "{:<6} {:<28} {:<10} {:>14}  units left unexcited",
        "fails", "id", "condition", "rate (1/s)"
    )?;
    for sc in &s.scenarios {
        let kind = match sc.kind {
            FailureKind::Link => "link",
            FailureKind::Unit => "unit",
        };
        let rate = match (s.rates_checked, sc.rate) {
            (false, _) => "skipped".to_string(),
            (true, None) => "-".to_string(),
            (true, Some(r)) => num::sig(r, 4, Round::Down),
        };
        let mark = if sc.below_target == Some(true) && sc.condition_holds {
            " BELOW TARGET"
        } else {
            ""
        };
        writeln!(
            out,
            "{kind:<6} {:<28} {:<10} {rate:>14}{mark}  {}",
            sc.id,
            if sc.condition_holds { "holds" } else { "FAILS" },
            sc.units_left_unexcited.join(", ")
        )?;
    }
    cautions(out)
}

/// Writes a retirement: the diff of links, the cost of the additions, then
/// the new plan.
///
/// # Errors
/// Any I/O error of `out`.
pub fn retirement(r: &crate::whatif::retire::Retirement, out: &mut impl Write) -> io::Result<()> {
    if !r.retired.is_empty() {
        writeln!(out, "Retiring {}", r.retired.join(", "))?;
    }
    if !r.failed_links.is_empty() {
        writeln!(
            out,
            "{} failed: {}",
            if r.failed_links.len() == 1 {
                "Link"
            } else {
                "Links"
            },
            r.failed_links.join(", ")
        )?;
    }
    writeln!(out, "  kept:               {}", names_or_none(&r.kept))?;
    writeln!(out, "  added:              {}", names_or_none(&r.added))?;
    writeln!(
        out,
        "  no longer needed:   {}",
        names_or_none(&r.no_longer_needed)
    )?;
    writeln!(
        out,
        "  gone with the units: {}",
        names_or_none(&r.removed_with_units)
    )?;
    match r.added_cost {
        Some(c) => writeln!(
            out,
            "  cost of the additions: {}",
            num::cost(c, Round::Nearest)
        )?,
        None => writeln!(out, "  no link set restores the condition")?,
    }
    writeln!(out)?;
    plan(&r.plan, out)
}

/// Writes a plan: status, cost and bound, the chosen links, the source
/// components, search figures and stage times.
///
/// # Errors
/// Any I/O error of `out`.
pub fn plan(p: &Plan, out: &mut impl Write) -> io::Result<()> {
    let rate_stage_proven_structure = p
        .rate
        .as_ref()
        .is_some_and(|r| r.met && r.structural_status == PlanStatus::Optimal && !r.timed_out);
    let status = match p.status {
        PlanStatus::Optimal => "optimal",
        PlanStatus::Feasible if rate_stage_proven_structure => {
            "feasible — the structural part is proven optimal, the rate stage has no optimality proof"
        }
        PlanStatus::Feasible => "feasible (not proven optimal)",
        PlanStatus::Infeasible => "INFEASIBLE",
        PlanStatus::TimeLimit => "stopped at the time limit",
    };
    writeln!(out, "Plan for {}: {status}", p.network)?;
    if p.gains_ok == Some(false) {
        writeln!(
            out,
            "WARNING: the gain condition fails at {} with these links (a jump can expand the error there): this plan does not guarantee convergence; run `check` for details.",
            failing_units(&p.gains)
        )?;
    }
    threshold(out, p.min_excitation, p.min_excitation_given, p.windows)?;
    if let (PlanStatus::Infeasible, Some(r)) = (p.status, &p.rate) {
        writeln!(out)?;
        writeln!(
            out,
            "The structure can be met (cost {}), but no link set found reaches the target rate {}.",
            num::cost(r.structural_cost, Round::Nearest),
            num::rate_nearest(r.target)
        )?;
        match r.best_reachable {
            Some(b) => writeln!(out, "Best certified rate reachable: {}.", num::rate(b))?,
            None => writeln!(
                out,
                "No link set found has a certified rate on this horizon."
            )?,
        }
        writeln!(
            out,
            "Fix: lower target_rate, add candidate links, record longer or richer logs, or raise the gains within their limits."
        )?;
        return cautions(out);
    }
    if p.status == PlanStatus::Infeasible {
        return shortfalls(p, out);
    }
    let Some(cost) = p.cost else {
        writeln!(
            out,
            "No plan was found within the time limit, and nothing is proven about this problem; run again with a longer --time-limit."
        )?;
        return cautions(out);
    };
    let (lower, gap) = (p.lower_bound.unwrap_or(0.0), p.gap.unwrap_or(0.0));
    let rate_cost = p
        .rate
        .as_ref()
        .filter(|r| r.met && (cost - r.structural_cost).abs() > 1e-9 * cost.abs().max(1.0));
    match rate_cost {
        Some(r) => {
            let proven = if r.structural_status == PlanStatus::Optimal {
                "proven optimal"
            } else {
                "not proven optimal"
            };
            writeln!(
                out,
                "cost {}: structural plan {} ({proven}) {} {} for the target rate {} (rate stage, no optimality proof)",
                num::cost(cost, Round::Nearest),
                num::cost(r.structural_cost, Round::Nearest),
                if cost >= r.structural_cost { "+" } else { "-" },
                num::cost((cost - r.structural_cost).abs(), Round::Nearest),
                num::rate_nearest(r.target)
            )?;
            writeln!(
                out,
                "proven lower bound {} (no plan meeting the structure costs less), gap {} — the gap is what the rate target may have cost beyond the structure, not a search that gave up",
                num::cost(lower, Round::Down),
                num::percent(gap, Round::Up)
            )?;
        }
        None => writeln!(
            out,
            "cost {}, proven lower bound {}, gap {}",
            num::cost(cost, Round::Nearest),
            num::cost(lower, Round::Down),
            num::percent(gap, Round::Up)
        )?,
    }
    if let Some(r) = &p.robustness {
        let what = match r.survive {
            crate::plan::Survive::Link => "any one link failing",
            crate::plan::Survive::Unit => "the loss of any one unit",
            crate::plan::Survive::Nothing => "nothing",
        };
        let caveat = match r.plain_status {
            PlanStatus::TimeLimit => {
                " (the plain plan was stopped by the time limit: the difference is not exact)"
            }
            PlanStatus::Feasible => " (the plain plan is not proven optimal)",
            _ => "",
        };
        match (r.plain_cost, r.extra_cost) {
            (Some(plain), Some(extra)) => writeln!(
                out,
                "survives {what}; the plain plan costs {}, so robustness costs {} more{caveat}",
                num::cost(plain, Round::Nearest),
                num::cost(extra, Round::Nearest)
            )?,
            _ => writeln!(out, "survives {what}")?,
        }
        if !r.added_for_rate.is_empty() {
            writeln!(
                out,
                "added so that the target rate holds after a single link failure: {}",
                r.added_for_rate.join(", ")
            )?;
        }
        if let (None, Some(t)) = (r.target_kept, p.rate.as_ref().map(|x| x.target)) {
            writeln!(
                out,
                "the time limit left no time to certify the rate after every single failure: whether the target {} holds after one is not known; run `exmesh stress` on the plan",
                num::rate_nearest(t)
            )?;
        }
        if let (Some(kept), Some(t)) = (r.target_kept, p.rate.as_ref().map(|x| x.target)) {
            if kept {
                writeln!(
                    out,
                    "the certified rate stays at or above the target {} after any such failure (worst: {} after {})",
                    num::rate_nearest(t),
                    r.worst_failure_rate.map_or("-".to_string(), num::rate),
                    r.worst_failure.as_deref().unwrap_or("-")
                )?;
            } else {
                writeln!(
                    out,
                    "the target rate {} is NOT kept after every such failure: after {} the certified rate is {}{} — no addition found restores it (unit losses are not repaired); add links and check them with `exmesh stress`",
                    num::rate_nearest(t),
                    r.worst_failure.as_deref().unwrap_or("-"),
                    r.worst_failure_rate.map_or("none".to_string(), num::rate),
                    r.worst_failure_rate
                        .map(|x| format!(", {} below the target", num::sig(t - x, 3, Round::Up)))
                        .unwrap_or_default()
                )?;
            }
        }
    }
    writeln!(out)?;
    let ends: Vec<String> = p
        .links
        .iter()
        .map(|l| {
            format!(
                "{} {} {}",
                l.from,
                if l.two_way { "<->" } else { "->" },
                l.to
            )
        })
        .collect();
    let width = ends.iter().map(|e| e.chars().count()).max().unwrap_or(4);
    writeln!(out, "{}:", num::count(p.links.len(), "link", "links"))?;
    for (l, e) in p.links.iter().zip(&ends) {
        let note = if l.installed {
            "  (installed)"
        } else if l.required {
            "  (required)"
        } else {
            ""
        };
        writeln!(
            out,
            "  {e:<width$}  {:>10}{note}",
            num::cost(l.cost, Round::Nearest)
        )?;
        if let Some(why) = &l.reason
            && !l.installed
            && !l.required
        {
            writeln!(out, "      why: {why}")?;
        }
    }
    writeln!(out)?;
    for (k, sc) in p.source_components.iter().enumerate() {
        writeln!(
            out,
            "source component {}: {}, level {}, excited: {}, drives {}",
            k + 1,
            num::count(sc.nodes.len(), "unit", "units"),
            num::level_vs(sc.excitation, p.min_excitation),
            yes_no(sc.excited),
            num::count(sc.reaches.len(), "unit", "units")
        )?;
        writeln!(out, "  units: {}", sc.nodes.join(", "))?;
    }
    if let Some(r) = &p.rate {
        rate_stage(r, out)?;
    }
    search_figures(p, out)?;
    cautions(out)
}

/// A plan found infeasible: the groups no candidate set can excite.
fn shortfalls(p: &Plan, out: &mut impl Write) -> io::Result<()> {
    writeln!(out)?;
    // Survival shortfalls: every candidate together meets the plain
    // condition, a single failure breaks it.
    let plain_ok = p.source_components.iter().all(|c| c.excited);
    let after = match p
        .robustness
        .as_ref()
        .map(|r| r.survive)
        .filter(|_| plain_ok)
    {
        Some(crate::plan::Survive::Link) => " after a single link failure",
        Some(crate::plan::Survive::Unit) => " after the loss of a single unit",
        _ => "",
    };
    writeln!(
        out,
        "Even with every candidate link, {} a source component that is not excited{after}:",
        if p.shortfalls.len() == 1 {
            "1 group of units forms".to_string()
        } else {
            format!("{} groups of units form", p.shortfalls.len())
        }
    )?;
    for s in &p.shortfalls {
        writeln!(out, "  units: {}", s.nodes.join(", "))?;
        writeln!(
            out,
            "    level {}, weakest direction {} (window from t = {})",
            num::level_vs(s.excitation, p.min_excitation),
            direction(&s.weakest_direction),
            s.weakest_window_start
        )?;
        writeln!(out, "    fix: {}", s.remedy)?;
    }
    cautions(out)
}

/// The rate stage of a plan.
fn rate_stage(r: &crate::plan::RatePlan, out: &mut impl Write) -> io::Result<()> {
    writeln!(out)?;
    writeln!(
        out,
        "target rate {}: {} — structural plan cost {}, {} added for speed{}",
        num::rate_nearest(r.target),
        if r.met { "met" } else { "NOT met" },
        num::cost(r.structural_cost, Round::Nearest),
        num::count(r.added_links.len(), "link", "links"),
        if r.added_links.is_empty() {
            String::new()
        } else {
            format!(" ({})", r.added_links.join(", "))
        }
    )?;
    if !r.removed_links.is_empty() {
        writeln!(
            out,
            "  {} of the structural plan swapped out: {}",
            num::count(r.removed_links.len(), "link", "links"),
            r.removed_links.join(", ")
        )?;
    }
    if let Some(mu) = r.raised_min_excitation {
        writeln!(
            out,
            "  (from the structural optimum at a raised required excitation μ_req = {}, then pruned)",
            num::level(mu)
        )?;
    }
    if r.timed_out {
        writeln!(out, "  (the time limit stopped the rate stage)")?;
    }
    certificate(&r.certificate, out)?;
    Ok(())
}

/// The search figures and stage times of a plan.
fn search_figures(p: &Plan, out: &mut impl Write) -> io::Result<()> {
    let s = &p.stats;
    let t = &p.timings;
    writeln!(out)?;
    writeln!(
        out,
        "search: greedy {}, root LP bound {}, {}, {}, {}, {}, {} by reduced cost (fixings over all nodes, a link can count more than once), {} ({})",
        num::cost(s.greedy_cost, Round::Nearest),
        num::cost(s.root_lp_bound, Round::Down),
        num::count(s.rounds as usize, "round", "rounds"),
        num::count(s.cuts as usize, "row", "rows"),
        num::count(s.nodes as usize, "node", "nodes"),
        num::count(s.lp_solves as usize, "LP solve", "LP solves"),
        num::count(s.fixed_by_reduced_cost as usize, "fixing", "fixings"),
        num::count(
            s.excitation_queries as usize,
            "excitation query",
            "excitation queries"
        ),
        num::count(s.excitation_scans as usize, "full scan", "full scans")
    )?;
    if let (Some(b), Some(k)) = (s.component_bound, s.component_size) {
        writeln!(
            out,
            "bound from components of up to {k} units as columns: {} ({} connected sets, {} columns, {} taken up; {:.3} s on the second thread)",
            num::cost(b, Round::Down),
            s.component_sets.unwrap_or(0),
            s.component_columns.unwrap_or(0),
            s.component_columns_used.unwrap_or(0),
            t.component_bound.as_secs_f64()
        )?;
    }
    writeln!(
        out,
        "time: greedy {:.3} s, branch and cut {:.3} s (LP {:.3} s, separation {:.3} s, excitation checks {:.3} s, heuristics {:.3} s), rate stage {:.3} s",
        t.greedy.as_secs_f64(),
        t.search.as_secs_f64(),
        t.solver.as_secs_f64(),
        t.separation.as_secs_f64(),
        t.excitation.as_secs_f64(),
        t.heuristics.as_secs_f64(),
        t.rate.as_secs_f64()
    )?;
    Ok(())
}

/// Writes the comparison of two link sets side by side.
///
/// # Errors
/// Any I/O error of `out`.
pub fn comparison(c: &crate::whatif::compare::Comparison, out: &mut impl Write) -> io::Result<()> {
    use crate::analysis::Verdict;
    writeln!(out, "Comparison of two link sets for {}", c.network)?;
    writeln!(out, "  A: {}", c.a.plan_file)?;
    writeln!(out, "  B: {}", c.b.plan_file)?;
    writeln!(out)?;
    writeln!(out, "only in A: {}", names_or_none(&c.only_in_a))?;
    writeln!(out, "only in B: {}", names_or_none(&c.only_in_b))?;
    writeln!(out, "in both:   {}", names_or_none(&c.in_both))?;
    writeln!(out)?;
    let verdict = |v: Verdict| match v {
        Verdict::Converges => "converges",
        Verdict::StructureFails => "FAILS: a source component is not excited",
        Verdict::GainsFail => "FAILS: gain condition",
        Verdict::NotCertified => "not certified",
        Verdict::RateNotChecked => "condition holds (rate not checked)",
    };
    let rate = |r: Option<f64>| match (c.rates_checked, r) {
        (false, _) => "skipped (--skip-rate)".to_string(),
        (true, None) => "none".to_string(),
        (true, Some(r)) => num::rate(r),
    };
    let components = |s: &crate::whatif::compare::Side| {
        let bad = s.source_components.iter().filter(|x| !x.excited).count();
        format!(
            "{}{}",
            s.source_components.len(),
            if bad > 0 {
                format!(" ({bad} not excited)")
            } else {
                String::new()
            }
        )
    };
    let rows: [(&str, String, String); 7] = [
        (
            "links",
            c.a.links.len().to_string(),
            c.b.links.len().to_string(),
        ),
        (
            "cost",
            num::cost(c.a.cost, Round::Nearest),
            num::cost(c.b.cost, Round::Nearest),
        ),
        (
            "verdict",
            verdict(c.a.verdict).into(),
            verdict(c.b.verdict).into(),
        ),
        ("certified rate", rate(c.a.rate), rate(c.b.rate)),
        ("source components", components(&c.a), components(&c.b)),
        (
            "critical links",
            names_or_none(&c.a.critical_links),
            names_or_none(&c.b.critical_links),
        ),
        (
            "critical units",
            names_or_none(&c.a.critical_units),
            names_or_none(&c.b.critical_units),
        ),
    ];
    for (k, a, b) in rows {
        writeln!(out, "{k}:")?;
        writeln!(out, "  A: {a}")?;
        writeln!(out, "  B: {b}")?;
    }
    cautions(out)
}
