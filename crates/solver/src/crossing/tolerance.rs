//! What counts as zero: one type for the run's scales and every relative
//! and absolute floor derived from them.

use crate::mode::GuardKind;

/// Relative tolerance for "this linear function of the state is zero",
/// measured against the sum of the magnitudes of its terms (so it scales
/// with the circuit and ignores cancellation noise).
pub(crate) const ZERO_REL: f64 = 1e-10;

/// The absolute floor of a guard, relative to the largest current or
/// voltage seen in the run (see [`Scales::floor`]).
const FLOOR_REL: f64 = 1e-13;

/// A constraint (inductor cutset, capacitor loop) whose residual exceeds
/// this much of the largest current or voltage seen needs a jump; below
/// it, the residual is rounding left by a located crossing (about 1e-17
/// of the scale), which the projection removes silently.
pub(crate) const CONSTRAINT_REL: f64 = 1e-11;

/// A current source whose free group's gauge current exceeds this much of
/// the magnitude of its terms has no path (`run/resolve.rs`).
pub(crate) const SOURCE_BALANCE_REL: f64 = 1e-9;

/// A hard switching edge: a switch voltage (turn-on) or current
/// (turn-off) above this much of the run's scale starts a transition
/// ramp; below it the edge is at zero voltage or current
/// (`run/transition.rs`).
pub(crate) const EDGE_REL: f64 = 1e-9;

/// A crossing within this fraction of an interval's length from its end
/// belongs to the scheduled instant there.
const END_REL: f64 = 1e-14;

/// Crossings within this fraction of an interval's length of each other
/// fire together. Guards that reach zero at one instant by symmetry (ten
/// diodes of a voltage multiplier at their forward voltage) come out of
/// the stiff root search up to 7e-13 of the interval apart when the
/// circuit's impedances are scaled by 1e-12, against 1e-15 unscaled: at
/// 1e-13 the scaled run fired six of them and the unscaled all ten. Two
/// crossings this close move the state by at most their slope times
/// 1e-11 of the interval.
const SAME_INSTANT_REL: f64 = 1e-11;

/// The largest inductor current and capacitor/source voltage seen in the
/// run so far: the units of every absolute floor.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(crate) struct Scales {
    /// Largest |inductor current| seen, in A; in a circuit without
    /// inductors, the voltage scale through its largest conductance
    /// (`run/scales.rs`).
    pub current: f64,
    /// Largest |capacitor or source voltage| seen, in V.
    pub voltage: f64,
}

impl Scales {
    /// Absolute floor under which a guard counts as zero: 1e-13 of the
    /// largest inductor current (current guards, comparators of a
    /// current) or capacitor/source voltage (voltage guards, comparators
    /// of a voltage) seen in the run — never a mix of the two, whose
    /// ratio is the circuit's impedance scale. Without it a current left
    /// at 1e-33 A by a located zero crossing would be judged by its own
    /// size and look negative.
    #[inline(always)]
    pub(crate) fn floor(self, kind: &GuardKind) -> f64 {
        self.floor_of(kind.of_current())
    }

    /// [`Scales::floor`] of a current guard (`of_current`) or a voltage
    /// guard.
    #[inline(always)]
    pub(crate) fn floor_of(self, of_current: bool) -> f64 {
        let s = if of_current {
            self.current
        } else {
            self.voltage
        };
        FLOOR_REL * s + f64::MIN_POSITIVE
    }

    /// The band around zero of a guard of `kind` whose terms sum to
    /// `magnitude` in absolute value: within ±band it counts as zero.
    #[inline(always)]
    pub(crate) fn guard_zero(self, kind: &GuardKind, magnitude: f64) -> f64 {
        self.guard_zero_of(kind.of_current(), magnitude)
    }

    /// [`Scales::guard_zero`] of a current guard (`of_current`) or a
    /// voltage guard.
    #[inline(always)]
    pub(crate) fn guard_zero_of(self, of_current: bool, magnitude: f64) -> f64 {
        ZERO_REL * magnitude + self.floor_of(of_current)
    }

    /// The band of the k-th time derivative of a guard, whose floor
    /// scales with ρᵏ (`rate_k`, ρ the mode's rate bound). `magnitude`
    /// is the size of the terms of the last product, |row|·|M|·|Mᵏ⁻¹z|,
    /// not only the row's products with Mᵏz: a derivative that cancels
    /// inside M·(Mᵏ⁻¹z) keeps the rounding of the larger terms there. (A
    /// 24-diode multiplier with capacitances ×1e12 and resistances
    /// ×1e-12 gave a turned-off diode a margin slope of −2.7e-4 V/s,
    /// 6e-13 of its terms of 4e8 V/s but 5e-5 of the row's products, and
    /// every pattern was refused.)
    #[inline(always)]
    pub(crate) fn derivative_zero(self, kind: &GuardKind, magnitude: f64, rate_k: f64) -> f64 {
        ZERO_REL * magnitude + self.floor(kind) * rate_k
    }

    /// Whether an inductor cutset row whose value at the state is `value`
    /// carries current (entering the mode needs a flux jump).
    #[inline(always)]
    pub(crate) fn cuts(self, value: f64) -> bool {
        value.abs() > CONSTRAINT_REL * self.current
    }

    /// Whether a capacitor loop row whose value at the state is `value`
    /// holds a voltage (entering the mode needs a charge jump).
    #[inline(always)]
    pub(crate) fn loop_holds_voltage(self, value: f64) -> bool {
        value.abs() > CONSTRAINT_REL * self.voltage
    }
}

/// Whether a crossing at `t` into an interval of length `h` is at its
/// end (it then belongs to the scheduled instant there).
#[inline(always)]
pub(crate) fn at_end(t: f64, h: f64) -> bool {
    t >= h * (1.0 - END_REL)
}

/// Whether crossings at `a` and `b` in an interval of length `h` are one
/// instant (their guards fire together).
#[inline(always)]
pub(crate) fn same_instant(a: f64, b: f64, h: f64) -> bool {
    (a - b).abs() <= SAME_INSTANT_REL * h
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The floor follows the guard's unit: a current guard takes the
    /// current scale, a voltage guard the voltage scale, and both keep a
    /// positive floor at zero scale (common practice: an absolute floor
    /// under a relative tolerance).
    #[test]
    fn floors_follow_the_guard_unit() {
        let s = Scales {
            current: 2.0,
            voltage: 400.0,
        };
        let near = |a: f64, b: f64| (a - b).abs() <= 1e-15 * b;
        assert!(near(s.floor(&GuardKind::DiodeCurrent(0)), 2e-13));
        assert!(near(s.floor(&GuardKind::DiodeVoltage(3)), 4e-11));
        assert_eq!(
            s.floor(&GuardKind::Comparator {
                index: 0,
                turn_off: true,
                of_current: true
            }),
            s.floor(&GuardKind::DiodeCurrent(1))
        );
        assert_eq!(
            s.floor(&GuardKind::Comparator {
                index: 0,
                turn_off: false,
                of_current: false
            }),
            s.floor(&GuardKind::DiodePair(0, 1))
        );
        assert!(Scales::default().floor(&GuardKind::DiodeCurrent(0)) > 0.0);
        assert!(s.cuts(3e-11) && !s.cuts(1e-11));
        assert!(s.loop_holds_voltage(5e-9) && !s.loop_holds_voltage(3e-9));
        assert!(at_end(1.0 - 1e-15, 1.0) && !at_end(1.0 - 1e-13, 1.0));
        assert!(same_instant(0.5, 0.5 + 5e-12, 1.0) && !same_instant(0.5, 0.5 + 5e-11, 1.0));
    }
}
