//! A floor under every guard over a whole span, from the circuit's
//! stored energy, so that a long stiff span of a slowly decaying
//! oscillation is not scanned period by period when nothing can cross.
//!
//! Within a mode whose inputs are constant over the span (every input
//! slope zero), the circuit states x (inductor currents, capacitor
//! voltages; z = [x; v] with v constant) obey x′ = A·x + B·v. Where A is
//! regular there is one equilibrium x* = −A⁻¹·B·v, and the deviation
//! Δx = x − x* obeys Δx′ = A·Δx exactly. Weighted by the energy scales
//! D = diag(√L, √C), y = D·Δx has ½‖y‖² = the deviation's stored energy,
//! and d‖y‖²/dt = yᵀ·S·y with S = D·A·D⁻¹ + (D·A·D⁻¹)ᵀ. With κ the
//! largest eigenvalue of S (≤ 0 for any network of resistors, inductors
//! and capacitors, which cannot create energy: a Lyapunov function, e.g.
//! H. K. Khalil, *Nonlinear Systems*, 3rd ed., 2002, Theorem 4.1), the
//! deviation obeys ‖y(τ)‖ ≤ ‖y(0)‖·e^{κ⁺τ/2}. So a guard g = r·z stays
//! above
//!
//! r·z* − ‖r_x·D⁻¹‖·‖y(0)‖·e^{κ⁺h/2}
//!
//! over the whole span [0, h], by Cauchy–Schwarz. Where that floor is
//! above the guard's zero band, no crossing and no dip below it can
//! exist, and the span needs no search at all. κ is not assumed to be
//! ≤ 0 but computed (coupled windings, whose energy is not diagonal in
//! D, may give κ > 0 and then a floor that grows with the span), and
//! rounding of x* is bounded by one step of iterative refinement.
//!
//! Approximate only in what it leaves out: the floor is a bound, never
//! an estimate, and where it does not clear the band the ordinary
//! search runs as before.

use nalgebra::{DMatrix, DVector, Dyn, LU};

/// What the floor needs of one mode, computed once.
pub(crate) struct Envelope {
    /// Number of circuit states, the first entries of z.
    n: usize,
    /// LU factors of A (the states' block of M).
    lu: LU<f64, Dyn, Dyn>,
    /// D: the states' energy scales.
    w: Vec<f64>,
    /// κ⁺/2 in 1/s: the deviation's growth rate bound (0 for a passive
    /// network, up to the rounding of S).
    growth: f64,
}

/// The deviation of one state from its equilibrium, ready to bound any
/// guard over a span.
pub(crate) struct Deviation {
    /// z with its circuit states replaced by the equilibrium x*.
    zeq: Vec<f64>,
    /// ‖D·(x − x*)‖·e^{κ⁺h/2}, with the refinement's correction added.
    radius: f64,
    /// The refinement's correction δ (x* is x̂ − δ to first order).
    delta: Vec<f64>,
}

impl Envelope {
    /// The envelope of the mode with matrix `m` and energy scales `w` (the
    /// first `w.len()` entries of z); `None` where it does not apply: no
    /// circuit states, a state without an energy scale (oscillators,
    /// compensators: weight 0), a singular A (no unique equilibrium), or
    /// values that are not finite.
    pub(crate) fn of(m: &DMatrix<f64>, w: &[f64]) -> Option<Envelope> {
        let n = w.len();
        if n == 0 || n > m.nrows() || w.iter().any(|&x| !(x > 0.0 && x.is_finite())) {
            return None;
        }
        let a = m.view((0, 0), (n, n)).clone_owned();
        let scaled = DMatrix::from_fn(n, n, |i, j| w[i] * a[(i, j)] / w[j]);
        let s = &scaled + scaled.transpose();
        let size = s.norm();
        if !size.is_finite() {
            return None;
        }
        let top = s
            .symmetric_eigenvalues()
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        // The eigenvalues of a symmetric matrix are within ‖E‖ of exact for
        // a backward error E of a few n·ε·‖S‖; the margin takes 8·n.
        let kappa = top + 8.0 * n as f64 * f64::EPSILON * size;
        if !kappa.is_finite() {
            return None;
        }
        let lu = a.lu();
        if !lu.is_invertible() {
            return None;
        }
        Some(Envelope {
            n,
            lu,
            w: w.to_vec(),
            growth: kappa.max(0.0) / 2.0,
        })
    }

    /// The deviation of state `z` over a span of length `h` (the growth
    /// factor e^{κ⁺h/2} is taken over `h`; callers pass the span or, where
    /// the eigenvalues say every live component dies sooner,
    /// `propagate::Spectrum::settled_after`); `None` where
    /// the inputs are not constant over it (`m`'s rows past the circuit
    /// states give z′ ≠ 0 there) or the numbers are not finite.
    pub(crate) fn deviation(&self, m: &DMatrix<f64>, z: &[f64], h: f64) -> Option<Deviation> {
        let n = self.n;
        let len = z.len();
        for i in n..m.nrows() {
            if (0..len).any(|j| m[(i, j)] != 0.0 && z[j] != 0.0) {
                return None;
            }
        }
        // B·v and its rounding's scale.
        let mut bv = DVector::zeros(n);
        for i in 0..n {
            bv[i] = (n..len).map(|j| m[(i, j)] * z[j]).sum::<f64>();
        }
        let xeq = self.lu.solve(&(-&bv))?;
        // One step of iterative refinement: the residual A·x̂ + B·v, whose
        // solve δ is how far x̂ is from x* to first order; its size is
        // counted twice over in the floor.
        let mut res = bv.clone();
        for i in 0..n {
            res[i] += (0..n).map(|j| m[(i, j)] * xeq[j]).sum::<f64>();
        }
        let delta = self.lu.solve(&res)?;
        let mut zeq = z.to_vec();
        zeq[..n].copy_from_slice(xeq.as_slice());
        let mut sq = 0.0;
        let mut dsq = 0.0;
        for i in 0..n {
            sq += (self.w[i] * (z[i] - xeq[i])).powi(2);
            dsq += (self.w[i] * delta[i]).powi(2);
        }
        let growth = (self.growth * h).exp();
        let radius = (sq.sqrt() + 2.0 * dsq.sqrt()) * growth;
        (radius.is_finite() && zeq.iter().all(|x| x.is_finite())).then(|| Deviation {
            zeq,
            radius,
            delta: delta.as_slice().to_vec(),
        })
    }

    /// A floor under r·z(τ) for every τ in the span `dev` was made for
    /// (`row`: r over all of z).
    pub(crate) fn floor(&self, dev: &Deviation, row: &[f64]) -> f64 {
        let mut at = 0.0;
        let mut terms = 0.0;
        for (r, x) in row.iter().zip(&dev.zeq) {
            at += r * x;
            terms += (r * x).abs();
        }
        let mut weighted = 0.0;
        let mut shift = 0.0;
        for ((r, w), d) in row.iter().zip(&self.w).zip(&dev.delta) {
            weighted += (r / w).powi(2);
            shift += (r * d).abs();
        }
        // Rounding of the products above: a few ulps of their terms.
        let rounding = 4.0 * (row.len() as f64) * f64::EPSILON * terms;
        at - 2.0 * shift - rounding - weighted.sqrt() * dev.radius * (1.0 + 1e-12)
    }
}

impl Envelope {
    /// Whether the output with row `row` stays within the rounding of its
    /// own terms (64·len·ε of Σ|rⱼ·z*ⱼ|) over the span `dev` was made for:
    /// its floor and its ceiling (the floor of −r) are that close.
    pub(crate) fn flat(&self, dev: &Deviation, row: &[f64]) -> bool {
        let terms: f64 = row.iter().zip(&dev.zeq).map(|(r, x)| (r * x).abs()).sum();
        let neg: Vec<f64> = row.iter().map(|r| -r).collect();
        let (lo, hi) = (self.floor(dev, row), -self.floor(dev, &neg));
        hi - lo <= 64.0 * row.len() as f64 * f64::EPSILON * terms
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A series RLC from a step: x = [i, v], z = [i, v, 1]; i′ = (V − R·i −
    /// v)/L, v′ = i/C. The floor of i over many periods must lie below
    /// the exact minimum (an underdamped response: common practice), and
    /// above it by no more than the deviation's energy allows.
    #[test]
    fn the_floor_is_below_the_exact_minimum_of_a_ringing_current() {
        let (r, l, c, vin): (f64, f64, f64, f64) = (0.1, 1e-6, 1e-6, 10.0);
        let m = DMatrix::from_row_slice(
            3,
            3,
            &[-r / l, -1.0 / l, vin / l, 1.0 / c, 0.0, 0.0, 0.0, 0.0, 0.0],
        );
        let w = [l.sqrt(), c.sqrt()];
        let env = Envelope::of(&m, &w).unwrap();
        // Passive: no growth beyond rounding.
        assert!(env.growth * 1e-3 < 1e-9, "{}", env.growth);
        // From rest: i = V/(L·ωd)·e^{−αt}·sin(ωd t), minimum near
        // −V/(L·ωd)·e^{−α·3π/(2ωd)}.
        let z = [0.0, 0.0, 1.0];
        let span = 1e-3;
        let dev = env.deviation(&m, &z, span).unwrap();
        let floor = env.floor(&dev, &[1.0, 0.0, 0.0]);
        let mut lowest = f64::INFINITY;
        let e = crate::propagate::expm(&m, 1e-8);
        let mut zs = z.to_vec();
        let mut next = zs.clone();
        for _ in 0..100_000 {
            crate::propagate::matvec(&e, &zs, &mut next);
            std::mem::swap(&mut zs, &mut next);
            lowest = lowest.min(zs[0]);
        }
        assert!(floor <= lowest, "{floor} > {lowest}");
        // The deviation's energy is ½C·V² at the start: the current can
        // swing at most V·√(C/L) = 10 A below its equilibrium of 0.
        assert!((floor + vin * (c / l).sqrt()).abs() < 1e-9, "{floor}");
    }

    /// The same circuit once its inputs ramp, or with a state outside the
    /// energy (weight 0), has no envelope.
    #[test]
    fn ramps_and_states_without_energy_have_no_floor() {
        let m = DMatrix::from_row_slice(
            4,
            4,
            &[
                -1.0, -1.0, 1.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0,
            ],
        );
        let env = Envelope::of(&m, &[1.0, 1.0]).unwrap();
        assert!(env.deviation(&m, &[0.0, 0.0, 1.0, 0.0], 1.0).is_some());
        assert!(env.deviation(&m, &[0.0, 0.0, 1.0, 2.0], 1.0).is_none());
        assert!(Envelope::of(&m, &[1.0, 0.0]).is_none());
    }
}
