//! The exact Jacobian of the period map from the record of one period:
//! the product of the segments' state-transition matrices, the jump maps
//! on entering modes, and at located state events the saltation matrices.

use nalgebra::{DMatrix, DVector};

use fluxstep_solver::dynamics::SegmentDynamics;
use fluxstep_solver::Waveform;

/// A located event whose guard moves this slowly along the flow (relative
/// to the guard's size) is a grazing touch: the crossing instant is not a
/// smooth function of the state there, and the saltation term is left out.
const GRAZING_REL: f64 = 1e-12;

/// The saltation matrix across a located event: S = P + (f⁺ − P f⁻) gᵀ /
/// (g·f⁻) (R. I. Leine & H. Nijmeijer, *Dynamics and Bifurcations of
/// Non-Smooth Mechanical Systems*, 2004, eq. 7.18 with a jump map; T. J.
/// Aprille & T. N. Trick, Proc. IEEE 1972), with g the guard row, f⁻ and f⁺
/// the vector fields just before and after, P the jump.
pub(crate) fn saltation(
    jump: &DMatrix<f64>,
    guard: &[f64],
    f_before: &DVector<f64>,
    f_after: &DVector<f64>,
) -> DMatrix<f64> {
    let g = DVector::from_column_slice(guard);
    let rate = g.dot(f_before);
    let scale: f64 = guard
        .iter()
        .zip(f_before.iter())
        .map(|(a, b)| (a * b).abs())
        .sum();
    if rate.abs() <= GRAZING_REL * scale || rate == 0.0 {
        return jump.clone();
    }
    let d = f_after - jump * f_before;
    jump + (d / rate) * g.transpose()
}

/// Φ = ∂z(end)/∂z(start) over the recorded segments `range` of `wave`,
/// starting just after the jump into the first segment's mode (so that
/// jump is included) and ending just before the instant that ends the
/// last segment (the caller adds what happens there).
pub(crate) fn segments_jacobian(wave: &Waveform, range: std::ops::Range<usize>) -> DMatrix<f64> {
    let n = wave.extended_len();
    let mut phi = DMatrix::<f64>::identity(n, n);
    let mut prev: Option<(SegmentDynamics<'_>, DVector<f64>)> = None;
    for i in range {
        let seg = wave
            .segment_dynamics(i)
            .expect("the range lies within the record");
        let jump = seg
            .entry_jump
            .cloned()
            .unwrap_or_else(|| DMatrix::identity(n, n));
        let boundary = match &prev {
            Some((p, z_end)) => match p.crossing {
                Some(g) => {
                    let f_before = p.field(z_end);
                    let f_after = seg.field(&DVector::from_column_slice(seg.start));
                    saltation(&jump, g, &f_before, &f_after)
                }
                None => jump,
            },
            None => jump,
        };
        phi = boundary * phi;
        let e = seg.transition();
        let z_end = &e * DVector::from_column_slice(seg.start);
        phi = e * phi;
        prev = Some((seg, z_end));
    }
    phi
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A guard that the flow crosses: the saltation matrix removes the
    /// component along the guard's normal and puts back the change of field
    /// (Leine & Nijmeijer 2004, eq. 7.18; checked by hand here).
    #[test]
    fn saltation_of_a_plain_switch() {
        let p = DMatrix::<f64>::identity(2, 2);
        let g = [1.0, 0.0];
        let fm = DVector::from_vec(vec![-2.0, 1.0]);
        let fp = DVector::from_vec(vec![0.0, 3.0]);
        let s = saltation(&p, &g, &fm, &fp);
        // S = I + (fp − fm) gᵀ / (g·fm) = I + [2, 2]ᵀ[1, 0] / (−2).
        assert_eq!(s[(0, 0)], 0.0);
        assert_eq!(s[(1, 0)], -1.0);
        assert_eq!(s[(0, 1)], 0.0);
        assert_eq!(s[(1, 1)], 1.0);
    }

    #[test]
    fn grazing_touch_keeps_the_jump() {
        let p = DMatrix::<f64>::identity(2, 2);
        let s = saltation(
            &p,
            &[1.0, 0.0],
            &DVector::from_vec(vec![0.0, 1.0]),
            &DVector::from_vec(vec![5.0, 1.0]),
        );
        assert_eq!(s, p);
    }
}
