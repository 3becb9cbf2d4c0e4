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

use crate::error::PlotError;
use crate::model::Figure;

mod axes;
mod check;
mod draw;
mod layout;
mod parts;
mod text;

use check::validate;
use layout::Layout;

pub(super) const MARGIN: f64 = 14.0;
pub(super) const TITLE_PX: f64 = 17.0;
pub(super) const PANEL_PX: f64 = 14.0;
pub(super) const TICK_PX: f64 = 12.0;
pub(super) const AXIS_PX: f64 = 12.5;
pub(super) const NOTE_PX: f64 = 12.0;
/// Average advance of a glyph in ems. No font is measured (the SVG names a
/// generic family), so widths are estimated on the wide side: DejaVu Sans
/// digits advance 0.64 em, Helvetica-like faces 0.56 em.
pub(super) const CHAR_EM: f64 = 0.64;
pub(super) const HEADER_ROW: f64 = 18.0;
pub(super) const PANEL_GAP: f64 = 14.0;
pub(super) const TICK_LEN: f64 = 5.0;
pub(super) const MARKER_STRIP: f64 = 9.0;
pub(super) const SWATCH: f64 = 18.0;
pub(super) const MIN_PLOT_W: f64 = 80.0;
pub(super) const MIN_PLOT_H: f64 = 40.0;
/// Larger figures are almost certainly a unit mistake and would build huge strings.
pub(super) const MAX_SIDE: u32 = 20_000;
/// Beyond this many vertices per pixel column, traces are thinned (see `reduce`).
pub(super) const THIN_FACTOR: f64 = 4.0;

pub(super) const INK: RGBColor = RGBColor(0x20, 0x24, 0x2a);
pub(super) const SOFT_INK: RGBColor = RGBColor(0x48, 0x4f, 0x58);
pub(super) const GRID: RGBColor = RGBColor(0xe6, 0xe9, 0xed);
pub(super) const ZERO_LINE: RGBColor = RGBColor(0xc2, 0xc8, 0xcf);
pub(super) const FRAME: RGBColor = RGBColor(0x8e, 0x95, 0x9d);
/// The colour of an [`Annotation::Instant`]: a warning red, used for
/// nothing else.
pub(super) const INSTANT: RGBColor = RGBColor(0xd0, 0x1c, 0x1c);
/// Width of a zoom column's plot and the gap before it, in pixels.
pub(super) const ZOOM_W: f64 = 130.0;
pub(super) const ZOOM_GAP: f64 = 16.0;
/// Trace colours: dark enough to print on white, far apart in hue, in an
/// order where neighbours never share a hue family.
pub(super) const TRACE_COLOURS: [RGBColor; 8] = [
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
pub(super) const MARKER_COLOURS: [RGBColor; 5] = [
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
pub(super) fn coord(v: f64) -> String {
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
