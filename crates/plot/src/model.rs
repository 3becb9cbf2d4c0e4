//! What a figure is made of: traces of sampled vertices, panels that stack them, annotations.

/// One waveform: vertices of a piecewise-linear curve, in time order.
///
/// The caller samples the exact solution so that every event instant is a
/// vertex; a step is two vertices at the same time. Times must not
/// decrease. The plot crate draws straight lines between vertices and
/// computes nothing else from them.
#[derive(Debug, Clone, PartialEq)]
pub struct Trace {
    /// Name shown in the legend or the panel header, e.g. "inductor current".
    pub label: String,
    /// SI unit symbol without prefix: "A", "V", "W", "J"… Empty for a
    /// dimensionless quantity (then values are shown unscaled).
    pub unit: String,
    /// `(time in s, value in unit)` vertices.
    pub points: Vec<(f64, f64)>,
    /// The quantity in plain words for the value axis ("current",
    /// "control signal"); empty: named from the unit ("A" → "current").
    pub quantity: String,
}

impl Trace {
    /// A trace from its label, unit and vertices.
    pub fn new(label: impl Into<String>, unit: impl Into<String>, points: Vec<(f64, f64)>) -> Self {
        Trace {
            label: label.into(),
            unit: unit.into(),
            points,
            quantity: String::new(),
        }
    }

    /// Names the quantity shown on the value axis.
    pub fn with_quantity(mut self, quantity: impl Into<String>) -> Self {
        self.quantity = quantity.into();
        self
    }
}

/// A mark drawn on top of a panel's traces from numbers the caller measured.
#[derive(Debug, Clone, PartialEq)]
pub enum Annotation {
    /// A translucent band from `min` to `max` in the colour of trace
    /// `trace_index`, with a bracket and the peak-to-peak value beside the plot.
    Ripple {
        /// Index of the trace in [`Panel::traces`].
        trace_index: usize,
        /// Lowest value of the ripple, in the trace's unit.
        min: f64,
        /// Highest value of the ripple, in the trace's unit.
        max: f64,
    },
    /// A dashed horizontal line at `value`, labelled beside the plot.
    Average {
        /// Index of the trace in [`Panel::traces`].
        trace_index: usize,
        /// The average, in the trace's unit.
        value: f64,
    },
    /// A strong vertical line across the whole plot at `time` (e.g. the
    /// instant a run stopped on a diagnostic), with `label` in the panel
    /// header when it is not empty.
    Instant {
        /// The instant (s).
        time: f64,
        /// Shown in the header, e.g. "stopped: inductor current interrupted".
        label: String,
    },
    /// Thin vertical ticks along the top edge of the panel, one per
    /// `(time in s, kind)`; each distinct kind gets its own colour and an
    /// entry in the panel header. Instants outside the time axis are skipped.
    EventMarkers {
        /// `(time in s, kind)` pairs, e.g. `(2.5e-6, "gate off")`.
        times: Vec<(f64, String)>,
    },
}

/// One stacked plot: traces of one unit on a shared value axis.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Panel {
    /// Shown at the top left of the panel; when empty and the panel holds
    /// one trace, that trace's label is shown instead.
    pub title: String,
    /// The curves; all must share one unit. A legend is drawn when there
    /// is more than one.
    pub traces: Vec<Trace>,
    /// Marks drawn over the traces.
    pub annotations: Vec<Annotation>,
}

impl Panel {
    /// An empty panel with a title.
    pub fn new(title: impl Into<String>) -> Self {
        Panel {
            title: title.into(),
            ..Panel::default()
        }
    }

    /// Adds a trace.
    pub fn with_trace(mut self, trace: Trace) -> Self {
        self.traces.push(trace);
        self
    }

    /// Adds an annotation.
    pub fn with_annotation(mut self, annotation: Annotation) -> Self {
        self.annotations.push(annotation);
        self
    }
}

/// Stacked panels sharing one time axis, rendered to SVG by
/// [`render_svg`](crate::render_svg).
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Shown above the top panel; nothing is drawn when empty.
    pub title: String,
    /// Panels from top to bottom; only the bottom one carries time labels.
    pub panels: Vec<Panel>,
    /// Default 960 px. Narrower figures get fewer time ticks.
    pub width: u32,
    /// Default 640 px. Shared out evenly between the panels' plot areas.
    pub height: u32,
    /// Default `None`: the time axis spans the union of all traces.
    /// `Some((start, end))` in seconds shows only that window; traces are
    /// cut at its edges (by linear interpolation between vertices), so a
    /// window of a long run draws only what is visible.
    pub window: Option<(f64, f64)>,
    /// Default none. Narrow windows `(start, end)` in seconds drawn as
    /// extra columns to the right of the main plots, each with every panel
    /// on the same value axis and its own time axis: a dead-time interval
    /// or a diode turn-off that is a single pixel at full width.
    pub zooms: Vec<(f64, f64)>,
    /// Default `None`: the horizontal axis is time in seconds. `Some((name,
    /// unit))` names another quantity (a swept parameter, a histogram's
    /// figure); traces' first coordinates are then that quantity, still
    /// non-decreasing along each trace.
    pub x_axis: Option<(String, String)>,
    /// Default false. True: traces' first coordinates are log10 of the
    /// horizontal quantity (a frequency), and the axis is labelled at
    /// decades in that quantity's unit with SI prefixes ("1 kHz").
    pub x_log10: bool,
}

impl Figure {
    /// An empty 960 × 640 figure with a title.
    pub fn new(title: impl Into<String>) -> Self {
        Figure {
            title: title.into(),
            panels: Vec::new(),
            width: 960,
            height: 640,
            window: None,
            zooms: Vec::new(),
            x_axis: None,
            x_log10: false,
        }
    }

    /// Adds a zoom column showing `[start, end]` seconds.
    pub fn with_zoom(mut self, start: f64, end: f64) -> Self {
        self.zooms.push((start, end));
        self
    }

    /// Adds a panel below the existing ones.
    pub fn with_panel(mut self, panel: Panel) -> Self {
        self.panels.push(panel);
        self
    }

    /// Sets the size in pixels.
    pub fn with_size(mut self, width: u32, height: u32) -> Self {
        self.width = width;
        self.height = height;
        self
    }

    /// Names the horizontal quantity and its unit (instead of time in seconds).
    pub fn with_x_axis(mut self, name: impl Into<String>, unit: impl Into<String>) -> Self {
        self.x_axis = Some((name.into(), unit.into()));
        self
    }

    /// A logarithmic horizontal axis: traces carry log10 of the quantity
    /// named by [`Figure::with_x_axis`] (see [`Figure::x_log10`]).
    pub fn with_log_x(mut self) -> Self {
        self.x_log10 = true;
        self
    }

    /// Restricts the time axis to `[start, end]` seconds.
    pub fn with_window(mut self, start: f64, end: f64) -> Self {
        self.window = Some((start, end));
        self
    }
}
