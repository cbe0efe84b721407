//! Reader for plan files: JSON with a `links` list of `{from, to, two_way}`
//! objects (other keys, such as those `plan` writes, are allowed).

use super::{Ends, LinkId, LinkSet, Problem};
use crate::error::{InputError, line_of};
use serde::Deserialize;
use serde_json::value::RawValue;
use std::path::Path;

#[derive(Deserialize)]
struct RawPlan<'a> {
    #[serde(borrow)]
    links: Vec<&'a RawValue>,
    // Read leniently: a key of another type is treated as absent.
    #[serde(default)]
    status: serde_json::Value,
    #[serde(default)]
    cost: serde_json::Value,
    #[serde(default)]
    lower_bound: serde_json::Value,
    #[serde(default)]
    gap: serde_json::Value,
}

/// Status, cost, bound and gap of a plan file written by `plan` (each
/// empty when the file does not carry it).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PlanFacts {
    /// `status`.
    pub status: Option<String>,
    /// `cost`.
    pub cost: Option<f64>,
    /// `lower_bound`.
    pub lower_bound: Option<f64>,
    /// `gap`.
    pub gap: Option<f64>,
}

#[derive(Deserialize)]
struct RawPlanLink {
    from: String,
    to: String,
    two_way: bool,
}

/// Reads a plan file and resolves its links against the problem's
/// candidates. A two-way entry matches a two-way candidate between the same
/// units (either order); a one-way entry matches a one-way candidate in the
/// same direction. When several candidates match, the cheapest is taken (the
/// first on a tie).
///
/// # Errors
/// An [`InputError`] naming the line for malformed JSON, a missing `links`
/// list, an entry without `from`/`to`/`two_way`, an unknown unit, or a link
/// that is not among the candidates.
pub fn read_link_set(problem: &Problem, path: &Path) -> Result<LinkSet, InputError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| InputError::whole(path, format!("cannot read the plan file: {e}")))?;
    parse_plan_file(problem, path, &text).map(|(set, _)| set)
}

/// Like [`read_link_set`], with the plan's recorded facts (one parse).
///
/// # Errors
/// As [`read_link_set`].
pub fn read_plan_file(problem: &Problem, path: &Path) -> Result<(LinkSet, PlanFacts), InputError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| InputError::whole(path, format!("cannot read the plan file: {e}")))?;
    parse_plan_file(problem, path, &text)
}

fn parse_plan_file(
    problem: &Problem,
    path: &Path,
    text: &str,
) -> Result<(LinkSet, PlanFacts), InputError> {
    let json_err = |e: serde_json::Error, what: &str| InputError {
        file: path.to_path_buf(),
        line: (e.line() > 0).then_some(e.line()),
        message: format!("{what}: {e}"),
    };
    let raw: RawPlan = serde_json::from_str(text)
        .map_err(|e| json_err(e, "expected a JSON object with a `links` list"))?;
    let facts = PlanFacts {
        status: raw.status.as_str().map(str::to_string),
        cost: raw.cost.as_f64(),
        lower_bound: raw.lower_bound.as_f64(),
        gap: raw.gap.as_f64(),
    };
    let mut ids = Vec::with_capacity(raw.links.len());
    for entry in raw.links {
        let offset = entry.get().as_ptr() as usize - text.as_ptr() as usize;
        let line = line_of(text, offset);
        let link: RawPlanLink = serde_json::from_str(entry.get()).map_err(|e| {
            InputError::at(
                path,
                line,
                format!("expected a link object {{\"from\", \"to\", \"two_way\"}}: {e}"),
            )
        })?;
        let unit = |name: &str| {
            problem.node_id(name).ok_or_else(|| {
                InputError::at(
                    path,
                    line,
                    format!(
                        "unknown unit \"{name}\"; expected the id of a [[node]] in {}",
                        problem.path.display()
                    ),
                )
            })
        };
        let (from, to) = (unit(&link.from)?, unit(&link.to)?);
        let matches = |ends: &Ends| match (*ends, link.two_way) {
            (Ends::TwoWay(a, b), true) => (a, b) == (from, to) || (b, a) == (from, to),
            (Ends::OneWay { from: f, to: t }, false) => (f, t) == (from, to),
            _ => false,
        };
        let best = problem
            .links
            .iter()
            .enumerate()
            .filter(|(_, l)| matches(&l.ends))
            .min_by(|a, b| a.1.cost.total_cmp(&b.1.cost).then(a.0.cmp(&b.0)))
            .map(|(k, _)| LinkId(k as u32));
        let kind = if link.two_way { "two-way" } else { "one-way" };
        let id = best.ok_or_else(|| {
            InputError::at(path, line, format!(
                "{kind} link {} {} {} is not among the candidate links; expected a link listed (or generated) in {}",
                link.from,
                if link.two_way { "<->" } else { "->" },
                link.to,
                problem.path.display()
            ))
        })?;
        ids.push(id);
    }
    Ok((LinkSet::new(ids), facts))
}
