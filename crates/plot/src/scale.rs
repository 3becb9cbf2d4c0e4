//! Number formatting for axes: SI prefixes and 1-2-5 tick steps.

/// SI prefixes from femto to tera as (power of ten, symbol). Circuit
/// quantities outside this span are shown with the nearest end prefix.
const PREFIXES: [(i32, &str); 10] = [
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

/// The SI prefix that shows `max_abs` with one to three digits before the
/// decimal point.
///
/// Returns `(factor, prefix)`: multiply a value in base units by `factor`
/// to get it in prefixed units. Zero, negative and non-finite inputs give
/// `(1.0, "")`.
///
/// # Example
/// ```
/// assert_eq!(fluxstep_plot::si_scale(50e-6), (1e6, "µ"));
/// assert_eq!(fluxstep_plot::si_scale(0.4), (1e3, "m"));
/// assert_eq!(fluxstep_plot::si_scale(12.0), (1.0, ""));
/// ```
pub fn si_scale(max_abs: f64) -> (f64, &'static str) {
    if !(max_abs.is_finite() && max_abs > 0.0) {
        return (1.0, "");
    }
    // Compare against powers of ten rather than taking floor(log10): log10
    // of 1e-3 may round to just below -3 and pick µ for exactly 1 ms.
    let mut chosen = PREFIXES[0];
    for &(exp, sym) in &PREFIXES {
        if max_abs >= 10f64.powi(exp) * (1.0 - 1e-9) {
            chosen = (exp, sym);
        }
    }
    (10f64.powi(-chosen.0), chosen.1)
}

/// Tick positions on one axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Ticks {
    /// Distance between neighbouring ticks: 1, 2 or 5 times a power of ten.
    pub step: f64,
    /// Tick positions in increasing order, all inside the requested range.
    pub values: Vec<f64>,
}

/// At most `max_count` ticks inside `[low, high]` on multiples of a 1-2-5
/// step, choosing the smallest such step (hence the most ticks).
///
/// Returns no ticks for an empty, reversed or non-finite range, or one so
/// narrow next to its magnitude that the ticks could not be told apart.
///
/// # Example
/// ```
/// let t = fluxstep_plot::nice_ticks(0.0, 50e-6, 8);
/// assert_eq!(t.values.len(), 6); // 0, 10, 20, 30, 40, 50 µs
/// assert!((t.step - 10e-6).abs() < 1e-18);
/// ```
pub fn nice_ticks(low: f64, high: f64, max_count: usize) -> Ticks {
    let none = Ticks {
        step: 0.0,
        values: Vec::new(),
    };
    let span = high - low;
    if !(low.is_finite() && high.is_finite() && span.is_finite() && span > 0.0) {
        return none;
    }
    let max_count = max_count.max(2);
    // Ticks within the range number at most span/step + 1.
    let rough = span / (max_count - 1) as f64;
    let magnitude = 10f64.powf(rough.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0, 20.0]
        .iter()
        .map(|m| m * magnitude)
        .find(|s| *s >= rough * (1.0 - 1e-12))
        .unwrap_or(20.0 * magnitude);
    let largest = low.abs().max(high.abs()) / step;
    if !(step > 0.0 && step.is_finite()) || largest > 1e12 {
        return none;
    }
    // Integer multiples keep values like 0.3 from drifting as a running sum would.
    let slack = 1e-9;
    let first = (low / step - slack).ceil() as i64;
    let last = (high / step + slack).floor() as i64;
    let values: Vec<f64> = (first..=last)
        .take(max_count + 1)
        .map(|k| k as f64 * step)
        .filter(|v| *v >= low - slack * step && *v <= high + slack * step)
        .collect();
    Ticks { step, values }
}

/// Decimal places that tell apart labels `step` apart (`step` already in
/// display units): 0.2 → 1, 0.05 → 2, 5 → 0.
pub(crate) fn decimals_for_step(step: f64) -> usize {
    if !(step.is_finite() && step > 0.0) {
        return 0;
    }
    let d = (-step.log10() - 1e-9).ceil();
    d.clamp(0.0, 15.0) as usize
}

/// Labels for tick `values` spaced `step` apart, shown multiplied by
/// `factor`. Returns `None` when fixed notation would need more than a
/// handful of digits (magnitudes beyond the SI prefixes, or a step tiny
/// next to the values); the caller then falls back to [`exponent_labels`].
pub(crate) fn fixed_labels(values: &[f64], step: f64, factor: f64) -> Option<Vec<String>> {
    let decimals = decimals_for_step(step * factor);
    let largest = values.iter().fold(0.0f64, |m, v| m.max((v * factor).abs()));
    if decimals > 6 || largest >= 1e6 {
        return None;
    }
    Some(
        values
            .iter()
            .map(|v| format_fixed(v * factor, decimals))
            .collect(),
    )
}

/// Tick labels in exponent notation with just enough digits to tell
/// neighbours `step` apart: `1.5e300`.
pub(crate) fn exponent_labels(values: &[f64], step: f64) -> Vec<String> {
    let largest = values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let digits = if largest > 0.0 && step > 0.0 {
        (largest.log10().floor() - step.log10().floor()).clamp(0.0, 15.0) as usize
    } else {
        0
    };
    values
        .iter()
        .map(|v| {
            if *v == 0.0 {
                "0".to_string()
            } else {
                format!("{v:.digits$e}")
            }
        })
        .collect()
}

/// `value` with `decimals` places, never "-0".
pub(crate) fn format_fixed(value: f64, decimals: usize) -> String {
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
/// assert_eq!(fluxstep_plot::format_si(0.4, "A"), "400 mA");
/// assert_eq!(fluxstep_plot::format_si(-12.0, "V"), "-12.0 V");
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
/// use fluxstep_plot::format_si_digits;
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

/// A value with up to four significant digits, trailing zeros dropped,
/// and an SI prefix: for settings a person typed ("200 kHz", "4.95 ms",
/// "50 ns"), where trailing zeros would suggest a precision that was
/// never there.
///
/// # Example
/// ```
/// use fluxstep_plot::format_si_short;
/// assert_eq!(format_si_short(200e3, "Hz"), "200 kHz");
/// assert_eq!(format_si_short(4.95e-3, "s"), "4.95 ms");
/// assert_eq!(format_si_short(1.0 / 3.0, "s"), "333.3 ms");
/// ```
pub fn format_si_short(value: f64, unit: &str) -> String {
    let text = format_si_digits(value, unit, 4);
    let (number, rest) = text.split_once(' ').unwrap_or((text.as_str(), ""));
    let number = if number.contains('.') && !number.contains('e') {
        number.trim_end_matches('0').trim_end_matches('.')
    } else {
        number
    };
    if rest.is_empty() {
        number.to_string()
    } else {
        format!("{number} {rest}")
    }
}

/// Plain-English name of the quantity measured in `unit`, for axis labels.
pub(crate) fn quantity_name(unit: &str) -> &'static str {
    match unit {
        "A" => "current",
        "V" => "voltage",
        "W" => "power",
        "J" => "energy",
        "s" => "time",
        "C" => "charge",
        "Wb" => "flux linkage",
        "Hz" => "frequency",
        "Ω" | "ohm" => "resistance",
        _ => "value",
    }
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

    fn is_one_two_five(step: f64) -> bool {
        let mantissa = step / 10f64.powf(step.log10().floor());
        [1.0, 2.0, 5.0]
            .iter()
            .any(|m| (mantissa - m).abs() < 1e-9 || (mantissa - 10.0 * m).abs() < 1e-9)
    }

    #[test]
    fn ticks_use_one_two_five_steps_and_respect_the_count() {
        for &(lo, hi) in &[
            (0.0, 50e-6),
            (1.776, 2.224),
            (-0.72, 12.72),
            (4.995, 5.005),
            (-3.3e-9, 7.1e-9),
            (0.0, 1.0),
            (1.0e-3, 1.05e-3),
        ] {
            for max_count in 2..12 {
                let t = nice_ticks(lo, hi, max_count);
                assert!(is_one_two_five(t.step), "step {} for {lo}..{hi}", t.step);
                assert!(t.values.len() <= max_count, "{lo}..{hi} max {max_count}");
                assert!(!t.values.is_empty(), "{lo}..{hi} max {max_count}");
                for w in t.values.windows(2) {
                    assert!(((w[1] - w[0]) - t.step).abs() < 1e-9 * t.step);
                }
                let tol = 1e-9 * t.step;
                assert!(t.values.iter().all(|v| *v >= lo - tol && *v <= hi + tol));
            }
        }
    }

    #[test]
    fn ticks_choose_the_finest_step_that_fits() {
        let t = nice_ticks(-0.72, 12.72, 8);
        assert!((t.step - 2.0).abs() < 1e-12);
        assert_eq!(t.values.len(), 7);
        let t = nice_ticks(1.776, 2.224, 6);
        assert!((t.step - 0.1).abs() < 1e-12);
        assert_eq!(t.values.len(), 5);
    }

    #[test]
    fn ticks_of_degenerate_ranges_are_empty() {
        assert!(nice_ticks(1.0, 1.0, 5).values.is_empty());
        assert!(nice_ticks(2.0, 1.0, 5).values.is_empty());
        assert!(nice_ticks(f64::NAN, 1.0, 5).values.is_empty());
        assert!(nice_ticks(-f64::MAX, f64::MAX, 5).values.is_empty());
        assert!(nice_ticks(1e15, 1e15 + 1.0, 5).values.is_empty());
    }

    #[test]
    fn decimals_follow_the_step() {
        assert_eq!(decimals_for_step(0.1), 1);
        assert_eq!(decimals_for_step(0.2), 1);
        assert_eq!(decimals_for_step(0.05), 2);
        assert_eq!(decimals_for_step(1.0), 0);
        assert_eq!(decimals_for_step(50.0), 0);
        assert_eq!(format_fixed(-0.0001, 2), "0.00");
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
}
