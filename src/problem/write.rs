//! Writing a problem back as a problem file (TOML), for `retire
//! --write-problem`: every setting, every unit with its log path valid from
//! the new file's folder, every candidate link written out (generated ones
//! included, so no `[candidates]` rule is needed).

use super::{Ends, Problem};
use crate::signal::WindowKind;
use std::fmt::Write as _;
use std::path::{Component, Path, PathBuf};

/// A TOML string literal (basic string, escaped).
pub fn quoted(s: &str) -> String {
    toml::Value::String(s.to_string()).to_string()
}

/// A TOML float: Rust's shortest round-trip form always has a `.` or an
/// exponent (`1.0`, `1e-7`), both valid TOML floats.
fn float(x: f64) -> String {
    format!("{x:?}")
}

/// `path` relative to the folder `base`, both made absolute first; the
/// absolute path when they share no root.
pub fn relative_to(path: &Path, base: &Path) -> PathBuf {
    let abs = |p: &Path| -> PathBuf {
        std::fs::canonicalize(p).unwrap_or_else(|_| {
            std::env::current_dir()
                .map(|d| d.join(p))
                .unwrap_or_else(|_| p.to_path_buf())
        })
    };
    let (path, base) = (abs(path), abs(base));
    let (a, b): (Vec<Component>, Vec<Component>) =
        (path.components().collect(), base.components().collect());
    if a.first() != b.first() {
        return path;
    }
    let common = a.iter().zip(&b).take_while(|(x, y)| x == y).count();
    let mut out = PathBuf::new();
    for _ in common..b.len() {
        out.push("..");
    }
    for c in &a[common..] {
        out.push(c.as_os_str());
    }
    out
}

impl Problem {
    /// The problem as a problem file to be written at `target`: loading it
    /// gives the same settings, units, logs and candidate links. `header`
    /// lines are written first as `#` comments.
    pub fn to_toml(&self, target: &Path, header: &[String]) -> String {
        let folder = target
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        let mut out = String::new();
        for h in header {
            for line in h.lines() {
                let _ = writeln!(out, "# {line}");
            }
        }
        let s = &self.settings;
        let _ = writeln!(out, "\n[network]");
        let _ = writeln!(out, "name = {}", quoted(&s.name));
        let _ = writeln!(out, "parameters = {}", s.parameters);
        let _ = writeln!(out, "window = {}", float(s.window));
        let _ = writeln!(
            out,
            "window_kind = {}",
            quoted(match s.window_kind {
                WindowKind::Time => "time",
                WindowKind::Hybrid => "hybrid",
            })
        );
        if let Some(x) = s.stride {
            let _ = writeln!(out, "stride = {}", float(x));
        }
        if let Some(x) = s.min_excitation {
            let _ = writeln!(out, "min_excitation = {}", float(x));
        }
        if let Some(x) = s.target_rate {
            let _ = writeln!(out, "target_rate = {}", float(x));
        }
        let g = &s.gains;
        let _ = writeln!(out, "\n[estimator]");
        let _ = writeln!(out, "flow_gain = {}", float(g.flow_gain));
        let _ = writeln!(out, "jump_gain = {}", float(g.jump_gain));
        let _ = writeln!(out, "flow_coupling = {}", float(g.flow_coupling));
        let _ = writeln!(out, "jump_coupling = {}", float(g.jump_coupling));
        let _ = writeln!(out, "link_weight = {}", float(g.link_weight));
        for v in &self.nodes {
            let _ = writeln!(out, "\n[[node]]");
            let _ = writeln!(out, "id = {}", quoted(&v.id));
            let log = relative_to(&v.log.path, folder);
            let _ = writeln!(out, "log = {}", quoted(&log.to_string_lossy()));
            match (v.lat_lon, v.position) {
                (Some([lat, lon]), _) => {
                    let _ = writeln!(out, "lat_lon = [{}, {}]", float(lat), float(lon));
                }
                (None, Some([x, y])) => {
                    let _ = writeln!(out, "position = [{}, {}]", float(x), float(y));
                }
                (None, None) => {}
            }
            if let Some(m) = v.max_links {
                let _ = writeln!(out, "max_links = {m}");
            }
        }
        for l in &self.links {
            let _ = writeln!(out, "\n[[link]]");
            match l.ends {
                Ends::TwoWay(a, b) => {
                    let _ = writeln!(
                        out,
                        "between = [{}, {}]",
                        quoted(self.node_name(a)),
                        quoted(self.node_name(b))
                    );
                }
                Ends::OneWay { from, to } => {
                    let _ = writeln!(out, "from = {}", quoted(self.node_name(from)));
                    let _ = writeln!(out, "to = {}", quoted(self.node_name(to)));
                }
            }
            let _ = writeln!(out, "id = {}", quoted(&l.id));
            let _ = writeln!(out, "cost = {}", float(l.cost));
            if l.installed {
                let _ = writeln!(out, "installed = true");
            }
            if l.required {
                let _ = writeln!(out, "required = true");
            }
            if l.weight != g.link_weight {
                let _ = writeln!(out, "weight = {}", float(l.weight));
            }
        }
        out
    }
}
