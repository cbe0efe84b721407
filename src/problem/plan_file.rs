//! Reader for plan files: JSON with a `links` list of `{from, to, two_way}`
//! objects or link ids (other keys, such as those `plan` writes, are
//! allowed).

use super::{Ends, LinkId, LinkSet, NodeId, Problem};
use crate::error::{InputError, LineIndex, read_text};
use serde::Deserialize;
use serde_json::value::RawValue;
use std::collections::HashMap;
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
    #[serde(default)]
    id: Option<String>,
    from: String,
    to: String,
    two_way: bool,
}

/// Reads a plan file and resolves its links against the problem's
/// candidates. A two-way entry matches a two-way candidate between the same
/// units (either order); a one-way entry matches a one-way candidate in the
/// same direction. When several candidates match, the one with the entry's
/// `id` is taken, else the cheapest (the first on a tie). Reading is linear
/// in the file's size and the number of candidates.
///
/// # Errors
/// An [`InputError`] naming the line for malformed JSON, a missing `links`
/// list, an entry without `from`/`to`/`two_way`, an unknown unit, a link
/// that is not among the candidates, or a link listed twice (both lines
/// named).
pub fn read_link_set(problem: &Problem, path: &Path) -> Result<LinkSet, InputError> {
    let text = read_text(path, "plan file")?;
    parse_plan_file(problem, path, &text).map(|(set, _)| set)
}

/// Like [`read_link_set`], with the plan's recorded facts (one parse).
///
/// # Errors
/// As [`read_link_set`].
pub fn read_plan_file(problem: &Problem, path: &Path) -> Result<(LinkSet, PlanFacts), InputError> {
    let text = read_text(path, "plan file")?;
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
        message: format!("{what}: {}", crate::error::plain_words(&e.to_string())),
    };
    let raw: RawPlan = serde_json::from_str(text)
        .map_err(|e| json_err(e, "expected a JSON object with a `links` list"))?;
    let facts = PlanFacts {
        status: raw.status.as_str().map(str::to_string),
        cost: raw.cost.as_f64(),
        lower_bound: raw.lower_bound.as_f64(),
        gap: raw.gap.as_f64(),
    };
    let lines = LineIndex::new(text);
    let units: HashMap<&str, NodeId> = problem
        .nodes
        .iter()
        .enumerate()
        .map(|(k, n)| (n.id.as_str(), NodeId(k as u32)))
        .collect();
    let candidates = Candidates::new(problem);
    let by_id: HashMap<&str, LinkId> = problem
        .links
        .iter()
        .enumerate()
        .map(|(k, l)| (l.id.as_str(), LinkId(k as u32)))
        .collect();
    let mut seen: HashMap<LinkId, usize> = HashMap::with_capacity(raw.links.len());
    // A link may be listed once; a repeat names both lines.
    let once = |seen: &mut HashMap<LinkId, usize>, id: LinkId, line: usize, what: &str| match seen
        .insert(id, line)
    {
        Some(first) => Err(InputError::at(
            path,
            line,
            format!("{what} is listed twice (also on line {first}); expected each link once"),
        )),
        None => Ok(()),
    };
    let mut ids = Vec::with_capacity(raw.links.len());
    for entry in raw.links {
        let offset = entry.get().as_ptr() as usize - text.as_ptr() as usize;
        let line = lines.line(offset);
        // A bare string names a candidate by its id (as `budget`, `retire`
        // and `check` print them).
        if let Ok(name) = serde_json::from_str::<String>(entry.get()) {
            let id = by_id.get(name.as_str()).copied().ok_or_else(|| {
                InputError::at(
                    path,
                    line,
                    format!(
                        "unknown link id {name:?}; expected the id of a candidate link in {} or a link object {{\"from\", \"to\", \"two_way\"}}",
                        problem.path.display()
                    ),
                )
            })?;
            once(&mut seen, id, line, &format!("link {name}"))?;
            ids.push(id);
            continue;
        }
        let link: RawPlanLink = serde_json::from_str(entry.get()).map_err(|e| {
            InputError::at(
                path,
                line,
                format!(
                    "expected a link id or a link object {{\"from\", \"to\", \"two_way\"}}: {}",
                    crate::error::plain_words(&e.to_string())
                ),
            )
        })?;
        let unit = |name: &str| {
            units.get(name).copied().ok_or_else(|| {
                InputError::at(
                    path,
                    line,
                    format!(
                        "unknown unit {name:?}; expected the id of a [[node]] in {}",
                        problem.path.display()
                    ),
                )
            })
        };
        let (from, to) = (unit(&link.from)?, unit(&link.to)?);
        let kind = if link.two_way { "two-way" } else { "one-way" };
        let arrow = if link.two_way { "<->" } else { "->" };
        let id = candidates
            .find(problem, from, to, link.two_way, link.id.as_deref())
            .ok_or_else(|| {
                InputError::at(path, line, format!(
                    "{kind} link {} {arrow} {} is not among the candidate links; expected a link listed (or generated) in {}",
                    link.from,
                    link.to,
                    problem.path.display()
                ))
            })?;
        once(
            &mut seen,
            id,
            line,
            &format!("{kind} link {} {arrow} {}", link.from, link.to),
        )?;
        ids.push(id);
    }
    Ok((LinkSet::new(ids), facts))
}

/// The candidate links by their ends: two-way ones under the smaller unit
/// first, one-way ones as (from, to); each list in candidate order.
struct Candidates {
    by_ends: HashMap<(bool, NodeId, NodeId), Vec<LinkId>>,
}

impl Candidates {
    fn new(problem: &Problem) -> Self {
        let mut by_ends: HashMap<(bool, NodeId, NodeId), Vec<LinkId>> = HashMap::new();
        for (k, l) in problem.links.iter().enumerate() {
            let key = match l.ends {
                Ends::TwoWay(a, b) => (true, a.min(b), a.max(b)),
                Ends::OneWay { from, to } => (false, from, to),
            };
            by_ends.entry(key).or_default().push(LinkId(k as u32));
        }
        Candidates { by_ends }
    }

    /// The candidate with these ends: the one named `id` when there is
    /// one, else the cheapest (the first on a tie).
    fn find(
        &self,
        problem: &Problem,
        from: NodeId,
        to: NodeId,
        two_way: bool,
        id: Option<&str>,
    ) -> Option<LinkId> {
        let key = if two_way {
            (true, from.min(to), from.max(to))
        } else {
            (false, from, to)
        };
        let list = self.by_ends.get(&key)?;
        id.and_then(|id| list.iter().copied().find(|&l| problem.link(l).id == id))
            .or_else(|| {
                list.iter().copied().min_by(|&a, &b| {
                    let cost = |l: LinkId| problem.link(l).cost;
                    cost(a).total_cmp(&cost(b)).then(a.cmp(&b))
                })
            })
    }
}
