//! One self-contained HTML5 report of a plan: summary, map, link table,
//! source components, certificate and gains, the error-decay figure, the
//! budget front when asked, and the cautions. No scripts, no external
//! files: styles and figures (inline SVG) are in the page.

use super::CAUTIONS;
use super::number::{self as num, Round};
use super::svg::escape;
use crate::analysis::Check;
use crate::simulate::{Reference, Trajectory};
use crate::whatif::budget::Front;
use std::fmt::Write as _;

pub use crate::problem::PlanFacts;

/// Everything the report shows.
pub struct ReportInput<'a> {
    /// The problem.
    pub problem: &'a crate::problem::Problem,
    /// The plan's links.
    pub set: &'a crate::problem::LinkSet,
    /// The check of the plan, with its certificate.
    pub check: &'a Check,
    /// Facts from the plan file.
    pub facts: PlanFacts,
    /// The command and the plan file.
    pub provenance: Provenance,
    /// Why the set has each link, in the set's order (empty strings for
    /// sets larger than [`crate::plan::EXPLAIN_LINKS`]).
    pub reasons: Vec<String>,
    /// The map (SVG).
    pub map_svg: String,
    /// The simulation and its figure, when it could run.
    pub simulation: Result<(Trajectory, String), String>,
    /// The budget front and its figure, when asked.
    pub front: Option<(Front, String)>,
}

const STYLE: &str = "body{font-family:sans-serif;max-width:1100px;margin:2em auto;padding:0 1em;color:#111;line-height:1.4}\
h1{font-size:1.6em;margin-bottom:.2em}h2{font-size:1.25em;margin-top:1.6em;border-bottom:1px solid #999}\
table{border-collapse:collapse;margin:.6em 0}td,th{border:1px solid #999;padding:.25em .6em;text-align:left}\
th{background:#eee}td.num{text-align:right;font-variant-numeric:tabular-nums}\
.fig{overflow-x:auto;margin:.6em 0}.fig svg{max-width:100%;height:auto}\
.warn{border:2px solid #000;padding:.6em 1em;background:#f4f4f4}.muted{color:#555}";

/// A bound rounded on its safe side (`Round::Up` for upper bounds), or a
/// dash.
fn bound(v: Option<f64>, round: Round) -> String {
    v.map_or("—".into(), |x| num::sig(x, 4, round))
}

/// A rate: certified ones round down, estimates to nearest.
fn rate_or_dash(v: Option<f64>, certified: bool) -> String {
    match v {
        None => "—".into(),
        Some(x) if certified => num::rate(x),
        Some(x) => num::rate_nearest(x),
    }
}

/// Where the report's numbers come from: the command and the plan file.
#[derive(Debug, Clone, Default)]
pub struct Provenance {
    /// The command line that made the report.
    pub command: String,
    /// The plan file.
    pub plan_file: String,
}

/// Runs everything the report of `set` shows (check, certificate,
/// simulation from `truth` or the pooled fit, and with `front` the budget
/// sweep, reporting to `progress`) and writes the page.
///
/// # Errors
/// A message when a figure of the front cannot be drawn (a failed
/// simulation is shown in the page instead).
// Eight inputs: the problem and its table, the plan and what its file says,
// where it came from, and the three options of the report command.
#[allow(clippy::too_many_arguments)]
pub fn assemble(
    problem: &crate::problem::Problem,
    table: &crate::ExcitationTable,
    set: &crate::problem::LinkSet,
    facts: PlanFacts,
    provenance: Provenance,
    truth: Option<Vec<f64>>,
    front: bool,
    progress: &crate::progress::Sink,
) -> Result<String, String> {
    use crate::{analysis, certify, simulate};
    let check = analysis::check(problem, table, set);
    let cert = certify::certify_showing(problem, table, set, progress);
    let options = simulate::SimOptions {
        truth,
        initial: None,
    };
    let simulation = simulate::simulate(problem, set, Some(&cert), &options)
        .map_err(|e| e.to_string())
        .and_then(|t| {
            let svg = super::chart::errors_svg(problem, &t)?;
            Ok((t, svg))
        });
    let check = check.with_certificate(cert);
    let front = match front {
        true => {
            let options = crate::plan::Options {
                progress: progress.clone(),
                ..Default::default()
            };
            let f = crate::whatif::budget::front(problem, table, &options, None, 8);
            let svg = super::chart::front_svg(&f, problem.settings.target_rate)
                .map_err(|e| format!("drawing the front: {e}"))?;
            Some((f, svg))
        }
        false => None,
    };
    let scene = super::map::Scene::new(problem, table, set);
    Ok(report(&ReportInput {
        problem,
        set,
        check: &check,
        facts,
        provenance,
        reasons: if set.ids().len() <= crate::plan::EXPLAIN_LINKS {
            crate::plan::link_reasons(
                problem,
                table,
                set,
                &crate::plan::Why {
                    rate_stage: problem.settings.target_rate.is_some(),
                    ..Default::default()
                },
            )
            .into_iter()
            .map(|(_, r)| r)
            .collect()
        } else {
            vec![String::new(); set.ids().len()]
        },
        map_svg: super::map::svg(&scene),
        simulation,
        front,
    }))
}

/// Renders the report.
pub fn report(r: &ReportInput) -> String {
    let p = r.problem;
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{} — link plan report</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        escape(&p.settings.name)
    );
    let _ = writeln!(
        h,
        "<h1>{} — link plan report</h1>",
        escape(&p.settings.name)
    );
    let _ = writeln!(
        h,
        "<p>Every unit estimates the same {}-parameter vector from its own recorded regressor; \
         units share estimates over the chosen radio links. Every estimate converges when every \
         source component of the links is jointly excited. This report shows the chosen links, \
         that condition on the recorded logs, and the certified convergence rate.</p>",
        p.settings.parameters
    );
    let _ = writeln!(
        h,
        "<p class=\"warn\"><strong>Cautions.</strong> {}</p>",
        CAUTIONS.map(escape).join(" ")
    );

    summary(&mut h, r);
    fixes(&mut h, r);
    // Map.
    let _ = writeln!(h, "<h2>Map</h2>\n<div class=\"fig\">{}</div>", r.map_svg);

    links(&mut h, r);
    components(&mut h, r);
    certificate(&mut h, r);
    simulation(&mut h, r);
    front(&mut h, r);
    provenance(&mut h, r);
    let _ = writeln!(h, "<h2>Cautions</h2>\n<ul>");
    for c in CAUTIONS {
        let _ = writeln!(h, "<li>{}</li>", escape(c));
    }
    let _ = writeln!(
        h,
        "</ul>\n<p class=\"muted\">Made by exmesh {}.</p>\n</body>\n</html>",
        env!("CARGO_PKG_VERSION")
    );
    h
}

/// The summary table.
fn summary(h: &mut String, r: &ReportInput) {
    let p = r.problem;
    let c = r.check;
    let _ = writeln!(*h, "<h2>Summary</h2>\n<table>");
    let row = |h: &mut String, k: &str, v: String| {
        let _ = writeln!(*h, "<tr><th>{}</th><td>{}</td></tr>", escape(k), escape(&v));
    };
    row(h, "units", p.n().to_string());
    row(h, "candidate links", p.links.len().to_string());
    row(h, "chosen links", r.set.ids().len().to_string());
    row(
        h,
        "cost of the chosen links",
        num::cost(c.cost, Round::Nearest),
    );
    if let Some(s) = &r.facts.status {
        row(h, "plan status", s.clone());
    }
    if r.facts.lower_bound.is_some() {
        row(
            h,
            "proven lower bound",
            r.facts
                .lower_bound
                .map_or("—".into(), |b| num::cost(b, Round::Down)),
        );
        row(
            h,
            "gap",
            r.facts
                .gap
                .map_or("—".into(), |g| num::percent(g, Round::Up)),
        );
    }
    row(
        h,
        "condition",
        if c.condition_holds {
            "every source component is excited".into()
        } else {
            "NOT met: some source component is not excited".into()
        },
    );
    row(
        h,
        "verdict",
        match c.verdict {
            crate::analysis::Verdict::Converges => {
                "structure, gains and certificate hold: every estimate converges".into()
            }
            crate::analysis::Verdict::StructureFails => {
                "NOT converging: a source component is not excited".into()
            }
            crate::analysis::Verdict::GainsFail => {
                "NOT guaranteed: the gain condition fails at some unit".into()
            }
            crate::analysis::Verdict::NotCertified => {
                "NOT certified: no window of the horizon shows contraction".into()
            }
            crate::analysis::Verdict::RateNotChecked => "rate not checked".into(),
        },
    );
    row(
        h,
        "required excitation μ_req",
        format!(
            "{} ({}; {} windows)",
            num::level(c.min_excitation),
            if c.min_excitation_given {
                "from the problem file"
            } else {
                "default relative tolerance"
            },
            c.windows
        ),
    );
    if let Some(cert) = &c.certificate {
        row(
            h,
            "certified rate",
            cert.rate
                .map_or("not certified on this horizon".into(), num::rate),
        );
        row(
            h,
            "time to 1 %",
            match cert.time_to_1pct {
                None => "—".to_string(),
                Some(t) => {
                    num::sig(t, 4, Round::Up)
                        + if cert.time_to_1pct_extrapolated {
                            " s (extrapolated beyond the recorded horizon)"
                        } else {
                            " s"
                        }
                }
            },
        );
        row(
            h,
            "window norms",
            match cert.norm_bound {
                crate::certify::NormBoundKind::Exact => "exact (plus a rounding margin)".into(),
                crate::certify::NormBoundKind::Randomized => format!(
                    "upper bounds from randomized tests (fail with probability ≤ {})",
                    num::sig(cert.failure_probability, 2, Round::Up)
                ),
            },
        );
    }
    if let Some(t) = p.settings.target_rate {
        let met = match c.certificate.as_ref().and_then(|cert| cert.rate) {
            Some(rate) if rate >= t => "met".to_string(),
            Some(_) => "NOT met by the certified rate".to_string(),
            None if c.certificate.is_some() => "NOT met: no certified rate".to_string(),
            None => "not checked".to_string(),
        };
        row(
            h,
            "target rate",
            format!("{} — {met}", num::rate_nearest(t)),
        );
    }
    let _ = writeln!(*h, "</table>");
}

/// The chosen links.
fn links(h: &mut String, r: &ReportInput) {
    let p = r.problem;
    let _ = writeln!(
        h,
        "<h2>Chosen links</h2>\n<table>\n<tr><th>link</th><th>from</th><th>to</th><th>kind</th><th>cost</th><th>state</th><th>why</th></tr>"
    );
    for (&l, why) in r.set.ids().iter().zip(&r.reasons) {
        let link = p.link(l);
        let (a, b, kind) = match link.ends {
            crate::problem::Ends::TwoWay(a, b) => (a, b, "two-way"),
            crate::problem::Ends::OneWay { from, to } => (from, to, "one-way"),
        };
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{kind}</td><td class=\"num\">{}</td><td>{}</td><td>{}</td></tr>",
            escape(&link.id),
            escape(p.node_name(a)),
            escape(p.node_name(b)),
            num::cost(if link.installed { 0.0 } else { link.cost }, Round::Nearest),
            if link.installed { "installed" } else { "new" },
            escape(why)
        );
    }
    let _ = writeln!(*h, "</table>");
}

/// The source components.
fn components(h: &mut String, r: &ReportInput) {
    let c = r.check;
    let _ = writeln!(
        h,
        "<h2>Source components</h2>\n<table>\n<tr><th>#</th><th>units</th><th>joint excitation</th><th>excited</th><th>drives</th></tr>"
    );
    for (k, s) in c.source_components.iter().enumerate() {
        let _ = writeln!(
            h,
            "<tr><td>S{}</td><td>{}</td><td class=\"num\">{}</td><td>{}</td><td class=\"num\">{}</td></tr>",
            k + 1,
            escape(&s.nodes.join(", ")),
            num::level_vs(s.excitation, c.min_excitation),
            if s.excited { "yes" } else { "NO" },
            s.reaches.len()
        );
    }
    let _ = writeln!(*h, "</table>");
}

/// The certificate.
fn certificate(h: &mut String, r: &ReportInput) {
    let c = r.check;
    if let Some(cert) = &c.certificate {
        let _ = writeln!(*h, "<h2>Certified convergence</h2>");
        match cert.rate {
            Some(rate) => {
                let _ = writeln!(
                    h,
                    "<p>On the recorded data, |e(t)| ≤ {} · exp(−{} (t − {h0})) · |e({h0})| for the \
                     stacked estimation error and every t of the horizon (its last jumps included): \
                     certified rate <strong>{}</strong> over windows \
                     of {} s (worst ‖Φ‖ ≤ {} over {} windows); the bound falls to 1 % after {} s{}. \
                     The transient factor bounds how much the error can grow inside a window before \
                     that window's contraction applies. Decay over the whole horizon (an estimate, \
                     not certified): {}.</p>",
                    bound(cert.transient_factor, Round::Up),
                    num::sig(rate, 4, Round::Down),
                    num::rate(rate),
                    cert.window,
                    num::sig(cert.contraction, 6, Round::Up),
                    cert.windows,
                    bound(cert.time_to_1pct, Round::Up),
                    if cert.time_to_1pct_extrapolated {
                        " (extrapolated beyond the recorded horizon)"
                    } else {
                        ""
                    },
                    rate_or_dash(cert.asymptotic_rate, false),
                    h0 = cert.envelope_from,
                );
                let top: Vec<String> = cert
                    .units
                    .iter()
                    .filter(|u| u.share >= 0.005)
                    .take(5)
                    .map(|u| format!("{} ({:.0} %)", u.node, 100.0 * u.share))
                    .collect();
                let _ = writeln!(
                    h,
                    "<p>The slowest mode sits mostly in: {}.</p>",
                    escape(&top.join(", "))
                );
            }
            None => {
                let _ = writeln!(
                    h,
                    "<p class=\"warn\">Not certified on this horizon: {}</p>",
                    escape(
                        cert.reason
                            .as_deref()
                            .unwrap_or("no window shows contraction")
                    )
                );
            }
        }
        let _ = writeln!(
            h,
            "<table>\n<tr><th>unit</th><th>gain condition</th><th>value</th><th>limit</th><th>result</th></tr>"
        );
        for g in &cert.gains {
            let _ = writeln!(
                h,
                "<tr><td>{}</td><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
                escape(g.node.as_deref().unwrap_or("—")),
                escape(&g.condition),
                num::sig(g.value, 4, Round::Up),
                num::sig(g.limit, 4, Round::Nearest),
                if g.ok { "pass" } else { "FAIL" }
            );
        }
        let _ = writeln!(*h, "</table>");
    }
}

/// The simulated estimation errors.
fn simulation(h: &mut String, r: &ReportInput) {
    let _ = writeln!(*h, "<h2>Estimation error over time</h2>");
    match &r.simulation {
        Ok((t, svg)) => {
            let reference = match t.reference_kind {
                Reference::Truth => "the given true parameter",
                Reference::PooledFit => "the pooled least-squares fit of all logs",
            };
            let _ = writeln!(
                h,
                "<p>Each unit's estimator run on the logs from a zero estimate; errors measured \
                 against {reference}. Observed decay {} (an estimate), certified {}.{}</p>\n<div class=\"fig\">{svg}</div>",
                rate_or_dash(t.observed_rate, false),
                rate_or_dash(t.certified_rate, true),
                if t.reference_kind == Reference::PooledFit && t.certified_rate.is_some() {
                    " Logged outputs: noise and model mismatch are outside the certificate; \
                     the bound is drawn for reference."
                } else {
                    ""
                }
            );
        }
        Err(why) => {
            let _ = writeln!(*h, "<p class=\"muted\">No simulation: {}</p>", escape(why));
        }
    }
}

/// The cost–rate front.
fn front(h: &mut String, r: &ReportInput) {
    if let Some((front, svg)) = &r.front {
        let _ = writeln!(
            h,
            "<h2>What a budget buys</h2>\n<p>Non-dominated plans from the structural optimum upward; every rate is certified.</p>\n<table>\n<tr><th>cost</th><th>certified rate</th><th>links</th></tr>"
        );
        for pt in &front.front {
            let _ = writeln!(
                h,
                "<tr><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td></tr>",
                num::cost(pt.cost, Round::Nearest),
                rate_or_dash(pt.rate, true),
                pt.links.len()
            );
        }
        let _ = writeln!(*h, "</table>\n<div class=\"fig\">{svg}</div>");
    }
}

/// What to change when the link set does not make every estimate converge
/// (the fixes `check` gives).
fn fixes(h: &mut String, r: &ReportInput) {
    use crate::analysis::Verdict;
    let c = r.check;
    let mut items: Vec<String> = Vec::new();
    match c.verdict {
        Verdict::StructureFails => {
            for (k, s) in c.source_components.iter().enumerate() {
                if s.excited {
                    continue;
                }
                let into = if s.entering_candidates.is_empty() {
                    "no candidate link enters it".to_string()
                } else {
                    format!("candidate links into it: {}", s.entering_candidates.join(", "))
                };
                items.push(format!(
                    "S{} ({}) is not excited: add a link into it from an excited part of the network, or give its units more excitation along the weakest direction [{}] (window from t = {}); {into}.",
                    k + 1,
                    s.nodes.join(", "),
                    s.weakest_direction
                        .iter()
                        .map(|x| num::fixed(*x, 3, Round::Nearest))
                        .collect::<Vec<_>>()
                        .join(", "),
                    s.weakest_window_start
                ));
            }
        }
        Verdict::GainsFail => {
            let units: Vec<&str> = c
                .gains
                .iter()
                .chain(c.certificate.iter().flat_map(|cert| cert.gains.iter()))
                .filter(|g| !g.ok)
                .filter_map(|g| g.node.as_deref())
                .collect();
            items.push(format!(
                "The gain condition fails at {}: lower jump_coupling or jump_gain, or give these units fewer (or lighter) incoming links.",
                units.join(", ")
            ));
        }
        Verdict::NotCertified => items.push(
            "No window of the recorded horizon shows contraction: record longer or richer logs, raise the gains within their limits, or add links that share excitation.".to_string(),
        ),
        Verdict::Converges | Verdict::RateNotChecked => {}
    }
    if let (Some(t), Some(cert)) = (r.problem.settings.target_rate, &c.certificate)
        && cert.rate.is_none_or(|rate| rate < t)
    {
        items.push(
            "The target rate is not met: run `exmesh plan` (its rate stage adds links for speed) or `exmesh budget` for what each cost buys.".to_string(),
        );
    }
    if items.is_empty() {
        return;
    }
    let _ = writeln!(*h, "<h2>What to fix</h2>\n<ul>");
    for i in items {
        let _ = writeln!(*h, "<li>{}</li>", escape(&i));
    }
    let _ = writeln!(*h, "</ul>");
}

/// Where the numbers come from: files, spans, horizon, version, command.
fn provenance(h: &mut String, r: &ReportInput) {
    let p = r.problem;
    let _ = writeln!(*h, "<h2>Provenance</h2>\n<table>");
    let row = |h: &mut String, k: &str, v: String| {
        let _ = writeln!(*h, "<tr><th>{}</th><td>{}</td></tr>", escape(k), escape(&v));
    };
    row(h, "problem file", p.path.display().to_string());
    row(h, "plan file", r.provenance.plan_file.clone());
    row(
        h,
        "common horizon",
        format!("{} s to {} s", p.domain.h0, p.domain.h1),
    );
    row(h, "exmesh version", env!("CARGO_PKG_VERSION").to_string());
    row(h, "command", r.provenance.command.clone());
    let _ = writeln!(
        *h,
        "</table>\n<table>\n<tr><th>unit</th><th>log file</th><th>first sample (s)</th><th>last sample (s)</th><th>rows</th></tr>"
    );
    for v in &p.nodes {
        let (a, b) = v.log.span();
        let _ = writeln!(
            *h,
            "<tr><td>{}</td><td>{}</td><td class=\"num\">{a}</td><td class=\"num\">{b}</td><td class=\"num\">{}</td></tr>",
            escape(&v.id),
            escape(&v.log.path.display().to_string()),
            v.log.t.len()
        );
    }
    let _ = writeln!(*h, "</table>");
}
