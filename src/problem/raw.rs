//! Raw problem-file structures, exactly as written in TOML (first stage of
//! the two-stage input). Validation turns them into a [`super::Problem`].

use serde::Deserialize;
use toml::Spanned;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawProblem {
    pub network: RawNetwork,
    #[serde(default)]
    pub estimator: RawEstimator,
    #[serde(default, rename = "node")]
    pub nodes: Vec<RawNode>,
    #[serde(default, rename = "link")]
    pub links: Vec<Spanned<RawLink>>,
    pub candidates: Option<Spanned<RawCandidates>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawNetwork {
    #[serde(default)]
    pub name: String,
    pub parameters: Spanned<i64>,
    pub window: Spanned<f64>,
    pub window_kind: Option<Spanned<String>>,
    pub stride: Option<Spanned<f64>>,
    pub min_excitation: Option<Spanned<f64>>,
    pub target_rate: Option<Spanned<f64>>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawEstimator {
    pub flow_gain: Option<Spanned<f64>>,
    pub jump_gain: Option<Spanned<f64>>,
    pub flow_coupling: Option<Spanned<f64>>,
    pub jump_coupling: Option<Spanned<f64>>,
    pub link_weight: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawNode {
    pub id: Spanned<String>,
    pub log: Spanned<String>,
    pub position: Option<Spanned<Vec<f64>>>,
    pub lat_lon: Option<Spanned<Vec<f64>>>,
    pub max_links: Option<Spanned<i64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawLink {
    pub id: Option<Spanned<String>>,
    pub between: Option<Spanned<Vec<Spanned<String>>>>,
    pub from: Option<Spanned<String>>,
    pub to: Option<Spanned<String>>,
    pub cost: Option<Spanned<f64>>,
    pub weight: Option<Spanned<f64>>,
    #[serde(default)]
    pub installed: bool,
    pub required: Option<Spanned<bool>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawCandidates {
    pub range: Option<Spanned<f64>>,
    pub fixed_cost: Option<Spanned<f64>>,
    pub cost_per_km: Option<Spanned<f64>>,
    #[serde(default)]
    pub class: Vec<Spanned<RawClass>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawClass {
    pub name: Spanned<String>,
    pub range: Spanned<f64>,
    pub fixed_cost: Spanned<f64>,
    pub cost_per_km: Spanned<f64>,
}
