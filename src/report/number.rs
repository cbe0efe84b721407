//! Numbers as a reader sees them on screens, in pictures and in the HTML
//! report: decimal notation with a fixed number of significant digits
//! (powers of ten written `1.234×10⁻⁶` outside 0.001 to 1,000,000),
//! thousands separators, round-off below [`FLOOR`] shown as 0 and never a
//! negative zero. Bounds round on their safe side: a proven lower bound or
//! a certified rate rounds down, an upper bound (a transient factor, a gap)
//! rounds up, so the printed figure is still proven. JSON keeps full
//! precision (only a negative zero becomes 0, see [`super::json`]).

/// Magnitudes below this print as 0: round-off of quantities whose scale
/// is 1e-9 or more (levels, directions, rates within the accepted ranges
/// of docs/formats.md).
pub const FLOOR: f64 = 1e-12;

/// Which way a figure may be rounded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Round {
    /// To the nearest printed figure (measured values, estimates).
    Nearest,
    /// Never below the value (upper bounds).
    Up,
    /// Never above the value (lower bounds, certified rates).
    Down,
}

/// `x` with at most `digits` significant digits (trailing zeros dropped),
/// rounded as `round` says.
pub fn sig(x: f64, digits: usize, round: Round) -> String {
    if x.is_nan() {
        return "NaN".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "∞" } else { "-∞" }.into();
    }
    if x.abs() < FLOOR {
        return "0".into();
    }
    let digits = digits.max(1) as i32;
    let mut e = x.abs().log10().floor() as i32;
    // Rounding can carry into the next power of ten (9.9996 → 10.00).
    let mut rounded = round_at(x, digits - 1 - e, round);
    if rounded != 0.0 && rounded.abs().log10().floor() as i32 > e {
        e += 1;
        rounded = round_at(x, digits - 1 - e, round);
    }
    if (-3..6).contains(&e) {
        let decimals = (digits - 1 - e).max(0) as usize;
        group(&trim(format!("{:.decimals$}", rounded)))
    } else {
        let mantissa = rounded / 10f64.powi(e);
        let decimals = (digits - 1) as usize;
        format!(
            "{}×10{}",
            trim(format!("{:.decimals$}", mantissa)),
            superscript(e)
        )
    }
}

/// Drops trailing zeros after a decimal point (and the point itself).
fn trim(s: String) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// `x` rounded to `decimals` decimal places (negative: to tens, hundreds…).
fn round_at(x: f64, decimals: i32, round: Round) -> f64 {
    let scale = 10f64.powi(decimals);
    let y = x * scale;
    let r = match round {
        Round::Nearest => y.round(),
        Round::Up => y.ceil(),
        Round::Down => y.floor(),
    };
    let v = r / scale;
    if v == 0.0 { 0.0 } else { v }
}

/// Inserts thousands separators into the integer part of a decimal string.
fn group(s: &str) -> String {
    let (sign, body) = match s.strip_prefix('-') {
        Some(b) => ("-", b),
        None => ("", s),
    };
    let (int, frac) = match body.find('.') {
        Some(i) => (&body[..i], &body[i..]),
        None => (body, ""),
    };
    let mut out = String::new();
    for (k, c) in int.chars().enumerate() {
        if k > 0 && (int.len() - k).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    // A value that rounds to zero keeps no sign.
    let zero = int.bytes().all(|b| b == b'0') && frac.bytes().all(|b| b == b'0' || b == b'.');
    format!("{}{out}{frac}", if zero { "" } else { sign })
}

fn superscript(e: i32) -> String {
    e.to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
}

/// A cost: whole numbers without decimals, others with two, thousands
/// separated (`6,500`, `1,150.50`).
pub fn cost(c: f64, round: Round) -> String {
    if !c.is_finite() {
        return sig(c, 4, round);
    }
    let cents = round_at(c, 2, round);
    if (cents - cents.round()).abs() < 1e-9 {
        group(&format!("{:.0}", cents.round()))
    } else {
        group(&format!("{cents:.2}"))
    }
}

/// An excitation level or similar measured quantity: 4 significant digits.
pub fn level(x: f64) -> String {
    sig(x, 4, Round::Nearest)
}

/// Levels below this share of μ_req print as 0: eigenvalue round-off of
/// a rank-deficient Gramian (about machine precision times its largest
/// eigenvalue) lands there, and the verdict is "not excited" either way.
pub const LEVEL_FLOOR: f64 = 1e-9;

/// An excitation level next to the required one `mu`: round-off below
/// [`LEVEL_FLOOR`]·μ_req prints as 0.
pub fn level_vs(x: f64, mu: f64) -> String {
    if x.abs() < LEVEL_FLOOR * mu.abs() {
        "0".into()
    } else {
        level(x)
    }
}

/// A certified rate (a proven lower bound on the decay): rounded down, with
/// its time constant (rounded up): `0.04483 1/s (time constant 22.31 s)`.
pub fn rate(r: f64) -> String {
    if r <= 0.0 || !r.is_finite() {
        return format!("{} 1/s", sig(r, 4, Round::Down));
    }
    format!(
        "{} 1/s (time constant {} s)",
        sig(r, 4, Round::Down),
        sig(1.0 / r, 4, Round::Up)
    )
}

/// A rate given by the user or estimated (no bound): nearest, with its time
/// constant.
pub fn rate_nearest(r: f64) -> String {
    if r <= 0.0 || !r.is_finite() {
        return format!("{} 1/s", sig(r, 4, Round::Nearest));
    }
    format!(
        "{} 1/s (time constant {} s)",
        sig(r, 4, Round::Nearest),
        sig(1.0 / r, 4, Round::Nearest)
    )
}

/// A fraction as a percentage with two decimals, rounded as `round` says.
pub fn percent(f: f64, round: Round) -> String {
    format!("{} %", fixed(100.0 * f, 2, round))
}

/// `x` with `decimals` decimals, round-off shown as 0 without a sign.
pub fn fixed(x: f64, decimals: usize, round: Round) -> String {
    if !x.is_finite() {
        return sig(x, 4, round);
    }
    let v = if x.abs() < FLOOR {
        0.0
    } else {
        round_at(x, decimals as i32, round)
    };
    group(&format!("{v:.decimals$}"))
}

/// "1 link", "2 links": `count` with the singular or plural noun.
pub fn count(n: usize, singular: &str, plural: &str) -> String {
    format!("{n} {}", if n == 1 { singular } else { plural })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits_in_decimal_notation() {
        assert_eq!(sig(4.639_5, 4, Round::Nearest), "4.64");
        assert_eq!(sig(0.024_784, 4, Round::Nearest), "0.02478");
        assert_eq!(sig(12.638, 4, Round::Nearest), "12.64");
        assert_eq!(sig(43_724.852_5, 4, Round::Up), "43,730");
        assert_eq!(sig(43_724.852_5, 4, Round::Down), "43,720");
        assert_eq!(sig(1_911_862_724.7, 4, Round::Up), "1.912×10⁹");
        assert_eq!(sig(2.5e-7, 3, Round::Nearest), "2.5×10⁻⁷");
        assert_eq!(sig(9.999_6, 4, Round::Nearest), "10");
        assert_eq!(sig(-2.2e-15, 4, Round::Nearest), "0");
        assert_eq!(sig(-0.5, 2, Round::Nearest), "-0.5");
    }

    #[test]
    fn bounds_round_on_their_safe_side() {
        for &x in &[0.044_839_1, 5199.996, 1.000_01, 123_456.7] {
            let down: f64 = sig(x, 4, Round::Down).replace(',', "").parse().unwrap();
            let up: f64 = sig(x, 4, Round::Up).replace(',', "").parse().unwrap();
            assert!(down <= x && x <= up, "{x}: {down} {up}");
        }
        assert_eq!(cost(5199.996, Round::Down), "5,199.99");
        assert_eq!(cost(5200.0, Round::Down), "5,200");
        assert_eq!(percent(0.200_001, Round::Up), "20.01 %");
    }

    #[test]
    fn no_negative_zero() {
        assert_eq!(fixed(-0.000_1, 3, Round::Nearest), "0.000");
        assert_eq!(fixed(-1e-16, 3, Round::Nearest), "0.000");
        assert_eq!(fixed(-0.4521, 3, Round::Nearest), "-0.452");
        assert_eq!(cost(-0.0, Round::Nearest), "0");
    }

    #[test]
    fn rates_carry_their_time_constant() {
        assert_eq!(rate(0.044_839), "0.04483 1/s (time constant 22.31 s)");
        assert_eq!(count(1, "link", "links"), "1 link");
        assert_eq!(level_vs(2.2e-12, 0.05), "0");
        assert_eq!(level_vs(2.2e-3, 0.05), "0.0022");
        assert_eq!(count(3, "link", "links"), "3 links");
    }
}
