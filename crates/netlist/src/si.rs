//! SI values for people and for files: the one formatter of every number
//! fluxstep prints for a reader, and the serde helpers that read values
//! written with SI prefixes.
//!
//! The formatters live here, in the lowest crate that needs them, so that
//! every crate above (solver, analysis, plot, report, the command line)
//! prints a value the same way:
//!
//! - [`format_si_digits`]: a fixed count of significant digits, trailing
//!   zeros kept, so a column of numbers reads at one precision;
//!   [`format_si`] is the same with three digits (figure annotations).
//! - [`format_si_short`]: up to four digits with trailing zeros dropped,
//!   for settings a person typed ("200 kHz", "50 ns") and for durations in
//!   sentences.
//! - [`format_si_instant`]: an instant of a run with enough digits to find
//!   it again in a long run ("73.21005 ms").
//! - [`si_scale`] and [`format_fixed`]: the pieces a caller needs to label
//!   an axis in one prefix.
//!
//! Reading goes the other way: [`crate::parse_si`] and the serde helpers
//! [`de`], [`de_opt`] and [`ser`] for crates that embed SI fields of their
//! own.
//!
//! # Example
//!
//! ```
//! use fluxstep_netlist::si::{format_si_digits, format_si_instant, format_si_short};
//!
//! assert_eq!(format_si_digits(1.83885e-2, "V", 4), "18.39 mV");
//! assert_eq!(format_si_short(200e3, "Hz"), "200 kHz");
//! assert_eq!(format_si_instant(73.21005e-3), "73.21005 ms");
//! ```

pub use crate::value::{de, de_opt, ser};

/// SI prefixes from femto to tera as (power of ten, symbol). Circuit
/// quantities outside this span are shown with an exponent (formatters) or
/// the nearest end prefix ([`si_scale`]).
const DISPLAY_PREFIXES: [(i32, &str); 10] = [
    (-15, "f"),
    (-12, "p"),
    (-9, "n"),
    (-6, "µ"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
    (12, "T"),
];

/// Significant digits of [`format_si_instant`]: at least six decimals in
/// the chosen prefix (1 ns in a run of milliseconds), far above the
/// rounding noise of an instant (about 1e-16 of it).
const INSTANT_DIGITS: usize = 9;

/// The SI prefix that shows `max_abs` with one to three digits before the
/// decimal point.
///
/// Returns `(factor, prefix)`: multiply a value in base units by `factor`
/// to get it in prefixed units. Zero, negative and non-finite inputs give
/// `(1.0, "")`; magnitudes beyond the prefixes take the nearest end one
/// (femto or tera).
///
/// # Example
/// ```
/// use fluxstep_netlist::si::si_scale;
/// assert_eq!(si_scale(50e-6), (1e6, "µ"));
/// assert_eq!(si_scale(0.4), (1e3, "m"));
/// assert_eq!(si_scale(12.0), (1.0, ""));
/// ```
pub fn si_scale(max_abs: f64) -> (f64, &'static str) {
    if !(max_abs.is_finite() && max_abs > 0.0) {
        return (1.0, "");
    }
    // Compare against powers of ten rather than taking floor(log10): log10
    // of 1e-3 may round to just below -3 and pick µ for exactly 1 ms.
    let mut chosen = DISPLAY_PREFIXES[0];
    for &(exp, sym) in &DISPLAY_PREFIXES {
        if max_abs >= 10f64.powi(exp) * (1.0 - 1e-9) {
            chosen = (exp, sym);
        }
    }
    (10f64.powi(-chosen.0), chosen.1)
}

/// `value` with `decimals` places, never "-0" (a tiny negative value
/// rounded to zero is written "0.00", not "-0.00").
///
/// # Example
/// ```
/// use fluxstep_netlist::si::format_fixed;
/// assert_eq!(format_fixed(-0.0001, 2), "0.00");
/// assert_eq!(format_fixed(3.0 * 0.1, 1), "0.3");
/// ```
pub fn format_fixed(value: f64, decimals: usize) -> String {
    let s = format!("{value:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// A value with three significant digits and an SI prefix: `0.4, "A"` →
/// `"400 mA"`, `2.0, "A"` → `"2.00 A"`. The same as
/// [`format_si_digits`] with three digits; figures use it.
///
/// # Example
/// ```
/// use fluxstep_netlist::si::format_si;
/// assert_eq!(format_si(0.4, "A"), "400 mA");
/// assert_eq!(format_si(-12.0, "V"), "-12.0 V");
/// ```
pub fn format_si(value: f64, unit: &str) -> String {
    format_si_digits(value, unit, 3)
}

/// A value with `digits` significant digits (1 to 15, trailing zeros
/// kept, so that a column of numbers reads at one precision) and the SI
/// prefix that puts the number in [1, 1000): the one formatter of every
/// number fluxstep prints for people. Zero is `"0 A"`; values beyond the
/// prefixes (below 1 f, from 1000 T) are written with an exponent.
///
/// # Example
/// ```
/// use fluxstep_netlist::si::format_si_digits;
/// assert_eq!(format_si_digits(1.99972, "A", 4), "2.000 A");
/// assert_eq!(format_si_digits(1.83885e-2, "V", 4), "18.39 mV");
/// assert_eq!(format_si_digits(4.95e-3, "s", 4), "4.950 ms");
/// assert_eq!(format_si_digits(-0.7, "V", 4), "-700.0 mV");
/// ```
pub fn format_si_digits(value: f64, unit: &str, digits: usize) -> String {
    let digits = digits.clamp(1, 15);
    let gap = |prefix: &str| {
        if unit.is_empty() && prefix.is_empty() {
            ""
        } else {
            " "
        }
    };
    let space = gap("");
    if !value.is_finite() {
        return format!("{value}{space}{unit}");
    }
    if value == 0.0 {
        return format!("0{space}{unit}");
    }
    let (factor, prefix) = si_scale(value.abs());
    let shown = value * factor;
    // One to three digits before the point; rounding can carry into one
    // more (9.9996 → 10.00, 999.96 → 1000): then count again, moving to
    // the next prefix past 999.
    let text = fixed_to_digits(shown, digits);
    let magnitude: f64 = text
        .trim_start_matches('-')
        .parse()
        .unwrap_or(f64::INFINITY);
    if (1.0..1000.0).contains(&magnitude) {
        return format!("{text}{}{prefix}{unit}", gap(prefix));
    }
    if (1000.0..1.0e6).contains(&magnitude) {
        // 999.96 m rounds to 1000 m: the next prefix shows it as 1.000.
        let (f2, p2) = si_scale(value.abs() * 1.001);
        let next = value * f2;
        if (0.999..1000.0).contains(&next.abs()) {
            return format!("{}{}{p2}{unit}", fixed_to_digits(next, digits), gap(p2));
        }
    }
    format!("{value:.prec$e}{space}{unit}", prec = digits - 1)
}

/// `v` (expected in [1, 1000) by magnitude) with `digits` significant
/// digits in fixed notation.
fn fixed_to_digits(v: f64, digits: usize) -> String {
    let mut int_digits = if v.abs() >= 100.0 {
        3
    } else if v.abs() >= 10.0 {
        2
    } else {
        1
    };
    loop {
        let decimals = digits.saturating_sub(int_digits);
        let text = format_fixed(v, decimals);
        let whole = text.trim_start_matches('-').split('.').next().unwrap_or("");
        if whole.len() <= int_digits || int_digits >= 4 {
            return text;
        }
        int_digits = whole.len();
    }
}

/// [`format_si_digits`] with the trailing zeros of the number (or of its
/// mantissa, in exponent notation) dropped, and a point left bare.
fn format_si_trimmed(value: f64, unit: &str, digits: usize) -> String {
    fn trim(digits: &str) -> &str {
        if digits.contains('.') {
            digits.trim_end_matches('0').trim_end_matches('.')
        } else {
            digits
        }
    }
    let text = format_si_digits(value, unit, digits);
    let (number, rest) = text.split_once(' ').unwrap_or((text.as_str(), ""));
    let number = match number.split_once('e') {
        Some((mantissa, exponent)) => format!("{}e{exponent}", trim(mantissa)),
        None => trim(number).to_string(),
    };
    if rest.is_empty() {
        number
    } else {
        format!("{number} {rest}")
    }
}

/// A value with up to four significant digits, trailing zeros dropped,
/// and an SI prefix: for settings a person typed ("200 kHz", "4.95 ms",
/// "50 ns"), where trailing zeros would suggest a precision that was
/// never there, and for durations and margins in sentences.
///
/// # Example
/// ```
/// use fluxstep_netlist::si::format_si_short;
/// assert_eq!(format_si_short(200e3, "Hz"), "200 kHz");
/// assert_eq!(format_si_short(4.95e-3, "s"), "4.95 ms");
/// assert_eq!(format_si_short(1.0 / 3.0, "s"), "333.3 ms");
/// ```
pub fn format_si_short(value: f64, unit: &str) -> String {
    format_si_trimmed(value, unit, 4)
}

/// An instant `t` (s) with nine significant digits, trailing zeros
/// dropped, and an SI prefix: enough to find an event again in a long run
/// (at least six decimals in the chosen prefix, so 1 ns within a run of
/// milliseconds) while a round instant stays short ("985.05 µs").
///
/// # Example
/// ```
/// use fluxstep_netlist::si::format_si_instant;
/// assert_eq!(format_si_instant(73.21005e-3), "73.21005 ms");
/// assert_eq!(format_si_instant(123.456789e-3), "123.456789 ms");
/// assert_eq!(format_si_instant(5e-6), "5 µs");
/// assert_eq!(format_si_instant(0.0), "0 s");
/// ```
pub fn format_si_instant(t: f64) -> String {
    format_si_trimmed(t, "s", INSTANT_DIGITS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn si_scale_picks_one_to_three_digits() {
        assert_eq!(si_scale(50e-6), (1e6, "µ"));
        assert_eq!(si_scale(1e-3), (1e3, "m"));
        assert_eq!(si_scale(999e-3), (1e3, "m"));
        assert_eq!(si_scale(1.0), (1.0, ""));
        assert_eq!(si_scale(999.0), (1.0, ""));
        assert_eq!(si_scale(1000.0), (1e-3, "k"));
        assert_eq!(si_scale(4.7e-9), (1e9, "n"));
        assert_eq!(si_scale(2.2e6), (1e-6, "M"));
    }

    #[test]
    fn si_scale_clamps_and_rejects_nonsense() {
        assert_eq!(si_scale(1e-20), (1e15, "f"));
        assert_eq!(si_scale(1e20), (1e-12, "T"));
        assert_eq!(si_scale(0.0), (1.0, ""));
        assert_eq!(si_scale(-3.0), (1.0, ""));
        assert_eq!(si_scale(f64::NAN), (1.0, ""));
        assert_eq!(si_scale(f64::INFINITY), (1.0, ""));
    }

    #[test]
    fn fixed_never_writes_minus_zero() {
        assert_eq!(format_fixed(-0.0001, 2), "0.00");
        assert_eq!(format_fixed(-0.0, 0), "0");
        assert_eq!(format_fixed(-0.006, 2), "-0.01");
        assert_eq!(format_fixed(3.0 * 0.1, 1), "0.3");
    }

    #[test]
    fn format_si_keeps_three_digits() {
        assert_eq!(format_si(0.4, "A"), "400 mA");
        assert_eq!(format_si(2.0, "A"), "2.00 A");
        assert_eq!(format_si(12.0, "V"), "12.0 V");
        assert_eq!(format_si(0.0, "W"), "0 W");
        assert_eq!(format_si(0.99996, "A"), "1.00 A");
        assert_eq!(format_si(999.7e-3, "V"), "1.00 V");
    }

    /// Issue 13: one formatter for every number printed for people.
    #[test]
    fn format_si_digits_keeps_a_fixed_precision() {
        assert_eq!(format_si_digits(1.99972, "A", 4), "2.000 A");
        assert_eq!(format_si_digits(1.83885e-2, "V", 4), "18.39 mV");
        assert_eq!(format_si_digits(4.95e-3, "s", 4), "4.950 ms");
        assert_eq!(format_si_digits(9.99996, "V", 4), "10.00 V");
        assert_eq!(format_si_digits(999.96e-3, "V", 4), "1.000 V");
        assert_eq!(format_si_digits(147.044, "V", 4), "147.0 V");
        assert_eq!(format_si_digits(-2.87e-9, "A", 4), "-2.870 nA");
        assert_eq!(format_si_digits(0.0, "A", 4), "0 A");
        assert_eq!(format_si_digits(0.270143, "", 4), "270.1 m");
        assert_eq!(format_si_digits(1e-20, "F", 3), "1.00e-20 F");
        assert_eq!(format_si_digits(f64::NAN, "V", 4), "NaN V");
    }

    #[test]
    fn format_si_short_drops_trailing_zeros() {
        assert_eq!(format_si_short(200e3, "Hz"), "200 kHz");
        assert_eq!(format_si_short(50e-9, "s"), "50 ns");
        assert_eq!(format_si_short(4.95e-3, "s"), "4.95 ms");
        assert_eq!(format_si_short(22e-6, "H"), "22 µH");
        assert_eq!(format_si_short(0.5, ""), "500 m");
        assert_eq!(format_si_short(24.0, "V"), "24 V");
        assert_eq!(format_si_short(-12.0, "V"), "-12 V");
        assert_eq!(format_si_short(1.0 / 3.0, "s"), "333.3 ms");
        assert_eq!(format_si_short(0.0, "V"), "0 V");
        assert_eq!(format_si_short(1e-15, "F"), "1 fF");
        assert_eq!(format_si_short(250e3, "A/s"), "250 kA/s");
    }

    /// A duration in a timing sentence: the difference of two instants
    /// carries rounding noise far below the fourth digit, and a value that
    /// rounds up to the next prefix takes that prefix ("1 µs", not
    /// "1000 ns").
    #[test]
    fn format_si_short_hides_the_noise_of_differences() {
        let shift = (3.7e-3 + 12.5e-9) - 3.7e-3;
        assert_ne!(shift, 12.5e-9, "the difference is not exact");
        assert_eq!(format_si_short(shift, "s"), "12.5 ns");
        assert_eq!(format_si_short(999.96e-9, "s"), "1 µs");
        assert_eq!(format_si_short(f64::INFINITY, "s"), "inf s");
        // Beyond the prefixes: the exponent stays, the zeros go.
        assert_eq!(format_si_short(8e-22, "s"), "8e-22 s");
        assert_eq!(format_si_short(-1.25e-17, "A"), "-1.25e-17 A");
        assert_eq!(format_si_short(3e15, "Hz"), "3e15 Hz");
    }

    #[test]
    fn instants_keep_nine_digits_and_drop_trailing_zeros() {
        assert_eq!(format_si_instant(73.21005e-3), "73.21005 ms");
        assert_eq!(format_si_instant(185.0925e-6), "185.0925 µs");
        assert_eq!(format_si_instant(4.95255e-3), "4.95255 ms");
        // Nine digits: 1 ns inside a run of 123 ms, 10 ps inside 1.2 ms.
        assert_eq!(format_si_instant(0.123456789), "123.456789 ms");
        assert_eq!(format_si_instant(1.23456789e-3), "1.23456789 ms");
        // Rounding noise of k·T stays hidden.
        let t = 197.0 * 5e-6 + 50e-9;
        assert_eq!(format_si_instant(t), "985.05 µs");
        assert_eq!(format_si_instant(2.5), "2.5 s");
        assert_eq!(format_si_instant(5e-12), "5 ps");
        assert_eq!(format_si_instant(0.0), "0 s");
        assert_eq!(format_si_instant(f64::NAN), "NaN s");
    }
}
