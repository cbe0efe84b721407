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
    // The cautions head the file as `//` comments (valid DOT).
    let body: String = dot
        .lines()
        .filter(|l| !l.starts_with("//"))
        .map(|l| format!("{l}\n"))
        .collect();
    assert!(dot.starts_with("// Caution: "));
    assert!(body.starts_with("digraph \"three units\" {") && body.trim_end().ends_with('}'));
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
    // Printed rounded down to 4 significant digits (a proven figure): the
    // printed number is at most the rate and within 0.1 % of it.
    let shown = exmesh::report::number::rate(rate);
    assert!(text.contains(&shown), "rate {shown} in the report");
    let figure: f64 = shown.split(' ').next().unwrap().parse().unwrap();
    assert!(
        figure <= rate && figure > rate * 0.999,
        "{figure} vs {rate}"
    );
    // Provenance: the files, the horizon, the version and the command.
    for needle in [
        "Provenance",
        "problem.toml",
        "plan.json",
        "logs/a.csv",
        "exmesh report problem.toml --plan plan.json",
    ] {
        assert!(text.contains(needle), "{needle} in the report");
    }
    assert!(text.contains("Cautions"));
    // Deterministic bytes.
    let again = exmesh(dir, &args);
    assert_eq!(again.code, 0);
    assert_eq!(
        html,
        std::fs::read_to_string(folder.path("report.html")).unwrap()
    );
}

/// Text boxes of an SVG drawn by exmesh: every `<text>` with its `x`, `y`
/// (baseline), `font-size` and content, boxed with a fixed character width
/// of 0.6 em (wider than most sans-serif glyphs; common practice for
/// estimating label extents without a font), 0.8 em above the baseline and
/// 0.25 em below. Returns the viewBox size and the boxes.
type TextBox = ((f64, f64, f64, f64), String);

fn text_boxes(svg: &str) -> ((f64, f64), Vec<TextBox>) {
    let doc = roxmltree::Document::parse(svg).expect("SVG parses as XML");
    let root = doc.root_element();
    let vb: Vec<f64> = root
        .attribute("viewBox")
        .expect("viewBox")
        .split_whitespace()
        .map(|v| v.parse().unwrap())
        .collect();
    let mut boxes = Vec::new();
    for t in doc.descendants().filter(|n| n.has_tag_name("text")) {
        let f = |k: &str| t.attribute(k).unwrap().parse::<f64>().unwrap();
        let (x, y, size) = (f("x"), f("y"), f("font-size"));
        let text = t.text().unwrap_or("").to_string();
        let w = 0.6 * size * text.chars().count() as f64;
        let x = match t.attribute("text-anchor") {
            Some("middle") => x - w / 2.0,
            Some("end") => x - w,
            _ => x,
        };
        boxes.push(((x, y - 0.8 * size, x + w, y + 0.25 * size), text));
    }
    ((vb[2], vb[3]), boxes)
}

/// No label leaves the canvas and no two labels overlap.
fn assert_labels_fit(svg: &str, what: &str) {
    let ((w, h), boxes) = text_boxes(svg);
    for (b, t) in &boxes {
        assert!(
            b.0 >= 0.0 && b.1 >= 0.0 && b.2 <= w && b.3 <= h,
            "{what}: `{t}` at {b:?} leaves the {w}×{h} canvas"
        );
    }
    for (i, (a, ta)) in boxes.iter().enumerate() {
        for (b, tb) in &boxes[i + 1..] {
            let overlap = a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3;
            assert!(!overlap, "{what}: `{ta}` {a:?} overlaps `{tb}` {b:?}");
        }
    }
}

#[test]
fn the_detector_sees_overlaps_and_overflow() {
    let svg = |a: &str, b: &str| {
        format!("<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 200 100\">{a}{b}</svg>")
    };
    let t =
        |x: f64, y: f64, s: &str| format!("<text x=\"{x}\" y=\"{y}\" font-size=\"10\">{s}</text>");
    let fits = svg(&t(10.0, 20.0, "abc"), &t(10.0, 40.0, "abc"));
    assert_labels_fit(&fits, "fits");
    let clash = std::panic::catch_unwind(|| {
        assert_labels_fit(&svg(&t(10.0, 20.0, "abcdef"), &t(30.0, 22.0, "x")), "c")
    });
    assert!(clash.is_err(), "overlap found");
    let out = std::panic::catch_unwind(|| {
        assert_labels_fit(&svg(&t(150.0, 20.0, "abcdefghij"), ""), "o")
    });
    assert!(out.is_err(), "overflow found");
}

/// Maps of both demos (plan and installed links: many unexcited
/// components), a 150-unit generated network and a long, thin one (a
/// corridor): every label, the legend and the cautions footer fit on the
/// canvas without overlaps.
#[test]
fn map_labels_fit_and_do_not_overlap() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let folder = Folder::new();
    for (k, demo) in [
        "problems/plateau-masts/problem.toml",
        "problems/delta-substations/problem.toml",
    ]
    .iter()
    .enumerate()
    {
        for which in ["--installed", "--all"] {
            let out = folder.path(&format!("map{k}{which}.svg"));
            let run = exmesh(
                root,
                &[
                    "check",
                    demo,
                    which,
                    "--skip-rate",
                    "--svg",
                    out.to_str().unwrap(),
                ],
            );
            assert!(run.code <= 1, "{}", run.stderr);
            let svg = std::fs::read_to_string(&out).unwrap();
            assert_labels_fit(&svg, &format!("{demo} {which}"));
            assert!(svg.contains("Caution: "), "cautions footer");
        }
    }
    // Stretch 4: x four times, y halved, a corridor 8 times longer than
    // wide.
    for stretch in [1.0, 4.0] {
        let mut problem = exmesh::synth::bench_problem(150, 7, 0.3);
        for node in &mut problem.nodes {
            if let Some(p) = &mut node.position {
                p[0] *= stretch;
                p[1] /= (stretch / 2.0).max(1.0);
            }
        }
        let table = exmesh::ExcitationTable::build(&problem);
        let options = exmesh::plan::Options {
            time_limit: Some(std::time::Duration::from_millis(300)),
            ..Default::default()
        };
        let plan = exmesh::plan::plan(&problem, &table, &options);
        for set in [plan.link_set(&problem), exmesh::problem::LinkSet::default()] {
            let scene = exmesh::report::map::Scene::new(&problem, &table, &set);
            let svg = exmesh::report::svg::with_cautions(&exmesh::report::map::svg(&scene));
            assert_labels_fit(&svg, &format!("150 units, stretch {stretch}"));
            // To look at them: EXMESH_DUMP_PICTURES=DIR (render with any
            // SVG viewer).
            if let Ok(dir) = std::env::var("EXMESH_DUMP_PICTURES") {
                let name = format!("gen150-{stretch}-{}.svg", set.ids().len());
                std::fs::write(std::path::Path::new(&dir).join(name), &svg).unwrap();
            }
        }
    }
}

/// A failing link set: the report repeats the fixes of `check` (every
/// unexcited component with the candidate links `check --json` lists into
/// it), says the target rate is not met, and lists no unit with a 0 %
/// share of the slowest mode.
#[test]
fn report_of_a_failing_plan_gives_the_fixes() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let folder = Folder::new();
    let plan = folder.write(
        "installed.json",
        r#"{"links": [{"from": "mast-north", "to": "mast-cairn", "two_way": true}]}"#,
    );
    let page = folder.path("r.html");
    let demo = "problems/plateau-masts/problem.toml";
    let run = exmesh(
        root,
        &[
            "report",
            demo,
            "--plan",
            plan.to_str().unwrap(),
            "--out",
            page.to_str().unwrap(),
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let html = std::fs::read_to_string(&page).unwrap();
    let doc = scraper::Html::parse_document(&html);
    let text: String = doc.root_element().text().collect();
    assert!(text.contains("What to fix"), "fixes section");
    let check = exmesh(
        root,
        &["check", demo, "--plan", plan.to_str().unwrap(), "--json"],
    );
    let v: serde_json::Value = serde_json::from_str(&check.stdout).unwrap();
    let mut failing = 0;
    for c in v["source_components"].as_array().unwrap() {
        if c["excited"] == true {
            continue;
        }
        failing += 1;
        let into: Vec<&str> = c["entering_candidates"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap())
            .collect();
        assert!(
            text.contains(&format!("candidate links into it: {}", into.join(", "))),
            "fix for {:?}",
            c["nodes"]
        );
    }
    assert!(failing > 0);
    assert!(text.contains("NOT met"), "target rate not met");
    assert!(!text.contains("(0 %)"), "no 0 % shares");
}
