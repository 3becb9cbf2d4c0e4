//! The design-review figure straight from a solver [`Waveform`]: the
//! inductor current on top, the switch-node voltage below, the output
//! voltage last (or any outputs), drawn from the exact solution.
//!
//! Sampling, not computing: every event instant becomes a vertex with its
//! value just before and just after (so a triangle keeps its corners and a
//! step is vertical), and each segment gets interior points in proportion
//! to its width on the figure, so curved pieces look smooth at the figure's
//! resolution while a long window stays cheap.

use fluxstep_netlist::OutputName;
use fluxstep_solver::measure::{measure, without_rounding_noise, Measurement};
use fluxstep_solver::{EventKind, EventLog, Waveform};

use crate::error::PlotError;
use crate::model::{Annotation, Figure, Panel, Trace};
use crate::reduce::Thinned;

/// What a review figure shows.
#[derive(Clone, Debug)]
pub struct ReviewOptions {
    /// Default: inductor current, switch node, output (as the circuit names
    /// them). One panel per output.
    pub outputs: Vec<String>,
    /// Default: the whole recorded span. Time window to draw.
    pub window: Option<(f64, f64)>,
    /// Default true. Mark the average on current panels and, on inductor
    /// and winding currents in periodic operation, the peak-to-peak ripple
    /// of one period (numbers from [`fluxstep_solver::measure`]).
    pub ripple: bool,
    /// Default `None`: the log's [`EventLog::repeat_period`] over the
    /// window (from its switch turn-ons). The switching period, used to
    /// tell periodic operation and to measure the ripple of one period.
    pub period: Option<f64>,
    /// Default false. Mark gate edges and diode turn-on/turn-off on top.
    pub event_markers: bool,
    /// Default none. Instants (s) around which a narrow zoom column is
    /// added, each `zoom_span` wide.
    pub zoom: Vec<f64>,
    /// Default `None`: a fiftieth of the period (or of the window without
    /// one). Width of each zoom column's window (s).
    pub zoom_span: Option<f64>,
    /// Default `None`. The instant a run stopped on a diagnostic and a
    /// short description: drawn as a red line across every panel.
    pub stopped: Option<(f64, String)>,
    /// Default 960 × 640 px.
    pub size: (u32, u32),
}

impl Default for ReviewOptions {
    fn default() -> Self {
        ReviewOptions {
            outputs: vec![],
            window: None,
            ripple: true,
            period: None,
            event_markers: false,
            zoom: vec![],
            zoom_span: None,
            stopped: None,
            size: (960, 640),
        }
    }
}

/// Unit and quantity of an output from its name: a current in A, a node
/// or element voltage in V, a compensator output as a plain number.
fn unit_of(name: &str) -> (&'static str, &'static str) {
    match OutputName::parse(name) {
        Ok(o) => (o.unit(), o.quantity()),
        Err(_) => ("", "value"),
    }
}

/// Whether the interior vertices of one segment lie on the chord between
/// its end vertices to within rounding: then the output is an exact
/// straight line there (a constant or a constant slope) and one line is
/// drawn for it.
fn straight(points: &[(f64, f64)]) -> bool {
    let (Some(&(ta, ya)), Some(&(tb, yb))) = (points.first(), points.last()) else {
        return true;
    };
    if tb <= ta {
        return true;
    }
    let scale = points.iter().fold(0.0f64, |m, p| m.max(p.1.abs()));
    let tol = 1e-12 * scale + f64::MIN_POSITIVE;
    points.iter().all(|&(t, y)| {
        let chord = ya + (yb - ya) * ((t - ta) / (tb - ta));
        (y - chord).abs() <= tol
    })
}

/// The vertices of one output over [t0, t1], with interior points sized for
/// a figure `width_px` wide; a segment on which the output is exactly
/// straight keeps only its two end vertices.
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
    let mut points = Thinned::new(t0, span, width_px);
    for s in w.segments() {
        if s.t1 < t0 || s.t0 > t1 {
            continue;
        }
        let a = s.t0.max(t0);
        let b = s.t1.min(t1);
        // About one interior point per 3 px of the segment, at most 64.
        let px = (b - a) / span * width_px as f64;
        let interior = ((px / 3.0) as usize).min(64);
        let vertices = w.vertices(id, a, b, interior);
        if interior > 0 && vertices.len() > 2 && straight(&vertices) {
            points.push(vertices[0]);
            points.push(vertices[vertices.len() - 1]);
        } else {
            for v in vertices {
                points.push(v);
            }
        }
    }
    let mut points = points.finish();
    points.dedup();
    let (unit, quantity) = unit_of(name);
    Ok(Trace::new(name, unit, points).with_quantity(quantity))
}

/// The ripple of one period, when the output repeats: measured over the
/// last period of the window, and only if the first period's peak-to-peak
/// agrees with it to 2 % (a start-up in the window is not periodic
/// operation). Whatever else the window holds (a slow settling, a load
/// step), the bracket shows one period's ripple, never the window's span.
fn periodic_ripple(w: &Waveform, name: &str, t0: f64, t1: f64, period: f64) -> Option<Measurement> {
    if period.is_nan() || period <= 0.0 || t1 - t0 < 2.0 * period * (1.0 - 1e-9) {
        return None;
    }
    let id = w.output(name).ok()?;
    let last = measure(w, id, t1 - period, t1).ok()?;
    let first = measure(w, id, t0, t0 + period).ok()?;
    let tol = 0.02 * last.peak_to_peak;
    ((first.peak_to_peak - last.peak_to_peak).abs() <= tol).then_some(last)
}

/// The stacked design-review figure of a run.
///
/// Numbers on the figure are the solver's exact measurements
/// ([`fluxstep_solver::measure::measure`]) with rounding noise shown as
/// zero ([`without_rounding_noise`]); nothing is computed from the drawn
/// vertices.
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
    let period = opts
        .period
        .or_else(|| events.and_then(|log| log.repeat_period(t0, t1)));
    // Inductor and winding currents are the states named `….current`.
    let inductor_currents: Vec<&str> = events
        .map(|log| {
            log.state_names()
                .iter()
                .filter(|n| n.ends_with(".current"))
                .map(String::as_str)
                .collect()
        })
        .unwrap_or_default();
    let measured: Vec<Measurement> = opts
        .outputs
        .iter()
        .filter_map(|name| measure(w, w.output(name).ok()?, t0.max(a), t1.min(b)).ok())
        .collect();
    let shown = without_rounding_noise(&measured);
    for name in &opts.outputs {
        let mut trace = output_trace(w, name, t0, t1, opts.size.0)?;
        // This output's numbers as shown (rounding noise as zero).
        let key = w.output(name).ok();
        let m = shown
            .iter()
            .find(|m| key.is_some() && w.output(&m.output).ok() == key);
        // A trace whose every number is rounding noise (its minimum and
        // maximum both shown as zero) is drawn as that zero: the raw
        // vertices, 1e-15 of the other currents (the capacitor of an
        // interleaved buck at D = k/N), filled the panel with a wiggle on
        // an axis that could only read 0.
        if m.is_some_and(|m| m.min == 0.0 && m.max == 0.0) {
            for p in &mut trace.points {
                p.1 = 0.0;
            }
        }
        let mut panel = Panel::new(name.as_str());
        let is_current = unit_of(name).0 == "A";
        if opts.ripple && is_current && !trace.points.is_empty() {
            let ripple = if inductor_currents.contains(&name.as_str()) {
                period.and_then(|p| periodic_ripple(w, name, t0.max(a), t1.min(b), p))
            } else {
                None
            };
            if let Some(r) = ripple {
                if r.peak_to_peak > 0.0 {
                    panel = panel.with_annotation(Annotation::Ripple {
                        trace_index: 0,
                        min: r.min,
                        max: r.max,
                    });
                }
            }
            if let Some(m) = m {
                panel = panel.with_annotation(Annotation::Average {
                    trace_index: 0,
                    value: m.average,
                });
            }
        }
        if let Some((time, label)) = &opts.stopped {
            panel = panel.with_annotation(Annotation::Instant {
                time: *time,
                label: if fig.panels.is_empty() {
                    label.clone()
                } else {
                    String::new()
                },
            });
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
    let span = opts
        .zoom_span
        .or(period.map(|p| p / 50.0))
        .unwrap_or((t1 - t0) / 50.0);
    for &t in &opts.zoom {
        let (za, zb) = ((t - 0.5 * span).max(t0), (t + 0.5 * span).min(t1));
        if zb > za {
            fig = fig.with_zoom(za, zb);
        }
    }
    Ok(fig)
}
