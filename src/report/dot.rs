//! The chosen digraph in Graphviz DOT (an open format): one node per unit,
//! one edge per chosen link (`dir=both` for two-way links), costs and
//! installed flags as attributes, every source component as a cluster.
//! Positions, when the problem gives them, are pinned `pos` attributes in
//! inches, the unit neato and fdp read by default (Graphviz attribute
//! reference, "pos", graphviz.org/docs/attrs/pos); the file says the scale
//! in a comment. The cautions head the file as comments.

use super::CAUTIONS;
use super::map::Scene;
use super::number::{self as num, Round};
use std::fmt::Write as _;

fn quote(s: &str) -> String {
    let mut out = String::from("\"");
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// Renders the chosen digraph of a scene as DOT.
pub fn dot(scene: &Scene) -> String {
    let mut out = String::new();
    let chosen: Vec<_> = scene.links.iter().filter(|l| l.chosen).collect();
    for c in CAUTIONS {
        let _ = writeln!(out, "// Caution: {c}");
    }
    // Positions in km → inches so the widest extent is 10 inches.
    let span = if scene.geographic {
        let (xs, ys): (Vec<f64>, Vec<f64>) = scene.positions.iter().copied().unzip();
        let extent = |v: &[f64]| {
            v.iter().copied().fold(f64::NEG_INFINITY, f64::max)
                - v.iter().copied().fold(f64::INFINITY, f64::min)
        };
        extent(&xs).max(extent(&ys))
    } else {
        0.0
    };
    let km_per_inch = if span > 0.0 { span / 10.0 } else { 1.0 };
    if scene.geographic {
        let _ = writeln!(
            out,
            "// pos: the units' positions in inches, 1 inch = {} km (the widest extent drawn 10 inches wide); `neato -Tsvg` keeps them (pinned with !)",
            num::sig(km_per_inch, 6, Round::Nearest)
        );
    }
    let _ = writeln!(out, "digraph {} {{", quote(&scene.network));
    let _ = writeln!(
        out,
        "  graph [label={}, labelloc=t];",
        quote(&format!(
            "{}: {} chosen, cost {}",
            scene.network,
            num::count(chosen.len(), "link", "links"),
            num::cost(scene.cost, Round::Nearest)
        ))
    );
    let _ = writeln!(out, "  node [shape=circle, fontname=\"sans-serif\"];");
    let mut in_component = vec![None; scene.units.len()];
    for (k, c) in scene.components.iter().enumerate() {
        for &u in &c.units {
            in_component[u] = Some(k);
        }
        let _ = writeln!(
            out,
            "  subgraph {} {{",
            quote(&format!("cluster_S{}", k + 1))
        );
        let _ = writeln!(
            out,
            "    label={}; style={}; excitation=\"{:e}\"; excited={};",
            quote(&format!(
                "source component S{}: level {}{}",
                k + 1,
                num::level_vs(c.level, scene.min_excitation),
                if c.excited { "" } else { ", NOT excited" }
            )),
            if c.excited { "solid" } else { "dashed" },
            c.level,
            c.excited
        );
        for &u in &c.units {
            let _ = writeln!(out, "    {};", quote(&scene.units[u]));
        }
        let _ = writeln!(out, "  }}");
    }
    for (k, id) in scene.units.iter().enumerate() {
        let (x, y) = scene.positions[k];
        let _ = writeln!(
            out,
            "  {} [style={}, excited_alone={}, component={}{}];",
            quote(id),
            if scene.excited_alone[k] {
                "filled"
            } else {
                "solid"
            },
            scene.excited_alone[k],
            in_component[k].map_or("\"\"".to_string(), |c| quote(&format!("S{}", c + 1))),
            if scene.geographic {
                format!(", pos=\"{:.4},{:.4}!\"", x / km_per_inch, y / km_per_inch)
            } else {
                String::new()
            }
        );
    }
    for l in chosen {
        let _ = writeln!(
            out,
            "  {} -> {} [id={}, label={}, cost=\"{:.2}\", two_way={}, installed={}{}{}];",
            quote(&scene.units[l.a]),
            quote(&scene.units[l.b]),
            quote(&l.id),
            quote(&num::cost(l.cost, Round::Nearest)),
            l.cost,
            l.two_way,
            l.installed,
            if l.two_way { ", dir=both" } else { "" },
            if l.installed { ", style=bold" } else { "" }
        );
    }
    out.push_str("}\n");
    out
}
