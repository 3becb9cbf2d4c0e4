//! Settling time into a band around a target, on the exact solution.

use super::{measure, MeasureError, Measurement};
use crate::waveform::{OutputId, Waveform};

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
