//! Measurements on the exact piecewise solution: average, RMS, extremes and
//! their times of any output, and the power and energy of any element, over
//! a time window (by default the last few switching periods).
//!
//! Nothing here samples on a grid. Integrals use [`Waveform::integrate`]
//! (Gauss–Legendre on sub-intervals where the output is a rapidly converging
//! sum of exponentials, exact up to rounding). Extremes are taken among the
//! values at every event instant (left and right limits both) and at every
//! interior stationary point, located as a sign change of the exact time
//! derivative and refined by bisection to machine precision.
//!
//! # Window convention
//!
//! A window `[t0, t1]` sees the output on the open interval `(t0, t1)` plus
//! its one-sided limits at the ends: the value just after `t0` and the value
//! just before `t1`. An event exactly at `t0` therefore contributes only its
//! after-value, one exactly at `t1` only its before-value, which makes
//! windows of whole periods tile without counting an edge twice.
//! Zero-length segments (momentary modes at an event instant) are skipped,
//! as [`Waveform::value`] and [`Waveform::value_before`] skip them.
//!
//! # Layout
//!
//! This file holds the measurement of one output over a window;
//! `window.rs` checks windows and finds the segments they overlap,
//! `extremes.rs` finds extremes and their instants, `energy.rs` the power
//! and energy of elements, `settling.rs` settling times and `rounding.rs`
//! the rounding-noise floor for values shown to people.

mod energy;
mod extremes;
mod rounding;
mod settling;
mod window;

use serde::{Deserialize, Serialize};

use crate::waveform::{OutputId, Waveform};
use extremes::{extremes, Extremes};
use window::{check_window, last_periods_window};

pub use energy::{element_energy, element_power, part_energy};
pub use rounding::{without_rounding_noise, ROUNDING_REL};
pub use settling::settling_time;

/// Measurements of one output over a time window.
///
/// All values are in the output's SI unit (V or A); times in seconds.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Measurement {
    /// The output's name (`NODE`, `ELEMENT.current`, `ELEMENT.voltage`).
    pub output: String,
    /// Start of the window (s).
    pub t0: f64,
    /// End of the window (s).
    pub t1: f64,
    /// Time average over the window.
    pub average: f64,
    /// Root mean square over the window.
    pub rms: f64,
    /// Smallest value in the window.
    pub min: f64,
    /// Largest value in the window.
    pub max: f64,
    /// `max − min`: the ripple when the window holds whole periods.
    pub peak_to_peak: f64,
    /// First instant at which `min` is reached (s).
    pub time_of_min: f64,
    /// First instant at which `max` is reached (s).
    pub time_of_max: f64,
}

/// Why a measurement could not be taken. Each variant names the output or
/// element (`subject`) and the times concerned.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum MeasureError {
    /// The window is empty, reversed or not finite.
    #[error("{subject}: window [{t0:e}, {t1:e}] s is empty or not finite (need t0 < t1)")]
    InvalidWindow {
        /// Output or element name.
        subject: String,
        /// Requested start (s).
        t0: f64,
        /// Requested end (s).
        t1: f64,
    },
    /// The run recorded nothing (e.g. `Record::Nothing`).
    #[error("{subject}: nothing was recorded")]
    NothingRecorded {
        /// Output or element name.
        subject: String,
    },
    /// The window reaches outside the recorded span.
    #[error(
        "{subject}: window [{t0:e}, {t1:e}] s is not inside the recorded span [{start:e}, {end:e}] s"
    )]
    OutsideRecord {
        /// Output or element name.
        subject: String,
        /// Requested start (s).
        t0: f64,
        /// Requested end (s).
        t1: f64,
        /// Start of the recorded span (s).
        start: f64,
        /// End of the recorded span (s).
        end: f64,
    },
    /// The output has no defined value over part of the window (a floating
    /// node, or the voltage of an open element across one).
    #[error("{subject} is undetermined (floating) from t = {time:e} s, inside the window")]
    Undetermined {
        /// Output or element name.
        subject: String,
        /// Start of the undetermined stretch (s), clipped to the window.
        time: f64,
    },
    /// The solution holds an infinite or NaN value.
    #[error("{subject} is not finite at t = {time:e} s")]
    NonFinite {
        /// Output or element name.
        subject: String,
        /// Where the value was found (s).
        time: f64,
    },
    /// The output changes too fast inside one recorded segment to be
    /// measured there: its exact local form needs more than about a
    /// million polynomial pieces (2²⁰; an oscillation hundreds of
    /// thousands of radians long between two events, such as a 1 THz
    /// source over 0.1 ms, 6e8 radians). Shorten the window, or check the element
    /// values that make the circuit that fast.
    #[error(
        "{subject} changes too fast to measure in the segment from t = {time:e} s: \
         {pieces:.3e} polynomial pieces needed, more than the limit of {limit}; \
         shorten the window or check the element values that make the circuit that fast"
    )]
    TooFast {
        /// Output or element name.
        subject: String,
        /// Start of the segment's stretch inside the window (s).
        time: f64,
        /// Pieces the stretch needs (may be ∞).
        pieces: f64,
        /// The limit (2²⁰).
        limit: usize,
    },
    /// The output id belongs to another waveform.
    #[error("output id {index} does not belong to this waveform")]
    ForeignOutput {
        /// The id's index.
        index: usize,
    },
    /// No element of that name has a recorded current and voltage.
    #[error("no element {element:?} with a recorded current and voltage")]
    UnknownElement {
        /// The name as given.
        element: String,
    },
    /// A period measured by its index must start and end at recorded
    /// segment boundaries (see [`measure_period`]).
    #[error("{subject}: no recorded segment boundary at t = {time:e} s (give the instant as Simulator::cycle_start computes it)")]
    NotABoundary {
        /// Output name.
        subject: String,
        /// The instant as given (s).
        time: f64,
    },
    /// A period-based window needs a positive finite period and at least one period.
    #[error("{subject}: need a positive period and at least one period, got period {period:e} s, count {count}")]
    InvalidPeriods {
        /// Output name.
        subject: String,
        /// Period as given (s).
        period: f64,
        /// Number of periods as given.
        count: usize,
    },
}

/// Measures output `id` over `[t0, t1]` on the exact solution.
///
/// Average and RMS are exact integrals; extremes are the largest and
/// smallest of the values at event instants (both one-sided limits) and at
/// interior stationary points, all within rounding of the exact solution.
/// See the module notes for which end values a window sees.
///
/// # Errors
///
/// - [`MeasureError::InvalidWindow`] unless `t0 < t1`, both finite;
/// - [`MeasureError::NothingRecorded`], [`MeasureError::OutsideRecord`] when
///   the window is not inside the recorded span;
/// - [`MeasureError::Undetermined`] when the output floats somewhere in the window;
/// - [`MeasureError::NonFinite`] when the solution is not finite;
/// - [`MeasureError::ForeignOutput`] for an id of another waveform.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::measure;
/// use fluxstep_solver::{simulate, Options};
///
/// // A 1 µF capacitor charged to 10 V discharging into 1 kΩ (τ = 1 ms).
/// let rc = Circuit::builder()
///     .capacitor_with_voltage("C1", "top", "gnd", 1e-6, 10.0)
///     .resistor("R1", "top", "gnd", 1e3)
///     .build()
///     .unwrap();
/// let run = simulate(&rc, 2e-3, Options::default()).unwrap();
/// let top = run.waveform.output("top").unwrap();
/// let m = measure(&run.waveform, top, 0.0, 1e-3).unwrap();
/// assert!((m.max - 10.0).abs() < 1e-9);
/// assert!((m.min - 10.0 * (-1.0f64).exp()).abs() < 1e-9);
/// assert_eq!(m.time_of_max, 0.0);
/// ```
pub fn measure(
    waveform: &Waveform,
    id: OutputId,
    t0: f64,
    t1: f64,
) -> Result<Measurement, MeasureError> {
    if !waveform.has_output(id) {
        return Err(MeasureError::ForeignOutput { index: id.0 });
    }
    let name = waveform.output_name(id).to_string();
    check_window(waveform, &name, t0, t1)?;
    let ext = extremes(waveform, id, &name, t0, t1)?;
    let len = t1 - t0;
    let integral = waveform.integrate(&[id], t0, t1, |v| v[0]);
    let integral_sq = waveform.integrate(&[id], t0, t1, |v| v[0] * v[0]);
    assemble(name, (t0, t1), len, (integral, integral_sq), ext)
}

/// The measurement over the window `(t0, t1)` from the integrals of the output and of
/// its square over `len` seconds and the extremes; an error naming the
/// output at the window's start when the result is not finite.
fn assemble(
    name: String,
    (t0, t1): (f64, f64),
    len: f64,
    (integral, integral_sq): (f64, f64),
    ext: Extremes,
) -> Result<Measurement, MeasureError> {
    let average = integral / len;
    // Rounding can leave a mean square a hair below zero for an output that
    // is zero throughout.
    let rms = (integral_sq / len).max(0.0).sqrt();
    if !average.is_finite() || !rms.is_finite() {
        return Err(MeasureError::NonFinite {
            subject: name,
            time: t0,
        });
    }
    Ok(Measurement {
        output: name,
        t0,
        t1,
        average,
        rms,
        min: ext.min,
        max: ext.max,
        peak_to_peak: ext.max - ext.min,
        time_of_min: ext.time_of_min,
        time_of_max: ext.time_of_max,
    })
}

/// Measures output `id` over the recorded segments from the one that
/// starts at `start` to the one that ends at `end`, integrating each over
/// the length the solver advanced it by ([`crate::Segment::length`]) and
/// dividing by their sum: one period measured by its index, with the
/// period's own scheduled lengths. Give `start` and `end` as
/// [`crate::Simulator::cycle_start`] computes them (segment boundaries, in
/// the same bits).
///
/// Why: far into a run absolute time is quantised (ulp(0.1 s) ≈ 1.4e-17 s),
/// so the window length `end − start` and the segments' `t1 − t0` differ
/// from the lengths the state was advanced by, biasing averages by about
/// 1e-13 relative; the scheduled lengths are the same bits in every period.
/// Extremes and their instants are as [`measure`] gives them.
///
/// # Errors
///
/// [`MeasureError::NotABoundary`] when no recorded segment starts at
/// `start` or none ends at `end` (bit for bit); otherwise as [`measure`].
pub fn measure_period(
    waveform: &Waveform,
    id: OutputId,
    start: f64,
    end: f64,
) -> Result<Measurement, MeasureError> {
    if !waveform.has_output(id) {
        return Err(MeasureError::ForeignOutput { index: id.0 });
    }
    let name = waveform.output_name(id).to_string();
    check_window(waveform, &name, start, end)?;
    let segs = waveform.segments();
    let first = segs.partition_point(|s| s.t0 < start);
    if segs.get(first).is_none_or(|s| s.t0 != start) {
        return Err(MeasureError::NotABoundary {
            subject: name,
            time: start,
        });
    }
    let last = segs.partition_point(|s| s.t1 < end);
    if segs.get(last).is_none_or(|s| s.t1 != end) {
        return Err(MeasureError::NotABoundary {
            subject: name,
            time: end,
        });
    }
    let ext = extremes(waveform, id, &name, start, end)?;
    let (mut len, mut sum, mut sum_sq) = (0.0, 0.0, 0.0);
    for (i, s) in segs.iter().enumerate().take(last + 1).skip(first) {
        len += s.length();
        sum += waveform.integrate_piece(i, &[id], 0.0, s.length(), 0.0, |_, v| v[0]);
        sum_sq += waveform.integrate_piece(i, &[id], 0.0, s.length(), 0.0, |_, v| v[0] * v[0]);
    }
    assemble(name, (start, end), len, (sum, sum_sq), ext)
}

/// Measures output `id` over the last `count` periods of the recorded span:
/// the default window for a converter, where one period is the switching
/// period (e.g. [`crate::Simulator::period`]).
///
/// When the window start falls before the recorded start by no more than
/// rounding (a run of exactly `count` periods), it is moved onto the
/// recorded start.
///
/// # Errors
///
/// [`MeasureError::InvalidPeriods`] unless `period` is positive and finite
/// and `count ≥ 1`; [`MeasureError::OutsideRecord`] when fewer than `count`
/// periods were recorded; otherwise as [`measure`].
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::measure_last_periods;
/// use fluxstep_solver::{simulate, Options};
///
/// let buck = Circuit::builder()
///     .voltage_source("Vin", "in", "gnd", 12.0)
///     .switch("S1", "in", "sw", "drive")
///     .diode("D1", "gnd", "sw")
///     .inductor("L1", "sw", "out", 100e-6)
///     .capacitor("C1", "out", "gnd", 100e-6)
///     .resistor("Rload", "out", "gnd", 5.0)
///     .pwm("drive", 100e3, 0.5)
///     .build()
///     .unwrap();
/// // 10 ms: the LC start-up ring (time constant about 1 ms) has died out.
/// let run = simulate(&buck, 10e-3, Options::default()).unwrap();
/// let il = run.waveform.output("L1.current").unwrap();
/// let m = measure_last_periods(&run.waveform, il, 1e-5, 5).unwrap();
/// // Ripple ΔI = (Vin − Vout)·D·T / L ≈ 6 V · 5 µs / 100 µH = 0.3 A.
/// assert!((m.peak_to_peak - 0.3).abs() < 0.01);
/// assert!((m.average - 1.2).abs() < 0.01); // Vout / Rload
/// ```
pub fn measure_last_periods(
    waveform: &Waveform,
    id: OutputId,
    period: f64,
    count: usize,
) -> Result<Measurement, MeasureError> {
    if !waveform.has_output(id) {
        return Err(MeasureError::ForeignOutput { index: id.0 });
    }
    let name = waveform.output_name(id);
    let (t0, t1) = last_periods_window(waveform, name, period, count)?;
    measure(waveform, id, t0, t1)
}
