//! SI values: plain numbers or strings with an SI prefix ("22u", "4.7n", "1M").
//!
//! Parsing is exact in the sense that matters: `"22u"` is turned into the
//! text `"22e-6"` and parsed once by Rust's correctly rounded float parser,
//! so it yields the same `f64` as the literal `22e-6` (multiplying by a
//! prefix factor would not always do that).

use serde::{Deserialize, Deserializer, Serializer};

/// Why a value string was rejected.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("invalid value {text:?}: {reason}")]
pub struct ValueError {
    /// The text as written.
    pub text: String,
    /// What is wrong with it, in plain words.
    pub reason: &'static str,
}

/// The SI prefixes accepted after a number, with their exponent.
///
/// `M` is mega and `m` is milli; `u` and `µ` (micro sign U+00B5) and `μ`
/// (Greek mu U+03BC) all mean micro.
pub const PREFIXES: &[(&str, i32)] = &[
    ("T", 12),
    ("G", 9),
    ("M", 6),
    ("k", 3),
    ("m", -3),
    ("u", -6),
    ("µ", -6),
    ("μ", -6),
    ("n", -9),
    ("p", -12),
    ("f", -15),
];

/// Parses a value written as a number with an optional SI prefix.
///
/// Accepts `"22u"`, `"22µ"`, `"4.7n"`, `"200k"`, `"1M"` (mega), `"1m"`
/// (milli), `"1e-6"`, `"-3.3"`. Rejects empty text, trailing junk such as a
/// unit (`"5x"`, `"5V"`), several points (`"1.2.3"`) and non-finite values
/// (`"NaN"`, `"inf"`).
///
/// # Errors
///
/// Returns [`ValueError`] with the text and the reason.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::parse_si;
/// assert_eq!(parse_si("22u").unwrap(), 22e-6);
/// assert_eq!(parse_si("1M").unwrap(), 1e6);
/// assert!(parse_si("5x").is_err());
/// ```
pub fn parse_si(text: &str) -> Result<f64, ValueError> {
    let err = |reason| ValueError {
        text: text.to_string(),
        reason,
    };
    let t = text.trim();
    if t.is_empty() {
        return Err(err("empty"));
    }
    let (number, exp) = match PREFIXES.iter().find(|(p, _)| t.ends_with(p)) {
        Some((p, e)) => (&t[..t.len() - p.len()], *e),
        None => (t, 0),
    };
    // Only a plain decimal number (optionally with an exponent) may stand
    // before the prefix; Rust's parser would also take "inf" and "NaN".
    let ok_chars = number
        .chars()
        .all(|c| c.is_ascii_digit() || matches!(c, '.' | 'e' | 'E' | '+' | '-'));
    if number.is_empty() || !ok_chars || !number.chars().any(|c| c.is_ascii_digit()) {
        return Err(err(
            "expected a number with an optional SI prefix (T G M k m u µ n p f)",
        ));
    }
    if exp != 0 && number.contains(['e', 'E']) {
        return Err(err("an exponent and an SI prefix cannot be combined"));
    }
    let full = if exp == 0 {
        number.to_string()
    } else {
        format!("{number}e{exp}")
    };
    let v: f64 = full
        .parse()
        .map_err(|_| err("expected a number with an optional SI prefix (T G M k m u µ n p f)"))?;
    if !v.is_finite() {
        return Err(err("value is not finite"));
    }
    Ok(v)
}

#[derive(Deserialize)]
#[serde(untagged)]
enum Raw {
    Num(f64),
    Text(String),
}

fn from_raw<E: serde::de::Error>(raw: Raw) -> Result<f64, E> {
    match raw {
        Raw::Num(v) if v.is_finite() => Ok(v),
        Raw::Num(v) => Err(E::custom(format!("value {v} is not finite"))),
        Raw::Text(s) => parse_si(&s).map_err(E::custom),
    }
}

/// Serde helper: deserialize an `f64` from a number or an SI string.
pub fn de<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    from_raw(
        Raw::deserialize(d).map_err(|_| {
            serde::de::Error::custom("expected a number or a string such as \"22u\"")
        })?,
    )
}

/// Serde helper: like [`de`] for an optional field.
pub fn de_opt<'de, D: Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
    match Option::<Raw>::deserialize(d)
        .map_err(|_| serde::de::Error::custom("expected a number or a string such as \"22u\""))?
    {
        None => Ok(None),
        Some(r) => from_raw(r).map(Some),
    }
}

/// Serde helper: serialize an `f64` as a plain JSON number (shortest text
/// that reads back to the same bits).
pub fn ser<S: Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_f64(*v)
}

/// JSON Schema stand-in for an SI value: a number or a prefixed string.
#[derive(schemars::JsonSchema)]
#[serde(untagged)]
#[allow(dead_code)]
pub(crate) enum SiValue {
    /// A plain number in SI units.
    Number(f64),
    /// A number with an optional SI prefix, e.g. "22u", "4.7n", "1M".
    Text(String),
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_of_good_and_bad_strings() {
        let good: &[(&str, f64)] = &[
            ("22u", 22e-6),
            ("22µ", 22e-6),
            ("22μ", 22e-6),
            ("4.7n", 4.7e-9),
            ("200k", 200e3),
            ("1M", 1e6),
            ("1m", 1e-3),
            ("1e-6", 1e-6),
            ("-3.3", -3.3),
            ("0.5", 0.5),
            (".5p", 0.5e-12),
            ("10", 10.0),
            (" 12 ", 12.0),
            ("1.5G", 1.5e9),
            ("2T", 2e12),
            ("3f", 3e-15),
        ];
        for (s, v) in good {
            assert_eq!(parse_si(s).unwrap(), *v, "{s}");
        }
        for s in [
            "1.2.3", "5x", "", "NaN", "inf", "-inf", "5V", "u", "1e", "1e3k", "k1", "1 k 2", "--1",
        ] {
            assert!(parse_si(s).is_err(), "{s:?} should be rejected");
        }
    }

    #[test]
    fn prefixed_value_matches_literal_bits() {
        // 4.7 * 1e-9 != 4.7e-9 in floating point; the parser must give the literal.
        assert_eq!(parse_si("4.7n").unwrap().to_bits(), 4.7e-9f64.to_bits());
        assert_eq!(parse_si("0.1u").unwrap().to_bits(), 0.1e-6f64.to_bits());
    }
}
