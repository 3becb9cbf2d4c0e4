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

/// The first instant `k·period + phase` (k ≥ 0) strictly after `t`, and
/// its cycle k: computed from the cycle number, never accumulated, so the
/// same instant has the same bits however it is reached. Comparator ticks
/// and controller samples are on such grids.
#[inline]
pub(super) fn next_on_grid(t: f64, period: f64, phase: f64) -> (f64, i64) {
    let mut k = ((t - phase) / period).floor() as i64 + 1;
    while k as f64 * period + phase <= t {
        k += 1;
    }
    while k > 0 && (k - 1) as f64 * period + phase > t {
        k -= 1;
    }
    (k as f64 * period + phase, k)
}

/// The cycle k ≥ 0 if `t` is exactly the grid instant `k·period + phase`
/// (the bits [`next_on_grid`] gives), else `None`.
#[inline]
pub(super) fn on_grid(t: f64, period: f64, phase: f64) -> Option<i64> {
    let k = ((t - phase) / period).round();
    (k >= 0.0 && (k as i64) as f64 * period + phase == t).then_some(k as i64)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Walking a grid by `next_on_grid` visits k·T + φ for every k in
    /// order, each recognised by `on_grid` with its cycle, and never an
    /// instant in between (common practice: instants of a periodic
    /// schedule from the cycle number, so period k has the same bits
    /// however it is reached).
    #[test]
    fn grid_instants_come_from_the_cycle_number() {
        for &(period, phase) in &[(1e-5, 0.0), (1.0 / 3.0e5, 1.7e-6), (2.5e-7, 2.4e-7)] {
            let mut t = 0.0;
            for k in 0..200_000i64 {
                let (next, cycle) = next_on_grid(t, period, phase);
                let expect = k as f64 * period + phase;
                if k == 0 && phase == 0.0 {
                    // t = 0 is on the grid; the next one is strictly after.
                    assert_eq!((next, cycle), (period, 1));
                    t = next;
                    continue;
                }
                let k = if phase == 0.0 { k + 1 } else { k };
                let expect = if phase == 0.0 {
                    k as f64 * period
                } else {
                    expect
                };
                assert_eq!(next.to_bits(), expect.to_bits(), "cycle {k}");
                assert_eq!(cycle, k);
                assert_eq!(on_grid(next, period, phase), Some(k));
                // One unit in the last place either side is off the grid.
                assert_eq!(
                    on_grid(f64::from_bits(next.to_bits() + 1), period, phase),
                    None
                );
                t = next;
            }
        }
    }

    /// The same interval of every period has the same length to the bit
    /// from the (cycle, phase) keys, where subtracting the instants
    /// differs in the last bits from period to period; a key of another
    /// schedule, or a length that is not positive, falls back to the
    /// subtraction (common practice).
    #[test]
    fn interval_lengths_repeat_to_the_bit() {
        let (period, on) = (1.0 / 3.0e5, 0.37 / 3.0e5);
        let key = |cycle: i64, phase: f64| TimeKey {
            cycle,
            phase,
            period,
        };
        let first = interval_length(0.0, Some(key(0, 0.0)), on, Some(key(0, on)));
        let mut differ = 0;
        for k in 1..100_000i64 {
            let (t0, t1) = (k as f64 * period, k as f64 * period + on);
            let h = interval_length(t0, Some(key(k, 0.0)), t1, Some(key(k, on)));
            assert_eq!(h.to_bits(), first.to_bits(), "period {k}");
            differ += usize::from((t1 - t0).to_bits() != first.to_bits());
        }
        assert!(differ > 1000, "subtraction differed only {differ} times");
        let other = TimeKey {
            cycle: 3,
            phase: 0.0,
            period: 2.0 * period,
        };
        assert_eq!(
            interval_length(1.0, Some(other), 1.5, Some(key(0, on))),
            0.5
        );
        assert_eq!(interval_length(1.0, None, 1.25, Some(key(9, on))), 0.25);
        // Keys that would give a negative length: the subtraction.
        assert_eq!(
            interval_length(2.0, Some(key(5, on)), 2.5, Some(key(4, on))),
            0.5
        );
    }
}
