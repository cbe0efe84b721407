//! The chosen digraph in Graphviz DOT (an open format): one node per unit,
//! one edge per chosen link (`dir=both` for two-way links), costs and
//! installed flags as attributes, every source component as a cluster.

use super::map::Scene;
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
    let _ = writeln!(out, "digraph {} {{", quote(&scene.network));
    let _ = writeln!(
        out,
        "  graph [label={}, labelloc=t];",
        quote(&format!(
            "{}: {} chosen link(s), cost {:.2}",
            scene.network,
            chosen.len(),
            scene.cost
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
            "    label={}; style={}; excitation=\"{:.6e}\"; excited={};",
            quote(&format!(
                "source component S{}: level {:.3e}{}",
                k + 1,
                c.level,
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
                format!(", pos=\"{x:.3},{y:.3}!\"")
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
            quote(&format!("{:.2}", l.cost)),
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
