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

use serde::{Deserialize, Serialize};

use crate::crossing::roots;
use crate::propagate;
use crate::waveform::{OutputId, Waveform};
use crate::waveform_ext::{within_piece_cap, Piece, MAX_PIECES};

/// Samples of the derivative per sub-interval when bracketing stationary
/// points. A sub-interval spans at most half a radian of the fastest
/// dynamics (ρ·δ ≤ 1/2), so the derivative turns at most a few times
/// there; eight samples separate distinct stationary points unless two lie
/// within δ/8 of each other, and such a pair differs in value by far less
/// than the swing between them (it is a shallow wiggle, not a peak).
const DERIVATIVE_SAMPLES: usize = 8;

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

/// The window `[end − count·period, end]` of the recorded span, snapped onto
/// the recorded start when it misses it by rounding only.
fn last_periods_window(
    waveform: &Waveform,
    subject: &str,
    period: f64,
    count: usize,
) -> Result<(f64, f64), MeasureError> {
    if !(period.is_finite() && period > 0.0) || count == 0 {
        return Err(MeasureError::InvalidPeriods {
            subject: subject.into(),
            period,
            count,
        });
    }
    let (start, end) = waveform
        .span()
        .ok_or_else(|| MeasureError::NothingRecorded {
            subject: subject.into(),
        })?;
    let t0 = end - period * count as f64;
    // A run of exactly `count` periods ends at count·T computed by the
    // scheduler, which can differ from end − count·T by a few ulps.
    let slack = 8.0 * f64::EPSILON * end.abs().max(period * count as f64);
    let t0 = if t0 < start && start - t0 <= slack {
        start
    } else {
        t0
    };
    Ok((t0, end))
}

/// Average power absorbed by an element over `[t0, t1]` (W): the time
/// average of v·i with the element's own sign convention, voltage
/// v(first node) − v(second node) and current from the first node through
/// the element to the second, so a resistor absorbs positive power and a
/// source delivering energy absorbs negative power.
///
/// An element made of several recorded parts (coupled windings
/// `ELEMENT.WINDING`, a switch's `SWITCH.body_diode`) absorbs the sum over
/// its parts. Where a part's voltage floats but its current is identically
/// zero (an open switch next to a floating node) the part absorbs nothing.
///
/// # Errors
///
/// [`MeasureError::UnknownElement`] when no recorded current/voltage pair
/// belongs to `element`; otherwise as [`measure`], naming the element.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::element_power;
/// use fluxstep_solver::{simulate, Options};
///
/// let divider = Circuit::builder()
///     .voltage_source("V1", "a", "gnd", 10.0)
///     .resistor("R1", "a", "gnd", 100.0)
///     .build()
///     .unwrap();
/// let run = simulate(&divider, 1e-3, Options::default()).unwrap();
/// let p = element_power(&run.waveform, "R1", 0.0, 1e-3).unwrap();
/// assert!((p - 1.0).abs() < 1e-12); // V²/R = 100 / 100 W
/// ```
pub fn element_power(
    waveform: &Waveform,
    element: &str,
    t0: f64,
    t1: f64,
) -> Result<f64, MeasureError> {
    Ok(element_energy(waveform, element, t0, t1)? / (t1 - t0))
}

/// Energy absorbed by an element over `[t0, t1]` (J): ∫ v·i dt with the
/// sign convention of [`element_power`].
///
/// # Errors
///
/// As [`element_power`].
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::element_energy;
/// use fluxstep_solver::{simulate, Options};
///
/// // The capacitor's 50 µJ (½·C·V²) ends up almost entirely in the resistor.
/// let rc = Circuit::builder()
///     .capacitor_with_voltage("C1", "top", "gnd", 1e-6, 10.0)
///     .resistor("R1", "top", "gnd", 1e3)
///     .build()
///     .unwrap();
/// let run = simulate(&rc, 20e-3, Options::default()).unwrap();
/// let e = element_energy(&run.waveform, "R1", 0.0, 20e-3).unwrap();
/// assert!((e - 50e-6).abs() < 1e-12);
/// ```
pub fn element_energy(
    waveform: &Waveform,
    element: &str,
    t0: f64,
    t1: f64,
) -> Result<f64, MeasureError> {
    parts_energy(waveform, element, &element_parts(waveform, element), t0, t1)
}

/// Energy absorbed over `[t0, t1]` (J) by exactly one recorded part: the
/// output pair `PART.voltage` / `PART.current`, without the sub-parts
/// `PART.*` that [`element_energy`] adds (a switch's channel without its
/// body diode, a capacitance without its expanded `ELEMENT.esr`).
///
/// # Errors
///
/// As [`element_power`], naming the part.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::{Capacitor, Circuit, Element};
/// use fluxstep_solver::measure::{element_energy, part_energy};
/// use fluxstep_solver::{simulate, Options};
///
/// // 1 µF at 10 V with 1 Ω of ESR, discharged into 9 Ω: the ESR takes a
/// // tenth of the 50 µJ (series resistances share by value).
/// let rc = Circuit::builder()
///     .element(Element::Capacitor(Capacitor {
///         name: "C1".into(),
///         nodes: ["top".into(), "gnd".into()],
///         capacitance: 1e-6,
///         initial_voltage: Some(10.0),
///         esr: Some(1.0),
///     }))
///     .resistor("R1", "top", "gnd", 9.0)
///     .build()
///     .unwrap();
/// let run = simulate(&rc, 1e-3, Options::default()).unwrap();
/// let esr = part_energy(&run.waveform, "C1.esr", 0.0, 1e-3).unwrap();
/// assert!((esr - 5e-6).abs() < 1e-15);
/// let whole = element_energy(&run.waveform, "C1", 0.0, 1e-3).unwrap();
/// let capacitance = part_energy(&run.waveform, "C1", 0.0, 1e-3).unwrap();
/// assert!((whole - (capacitance + esr)).abs() < 1e-18);
/// ```
pub fn part_energy(waveform: &Waveform, part: &str, t0: f64, t1: f64) -> Result<f64, MeasureError> {
    let pair = waveform
        .output(&format!("{part}.voltage"))
        .ok()
        .zip(waveform.output(&format!("{part}.current")).ok());
    let parts: Vec<_> = pair.into_iter().collect();
    parts_energy(waveform, part, &parts, t0, t1)
}

/// ∫ Σ v·i dt over `parts`, after checking that none floats where it carries current.
fn parts_energy(
    waveform: &Waveform,
    element: &str,
    parts: &[(OutputId, OutputId)],
    t0: f64,
    t1: f64,
) -> Result<f64, MeasureError> {
    if parts.is_empty() {
        return Err(MeasureError::UnknownElement {
            element: element.into(),
        });
    }
    check_window(waveform, element, t0, t1)?;
    for &(v, i) in parts {
        for (k, seg) in window_segments(waveform, t0, t1) {
            let floating = waveform.undetermined_in(k, v) || waveform.undetermined_in(k, i);
            if floating
                && !(waveform.identically_zero_in(k, i) || waveform.identically_zero_in(k, v))
            {
                return Err(MeasureError::Undetermined {
                    subject: element.into(),
                    time: seg.0,
                });
            }
        }
    }
    for (k, (a, b)) in window_segments(waveform, t0, t1) {
        let need = waveform
            .pieces_needed(k, a - waveform.segments()[k].t0, b - a)
            .0;
        if !within_piece_cap(need) {
            return Err(too_fast(waveform, element, k, (a, b)));
        }
    }
    // `integrate` counts a stretch where either output is undetermined as
    // zero, which the check above has shown to be exact.
    let energy: f64 = parts
        .iter()
        .map(|&(v, i)| waveform.integrate(&[v, i], t0, t1, |x| x[0] * x[1]))
        .sum();
    if !energy.is_finite() {
        return Err(MeasureError::NonFinite {
            subject: element.into(),
            time: t0,
        });
    }
    Ok(energy)
}

/// The (voltage, current) output pairs that make up `element`: the element
/// itself, or its parts named `ELEMENT.PART`.
fn element_parts(waveform: &Waveform, element: &str) -> Vec<(OutputId, OutputId)> {
    let prefix = format!("{element}.");
    waveform
        .output_names()
        .iter()
        .filter_map(|n| n.strip_suffix(".current"))
        .filter(|part| *part == element || part.starts_with(&prefix))
        .filter_map(|part| {
            let v = waveform.output(&format!("{part}.voltage")).ok()?;
            let i = waveform.output(&format!("{part}.current")).ok()?;
            Some((v, i))
        })
        .collect()
}

fn check_window(waveform: &Waveform, subject: &str, t0: f64, t1: f64) -> Result<(), MeasureError> {
    if !(t0.is_finite() && t1.is_finite() && t0 < t1) {
        return Err(MeasureError::InvalidWindow {
            subject: subject.into(),
            t0,
            t1,
        });
    }
    let (start, end) = waveform
        .span()
        .ok_or_else(|| MeasureError::NothingRecorded {
            subject: subject.into(),
        })?;
    if t0 < start || t1 > end {
        return Err(MeasureError::OutsideRecord {
            subject: subject.into(),
            t0,
            t1,
            start,
            end,
        });
    }
    Ok(())
}

/// Segments with a non-empty overlap `(a, b)` with the window, as
/// (segment index, (a, b)).
fn window_segments(
    waveform: &Waveform,
    t0: f64,
    t1: f64,
) -> impl Iterator<Item = (usize, (f64, f64))> + '_ {
    let segs = waveform.segments();
    // Segments are in time order: skip the run before the window without
    // walking it (measurements usually look at the end of a long run).
    let first = segs.partition_point(|s| s.t1 <= t0);
    segs[first..]
        .iter()
        .enumerate()
        .take_while(move |(_, s)| s.t0 < t1)
        .filter_map(move |(k, s)| {
            let a = s.t0.max(t0);
            let b = s.t1.min(t1);
            (b > a).then_some((first + k, (a, b)))
        })
}

/// [`MeasureError::TooFast`] for the stretch `(a, b)` of segment `k`.
#[cold]
fn too_fast(waveform: &Waveform, subject: &str, k: usize, (a, b): (f64, f64)) -> MeasureError {
    MeasureError::TooFast {
        subject: subject.into(),
        time: a,
        pieces: waveform
            .pieces_needed(k, a - waveform.segments()[k].t0, b - a)
            .0,
        limit: MAX_PIECES,
    }
}

struct Extremes {
    min: f64,
    max: f64,
    time_of_min: f64,
    time_of_max: f64,
}

impl Extremes {
    fn offer(&mut self, t: f64, y: f64) {
        // A tie keeps the earlier instant: "first time the peak is reached"
        // is what a designer reads off, and it makes the result independent
        // of the order in which candidates are offered.
        if y > self.max || (y == self.max && t < self.time_of_max) {
            self.max = y;
            self.time_of_max = t;
        }
        if y < self.min || (y == self.min && t < self.time_of_min) {
            self.min = y;
            self.time_of_min = t;
        }
    }
}

fn extremes(
    waveform: &Waveform,
    id: OutputId,
    name: &str,
    t0: f64,
    t1: f64,
) -> Result<Extremes, MeasureError> {
    let mut ext = Extremes {
        min: f64::INFINITY,
        max: f64::NEG_INFINITY,
        time_of_min: t0,
        time_of_max: t0,
    };
    let mut bad = None;
    for (k, (a, b)) in window_segments(waveform, t0, t1) {
        if waveform.undetermined_in(k, id) {
            return Err(MeasureError::Undetermined {
                subject: name.into(),
                time: a,
            });
        }
        let complete = waveform.output_pieces(k, id, a, b, |piece| {
            if bad.is_none() {
                bad = scan_piece(piece, &mut ext);
            }
        });
        if !complete {
            return Err(too_fast(waveform, name, k, (a, b)));
        }
        if let Some(time) = bad {
            return Err(MeasureError::NonFinite {
                subject: name.into(),
                time,
            });
        }
    }
    if !ext.max.is_finite() || !ext.min.is_finite() {
        // Unreachable after check_window (the window overlaps at least one
        // segment of positive length), but a value, not a panic, if not.
        return Err(MeasureError::NothingRecorded {
            subject: name.into(),
        });
    }
    Ok(ext)
}

/// Offers the values at equally spaced samples of one piece and at every
/// sign change of its derivative; returns the time of a non-finite value.
fn scan_piece(piece: &Piece<'_>, ext: &mut Extremes) -> Option<f64> {
    let time = |s: f64| {
        if s >= 1.0 {
            piece.t_end
        } else {
            piece.t_start + piece.delta * s
        }
    };
    let n = DERIVATIVE_SAMPLES;
    let mut prev: Option<(f64, f64)> = None;
    for j in 0..=n {
        let s = j as f64 / n as f64;
        let (y, dy) = propagate::poly(piece.coef, s);
        if !y.is_finite() || !dy.is_finite() {
            return Some(time(s));
        }
        if let Some((s_prev, d_prev)) = prev {
            if (d_prev < 0.0 && dy > 0.0) || (d_prev > 0.0 && dy < 0.0) {
                let (lo, hi) = roots::derivative_bracket(piece.coef, s_prev, s, d_prev);
                for r in [lo, hi] {
                    ext.offer(time(r), propagate::poly(piece.coef, r).0);
                }
            }
        }
        ext.offer(time(s), y);
        prev = Some((s, dy));
    }
    None
}

/// Settling time: how long after `t0` output `id` takes to enter the band
/// `target·(1 ± band)` for good (up to `t1`); `None` if it is outside the
/// band at `t1`, `Some(0.0)` if it never leaves it.
///
/// The window is scanned back from `t1` in pieces of length `piece` (a
/// switching period is natural): the last piece whose exact extremes leave
/// the band holds the last excursion, which is then pinned down by
/// bisection on the exact solution to the last instant outside the band.
///
/// # Errors
///
/// [`MeasureError::InvalidPeriods`] unless `piece` is positive and fits in
/// the window; otherwise as [`measure`].
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::settling_time;
/// use fluxstep_solver::{simulate, Options};
///
/// // RC charging to 1 V: within 1 % after τ·ln(100) = 4.605 ms (common practice).
/// let c = Circuit::builder()
///     .voltage_source("V1", "in", "gnd", 1.0)
///     .resistor("R1", "in", "out", 1e3)
///     .capacitor("C1", "out", "gnd", 1e-6)
///     .build()
///     .unwrap();
/// let run = simulate(&c, 10e-3, Options::default()).unwrap();
/// let out = run.waveform.output("out").unwrap();
/// let ts = settling_time(&run.waveform, out, 1.0, 0.01, 0.0, 10e-3, 0.1e-3).unwrap().unwrap();
/// assert!((ts - 1e-3 * 100f64.ln()).abs() < 1e-12);
/// ```
pub fn settling_time(
    waveform: &Waveform,
    id: OutputId,
    target: f64,
    band: f64,
    t0: f64,
    t1: f64,
    piece: f64,
) -> Result<Option<f64>, MeasureError> {
    let subject = waveform.output_name(id).to_string();
    let n = ((t1 - t0) / piece).round();
    if !(piece > 0.0 && piece.is_finite() && n >= 1.0) {
        return Err(MeasureError::InvalidPeriods {
            subject,
            period: piece,
            count: 0,
        });
    }
    let n = n as usize;
    let (lo, hi) = (target - band * target.abs(), target + band * target.abs());
    let outside = |v: f64| v < lo || v > hi;
    for k in (0..n).rev() {
        let a = t0 + k as f64 * piece;
        let b = if k + 1 == n {
            t1
        } else {
            t0 + (k + 1) as f64 * piece
        };
        let m = measure(waveform, id, a, b)?;
        if !(m.min < lo || m.max > hi) {
            continue;
        }
        if k + 1 == n && outside(m.end_value(waveform, id)?) {
            return Ok(None);
        }
        // The last excursion ends inside [a, b]: bisect between the later of
        // its extremes outside the band and b, on the exact solution.
        let mut x = if outside(m.max) && (!outside(m.min) || m.time_of_max > m.time_of_min) {
            m.time_of_max
        } else {
            m.time_of_min
        };
        let mut y = b;
        // Any later excursion in (x, b] would show as a sample outside.
        let pts = waveform.vertices(id, x, b, 64);
        if let Some(p) = pts.iter().rev().find(|p| outside(p.1)) {
            x = x.max(p.0);
        }
        if let Some(p) = pts.iter().find(|p| p.0 > x && !outside(p.1)) {
            y = p.0;
        }
        for _ in 0..200 {
            let mid = 0.5 * (x + y);
            if mid <= x || mid >= y {
                break;
            }
            let v = waveform
                .value(id, mid)
                .map_err(|_| MeasureError::Undetermined {
                    subject: subject.clone(),
                    time: mid,
                })?;
            if outside(v) {
                x = mid;
            } else {
                y = mid;
            }
        }
        return Ok(Some(y - t0));
    }
    Ok(Some(0.0))
}

impl Measurement {
    /// The value at the end of the window (the left limit at `t1`).
    fn end_value(&self, waveform: &Waveform, id: OutputId) -> Result<f64, MeasureError> {
        waveform
            .value_before(id, self.t1)
            .map_err(|_| MeasureError::Undetermined {
                subject: self.output.clone(),
                time: self.t1,
            })
    }
}

/// Relative size below which a measured value is rounding noise: a value
/// whose magnitude is below this fraction of the largest magnitude of its
/// quantity in the run (see [`without_rounding_noise`]).
///
/// Why 1e-9: the solver itself treats a guard as zero within 1e-10 of its
/// magnitude plus 1e-13 of the run's largest current or voltage
/// (`run/locate.rs`), and an average of a waveform whose positive and
/// negative parts cancel keeps only the digits its largest part leaves
/// after cancellation. Nothing a designer reads changes below a
/// billionth of the run's scale.
pub const ROUNDING_REL: f64 = 1e-9;

/// The measurements with every value that is rounding noise set to exact
/// zero, for showing to people (keep the raw values for files meant for
/// programs).
///
/// The floor is scale-aware, as the solver's own zero tests are: for each
/// quantity (currents together, voltages together, each compensator output
/// alone) it is [`ROUNDING_REL`] times the largest magnitude among the
/// minima and maxima measured for that quantity. Average, RMS, minimum,
/// maximum and peak-to-peak below it become 0, so an inductor current
/// that touches zero shows a minimum of 0 rather than −8.65e-12 A, and an
/// AC current averages 0.
///
/// # Example
///
/// ```
/// use fluxstep_solver::measure::{without_rounding_noise, Measurement};
///
/// let m = |output: &str, average: f64, min: f64, max: f64| Measurement {
///     output: output.into(), t0: 0.0, t1: 1.0, average, rms: 1.0,
///     min, max, peak_to_peak: max - min, time_of_min: 0.0, time_of_max: 0.5,
/// };
/// let shown = without_rounding_noise(&[
///     m("L1.current", 0.5, -8.65e-12, 1.6),
///     m("Rs.current", -2.9e-10, -3.5, 3.5),
///     m("out", 12.0, 11.9, 12.1),
/// ]);
/// assert_eq!(shown[0].min, 0.0);
/// assert_eq!(shown[1].average, 0.0);
/// assert_eq!(shown[2].average, 12.0);
/// ```
pub fn without_rounding_noise(measurements: &[Measurement]) -> Vec<Measurement> {
    let quantity = |name: &str| -> String {
        match fluxstep_netlist::OutputName::parse(name) {
            Ok(fluxstep_netlist::OutputName::Signal(_)) | Err(_) => name.to_string(),
            Ok(o) => o.unit().to_string(),
        }
    };
    measurements
        .iter()
        .map(|m| {
            let q = quantity(&m.output);
            let scale = measurements
                .iter()
                .filter(|o| quantity(&o.output) == q)
                .map(|o| o.min.abs().max(o.max.abs()))
                .filter(|v| v.is_finite())
                .fold(0.0, f64::max);
            let floor = ROUNDING_REL * scale;
            let zero = |v: f64| if v.abs() < floor { 0.0 } else { v };
            Measurement {
                average: zero(m.average),
                rms: zero(m.rms),
                min: zero(m.min),
                max: zero(m.max),
                peak_to_peak: zero(m.peak_to_peak),
                ..m.clone()
            }
        })
        .collect()
}
