//! The map of a link set as SVG: units at their positions (or on a circle
//! when positions are missing), candidate links faint, chosen links bold
//! (arrows for one-way links, a hollow double line for installed ones),
//! every source component as a halo around its units and inner links with
//! its excitation level, units not
//! excited alone drawn hollow, a legend and a scale bar in km. Everything
//! is black, white and greys, so it prints in greyscale.

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

const PLOT: f64 = 640.0;
const MARGIN: f64 = 50.0;
const LEGEND: f64 = 250.0;
const UNIT_R: f64 = 6.0;

/// Renders the map.
// Long function: One drawing, layer by layer (halos, labels, links, units, scale), all in
// the same coordinate frame and label boxes.
pub fn svg(scene: &Scene) -> String {
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
    let span = (x1 - x0).max(y1 - y0).max(1e-9);
    let scale = PLOT / span;
    let top = MARGIN + 30.0;
    let width = MARGIN * 2.0 + (x1 - x0) * scale + LEGEND;
    let height = (top + (y1 - y0) * scale + MARGIN + 40.0).max(top + 330.0);
    let at = |k: usize| {
        let (x, y) = scene.positions[k];
        (MARGIN + (x - x0) * scale, top + (y1 - y) * scale)
    };
    let mut doc = Svg::new(width, height);
    doc.raw(
        "<defs><marker id=\"arrow\" viewBox=\"0 0 10 10\" refX=\"10\" refY=\"5\" markerWidth=\"7\" markerHeight=\"7\" orient=\"auto-start-reverse\"><path d=\"M 0 0 L 10 5 L 0 10 z\" fill=\"#000\"/></marker></defs>",
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
    let chosen = scene.links.iter().filter(|l| l.chosen).count();
    doc.text(
        (MARGIN, 28.0),
        17.0,
        &format!(
            "{}: {} chosen link(s), cost {:.2}",
            scene.network, chosen, scene.cost
        ),
        &[s("font-weight", "bold")],
    );
    // Source components: a halo around their units and the chosen links
    // inside them (so units outside are never covered), an outline pass
    // first and a fill pass on top.
    for (pass, width) in [(0, 38.0), (1, 34.0)] {
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
                    at(l.a),
                    at(l.b),
                    &[
                        s("stroke", colour),
                        s("stroke-width", num(width)),
                        s("stroke-linecap", "round"),
                    ],
                );
            }
            for &u in &c.units {
                doc.circle(at(u), width / 2.0, &[s("fill", colour)]);
            }
        }
    }
    // Component labels: above the topmost unit, else below the lowest, else
    // beside; the first place that does not overlap a label already placed
    // or a unit's own label (approximate text boxes).
    let mut boxes: Vec<(f64, f64, f64, f64)> = (0..scene.units.len())
        .map(|k| {
            let (x, y) = at(k);
            let w = 6.5 * scene.units[k].chars().count() as f64;
            (x + 8.0, y - 19.0, x + 8.0 + w, y - 6.0)
        })
        .collect();
    let overlaps = |b: &(f64, f64, f64, f64), boxes: &[(f64, f64, f64, f64)]| {
        boxes
            .iter()
            .any(|o| b.0 < o.2 && o.0 < b.2 && b.1 < o.3 && o.1 < b.3)
    };
    for (k, c) in scene.components.iter().enumerate() {
        let label = format!(
            "S{}: level {:.3e}{}",
            k + 1,
            c.level,
            if c.excited { "" } else { " — NOT excited" }
        );
        let width = 6.3 * label.chars().count() as f64;
        let pts: Vec<(f64, f64)> = c.units.iter().map(|&u| at(u)).collect();
        let top = pts
            .iter()
            .fold((0.0, f64::INFINITY), |m, p| if p.1 < m.1 { *p } else { m });
        let bottom = pts.iter().fold(
            (0.0, f64::NEG_INFINITY),
            |m, p| if p.1 > m.1 { *p } else { m },
        );
        let left = pts
            .iter()
            .fold((f64::INFINITY, 0.0), |m, p| if p.0 < m.0 { *p } else { m });
        let right = pts.iter().fold(
            (f64::NEG_INFINITY, 0.0),
            |m, p| if p.0 > m.0 { *p } else { m },
        );
        let candidates = [
            (top.0 - 24.0, top.1 - 24.0),
            (bottom.0 - 24.0, bottom.1 + 34.0),
            (right.0 + 24.0, right.1 + 4.0),
            (left.0 - 24.0 - width, left.1 + 4.0),
            (top.0 - 24.0, top.1 - 38.0),
        ];
        let boxed = |(x, y): (f64, f64)| (x, y - 11.0, x + width, y + 3.0);
        let place = candidates
            .iter()
            .copied()
            .find(|&p| !overlaps(&boxed(p), &boxes))
            .unwrap_or(candidates[0]);
        boxes.push(boxed(place));
        let mut style = vec![s("fill", "#222222")];
        if !c.excited {
            style.push(s("font-weight", "bold"));
        }
        doc.text(place, 11.0, &label, &style);
    }
    // Candidates first (faint), then chosen links on top.
    for l in scene.links.iter().filter(|l| !l.chosen) {
        doc.line(
            at(l.a),
            at(l.b),
            &[s("stroke", "#c8c8c8"), s("stroke-width", "1")],
        );
    }
    for l in scene.links.iter().filter(|l| l.chosen) {
        let (a, b) = (at(l.a), at(l.b));
        let len = ((b.0 - a.0).powi(2) + (b.1 - a.1).powi(2)).sqrt().max(1e-9);
        let shrink =
            |p: (f64, f64), d: f64| (p.0 + (b.0 - a.0) / len * d, p.1 + (b.1 - a.1) / len * d);
        let (a2, b2) = if l.two_way {
            (a, b)
        } else {
            (a, shrink(b, -(UNIT_R + 2.0)))
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
    for (k, id) in scene.units.iter().enumerate() {
        let p = at(k);
        doc.circle(
            p,
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
        doc.text((p.0 + 8.0, p.1 - 8.0), 11.0, id, &[]);
    }
    // Scale bar (geographic) or a note (schematic).
    let base_y = height - 22.0;
    if scene.geographic {
        let km = nice(span / 5.0);
        let px = km * scale;
        doc.line(
            (MARGIN, base_y),
            (MARGIN + px, base_y),
            &[s("stroke", "#000000"), s("stroke-width", "2")],
        );
        for x in [MARGIN, MARGIN + px] {
            doc.line(
                (x, base_y - 5.0),
                (x, base_y + 5.0),
                &[s("stroke", "#000000"), s("stroke-width", "1.5")],
            );
        }
        doc.text(
            (MARGIN + px + 8.0, base_y + 4.0),
            12.0,
            &format!("{km} km"),
            &[],
        );
    } else {
        doc.text(
            (MARGIN, base_y + 4.0),
            12.0,
            "schematic layout: the problem gives no positions",
            &[s("fill", "#333333")],
        );
    }
    legend(&mut doc, width - LEGEND + 10.0, top);
    doc.finish(&format!("{}: link map", scene.network))
}

fn legend(doc: &mut Svg, x: f64, y: f64) {
    doc.element(
        "rect",
        &[
            s("x", num(x)),
            s("y", num(y)),
            s("width", num(LEGEND - 30.0)),
            s("height", "300"),
            s("fill", "#ffffff"),
            s("stroke", "#000000"),
        ],
    );
    doc.text(
        (x + 10.0, y + 20.0),
        13.0,
        "Legend",
        &[s("font-weight", "bold")],
    );
    let row = |k: usize| y + 45.0 + 30.0 * k as f64;
    let (a, b) = (x + 10.0, x + 50.0);
    doc.line(
        (a, row(0)),
        (b, row(0)),
        &[s("stroke", "#c8c8c8"), s("stroke-width", "1")],
    );
    doc.text((b + 10.0, row(0) + 4.0), 11.0, "candidate link", &[]);
    doc.line(
        (a, row(1)),
        (b, row(1)),
        &[s("stroke", "#000000"), s("stroke-width", "2.5")],
    );
    doc.text((b + 10.0, row(1) + 4.0), 11.0, "new link, two-way", &[]);
    doc.line(
        (a, row(2)),
        (b, row(2)),
        &[
            s("stroke", "#000000"),
            s("stroke-width", "2.5"),
            s("marker-end", "url(#arrow)"),
        ],
    );
    doc.text(
        (b + 10.0, row(2) + 4.0),
        11.0,
        "new link, one-way (talks →)",
        &[],
    );
    doc.line(
        (a, row(3)),
        (b, row(3)),
        &[s("stroke", "#000000"), s("stroke-width", "5")],
    );
    doc.line(
        (a, row(3)),
        (b, row(3)),
        &[s("stroke", "#ffffff"), s("stroke-width", "1.6")],
    );
    doc.text((b + 10.0, row(3) + 4.0), 11.0, "installed link", &[]);
    doc.circle(
        (a + 20.0, row(4)),
        UNIT_R,
        &[s("fill", "#000000"), s("stroke", "#000000")],
    );
    doc.text((b + 10.0, row(4) + 4.0), 11.0, "unit excited alone", &[]);
    doc.circle(
        (a + 20.0, row(5)),
        UNIT_R,
        &[
            s("fill", "#ffffff"),
            s("stroke", "#000000"),
            s("stroke-width", "1.5"),
        ],
    );
    doc.text(
        (b + 10.0, row(5) + 4.0),
        11.0,
        "unit not excited alone",
        &[],
    );
    for (k, fill, stroke, label) in [
        (6, "#e6e6e6", "#666666", "source component, excited"),
        (7, "#ffffff", "#000000", "source component, NOT excited"),
    ] {
        doc.element(
            "rect",
            &[
                s("x", num(a)),
                s("y", num(row(k) - 9.0)),
                s("width", "40"),
                s("height", "18"),
                s("rx", "9"),
                s("fill", fill),
                s("stroke", stroke),
                s("stroke-width", "2"),
            ],
        );
        doc.text((b + 10.0, row(k) + 4.0), 11.0, label, &[]);
    }
    doc.text(
        (a, row(8) + 4.0),
        10.0,
        "S#: level = joint excitation μ",
        &[s("fill", "#333333")],
    );
}
