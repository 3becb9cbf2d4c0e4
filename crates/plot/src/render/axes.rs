//! Axes: value range and ticks of a panel, time ticks, decades, zoom ticks.

use fluxstep_netlist::si::{format_si_digits, format_si_short, si_scale};

use super::parts::{NoteShape, PanelLayout, YAxis};
use super::text::{clean, text_width};
use super::{MARKER_STRIP, TICK_PX, ZOOM_W};
use crate::error::PlotError;
use crate::scale::{exponent_labels, fixed_labels, nice_ticks, quantity_name, Ticks};

/// Value range, ticks and labels of one panel for a plot `plot_h` pixels tall.
pub(super) fn y_axis(p: &PanelLayout<'_>, plot_h: f64, name: &str) -> Result<YAxis, PlotError> {
    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    for &(_, v) in p.traces.iter().flatten() {
        low = low.min(v);
        high = high.max(v);
    }
    for note in &p.notes {
        let (a, b) = match note.shape {
            NoteShape::Bracket { low, high } => (low, high),
            NoteShape::Level => (note.at, note.at),
        };
        low = low.min(a);
        high = high.max(b);
    }
    if low > high {
        // Nothing of this panel falls inside the time window.
        (low, high) = (0.0, 1.0);
    }
    let too_wide = || PlotError::RangeTooWide {
        panel: name.to_string(),
        low,
        high,
    };
    let magnitude = low.abs().max(high.abs());
    let (low, high) = if high - low <= magnitude * 1e-9 {
        // A flat trace: centre it in a band proportional to its level.
        let mid = 0.5 * (low + high);
        let half = if mid == 0.0 { 1.0 } else { 0.05 * mid.abs() };
        (mid - half, mid + half)
    } else {
        (low, high)
    };
    let span = high - low;
    if !span.is_finite() {
        return Err(too_wide());
    }
    // Keep the curve off the frame, and below the event-marker strip.
    let bottom_frac = 0.06;
    let mut top_frac = 0.06;
    if !p.markers.is_empty() {
        top_frac += (MARKER_STRIP + 4.0) / plot_h;
    }
    let top_frac = top_frac.min(0.5);
    let total = span / (1.0 - top_frac - bottom_frac);
    let (y_low, y_high) = (low - bottom_frac * total, high + top_frac * total);
    if !(y_low.is_finite() && y_high.is_finite() && (y_high - y_low).is_finite()) {
        return Err(too_wide());
    }
    let mut ticks = nice_ticks(y_low, y_high, 3);
    for max_count in (3..=8).rev() {
        let t = nice_ticks(y_low, y_high, max_count);
        let spacing = t.step / (y_high - y_low) * plot_h;
        if t.values.len() >= 2 && spacing >= TICK_PX * 1.9 {
            ticks = t;
            break;
        }
    }
    let unit = &p.panel.traces[0].unit;
    let (factor, prefix) = if unit.is_empty() {
        (1.0, "")
    } else {
        let shown = ticks.values.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(
            if ticks.values.is_empty() {
                magnitude
            } else {
                0.0
            },
        );
        si_scale(shown)
    };
    let (labels, prefix) = match fixed_labels(&ticks.values, ticks.step, factor) {
        Some(labels) => (labels, prefix),
        None => (exponent_labels(&ticks.values, ticks.step), ""),
    };
    let quantity = &p.panel.traces[0].quantity;
    let quantity = if quantity.is_empty() {
        quantity_name(unit).to_string()
    } else {
        clean(quantity)
    };
    let (title, short) = match (unit.is_empty(), prefix.is_empty()) {
        (true, true) => (quantity.clone(), quantity),
        (true, false) => (format!("{quantity} ({prefix})"), prefix.to_string()),
        (false, _) => (
            format!("{quantity} ({prefix}{})", clean(unit)),
            format!("{prefix}{}", clean(unit)),
        ),
    };
    Ok(YAxis {
        low: y_low,
        high: y_high,
        ticks,
        labels,
        title,
        short,
    })
}

/// Horizontal ticks for a plot `plot_w` pixels wide: as many as fit with
/// their labels at least a gap apart; the title is `name (prefix unit)`.
pub(super) fn x_axis(
    t0: f64,
    t1: f64,
    plot_w: f64,
    name: &str,
    unit: &str,
) -> (Ticks, Vec<String>, String) {
    let (factor, prefix) = si_scale(t0.abs().max(t1.abs()));
    let make = |max_count: usize| {
        let ticks = nice_ticks(t0, t1, max_count);
        match fixed_labels(&ticks.values, ticks.step, factor) {
            Some(labels) => (ticks, labels, prefix),
            None => {
                let labels = exponent_labels(&ticks.values, ticks.step);
                (ticks, labels, "")
            }
        }
    };
    let mut chosen = make(2);
    for max_count in (2..=12).rev() {
        let (ticks, labels, prefix) = make(max_count);
        let spacing = ticks.step / (t1 - t0) * plot_w;
        let widest = labels
            .iter()
            .map(|l| text_width(l, TICK_PX))
            .fold(0.0, f64::max);
        if spacing >= widest + 18.0 && spacing >= 40.0 {
            chosen = (ticks, labels, prefix);
            break;
        }
    }
    let title = if unit.is_empty() && chosen.2.is_empty() {
        name.to_string()
    } else {
        format!("{name} ({}{unit})", chosen.2)
    };
    (chosen.0, chosen.1, title)
}

/// Ticks of a logarithmic axis whose coordinates are log10 of the quantity:
/// one per decade inside [t0, t1] (at least the two ends when the span is
/// under a decade), labelled in the quantity's unit with SI prefixes.
pub(super) fn decade_axis(
    t0: f64,
    t1: f64,
    name: &str,
    unit: &str,
) -> (Ticks, Vec<String>, String) {
    let mut values: Vec<f64> = (t0.ceil() as i64..=t1.floor() as i64)
        .map(|d| d as f64)
        .collect();
    if values.len() < 2 {
        values = vec![t0, t1];
    }
    let labels = values
        .iter()
        .map(|v| format_si_short(10f64.powf(*v), unit))
        .collect();
    (
        Ticks { step: 1.0, values },
        labels,
        format!("{name} (log scale)"),
    )
}

/// Time ticks of a zoom column: two or three labels fit its width; the
/// labels show the time since the column's first tick would be clearer,
/// but absolute times let a reader find the instant on the main axis.
pub(super) fn zoom_axis(t0: f64, t1: f64) -> (Ticks, Vec<String>, String) {
    let centre = 0.5 * (t0 + t1);
    let (factor, prefix) = si_scale(0.5 * (t1 - t0).abs());
    let title = |prefix: &str| {
        let at = format_si_digits(centre, "s", 7);
        let (number, unit) = at.split_once(' ').unwrap_or((at.as_str(), ""));
        let number = if number.contains('.') {
            number.trim_end_matches('0').trim_end_matches('.')
        } else {
            number
        };
        format!("{prefix}s from {number} {unit}")
    };
    let shift = |ticks: Ticks| Ticks {
        step: ticks.step,
        values: ticks.values.iter().map(|v| v + centre).collect(),
    };
    for max_count in (2..=3).rev() {
        let ticks = nice_ticks(t0 - centre, t1 - centre, max_count);
        if let Some(labels) = fixed_labels(&ticks.values, ticks.step, factor) {
            let widest = labels
                .iter()
                .map(|l| text_width(l, TICK_PX))
                .fold(0.0, f64::max);
            if ticks.values.len() < 2 || (widest + 8.0) * ticks.values.len() as f64 <= ZOOM_W {
                return (shift(ticks), labels, title(prefix));
            }
        }
    }
    let ticks = nice_ticks(t0 - centre, t1 - centre, 2);
    let labels = exponent_labels(&ticks.values, ticks.step);
    (shift(ticks), labels, title(""))
}
