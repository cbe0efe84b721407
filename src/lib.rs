//! exmesh plans radio links between field units that each run a hybrid
//! gradient estimator of one shared parameter vector, so that every
//! estimate provably converges.
//!
//! The pipeline runs one way: [`problem::load`] → [`ExcitationTable::build`]
//! → [`analysis::check`] → [`report`].
//!
//! # Examples
//! A two-unit network where each unit excites only one direction of a
//! two-parameter vector; alone neither is excited, linked they are.
//! ```
//! use exmesh::{analysis, problem, ExcitationTable};
//! use std::path::Path;
//!
//! let toml = r#"
//! [network]
//! parameters = 2
//! window = 2.0
//! [[node]]
//! id = "east"
//! log = "east.csv"
//! [[node]]
//! id = "west"
//! log = "west.csv"
//! [[link]]
//! between = ["east", "west"]
//! cost = 10.0
//! "#;
//! let read = |p: &Path| -> std::io::Result<Vec<u8>> {
//!     let col = if p.ends_with("east.csv") { "1,0" } else { "0,1" };
//!     Ok((0..=40).map(|k| format!("{},0,{col}\n", k as f64 * 0.1))
//!         .fold("t,j,psi1,psi2\n".to_string(), |s, r| s + &r)
//!         .into_bytes())
//! };
//! let p = problem::load_with(Path::new("demo.toml"), toml, &read).unwrap();
//! let table = ExcitationTable::build(&p);
//! let alone = analysis::check(&p, &table, &problem::LinkSet::default());
//! assert!(!alone.condition_holds);
//! let linked = analysis::check(&p, &table, &p.all_links());
//! assert!(linked.condition_holds);
//! assert_eq!(linked.source_components[0].nodes, ["east", "west"]);
//! ```
#![deny(missing_docs)]
#![forbid(unsafe_code)]

pub mod analysis;
pub mod certify;
pub mod error;
pub mod excitation;
pub mod family;
pub mod limits;
pub mod plan;
pub mod problem;
pub mod progress;
pub mod report;
pub mod rng;
pub mod signal;
pub mod simulate;
pub mod suggest;
pub mod synth;
pub mod topology;
pub mod whatif;

pub use error::InputError;
pub use excitation::ExcitationTable;
pub use problem::{LinkSet, Problem};
