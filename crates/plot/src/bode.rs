//! Bode figures: magnitude and phase of a frequency response stacked on a
//! logarithmic frequency axis, with the crossover, margins and the
//! switching frequency and its half marked.

use fluxstep_netlist::si::format_si_short;

use crate::error::PlotError;
use crate::model::{Annotation, Figure, Panel, Trace};

/// One frequency of a response.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BodePoint {
    /// Frequency (Hz), positive.
    pub frequency: f64,
    /// 20·log10 |H| (dB).
    pub magnitude_db: f64,
    /// ∠H (degrees), any branch: the figure unwraps it.
    pub phase_deg: f64,
}

/// What a Bode figure marks with vertical lines (each only inside the
/// plotted range).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct BodeMarks {
    /// Crossover frequency (Hz) and phase margin (degrees) of a loop gain.
    pub crossover: Option<(f64, f64)>,
    /// Phase crossover (Hz) and gain margin (dB) of a loop gain.
    pub phase_crossover: Option<(f64, f64)>,
    /// The switching frequency fs (Hz): fs/2 and fs are marked.
    pub switching_frequency: Option<f64>,
}

/// The phases of `points` made continuous: each differs from the one
/// before by less than 180°.
pub fn unwrap_phase(points: &[BodePoint]) -> Vec<f64> {
    let mut out: Vec<f64> = Vec::with_capacity(points.len());
    for p in points {
        let mut ph = p.phase_deg;
        if let Some(&prev) = out.last() {
            ph -= 360.0 * ((ph - prev) / 360.0).round();
        }
        out.push(ph);
    }
    out
}

/// A two-panel Bode figure of `points` (frequencies increasing).
///
/// # Errors
///
/// [`PlotError::InvalidFrequency`] for a frequency that is not positive
/// and finite or out of order (naming it); otherwise as the figure's own
/// rendering.
///
/// # Example
///
/// ```
/// use fluxstep_plot::{bode_figure, render_svg, BodeMarks, BodePoint};
///
/// // A single pole at 1 kHz.
/// let points: Vec<BodePoint> = (0..41)
///     .map(|k| {
///         let f = 10f64.powf(1.0 + k as f64 * 0.1);
///         let x = f / 1e3;
///         BodePoint {
///             frequency: f,
///             magnitude_db: -10.0 * (1.0 + x * x).log10(),
///             phase_deg: -x.atan().to_degrees(),
///         }
///     })
///     .collect();
/// let fig = bode_figure("low-pass", "out / in", &points, &BodeMarks::default())?;
/// let svg = render_svg(&fig)?;
/// assert!(svg.contains("1 kHz"));
/// # Ok::<(), fluxstep_plot::PlotError>(())
/// ```
pub fn bode_figure(
    title: &str,
    quantity: &str,
    points: &[BodePoint],
    marks: &BodeMarks,
) -> Result<Figure, PlotError> {
    for (i, p) in points.iter().enumerate() {
        let ordered = i == 0 || p.frequency > points[i - 1].frequency;
        if !(p.frequency > 0.0 && p.frequency.is_finite() && ordered) {
            return Err(PlotError::InvalidFrequency {
                figure: title.to_string(),
                index: i,
                frequency: p.frequency,
            });
        }
    }
    let x: Vec<f64> = points.iter().map(|p| p.frequency.log10()).collect();
    let magnitude: Vec<(f64, f64)> = x
        .iter()
        .zip(points)
        .map(|(x, p)| (*x, p.magnitude_db))
        .collect();
    let phase: Vec<(f64, f64)> = x.iter().copied().zip(unwrap_phase(points)).collect();
    let (lo, hi) = (
        x.first().copied().unwrap_or(0.0),
        x.last().copied().unwrap_or(0.0),
    );
    let inside = |f: f64| f > 0.0 && f.log10() >= lo && f.log10() <= hi;
    let mut marks_list: Vec<(f64, String)> = vec![];
    if let Some((fc, pm)) = marks.crossover {
        if inside(fc) {
            marks_list.push((
                fc,
                format!(
                    "crossover {}, phase margin {pm:.1}°",
                    format_si_short(fc, "Hz")
                ),
            ));
        }
    }
    if let Some((fp, gm)) = marks.phase_crossover {
        if inside(fp) {
            marks_list.push((
                fp,
                format!("gain margin {gm:.1} dB at {}", format_si_short(fp, "Hz")),
            ));
        }
    }
    if let Some(fs) = marks.switching_frequency {
        for (f, what) in [(0.5 * fs, "fs/2"), (fs, "fs")] {
            if inside(f) {
                marks_list.push((f, format!("{what} = {}", format_si_short(f, "Hz"))));
            }
        }
    }
    let instants = |panel: Panel, with_labels: bool| {
        marks_list.iter().fold(panel, |p, (f, label)| {
            p.with_annotation(Annotation::Instant {
                time: f.log10(),
                label: if with_labels {
                    label.clone()
                } else {
                    String::new()
                },
            })
        })
    };
    let mut top = Panel::new(format!("magnitude of {quantity}")).with_trace(Trace::new(
        "magnitude",
        "dB",
        magnitude,
    ));
    if points.iter().any(|p| p.magnitude_db > 0.0) && points.iter().any(|p| p.magnitude_db < 0.0) {
        top = top.with_annotation(Annotation::Average {
            trace_index: 0,
            value: 0.0,
        });
    }
    let bottom =
        Panel::new(format!("phase of {quantity}")).with_trace(Trace::new("phase", "°", phase));
    Ok(Figure::new(title)
        .with_x_axis("frequency", "Hz")
        .with_log_x()
        .with_panel(instants(top, true))
        .with_panel(instants(bottom, false)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unwrapping_removes_jumps_of_360() {
        let pts: Vec<BodePoint> = [170.0, 179.0, -179.0, -170.0, 175.0]
            .iter()
            .enumerate()
            .map(|(i, &ph)| BodePoint {
                frequency: 1.0 + i as f64,
                magnitude_db: 0.0,
                phase_deg: ph,
            })
            .collect();
        assert_eq!(unwrap_phase(&pts), vec![170.0, 179.0, 181.0, 190.0, 175.0]);
    }
}
