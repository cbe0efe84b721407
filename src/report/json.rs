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
    let mut tree = serde_json::to_value(&wrapped).map_err(io::Error::other)?;
    positive_zero(&mut tree);
    // serde_json hands back the original io::Error (kind kept) for write failures.
    serde_json::to_writer_pretty(&mut *out, &tree).map_err(io::Error::from)?;
    writeln!(out)
}

/// Replaces every negative zero by 0 (round-off such as `-0.0` in a
/// direction carries no information and reads as a sign). Other numbers
/// keep full precision; keys keep their order.
fn positive_zero(v: &mut serde_json::Value) {
    use serde_json::Value;
    match v {
        Value::Number(n) if n.as_f64().is_some_and(|x| x == 0.0 && x.is_sign_negative()) => {
            *v = Value::from(0.0);
        }
        Value::Array(items) => items.iter_mut().for_each(positive_zero),
        Value::Object(map) => map.values_mut().for_each(positive_zero),
        _ => {}
    }
}
