//! The planning benchmark family (docs/tuning.md, "The benchmark
//! family"): seeded synthetic networks that vary what real networks vary —
//! mean degree 4 / 8 / 16; units uniform in a square, in a few dense sites
//! far apart, or along a corridor; 0 % or 30 % one-way candidates;
//! p = 2 / 4 / 6; a standard or a sparse excitation mix; cost linear in
//! distance, fixed plus distance², or random per link; with or without
//! installed links. Member k of a size is row `k mod 12` of [`DESIGN`]
//! with its own seed, so every twelve members cover each level at least
//! three times. Invented data for benchmarks, never a reference.

use crate::problem::{Ends, Link, Node, NodeId, Problem};
use crate::synth::{Mix, Rng, STANDARD_MIX, join, unit_signal, with_required_excitation};
use std::path::PathBuf;

/// Where the units stand.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Layout {
    /// Uniform in a square of side √n km.
    Uniform,
    /// Dense sites of about 25 units, far apart.
    Clustered,
    /// Along a line (a canal, a feeder), 0.3 km wide.
    Corridor,
}

/// How a candidate link is priced.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CostModel {
    /// 500 + 300·km.
    Linear,
    /// 800 + 150·km².
    Quadratic,
    /// Uniform in 400–4000 whatever the distance.
    Random,
}

/// One row of the design.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Member {
    /// Layout of the units.
    pub layout: Layout,
    /// Mean number of candidates per unit.
    pub degree: f64,
    /// Share of candidates that are one-way.
    pub one_way: f64,
    /// Parameters estimated.
    pub p: usize,
    /// Sparse mix: 5 % full rank, 45 % rank 1, 30 % rank 2, 20 % none.
    pub sparse: bool,
    /// Cost model.
    pub cost: CostModel,
    /// Share of candidates already installed.
    pub installed: f64,
}

/// The sparse excitation mix (cumulative: rank 1, rank 2, full).
pub const SPARSE_MIX: Mix = [0.45, 0.75, 0.8];

const fn row(
    layout: Layout,
    degree: f64,
    one_way: f64,
    p: usize,
    sparse: bool,
    cost: CostModel,
    installed: f64,
) -> Member {
    Member {
        layout,
        degree,
        one_way,
        p,
        sparse,
        cost,
        installed,
    }
}

use CostModel::{Linear, Quadratic, Random};
use Layout::{Clustered, Corridor, Uniform};

/// The twelve rows: each layout, degree and p four times, each of one-way
/// share, mix and installed links half of the time, each cost model three
/// to five times.
pub const DESIGN: [Member; 12] = [
    row(Uniform, 8.0, 0.0, 4, false, Linear, 0.0),
    row(Clustered, 4.0, 0.3, 2, true, Quadratic, 0.05),
    row(Corridor, 16.0, 0.0, 6, false, Random, 0.0),
    row(Uniform, 4.0, 0.3, 6, true, Linear, 0.05),
    row(Clustered, 16.0, 0.0, 4, false, Random, 0.05),
    row(Corridor, 8.0, 0.3, 2, true, Quadratic, 0.0),
    row(Uniform, 16.0, 0.3, 2, false, Quadratic, 0.0),
    row(Clustered, 8.0, 0.0, 6, true, Linear, 0.0),
    row(Corridor, 4.0, 0.0, 4, false, Linear, 0.05),
    row(Uniform, 8.0, 0.3, 4, true, Random, 0.05),
    row(Clustered, 16.0, 0.3, 6, false, Linear, 0.0),
    row(Corridor, 4.0, 0.0, 2, true, Random, 0.05),
];

/// A one-line description of member k, for tables.
pub fn describe(k: usize) -> String {
    let m = DESIGN[k % DESIGN.len()];
    format!(
        "{:?} deg {} one-way {:.0}% p={} {} {:?}{}",
        m.layout,
        m.degree,
        100.0 * m.one_way,
        m.p,
        if m.sparse { "sparse" } else { "standard" },
        m.cost,
        if m.installed > 0.0 { " installed" } else { "" }
    )
}

/// Unit positions in km.
fn positions(layout: Layout, n: usize, rng: &mut Rng) -> Vec<[f64; 2]> {
    let side = (n as f64).sqrt();
    match layout {
        Uniform => (0..n)
            .map(|_| [rng.range(0.0, side), rng.range(0.0, side)])
            .collect(),
        Clustered => {
            // Sites of about 25 units, 1 km across, spread over a square
            // four times as wide as the uniform one.
            let sites = n.div_ceil(25).max(2);
            let spread = 4.0 * side.max(3.0);
            let centres: Vec<[f64; 2]> = (0..sites)
                .map(|_| [rng.range(0.0, spread), rng.range(0.0, spread)])
                .collect();
            (0..n)
                .map(|_| {
                    let c = centres[rng.below(sites)];
                    [c[0] + rng.range(-0.5, 0.5), c[1] + rng.range(-0.5, 0.5)]
                })
                .collect()
        }
        Corridor => (0..n)
            .map(|_| [rng.range(0.0, 0.5 * n as f64), rng.range(0.0, 0.3)])
            .collect(),
    }
}

/// Pairs (i < j) closer than `r`, with their distance, by a grid of cells
/// of side r.
fn pairs_within(pos: &[[f64; 2]], r: f64) -> Vec<(f64, usize, usize)> {
    let mut cells: std::collections::HashMap<(i64, i64), Vec<usize>> =
        std::collections::HashMap::new();
    let cell = |p: [f64; 2]| ((p[0] / r).floor() as i64, (p[1] / r).floor() as i64);
    for (i, &p) in pos.iter().enumerate() {
        cells.entry(cell(p)).or_default().push(i);
    }
    let mut out = Vec::new();
    for (i, &p) in pos.iter().enumerate() {
        let (cx, cy) = cell(p);
        for dx in -1..=1 {
            for dy in -1..=1 {
                for &j in cells.get(&(cx + dx, cy + dy)).into_iter().flatten() {
                    if j > i {
                        let d = (p[0] - pos[j][0]).hypot(p[1] - pos[j][1]);
                        if d <= r {
                            out.push((d, i, j));
                        }
                    }
                }
            }
        }
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
    out
}

/// The candidate pairs: the `degree·n/2` closest pairs, then the shortest
/// pairs joining the pieces left (Kruskal over growing radii), so that the
/// two-way candidates alone connect every unit.
fn candidate_pairs(pos: &[[f64; 2]], degree: f64) -> Vec<(f64, usize, usize)> {
    let n = pos.len();
    let want = ((degree * n as f64) / 2.0).round() as usize;
    let (lo, hi) = pos.iter().fold(
        ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]),
        |(lo, hi), p| {
            (
                [lo[0].min(p[0]), lo[1].min(p[1])],
                [hi[0].max(p[0]), hi[1].max(p[1])],
            )
        },
    );
    let area = ((hi[0] - lo[0]) * (hi[1] - lo[1])).max(1e-6);
    let mut r = (degree * area / (std::f64::consts::PI * n as f64)).sqrt();
    let mut near = pairs_within(pos, r);
    while near.len() < want && near.len() < n * (n - 1) / 2 {
        r *= 1.5;
        near = pairs_within(pos, r);
    }
    near.truncate(want);
    let mut piece: Vec<usize> = (0..n).collect();
    let mut pieces = n;
    for &(_, a, b) in &near {
        if join(&mut piece, a, b) {
            pieces -= 1;
        }
    }
    while pieces > 1 {
        r *= 1.5;
        for (d, a, b) in pairs_within(pos, r) {
            if join(&mut piece, a, b) {
                pieces -= 1;
                near.push((d, a, b));
            }
        }
    }
    near
}

/// Member `k` of the family at `n` units: row `k mod 12` of [`DESIGN`],
/// seeded by n and k; logs of 200 s sampled every 0.1 s (jumps shared every
/// 10 s plus a few of each unit's own), a 20 s window, and μ_req set to
/// `mu_fraction` times the median level of the full-rank units.
///
/// # Panics
/// Never for n ≥ 2.
pub fn problem(n: usize, k: usize, mu_fraction: f64) -> Problem {
    let m = DESIGN[k % DESIGN.len()];
    let mut rng = Rng(0x00FA_4117 ^ ((n as u64) << 20) ^ (k as u64 + 1).wrapping_mul(0x9E37_79B9));
    let p = m.p;
    let theta: Vec<f64> = [1.0, -0.5, 0.25, 2.0, -1.5, 0.75][..p].to_vec();
    let shared: Vec<f64> = (1..20).map(|j| 10.0 * j as f64).collect();
    let pos = positions(m.layout, n, &mut rng);
    let mix = if m.sparse { SPARSE_MIX } else { STANDARD_MIX };
    let mut nodes = Vec::with_capacity(n);
    let mut classes = Vec::with_capacity(n);
    for (j, &at) in pos.iter().enumerate() {
        let (class, signal) = unit_signal(&mut rng, mix, p, 0.1, &shared);
        let id = format!("u{j:05}");
        nodes.push(Node {
            log: signal.log(p, &theta, PathBuf::from(format!("{id}.csv"))),
            id,
            position: Some(at),
            lat_lon: None,
            max_links: None,
        });
        classes.push(class);
    }
    let pairs = candidate_pairs(&pos, m.degree);
    // At most one installed link per unit: installed links are kept, and
    // more could break a unit's in-degree limit of the gain condition.
    let mut has_installed = vec![false; n];
    let links: Vec<Link> = pairs
        .iter()
        .map(|&(d, a, b)| {
            let cost = match m.cost {
                Linear => 500.0 + 300.0 * d,
                Quadratic => 800.0 + 150.0 * d * d,
                Random => rng.range(400.0, 4000.0),
            }
            .round();
            let one_way = rng.uniform() < m.one_way;
            let installed = rng.uniform() < m.installed && !has_installed[a] && !has_installed[b];
            if installed {
                has_installed[a] = true;
                has_installed[b] = true;
            }
            let (na, nb) = (NodeId(a as u32), NodeId(b as u32));
            let (ends, id) = if one_way && rng.below(2) == 0 {
                (
                    Ends::OneWay { from: na, to: nb },
                    format!("{}->{}", nodes[a].id, nodes[b].id),
                )
            } else if one_way {
                (
                    Ends::OneWay { from: nb, to: na },
                    format!("{}->{}", nodes[b].id, nodes[a].id),
                )
            } else {
                (
                    Ends::TwoWay(na, nb),
                    format!("{}<->{}", nodes[a].id, nodes[b].id),
                )
            };
            Link {
                id,
                ends,
                cost,
                weight: 1.0,
                installed,
                required: false,
                generated: true,
            }
        })
        .collect();
    // The pieces of the two-way candidates: a one-way link on a joining
    // pair would leave a unit that only talks as a source of its own.
    let links = join_two_way(links, &pos, &nodes);
    with_required_excitation(
        format!("family n={n} member={k} ({})", describe(k)),
        "family.toml",
        p,
        (nodes, &classes, links),
        mu_fraction,
        // No full-rank unit: a quarter of the pooled level of all units.
        |table| {
            let all: Vec<NodeId> = (0..n as u32).map(NodeId).collect();
            table.level(&all).value / 4.0
        },
    )
}

/// Turns one-way links back into two-way ones (cheapest first) until the
/// two-way candidates connect every unit, so that every candidate set's
/// source components can be excited when all links are used.
fn join_two_way(mut links: Vec<Link>, pos: &[[f64; 2]], nodes: &[Node]) -> Vec<Link> {
    let n = pos.len();
    let mut piece: Vec<usize> = (0..n).collect();
    let mut pieces = n;
    for l in &links {
        if let Ends::TwoWay(a, b) = l.ends
            && join(&mut piece, a.index(), b.index())
        {
            pieces -= 1;
        }
    }
    if pieces == 1 {
        return links;
    }
    let mut order: Vec<usize> = (0..links.len())
        .filter(|&i| matches!(links[i].ends, Ends::OneWay { .. }))
        .collect();
    order.sort_by(|&x, &y| links[x].cost.total_cmp(&links[y].cost).then(x.cmp(&y)));
    for i in order {
        let Ends::OneWay { from, to } = links[i].ends else {
            continue;
        };
        if join(&mut piece, from.index(), to.index()) {
            let (a, b) = (from.index().min(to.index()), from.index().max(to.index()));
            links[i].ends = Ends::TwoWay(NodeId(a as u32), NodeId(b as u32));
            links[i].id = format!("{}<->{}", nodes[a].id, nodes[b].id);
            pieces -= 1;
            if pieces == 1 {
                break;
            }
        }
    }
    links
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn members_are_feasible_and_vary() {
        for (k, m) in DESIGN.iter().enumerate() {
            let problem = problem(30, k, 0.03);
            assert_eq!(problem.settings.parameters, m.p);
            // Every unit can be reached: all candidates make one source
            // component, so a plan exists.
            let table = crate::ExcitationTable::build(&problem);
            assert!(
                table.sources_excited(&problem, &problem.all_links()),
                "member {k}"
            );
            let plan = crate::plan::plan(
                &problem,
                &table,
                &crate::plan::Options {
                    node_limit: Some(0),
                    progress: crate::progress::Sink::silent(),
                    ..Default::default()
                },
            );
            assert!(plan.cost.is_some(), "member {k}: {:?}", plan.shortfalls);
            let degree = 2.0 * problem.links.len() as f64 / 30.0;
            assert!(degree >= m.degree - 0.1, "member {k}: degree {degree}");
            let one_way = problem
                .links
                .iter()
                .filter(|l| matches!(l.ends, Ends::OneWay { .. }))
                .count();
            assert_eq!(one_way == 0, m.one_way == 0.0, "member {k}");
        }
    }
}
