//! JSON output: the report structs serialised with serde, cautions attached.

use super::CAUTIONS;
use serde::Serialize;
use std::io::{self, Write};

#[derive(Serialize)]
struct WithCautions<'a, T: Serialize> {
    #[serde(flatten)]
    body: &'a T,
    cautions: &'a [&'a str],
}

/// Writes `value` as pretty JSON with a `cautions` list, then a newline.
///
/// # Errors
/// Any I/O error of `out`.
pub fn write<T: Serialize>(value: &T, out: &mut impl Write) -> io::Result<()> {
    let wrapped = WithCautions {
        body: value,
        cautions: &CAUTIONS,
    };
    // serde_json hands back the original io::Error (kind kept) for write failures.
    serde_json::to_writer_pretty(&mut *out, &wrapped).map_err(io::Error::from)?;
    writeln!(out)
}
