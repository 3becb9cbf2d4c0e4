//! Extremes and their instants: the values at every event instant and at
//! every interior stationary point of the exact solution.

use super::window::{too_fast, window_segments};
use super::MeasureError;
use crate::crossing::roots;
use crate::propagate;
use crate::waveform::{OutputId, Waveform};
use crate::waveform_ext::Piece;

/// Samples of the derivative per sub-interval when bracketing stationary
/// points. A sub-interval spans at most half a radian of the fastest
/// dynamics (ρ·δ ≤ 1/2), so the derivative turns at most a few times
/// there; eight samples separate distinct stationary points unless two lie
/// within δ/8 of each other, and such a pair differs in value by far less
/// than the swing between them (it is a shallow wiggle, not a peak).
pub(super) const DERIVATIVE_SAMPLES: usize = 8;

pub(super) struct Extremes {
    pub min: f64,
    pub max: f64,
    pub time_of_min: f64,
    pub time_of_max: f64,
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

pub(super) fn extremes(
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
pub(super) fn scan_piece(piece: &Piece<'_>, ext: &mut Extremes) -> Option<f64> {
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
