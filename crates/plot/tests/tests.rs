//! Integration tests of fluxstep-plot, built as one binary.

/// Synthetic waveforms shared by the other modules (no solver involved).
mod common;
/// Failures are errors that name the trace, panel or time; nothing panics.
mod errors;
/// The buck-like figure rasterised with resvg, written to
/// `target/plot-check/buck_like.png` for a person to look at.
mod png_check;
/// Issue 13: review figures draw the solver's measurements, ripple only
/// where it is a ripple, sub-pixel vertices, zoom columns and the instant a
/// run stopped.
mod review;
/// The SVG is well-formed XML with one polyline per trace and sane labels.
mod svg_structure;
