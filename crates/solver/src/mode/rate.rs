//! Step 6 of a mode: how fast its dynamics can be — the rate bound that
//! sets Taylor sub-step sizes, the rows of M that may be non-zero, and the
//! refusal of a pattern beyond what 64-bit arithmetic can follow.

use nalgebra::DMatrix;

use crate::compile::Compiled;

use super::Mode;

/// Fastest dynamics a conduction pattern may have, 1e150 /s (the rate
/// bound [`Mode::rate`]). The eigenvalue iteration and the matrix
/// exponential multiply entries of M with each other; below this bound
/// such a product stays within f64 (1.8e308), above it they overflow and
/// the run would hang or answer garbage. Only values far outside any
/// hardware get there (an inductance or capacitance of 1e-150 or less
/// next to ordinary resistances: a time constant shorter than 1e-150 s,
/// which 64-bit time cannot place anywhere in a run).
pub(crate) const MAX_RATE: f64 = 1e150;

impl Mode {
    /// Why the run cannot use this pattern because its dynamics are faster
    /// than [`MAX_RATE`], naming the state with the smallest energy scale
    /// (√L or √C, the smallest inductance or capacitance that takes part),
    /// whose value makes it so; `None` within the bound.
    pub(crate) fn too_fast(&self, cc: &Compiled) -> Option<String> {
        // A NaN rate is left to the run's own checks of non-finite values.
        if self.rate <= MAX_RATE || self.rate.is_nan() {
            return None;
        }
        let who = (0..cc.n_x.min(cc.x_scale.len()).min(self.m.nrows()))
            .filter(|&i| self.m.row(i).iter().any(|v| *v != 0.0))
            .min_by(|&a, &b| cc.x_scale[a].total_cmp(&cc.x_scale[b]))
            .and_then(|i| cc.state_names.get(i).cloned())
            .unwrap_or_else(|| "a state".into());
        Some(format!(
            "its dynamics are faster than {MAX_RATE:e} /s (rate bound {:.3e} /s), beyond what \
             64-bit arithmetic can follow; the fastest state is {who}: check its value and the \
             resistances around it",
            self.rate
        ))
    }
}

/// ∞-norm of the top-left `n × n` block of `m` after diagonal balancing,
/// a bound on how fast the state can change that does not depend on units.
///
/// Starts from the energy scaling of the states (√L for currents, √C for
/// voltages, which already balances an L–C pair) and refines it with
/// Osborne's iteration (E. E. Osborne, "On pre-conditioning of matrices",
/// J. ACM 1960): each state is rescaled so that the couplings into it and
/// out of it weigh the same. One-way couplings — a compensator measuring
/// the circuit, a cascade of filter sections — then stop inflating the
/// bound, which sets how many Taylor sub-steps an interval needs.
pub(crate) fn balanced_norm(m: &DMatrix<f64>, n: usize, scale: &[f64]) -> f64 {
    let mut a = DMatrix::from_fn(n, n, |i, j| (m[(i, j)] * scale[i] / scale[j]).abs());
    let mut d = vec![1.0f64; n];
    for _ in 0..20 {
        let mut changed = false;
        for i in 0..n {
            let c: f64 = (0..n).filter(|&j| j != i).map(|j| a[(j, i)]).sum();
            let r: f64 = (0..n).filter(|&j| j != i).map(|j| a[(i, j)]).sum();
            if !c.is_finite() || !r.is_finite() || (c == 0.0 && r == 0.0) {
                continue;
            }
            // A state only driven (no coupling out of it, c = 0) or only
            // driving (r = 0) can be scaled as far as the range allows:
            // that is how a one-way chain is balanced. The range keeps the
            // total scaling from overflowing.
            let f = if c == 0.0 {
                1e4
            } else if r == 0.0 {
                1e-4
            } else {
                (r / c).sqrt().clamp(1e-4, 1e4)
            };
            if !(0.5..=2.0).contains(&f) || (f - 1.0).abs() > 1e-3 {
                let f = if (d[i] * f).abs() > 1e12 || (d[i] * f).abs() < 1e-12 {
                    1.0
                } else {
                    f
                };
                if f != 1.0 {
                    d[i] *= f;
                    for j in 0..n {
                        a[(j, i)] *= f;
                        a[(i, j)] /= f;
                    }
                    changed = true;
                }
            }
        }
        if !changed {
            break;
        }
    }
    (0..n)
        .map(|i| (0..n).map(|j| a[(i, j)]).sum::<f64>())
        .fold(0.0, f64::max)
}

/// The number of leading rows of `m` that may be non-zero: all rows at or
/// after it are zero (the slopes of piecewise-linear inputs are constant),
/// so products with M skip them.
pub(super) fn live_rows(m: &DMatrix<f64>) -> usize {
    (0..m.nrows())
        .rev()
        .find(|&i| m.row(i).iter().any(|v| *v != 0.0))
        .map_or(0, |i| i + 1)
}

#[cfg(test)]
mod tests {
    use nalgebra::DMatrix;

    use super::{balanced_norm, live_rows};

    /// An undamped LC pair (i' = −v/L, v' = i/C) in energy scaling: the
    /// bound is its angular resonant frequency 1/√(LC) (common practice).
    #[test]
    fn lc_pair_rate_is_its_resonant_frequency() {
        let (l, c) = (22e-6, 47e-6);
        let m = DMatrix::from_row_slice(2, 2, &[0.0, -1.0 / l, 1.0 / c, 0.0]);
        let rate = balanced_norm(&m, 2, &[l.sqrt(), c.sqrt()]);
        let w0 = 1.0 / (l * c).sqrt();
        assert!((rate - w0).abs() <= 1e-12 * w0, "{rate} vs {w0}");
    }

    #[test]
    fn live_rows_stop_at_the_last_non_zero_row() {
        let mut m = DMatrix::<f64>::zeros(4, 4);
        assert_eq!(live_rows(&m), 0);
        m[(1, 3)] = 2.0;
        assert_eq!(live_rows(&m), 2);
    }
}
