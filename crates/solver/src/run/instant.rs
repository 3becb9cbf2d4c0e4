//! Instants on the time axis of a run: where a periodic schedule puts
//! them (`TimeKey`), which gate edges belong to one instant, and the
//! length of an interval between two of them. A leaf: every stage may
//! use it, it uses none.

/// Gate edges at most this many units in the last place after an instant
/// belong to it. Two computations of the same instant, `k·T + φ` in one
/// signal and `(k + 1)·T + (φ − T)` in another (a complementary pair with
/// zero dead time: the low side's turn-off at the end of cycle k is the
/// high side's turn-on at the start of cycle k + 1), or phases that are
/// equal sums rounded differently (independent gates with the same
/// frequency whose delays and on-times add up to the same instant), differ
/// by a rounding of the product, one of the sum and those of the phases:
/// at most about two units of the time. Taken apart they would leave a
/// one-ulp gap (an interrupted inductor current) or overlap (a false
/// shoot-through). Four units: at 1 s of run time that is 9e-16 s, far
/// below any dead time.
pub(super) const COINCIDENT_ULPS: u64 = 4;

/// The latest time whose gate edges belong to the instant `t` (≥ 0):
/// `t` plus [`COINCIDENT_ULPS`] units in the last place (non-negative
/// floats order as their bits).
#[inline(always)]
pub(super) fn coincident_until(t: f64) -> f64 {
    f64::from_bits(t.to_bits() + COINCIDENT_ULPS)
}

/// An instant of a periodic schedule: `cycle·period + phase`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct TimeKey {
    pub cycle: i64,
    pub phase: f64,
    pub period: f64,
}

/// The length of the interval from `t0` (key `k0`) to `t1` (key `k1`):
/// from the schedule's (cycle, phase) pairs when both ends are edges of
/// one periodic schedule, so that the same interval of every period has
/// the same bits and hits the cache; else, or where that is not positive,
/// by subtraction.
#[inline(always)]
pub(super) fn interval_length(t0: f64, k0: Option<TimeKey>, t1: f64, k1: Option<TimeKey>) -> f64 {
    let h = match (k0, k1) {
        (Some(a), Some(b)) if a.period.to_bits() == b.period.to_bits() => {
            (b.cycle - a.cycle) as f64 * a.period + (b.phase - a.phase)
        }
        _ => t1 - t0,
    };
    if h > 0.0 {
        h
    } else {
        t1 - t0
    }
}
