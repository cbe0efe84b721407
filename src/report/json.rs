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

#[cfg(test)]
mod tests {
    /// A negative zero (round-off in a direction) is written as 0.0; other
    /// numbers keep full precision and keys keep their order.
    #[test]
    fn negative_zero_is_written_as_zero() {
        #[derive(serde::Serialize)]
        struct Sample {
            zeta: Vec<f64>,
            alpha: f64,
        }
        let mut out = Vec::new();
        super::write(
            &Sample {
                zeta: vec![-0.0, 0.1 + 0.2, -1e-300],
                alpha: -0.0,
            },
            &mut out,
        )
        .unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(!text.contains("-0.0"), "{text}");
        assert!(text.contains("0.30000000000000004"), "{text}");
        assert!(text.contains("-1e-300"), "{text}");
        assert!(text.find("zeta").unwrap() < text.find("alpha").unwrap());
    }
}
