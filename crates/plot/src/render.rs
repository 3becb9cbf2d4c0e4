//! Layout and drawing: checks a [`Figure`], places every label, and draws it with plotters.
//!
//! Plotters is used as a drawing surface (its SVG backend and basic
//! elements), not through its chart builder: the figure needs its own tick
//! choice, SI scaling, shared time axis and label placement, and it must
//! emit exactly one `<polyline>` per trace. Everything else that looks like
//! a line (grid, ticks, dashes, brackets, markers, legend swatches) is
//! axis-aligned and drawn as a thin filled `<rect>`, which also keeps it
//! pixel-sharp when rasterised.

use std::path::Path;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{FontDesc, FontFamily, FontStyle, FontTransform};

use crate::error::PlotError;
use crate::model::{Annotation, Figure, Panel};
use crate::reduce::{clip_to_window, thin_per_column};
use crate::scale::{
    exponent_labels, fixed_labels, format_si, format_si_digits, format_si_short, nice_ticks,
    quantity_name, si_scale, Ticks,
};

const MARGIN: f64 = 14.0;
const TITLE_PX: f64 = 17.0;
const PANEL_PX: f64 = 14.0;
const TICK_PX: f64 = 12.0;
const AXIS_PX: f64 = 12.5;
const NOTE_PX: f64 = 12.0;
/// Average advance of a glyph in ems. No font is measured (the SVG names a
/// generic family), so widths are estimated on the wide side: DejaVu Sans
/// digits advance 0.64 em, Helvetica-like faces 0.56 em.
const CHAR_EM: f64 = 0.64;
const HEADER_ROW: f64 = 18.0;
const PANEL_GAP: f64 = 14.0;
const TICK_LEN: f64 = 5.0;
const MARKER_STRIP: f64 = 9.0;
const SWATCH: f64 = 18.0;
const MIN_PLOT_W: f64 = 80.0;
const MIN_PLOT_H: f64 = 40.0;
/// Larger figures are almost certainly a unit mistake and would build huge strings.
const MAX_SIDE: u32 = 20_000;
/// Beyond this many vertices per pixel column, traces are thinned (see `reduce`).
const THIN_FACTOR: f64 = 4.0;

const INK: RGBColor = RGBColor(0x20, 0x24, 0x2a);
const SOFT_INK: RGBColor = RGBColor(0x48, 0x4f, 0x58);
const GRID: RGBColor = RGBColor(0xe6, 0xe9, 0xed);
const ZERO_LINE: RGBColor = RGBColor(0xc2, 0xc8, 0xcf);
const FRAME: RGBColor = RGBColor(0x8e, 0x95, 0x9d);
/// The colour of an [`Annotation::Instant`]: a warning red, used for
/// nothing else.
const INSTANT: RGBColor = RGBColor(0xd0, 0x1c, 0x1c);
/// Width of a zoom column's plot and the gap before it, in pixels.
const ZOOM_W: f64 = 130.0;
const ZOOM_GAP: f64 = 16.0;
/// Trace colours: dark enough to print on white, far apart in hue, in an
/// order where neighbours never share a hue family.
const TRACE_COLOURS: [RGBColor; 8] = [
    RGBColor(0x1c, 0x5a, 0xa6), // blue
    RGBColor(0xc2, 0x4e, 0x14), // rust
    RGBColor(0x2b, 0x85, 0x3c), // green
    RGBColor(0x7a, 0x3a, 0x9a), // violet
    RGBColor(0x0f, 0x7a, 0x84), // teal
    RGBColor(0x9c, 0x73, 0x08), // ochre
    RGBColor(0xa6, 0x2c, 0x5b), // berry
    RGBColor(0x4a, 0x57, 0x66), // slate
];
/// Event-marker colours, muted so that markers never compete with traces.
const MARKER_COLOURS: [RGBColor; 5] = [
    RGBColor(0x3d, 0x44, 0x4d), // charcoal
    RGBColor(0x8f, 0x9a, 0xa6), // pale slate
    RGBColor(0x6f, 0x9e, 0x4c), // moss
    RGBColor(0xb0, 0x86, 0x3c), // sand
    RGBColor(0x86, 0x6a, 0xa8), // lavender
];

/// Renders a figure to SVG text.
///
/// Each trace becomes exactly one `<polyline>` element, in panel order and
/// then trace order (then, for each zoom column, one more per trace, in the
/// same order); no other element of the figure is a polyline. Vertices are
/// written with sub-pixel precision (0.01 px), so a straight ramp is one
/// straight line at any zoom of the picture, not a staircase. Traces
/// with more than about four vertices per pixel column of the plot are
/// thinned to the first, lowest, highest and last vertex of each column.
///
/// # Errors
/// [`PlotError`] for an empty figure, panel or trace, a non-finite time or
/// value (naming the trace and the time), times going backwards, mixed
/// units in a panel, a bad annotation or window, or a size that leaves no
/// room for the plots.
///
/// # Example
/// ```
/// use fluxstep_plot::{render_svg, Figure, Panel, Trace};
/// let ramp = Trace::new("ramp", "V", vec![(0.0, 0.0), (1e-3, 5.0)]);
/// let fig = Figure::new("ramp").with_panel(Panel::new("").with_trace(ramp));
/// let svg = render_svg(&fig)?;
/// assert_eq!(svg.matches("<polyline").count(), 1);
/// # Ok::<(), fluxstep_plot::PlotError>(())
/// ```
pub fn render_svg(figure: &Figure) -> Result<String, PlotError> {
    let (t0, t1) = validate(figure)?;
    let layout = Layout::new(figure, t0, t1)?;
    let mut svg = String::new();
    {
        let backend = SVGBackend::with_string(&mut svg, (figure.width, figure.height));
        let root = backend.into_drawing_area();
        layout
            .draw(&root)
            .map_err(|e| PlotError::Draw(e.to_string()))?;
        root.present().map_err(|e| PlotError::Draw(e.to_string()))?;
    }
    let precise = layout.precise.take();
    Ok(with_precise_points(&svg, &precise))
}

/// The SVG backend writes whole pixels; this puts the sub-pixel vertices
/// of the k-th polyline (kept while drawing, in drawing order) in place of
/// its rounded ones. Polylines are only ever traces (see [`render_svg`]), so
/// the k-th polyline in the text is the k-th trace drawn.
fn with_precise_points(svg: &str, precise: &[String]) -> String {
    let mut out = String::with_capacity(svg.len() + precise.iter().map(String::len).sum::<usize>());
    let mut rest = svg;
    for points in precise {
        let Some(at) = rest.find("<polyline") else {
            break;
        };
        let Some(open) = rest[at..]
            .find("points=\"")
            .map(|k| at + k + "points=\"".len())
        else {
            break;
        };
        let Some(close) = rest[open..].find('"').map(|k| open + k) else {
            break;
        };
        out.push_str(&rest[..open]);
        out.push_str(points);
        rest = &rest[close..];
    }
    out.push_str(rest);
    out
}

/// A coordinate with at most two decimals, trailing zeros dropped.
fn coord(v: f64) -> String {
    let v = (v.clamp(-1.0e6, 1.0e6) * 100.0).round() / 100.0;
    let text = format!("{v:.2}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    if text == "-0" {
        "0".to_string()
    } else {
        text.to_string()
    }
}

/// Renders a figure and writes the SVG to `path`.
///
/// # Errors
/// Those of [`render_svg`], and [`PlotError::Io`] naming the path when the
/// file cannot be written.
pub fn write_svg(figure: &Figure, path: impl AsRef<Path>) -> Result<(), PlotError> {
    let svg = render_svg(figure)?;
    let path = path.as_ref();
    std::fs::write(path, svg).map_err(|source| PlotError::Io {
        path: path.to_path_buf(),
        source,
    })
}

fn panel_name(index: usize, panel: &Panel) -> String {
    if panel.title.is_empty() {
        format!("panel {}", index + 1)
    } else {
        format!("panel '{}'", panel.title)
    }
}

/// Checks all user data before any layout, and returns the time axis.
fn validate(figure: &Figure) -> Result<(f64, f64), PlotError> {
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

/// Control characters would make the SVG invalid XML.
fn clean(text: &str) -> String {
    text.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

fn text_width(text: &str, px: f64) -> f64 {
    text.chars().count() as f64 * px * CHAR_EM
}

/// Pixel coordinate; the clamp keeps absurd layouts from overflowing `i32`.
fn px(v: f64) -> i32 {
    v.round().clamp(-1.0e6, 1.0e6) as i32
}

fn font(size_px: f64, bold: bool) -> FontDesc<'static> {
    let style = if bold {
        FontStyle::Bold
    } else {
        FontStyle::Normal
    };
    // The SVG backend writes font-size = size / 1.24; undo that so the
    // constants above are the CSS pixel sizes that end up in the file, and
    // nudge by a few ulps so the division lands exactly on them ("13", not
    // "13.000000000000002").
    let mut size = size_px * 1.24;
    for _ in 0..8 {
        let back = size / 1.24;
        if back == size_px {
            break;
        }
        let bits = size.to_bits();
        size = f64::from_bits(if back < size_px { bits + 1 } else { bits - 1 });
    }
    FontDesc::new(FontFamily::SansSerif, size, style)
}

fn text_style(size_px: f64, bold: bool, colour: &RGBColor, h: HPos, v: VPos) -> TextStyle<'static> {
    font(size_px, bold).color(colour).pos(Pos::new(h, v))
}

enum Swatch {
    Line,
    Tick,
}

struct HeaderItem {
    text: String,
    colour: RGBColor,
    swatch: Swatch,
}

impl HeaderItem {
    fn width(&self) -> f64 {
        SWATCH + 5.0 + text_width(&self.text, NOTE_PX)
    }
}

enum NoteShape {
    Bracket { low: f64, high: f64 },
    Level,
}

/// A label in the right-hand gutter, pointing at a value.
struct Note {
    text: String,
    colour: RGBColor,
    at: f64,
    shape: NoteShape,
}

struct YAxis {
    low: f64,
    high: f64,
    ticks: Ticks,
    labels: Vec<String>,
    title: String,
}

struct PanelLayout<'a> {
    panel: &'a Panel,
    instants: Vec<f64>,
    title: String,
    traces: Vec<Vec<(f64, f64)>>,
    colours: Vec<RGBColor>,
    legend: Vec<Vec<HeaderItem>>,
    markers: Vec<(f64, RGBColor)>,
    notes: Vec<Note>,
    top: f64,
    plot_top: f64,
    plot_bottom: f64,
    y: YAxis,
}

/// A narrow column showing a zoomed time window of every panel.
struct ZoomColumn {
    t0: f64,
    t1: f64,
    left: f64,
    right: f64,
    ticks: Ticks,
    labels: Vec<String>,
    title: String,
}

struct Layout<'a> {
    figure: &'a Figure,
    zooms: Vec<ZoomColumn>,
    /// Sub-pixel vertices of every polyline, in drawing order.
    precise: std::cell::RefCell<Vec<String>>,
    t0: f64,
    t1: f64,
    panels: Vec<PanelLayout<'a>>,
    plot_left: f64,
    plot_right: f64,
    x_ticks: Ticks,
    x_labels: Vec<String>,
    x_title: String,
}

impl<'a> Layout<'a> {
    fn new(figure: &'a Figure, t0: f64, t1: f64) -> Result<Self, PlotError> {
        let width = f64::from(figure.width);
        let height = f64::from(figure.height);
        let too_small = |reason: &str| PlotError::BadSize {
            width: figure.width,
            height: figure.height,
            reason: reason.to_string(),
        };

        let mut panels = Vec::with_capacity(figure.panels.len());
        let mut colour_index = 0;
        for (pi, panel) in figure.panels.iter().enumerate() {
            let traces: Vec<Vec<(f64, f64)>> = panel
                .traces
                .iter()
                .map(|t| clip_to_window(&t.points, t0, t1))
                .collect();
            let colours: Vec<RGBColor> = (0..traces.len())
                .map(|i| TRACE_COLOURS[(colour_index + i) % TRACE_COLOURS.len()])
                .collect();
            colour_index += traces.len();
            let title = if panel.title.is_empty() && panel.traces.len() == 1 {
                clean(&panel.traces[0].label)
            } else {
                clean(&panel.title)
            };
            let unit = &panel.traces[0].unit;
            let mut notes = Vec::new();
            let mut markers = Vec::new();
            let mut instants = Vec::new();
            let mut instant_labels = Vec::new();
            let mut kinds: Vec<String> = Vec::new();
            for annotation in &panel.annotations {
                match annotation {
                    Annotation::Ripple {
                        trace_index,
                        min,
                        max,
                    } => notes.push(Note {
                        text: format!("{} p-p", format_si(max - min, unit)),
                        colour: colours[*trace_index],
                        at: 0.5 * (min + max),
                        shape: NoteShape::Bracket {
                            low: *min,
                            high: *max,
                        },
                    }),
                    Annotation::Average { trace_index, value } => notes.push(Note {
                        text: format!("avg {}", format_si(*value, unit)),
                        colour: colours[*trace_index],
                        at: *value,
                        shape: NoteShape::Level,
                    }),
                    Annotation::Instant { time, label } => {
                        instants.push(*time);
                        if !label.is_empty() {
                            instant_labels.push(clean(label));
                        }
                    }
                    Annotation::EventMarkers { times } => {
                        for (t, kind) in times {
                            let kind = clean(kind);
                            let k = match kinds.iter().position(|x| *x == kind) {
                                Some(k) => k,
                                None => {
                                    kinds.push(kind);
                                    kinds.len() - 1
                                }
                            };
                            if *t >= t0 && *t <= t1 {
                                markers.push((*t, MARKER_COLOURS[k % MARKER_COLOURS.len()]));
                            }
                        }
                    }
                }
            }
            let mut items: Vec<HeaderItem> = Vec::new();
            if panel.traces.len() > 1 {
                for (trace, colour) in panel.traces.iter().zip(&colours) {
                    items.push(HeaderItem {
                        text: clean(&trace.label),
                        colour: *colour,
                        swatch: Swatch::Line,
                    });
                }
            }
            for label in instant_labels {
                items.push(HeaderItem {
                    text: label,
                    colour: INSTANT,
                    swatch: Swatch::Tick,
                });
            }
            for (k, kind) in kinds.into_iter().enumerate() {
                items.push(HeaderItem {
                    text: kind,
                    colour: MARKER_COLOURS[k % MARKER_COLOURS.len()],
                    swatch: Swatch::Tick,
                });
            }
            panels.push((
                pi,
                PanelLayout {
                    panel,
                    instants,
                    title,
                    traces,
                    colours,
                    legend: vec![items],
                    markers,
                    notes,
                    top: 0.0,
                    plot_top: 0.0,
                    plot_bottom: 0.0,
                    y: YAxis {
                        low: 0.0,
                        high: 1.0,
                        ticks: nice_ticks(0.0, 1.0, 2),
                        labels: Vec::new(),
                        title: String::new(),
                    },
                },
            ));
        }

        // The right gutter holds the notes; it does not depend on the rest
        // of the layout, so the legend rows can be packed against it first.
        let widest_note = panels
            .iter()
            .flat_map(|(_, p)| p.notes.iter())
            .map(|n| text_width(&n.text, NOTE_PX))
            .fold(0.0, f64::max);
        let right_gutter = if widest_note > 0.0 {
            16.0 + widest_note + MARGIN
        } else {
            MARGIN + 10.0
        };
        let zoom_space = figure.zooms.len() as f64 * (ZOOM_W + ZOOM_GAP);
        let plot_right = width - right_gutter - zoom_space;
        for (_, p) in panels.iter_mut() {
            let items = std::mem::take(&mut p.legend[0]);
            let first_row = plot_right - MARGIN - text_width(&p.title, PANEL_PX) * 1.08 - 24.0;
            p.legend = pack_rows(items, first_row, plot_right - MARGIN);
        }

        let title_h = if figure.title.is_empty() {
            0.0
        } else {
            TITLE_PX + 14.0
        };
        let bottom_h = TICK_LEN + 4.0 + TICK_PX + 8.0 + AXIS_PX + 4.0;
        let headers: f64 = panels
            .iter()
            .map(|(_, p)| header_height(p.legend.len()))
            .sum();
        let n = panels.len() as f64;
        let plot_h =
            (height - 2.0 * MARGIN - title_h - headers - (n - 1.0) * PANEL_GAP - bottom_h) / n;
        if plot_h < MIN_PLOT_H {
            return Err(too_small(&format!(
                "{} panels leave {:.0} px of plot height each, need {MIN_PLOT_H}",
                panels.len(),
                plot_h.max(0.0)
            )));
        }
        let mut top = MARGIN + title_h;
        for (pi, p) in panels.iter_mut() {
            p.top = top;
            p.plot_top = top + header_height(p.legend.len());
            p.plot_bottom = p.plot_top + plot_h;
            top = p.plot_bottom + PANEL_GAP;
            p.y = y_axis(p, plot_h, &panel_name(*pi, p.panel))?;
        }

        let widest_tick = panels
            .iter()
            .flat_map(|(_, p)| p.y.labels.iter())
            .map(|l| text_width(l, TICK_PX))
            .fold(0.0, f64::max);
        let plot_left = MARGIN + AXIS_PX * 1.5 + widest_tick + TICK_LEN + 6.0;
        let plot_w = plot_right - plot_left;
        if plot_w < MIN_PLOT_W {
            return Err(too_small(&format!(
                "the labels leave {:.0} px of plot width, need {MIN_PLOT_W}",
                plot_w.max(0.0)
            )));
        }

        let (name, unit) = figure
            .x_axis
            .as_ref()
            .map_or(("time", "s"), |(n, u)| (n.as_str(), u.as_str()));
        let (x_ticks, x_labels, x_title) = if figure.x_log10 {
            decade_axis(t0, t1, name, unit)
        } else {
            x_axis(t0, t1, plot_w, name, unit)
        };
        let zooms = figure
            .zooms
            .iter()
            .enumerate()
            .map(|(k, &(a, b))| {
                let left =
                    plot_right + right_gutter - MARGIN + ZOOM_GAP + k as f64 * (ZOOM_W + ZOOM_GAP);
                let (ticks, labels, title) = zoom_axis(a, b);
                ZoomColumn {
                    t0: a,
                    t1: b,
                    left,
                    right: left + ZOOM_W,
                    ticks,
                    labels,
                    title,
                }
            })
            .collect();
        Ok(Layout {
            figure,
            zooms,
            precise: std::cell::RefCell::new(Vec::new()),
            t0,
            t1,
            panels: panels.into_iter().map(|(_, p)| p).collect(),
            plot_left,
            plot_right,
            x_ticks,
            x_labels,
            x_title,
        })
    }

    /// Draws one trace as one polyline and keeps its sub-pixel vertices
    /// for [`with_precise_points`].
    #[allow(clippy::too_many_arguments)]
    fn draw_trace<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        trace: &[(f64, f64)],
        colour: RGBColor,
        left: f64,
        right: f64,
        x_px: &dyn Fn(f64) -> f64,
        y_px: &dyn Fn(f64) -> f64,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let column_limit = THIN_FACTOR * (right - left);
        let thinned;
        let vertices = if trace.len() as f64 > column_limit {
            thinned = thin_per_column(trace, |t| x_px(t).floor() as i64);
            &thinned[..]
        } else {
            trace
        };
        let mut path: Vec<(i32, i32)> = Vec::with_capacity(vertices.len());
        let mut precise = String::with_capacity(vertices.len() * 14);
        let mut last: Option<(String, String)> = None;
        for &(t, v) in vertices {
            let (x, y) = (x_px(t), y_px(v));
            let q = (coord(x), coord(y));
            if last.as_ref() != Some(&q) {
                precise.push_str(&q.0);
                precise.push(',');
                precise.push_str(&q.1);
                precise.push(' ');
                path.push((px(x), px(y)));
                last = Some(q);
            }
        }
        root.draw(&PathElement::new(path, colour.stroke_width(2)))?;
        self.precise.borrow_mut().push(precise);
        Ok(())
    }

    /// One zoom column of one panel: grid, traces, instants, frame, and on
    /// the bottom panel the column's own time labels.
    fn draw_zoom<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
        z: &ZoomColumn,
        index: usize,
        first_panel: bool,
        bottom_panel: bool,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let (top, bottom) = (p.plot_top, p.plot_bottom);
        let y_px = |v: f64| bottom - (v - p.y.low) / (p.y.high - p.y.low) * (bottom - top);
        let x_px = |t: f64| z.left + (t - z.t0) / (z.t1 - z.t0) * (z.right - z.left);
        let rect = |x0: f64, y0: f64, x1: f64, y1: f64, c: RGBAColor| {
            Rectangle::new([(px(x0), px(y0)), (px(x1), px(y1))], c.filled())
        };
        for &t in &z.ticks.values {
            let x = x_px(t);
            root.draw(&rect(x - 0.5, top, x + 0.5, bottom, GRID.to_rgba()))?;
        }
        for &v in &p.y.ticks.values {
            let y = y_px(v);
            root.draw(&rect(z.left, y - 0.5, z.right, y + 0.5, GRID.to_rgba()))?;
        }
        for (trace, colour) in p.panel.traces.iter().zip(&p.colours) {
            let clipped = clip_to_window(&trace.points, z.t0, z.t1);
            self.draw_trace(root, &clipped, *colour, z.left, z.right, &x_px, &y_px)?;
        }
        for &t in &p.instants {
            if t >= z.t0 && t <= z.t1 {
                let x = x_px(t);
                root.draw(&rect(x - 1.0, top, x + 1.0, bottom, INSTANT.to_rgba()))?;
            }
        }
        root.draw(&Rectangle::new(
            [(px(z.left), px(top)), (px(z.right), px(bottom))],
            FRAME.stroke_width(1),
        ))?;
        if first_panel {
            root.draw(&Text::new(
                format!("zoom {}", index + 1),
                (px(z.left), px(p.top + 0.5 * HEADER_ROW)),
                text_style(NOTE_PX, true, &INK, HPos::Left, VPos::Center),
            ))?;
        }
        let x_style = text_style(TICK_PX, false, &SOFT_INK, HPos::Center, VPos::Top);
        for (t, label) in z.ticks.values.iter().zip(&z.labels) {
            let x = x_px(*t);
            root.draw(&rect(
                x - 0.5,
                bottom,
                x + 0.5,
                bottom + TICK_LEN,
                FRAME.to_rgba(),
            ))?;
            if bottom_panel {
                root.draw(&Text::new(
                    label.clone(),
                    (px(x), px(bottom + TICK_LEN + 4.0)),
                    x_style.clone(),
                ))?;
            }
        }
        if bottom_panel {
            root.draw(&Text::new(
                z.title.clone(),
                (
                    px(0.5 * (z.left + z.right)),
                    px(bottom + TICK_LEN + 4.0 + TICK_PX + 8.0),
                ),
                text_style(AXIS_PX, false, &SOFT_INK, HPos::Center, VPos::Top),
            ))?;
        }
        Ok(())
    }

    fn x_px(&self, t: f64) -> f64 {
        self.plot_left + (t - self.t0) / (self.t1 - self.t0) * (self.plot_right - self.plot_left)
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        root.fill(&WHITE)?;
        if !self.figure.title.is_empty() {
            root.draw(&Text::new(
                clean(&self.figure.title),
                (px(MARGIN), px(MARGIN)),
                text_style(TITLE_PX, true, &INK, HPos::Left, VPos::Top),
            ))?;
        }
        let last = self.panels.len() - 1;
        for (i, p) in self.panels.iter().enumerate() {
            self.draw_panel(root, p, i == last)?;
        }
        // Zoom columns after every main panel, so that the main traces
        // stay the first polylines of the file, in panel order.
        for (k, z) in self.zooms.iter().enumerate() {
            for (i, p) in self.panels.iter().enumerate() {
                self.draw_zoom(root, p, z, k, i == 0, i == last)?;
            }
        }
        let bottom = self.panels[last].plot_bottom;
        root.draw(&Text::new(
            self.x_title.clone(),
            (
                px(0.5 * (self.plot_left + self.plot_right)),
                px(bottom + TICK_LEN + 4.0 + TICK_PX + 8.0),
            ),
            text_style(AXIS_PX, false, &SOFT_INK, HPos::Center, VPos::Top),
        ))?;
        Ok(())
    }

    fn draw_panel<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
        bottom_panel: bool,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let (left, right) = (self.plot_left, self.plot_right);
        let (top, bottom) = (p.plot_top, p.plot_bottom);
        let y_px = |v: f64| bottom - (v - p.y.low) / (p.y.high - p.y.low) * (bottom - top);
        let hline = |x0: f64, x1: f64, y: f64, w: f64, c: RGBAColor| {
            Rectangle::new(
                [
                    (px(x0), px(y - 0.5 * w)),
                    (px(x1), px(y - 0.5 * w) + w as i32),
                ],
                c.filled(),
            )
        };
        let vline = |x: f64, y0: f64, y1: f64, w: f64, c: RGBAColor| {
            Rectangle::new(
                [
                    (px(x - 0.5 * w), px(y0)),
                    (px(x - 0.5 * w) + w as i32, px(y1)),
                ],
                c.filled(),
            )
        };

        // Header: panel title on the left, legend rows right-aligned.
        let row_y = |row: usize| p.top + 0.5 * HEADER_ROW + row as f64 * HEADER_ROW;
        root.draw(&Text::new(
            p.title.clone(),
            (px(MARGIN), px(row_y(0))),
            text_style(PANEL_PX, true, &INK, HPos::Left, VPos::Center),
        ))?;
        for (r, row) in p.legend.iter().enumerate() {
            let y = row_y(r);
            let mut x = right - row.iter().map(|i| i.width() + 14.0).sum::<f64>() + 14.0;
            for item in row {
                match item.swatch {
                    Swatch::Line => {
                        root.draw(&hline(x, x + SWATCH, y, 2.0, item.colour.to_rgba()))?
                    }
                    Swatch::Tick => root.draw(&vline(
                        x + 0.5 * SWATCH,
                        y - 6.0,
                        y + 6.0,
                        2.0,
                        item.colour.to_rgba(),
                    ))?,
                }
                root.draw(&Text::new(
                    item.text.clone(),
                    (px(x + SWATCH + 5.0), px(y)),
                    text_style(NOTE_PX, false, &INK, HPos::Left, VPos::Center),
                ))?;
                x += item.width() + 14.0;
            }
        }

        // Grid first so that everything else lies on top of it.
        for &t in &self.x_ticks.values {
            root.draw(&vline(self.x_px(t), top, bottom, 1.0, GRID.to_rgba()))?;
        }
        for &v in &p.y.ticks.values {
            root.draw(&hline(left, right, y_px(v), 1.0, GRID.to_rgba()))?;
        }
        if p.y.low < 0.0 && p.y.high > 0.0 {
            root.draw(&hline(left, right, y_px(0.0), 1.0, ZERO_LINE.to_rgba()))?;
        }

        for note in &p.notes {
            match note.shape {
                NoteShape::Bracket { low, high } => {
                    let (y_hi, y_lo) = (y_px(high), y_px(low));
                    root.draw(&Rectangle::new(
                        [
                            (px(left), px(y_hi)),
                            (px(right), px(y_lo).max(px(y_hi) + 1)),
                        ],
                        note.colour.mix(0.10).filled(),
                    ))?;
                }
                NoteShape::Level => {
                    let y = y_px(note.at);
                    let mut x = left;
                    while x < right {
                        let end = (x + 7.0).min(right);
                        root.draw(&hline(x, end, y, 1.0, note.colour.mix(0.9)))?;
                        x += 12.0;
                    }
                }
            }
        }

        for (trace, colour) in p.traces.iter().zip(&p.colours) {
            self.draw_trace(root, trace, *colour, left, right, &|t| self.x_px(t), &y_px)?;
        }
        for &t in &p.instants {
            if t >= self.t0 && t <= self.t1 {
                root.draw(&vline(self.x_px(t), top, bottom, 2.0, INSTANT.to_rgba()))?;
            }
        }

        for &(t, colour) in &p.markers {
            root.draw(&vline(
                self.x_px(t),
                top + 1.0,
                top + 1.0 + MARKER_STRIP,
                1.0,
                colour.to_rgba(),
            ))?;
        }

        root.draw(&Rectangle::new(
            [(px(left), px(top)), (px(right), px(bottom))],
            FRAME.stroke_width(1),
        ))?;

        // Value axis: ticks, labels and the rotated quantity name.
        let tick_style = text_style(TICK_PX, false, &SOFT_INK, HPos::Right, VPos::Center);
        for (v, label) in p.y.ticks.values.iter().zip(&p.y.labels) {
            let y = y_px(*v);
            root.draw(&hline(left - TICK_LEN, left, y, 1.0, FRAME.to_rgba()))?;
            root.draw(&Text::new(
                label.clone(),
                (px(left - TICK_LEN - 4.0), px(y)),
                tick_style.clone(),
            ))?;
        }
        root.draw(&Text::new(
            p.y.title.clone(),
            (px(MARGIN + 0.6 * AXIS_PX), px(0.5 * (top + bottom))),
            text_style(AXIS_PX, false, &SOFT_INK, HPos::Center, VPos::Center)
                .transform(FontTransform::Rotate270),
        ))?;

        // Time axis: tick marks on every panel, labels on the bottom one only.
        let x_style = text_style(TICK_PX, false, &SOFT_INK, HPos::Center, VPos::Top);
        let figure_w = f64::from(self.figure.width);
        for (t, label) in self.x_ticks.values.iter().zip(&self.x_labels) {
            let x = self.x_px(*t);
            root.draw(&vline(x, bottom, bottom + TICK_LEN, 1.0, FRAME.to_rgba()))?;
            if bottom_panel {
                let half = 0.5 * text_width(label, TICK_PX);
                let xc = x.clamp(half + 2.0, (figure_w - half - 2.0).max(half + 2.0));
                root.draw(&Text::new(
                    label.clone(),
                    (px(xc), px(bottom + TICK_LEN + 4.0)),
                    x_style.clone(),
                ))?;
            }
        }

        // Gutter notes, pushed apart so they never overlap each other.
        let line_h = NOTE_PX + 3.0;
        // A level label belongs exactly at its line; a ripple label may sit
        // anywhere along its bracket, so a tall bracket takes it up to the
        // middle of its upper half, out of the way of an average near the centre.
        let mut placed: Vec<(f64, &Note)> = p
            .notes
            .iter()
            .map(|n| match n.shape {
                NoteShape::Bracket { low, high } if y_px(low) - y_px(high) > 4.0 * line_h => {
                    (0.25 * (3.0 * y_px(high) + y_px(low)), n)
                }
                _ => (y_px(n.at), n),
            })
            .collect();
        placed.sort_by(|a, b| a.0.total_cmp(&b.0));
        spread(
            &mut placed,
            line_h,
            top + 0.5 * line_h,
            bottom - 0.5 * line_h,
        );
        for (y, note) in placed {
            if let NoteShape::Bracket { low, high } = note.shape {
                let (y_hi, y_lo) = (y_px(high), y_px(low));
                let bx = right + 7.0;
                root.draw(&vline(
                    bx,
                    y_hi,
                    y_lo.max(y_hi + 1.0),
                    1.0,
                    note.colour.to_rgba(),
                ))?;
                root.draw(&hline(bx - 4.0, bx + 1.0, y_hi, 1.0, note.colour.to_rgba()))?;
                root.draw(&hline(bx - 4.0, bx + 1.0, y_lo, 1.0, note.colour.to_rgba()))?;
            }
            root.draw(&Text::new(
                note.text.clone(),
                (px(right + 13.0), px(y)),
                text_style(NOTE_PX, false, &note.colour, HPos::Left, VPos::Center),
            ))?;
        }
        Ok(())
    }
}

fn header_height(rows: usize) -> f64 {
    rows.max(1) as f64 * HEADER_ROW + 4.0
}

/// Greedy packing of legend items into rows: the first row shares its line
/// with the panel title, the others have the full width.
fn pack_rows(items: Vec<HeaderItem>, first_row: f64, full_row: f64) -> Vec<Vec<HeaderItem>> {
    let total: f64 = items.iter().map(|i| i.width() + 14.0).sum();
    if total <= first_row {
        return vec![items];
    }
    let mut rows: Vec<Vec<HeaderItem>> = vec![Vec::new(), Vec::new()];
    let mut used = 0.0;
    for item in items {
        let w = item.width() + 14.0;
        let last = rows.len() - 1;
        if used + w > full_row && !rows[last].is_empty() {
            rows.push(Vec::new());
            used = 0.0;
        }
        used += w;
        let last = rows.len() - 1;
        rows[last].push(item);
    }
    rows
}

/// Moves sorted label centres apart by at least `gap`, staying within
/// `[low, high]` when there is room for all of them.
fn spread<T>(placed: &mut [(f64, T)], gap: f64, low: f64, high: f64) {
    for i in 0..placed.len() {
        let floor = if i == 0 { low } else { placed[i - 1].0 + gap };
        placed[i].0 = placed[i].0.max(floor);
    }
    for i in (0..placed.len()).rev() {
        let ceiling = if i + 1 == placed.len() {
            high
        } else {
            placed[i + 1].0 - gap
        };
        placed[i].0 = placed[i].0.min(ceiling);
    }
}

/// Value range, ticks and labels of one panel for a plot `plot_h` pixels tall.
fn y_axis(p: &PanelLayout<'_>, plot_h: f64, name: &str) -> Result<YAxis, PlotError> {
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
    let title = match (unit.is_empty(), prefix.is_empty()) {
        (true, true) => quantity,
        (true, false) => format!("{quantity} ({prefix})"),
        (false, _) => format!("{quantity} ({prefix}{})", clean(unit)),
    };
    Ok(YAxis {
        low: y_low,
        high: y_high,
        ticks,
        labels,
        title,
    })
}

/// Horizontal ticks for a plot `plot_w` pixels wide: as many as fit with
/// their labels at least a gap apart; the title is `name (prefix unit)`.
fn x_axis(t0: f64, t1: f64, plot_w: f64, name: &str, unit: &str) -> (Ticks, Vec<String>, String) {
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
fn decade_axis(t0: f64, t1: f64, name: &str, unit: &str) -> (Ticks, Vec<String>, String) {
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
fn zoom_axis(t0: f64, t1: f64) -> (Ticks, Vec<String>, String) {
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
