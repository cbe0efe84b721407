//! Plain-text output for people.

use super::CAUTIONS;
use crate::analysis::Verdict;
use crate::analysis::{Check, ExcitationSummary};
use crate::certify::{Certificate, NormBoundKind};
use crate::plan::{Plan, PlanStatus};
use crate::simulate::{Reference, Trajectory};
use std::io::{self, Write};

fn direction(v: &[f64]) -> String {
    let parts: Vec<String> = v
        .iter()
        .map(|x| format!("{:+.3}", if x.abs() < 5e-4 { 0.0 } else { *x }))
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
        "required excitation μ_req = {value:.4e} ({origin}); {windows} windows scanned"
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
            "{:<width$}  {:>11.4e}  {:>7}  {:>4}  {:>4.0}%  {:>4.0}%  {} (t = {})",
            u.id,
            u.excitation,
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
        "Check of {}: {} links, cost {:.2}",
        c.network,
        c.links.len(),
        c.cost
    )?;
    threshold(out, c.min_excitation, c.min_excitation_given, c.windows)?;
    writeln!(out)?;
    for (k, sc) in c.source_components.iter().enumerate() {
        writeln!(
            out,
            "source component {}: {} unit(s), level {:.4e}, excited: {}",
            k + 1,
            sc.nodes.len(),
            sc.excitation,
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
        writeln!(out, "  drives:  {} unit(s)", sc.reaches.len())?;
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
                "Verdict: {bad} source component(s) are not excited — the estimates they drive need not converge."
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
                "Certified rate: {rate:.4e} 1/s over windows of {} s ({} windows, worst ‖Φ‖ ≤ {:.6})",
                c.window, c.windows, c.contraction
            )?;
            if let (Some(k), Some(t)) = (c.transient_factor, c.time_to_1pct) {
                let h = c.envelope_from;
                writeln!(
                    out,
                    "  |e(t)| ≤ {k:.4} · exp(−{rate:.4e} (t − {h})) · |e({h})| for every t in the horizon, its last jumps included"
                )?;
                writeln!(
                    out,
                    "  (the transient factor {k:.4} bounds how much the error can grow inside a window before the window's contraction applies)"
                )?;
                if let Some(any) = c.transient_factor_any_start {
                    writeln!(
                        out,
                        "  from any start s in the horizon: |e(t)| ≤ {any:.4} · exp(−{rate:.4e} (t − s)) · |e(s)|"
                    )?;
                }
                if c.time_to_1pct_extrapolated {
                    writeln!(
                        out,
                        "  error below 1 % after {t:.1} s — extrapolated beyond the recorded horizon (assumes the signals keep behaving as recorded)"
                    )?;
                } else {
                    writeln!(out, "  error below 1 % after {t:.1} s")?;
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
            "  window norms: upper bounds from randomized tests; the certificate fails with probability at most {:.1e}",
            c.failure_probability
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
            "  decay over the whole horizon (estimate, not certified): {a:.4e} 1/s"
        )?;
    }
    if c.rate.is_some() {
        let top: Vec<String> = c
            .units
            .iter()
            .take(3)
            .map(|u| format!("{} ({:.0} %)", u.node, 100.0 * u.share))
            .collect();
        writeln!(out, "  slowest mode sits mostly in: {}", top.join(", "))?;
    }
    if c.unconverged_windows > 0 {
        writeln!(
            out,
            "  note: on {} window(s) the upper bound is more than 0.1 % above the lower bound (still a valid bound)",
            c.unconverged_windows
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
            "  gain check{}: {} — value {:.4} (limit {}): {}",
            g.node
                .as_deref()
                .map(|n| format!(" at {n}"))
                .unwrap_or_default(),
            g.condition,
            g.value,
            g.limit,
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
            "decay of the stacked error: observed {o:.4e} 1/s, certified {c:.4e} 1/s"
        )?,
        (Some(o), None) => writeln!(
            out,
            "decay of the stacked error: observed {o:.4e} 1/s; no certified rate"
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
            "{:<20} {:>14.4e} {:>14.4e}",
            u.node, u.initial_error, u.final_error
        )?;
    }
    if units.len() > 10 {
        writeln!(out, "... {} more units (all in the CSV)", units.len() - 10)?;
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
    writeln!(
        out,
        "structural optimum {cost:.2} (proven lower bound {:.2}); {} sets certified",
        f.lower_bound.unwrap_or(cost),
        f.certified_sets
    )?;
    writeln!(out)?;
    writeln!(out, "{:>12}  {:>14}  {:>6}", "cost", "rate (1/s)", "links")?;
    for p in &f.front {
        let rate = p
            .rate
            .map_or("not certified".to_string(), |r| format!("{r:.4e}"));
        writeln!(out, "{:>12.2}  {rate:>14}  {:>6}", p.cost, p.links.len())?;
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
                    "Within {b:.2}: cost {:.2}, certified rate {}",
                    p.cost,
                    p.rate
                        .map_or("none".to_string(), |r| format!("{r:.4e} 1/s"))
                )?;
                writeln!(out, "  links: {}", p.links.join(", "))?;
            }
            None => writeln!(
                out,
                "Budget {b:.2} is too small: the cheapest plan that meets the condition costs {cost:.2}."
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
        s.baseline_rate
            .map_or("none".to_string(), |r| format!("{r:.4e} 1/s"))
    )?;
    writeln!(out, "critical links: {}", names_or_none(&s.critical_links))?;
    writeln!(out, "critical units: {}", names_or_none(&s.critical_units))?;
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
        let rate = sc.rate.map_or("-".to_string(), |r| format!("{r:.4e}"));
        writeln!(
            out,
            "{kind:<6} {:<28} {:<10} {rate:>14}  {}",
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
    writeln!(out, "Retiring {}", r.retired.join(", "))?;
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
        Some(c) => writeln!(out, "  cost of the additions: {c:.2}")?,
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
    let status = match p.status {
        PlanStatus::Optimal => "optimal",
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
            "The structure can be met (cost {:.2}), but no link set found reaches the target rate {:.4e} 1/s.",
            r.structural_cost, r.target
        )?;
        match r.best_reachable {
            Some(b) => writeln!(out, "Best certified rate reachable: {b:.4e} 1/s.")?,
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
    writeln!(
        out,
        "cost {cost:.2}, proven lower bound {lower:.2}, gap {:.2} %",
        100.0 * gap
    )?;
    if let Some(r) = &p.robustness {
        let what = match r.survive {
            crate::plan::Survive::Link => "any one link failing",
            crate::plan::Survive::Unit => "the loss of any one unit",
            crate::plan::Survive::Nothing => "nothing",
        };
        match (r.plain_cost, r.extra_cost) {
            (Some(plain), Some(extra)) => writeln!(
                out,
                "survives {what}; the plain plan costs {plain:.2}, so robustness costs {extra:.2} more"
            )?,
            _ => writeln!(out, "survives {what}")?,
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
    writeln!(out, "{} link(s):", p.links.len())?;
    for (l, e) in p.links.iter().zip(&ends) {
        let note = if l.installed { "  (installed)" } else { "" };
        writeln!(out, "  {e:<width$}  {:>10.2}{note}", l.cost)?;
    }
    writeln!(out)?;
    for (k, sc) in p.source_components.iter().enumerate() {
        writeln!(
            out,
            "source component {}: {} unit(s), level {:.4e}, excited: {}, drives {} unit(s)",
            k + 1,
            sc.nodes.len(),
            sc.excitation,
            yes_no(sc.excited),
            sc.reaches.len()
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
        "Even with every candidate link, {} group(s) of units form a source component that is not excited{after}:",
        p.shortfalls.len()
    )?;
    for s in &p.shortfalls {
        writeln!(out, "  units: {}", s.nodes.join(", "))?;
        writeln!(
            out,
            "    level {:.4e}, weakest direction {} (window from t = {})",
            s.excitation,
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
        "target rate {:.4e} 1/s: {} — structural plan cost {:.2}, {} link(s) added for speed{}",
        r.target,
        if r.met { "met" } else { "NOT met" },
        r.structural_cost,
        r.added_links.len(),
        if r.added_links.is_empty() {
            String::new()
        } else {
            format!(" ({})", r.added_links.join(", "))
        }
    )?;
    if let Some(mu) = r.raised_min_excitation {
        writeln!(
            out,
            "  (from the structural optimum at a raised required excitation μ_req = {mu:.4e}, then pruned)"
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
        "search: greedy {:.2}, root LP bound {:.2}, {} rounds, {} rows, {} nodes, {} LP solves, {} links fixed by reduced cost, {} excitation queries ({} full scans)",
        s.greedy_cost,
        s.root_lp_bound,
        s.rounds,
        s.cuts,
        s.nodes,
        s.lp_solves,
        s.fixed_by_reduced_cost,
        s.excitation_queries,
        s.excitation_scans
    )?;
    if let (Some(b), Some(k)) = (s.component_bound, s.component_size) {
        writeln!(
            out,
            "bound from components of up to {k} units as columns: {b:.2} ({} connected sets, {} columns, {} taken up; {:.3} s on the second thread)",
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
