//! The one error type of the crate: every variant names the figure item at fault.

use std::path::PathBuf;

/// Why a figure could not be rendered or written.
///
/// Panels are named by their title in quotes, or by their position
/// ("panel 2") when the title is empty; traces by their label.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PlotError {
    /// The figure holds no panel.
    #[error("figure '{figure}' has no panels")]
    EmptyFigure {
        /// Title of the figure.
        figure: String,
    },
    /// A Bode figure's frequency is not positive and finite, or not above
    /// the one before.
    #[error("figure '{figure}': frequency {frequency} Hz at point {index} is not positive, finite and increasing")]
    InvalidFrequency {
        /// Title of the figure.
        figure: String,
        /// Index of the point.
        index: usize,
        /// The frequency given (Hz).
        frequency: f64,
    },
    /// A panel holds no trace.
    #[error("{panel} has no traces")]
    EmptyPanel {
        /// The panel, as described in the type docs.
        panel: String,
    },
    /// A trace holds no point.
    #[error("trace '{trace}' has no points")]
    EmptyTrace {
        /// Label of the trace.
        trace: String,
    },
    /// A time coordinate is NaN or infinite.
    #[error("trace '{trace}' has a non-finite time at point {index}")]
    NonFiniteTime {
        /// Label of the trace.
        trace: String,
        /// Index of the point in the trace.
        index: usize,
    },
    /// A value is NaN or infinite.
    #[error("trace '{trace}' has a non-finite value at t = {time:e} s (point {index})")]
    NonFiniteValue {
        /// Label of the trace.
        trace: String,
        /// Time of the offending point, in seconds.
        time: f64,
        /// The offending value.
        value: f64,
        /// Index of the point in the trace.
        index: usize,
    },
    /// An output named for a figure is not an output of the circuit.
    #[error("unknown output {name:?}: expected {}", fluxstep_netlist::OUTPUT_FORMS)]
    UnknownOutput {
        /// The name as given.
        name: String,
    },
    /// Times must not decrease along a trace (equal times are a vertical step).
    #[error("trace '{trace}' goes back in time at t = {time:e} s (point {index})")]
    TimeNotIncreasing {
        /// Label of the trace.
        trace: String,
        /// Time of the point that comes before its predecessor, in seconds.
        time: f64,
        /// Index of that point.
        index: usize,
    },
    /// The traces of one panel share one value axis, hence one unit.
    #[error(
        "{panel} mixes units: trace '{trace}' is in '{unit}' but the panel is in '{expected}'"
    )]
    MixedUnits {
        /// The panel.
        panel: String,
        /// Label of the first trace whose unit differs.
        trace: String,
        /// Unit of that trace.
        unit: String,
        /// Unit of the panel's first trace.
        expected: String,
    },
    /// An annotation refers to a trace the panel does not hold.
    #[error("{panel}: annotation refers to trace {index} but the panel holds {count}")]
    BadTraceIndex {
        /// The panel.
        panel: String,
        /// The index given in the annotation.
        index: usize,
        /// Number of traces in the panel.
        count: usize,
    },
    /// An annotation holds a NaN or infinite number.
    #[error("{panel}: {what} annotation has a non-finite {field}")]
    NonFiniteAnnotation {
        /// The panel.
        panel: String,
        /// Kind of annotation ("ripple", "average", "event marker").
        what: &'static str,
        /// The field at fault.
        field: &'static str,
    },
    /// A ripple annotation whose minimum lies above its maximum.
    #[error("{panel}: ripple minimum {min} lies above its maximum {max}")]
    InvalidRipple {
        /// The panel.
        panel: String,
        /// Given minimum.
        min: f64,
        /// Given maximum.
        max: f64,
    },
    /// The time window is not a finite interval of positive length.
    #[error("time window [{start:e}, {end:e}] s is not a finite interval of positive length")]
    InvalidWindow {
        /// Start of the window, in seconds.
        start: f64,
        /// End of the window, in seconds.
        end: f64,
    },
    /// Without a window, the traces must cover some time.
    #[error("the traces span no time (all points at t = {time:e} s); give a window")]
    NoTimeSpan {
        /// The single instant the traces cover.
        time: f64,
    },
    /// A value range too wide to draw (its span overflows).
    #[error("{panel}: value range [{low:e}, {high:e}] is too wide to draw")]
    RangeTooWide {
        /// The panel.
        panel: String,
        /// Lowest value.
        low: f64,
        /// Highest value.
        high: f64,
    },
    /// The figure is too small for its panels, or absurdly large.
    #[error("figure size {width}x{height} px: {reason}")]
    BadSize {
        /// Requested width in pixels.
        width: u32,
        /// Requested height in pixels.
        height: u32,
        /// What does not fit.
        reason: String,
    },
    /// The drawing backend failed; not expected when drawing into a string.
    #[error("drawing failed: {0}")]
    Draw(String),
    /// Writing the SVG file failed.
    #[error("cannot write {path}")]
    Io {
        /// File that could not be written.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
}
