//! The sensitivity seam: what an analysis needs to differentiate a run
//! with respect to its state, read from the record of the run instead of
//! from inside the transient loop.
//!
//! Inside a recorded segment the extended state z = [x; u; u′] obeys
//! z′ = M z exactly, so its state-transition matrix is e^{M·h}. On entering
//! a mode whose states are tied by a capacitor loop or an inductor cutset
//! the state jumps, z⁺ = P z⁻. A segment that ended at a located state
//! event (a diode turn-on or turn-off, a comparator crossing) ended where a
//! guard g·z crossed zero, which moves with the state; the saltation matrix
//! S = P + (f⁺ − P f⁻) gᵀ / (g·f⁻) carries a perturbation across it
//! (R. I. Leine & H. Nijmeijer, *Dynamics and Bifurcations of Non-Smooth
//! Mechanical Systems*, 2004, ch. 7; T. J. Aprille & T. N. Trick, Proc.
//! IEEE 1972). [`SegmentDynamics`] hands out exactly these pieces; the
//! periodic steady state and small-signal analyses multiply them.

use nalgebra::{DMatrix, DVector};

use crate::mode::{Guard, GuardKind, Mode};
use crate::propagate;
use crate::waveform::Waveform;

/// `Segment::end` of a segment that ended at a scheduled instant.
pub(crate) const SCHEDULED_END: u32 = 0;

/// The code kept in `Segment::end` for a located event: 1 + the lowest
/// diode whose guard fired, else 65 + the lowest comparator.
#[inline(always)]
pub(crate) fn crossing_code(fired: u64, cmp_fired: u64) -> u32 {
    if fired != 0 {
        1 + fired.trailing_zeros()
    } else if cmp_fired != 0 {
        65 + cmp_fired.trailing_zeros()
    } else {
        SCHEDULED_END
    }
}

/// The exact dynamics of one recorded segment, for sensitivity analyses.
///
/// All vectors and matrices are over the extended state z = [x; u; u′]:
/// the first [`Waveform::state_len`] entries are the circuit's states
/// (inductor currents, capacitor voltages, oscillator and compensator
/// states, in [`crate::Simulator::state_names`] order), the rest the
/// piecewise-linear inputs and their slopes, which no state perturbation
/// moves.
#[derive(Clone, Debug)]
pub struct SegmentDynamics<'a> {
    /// Start (s).
    pub t0: f64,
    /// End (s).
    pub t1: f64,
    /// z′ = M z inside the segment.
    pub matrix: &'a DMatrix<f64>,
    /// z at `t0` (after any jump on entering the mode).
    pub start: &'a [f64],
    /// The jump z⁺ = P z⁻ applied on entering the segment's mode; `None`
    /// when the mode ties no states (P = I).
    pub entry_jump: Option<&'a DMatrix<f64>>,
    /// When the segment ended at a located state event: the row g of the
    /// guard that crossed zero there (g·z(t1) = 0).
    pub crossing: Option<&'a [f64]>,
    /// What the crossed guard watches, when there is one.
    pub crossed: Option<Crossed>,
    /// Outputs y = C z inside the segment, one row per output in
    /// [`Waveform::output_names`] order.
    pub outputs: &'a DMatrix<f64>,
    /// Per output: whether it is undetermined (floating) in this segment.
    pub undetermined: &'a [bool],
}

/// What a located state event's guard watches.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Crossed {
    /// A diode's current (conducting) or voltage (blocking), by its index
    /// among the circuit's diodes.
    Diode(usize),
    /// The comparison of a closed-loop gate, by the gate's index among the
    /// circuit's closed-loop (comparator) gates in file order; `turn_off`
    /// for the comparison that turns the gate off.
    Comparator {
        /// Index among the comparator gates.
        index: usize,
        /// True for the turn-off comparison.
        turn_off: bool,
    },
}

impl SegmentDynamics<'_> {
    /// Length of the segment (s).
    pub fn length(&self) -> f64 {
        self.t1 - self.t0
    }

    /// The state-transition matrix e^{M·(t1 − t0)}, computed afresh by
    /// scaling and squaring (Al-Mohy & Higham 2009, as the solver does).
    pub fn transition(&self) -> DMatrix<f64> {
        propagate::expm(self.matrix, self.length())
    }

    /// z just before `t1` (the left limit at the segment's end).
    pub fn end_state(&self) -> DVector<f64> {
        self.transition() * DVector::from_column_slice(self.start)
    }

    /// The vector field M·z.
    pub fn field(&self, z: &DVector<f64>) -> DVector<f64> {
        self.matrix * z
    }
}

/// The modes' jump map as seen from outside: `None` for the identity.
pub(crate) fn entry_jump(mode: &Mode) -> Option<&DMatrix<f64>> {
    (!mode.constraints.is_empty()).then_some(&mode.p)
}

/// The guard of `mode` that a crossing code names, closest to zero at `z`
/// (a diode can have more than one guard; a comparator one per gate state).
fn crossing_guard<'m>(mode: &'m Mode, code: u32, z: &DVector<f64>) -> Option<(&'m [f64], Crossed)> {
    let candidates: Vec<&Guard> = if code == SCHEDULED_END {
        return None;
    } else if code <= 64 {
        let d = (code - 1) as usize;
        mode.guards
            .iter()
            .filter(|g| match g.kind {
                GuardKind::DiodeCurrent(k) | GuardKind::DiodeVoltage(k) => k == d,
                GuardKind::DiodePair(a, b) => a == d || b == d,
                GuardKind::Comparator { .. } => false,
            })
            .collect()
    } else {
        let c = (code - 65) as usize;
        mode.cmp_guards.get(c)?.iter().flatten().collect()
    };
    // Relative size |g·z| / Σ|g_k z_k|: the crossed guard is at rounding level.
    let rel = |g: &Guard| {
        let (v, s) = g
            .row
            .iter()
            .zip(z.iter())
            .fold((0.0, 0.0), |(v, s), (a, b)| (v + a * b, s + (a * b).abs()));
        if s > 0.0 {
            v.abs() / s
        } else {
            0.0
        }
    };
    candidates
        .into_iter()
        .min_by(|a, b| rel(a).total_cmp(&rel(b)))
        .map(|g| {
            let kind = match g.kind {
                GuardKind::DiodeCurrent(k) | GuardKind::DiodeVoltage(k) => Crossed::Diode(k),
                GuardKind::DiodePair(..) => Crossed::Diode((code - 1) as usize),
                GuardKind::Comparator {
                    index, turn_off, ..
                } => Crossed::Comparator { index, turn_off },
            };
            (g.row.as_slice(), kind)
        })
}

impl Waveform {
    /// Number of circuit states x (the leading entries of z).
    pub fn state_len(&self) -> usize {
        self.n_x
    }

    /// Length of the extended state z = [x; u; u′].
    pub fn extended_len(&self) -> usize {
        self.n_z
    }

    /// The exact dynamics of recorded segment `i` (see
    /// [`SegmentDynamics`]); `None` past the last segment.
    pub fn segment_dynamics(&self, i: usize) -> Option<SegmentDynamics<'_>> {
        let s = self.segments.get(i)?;
        let mode = &self.modes[s.mode as usize];
        let start = &self.states[i * self.n_z..(i + 1) * self.n_z];
        let found = if s.end == SCHEDULED_END {
            None
        } else {
            let z1 = propagate::expm(&mode.m, s.t1 - s.t0) * DVector::from_column_slice(start);
            crossing_guard(mode, s.end, &z1)
        };
        Some(SegmentDynamics {
            t0: s.t0,
            t1: s.t1,
            matrix: &mode.m,
            start,
            entry_jump: entry_jump(mode),
            crossing: found.map(|(row, _)| row),
            crossed: found.map(|(_, kind)| kind),
            outputs: &mode.c,
            undetermined: &mode.undetermined,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crossing_codes_name_the_lowest_diode_then_comparator() {
        assert_eq!(crossing_code(0, 0), SCHEDULED_END);
        assert_eq!(crossing_code(0b100, 0b1), 3);
        assert_eq!(crossing_code(1 << 63, 0), 64);
        assert_eq!(crossing_code(0, 0b10), 66);
    }
}
