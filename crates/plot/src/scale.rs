//! Axis numbers: 1-2-5 tick steps and their labels. The SI prefixes
//! themselves come from the netlist crate's [`fluxstep_netlist::si`], the
//! one formatter of the project (re-exported at this crate's root).

use fluxstep_netlist::si::format_fixed;

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
    }
}
