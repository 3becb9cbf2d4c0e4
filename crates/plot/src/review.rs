//! The design-review figure straight from a solver [`Waveform`]: the
//! inductor current on top, the switch-node voltage below, the output
//! voltage last (or any outputs), drawn from the exact solution.
//!
//! Sampling, not computing: every event instant becomes a vertex with its
//! value just before and just after (so a triangle keeps its corners and a
//! step is vertical), and each segment gets interior points in proportion
//! to its width on the figure, so curved pieces look smooth at the figure's
//! resolution while a long window stays cheap.

use fluxstep_solver::{EventKind, EventLog, Waveform};

use crate::error::PlotError;
use crate::model::{Annotation, Figure, Panel, Trace};

/// What a review figure shows.
#[derive(Clone, Debug)]
pub struct ReviewOptions {
    /// Default: inductor current, switch node, output (as the circuit names
    /// them). One panel per output.
    pub outputs: Vec<String>,
    /// Default: the whole recorded span. Time window to draw.
    pub window: Option<(f64, f64)>,
    /// Default true. Mark peak-to-peak ripple and the average on current panels.
    pub ripple: bool,
    /// Default false. Mark gate edges and diode turn-on/turn-off on top.
    pub event_markers: bool,
    /// Default 960 × 640 px.
    pub size: (u32, u32),
}

impl Default for ReviewOptions {
    fn default() -> Self {
        ReviewOptions {
            outputs: vec![],
            window: None,
            ripple: true,
            event_markers: false,
            size: (960, 640),
        }
    }
}

fn unit_of(name: &str) -> &'static str {
    if name.ends_with(".current") {
        "A"
    } else {
        "V"
    }
}

/// The vertices of one output over [t0, t1], with interior points sized for
/// a figure `width_px` wide.
///
/// # Errors
///
/// [`PlotError::UnknownOutput`] if the waveform has no such output.
pub fn output_trace(
    w: &Waveform,
    name: &str,
    t0: f64,
    t1: f64,
    width_px: u32,
) -> Result<Trace, PlotError> {
    let id = w
        .output(name)
        .map_err(|_| PlotError::UnknownOutput { name: name.into() })?;
    let span = (t1 - t0).max(f64::MIN_POSITIVE);
    let mut points = vec![];
    for s in w.segments() {
        if s.t1 < t0 || s.t0 > t1 {
            continue;
        }
        let a = s.t0.max(t0);
        let b = s.t1.min(t1);
        // About one interior point per 3 px of the segment, at most 64.
        let px = (b - a) / span * width_px as f64;
        let interior = ((px / 3.0) as usize).min(64);
        points.extend(w.vertices(id, a, b, interior));
    }
    points.dedup();
    Ok(Trace::new(name, unit_of(name), points))
}

/// The stacked design-review figure of a run.
///
/// # Errors
///
/// [`PlotError::UnknownOutput`] for a name the waveform lacks, or any
/// rendering check of the traces.
pub fn review_figure(
    title: &str,
    w: &Waveform,
    events: Option<&EventLog>,
    opts: &ReviewOptions,
) -> Result<Figure, PlotError> {
    let (a, b) = w.span().ok_or_else(|| PlotError::EmptyFigure {
        figure: title.to_string(),
    })?;
    let (t0, t1) = opts.window.unwrap_or((a, b));
    let mut fig = Figure::new(title).with_size(opts.size.0, opts.size.1);
    for name in &opts.outputs {
        let trace = output_trace(w, name, t0, t1, opts.size.0)?;
        let mut panel = Panel::new(name.as_str());
        if opts.ripple && name.ends_with(".current") && !trace.points.is_empty() {
            let (lo, hi) = trace
                .points
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
                    (l.min(p.1), h.max(p.1))
                });
            let id = w.output(name).expect("checked by output_trace");
            let avg = w.average(id, t0, t1);
            if hi > lo {
                panel = panel.with_annotation(Annotation::Ripple {
                    trace_index: 0,
                    min: lo,
                    max: hi,
                });
            }
            if avg.is_finite() {
                panel = panel.with_annotation(Annotation::Average {
                    trace_index: 0,
                    value: avg,
                });
            }
        }
        if opts.event_markers && fig.panels.is_empty() {
            if let Some(log) = events {
                let times: Vec<(f64, String)> = log
                    .iter()
                    .filter(|e| e.time >= t0 && e.time <= t1)
                    .filter_map(|e| {
                        let kind = match e.kind {
                            EventKind::SwitchOn => "switch on",
                            EventKind::SwitchOff => "switch off",
                            EventKind::DiodeOn => "diode on",
                            EventKind::DiodeOff => "diode off",
                            _ => return None,
                        };
                        Some((e.time, kind.to_string()))
                    })
                    .collect();
                if !times.is_empty() {
                    panel = panel.with_annotation(Annotation::EventMarkers { times });
                }
            }
        }
        fig = fig.with_panel(panel.with_trace(trace));
    }
    Ok(fig)
}
