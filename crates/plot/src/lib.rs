//! SVG figures of switching waveforms: the last stage of the fluxstep
//! pipeline, netlist → solver → analysis → **plot**.
//!
//! The solver produces exact waveforms and the analysis stage measures
//! them; this crate only draws what it is given. A [`Figure`] stacks
//! [`Panel`]s that share one time axis (by default inductor current on
//! top, switch-node voltage below); each panel holds [`Trace`]s of one unit
//! and optional [`Annotation`]s (ripple band, average line, event markers)
//! whose numbers the caller has measured. [`render_svg`] lays the figure
//! out and draws it with plotters' SVG backend, which writes text as
//! `<text>` elements, so no font is needed to build or render.
//!
//! # Brief overview
//!
//! - [`Trace`]: `(time, value)` vertices in time order. The caller samples
//!   the exact solution so that every event instant is a vertex and a step
//!   is two vertices at the same time; the figure joins vertices with
//!   straight lines, so corners stay sharp and steps stay vertical.
//! - [`Panel`], [`Figure`]: layout. Only the bottom panel carries time
//!   labels; a legend appears where a panel holds more than one trace.
//! - [`render_svg`], [`write_svg`]: output. Every trace is exactly one
//!   `<polyline>` element, in panel then trace order (then once more per
//!   zoom column, [`Figure::zooms`]), and nothing else is a polyline (grid,
//!   ticks, dashes and markers are thin `<rect>`s), so a test can count
//!   traces in the file. Vertices are written to 0.01 px, so a ramp is a
//!   straight line at any magnification, not a staircase.
//! - [`review_figure`]: the design-review figure of a solver run, annotated
//!   with the solver's own measurements (ripple of one period on inductor
//!   currents in periodic operation, averages, the instant a run stopped).
//! - [`nice_ticks`]: 1-2-5 tick steps. [`si_scale`], [`format_si`],
//!   [`format_si_digits`], [`format_si_short`]: the number formatting of
//!   the whole project, re-exported from [`fluxstep_netlist::si`] where it
//!   lives.
//! - [`loss_chart_svg`]: the loss breakdown as stacked horizontal bars,
//!   one per part, split by mechanism ([`LossBar`]).
//! - [`PlotError`]: every failure, naming the panel, trace or time at fault.
//!
//! Dense traces are thinned for display only when they hold more than
//! about four vertices per pixel column: each column keeps its first,
//! lowest, highest and last vertex, so every peak, valley and step is
//! still drawn. A [`Figure::window`] cuts traces at its edges, so a window
//! of a long run draws only what is visible.
//!
//! # Example
//!
//! ```
//! use fluxstep_plot::{render_svg, Annotation, Figure, Panel, Trace};
//!
//! // A triangular current and the switch-node voltage that drives it,
//! // as a solver would hand them over: vertices at every switching instant.
//! let period = 5e-6;
//! let mut current = Vec::new();
//! let mut node = Vec::new();
//! for k in 0..4 {
//!     let t = k as f64 * period;
//!     current.extend([(t, 1.8), (t + 0.5 * period, 2.2)]);
//!     node.extend([(t, 0.0), (t, 12.0), (t + 0.5 * period, 12.0), (t + 0.5 * period, 0.0)]);
//! }
//! current.push((4.0 * period, 1.8));
//! node.push((4.0 * period, 0.0));
//!
//! let figure = Figure::new("buck converter, 200 kHz")
//!     .with_panel(
//!         Panel::new("inductor current")
//!             .with_trace(Trace::new("inductor current", "A", current))
//!             .with_annotation(Annotation::Ripple { trace_index: 0, min: 1.8, max: 2.2 }),
//!     )
//!     .with_panel(Panel::new("switch node").with_trace(Trace::new("switch node", "V", node)));
//! let svg = render_svg(&figure)?;
//! assert_eq!(svg.matches("<polyline").count(), 2);
//! assert!(svg.contains("time (µs)"));
//! # Ok::<(), fluxstep_plot::PlotError>(())
//! ```

// Every public item is part of the figure contract other crates build on.
#![deny(missing_docs)]

mod bars;
mod bode;
mod error;
mod model;
mod reduce;
mod render;
mod review;
mod scale;

pub use bars::{loss_chart_svg, LossBar, MECHANISMS};
pub use bode::{bode_figure, unwrap_phase, BodeMarks, BodePoint};
pub use error::PlotError;
pub use fluxstep_netlist::si::{format_si, format_si_digits, format_si_short, si_scale};
pub use model::{Annotation, Figure, Panel, Trace};
pub use render::{render_svg, write_svg};
pub use review::{output_trace, review_figure, ReviewOptions};
pub use scale::{nice_ticks, Ticks};
