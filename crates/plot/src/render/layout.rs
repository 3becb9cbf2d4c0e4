//! Placing everything: panels with their legends and notes, the shared
//! time axis, the zoom columns; the sizes that must fit are checked here.

use fluxstep_netlist::si::format_si;
use plotters::prelude::*;

use super::axes::{decade_axis, x_axis, y_axis, zoom_axis};
use super::check::panel_name;
use super::parts::{HeaderItem, Note, NoteShape, PanelLayout, Swatch, YAxis, ZoomColumn};
use super::text::{clean, text_width};
use super::{
    AXIS_PX, HEADER_ROW, INSTANT, MARGIN, MARKER_COLOURS, MIN_PLOT_H, MIN_PLOT_W, NOTE_PX,
    PANEL_GAP, PANEL_PX, TICK_LEN, TICK_PX, TITLE_PX, TRACE_COLOURS, ZOOM_GAP, ZOOM_W,
};
use crate::error::PlotError;
use crate::model::{Annotation, Figure, Panel};
use crate::reduce::clip_to_window;
use crate::scale::{nice_ticks, Ticks};

pub(super) struct Layout<'a> {
    pub(super) figure: &'a Figure,
    pub(super) zooms: Vec<ZoomColumn>,
    /// Sub-pixel vertices of every polyline, in drawing order.
    pub(super) precise: std::cell::RefCell<Vec<String>>,
    pub(super) t0: f64,
    pub(super) t1: f64,
    pub(super) panels: Vec<PanelLayout<'a>>,
    pub(super) plot_left: f64,
    pub(super) plot_right: f64,
    pub(super) x_ticks: Ticks,
    pub(super) x_labels: Vec<String>,
    pub(super) x_title: String,
}

impl<'a> PanelLayout<'a> {
    /// A panel's traces clipped to the time axis, their colours (from
    /// `first_colour` on), title, notes, markers and legend items (in one
    /// row until the rows are packed); its place and value axis come later.
    fn new(panel: &'a Panel, first_colour: usize, t0: f64, t1: f64) -> Self {
        let traces: Vec<Vec<(f64, f64)>> = panel
            .traces
            .iter()
            .map(|t| clip_to_window(&t.points, t0, t1))
            .collect();
        let colours: Vec<RGBColor> = (0..traces.len())
            .map(|i| TRACE_COLOURS[(first_colour + i) % TRACE_COLOURS.len()])
            .collect();
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
        let items = legend_items(panel, &colours, instant_labels, kinds);
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
                short: String::new(),
            },
        }
    }
}

/// The legend items of a panel: its traces (when there are several), its
/// labelled instants and its kinds of event markers.
fn legend_items(
    panel: &Panel,
    colours: &[RGBColor],
    instant_labels: Vec<String>,
    kinds: Vec<String>,
) -> Vec<HeaderItem> {
    let mut items: Vec<HeaderItem> = Vec::new();
    if panel.traces.len() > 1 {
        for (trace, colour) in panel.traces.iter().zip(colours) {
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
    items
}

impl<'a> Layout<'a> {
    pub(super) fn new(figure: &'a Figure, t0: f64, t1: f64) -> Result<Self, PlotError> {
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
            panels.push((pi, PanelLayout::new(panel, colour_index, t0, t1)));
            colour_index += panel.traces.len();
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
}

pub(super) fn header_height(rows: usize) -> f64 {
    rows.max(1) as f64 * HEADER_ROW + 4.0
}

/// Greedy packing of legend items into rows: the first row shares its line
/// with the panel title, the others have the full width.
pub(super) fn pack_rows(
    items: Vec<HeaderItem>,
    first_row: f64,
    full_row: f64,
) -> Vec<Vec<HeaderItem>> {
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
pub(super) fn spread<T>(placed: &mut [(f64, T)], gap: f64, low: f64, high: f64) {
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
