//! Compensator laws as state-space blocks (A, B, C, D) on their own states.

use nalgebra::DMatrix;

/// A state-space realisation (A, B, C, D) of a compensator law, single
/// input (the error) and single output.
pub(super) fn realise(
    law: &fluxstep_netlist::CompensatorLaw,
) -> (DMatrix<f64>, Vec<f64>, Vec<f64>, f64) {
    use fluxstep_netlist::CompensatorLaw;
    match law {
        // x' = e; u = ki·x + kp·e.
        CompensatorLaw::Pi { kp, ki } => (DMatrix::zeros(1, 1), vec![1.0], vec![*ki], *kp),
        CompensatorLaw::StateSpace { a, b, c, d } => {
            let n = b.len();
            (
                DMatrix::from_fn(n, n, |i, j| a[i][j]),
                b.clone(),
                c.clone(),
                *d,
            )
        }
        CompensatorLaw::PolesZeros {
            gain,
            integrator,
            zeros_hz,
            poles_hz,
        } => {
            // A cascade of first-order sections, each with entries of the
            // order of its own 1/τ: the companion (canonical) form would
            // hold products like ωp² and make the rate bound — hence the
            // number of sub-steps — explode for poles at tens of kHz.
            let tau = |f: f64| 1.0 / (2.0 * std::f64::consts::PI * f);
            let mut zeros: Vec<f64> = zeros_hz.iter().map(|&f| tau(f)).collect();
            let mut sections: Vec<Section> = vec![];
            if *integrator {
                // (1 + s·τz)/s when a zero is left for it, else 1/s:
                // x' = e, y = x + τz·e.
                let tz = zeros.pop().unwrap_or(0.0);
                sections.push((DMatrix::zeros(1, 1), vec![1.0], vec![1.0], tz));
            }
            for &fp in poles_hz {
                let tp = tau(fp);
                // (1 + s·τz)/(1 + s·τp), or 1/(1 + s·τp) when no zero is
                // left: x' = (e − x)/τp, y = (τz/τp)·e + (1 − τz/τp)·x.
                let tz = zeros.pop().unwrap_or(0.0);
                sections.push((
                    DMatrix::from_element(1, 1, -1.0 / tp),
                    vec![1.0 / tp],
                    vec![1.0 - tz / tp],
                    tz / tp,
                ));
            }
            let (a, b, mut c, mut d) = cascade(&sections);
            for x in &mut c {
                *x *= gain;
            }
            d *= gain;
            (a, b, c, d)
        }
    }
}

/// (A, B, C, D) of a single-input, single-output block.
type Section = (DMatrix<f64>, Vec<f64>, Vec<f64>, f64);

/// Series connection of blocks, first to last: for G2·G1,
/// A = [[A1, 0], [B2·C1, A2]], B = [B1; B2·D1], C = [D2·C1, C2], D = D2·D1
/// (common practice; any control text).
fn cascade(sections: &[Section]) -> Section {
    let mut acc: Section = (DMatrix::zeros(0, 0), vec![], vec![], 1.0);
    for (a2, b2, c2, d2) in sections {
        let (a1, b1, c1, d1) = &acc;
        let (n1, n2) = (b1.len(), b2.len());
        let mut a = DMatrix::zeros(n1 + n2, n1 + n2);
        a.view_mut((0, 0), (n1, n1)).copy_from(a1);
        a.view_mut((n1, n1), (n2, n2)).copy_from(a2);
        for i in 0..n2 {
            for j in 0..n1 {
                a[(n1 + i, j)] = b2[i] * c1[j];
            }
        }
        let mut b = b1.clone();
        b.extend(b2.iter().map(|x| x * d1));
        let mut c: Vec<f64> = c1.iter().map(|x| d2 * x).collect();
        c.extend(c2.iter().copied());
        acc = (a, b, c, d2 * d1);
    }
    acc
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::Complex;

    /// The cascade realisation of gain/s·Π(1 + s/ωz)/Π(1 + s/ωp) has the
    /// same frequency response as the formula, C(jωI − A)⁻¹B + D
    /// (definition of the transfer function; common practice).
    #[test]
    fn poles_zeros_realisation_matches_its_transfer_function() {
        let (gain, zeros, poles) = (2199.1, vec![1.5e3, 1.5e3], vec![60e3, 60e3]);
        let law = fluxstep_netlist::CompensatorLaw::PolesZeros {
            gain,
            integrator: true,
            zeros_hz: zeros.clone(),
            poles_hz: poles.clone(),
        };
        let (a, b, c, d) = realise(&law);
        let n = b.len();
        assert_eq!(n, 3);
        // The rate bound stays of the order of the fastest pole, not its
        // square (canonical form) nor the lead gain times it (raw cascade).
        let wp = 2.0 * std::f64::consts::PI * 60e3;
        let rate = crate::mode::balanced_norm(&a, n, &vec![1.0; n]);
        assert!(
            rate <= 4.0 * wp,
            "rate bound {rate:e} vs the fastest pole {wp:e}"
        );
        for f in [10.0, 300.0, 1.5e3, 20e3, 60e3, 500e3] {
            let s = Complex::new(0.0, 2.0 * std::f64::consts::PI * f);
            let m = nalgebra::DMatrix::<Complex<f64>>::from_fn(n, n, |i, j| {
                (if i == j { s } else { Complex::new(0.0, 0.0) }) - Complex::new(a[(i, j)], 0.0)
            });
            let bv = nalgebra::DVector::<Complex<f64>>::from_fn(n, |i, _| Complex::new(b[i], 0.0));
            let x = m.lu().solve(&bv).unwrap();
            let g: Complex<f64> = (0..n).map(|i| x[i] * c[i]).sum::<Complex<f64>>() + d;
            let mut expect = Complex::new(gain, 0.0) / s;
            for &z in &zeros {
                expect *= Complex::new(1.0, 0.0) + s / (2.0 * std::f64::consts::PI * z);
            }
            for &p in &poles {
                expect /= Complex::new(1.0, 0.0) + s / (2.0 * std::f64::consts::PI * p);
            }
            assert!(
                (g - expect).norm() < 1e-12 * expect.norm(),
                "at {f} Hz: {g} vs {expect}"
            );
        }
    }
}
