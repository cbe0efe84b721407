//! Two link sets side by side (`compare`): the links only in one of them,
//! each set's cost, verdict, certified rate, source components, and the
//! links and units whose single failure breaks the condition (from
//! [`super::stress`]).

use super::stress::stress;
use crate::analysis::{self, SourceComponent, Verdict};
use crate::certify::certify;
use crate::excitation::ExcitationTable;
use crate::problem::{LinkSet, Problem};
use crate::progress::Sink;
use serde::Serialize;

/// One side of a comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Side {
    /// Where the links came from (the plan file as given).
    pub plan_file: String,
    /// Link ids, in candidate order.
    pub links: Vec<String>,
    /// Cost (installed links count 0).
    pub cost: f64,
    /// Every source component is excited.
    pub condition_holds: bool,
    /// The verdict `check` gives (`rate_not_checked` with `--skip-rate`).
    pub verdict: Verdict,
    /// Certified rate (null when not certified or skipped).
    pub rate: Option<f64>,
    /// Source components, as in `check`.
    pub source_components: Vec<SourceComponent>,
    /// Links whose single failure breaks the condition, worst first.
    pub critical_links: Vec<String>,
    /// Units whose loss breaks the condition, worst first.
    pub critical_units: Vec<String>,
}

/// The comparison of two link sets.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// Network name.
    pub network: String,
    /// Links in A only, in B only, in both (candidate order).
    pub only_in_a: Vec<String>,
    /// See `only_in_a`.
    pub only_in_b: Vec<String>,
    /// See `only_in_a`.
    pub in_both: Vec<String>,
    /// Whether rates were certified (false with `--skip-rate`).
    pub rates_checked: bool,
    /// The first set.
    pub a: Side,
    /// The second set.
    pub b: Side,
}

fn side(
    problem: &Problem,
    table: &ExcitationTable,
    set: &LinkSet,
    name: &str,
    rates: bool,
) -> Side {
    let mut check = analysis::check(problem, table, set);
    if rates {
        check = check.with_certificate(certify(problem, table, set));
    }
    let failures = stress(problem, table, set, false, &Sink::silent());
    Side {
        plan_file: name.to_string(),
        links: check.links.clone(),
        cost: check.cost,
        condition_holds: check.condition_holds,
        verdict: check.verdict,
        rate: check.certificate.as_ref().and_then(|c| c.rate),
        source_components: check.source_components,
        critical_links: failures.critical_links,
        critical_units: failures.critical_units,
    }
}

/// Compares the link sets `a` and `b` (named `names` in the output); with
/// `rates`, certifies each.
///
/// # Complexity
/// Two checks, two stress runs without rates (one check per failure), and
/// with `rates` two certificates.
pub fn compare(
    problem: &Problem,
    table: &ExcitationTable,
    a: &LinkSet,
    b: &LinkSet,
    names: [&str; 2],
    rates: bool,
) -> Comparison {
    let id = |l: &crate::problem::LinkId| problem.link(*l).id.clone();
    let mut all: Vec<crate::problem::LinkId> = a.ids().iter().chain(b.ids()).copied().collect();
    all.sort_unstable();
    all.dedup();
    let (sa, sb) = rayon::join(
        || side(problem, table, a, names[0], rates),
        || side(problem, table, b, names[1], rates),
    );
    Comparison {
        network: problem.settings.name.clone(),
        only_in_a: all
            .iter()
            .filter(|l| a.ids().contains(l) && !b.ids().contains(l))
            .map(id)
            .collect(),
        only_in_b: all
            .iter()
            .filter(|l| b.ids().contains(l) && !a.ids().contains(l))
            .map(id)
            .collect(),
        in_both: all
            .iter()
            .filter(|l| a.ids().contains(l) && b.ids().contains(l))
            .map(id)
            .collect(),
        rates_checked: rates,
        a: sa,
        b: sb,
    }
}
