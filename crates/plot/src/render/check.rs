//! Checking a figure's data before any layout.

use super::MAX_SIDE;
use crate::error::PlotError;
use crate::model::{Annotation, Figure, Panel};

pub(super) fn panel_name(index: usize, panel: &Panel) -> String {
    if panel.title.is_empty() {
        format!("panel {}", index + 1)
    } else {
        format!("panel '{}'", panel.title)
    }
}

/// Checks all user data before any layout, and returns the time axis.
pub(super) fn validate(figure: &Figure) -> Result<(f64, f64), PlotError> {
    if figure.panels.is_empty() {
        return Err(PlotError::EmptyFigure {
            figure: figure.title.clone(),
        });
    }
    if figure.width == 0
        || figure.height == 0
        || figure.width > MAX_SIDE
        || figure.height > MAX_SIDE
    {
        return Err(PlotError::BadSize {
            width: figure.width,
            height: figure.height,
            reason: format!("each side must be between 1 and {MAX_SIDE}"),
        });
    }
    let mut t_min = f64::INFINITY;
    let mut t_max = f64::NEG_INFINITY;
    for (pi, panel) in figure.panels.iter().enumerate() {
        let name = || panel_name(pi, panel);
        let Some(first) = panel.traces.first() else {
            return Err(PlotError::EmptyPanel { panel: name() });
        };
        for trace in &panel.traces {
            if trace.unit != first.unit {
                return Err(PlotError::MixedUnits {
                    panel: name(),
                    trace: trace.label.clone(),
                    unit: trace.unit.clone(),
                    expected: first.unit.clone(),
                });
            }
            if trace.points.is_empty() {
                return Err(PlotError::EmptyTrace {
                    trace: trace.label.clone(),
                });
            }
            let mut previous = f64::NEG_INFINITY;
            for (index, &(time, value)) in trace.points.iter().enumerate() {
                if !time.is_finite() {
                    return Err(PlotError::NonFiniteTime {
                        trace: trace.label.clone(),
                        index,
                    });
                }
                if !value.is_finite() {
                    return Err(PlotError::NonFiniteValue {
                        trace: trace.label.clone(),
                        time,
                        value,
                        index,
                    });
                }
                if time < previous {
                    return Err(PlotError::TimeNotIncreasing {
                        trace: trace.label.clone(),
                        time,
                        index,
                    });
                }
                previous = time;
            }
            t_min = t_min.min(trace.points[0].0);
            t_max = t_max.max(previous);
        }
        for annotation in &panel.annotations {
            let bad = |what, field| PlotError::NonFiniteAnnotation {
                panel: name(),
                what,
                field,
            };
            let check_index = |index: usize| {
                if index < panel.traces.len() {
                    Ok(())
                } else {
                    Err(PlotError::BadTraceIndex {
                        panel: name(),
                        index,
                        count: panel.traces.len(),
                    })
                }
            };
            match annotation {
                Annotation::Ripple {
                    trace_index,
                    min,
                    max,
                } => {
                    check_index(*trace_index)?;
                    if !min.is_finite() {
                        return Err(bad("ripple", "min"));
                    }
                    if !max.is_finite() {
                        return Err(bad("ripple", "max"));
                    }
                    if min > max {
                        return Err(PlotError::InvalidRipple {
                            panel: name(),
                            min: *min,
                            max: *max,
                        });
                    }
                }
                Annotation::Average { trace_index, value } => {
                    check_index(*trace_index)?;
                    if !value.is_finite() {
                        return Err(bad("average", "value"));
                    }
                }
                Annotation::EventMarkers { times } => {
                    if times.iter().any(|(t, _)| !t.is_finite()) {
                        return Err(bad("event marker", "time"));
                    }
                }
                Annotation::Instant { time, .. } => {
                    if !time.is_finite() {
                        return Err(bad("instant", "time"));
                    }
                }
            }
        }
    }
    for &(start, end) in &figure.zooms {
        if !(start.is_finite() && end.is_finite() && start < end && (end - start).is_finite()) {
            return Err(PlotError::InvalidWindow { start, end });
        }
    }
    match figure.window {
        Some((start, end)) => {
            if start.is_finite() && end.is_finite() && start < end && (end - start).is_finite() {
                Ok((start, end))
            } else {
                Err(PlotError::InvalidWindow { start, end })
            }
        }
        None if t_max > t_min && (t_max - t_min).is_finite() => Ok((t_min, t_max)),
        None if t_max > t_min => Err(PlotError::InvalidWindow {
            start: t_min,
            end: t_max,
        }),
        None => Err(PlotError::NoTimeSpan { time: t_min }),
    }
}
