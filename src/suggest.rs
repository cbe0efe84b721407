//! Starting a problem from recorded logs (`exmesh init`): the parameter
//! dimension from the logs' columns, a window length, a required
//! excitation and a candidate range suggested from the data, each with the
//! reason, following the recipe of docs/formats.md ("Choosing the window,
//! μ_req and a target rate from the data").

use crate::excitation::ExcitationTable;
use crate::problem::{Gains, Node, NodeId, Problem, Settings};
use crate::signal::{TimeDomain, WindowKind};
use std::path::PathBuf;

/// The number of regressor columns (`psi1`…`psiP`) in a log's header, from
/// its first line that is neither blank nor a `#` comment.
pub fn regressor_columns(text: &str) -> Option<usize> {
    let header = text
        .lines()
        .map(str::trim)
        .find(|l| !l.is_empty() && !l.starts_with('#'))?;
    let header = header.trim_start_matches('\u{feff}');
    let p = header
        .split(',')
        .filter(|f| {
            let f = f.trim();
            f.strip_prefix("psi")
                .is_some_and(|k| !k.is_empty() && k.bytes().all(|b| b.is_ascii_digit()))
        })
        .count();
    (p > 0).then_some(p)
}

/// What `init` proposes, with the reasons.
#[derive(Debug, Clone, PartialEq)]
pub struct Suggestion {
    /// Window length (s).
    pub window: f64,
    /// Stride between window starts (s).
    pub stride: f64,
    /// Why this window.
    pub window_why: String,
    /// Required excitation μ_req.
    pub min_excitation: f64,
    /// Why this μ_req.
    pub min_excitation_why: String,
    /// Candidate range (km) when positions are given.
    pub range: Option<f64>,
    /// Why this range.
    pub range_why: Option<String>,
}

/// Shares of the common horizon tried as window lengths.
const WINDOW_SHARES: [f64; 5] = [1.0 / 40.0, 1.0 / 20.0, 1.0 / 10.0, 1.0 / 6.0, 1.0 / 4.0];

/// Suggests a window, μ_req and (with positions) a candidate range for the
/// units `nodes` (their logs read with `p` regressor columns).
///
/// Window: the shortest tried length (a share of the horizon, at most a
/// quarter) at which the level per second of window, of all units pooled
/// and of the best single unit, reaches half of what the longest tried
/// window gives: from there on levels grow about in proportion to the
/// window, so the window holds the units' patterns. μ_req: 5 % of the smaller of the best single unit's
/// level and the pooled level at that window (the pooled level alone when
/// no unit is excited alone). Range: 1.5 times the longest link of a
/// minimum spanning tree of the units, so that candidates connect them all.
///
/// # Errors
/// A message when the logs share no horizon.
pub fn suggest(nodes: Vec<Node>, p: usize) -> Result<Suggestion, String> {
    let domain = TimeDomain::merge(nodes.iter().map(|n| &n.log))
        .ok_or("the logs do not overlap in time; expected a common horizon")?;
    let horizon = domain.h1 - domain.h0;
    let stride = horizon / 100.0;
    let all: Vec<NodeId> = (0..nodes.len() as u32).map(NodeId).collect();
    let mut tried: Vec<(f64, f64, f64)> = Vec::new(); // (T, pooled, best unit)
    for share in WINDOW_SHARES {
        let window = horizon * share;
        let settings = Settings {
            name: "init".into(),
            parameters: p,
            window,
            window_kind: WindowKind::Time,
            stride: Some(stride),
            min_excitation: Some(1.0),
            target_rate: None,
            gains: Gains::default(),
        };
        let Some(problem) =
            Problem::from_parts(PathBuf::from("init"), settings, nodes.clone(), Vec::new())
        else {
            continue;
        };
        let table = ExcitationTable::build(&problem);
        let pooled = table.level(&all).value.max(0.0);
        let best = all
            .iter()
            .map(|&v| table.level(&[v]).value)
            .fold(0.0f64, f64::max);
        tried.push((window, pooled, best));
    }
    let Some(&(t_max, l_max, b_max)) = tried.last() else {
        return Err("no window fits in the common horizon of the logs".into());
    };
    let rate_max = l_max / t_max;
    let unit_rate_max = b_max / t_max;
    let fmt = |x: f64| crate::report::number::sig(x, 3, crate::report::number::Round::Nearest);
    let (window, pooled, best, window_why) = if l_max <= 0.0 {
        (
            t_max,
            0.0,
            0.0,
            format!(
                "a quarter of the {} s horizon: even then all units pooled do not excite every direction, so no link set can work on these logs (record richer logs)",
                fmt(horizon)
            ),
        )
    } else {
        let &(t, l, b) = tried
            .iter()
            .find(|&&(t, l, b)| l / t >= 0.5 * rate_max && b / t >= 0.5 * unit_rate_max)
            .unwrap_or(&tried[tried.len() - 1]);
        (
            t,
            l,
            b,
            format!(
                "the shortest tried window (shares 1/40 to 1/4 of the {} s horizon) at which the level per second of window, of all units pooled and of the best single unit, reaches half of that at the longest (pooled {} at {} s against {} at {} s; best unit {} against {}): from there on levels grow about in proportion to the window, so each window holds the units' patterns",
                fmt(horizon),
                fmt(l),
                fmt(t),
                fmt(l_max),
                fmt(t_max),
                fmt(b),
                fmt(b_max)
            ),
        )
    };
    let (base, whose) = if best > 0.0 && best < pooled {
        (best, "the best unit excited alone")
    } else if best > 0.0 {
        (pooled, "all units pooled")
    } else {
        (pooled, "all units pooled (no unit is excited alone)")
    };
    let min_excitation = if base > 0.0 {
        let m = 0.05 * base;
        // Two significant digits, rounded down.
        let e = 10f64.powf(m.log10().floor() - 1.0);
        (m / e).floor() * e
    } else {
        1e-6
    };
    let min_excitation_why = if base > 0.0 {
        format!(
            "5 % of the level of {whose} at this window ({}): well above rounding noise, below what the well-excited groups reach",
            fmt(base)
        )
    } else {
        "a placeholder: no group of units is excited on these logs".into()
    };
    let (range, range_why) = match spanning_range(&nodes) {
        Some(longest) => (
            Some(1.5 * longest),
            Some(format!(
                "1.5 × the longest link ({} km) of a minimum spanning tree of the units, so that the candidates connect every unit; set it to what your radios reach",
                fmt(longest)
            )),
        ),
        None => (None, None),
    };
    Ok(Suggestion {
        window,
        stride,
        window_why,
        min_excitation,
        min_excitation_why,
        range,
        range_why,
    })
}

/// The longest edge of a minimum spanning tree of the units by distance
/// (Prim, O(n²)); `None` without positions for every unit or with one
/// unit.
fn spanning_range(nodes: &[Node]) -> Option<f64> {
    let n = nodes.len();
    if n < 2 || nodes.iter().any(|v| v.position.is_none()) {
        return None;
    }
    let mut in_tree = vec![false; n];
    let mut dist = vec![f64::INFINITY; n];
    dist[0] = 0.0;
    let mut longest: f64 = 0.0;
    for _ in 0..n {
        let u = (0..n)
            .filter(|&k| !in_tree[k])
            .min_by(|&a, &b| dist[a].total_cmp(&dist[b]))?;
        in_tree[u] = true;
        longest = longest.max(dist[u]);
        for k in 0..n {
            if !in_tree[k]
                && let Some(d) = nodes[u].distance_km(&nodes[k])
            {
                dist[k] = dist[k].min(d);
            }
        }
    }
    Some(longest)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_from_the_header() {
        assert_eq!(
            regressor_columns("# c\n\nt,j,psi1,psi2,psi3,y\n0,0,1,2,3,4\n"),
            Some(3)
        );
        assert_eq!(regressor_columns("t,j,psi1\n"), Some(1));
        assert_eq!(regressor_columns("t,j,y\n"), None);
    }

    /// Units on a line 1 km apart, one 3 km further: the minimum spanning
    /// tree's longest link is 3 km (closed form).
    #[test]
    fn spanning_range_is_the_longest_tree_link() {
        let log =
            crate::signal::parse_log(std::path::Path::new("x.csv"), "t,j,psi1\n0,0,1\n1,0,1\n", 1)
                .unwrap();
        let node = |x: f64| Node {
            id: format!("u{x}"),
            log: log.clone(),
            position: Some([x, 0.0]),
            lat_lon: None,
            max_links: None,
        };
        let nodes = vec![node(0.0), node(1.0), node(2.0), node(5.0)];
        assert_eq!(spanning_range(&nodes), Some(3.0));
    }
}
