//! Numbers for people: values with an SI prefix and a unit ("200 kHz").

/// `value` with the SI prefix that puts the number in [1, 1000) and up to
/// four significant digits, e.g. `si(200e3, "Hz")` = "200 kHz",
/// `si(50e-9, "s")` = "50 ns", `si(0.0, "V")` = "0 V".
pub fn si(value: f64, unit: &str) -> String {
    const PREFIXES: [(i32, &str); 9] = [
        (12, "T"),
        (9, "G"),
        (6, "M"),
        (3, "k"),
        (0, ""),
        (-3, "m"),
        (-6, "µ"),
        (-9, "n"),
        (-12, "p"),
    ];
    if value == 0.0 || !value.is_finite() {
        return format!("{value} {unit}");
    }
    let exponent = value.abs().log10().floor() as i32;
    let (e, prefix) = PREFIXES
        .iter()
        .find(|(e, _)| exponent >= *e)
        .copied()
        .unwrap_or(PREFIXES[PREFIXES.len() - 1]);
    let mantissa = value / 10f64.powi(e);
    // Four significant digits, trailing zeros dropped: 4.95 ms, not 4.950 ms.
    let digits = (3 - (mantissa.abs().log10().floor() as i32)).clamp(0, 15) as usize;
    let text = format!("{mantissa:.digits$}");
    let text = if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.')
    } else {
        &text
    };
    format!("{text} {prefix}{unit}")
}

#[cfg(test)]
mod tests {
    use super::si;

    #[test]
    fn prefixes() {
        assert_eq!(si(200e3, "Hz"), "200 kHz");
        assert_eq!(si(50e-9, "s"), "50 ns");
        assert_eq!(si(4.95e-3, "s"), "4.95 ms");
        assert_eq!(si(22e-6, "H"), "22 µH");
        assert_eq!(si(0.5, ""), "500 m");
        assert_eq!(si(24.0, "V"), "24 V");
        assert_eq!(si(-12.0, "V"), "-12 V");
        assert_eq!(si(1.0 / 3.0, "s"), "333.3 ms");
        assert_eq!(si(0.0, "V"), "0 V");
        assert_eq!(si(1e-15, "F"), "0.001 pF");
    }
}
