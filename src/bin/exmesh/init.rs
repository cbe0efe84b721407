//! `init`: a commented problem file from a folder of logs, with a window,
//! μ_req and candidate range suggested from the data.

use crate::output::{FlagError, Outputs};
use anyhow::Context;
use exmesh::error::{InputError, read_text};
use exmesh::problem::{self, Node, toml_string as quoted};
use exmesh::signal::parse_log;
use exmesh::suggest::{Suggestion, regressor_columns, suggest};
use std::fmt::Write as _;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Whether `name` matches `pattern` (`*` any run of characters, `?` one).
fn matches(pattern: &[char], name: &[char]) -> bool {
    match (pattern.first(), name.first()) {
        (None, None) => true,
        (Some('*'), _) => {
            matches(&pattern[1..], name) || (!name.is_empty() && matches(pattern, &name[1..]))
        }
        (Some('?'), Some(_)) => matches(&pattern[1..], &name[1..]),
        (Some(p), Some(n)) if p == n => matches(&pattern[1..], &name[1..]),
        _ => false,
    }
}

/// The files in `dir` that `pattern` names: its folder part taken as is
/// (relative to `dir`), wildcards `*` and `?` in the file name; sorted.
fn glob(dir: &Path, pattern: &str) -> Result<Vec<PathBuf>, FlagError> {
    let pattern_path = Path::new(pattern);
    let folder = dir.join(pattern_path.parent().unwrap_or(Path::new("")));
    let name: Vec<char> = pattern_path
        .file_name()
        .map(|n| n.to_string_lossy().chars().collect())
        .unwrap_or_default();
    let bad = |message: String| FlagError {
        flag: "--logs",
        message,
    };
    let entries = std::fs::read_dir(&folder)
        .map_err(|e| bad(format!("cannot list {}: {e}", folder.display())))?;
    let mut found: Vec<PathBuf> = entries
        .filter_map(Result::ok)
        .filter(|e| e.file_type().is_ok_and(|t| t.is_file()))
        .filter(|e| {
            let n: Vec<char> = e.file_name().to_string_lossy().chars().collect();
            matches(&name, &n)
        })
        .map(|e| e.path())
        .collect();
    found.sort();
    if found.is_empty() {
        return Err(bad(format!(
            "no file in {} matches {pattern:?}; expected regressor logs such as logs/*.csv",
            folder.display()
        )));
    }
    Ok(found)
}

/// Positions from a CSV file `id,x_km,y_km` or `id,lat,lon` (header first;
/// `#` lines and blank lines skipped): per unit id, the position and
/// whether it is latitude/longitude.
/// Unit ids with their two coordinates.
type Positions = Vec<(String, [f64; 2])>;

fn positions(path: &Path) -> Result<(Positions, bool), InputError> {
    let text = read_text(path, "positions file")?;
    let mut rows = text
        .lines()
        .enumerate()
        .map(|(k, l)| (k + 1, l.trim().trim_start_matches('\u{feff}')))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let Some((line, header)) = rows.next() else {
        return Err(InputError::whole(
            path,
            "the positions file is empty; expected a header `id,x_km,y_km` or `id,lat,lon`",
        ));
    };
    let cols: Vec<&str> = header.split(',').map(str::trim).collect();
    let geo = match cols.as_slice() {
        ["id", "x_km", "y_km"] => false,
        ["id", "lat", "lon"] => true,
        _ => {
            return Err(InputError::at(
                path,
                line,
                format!("header {header:?}; expected `id,x_km,y_km` or `id,lat,lon`"),
            ));
        }
    };
    let mut out = Vec::new();
    for (line, row) in rows {
        let f: Vec<&str> = row.split(',').map(str::trim).collect();
        let num = |s: &str| s.parse::<f64>().ok().filter(|x| x.is_finite());
        match f.as_slice() {
            [id, a, b] if !id.is_empty() => match (num(a), num(b)) {
                (Some(a), Some(b)) => out.push((id.to_string(), [a, b])),
                _ => {
                    return Err(InputError::at(
                        path,
                        line,
                        format!("expected two finite numbers after the id, found {row:?}"),
                    ));
                }
            },
            _ => {
                return Err(InputError::at(
                    path,
                    line,
                    format!(
                        "expected `id,{}`, found {row:?}",
                        if geo { "lat,lon" } else { "x_km,y_km" }
                    ),
                ));
            }
        }
    }
    Ok((out, geo))
}

/// `exmesh init DIR --logs PATTERN [--positions FILE] [--out NAME]`.
pub(crate) fn init(
    out: &mut impl Write,
    dir: &Path,
    pattern: &str,
    positions_file: Option<&Path>,
    name: &Path,
) -> anyhow::Result<ExitCode> {
    let target = dir.join(name);
    if target.exists() {
        return Err(FlagError {
            flag: "--out",
            message: format!(
                "{} exists; expected a new file name (init never overwrites a problem file)",
                target.display()
            ),
        }
        .into());
    }
    let files = glob(dir, pattern)?;
    let mut p = None;
    let mut nodes: Vec<Node> = Vec::new();
    let mut names: Vec<(String, String)> = Vec::new();
    for file in &files {
        let text = read_text(file, "log")?;
        let cols = regressor_columns(&text)
            .ok_or_else(|| InputError::at(file, 1, "expected a header `t,j,psi1,...,psiP[,y]`"))?;
        match p {
            None => p = Some(cols),
            Some(q) if q != cols => {
                return Err(InputError::at(
                    file,
                    1,
                    format!("{cols} regressor columns; expected {q} like the other logs"),
                )
                .into());
            }
            Some(_) => {}
        }
        let log = parse_log(file, &text, cols)?;
        let id = file
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        let relative = problem::relative_to(file, dir);
        names.push((id.clone(), relative.to_string_lossy().into_owned()));
        nodes.push(Node {
            id,
            log,
            position: None,
            lat_lon: None,
            max_links: None,
        });
    }
    let p = p.unwrap_or(1);
    let mut geo = false;
    if let Some(path) = positions_file {
        let path = dir.join(path);
        let (list, is_geo) = positions(&path)?;
        geo = is_geo;
        for v in &mut nodes {
            let Some((_, at)) = list.iter().find(|(id, _)| *id == v.id) else {
                return Err(InputError::whole(
                    &path,
                    format!(
                        "no position for unit {:?} (log {}); expected a row for every log",
                        v.id, v.id
                    ),
                )
                .into());
            };
            if geo {
                v.lat_lon = Some(*at);
            } else {
                v.position = Some(*at);
            }
        }
        if geo {
            let points: Vec<[f64; 2]> = nodes.iter().filter_map(|v| v.lat_lon).collect();
            for (v, xy) in nodes.iter_mut().zip(problem::project(&points)) {
                v.position = Some(xy);
            }
        }
    }
    let s = suggest(nodes.clone(), p).map_err(|e| InputError::whole(dir, e))?;
    let text = compose(dir, p, &names, &nodes, geo, &s);
    let mut outputs = Outputs::default();
    outputs.add(&target, text.into_bytes(), "the problem file");
    outputs.commit()?;
    // The loader reads what was written.
    if let Err(e) = problem::load(&target) {
        let _ = std::fs::remove_file(&target);
        return Err(anyhow::anyhow!(
            "the written problem does not load ({e}); nothing was kept — please report this"
        ));
    }
    writeln!(
        out,
        "wrote {}: {} units, p = {p}, window {} s, min_excitation {}{}; it loads.\nEdit the costs (and the links), then run `exmesh excitation {}` and `exmesh plan {}`.",
        target.display(),
        nodes.len(),
        exmesh::report::number::sig(s.window, 4, exmesh::report::number::Round::Nearest),
        exmesh::report::number::sig(s.min_excitation, 2, exmesh::report::number::Round::Nearest),
        s.range
            .map(|r| format!(
                ", candidates within {} km",
                exmesh::report::number::sig(r, 3, exmesh::report::number::Round::Nearest)
            ))
            .unwrap_or_default(),
        target.display(),
        target.display()
    )
    .context("writing to standard output")?;
    Ok(ExitCode::SUCCESS)
}

/// The commented problem file.
fn compose(
    dir: &Path,
    p: usize,
    names: &[(String, String)],
    nodes: &[Node],
    geo: bool,
    s: &Suggestion,
) -> String {
    let mut t = String::new();
    let _ = writeln!(
        t,
        "# Problem file written by `exmesh init` from the logs in {}.",
        dir.display()
    );
    let _ = writeln!(
        t,
        "# Suggestions from the data, with their reasons; check them (docs/formats.md,"
    );
    let _ = writeln!(
        t,
        "# \"Choosing the window, μ_req and a target rate from the data\")."
    );
    let _ = writeln!(t, "\n[network]");
    let network = dir
        .canonicalize()
        .ok()
        .and_then(|d| d.file_name().map(|n| n.to_string_lossy().into_owned()))
        .unwrap_or_else(|| "network".into());
    let _ = writeln!(t, "name = {}", quoted(&network));
    let _ = writeln!(t, "parameters = {p}        # from the logs' psi columns");
    let _ = writeln!(t, "# window: {}", s.window_why);
    let _ = writeln!(t, "window = {:?}", round3(s.window));
    let _ = writeln!(
        t,
        "stride = {:?}         # about 100 windows over the horizon",
        round3(s.stride)
    );
    let _ = writeln!(t, "# min_excitation: {}", s.min_excitation_why);
    let _ = writeln!(t, "min_excitation = {:?}", s.min_excitation);
    let _ = writeln!(
        t,
        "# target_rate = 0.05     # optional, 1/s: plan once without it, then see `exmesh budget`"
    );
    let _ = writeln!(
        t,
        "\n[estimator]             # the defaults; set your estimator's gains"
    );
    let _ = writeln!(
        t,
        "flow_gain = 1.0\njump_gain = 1.0\nflow_coupling = 1.0\njump_coupling = 0.2\nlink_weight = 1.0"
    );
    for ((id, log), v) in names.iter().zip(nodes) {
        let _ = writeln!(t, "\n[[node]]\nid = {}\nlog = {}", quoted(id), quoted(log));
        match (geo, v.lat_lon, v.position) {
            (true, Some([a, b]), _) => {
                let _ = writeln!(t, "lat_lon = [{a:?}, {b:?}]");
            }
            (false, _, Some([x, y])) => {
                let _ = writeln!(t, "position = [{x:?}, {y:?}]");
            }
            _ => {}
        }
    }
    match (&s.range, &s.range_why) {
        (Some(range), Some(why)) => {
            let _ = writeln!(t, "\n[candidates]");
            let _ = writeln!(t, "# range: {why}");
            let _ = writeln!(t, "range = {:?}", round3(*range));
            let _ = writeln!(t, "fixed_cost = 1000.0     # EDIT: your cost of a link");
            let _ = writeln!(t, "cost_per_km = 100.0     # EDIT: your cost per km");
        }
        _ => {
            let _ = writeln!(
                t,
                "\n# No positions given: list the candidate links, for example"
            );
            let _ = writeln!(t, "# [[link]]\n# between = [\"a\", \"b\"]\n# cost = 1000.0");
        }
    }
    t
}

/// `x` to three decimals (a readable number in the file).
fn round3(x: f64) -> f64 {
    let r = (x * 1000.0).round() / 1000.0;
    if r > 0.0 { r } else { x }
}
