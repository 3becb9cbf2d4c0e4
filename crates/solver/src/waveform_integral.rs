//! Integrals of outputs on the exact solution: Gauss–Legendre on
//! sub-intervals short against the fastest dynamics, exact up to rounding.

use nalgebra::{DMatrix, DVector};

use crate::mode::Mode;
use crate::propagate;
use crate::waveform::{OutputId, Waveform};

/// Gauss–Legendre nodes and weights on [−1, 1], 8 points. On a sub-interval
/// with ρ·δ ≤ 1/2 the integrand (a product of two outputs, a sum of
/// exponentials) has derivatives that shrink like (ρδ)ᵏ, so the rule's error
/// term, of order (ρδ)¹⁶/16!, is far below rounding.
#[allow(clippy::excessive_precision)] // tabulated to more digits than f64 holds
const GL8: [(f64, f64); 8] = [
    (-0.960_289_856_497_536_2, 0.101_228_536_290_376_26),
    (-0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (-0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (-0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (0.960_289_856_497_536_2, 0.101_228_536_290_376_26),
];

impl Waveform {
    /// ∫ f(outputs) dt over [t0, t1] ∩ the recorded window, where `f`
    /// receives the values of `ids` (`None` if any is undetermined there,
    /// in which case that stretch counts as zero). Exact up to rounding: see
    /// the note on the quadrature rule. NaN where a segment's stretch would
    /// need more than 2²⁰ pieces (an oscillation of hundreds of thousands
    /// of radians between two events; the measurements of
    /// [`crate::measure`] refuse it by name).
    pub fn integrate(&self, ids: &[OutputId], t0: f64, t1: f64, f: impl Fn(&[f64]) -> f64) -> f64 {
        self.integrate_timed(ids, t0, t1, |_, v| f(v))
    }

    /// As [`Waveform::integrate`], with `f` also given the time: ∫ f(t,
    /// outputs) dt, for weights such as e^(−(t1 − t)/τ) (the response of a
    /// first-order system to a power). Exact up to rounding where `f` is
    /// smooth in t on the scale of the sub-intervals (the Gauss–Legendre
    /// rule integrates polynomials of degree 15 exactly on each).
    pub fn integrate_timed(
        &self,
        ids: &[OutputId],
        t0: f64,
        t1: f64,
        f: impl Fn(f64, &[f64]) -> f64,
    ) -> f64 {
        let mut total = 0.0;
        for (i, s) in self.segments.iter().enumerate() {
            let a = s.t0.max(t0);
            let b = s.t1.min(t1);
            if b <= a {
                continue;
            }
            total += self.integrate_piece(i, ids, a - s.t0, b - a, a, &f);
        }
        total
    }

    /// ∫ f(t, outputs) dt over `width` seconds of segment `i` from the
    /// offset `a` after its start, where f sees the time as `origin` plus
    /// the distance into the piece (0 where an output floats in that
    /// segment's mode).
    pub(crate) fn integrate_piece(
        &self,
        i: usize,
        ids: &[OutputId],
        a: f64,
        width: f64,
        origin: f64,
        f: impl Fn(f64, &[f64]) -> f64,
    ) -> f64 {
        let m = &self.modes[self.segments[i].mode as usize];
        if ids.iter().any(|id| m.undetermined[id.0]) {
            return 0.0;
        }
        let mut vals = vec![0.0; ids.len()];
        let mut total = 0.0;
        let n = propagate::substeps(m.rate, width);
        if n > propagate::STIFF_SUBSTEPS {
            let (need, spectrum) = self.pieces_needed(i, a, width);
            // Beyond the cap of a measurement (see `MAX_PIECES`): no
            // number, rather than hours of work or a rate bound overrun.
            if !crate::waveform_ext::within_piece_cap(need) {
                return f64::NAN;
            }
            if let Some(sp) = spectrum {
                let z = propagate::advance(&m.m, &m.weight, m.rate, &self.z0(i), a);
                return Self::integrate_stiff(m, &sp, z, ids, (a, width), origin, f);
            }
        }
        let d = width / n as f64;
        let mut z = propagate::advance(&m.m, &m.weight, m.rate, &self.z0(i), a);
        // One Taylor expansion per sub-interval, e^{Mσd}z = Σ wₖσᵏ, and
        // each output as the polynomial Σ (c·wₖ)σᵏ evaluated at the eight
        // nodes: the same series as expanding anew at each node (which
        // cost eight expansions per sub-interval, most of a long
        // measurement), summed in another order, so equal to rounding.
        let mut terms = propagate::TaylorTerms::default();
        let mut coefs: Vec<Vec<f64>> = vec![Vec::new(); ids.len()];
        for step in 0..n {
            propagate::taylor_terms(&m.m, &m.weight, m.live, &z, d, &mut terms);
            for (coef, id) in coefs.iter_mut().zip(ids) {
                let row = m.c.row(id.0);
                coef.clear();
                coef.extend(
                    terms
                        .terms()
                        .map(|w| row.iter().zip(w.iter()).map(|(p, q)| p * q).sum::<f64>()),
                );
            }
            let mut part = 0.0;
            let start = origin + step as f64 * d;
            for &(x, w) in &GL8 {
                let sigma = 0.5 * (x + 1.0);
                for (v, coef) in vals.iter_mut().zip(&coefs) {
                    *v = propagate::poly_value(coef, sigma);
                }
                part += w * f(start + 0.5 * d * (x + 1.0), &vals);
            }
            total += 0.5 * d * part;
            if step + 1 < n {
                z = propagate::taylor(&m.m, &m.weight, &z, d);
            }
        }
        total
    }

    /// [`Waveform::integrate_piece`] over a stiff piece (see
    /// `propagate::STIFF_SUBSTEPS`): sub-intervals as long as the
    /// eigenvalues still alive there allow (|λ|·δ ≤ 1/2, the fast decaying
    /// ones dead after `propagate::DEAD`/(−Re λ) from the segment's
    /// start, the same grading as event location in `run/locate.rs`), so
    /// the Gauss–Legendre rule stays exact on each; states from matrix
    /// exponentials, cached per sub-interval length within the call. The
    /// piece is `width` long from the offset `a` into a segment of mode
    /// `m`, where the state is `z`.
    fn integrate_stiff(
        m: &Mode,
        sp: &propagate::Spectrum,
        mut z: DVector<f64>,
        ids: &[OutputId],
        (a, width): (f64, f64),
        origin: f64,
        f: impl Fn(f64, &[f64]) -> f64,
    ) -> f64 {
        let mut vals = vec![0.0; ids.len()];
        let mut total = 0.0;
        // Per sub-interval length: each output's row times e^{Mδ(x+1)/2} at
        // the 8 nodes (so a node costs a dot product per output, not a
        // product of the matrix with the state), and e^{Mδ}.
        let mut cache: Vec<(u64, Vec<Vec<f64>>, DMatrix<f64>)> = vec![];
        let mut next = z.clone();
        let mut tau = 0.0;
        // The caller checked the count; the bound only guarantees the end
        // where τ + δ would round to τ.
        for _ in 0..=crate::waveform_ext::MAX_PIECES {
            if tau >= width {
                break;
            }
            let d = sp.step_at(a + tau).min(width - tau);
            if tau + d <= tau {
                break;
            }
            let k = match cache.iter().position(|(b, _, _)| *b == d.to_bits()) {
                Some(k) => k,
                None => {
                    let rows = GL8
                        .iter()
                        .flat_map(|&(x, _)| {
                            let e = propagate::expm(&m.m, 0.5 * d * (x + 1.0));
                            ids.iter()
                                .map(move |id| (m.c.row(id.0) * &e).iter().copied().collect())
                                .collect::<Vec<Vec<f64>>>()
                        })
                        .collect();
                    cache.push((d.to_bits(), rows, propagate::expm(&m.m, d)));
                    cache.len() - 1
                }
            };
            let (_, rows, step) = &cache[k];
            let mut part = 0.0;
            let start = origin + tau;
            for (node, &(x, w)) in GL8.iter().enumerate() {
                for (k, v) in vals.iter_mut().enumerate() {
                    *v = propagate::dot_slices(&rows[node * ids.len() + k], z.as_slice());
                }
                part += w * f(start + 0.5 * d * (x + 1.0), &vals);
            }
            total += 0.5 * d * part;
            propagate::matvec(step, z.as_slice(), next.as_mut_slice());
            std::mem::swap(&mut z, &mut next);
            tau += d;
        }
        total
    }

    /// Average of an output over [t0, t1].
    pub fn average(&self, id: OutputId, t0: f64, t1: f64) -> f64 {
        self.integrate(&[id], t0, t1, |v| v[0]) / (t1 - t0)
    }
}
