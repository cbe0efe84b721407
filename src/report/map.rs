//! The map of a link set as SVG: units at their positions (or on a circle
//! when positions are missing), candidate links faint, chosen links bold
//! (arrows for one-way links, a hollow double line for installed ones),
//! every source component as a halo around its units and inner links with
//! its excitation level, units not
//! excited alone drawn hollow, a legend and a scale bar in km. Everything
//! is black, white and greys, so it prints in greyscale.

use super::number::{self as num_fmt, Round};
use super::svg::{Svg, num, s};
use crate::analysis;
use crate::excitation::ExcitationTable;
use crate::problem::{Ends, LinkSet, NodeId, Problem};
use std::f64::consts::PI;

/// What a picture shows, independent of the format.
#[derive(Debug, Clone)]
pub struct Scene {
    /// Network name.
    pub network: String,
    /// Unit ids.
    pub units: Vec<String>,
    /// Position of each unit (km, or a schematic circle).
    pub positions: Vec<(f64, f64)>,
    /// True when the positions come from the problem file.
    pub geographic: bool,
    /// Each unit is excited on its own.
    pub excited_alone: Vec<bool>,
    /// Candidate links.
    pub links: Vec<SceneLink>,
    /// Source components of the chosen links.
    pub components: Vec<SceneComponent>,
    /// Cost of the chosen links.
    pub cost: f64,
    /// μ_req in use.
    pub min_excitation: f64,
}

/// A link in a scene.
#[derive(Debug, Clone)]
pub struct SceneLink {
    /// Link id.
    pub id: String,
    /// First end (talker of a one-way link).
    pub a: usize,
    /// Second end (listener of a one-way link).
    pub b: usize,
    /// Both ends listen.
    pub two_way: bool,
    /// In the link set.
    pub chosen: bool,
    /// Already in place.
    pub installed: bool,
    /// Cost.
    pub cost: f64,
}

/// A source component in a scene.
#[derive(Debug, Clone)]
pub struct SceneComponent {
    /// Unit indexes.
    pub units: Vec<usize>,
    /// Joint excitation level.
    pub level: f64,
    /// Level ≥ μ_req.
    pub excited: bool,
}

impl Scene {
    /// The scene of `set` on `problem`.
    pub fn new(problem: &Problem, table: &ExcitationTable, set: &LinkSet) -> Self {
        let n = problem.n();
        let geographic = problem.nodes.iter().all(|v| v.position.is_some());
        let positions: Vec<(f64, f64)> = if geographic {
            problem
                .nodes
                .iter()
                .map(|v| {
                    let p = v.position.unwrap_or_default();
                    (p[0], p[1])
                })
                .collect()
        } else {
            // Schematic: a circle in file order, starting at the top.
            let r = (n as f64 / (2.0 * PI)).max(1.0);
            (0..n)
                .map(|k| {
                    let a = PI / 2.0 - 2.0 * PI * k as f64 / n as f64;
                    (r * a.cos(), r * a.sin())
                })
                .collect()
        };
        let check = analysis::check(problem, table, set);
        let components = check
            .source_components
            .iter()
            .map(|c| SceneComponent {
                units: c
                    .nodes
                    .iter()
                    .filter_map(|id| problem.node_id(id).map(|v| v.index()))
                    .collect(),
                level: c.excitation,
                excited: c.excited,
            })
            .collect();
        let links = problem
            .links
            .iter()
            .enumerate()
            .map(|(k, l)| {
                let (a, b, two_way) = match l.ends {
                    Ends::TwoWay(a, b) => (a, b, true),
                    Ends::OneWay { from, to } => (from, to, false),
                };
                SceneLink {
                    id: l.id.clone(),
                    a: a.index(),
                    b: b.index(),
                    two_way,
                    chosen: set.ids().iter().any(|x| x.index() == k),
                    installed: l.installed,
                    cost: if l.installed { 0.0 } else { l.cost },
                }
            })
            .collect();
        Scene {
            network: problem.settings.name.clone(),
            units: problem.nodes.iter().map(|v| v.id.clone()).collect(),
            positions,
            geographic,
            excited_alone: (0..n as u32)
                .map(|v| table.is_excited(&[NodeId(v)]))
                .collect(),
            links,
            components,
            cost: problem.cost(set),
            min_excitation: table.min_excitation(),
        }
    }
}

/// A "nice" scale-bar length (1, 2 or 5 × 10^k) near `target`.
fn nice(target: f64) -> f64 {
    let e = 10f64.powf(target.log10().floor());
    let m = target / e;
    let f = if m < 1.5 {
        1.0
    } else if m < 3.5 {
        2.0
    } else if m < 7.5 {
        5.0
    } else {
        10.0
    };
    f * e
}

/// Side of the plot area for up to 40 units (px); larger networks get
/// more room (√n growth, so the density of labels stays about the same).
const PLOT: f64 = 640.0;
const MARGIN: f64 = 50.0;
const UNIT_R: f64 = 6.0;
/// Font size of unit labels and component tags (px).
const LABEL: f64 = 11.0;
/// Width of one character as a share of the font size: a safe estimate
/// for sans-serif text (digits and most letters are narrower), used for
/// every text box placed here.
pub const CHAR_WIDTH: f64 = 0.6;

/// An axis-aligned box (left, top, right, bottom) in px.
type Rect = (f64, f64, f64, f64);

/// The box of `text` written at `(x, baseline)` with font `size`.
pub fn text_box(x: f64, baseline: f64, size: f64, text: &str) -> Rect {
    (
        x,
        baseline - 0.8 * size,
        x + CHAR_WIDTH * size * text.chars().count() as f64,
        baseline + 0.25 * size,
    )
}

fn overlaps(a: &Rect, b: &Rect) -> bool {
    a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
}

/// Places labels without overlaps: each label tries positions around its
/// anchor point and takes the first whose box meets no box placed so far
/// (labels and unit circles).
struct Placer {
    taken: Vec<Rect>,
    /// Boxes may not reach left of this or above `top` (the canvas edge
    /// and the title).
    left: f64,
    top: f64,
}

impl Placer {
    /// The first free baseline position for `text` around `p` (right,
    /// left, above, below, then diagonals further out), or `None`.
    fn place(&mut self, p: (f64, f64), size: f64, text: &str) -> Option<(f64, f64)> {
        let w = CHAR_WIDTH * size * text.chars().count() as f64;
        let r = UNIT_R + 2.0;
        let candidates = [
            (p.0 + r, p.1 - r + 0.3 * size),
            (p.0 + r, p.1 + r + 0.6 * size),
            (p.0 - r - w, p.1 - r + 0.3 * size),
            (p.0 - r - w, p.1 + r + 0.6 * size),
            (p.0 - w / 2.0, p.1 - r - 0.3 * size),
            (p.0 - w / 2.0, p.1 + r + 0.9 * size),
            (p.0 + r, p.1 + 0.35 * size),
            (p.0 - r - w, p.1 + 0.35 * size),
            (p.0 + r + 8.0, p.1 - r - 0.9 * size),
            (p.0 - r - w - 8.0, p.1 + r + 1.5 * size),
        ];
        let found = candidates.iter().copied().find(|&(x, y)| {
            let b = text_box(x, y, size, text);
            b.0 >= self.left && b.1 >= self.top && !self.taken.iter().any(|o| overlaps(&b, o))
        })?;
        self.taken.push(text_box(found.0, found.1, size, text));
        Some(found)
    }
}

/// Renders the map.
// Long function: One drawing, layer by layer (halos, links, units, labels, legend, scale), all
// in the same coordinate frame and label boxes.
pub fn svg(scene: &Scene) -> String {
    let n = scene.units.len();
    let (mut x0, mut x1, mut y0, mut y1) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    for &(x, y) in &scene.positions {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    if !x0.is_finite() {
        (x0, x1, y0, y1) = (0.0, 1.0, 0.0, 1.0);
    }
    let side = (PLOT * (n as f64 / 40.0).sqrt().max(1.0)).min(2400.0);
    let span = (x1 - x0).max(y1 - y0).max(1e-9);
    // A long, thin network keeps about the area of a square one: its long
    // side grows with the square root of the aspect ratio (at most 3000 px),
    // so the units do not crowd into a strip.
    let short = (x1 - x0).min(y1 - y0).max(span * 1e-6);
    let long_px = (side * (span / short).sqrt()).min(3000.0).max(side);
    let scale = long_px / span;
    let top = MARGIN + 30.0;
    let at = |k: usize| {
        let (x, y) = scene.positions[k];
        (MARGIN + (x - x0) * scale, top + (y1 - y) * scale)
    };
    let (plot_w, plot_h) = ((x1 - x0) * scale, (y1 - y0) * scale);
    let points: Vec<(f64, f64)> = (0..n).map(at).collect();

    // Halo radius: at most 17 px, and below half the distance between
    // units of different source components, so halos of neighbours do not
    // merge (at least 9 px, so a halo stays visible around a unit).
    let mut component_of = vec![usize::MAX; n];
    for (k, c) in scene.components.iter().enumerate() {
        for &u in &c.units {
            component_of[u] = k;
        }
    }
    let mut halo: f64 = 17.0;
    if n <= 3000 {
        for a in 0..n {
            for b in a + 1..n {
                if component_of[a] != component_of[b] {
                    let d = ((points[a].0 - points[b].0).powi(2)
                        + (points[a].1 - points[b].1).powi(2))
                    .sqrt();
                    halo = halo.min(0.45 * d);
                }
            }
        }
    }
    let halo = halo.max(9.0);

    // Labels: unit circles are obstacles, then every unit's label, then
    // a short tag per source component (S1, S2…) beside one of its units.
    let mut placer = Placer {
        left: 2.0,
        top: 40.0,
        taken: points
            .iter()
            .map(|p| {
                (
                    p.0 - UNIT_R - 1.0,
                    p.1 - UNIT_R - 1.0,
                    p.0 + UNIT_R + 1.0,
                    p.1 + UNIT_R + 1.0,
                )
            })
            .collect(),
    };
    let unit_labels: Vec<Option<(f64, f64)>> = (0..n)
        .map(|k| placer.place(points[k], LABEL, &scene.units[k]))
        .collect();
    let tags: Vec<Option<(f64, f64)>> = scene
        .components
        .iter()
        .enumerate()
        .map(|(k, c)| {
            let tag = format!("S{}", k + 1);
            // The topmost unit first, then the others.
            let mut order = c.units.clone();
            order.sort_by(|&a, &b| points[a].1.total_cmp(&points[b].1).then(a.cmp(&b)));
            order
                .iter()
                .find_map(|&u| placer.place(points[u], LABEL, &tag))
        })
        .collect();
    let left_out = unit_labels.iter().filter(|l| l.is_none()).count()
        + tags.iter().filter(|t| t.is_none()).count();
    let drawn_right = placer
        .taken
        .iter()
        .map(|b| b.2)
        .fold(MARGIN + plot_w, f64::max);
    let drawn_bottom = placer
        .taken
        .iter()
        .map(|b| b.3)
        .fold(top + plot_h, f64::max);

    // Legend and the list of source components: beside the drawing, or
    // below it when the network is long and thin.
    let rows = legend_rows(scene, left_out);
    let below = plot_w > 2.0 * plot_h.max(1.0);
    // Columns of at most this height (px), so a long list of components
    // does not run far below the drawing.
    let column_h = if below {
        640.0
    } else {
        (plot_h + 40.0).max(640.0)
    };
    let columns = split_columns(rows, column_h);
    let widths: Vec<f64> = columns
        .iter()
        .map(|c| {
            c.iter()
                .map(|r| r.indent + CHAR_WIDTH * r.size * r.text.chars().count() as f64)
                .fold(0.0, f64::max)
                + 20.0
        })
        .collect();
    let legend_w: f64 = widths.iter().sum();
    let legend_h = columns
        .iter()
        .map(|c| c.iter().map(|r| r.height).sum::<f64>())
        .fold(0.0, f64::max)
        + 20.0;
    let (lx, ly) = if below {
        (MARGIN, drawn_bottom + 60.0)
    } else {
        (drawn_right + 30.0, top)
    };
    let scale_y = if below {
        drawn_bottom + 30.0
    } else {
        drawn_bottom + 36.0
    };
    let title = format!(
        "{}: {} chosen, cost {}",
        scene.network,
        num_fmt::count(
            scene.links.iter().filter(|l| l.chosen).count(),
            "link",
            "links"
        ),
        num_fmt::cost(scene.cost, Round::Nearest)
    );
    let title_w = CHAR_WIDTH * 17.0 * title.chars().count() as f64;
    let width = (lx + legend_w + 20.0)
        .max(MARGIN + title_w + 20.0)
        .max(drawn_right + 20.0);
    let height = (ly + legend_h + 20.0).max(scale_y + 20.0);
    let mut doc = Svg::new(width, height);
    doc.raw(
        "<defs><marker id=\"arrow\" viewBox=\"0 0 10 10\" refX=\"10\" refY=\"5\" markerUnits=\"userSpaceOnUse\" markerWidth=\"11\" markerHeight=\"11\" orient=\"auto-start-reverse\"><path d=\"M 0 0 L 10 5 L 0 10 z\" fill=\"#000\"/></marker></defs>",
    );
    doc.element(
        "rect",
        &[
            s("x", "0"),
            s("y", "0"),
            s("width", num(width)),
            s("height", num(height)),
            s("fill", "#ffffff"),
        ],
    );
    doc.text((MARGIN, 28.0), 17.0, &title, &[s("font-weight", "bold")]);
    // Source components: a halo around their units and the chosen links
    // inside them (so units outside are never covered), an outline pass
    // first and a fill pass on top; not excited ones dashed.
    for pass in [0, 1] {
        let w = if pass == 0 {
            2.0 * halo + 4.0
        } else {
            2.0 * halo
        };
        for c in &scene.components {
            let colour = match (pass, c.excited) {
                (0, true) => "#666666",
                (0, false) => "#000000",
                (_, true) => "#e6e6e6",
                (_, false) => "#ffffff",
            };
            let inside = |u: usize| c.units.contains(&u);
            for l in scene
                .links
                .iter()
                .filter(|l| l.chosen && inside(l.a) && inside(l.b))
            {
                doc.line(
                    points[l.a],
                    points[l.b],
                    &[
                        s("stroke", colour),
                        s("stroke-width", num(w)),
                        s("stroke-linecap", "round"),
                    ],
                );
            }
            for &u in &c.units {
                doc.circle(points[u], w / 2.0, &[s("fill", colour)]);
            }
        }
    }
    // Candidates first (faint), then chosen links on top; parallel chosen
    // links between the same two units are drawn side by side.
    for l in scene.links.iter().filter(|l| !l.chosen) {
        doc.line(
            points[l.a],
            points[l.b],
            &[s("stroke", "#c8c8c8"), s("stroke-width", "1")],
        );
    }
    let chosen: Vec<&SceneLink> = scene.links.iter().filter(|l| l.chosen).collect();
    let pair = |l: &SceneLink| (l.a.min(l.b), l.a.max(l.b));
    for (k, l) in chosen.iter().enumerate() {
        let same: Vec<usize> = (0..chosen.len())
            .filter(|&j| pair(chosen[j]) == pair(l))
            .collect();
        let slot = same.iter().position(|&j| j == k).unwrap_or(0) as f64;
        let offset = 6.0 * (slot - (same.len() as f64 - 1.0) / 2.0);
        // The normal of the pair's own direction (lower index to higher),
        // so both links of a pair agree on the side.
        let (lo, hi) = pair(l);
        let (pa, pb) = (points[lo], points[hi]);
        let len = ((pb.0 - pa.0).powi(2) + (pb.1 - pa.1).powi(2))
            .sqrt()
            .max(1e-9);
        let normal = (-(pb.1 - pa.1) / len * offset, (pb.0 - pa.0) / len * offset);
        let (a, b) = (points[l.a], points[l.b]);
        let (a, b) = (
            (a.0 + normal.0, a.1 + normal.1),
            (b.0 + normal.0, b.1 + normal.1),
        );
        let (a2, b2) = if l.two_way {
            (a, b)
        } else {
            let d = UNIT_R + 2.0;
            (
                a,
                (b.0 - (b.0 - a.0) / len * d, b.1 - (b.1 - a.1) / len * d),
            )
        };
        let mut style = vec![
            s("stroke", "#000000"),
            s("stroke-width", if l.installed { "5" } else { "2.5" }),
        ];
        if !l.two_way {
            style.push(s("marker-end", "url(#arrow)"));
        }
        doc.line(a2, b2, &style);
        if l.installed {
            doc.line(a2, b2, &[s("stroke", "#ffffff"), s("stroke-width", "1.6")]);
        }
    }
    for (k, p) in points.iter().enumerate() {
        doc.circle(
            *p,
            UNIT_R,
            &[
                s(
                    "fill",
                    if scene.excited_alone[k] {
                        "#000000"
                    } else {
                        "#ffffff"
                    },
                ),
                s("stroke", "#000000"),
                s("stroke-width", "1.5"),
            ],
        );
    }
    for (k, at) in unit_labels.iter().enumerate() {
        if let Some(at) = at {
            doc.text(*at, LABEL, &scene.units[k], &[]);
        }
    }
    for (k, at) in tags.iter().enumerate() {
        if let Some(at) = at {
            let mut style = vec![s("font-weight", "bold")];
            if !scene.components[k].excited {
                style.push(s("text-decoration", "underline"));
            }
            doc.text(*at, LABEL, &format!("S{}", k + 1), &style);
        }
    }
    // Scale bar (geographic) or a note (schematic).
    if scene.geographic {
        let km = nice(span / 5.0);
        let px = km * scale;
        doc.line(
            (MARGIN, scale_y),
            (MARGIN + px, scale_y),
            &[s("stroke", "#000000"), s("stroke-width", "2")],
        );
        for x in [MARGIN, MARGIN + px] {
            doc.line(
                (x, scale_y - 5.0),
                (x, scale_y + 5.0),
                &[s("stroke", "#000000"), s("stroke-width", "1.5")],
            );
        }
        doc.text(
            (MARGIN + px + 8.0, scale_y + 4.0),
            12.0,
            &format!("{} km", num_fmt::sig(km, 3, Round::Nearest)),
            &[],
        );
    } else {
        doc.text(
            (MARGIN, scale_y + 4.0),
            12.0,
            "schematic layout: the problem gives no positions",
            &[s("fill", "#333333")],
        );
    }
    doc.element(
        "rect",
        &[
            s("x", num(lx)),
            s("y", num(ly)),
            s("width", num(legend_w)),
            s("height", num(legend_h)),
            s("fill", "#ffffff"),
            s("stroke", "#000000"),
        ],
    );
    let mut x = lx;
    for (c, w) in columns.iter().zip(&widths) {
        legend(&mut doc, c, x, ly);
        x += w;
    }
    doc.finish(&format!("{}: link map", scene.network))
}

/// One row of the legend panel.
struct Row {
    /// What the row shows beside its text.
    sample: Sample,
    text: String,
    size: f64,
    /// Left edge of the text from the panel's left edge.
    indent: f64,
    height: f64,
    bold: bool,
}

#[derive(Clone, Copy)]
enum Sample {
    None,
    Candidate,
    TwoWay,
    OneWay,
    Installed,
    UnitExcited,
    UnitNot,
    HaloExcited,
    HaloNot,
}

fn legend_rows(scene: &Scene, left_out: usize) -> Vec<Row> {
    let item = |sample, text: &str| Row {
        sample,
        text: text.to_string(),
        size: 11.0,
        indent: 70.0,
        height: 26.0,
        bold: false,
    };
    let note = |text: String, bold: bool| Row {
        sample: Sample::None,
        text,
        size: 10.0,
        indent: 10.0,
        height: 15.0,
        bold,
    };
    let mut rows = vec![
        Row {
            sample: Sample::None,
            text: "Legend".into(),
            size: 13.0,
            indent: 10.0,
            height: 28.0,
            bold: true,
        },
        item(Sample::Candidate, "candidate link"),
        item(Sample::TwoWay, "new link, two-way"),
        item(Sample::OneWay, "new link, one-way (talks →)"),
        item(Sample::Installed, "installed link"),
        item(Sample::UnitExcited, "unit excited alone"),
        item(Sample::UnitNot, "unit not excited alone"),
        item(Sample::HaloExcited, "source component, excited"),
        item(Sample::HaloNot, "source component, NOT excited"),
        note(String::new(), false),
        note(
            "Source components (level = joint excitation μ)".into(),
            true,
        ),
    ];
    for (k, c) in scene.components.iter().enumerate() {
        let mut names: Vec<&str> = c.units.iter().map(|&u| scene.units[u].as_str()).collect();
        let more = names.len().saturating_sub(3);
        names.truncate(3);
        let mut text = format!(
            "S{}: level {}{} — {}",
            k + 1,
            num_fmt::level_vs(c.level, scene.min_excitation),
            if c.excited { "" } else { ", NOT excited" },
            names.join(", ")
        );
        if more > 0 {
            text.push_str(&format!(" and {more} more"));
        }
        rows.push(note(text, !c.excited));
    }
    if left_out > 0 {
        rows.push(note(String::new(), false));
        rows.push(note(
            format!(
                "{} left out where {} overlap",
                num_fmt::count(left_out, "label", "labels"),
                if left_out == 1 {
                    "it would"
                } else {
                    "they would"
                }
            ),
            false,
        ));
    }
    rows
}

/// Splits the legend rows into columns of at most `height` px (a column
/// holds at least one row).
fn split_columns(rows: Vec<Row>, height: f64) -> Vec<Vec<Row>> {
    let mut columns: Vec<Vec<Row>> = vec![Vec::new()];
    let mut used = 0.0;
    for r in rows {
        let last = columns.len() - 1;
        if used + r.height > height && !columns[last].is_empty() {
            columns.push(Vec::new());
            used = 0.0;
        }
        used += r.height;
        let last = columns.len() - 1;
        columns[last].push(r);
    }
    columns
}

/// Draws one column of legend rows from `(x, y)`.
fn legend(doc: &mut Svg, rows: &[Row], x: f64, y: f64) {
    let mut top = y + 10.0;
    let (a, b) = (x + 10.0, x + 50.0);
    for r in rows {
        let mid = top + r.height / 2.0;
        match r.sample {
            Sample::None => {}
            Sample::Candidate => doc.line(
                (a, mid),
                (b, mid),
                &[s("stroke", "#c8c8c8"), s("stroke-width", "1")],
            ),
            Sample::TwoWay => doc.line(
                (a, mid),
                (b, mid),
                &[s("stroke", "#000000"), s("stroke-width", "2.5")],
            ),
            Sample::OneWay => doc.line(
                (a, mid),
                (b, mid),
                &[
                    s("stroke", "#000000"),
                    s("stroke-width", "2.5"),
                    s("marker-end", "url(#arrow)"),
                ],
            ),
            Sample::Installed => {
                doc.line(
                    (a, mid),
                    (b, mid),
                    &[s("stroke", "#000000"), s("stroke-width", "5")],
                );
                doc.line(
                    (a, mid),
                    (b, mid),
                    &[s("stroke", "#ffffff"), s("stroke-width", "1.6")],
                );
            }
            Sample::UnitExcited | Sample::UnitNot => doc.circle(
                (a + 20.0, mid),
                UNIT_R,
                &[
                    s(
                        "fill",
                        if matches!(r.sample, Sample::UnitExcited) {
                            "#000000"
                        } else {
                            "#ffffff"
                        },
                    ),
                    s("stroke", "#000000"),
                    s("stroke-width", "1.5"),
                ],
            ),
            Sample::HaloExcited | Sample::HaloNot => {
                let (fill, stroke) = if matches!(r.sample, Sample::HaloExcited) {
                    ("#e6e6e6", "#666666")
                } else {
                    ("#ffffff", "#000000")
                };
                doc.element(
                    "rect",
                    &[
                        s("x", num(a)),
                        s("y", num(mid - 9.0)),
                        s("width", "40"),
                        s("height", "18"),
                        s("rx", "9"),
                        s("fill", fill),
                        s("stroke", stroke),
                        s("stroke-width", "2"),
                    ],
                );
            }
        }
        if !r.text.is_empty() {
            let mut style = Vec::new();
            if r.bold {
                style.push(s("font-weight", "bold"));
            }
            doc.text((x + r.indent, mid + 0.35 * r.size), r.size, &r.text, &style);
        }
        top += r.height;
    }
}
