//! Maps, DOT files and the HTML report: they parse with general-purpose
//! parsers (roxmltree for XML, html5ever through scraper for HTML5), hold
//! every chosen link and unit, and are byte-identical across runs.

use super::fixtures::{Folder, exmesh, small_problem_with_plan};

fn pictures(folder: &Folder) -> (String, String) {
    let run = exmesh(
        folder.dir.path(),
        &[
            "check",
            "problem.toml",
            "--plan",
            "plan.json",
            "--skip-rate",
            "--svg",
            "map.svg",
            "--dot",
            "map.dot",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    (
        std::fs::read_to_string(folder.path("map.svg")).unwrap(),
        std::fs::read_to_string(folder.path("map.dot")).unwrap(),
    )
}

#[test]
fn map_and_dot_parse_and_hold_every_link() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let (svg, dot) = pictures(&folder);
    // The SVG is well-formed XML in the SVG namespace, with one circle per
    // unit label and the legend and scale note.
    let doc = roxmltree::Document::parse(&svg).expect("SVG parses as XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(
        root.tag_name().namespace(),
        Some("http://www.w3.org/2000/svg")
    );
    let texts: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(str::to_string))
        .collect();
    for unit in ["a", "b", "c"] {
        assert!(texts.iter().any(|t| t == unit), "unit {unit} labelled");
    }
    assert!(texts.iter().any(|t| t == "Legend"));
    // No positions in the small problem: the schematic note replaces the
    // scale bar.
    assert!(texts.iter().any(|t| t.contains("schematic layout")));
    // DOT: every unit is a node, every chosen link an edge, nothing else.
    for unit in ["\"a\"", "\"b\"", "\"c\""] {
        assert!(
            dot.lines()
                .any(|l| l.trim_start().starts_with(&format!("{unit} ["))),
            "{unit}"
        );
    }
    let edges: Vec<&str> = dot.lines().filter(|l| l.contains(" -> ")).collect();
    assert_eq!(edges.len(), 2);
    assert!(edges.iter().any(|l| l.contains("\"a\" -> \"b\"")
        && l.contains("dir=both")
        && l.contains("installed=true")));
    assert!(
        edges
            .iter()
            .any(|l| l.contains("\"b\" -> \"c\"") && !l.contains("dir=both"))
    );
    assert!(dot.starts_with("digraph \"three units\" {") && dot.trim_end().ends_with('}'));
    // Balanced braces and quotes: a cheap well-formedness check of the DOT text.
    assert_eq!(dot.matches('{').count(), dot.matches('}').count());
    assert_eq!(dot.matches('"').count() % 2, 0);
    // Deterministic bytes.
    let (svg2, dot2) = pictures(&folder);
    assert_eq!(svg, svg2);
    assert_eq!(dot, dot2);
}

#[test]
fn map_of_a_demo_has_a_scale_bar() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let folder = Folder::new();
    let out = folder.path("map.svg");
    let run = exmesh(
        root,
        &[
            "check",
            "problems/plateau-masts/problem.toml",
            "--installed",
            "--skip-rate",
            "--svg",
            out.to_str().unwrap(),
        ],
    );
    assert_eq!(run.code, 1, "{}", run.stderr);
    let svg = std::fs::read_to_string(&out).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("SVG parses as XML");
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .collect();
    assert!(texts.iter().any(|t| t.ends_with(" km")), "scale bar");
    assert!(texts.iter().any(|t| t.contains("NOT excited")));
}

#[test]
fn report_is_self_contained_html5() {
    let folder = Folder::new();
    small_problem_with_plan(&folder);
    let dir = folder.dir.path();
    let args = [
        "report",
        "problem.toml",
        "--plan",
        "plan.json",
        "--out",
        "report.html",
        "--truth",
        "1,2",
        "--front",
    ];
    let run = exmesh(dir, &args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let html = std::fs::read_to_string(folder.path("report.html")).unwrap();
    let doc = scraper::Html::parse_document(&html);
    assert!(
        doc.errors.is_empty(),
        "HTML5 parse errors: {:?}",
        doc.errors
    );
    let sel = |s: &str| scraper::Selector::parse(s).unwrap();
    assert_eq!(doc.select(&sel("head > title")).count(), 1);
    // Three inline figures (map, errors, front), nothing external.
    assert_eq!(doc.select(&sel("svg")).count(), 3);
    assert_eq!(doc.select(&sel("script")).count(), 0);
    assert_eq!(doc.select(&sel("link")).count(), 0);
    assert_eq!(doc.select(&sel("img")).count(), 0);
    let external: Vec<_> = doc
        .select(&sel("[src], [href]"))
        .map(|e| e.value().clone())
        .collect();
    assert!(external.is_empty(), "external references: {external:?}");
    let text: String = doc.root_element().text().collect();
    for link in ["a<->b", "b->c"] {
        assert!(text.contains(link), "link {link} in the report");
    }
    // The certified rate, as `check` reports it.
    let check = exmesh(
        dir,
        &["check", "problem.toml", "--plan", "plan.json", "--json"],
    );
    let v: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
    let rate = v["certificate"]["rate"].as_f64().unwrap();
    assert!(
        text.contains(&format!("{rate:.4e}")),
        "rate {rate:.4e} in the report"
    );
    assert!(text.contains("Cautions"));
    // Deterministic bytes.
    let again = exmesh(dir, &args);
    assert_eq!(again.code, 0);
    assert_eq!(
        html,
        std::fs::read_to_string(folder.path("report.html")).unwrap()
    );
}
