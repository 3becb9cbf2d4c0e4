//! The placed parts of a figure: a panel's layout, its y axis, legend
//! items and gutter notes, and the zoom columns. Plain data that the
//! layout fills in and the axes and drawing read (a leaf of `render`).

use plotters::prelude::RGBColor;

use super::text::text_width;
use super::{NOTE_PX, SWATCH};
use crate::model::Panel;
use crate::scale::Ticks;

pub(super) enum Swatch {
    Line,
    Tick,
}

pub(super) struct HeaderItem {
    pub(super) text: String,
    pub(super) colour: RGBColor,
    pub(super) swatch: Swatch,
}

impl HeaderItem {
    pub(super) fn width(&self) -> f64 {
        SWATCH + 5.0 + text_width(&self.text, NOTE_PX)
    }
}

pub(super) enum NoteShape {
    Bracket { low: f64, high: f64 },
    Level,
}

/// A label in the right-hand gutter, pointing at a value.
pub(super) struct Note {
    pub(super) text: String,
    pub(super) colour: RGBColor,
    pub(super) at: f64,
    pub(super) shape: NoteShape,
}

pub(super) struct YAxis {
    pub(super) low: f64,
    pub(super) high: f64,
    pub(super) ticks: Ticks,
    pub(super) labels: Vec<String>,
    pub(super) title: String,
    /// The title without the quantity's name (`mA`, `V`), drawn where the
    /// whole title is longer than the plot is high.
    pub(super) short: String,
}

pub(super) struct PanelLayout<'a> {
    pub(super) panel: &'a Panel,
    pub(super) instants: Vec<f64>,
    pub(super) title: String,
    pub(super) traces: Vec<Vec<(f64, f64)>>,
    pub(super) colours: Vec<RGBColor>,
    pub(super) legend: Vec<Vec<HeaderItem>>,
    pub(super) markers: Vec<(f64, RGBColor)>,
    pub(super) notes: Vec<Note>,
    pub(super) top: f64,
    pub(super) plot_top: f64,
    pub(super) plot_bottom: f64,
    pub(super) y: YAxis,
}

/// A narrow column showing a zoomed time window of every panel.
pub(super) struct ZoomColumn {
    pub(super) t0: f64,
    pub(super) t1: f64,
    pub(super) left: f64,
    pub(super) right: f64,
    pub(super) ticks: Ticks,
    pub(super) labels: Vec<String>,
    pub(super) title: String,
}
