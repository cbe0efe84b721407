//! The planning problem: TOML schema, validation, candidate generation and
//! link sets.

mod plan_file;
mod raw;
mod write;
pub use write::{quoted as toml_string, relative_to};

pub use plan_file::{PlanFacts, read_link_set, read_plan_file};

use crate::error::{InputError, LineIndex, decode, read_text};
use crate::limits;
use crate::signal::{Log, TimeDomain, Window, WindowKind, parse_log_within, windows};
use raw::{RawEstimator, RawLink, RawNode, RawProblem};
use rayon::prelude::*;
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// Index of a unit in [`Problem::nodes`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct NodeId(pub u32);

/// Index of a candidate link in [`Problem::links`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct LinkId(pub u32);

impl NodeId {
    /// The index as `usize`.
    pub fn index(self) -> usize {
        self.0 as usize
    }
}

impl LinkId {
    /// The index as `usize`.
    pub fn index(self) -> usize {
        self.0 as usize
    }
}

/// Estimator gains (docs/theory.md §1).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Gains {
    /// γ_c, flow gain.
    pub flow_gain: f64,
    /// γ_d, jump gain.
    pub jump_gain: f64,
    /// κ, flow coupling.
    pub flow_coupling: f64,
    /// δ, jump coupling.
    pub jump_coupling: f64,
    /// Default arc weight a_ik of a link.
    pub link_weight: f64,
}

impl Gains {
    /// The jump gain as it enters the excitation Gramian:
    /// `min(γ_d, 2 − γ_d)`. Along a large regressor the jump multiplies
    /// the error by about `1 − γ_d`, which has the same size for γ_d and
    /// 2 − γ_d, so a gain above 1 is credited like its mirror below 1 and
    /// never more (docs/theory.md §3, "Jump weighting").
    pub fn jump_weight(&self) -> f64 {
        self.jump_gain.min(2.0 - self.jump_gain).max(0.0)
    }
}

impl Default for Gains {
    fn default() -> Self {
        Gains {
            flow_gain: 1.0,
            jump_gain: 1.0,
            flow_coupling: 1.0,
            jump_coupling: 0.2,
            link_weight: 1.0,
        }
    }
}

/// A field unit with its recorded log.
#[derive(Debug, Clone, PartialEq)]
pub struct Node {
    /// The unit's name in the problem file.
    pub id: String,
    /// Its validated regressor log.
    pub log: Log,
    /// Position in km, when given (with `lat_lon`: the projection used for
    /// drawing, see [`project`]).
    pub position: Option<[f64; 2]>,
    /// Latitude and longitude in degrees, when given instead of a position.
    pub lat_lon: Option<[f64; 2]>,
    /// Most links the unit may take part in (radio ports), when limited.
    pub max_links: Option<u32>,
}

/// Mean Earth radius in km: the IUGG mean radius R₁ = (2a + b)/3 of the
/// GRS 80 ellipsoid, 6371.0088 km (Moritz, "Geodetic Reference System
/// 1980", Journal of Geodesy 74, 2000; value and reference from memory).
pub const EARTH_RADIUS_KM: f64 = 6371.0088;

/// Great-circle distance in km between two `[latitude, longitude]` points
/// in degrees on a sphere of `radius` km, by the haversine formula
/// (Sinnott, "Virtues of the Haversine", Sky and Telescope 68(2), 1984;
/// reference from memory):
/// with h = sin²(Δφ/2) + cos φ₁ cos φ₂ sin²(Δλ/2), d = 2R·atan2(√h, √(1−h))
/// (= 2R·asin √h).
pub fn haversine_km(a: [f64; 2], b: [f64; 2], radius: f64) -> f64 {
    let (p1, p2) = (a[0].to_radians(), b[0].to_radians());
    let (dp, dl) = ((b[0] - a[0]).to_radians(), (b[1] - a[1]).to_radians());
    let h = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    // atan2 rather than asin: accurate near antipodes too.
    let h = h.clamp(0.0, 1.0);
    2.0 * radius * h.sqrt().atan2((1.0 - h).sqrt())
}

/// Positions in km for drawing, from `[latitude, longitude]` points: the
/// equirectangular projection about their mean latitude and longitude
/// (x east, y north). Distances used for planning are great-circle ones.
pub fn project(points: &[[f64; 2]]) -> Vec<[f64; 2]> {
    let n = points.len().max(1) as f64;
    let lat0 = points.iter().map(|p| p[0]).sum::<f64>() / n;
    let lon0 = points.iter().map(|p| p[1]).sum::<f64>() / n;
    points
        .iter()
        .map(|p| {
            [
                EARTH_RADIUS_KM * (p[1] - lon0).to_radians() * lat0.to_radians().cos(),
                EARTH_RADIUS_KM * (p[0] - lat0).to_radians(),
            ]
        })
        .collect()
}

impl Node {
    /// Distance in km to `other`: great-circle when both have `lat_lon`,
    /// else straight-line between positions; `None` without positions.
    pub fn distance_km(&self, other: &Node) -> Option<f64> {
        match (self.lat_lon, other.lat_lon, self.position, other.position) {
            (Some(a), Some(b), _, _) => Some(haversine_km(a, b, EARTH_RADIUS_KM)),
            (_, _, Some(a), Some(b)) => Some((a[0] - b[0]).hypot(a[1] - b[1])),
            _ => None,
        }
    }
}

/// The ends of a link.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ends {
    /// Each end listens to the other.
    TwoWay(NodeId, NodeId),
    /// `to` listens to `from`.
    OneWay {
        /// The talking end.
        from: NodeId,
        /// The listening end.
        to: NodeId,
    },
}

impl Ends {
    /// The two units the link joins: (first end, second end) of a two-way
    /// link, (talker, listener) of a one-way link.
    pub fn units(self) -> (NodeId, NodeId) {
        match self {
            Ends::TwoWay(a, b) => (a, b),
            Ends::OneWay { from, to } => (from, to),
        }
    }
}

/// A candidate link.
#[derive(Debug, Clone, PartialEq)]
pub struct Link {
    /// The link's id (given, or made from its ends).
    pub id: String,
    /// Its ends and direction.
    pub ends: Ends,
    /// Cost to install.
    pub cost: f64,
    /// Arc weight a_ik.
    pub weight: f64,
    /// Already in place.
    pub installed: bool,
    /// Must be in every plan, at its cost (`required = true`).
    pub required: bool,
    /// Made by the `[candidates]` rule rather than written out.
    pub generated: bool,
}

/// A directed arc `from → to` ("`to` listens to `from`").
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Arc {
    /// Talking unit.
    pub from: NodeId,
    /// Listening unit.
    pub to: NodeId,
    /// Weight a_{to,from}.
    pub weight: f64,
}

impl Link {
    /// The one or two arcs of the link.
    pub fn arcs(&self) -> impl Iterator<Item = Arc> + '_ {
        let (a, b, two) = match self.ends {
            Ends::TwoWay(a, b) => (a, b, true),
            Ends::OneWay { from, to } => (from, to, false),
        };
        let w = self.weight;
        std::iter::once(Arc {
            from: a,
            to: b,
            weight: w,
        })
        .chain(two.then_some(Arc {
            from: b,
            to: a,
            weight: w,
        }))
    }
}

/// A chosen set of candidate links (sorted, no repeats).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct LinkSet(Vec<LinkId>);

impl LinkSet {
    /// A link set from any ids (sorted and de-duplicated).
    pub fn new(mut ids: Vec<LinkId>) -> Self {
        ids.sort();
        ids.dedup();
        LinkSet(ids)
    }

    /// The ids in increasing order.
    pub fn ids(&self) -> &[LinkId] {
        &self.0
    }
}

/// The scalar settings of a problem (the `[network]` and `[estimator]`
/// tables), for building a [`Problem`] in memory with [`Problem::from_parts`].
#[derive(Debug, Clone, PartialEq)]
pub struct Settings {
    /// Network name.
    pub name: String,
    /// Parameter dimension p.
    pub parameters: usize,
    /// Excitation window length T.
    pub window: f64,
    /// How window length is measured.
    pub window_kind: WindowKind,
    /// Stride between window starts.
    pub stride: Option<f64>,
    /// Required excitation μ_req.
    pub min_excitation: Option<f64>,
    /// Required convergence rate.
    pub target_rate: Option<f64>,
    /// Estimator gains.
    pub gains: Gains,
}

/// A validated planning problem.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// The problem file.
    pub path: PathBuf,
    /// The `[network]` and `[estimator]` settings.
    pub settings: Settings,
    /// Units.
    pub nodes: Vec<Node>,
    /// Candidate links.
    pub links: Vec<Link>,
    /// Common hybrid time domain of all logs.
    pub domain: TimeDomain,
    /// Excitation windows.
    pub windows: Vec<Window>,
}

impl Problem {
    /// Builds a problem in memory (for synthetic studies). Returns `None`
    /// when the logs share no horizon or no window fits in it. Nodes and
    /// links are taken as given: they must already be valid.
    pub fn from_parts(
        path: PathBuf,
        settings: Settings,
        nodes: Vec<Node>,
        links: Vec<Link>,
    ) -> Option<Problem> {
        let domain = TimeDomain::merge(nodes.iter().map(|n| &n.log))?;
        let windows = windows(
            &domain,
            settings.window_kind,
            settings.window,
            settings.stride,
        );
        if windows.is_empty() {
            return None;
        }
        Some(Problem {
            path,
            settings,
            nodes,
            links,
            domain,
            windows,
        })
    }

    /// The problem without the `retired` units, their logs and every link
    /// that touches them; links in `installed` (ids of this problem) are
    /// marked installed. Returns the new problem and, for each link of the
    /// new problem, its id in this one. `None` when no unit is left or the
    /// remaining logs share no window.
    pub fn without_units(
        &self,
        retired: &[NodeId],
        installed: &LinkSet,
    ) -> Option<(Problem, Vec<LinkId>)> {
        self.without(retired, &[], installed)
    }

    /// The problem without the `retired` units (their logs and every link
    /// touching them) and without the `failed` links; links in `installed`
    /// are marked installed. Returns it with, for each remaining link, its
    /// id in `self`; `None` when no unit remains or the remaining logs share
    /// no window.
    pub fn without(
        &self,
        retired: &[NodeId],
        failed: &[LinkId],
        installed: &LinkSet,
    ) -> Option<(Problem, Vec<LinkId>)> {
        let keep: Vec<bool> = (0..self.n())
            .map(|i| !retired.contains(&NodeId(i as u32)))
            .collect();
        let mut new_id = vec![u32::MAX; self.n()];
        let mut nodes = Vec::new();
        for (i, node) in self.nodes.iter().enumerate() {
            if keep[i] {
                new_id[i] = nodes.len() as u32;
                nodes.push(node.clone());
            }
        }
        if nodes.is_empty() {
            return None;
        }
        let map = |v: NodeId| NodeId(new_id[v.index()]);
        let mut links = Vec::new();
        let mut origin = Vec::new();
        for (k, link) in self.links.iter().enumerate() {
            let (a, b) = link.ends.units();
            if !keep[a.index()] || !keep[b.index()] || failed.contains(&LinkId(k as u32)) {
                continue;
            }
            let mut l = link.clone();
            l.ends = match link.ends {
                Ends::TwoWay(a, b) => Ends::TwoWay(map(a), map(b)),
                Ends::OneWay { from, to } => Ends::OneWay {
                    from: map(from),
                    to: map(to),
                },
            };
            l.installed |= installed.ids().contains(&LinkId(k as u32));
            links.push(l);
            origin.push(LinkId(k as u32));
        }
        let problem = Problem::from_parts(self.path.clone(), self.settings.clone(), nodes, links)?;
        Some((problem, origin))
    }

    /// How many of `links` each unit takes part in (a link counts once at
    /// each of its two ends): the radio ports they use.
    pub fn links_per_unit(&self, links: impl IntoIterator<Item = LinkId>) -> Vec<u32> {
        let mut used = vec![0u32; self.n()];
        for l in links {
            let (a, b) = self.link(l).ends.units();
            used[a.index()] += 1;
            used[b.index()] += 1;
        }
        used
    }

    /// Number of units.
    pub fn n(&self) -> usize {
        self.nodes.len()
    }

    /// Looks a unit up by name.
    pub fn node_id(&self, name: &str) -> Option<NodeId> {
        self.nodes
            .iter()
            .position(|n| n.id == name)
            .map(|k| NodeId(k as u32))
    }

    /// Looks a candidate link up by its id.
    pub fn link_id(&self, id: &str) -> Option<LinkId> {
        self.links
            .iter()
            .position(|l| l.id == id)
            .map(|k| LinkId(k as u32))
    }

    /// The unit's name.
    pub fn node_name(&self, id: NodeId) -> &str {
        &self.nodes[id.index()].id
    }

    /// The link.
    pub fn link(&self, id: LinkId) -> &Link {
        &self.links[id.index()]
    }

    /// Every candidate link.
    pub fn all_links(&self) -> LinkSet {
        LinkSet::new((0..self.links.len() as u32).map(LinkId).collect())
    }

    /// The links marked `installed`.
    pub fn installed_links(&self) -> LinkSet {
        LinkSet::new(
            (0..self.links.len() as u32)
                .map(LinkId)
                .filter(|&l| self.link(l).installed)
                .collect(),
        )
    }

    /// The arcs of a link set.
    pub fn arcs(&self, set: &LinkSet) -> Vec<Arc> {
        set.ids()
            .iter()
            .flat_map(|&l| self.link(l).arcs())
            .collect()
    }

    /// Total cost of a link set, installed links counting 0.
    pub fn cost(&self, set: &LinkSet) -> f64 {
        0.0 + set
            .ids()
            .iter()
            .map(|&l| self.link(l))
            .filter(|l| !l.installed)
            .map(|l| l.cost)
            .sum::<f64>()
    }
}

/// Loads and validates a problem file and every log it names.
///
/// # Errors
/// An [`InputError`] naming the file and line for malformed TOML, unknown
/// keys, out-of-range values, unknown or duplicate units, bad links, missing
/// or malformed logs, and logs that do not overlap for a whole window.
pub fn load(path: &Path) -> Result<Problem, InputError> {
    let text = read_text(path, "problem file")?;
    load_with(path, &text, &|p: &Path| std::fs::read(p))
}

/// Like [`load`], with the problem text given and logs' bytes read through
/// `read` (paths are resolved against the problem file's folder first).
///
/// # Errors
/// As [`load`].
pub fn load_with(path: &Path, text: &str, read: &Reader) -> Result<Problem, InputError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let lines = LineIndex::new(text);
    let raw: RawProblem = toml::from_str(text).map_err(|e| toml_error(path, text, &lines, &e))?;
    Validator { path, lines }.problem(raw, read)
}

/// How [`load_with`] reads a log's bytes.
pub type Reader = dyn Fn(&Path) -> std::io::Result<Vec<u8>> + Sync;

/// A TOML syntax or schema error at its line; a single-bracket `[node]` or
/// `[link]` table (the usual slip for `[[node]]`) is named as such.
fn toml_error(path: &Path, text: &str, lines: &LineIndex, e: &toml::de::Error) -> InputError {
    let single = text.split('\n').enumerate().find_map(|(k, l)| {
        let l = l.trim();
        ["node", "link"]
            .into_iter()
            .find(|name| l.starts_with(&format!("[{name}]")))
            .map(|name| (k + 1, name))
    });
    if let Some((line, name)) = single {
        return InputError::at(
            path,
            line,
            format!(
                "`[{name}]` opens a single table; expected `[[{name}]]` (double brackets) \
                 before each {}",
                if name == "node" { "unit" } else { "link" }
            ),
        );
    }
    let line = e.span().map_or(1, |s| lines.line(s.start));
    InputError::at(
        path,
        line,
        format!(
            "malformed problem file: {}",
            crate::error::plain_words(e.message().trim())
        ),
    )
}

/// A number as a message shows it: plain when of moderate size, else in
/// exponent form (no three-hundred-digit values).
fn shown(x: f64) -> String {
    if x == 0.0 || !x.is_finite() || (1e-4..1e6).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

struct Validator<'a> {
    path: &'a Path,
    lines: LineIndex,
}

impl Validator<'_> {
    fn err<T>(&self, at: &Spanned<T>, message: impl Into<String>) -> InputError {
        InputError::at(self.path, self.lines.line(at.span().start), message)
    }

    /// A unit or link id: non-empty, no control characters (ids end up in
    /// SVG, HTML, DOT and terminals).
    fn id(&self, id: &Spanned<String>, what: &str) -> Result<(), InputError> {
        let text = id.get_ref();
        if text.trim().is_empty() {
            return Err(self.err(id, format!("expected a non-empty {what} id")));
        }
        if let Some(c) = text.chars().find(|c| c.is_control()) {
            return Err(self.err(
                id,
                format!(
                    "{what} id {text:?} contains the control character U+{:04X}; expected \
                     printable characters",
                    u32::from(c)
                ),
            ));
        }
        Ok(())
    }

    fn number(
        &self,
        v: &Spanned<f64>,
        name: &str,
        ok: impl Fn(f64) -> bool,
        expected: &str,
    ) -> Result<f64, InputError> {
        let x = *v.get_ref();
        if x.is_finite() && ok(x) {
            Ok(x)
        } else {
            Err(self.err(v, format!("{name} = {}: expected {expected}", shown(x))))
        }
    }

    fn optional(
        &self,
        v: &Option<Spanned<f64>>,
        name: &str,
        default: f64,
        ok: impl Fn(f64) -> bool,
        expected: &str,
    ) -> Result<f64, InputError> {
        v.as_ref()
            .map_or(Ok(default), |v| self.number(v, name, ok, expected))
    }

    fn problem(&self, raw: RawProblem, read: &Reader) -> Result<Problem, InputError> {
        let net = &raw.network;
        let p = *net.parameters.get_ref();
        if !(1..=64).contains(&p) {
            return Err(self.err(
                &net.parameters,
                format!("parameters = {p}: expected a whole number from 1 to 64"),
            ));
        }
        let p = p as usize;
        let positive = |x: f64| x > 0.0;
        let seconds = |x: f64| x > 0.0 && x <= limits::MAX_TIME;
        let seconds_text = format!("a positive number of seconds ≤ {:e}", limits::MAX_TIME);
        let window = self.number(&net.window, "window", seconds, &seconds_text)?;
        let window_kind = match &net.window_kind {
            None => WindowKind::Time,
            Some(k) => match k.get_ref().as_str() {
                "time" => WindowKind::Time,
                "hybrid" => WindowKind::Hybrid,
                other => {
                    return Err(self.err(
                        k,
                        format!("window_kind = \"{other}\": expected \"time\" or \"hybrid\""),
                    ));
                }
            },
        };
        let stride = net
            .stride
            .as_ref()
            .map(|s| self.number(s, "stride", seconds, &seconds_text))
            .transpose()?;
        let min_excitation = net
            .min_excitation
            .as_ref()
            .map(|s| self.number(s, "min_excitation", positive, "a positive number"))
            .transpose()?;
        let target_rate = net
            .target_rate
            .as_ref()
            .map(|s| {
                self.number(
                    s,
                    "target_rate",
                    |x| x > 0.0 && x <= limits::MAX_RATE,
                    &format!("a positive rate in 1/s, at most {:e}", limits::MAX_RATE),
                )
            })
            .transpose()?;
        let gains = self.gains(&raw.estimator)?;

        let (nodes, index) = self.nodes(&raw.nodes, p, gains.flow_gain, read)?;

        let links = self.links(&raw, &index, &nodes, &gains)?;

        let domain = TimeDomain::merge(nodes.iter().map(|n| &n.log)).ok_or_else(|| {
            InputError::whole(self.path, "the unit logs do not overlap in time; expected a common horizon of positive length")
        })?;
        if let (Some(stride), Some(at)) = (stride, &net.stride) {
            let count = (domain.h1 - domain.h0) / stride;
            if count > limits::MAX_WINDOWS as f64 {
                return Err(self.err(
                    at,
                    format!(
                        "stride = {} gives about {count:.3e} windows over the horizon of \
                         {} s; expected at most {} windows (a larger stride)",
                        shown(stride),
                        domain.h1 - domain.h0,
                        limits::MAX_WINDOWS
                    ),
                ));
            }
        }
        let windows = windows(&domain, window_kind, window, stride);
        let table = nodes.len() as f64 * windows.len() as f64 * (p * (p + 1) / 2) as f64;
        if table > limits::MAX_TABLE {
            let at = net
                .stride
                .as_ref()
                .map_or(self.lines.line(net.window.span().start), |s| {
                    self.lines.line(s.span().start)
                });
            return Err(InputError::at(
                self.path,
                at,
                format!(
                    "{} units × {} windows × {} Gramian entries = {table:.3e} numbers for the \
                     excitation table; expected at most {:e} (about 4 GB): a larger stride \
                     (fewer windows), fewer units or fewer parameters",
                    nodes.len(),
                    windows.len(),
                    p * (p + 1) / 2,
                    limits::MAX_TABLE
                ),
            ));
        }
        if windows.is_empty() {
            return Err(self.err(&net.window, format!(
                "window = {window}: no window fits in the common horizon [{}, {}] of the logs ({} s); expected a shorter window or longer logs",
                domain.h0,
                domain.h1,
                domain.h1 - domain.h0
            )));
        }
        Ok(Problem {
            path: self.path.to_path_buf(),
            settings: Settings {
                // An unnamed network is called after its file.
                name: if raw.network.name.trim().is_empty() {
                    self.path
                        .file_stem()
                        .map_or_else(String::new, |s| s.to_string_lossy().into_owned())
                } else {
                    raw.network.name
                },
                parameters: p,
                window,
                window_kind,
                stride,
                min_excitation,
                target_rate,
                gains,
            },
            nodes,
            links,
            domain,
            windows,
        })
    }

    /// The `[estimator]` table.
    fn gains(&self, e: &RawEstimator) -> Result<Gains, InputError> {
        let max = limits::MAX_GAIN;
        let positive = |x: f64| x > 0.0 && x <= max;
        let non_negative = |x: f64| (0.0..=max).contains(&x);
        let up_to = format!("a number from 0 to {max:e}");
        let d = Gains::default();
        let gains = Gains {
            flow_gain: self.optional(
                &e.flow_gain,
                "flow_gain",
                d.flow_gain,
                non_negative,
                &up_to,
            )?,
            jump_gain: self.optional(
                &e.jump_gain,
                "jump_gain",
                d.jump_gain,
                |x| (0.0..=2.0).contains(&x),
                "a number from 0 to 2 (above 2 a unit's own jump map expands the error \
                 along a large regressor, whatever the links)",
            )?,
            flow_coupling: self.optional(
                &e.flow_coupling,
                "flow_coupling",
                d.flow_coupling,
                non_negative,
                &up_to,
            )?,
            jump_coupling: self.optional(
                &e.jump_coupling,
                "jump_coupling",
                d.jump_coupling,
                non_negative,
                &up_to,
            )?,
            link_weight: self.optional(
                &e.link_weight,
                "link_weight",
                d.link_weight,
                positive,
                &format!("a positive number ≤ {max:e}"),
            )?,
        };
        if let Some(at) = e.flow_coupling.as_ref().or(e.link_weight.as_ref()) {
            self.coupling(at, gains.flow_coupling, gains.link_weight)?;
        }
        Ok(gains)
    }

    /// `flow_coupling · weight` of one link within [`limits::MAX_STIFFNESS`].
    fn coupling<T>(&self, at: &Spanned<T>, kappa: f64, weight: f64) -> Result<(), InputError> {
        if kappa * weight > limits::MAX_STIFFNESS {
            return Err(self.err(
                at,
                format!(
                    "flow_coupling · weight = {kappa} · {weight} = {:e} 1/s; expected at most \
                     {:e} 1/s (docs/formats.md, \"Accepted ranges\": the certificate steps \
                     through each flow in substeps of 1/‖A‖)",
                    kappa * weight,
                    limits::MAX_STIFFNESS
                ),
            ));
        }
        Ok(())
    }

    /// The `[[node]]` tables, with their logs read and parsed in parallel;
    /// also the index of unit ids.
    fn nodes<'r>(
        &self,
        raw_nodes: &'r [RawNode],
        p: usize,
        flow_gain: f64,
        read: &Reader,
    ) -> Result<(Vec<Node>, HashMap<&'r str, NodeId>), InputError> {
        if raw_nodes.is_empty() {
            return Err(InputError::whole(
                self.path,
                "expected at least one [[node]]",
            ));
        }
        let mut index: HashMap<&str, NodeId> = HashMap::new();
        let mut positions = Vec::with_capacity(raw_nodes.len());
        for (k, node) in raw_nodes.iter().enumerate() {
            let id = node.id.get_ref().as_str();
            self.id(&node.id, "unit")?;
            if index.insert(id, NodeId(k as u32)).is_some() {
                return Err(self.err(
                    &node.id,
                    format!("duplicate unit id \"{id}\"; expected every [[node]] id to be unique"),
                ));
            }
            let position = match &node.position {
                None => None,
                Some(pos) => match pos.get_ref().as_slice() {
                    &[x, y]
                        if x.abs() <= limits::MAX_DISTANCE && y.abs() <= limits::MAX_DISTANCE =>
                    {
                        Some([x, y])
                    }
                    _ => {
                        return Err(self.err(
                            pos,
                            format!(
                                "position: expected two numbers [x_km, y_km], each of size at \
                                 most {:e} km",
                                limits::MAX_DISTANCE
                            ),
                        ));
                    }
                },
            };
            let lat_lon = match &node.lat_lon {
                None => None,
                Some(at) => match at.get_ref().as_slice() {
                    &[lat, lon] if lat.abs() <= 90.0 && lon.abs() <= 180.0 => Some([lat, lon]),
                    _ => {
                        return Err(self.err(
                            at,
                            "lat_lon: expected two numbers [latitude, longitude] in degrees, \
                             latitude from -90 to 90 and longitude from -180 to 180",
                        ));
                    }
                },
            };
            if let (Some(_), Some(at)) = (&node.position, &node.lat_lon) {
                return Err(self.err(
                    at,
                    "a unit has either `position` (km) or `lat_lon` (degrees), not both",
                ));
            }
            positions.push((position, lat_lon));
        }
        // One kind of position for the whole network.
        let geo = positions.iter().filter(|p| p.1.is_some()).count();
        let flat = positions.iter().filter(|p| p.0.is_some()).count();
        if geo > 0 && flat > 0 {
            let odd = raw_nodes
                .iter()
                .find(|n| n.position.is_some())
                .and_then(|n| n.position.as_ref());
            if let Some(at) = odd {
                return Err(self.err(
                    at,
                    "some units give `lat_lon` and others `position`; expected one kind for the whole network",
                ));
            }
        }
        if geo > 0 {
            let points: Vec<[f64; 2]> = positions.iter().filter_map(|p| p.1).collect();
            let mut projected = project(&points).into_iter();
            for p in &mut positions {
                if p.1.is_some() {
                    p.0 = projected.next();
                }
            }
        }
        let base = self.path.parent().unwrap_or(Path::new(""));
        let logs: Vec<Result<Log, InputError>> = raw_nodes
            .par_iter()
            .map(|node| {
                let log_path = base.join(node.log.get_ref());
                let bytes = read(&log_path).map_err(|e| {
                    self.err(
                        &node.log,
                        format!("cannot read log file {}: {e}", log_path.display()),
                    )
                })?;
                let text = decode(&log_path, bytes)?;
                let max_square = if flow_gain > 0.0 {
                    limits::MAX_STIFFNESS / flow_gain
                } else {
                    f64::INFINITY
                };
                parse_log_within(&log_path, &text, p, max_square)
            })
            .collect();
        let mut nodes = Vec::with_capacity(logs.len());
        for ((node, log), (position, lat_lon)) in raw_nodes.iter().zip(logs).zip(positions) {
            let max_links = match &node.max_links {
                None => None,
                Some(m) => match u32::try_from(*m.get_ref()) {
                    Ok(v) if v <= 1_000_000 => Some(v),
                    _ => {
                        return Err(self.err(
                            m,
                            "max_links: expected a whole number of links from 0 to 1000000",
                        ));
                    }
                },
            };
            nodes.push(Node {
                id: node.id.get_ref().clone(),
                log: log?,
                position,
                lat_lon,
                max_links,
            });
        }

        Ok((nodes, index))
    }

    /// The `[[link]]` tables and the links generated from `[candidates]`.
    fn links(
        &self,
        raw: &RawProblem,
        index: &HashMap<&str, NodeId>,
        nodes: &[Node],
        gains: &Gains,
    ) -> Result<Vec<Link>, InputError> {
        let distance = |x: f64| x > 0.0 && x <= limits::MAX_DISTANCE;
        let cost = |x: f64| (0.0..=limits::MAX_COST).contains(&x);
        let cost_text = format!("a cost from 0 to {:e}", limits::MAX_COST);
        let mut links: Vec<Link> = Vec::new();
        let mut ids: HashMap<String, usize> = HashMap::new();
        for raw_link in &raw.links {
            let link = self.link(raw_link, index, gains)?;
            if let Some(&line) = ids.get(&link.id) {
                return Err(self.err(raw_link, format!(
                    "duplicate link id \"{}\" (also on line {line}); give one of them a distinct `id`",
                    link.id
                )));
            }
            ids.insert(link.id.clone(), self.lines.line(raw_link.span().start));
            links.push(link);
        }
        if let Some(c) = &raw.candidates {
            let cand = c.get_ref();
            // The rule's classes: the three keys of [candidates] (one class
            // without a name) or its [[candidates.class]] tables.
            let mut classes: Vec<(Option<String>, f64, f64, f64)> = Vec::new();
            let range_text = format!(
                "a positive distance in km, at most {:e}",
                limits::MAX_DISTANCE
            );
            let mut class = |name: Option<String>,
                             range: &Spanned<f64>,
                             fixed: &Spanned<f64>,
                             per_km: &Spanned<f64>|
             -> Result<(), InputError> {
                let r = self.number(range, "range", distance, &range_text)?;
                let f = self.number(fixed, "fixed_cost", cost, &cost_text)?;
                let k = self.number(per_km, "cost_per_km", cost, &cost_text)?;
                if f + k * r > limits::MAX_COST {
                    return Err(self.err(
                        per_km,
                        format!(
                            "fixed_cost + cost_per_km · range = {:e}; expected a link cost of at \
                             most {:e}",
                            f + k * r,
                            limits::MAX_COST
                        ),
                    ));
                }
                classes.push((name, r, f, k));
                Ok(())
            };
            match (
                &cand.range,
                &cand.fixed_cost,
                &cand.cost_per_km,
                cand.class.is_empty(),
            ) {
                (Some(r), Some(f), Some(k), true) => class(None, r, f, k)?,
                (None, None, None, false) => {
                    let mut names: HashMap<String, usize> = HashMap::new();
                    for cl in &cand.class {
                        let c = cl.get_ref();
                        let name = c.name.get_ref().clone();
                        self.id(&c.name, "class")?;
                        if let Some(line) =
                            names.insert(name.clone(), self.lines.line(c.name.span().start))
                        {
                            return Err(self.err(
                                &c.name,
                                format!("duplicate class name \"{name}\" (also on line {line}); expected each [[candidates.class]] name once"),
                            ));
                        }
                        class(Some(name), &c.range, &c.fixed_cost, &c.cost_per_km)?;
                    }
                }
                _ => {
                    return Err(self.err(
                        c,
                        "[candidates]: expected either `range`, `fixed_cost` and `cost_per_km`, or one or more [[candidates.class]] tables (each with `name`, `range`, `fixed_cost`, `cost_per_km`), not both",
                    ));
                }
            }
            if nodes.iter().all(|n| n.position.is_none()) {
                return Err(self.err(c, "[candidates] needs unit positions; expected `position = [x, y]` (km) or `lat_lon = [latitude, longitude]` (degrees) on the [[node]] entries"));
            }
            for a in 0..nodes.len() {
                for b in a + 1..nodes.len() {
                    let Some(dist) = nodes[a].distance_km(&nodes[b]) else {
                        continue;
                    };
                    let pair = format!("{}<->{}", nodes[a].id, nodes[b].id);
                    let reverse = format!("{}<->{}", nodes[b].id, nodes[a].id);
                    if ids.contains_key(&pair) || ids.contains_key(&reverse) {
                        continue;
                    }
                    for (name, range, fixed, per_km) in &classes {
                        if dist > *range {
                            continue;
                        }
                        let id = match name {
                            None => pair.clone(),
                            Some(n) => format!("{pair}:{n}"),
                        };
                        if ids.contains_key(&id) {
                            continue;
                        }
                        links.push(Link {
                            id,
                            ends: Ends::TwoWay(NodeId(a as u32), NodeId(b as u32)),
                            cost: fixed + per_km * dist,
                            weight: gains.link_weight,
                            installed: false,
                            required: false,
                            generated: true,
                        });
                    }
                }
            }
        }
        Ok(links)
    }

    fn link(
        &self,
        raw: &Spanned<RawLink>,
        index: &HashMap<&str, NodeId>,
        gains: &Gains,
    ) -> Result<Link, InputError> {
        let l = raw.get_ref();
        let node = |name: &Spanned<String>| -> Result<NodeId, InputError> {
            index.get(name.get_ref().as_str()).copied().ok_or_else(|| {
                self.err(
                    name,
                    format!(
                        "unknown unit \"{}\"; expected the id of a [[node]]",
                        name.get_ref()
                    ),
                )
            })
        };
        let (ends, default_id) = match (&l.between, &l.from, &l.to) {
            (Some(between), None, None) => {
                let [a, b] = between.get_ref().as_slice() else {
                    return Err(self.err(between, "between: expected exactly two unit ids"));
                };
                let (na, nb) = (node(a)?, node(b)?);
                if na == nb {
                    return Err(self.err(between, "between: expected two different units"));
                }
                (
                    Ends::TwoWay(na, nb),
                    format!("{}<->{}", a.get_ref(), b.get_ref()),
                )
            }
            (None, Some(from), Some(to)) => {
                let (nf, nt) = (node(from)?, node(to)?);
                if nf == nt {
                    return Err(self.err(to, "expected `from` and `to` to be different units"));
                }
                (
                    Ends::OneWay { from: nf, to: nt },
                    format!("{}->{}", from.get_ref(), to.get_ref()),
                )
            }
            _ => return Err(self.err(
                raw,
                "expected either `between = [a, b]` (two-way) or both `from` and `to` (one-way)",
            )),
        };
        let Some(cost) = &l.cost else {
            return Err(self.err(raw, "missing `cost`; expected a cost ≥ 0"));
        };
        let cost = self.number(
            cost,
            "cost",
            |x| (0.0..=limits::MAX_COST).contains(&x),
            &format!("a finite cost from 0 to {:e}", limits::MAX_COST),
        )?;
        let weight = self.optional(
            &l.weight,
            "weight",
            gains.link_weight,
            |x| x > 0.0 && x <= limits::MAX_GAIN,
            &format!("a positive number ≤ {:e}", limits::MAX_GAIN),
        )?;
        if let Some(at) = &l.weight {
            self.coupling(at, gains.flow_coupling, weight)?;
        }
        let id = match &l.id {
            Some(id) => {
                self.id(id, "link")?;
                id.get_ref().clone()
            }
            None => default_id,
        };
        let required = l.required.as_ref().is_some_and(|r| *r.get_ref());
        if let (Some(at), true) = (&l.required, l.installed && required) {
            return Err(self.err(
                at,
                "a link cannot be both `installed` (in place, costs 0) and `required` (to be built, at its cost); expected one of them",
            ));
        }
        Ok(Link {
            id,
            ends,
            cost,
            weight,
            installed: l.installed,
            required,
            generated: false,
        })
    }
}

#[cfg(test)]
mod geo_tests {
    use super::*;
    use std::f64::consts::PI;

    /// Rosetta Code, task "Haversine formula" (a published worked example):
    /// from (36.12, -86.67) to (33.94, -118.40) the distance is
    /// 2886.44444283798… km on a sphere of radius 6371.0 km and
    /// 2887.25995060711… km at 6372.8 km.
    #[test]
    fn published_worked_example() {
        let (a, b) = ([36.12, -86.67], [33.94, -118.40]);
        assert!((haversine_km(a, b, 6371.0) - 2_886.444_442_837_98).abs() < 1e-6);
        assert!((haversine_km(a, b, 6372.8) - 2_887.259_950_607_11).abs() < 1e-6);
    }

    /// Closed forms on a sphere: a quarter meridian is πR/2, one degree of
    /// the equator πR/180, antipodes πR, a point to itself 0.
    #[test]
    fn closed_forms() {
        let r = EARTH_RADIUS_KM;
        assert!((haversine_km([0.0, 0.0], [90.0, 0.0], r) - PI * r / 2.0).abs() < 1e-9);
        assert!((haversine_km([0.0, 10.0], [0.0, 11.0], r) - PI * r / 180.0).abs() < 1e-9);
        // Antipodes: h rounds to 1 within 1e-16, so a metre of slack.
        assert!((haversine_km([10.0, 20.0], [-10.0, -160.0], r) - PI * r).abs() < 1e-3);
        assert_eq!(haversine_km([45.0, 7.0], [45.0, 7.0], r), 0.0);
    }

    /// The drawing projection keeps short north–south and east–west
    /// distances at the mean latitude (within 0.1 % over a few km).
    #[test]
    fn projection_keeps_short_distances() {
        let pts = [[60.0, 10.0], [60.02, 10.0], [60.0, 10.05]];
        let xy = project(&pts);
        for (i, j) in [(0, 1), (0, 2)] {
            let flat = (xy[i][0] - xy[j][0]).hypot(xy[i][1] - xy[j][1]);
            let sphere = haversine_km(pts[i], pts[j], EARTH_RADIUS_KM);
            assert!((flat - sphere).abs() < 1e-3 * sphere, "{flat} {sphere}");
        }
    }
}
