//! What a conduction pattern must satisfy at a state to be entered: its
//! inductor cutsets and capacitor loops (a jump where they are violated),
//! its current sources' paths, and its guards with their first non-zero
//! derivatives. Pure functions of a mode and a state, used by the
//! pattern search, by principal pivoting and by the replay check; the
//! tolerances are `crate::crossing`'s.

use nalgebra::DVector;

use crate::crossing::{Scales, SOURCE_BALANCE_REL};
use crate::mode::{ConstraintKind, Mode, Sparse};
use crate::propagate;
use crate::propagate::dot_and_magnitude;

#[inline(always)]
/// Row `r` of a mode's constraints (Hᵀ is column-major: constraint r's
/// row is the r-th run of n_z).
pub(super) fn constraint_row(mode: &Mode, r: usize) -> &[f64] {
    let n = mode.ht.nrows();
    &mode.ht.as_slice()[r * n..(r + 1) * n]
}

/// Whether a cutset row carries current at z (the test of
/// [`violations`]).
#[inline(always)]
pub(super) fn cuts(row: &Sparse, z: &[f64], scales: Scales) -> bool {
    scales.cuts(row.dot(z))
}

/// The first inductor cutset of `mode` that carries current at z.
pub(super) fn first_cut_row(mode: &Mode, z: &[f64], scales: Scales) -> Option<usize> {
    mode.constraints.iter().enumerate().position(|(r, kind)| {
        matches!(kind, ConstraintKind::Cutset { .. }) && cuts(&mode.h_rows[r], z, scales)
    })
}

/// Whether the mode's inductor cutsets (first) or capacitor loops (second)
/// are violated at z, i.e. entering it needs a jump; `windings` collects
/// the windings of the violated cutsets.
///
/// Residuals are measured against the largest inductor current (cutsets)
/// or capacitor/source voltage (loops) seen in the run: a located zero
/// crossing leaves ~1e-17 of that behind, which the projection removes
/// silently; anything above 1e-11 of it is a real jump.
pub(super) fn violations(
    mode: &Mode,
    z: &[f64],
    scales: Scales,
    mut windings: Option<&mut Vec<usize>>,
) -> (bool, bool) {
    if mode.constraints.is_empty() {
        return (false, false);
    }
    let (mut cut, mut lp) = (false, false);
    for (row, kind) in mode.h_rows.iter().zip(&mode.constraints) {
        match kind {
            ConstraintKind::Cutset { windings: w, .. } if cuts(row, z, scales) => {
                cut = true;
                if let Some(list) = windings.as_deref_mut() {
                    list.extend(w.iter().copied());
                }
            }
            ConstraintKind::Loop { .. } if scales.loop_holds_voltage(row.dot(z)) => lp = true,
            _ => {}
        }
    }
    (cut, lp)
}

/// The first current source left without a path in the mode (its free
/// group's gauge current is not zero at z), if any.
pub(super) fn unbalanced_source(mode: &Mode, z: &[f64]) -> Option<usize> {
    mode.free_checks.iter().position(|(row, _, _)| {
        let (v, s) = dot_and_magnitude(row, z);
        v.abs() > SOURCE_BALANCE_REL * s + 1e-300
    })
}

/// True if every guard is ≥ 0 at z and, where it is zero, its first
/// non-zero derivative (up to the third) is positive: the mode can be
/// entered and held for some positive time. Derivatives are computed only
/// for guards that sit at zero.
#[inline(always)]
pub(super) fn guards_hold(mode: &Mode, z: &DVector<f64>, scales: Scales) -> bool {
    // Value pass first, on slices: in the usual case every guard is clearly
    // positive and no derivative is needed.
    // The rows from the guards' lines, the two floors taken once: the same
    // values and tolerances as `Scales::guard_zero` of each guard.
    let zs = z.as_slice();
    let mut at_zero = false;
    for (i, line) in mode.guard_lines.iter().enumerate() {
        let (v, s) = line.value(zs, || &mode.guards[i]);
        let tol = scales.guard_zero_of(line.of_current, s);
        at_zero |= v <= tol;
        if v < -tol {
            return false;
        }
    }
    !at_zero || guards_hold_at_zero(mode, z, scales)
}

/// The rest of [`guards_hold`] when some guard sits at zero, kept out of
/// line so the usual value pass stays small: `violated_guards(…,
/// false).is_empty()`, with the guards at zero as bits and the
/// derivatives on the stack up to 64 guards and 16 entries of z. A
/// circuit with transition models gets here at every located clamp and
/// every ramp start (a diode at zero current), where the allocations of
/// the general function cost more than its arithmetic. The same values
/// and tolerances are compared; only the bookkeeping differs.
#[inline(never)]
pub(super) fn guards_hold_at_zero(mode: &Mode, z: &DVector<f64>, scales: Scales) -> bool {
    let zs = z.as_slice();
    let n = zs.len();
    if mode.guards.len() > 64 || n > 16 {
        return violated_guards(mode, z, scales, false).is_empty();
    }
    let mut undecided = 0u64;
    for (gi, g) in mode.guards.iter().enumerate() {
        let (v, s) = g.srow.dot_and_magnitude(zs);
        let tol = scales.guard_zero(&g.kind, s);
        if v < -tol {
            return false;
        }
        if v <= tol {
            undecided |= 1 << gi;
        }
    }
    let mut buf = [[0.0f64; 16]; 3];
    let [a, b, c] = &mut buf;
    let (mut d, mut next): (&mut [f64], &mut [f64]) = (&mut a[..n], &mut b[..n]);
    let dm = &mut c[..n];
    d.copy_from_slice(zs);
    let mut rate_k = 1.0;
    for _ in 1..4 {
        if undecided == 0 {
            break;
        }
        // The terms of this product, |M|·|d|: a derivative that cancels
        // inside M·d keeps their rounding.
        propagate::abs_matvec(&mode.m, d, dm);
        propagate::matvec(&mode.m, d, next);
        std::mem::swap(&mut d, &mut next);
        rate_k *= mode.rate;
        let mut still = 0u64;
        let mut left = undecided;
        while left != 0 {
            let gi = left.trailing_zeros() as usize;
            left &= left - 1;
            let g = &mode.guards[gi];
            let v = g.srow.dot(d);
            let tol = scales.derivative_zero(&g.kind, g.srow.abs_dot(dm), rate_k);
            if v < -tol {
                return false;
            }
            if v <= tol {
                still |= 1 << gi;
            }
        }
        undecided = still;
    }
    true
}

/// The guards violated at z (indices into `mode.guards`, increasing): a
/// guard below zero, or one at zero whose first non-zero derivative (up to
/// the third) is negative. This is the lexicographic order of the vector
/// (g, g′, g″, g‴): a guard that touches zero is judged by where it goes
/// next. With `all` false it stops at the first violated guard found.
pub(super) fn violated_guards(
    mode: &Mode,
    z: &DVector<f64>,
    scales: Scales,
    all: bool,
) -> Vec<usize> {
    let mut violated = vec![];
    // Guards that sit at zero so far.
    let mut undecided: Vec<usize> = vec![];
    let zs = z.as_slice();
    for (gi, g) in mode.guards.iter().enumerate() {
        let (v, s) = g.srow.dot_and_magnitude(zs);
        let tol = scales.guard_zero(&g.kind, s);
        if v < -tol {
            violated.push(gi);
            if !all {
                return violated;
            }
        } else if v <= tol {
            undecided.push(gi);
        }
    }
    if !violated.is_empty() && !all {
        return violated;
    }
    // On the stack up to 16 entries of z: a circuit with transition models
    // gets here at every located clamp, and allocating cost more than the rest.
    let n = zs.len();
    let (mut buf, mut heap) = ([[0.0f64; 16]; 3], vec![]);
    let (d, next, dm): (&mut [f64], &mut [f64], &mut [f64]) = match &mut buf {
        [a, b, c] if n <= 16 => (&mut a[..n], &mut b[..n], &mut c[..n]),
        _ => {
            heap.resize(3 * n, 0.0);
            let (a, bc) = heap.split_at_mut(n);
            let (b, c) = bc.split_at_mut(n);
            (a, b, c)
        }
    };
    let (mut d, mut next) = (d, next);
    d.copy_from_slice(zs);
    let mut rate_k = 1.0;
    for _ in 1..4 {
        if undecided.is_empty() {
            break;
        }
        // The terms of this product, |M|·|d|: a derivative that cancels
        // inside M·d keeps their rounding.
        propagate::abs_matvec(&mode.m, d, dm);
        propagate::matvec(&mode.m, d, next);
        std::mem::swap(&mut d, &mut next);
        rate_k *= mode.rate;
        let mut still = Vec::with_capacity(undecided.len());
        for &gi in &undecided {
            let g = &mode.guards[gi];
            let v = g.srow.dot(d);
            let tol = scales.derivative_zero(&g.kind, g.srow.abs_dot(dm), rate_k);
            if v < -tol {
                violated.push(gi);
                if !all {
                    return violated;
                }
            } else if v <= tol {
                still.push(gi);
            }
        }
        undecided = still;
    }
    violated.sort_unstable();
    violated
}

impl super::Simulator {
    /// Largest inductor current and largest capacitor or source voltage seen
    /// so far in the run, updated with the present state (see
    /// `ScaleWatch::update`).
    #[inline(always)]
    pub(super) fn update_scales(&mut self) -> Scales {
        self.scales.update(self.z.as_slice(), &self.cc.sources)
    }
}
