//! Drawing a laid-out figure: header, grid, shading, traces, markers,
//! axes and gutter notes of each panel, then the zoom columns.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};
use plotters::style::FontTransform;

use super::layout::{spread, Layout};
use super::parts::{Note, NoteShape, PanelLayout, Swatch, ZoomColumn};
use super::text::{clean, px, text_style, text_width};
use super::{
    coord, AXIS_PX, FRAME, GRID, HEADER_ROW, INK, INSTANT, MARGIN, MARKER_STRIP, NOTE_PX, PANEL_PX,
    SOFT_INK, SWATCH, THIN_FACTOR, TICK_LEN, TICK_PX, TITLE_PX, ZERO_LINE,
};
use crate::reduce::{clip_to_window, thin_per_column};

impl<'a> Layout<'a> {
    /// Draws one trace as one polyline and keeps its sub-pixel vertices
    /// for [`with_precise_points`].
    #[allow(clippy::too_many_arguments)]
    pub(super) fn draw_trace<DB: DrawingBackend>(
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
    pub(super) fn draw_zoom<DB: DrawingBackend>(
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

    pub(super) fn x_px(&self, t: f64) -> f64 {
        self.plot_left + (t - self.t0) / (self.t1 - self.t0) * (self.plot_right - self.plot_left)
    }

    pub(super) fn draw<DB: DrawingBackend>(
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

    pub(super) fn draw_panel<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
        bottom_panel: bool,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        self.draw_header(root, p)?;
        self.draw_plot_area(root, p)?;
        self.draw_value_axis(root, p)?;
        self.draw_time_ticks(root, p, bottom_panel)?;
        self.draw_notes(root, p)
    }

    /// The header: panel title on the left, legend rows right-aligned.
    fn draw_header<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let right = self.plot_right;
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

        Ok(())
    }

    /// The plot area: grid, note shading, traces, instants, event markers, frame.
    fn draw_plot_area<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let (left, right) = (self.plot_left, self.plot_right);
        let (top, bottom) = (p.plot_top, p.plot_bottom);
        let y_px = |v: f64| p.y_px(v);
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

        Ok(())
    }

    /// The value axis: ticks, labels and the rotated quantity name.
    fn draw_value_axis<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let left = self.plot_left;
        let (top, bottom) = (p.plot_top, p.plot_bottom);
        let y_px = |v: f64| p.y_px(v);
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
        // Rotated, the title runs along the plot's height: where it is
        // longer (seven panels in the default size), only its unit, so
        // that it stays beside its own panel instead of running into the
        // panel titles above and below.
        let title = if text_width(&p.y.title, AXIS_PX) <= bottom - top {
            p.y.title.clone()
        } else {
            p.y.short.clone()
        };
        root.draw(&Text::new(
            title,
            (px(MARGIN + 0.6 * AXIS_PX), px(0.5 * (top + bottom))),
            text_style(AXIS_PX, false, &SOFT_INK, HPos::Center, VPos::Center)
                .transform(FontTransform::Rotate270),
        ))?;

        Ok(())
    }

    /// The time axis: tick marks on every panel, labels on the bottom one only.
    fn draw_time_ticks<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
        bottom_panel: bool,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let bottom = p.plot_bottom;
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

        Ok(())
    }

    /// The gutter notes, pushed apart so they never overlap each other.
    fn draw_notes<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
        p: &PanelLayout<'_>,
    ) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
        let right = self.plot_right;
        let (top, bottom) = (p.plot_top, p.plot_bottom);
        let y_px = |v: f64| p.y_px(v);
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

impl PanelLayout<'_> {
    /// The pixel row of value `v` in this panel's plot.
    fn y_px(&self, v: f64) -> f64 {
        let (top, bottom) = (self.plot_top, self.plot_bottom);
        bottom - (v - self.y.low) / (self.y.high - self.y.low) * (bottom - top)
    }
}

/// A horizontal line from `x0` to `x1` at `y`, `w` pixels thick, as a
/// filled rectangle (see the module's note on pixel-sharp lines).
fn hline(x0: f64, x1: f64, y: f64, w: f64, c: RGBAColor) -> Rectangle<(i32, i32)> {
    Rectangle::new(
        [
            (px(x0), px(y - 0.5 * w)),
            (px(x1), px(y - 0.5 * w) + w as i32),
        ],
        c.filled(),
    )
}

/// A vertical line at `x` from `y0` to `y1`, `w` pixels thick, as a filled
/// rectangle.
fn vline(x: f64, y0: f64, y1: f64, w: f64, c: RGBAColor) -> Rectangle<(i32, i32)> {
    Rectangle::new(
        [
            (px(x - 0.5 * w), px(y0)),
            (px(x - 0.5 * w) + w as i32, px(y1)),
        ],
        c.filled(),
    )
}
