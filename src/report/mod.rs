//! Output writers: one module per format, all generic over `io::Write`.

pub mod chart;
pub mod dot;
pub mod html;
pub mod json;
pub mod map;
pub mod number;
pub mod svg;
pub mod text;

/// Cautions printed with every result.
pub const CAUTIONS: [&str; 3] = [
    "Verdicts, levels and certified rates hold for the recorded logs and the estimator model only; a different operating period can excite the units differently, and measurement noise or model mismatch are outside the certificate.",
    "Validate the chosen links in the field before relying on the estimates.",
    "Radio links, masts and grid connections must follow local codes, spectrum licensing and licensed practice; exmesh does not replace them.",
];
