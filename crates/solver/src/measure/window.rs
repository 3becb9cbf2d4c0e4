//! The measurement window: checking it against the recorded span, the
//! last whole periods, and the segments it overlaps.

use super::MeasureError;
use crate::waveform::Waveform;
use crate::waveform_ext::MAX_PIECES;

/// The window `[end − count·period, end]` of the recorded span, snapped onto
/// the recorded start when it misses it by rounding only.
pub(super) fn last_periods_window(
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

pub(super) fn check_window(
    waveform: &Waveform,
    subject: &str,
    t0: f64,
    t1: f64,
) -> Result<(), MeasureError> {
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
pub(super) fn window_segments(
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
pub(super) fn too_fast(
    waveform: &Waveform,
    subject: &str,
    k: usize,
    (a, b): (f64, f64),
) -> MeasureError {
    MeasureError::TooFast {
        subject: subject.into(),
        time: a,
        pieces: waveform
            .pieces_needed(k, a - waveform.segments()[k].t0, b - a)
            .0,
        limit: MAX_PIECES,
    }
}
