//! Crate-internal access to the exact local form of an output: on each short
//! sub-interval of a segment the output is a polynomial in normalised time,
//! which extreme searches and root finders can use directly.

use nalgebra::{DMatrix, DVector};

use crate::envelope::Envelope;
use crate::propagate;
use crate::waveform::{OutputId, Waveform};

/// One sub-interval `[t_start, t_end]` of a segment on which the output is
/// exactly `y(t_start + delta·σ) = Σ coef[k]·σᵏ` for σ ∈ [0, 1] (up to
/// rounding: the Taylor series is cut where its terms fall below 10⁻¹⁸ of
/// the state, see [`propagate::taylor_terms`]).
pub(crate) struct Piece<'a> {
    /// Start of the sub-interval (s).
    pub t_start: f64,
    /// End of the sub-interval (s); exactly the clipped segment end for the
    /// last piece, so that callers report event instants without rounding.
    pub t_end: f64,
    /// Length used for the normalisation (s).
    pub delta: f64,
    /// Polynomial coefficients in σ.
    pub coef: &'a [f64],
}

impl Waveform {
    /// Whether `id` names an output of this waveform (ids of another
    /// circuit's waveform could index past the output table).
    pub(crate) fn has_output(&self, id: OutputId) -> bool {
        id.0 < self.output_names.len()
    }

    /// The output's name, for error messages.
    pub(crate) fn output_name(&self, id: OutputId) -> &str {
        self.output_names
            .get(id.0)
            .map(String::as_str)
            .unwrap_or("<unknown output>")
    }

    /// Whether output `id` is undetermined (depends on a free gauge, e.g. a
    /// floating node) throughout segment `i`.
    pub(crate) fn undetermined_in(&self, i: usize, id: OutputId) -> bool {
        let m = &self.modes[self.segments[i].mode as usize];
        m.undetermined.get(id.0).copied().unwrap_or(true)
    }

    /// Whether output `id` is identically zero throughout segment `i` (its
    /// output row is all zeros, e.g. the current of an open switch).
    pub(crate) fn identically_zero_in(&self, i: usize, id: OutputId) -> bool {
        let m = &self.modes[self.segments[i].mode as usize];
        !m.undetermined.get(id.0).copied().unwrap_or(true)
            && id.0 < m.c.nrows()
            && m.c.row(id.0).iter().all(|&v| v == 0.0)
    }

    /// How many polynomial pieces [`Waveform::output_pieces`] (and the
    /// quadrature of [`Waveform::integrate`]) cut `width` seconds of
    /// segment `i`, from `offset` after its start, into; with the mode's
    /// spectrum where the stretch is stiff. `∞` when the count is beyond
    /// reach.
    pub(crate) fn pieces_needed(
        &self,
        i: usize,
        offset: f64,
        width: f64,
    ) -> (f64, Option<propagate::Spectrum>) {
        let m = &self.modes[self.segments[i].mode as usize];
        if width <= 0.0 {
            return (0.0, None);
        }
        let n = propagate::substeps(m.rate, width);
        if n <= propagate::STIFF_SUBSTEPS {
            return (n as f64, None);
        }
        match propagate::Spectrum::of(&m.m) {
            Some(sp) => (sp.pieces(offset, width), Some(sp)),
            // Taylor sub-steps by the rate bound, uncapped.
            None => ((m.rate * width / propagate::TAYLOR_REACH).ceil(), None),
        }
    }

    /// Calls `f` with the polynomial pieces of output `id` over
    /// `[a, b] ⊆ [t0, t1]` of segment `i`. The sub-interval length follows
    /// the mode's rate bound (ρ·δ ≤ 1/2), the same split as
    /// [`Waveform::integrate`], so each polynomial converges fast and is
    /// well conditioned on [0, 1].
    ///
    /// Returns `false`, having called `f` for no piece, when the split
    /// needs more than [`MAX_PIECES`] pieces (see there).
    pub(crate) fn output_pieces(
        &self,
        i: usize,
        id: OutputId,
        a: f64,
        b: f64,
        mut f: impl FnMut(&Piece<'_>),
    ) -> bool {
        let s = &self.segments[i];
        let m = &self.modes[s.mode as usize];
        if b <= a || id.0 >= m.c.nrows() {
            return true;
        }
        let (need, spectrum) = self.pieces_needed(i, a - s.t0, b - a);
        if !within_piece_cap(need) {
            return false;
        }
        if let Some(sp) = spectrum {
            self.stiff_pieces(i, id, a, b, &sp, f);
            return true;
        }
        let row = m.c.row(id.0);
        let n = propagate::substeps(m.rate, b - a);
        let delta = (b - a) / n as f64;
        let mut z = propagate::advance(&m.m, &m.weight, m.rate, &self.z0(i), a - s.t0);
        let mut terms = propagate::TaylorTerms::default();
        let mut coef = Vec::new();
        for k in 0..n {
            propagate::taylor_terms(&m.m, &m.weight, m.live, &z, delta, &mut terms);
            coef.clear();
            coef.extend(
                terms
                    .terms()
                    .map(|w| row.iter().zip(w.iter()).map(|(p, q)| p * q).sum::<f64>()),
            );
            let t_start = a + delta * k as f64;
            let t_end = if k + 1 == n {
                b
            } else {
                a + delta * (k + 1) as f64
            };
            f(&Piece {
                t_start,
                t_end,
                delta,
                coef: &coef,
            });
            if k + 1 < n {
                z = propagate::taylor(&m.m, &m.weight, &z, delta);
            }
        }
        true
    }

    /// [`Waveform::output_pieces`] over a stiff span of segment `i`: pieces
    /// as long as the eigenvalues still alive there allow (|λ|·δ ≤ 1/2,
    /// the grading of event location in `run/locate.rs`), where a Taylor
    /// series of the whole M would blow up the dead fast components. On
    /// each piece the output is interpolated at 13 Chebyshev points of
    /// exact states e^{Mσδ}z: with |λ|·δ ≤ 1/2 the interpolant of degree 12
    /// is within about 0.5¹³/13! ≈ 2e-14 of the output (the Taylor
    /// remainder bounds the best approximation, and Chebyshev points
    /// come within a small factor of it: L. N. Trefethen, *Approximation
    /// Theory and Approximation Practice*, 2013, ch. 8 and 16; from memory).
    ///
    /// The walk counts time from `a` (τ), not on the absolute clock: the
    /// first pieces after an event can be far shorter than the spacing of
    /// f64 times there (a 1e-300 F capacitor behind 60 Ω decays in
    /// 1e-298 s at t = 5 ms, where one ulp is 9e-19 s), and an absolute
    /// `t += δ` would never move. Such pieces all start at the same
    /// absolute instant, which is what the record can resolve.
    fn stiff_pieces(
        &self,
        i: usize,
        id: OutputId,
        a: f64,
        b: f64,
        sp: &propagate::Spectrum,
        mut f: impl FnMut(&Piece<'_>),
    ) {
        const N: usize = 13;
        let s = &self.segments[i];
        let m = &self.modes[s.mode as usize];
        let row: Vec<f64> = m.c.row(id.0).iter().copied().collect();
        let nodes: Vec<f64> = (0..N)
            .map(|j| 0.5 * (1.0 - (std::f64::consts::PI * (j as f64 + 0.5) / N as f64).cos()))
            .collect();
        let vander = Factors::of(DMatrix::from_fn(N, N, |j, k| nodes[j].powi(k as i32)));
        let offset = a - s.t0;
        let width = b - a;
        let mut z = propagate::advance(&m.m, &m.weight, m.rate, &self.z0(i), offset);
        // Where the energy envelope keeps the output within the rounding of
        // its terms over the whole stretch (a ringing decayed below
        // rounding, which the eigenvalues still count alive for up to
        // e⁻⁶⁰ of its start), the stretch is one constant piece: its value
        // at the start, exact to that rounding.
        if let Some(env) = Envelope::of(&m.m, &m.weight) {
            if let Some(dev) = env.deviation(&m.m, z.as_slice(), width.min(sp.settled_after())) {
                if env.flat(&dev, &row) {
                    f(&Piece {
                        t_start: a,
                        t_end: b,
                        delta: width,
                        coef: &[propagate::dot_slices(&row, z.as_slice())],
                    });
                    return;
                }
            }
        }
        // Per piece length: the output's row times e^{Mδσⱼ} at the nodes
        // (so each piece costs a dot product per node, not a product of
        // the matrix with the state), then e^{Mδ}.
        let mut cache: Vec<(u64, Vec<Vec<f64>>, DMatrix<f64>)> = vec![];
        let row_m = DMatrix::from_row_slice(1, row.len(), &row);
        let mut c = DVector::zeros(N);
        let mut next = z.clone();
        let mut tau = 0.0;
        // The caller checked the count (`pieces_needed`); the bound only
        // guarantees the end where τ + δ rounds to τ.
        for _ in 0..=MAX_PIECES {
            let d = sp.step_at(offset + tau).min(width - tau);
            let last = tau + d >= width || tau + d <= tau;
            let k = match cache.iter().position(|(bits, _, _)| *bits == d.to_bits()) {
                Some(k) => k,
                None => {
                    let rows: Vec<Vec<f64>> = nodes
                        .iter()
                        .map(|&x| (&row_m * propagate::expm(&m.m, x * d)).as_slice().to_vec())
                        .collect();
                    cache.push((d.to_bits(), rows, propagate::expm(&m.m, d)));
                    cache.len() - 1
                }
            };
            let (_, rows, step) = &cache[k];
            // The coefficients by the LU factors (backward stable: the
            // monomial Vandermonde matrix of these nodes has a condition
            // number near 1.6e9, so its inverse would not do), in place.
            for (yj, r) in c.iter_mut().zip(rows) {
                *yj = propagate::dot_slices(r, z.as_slice());
            }
            if !vander.solve(&mut c) {
                return;
            }
            f(&Piece {
                t_start: a + tau,
                t_end: if last { b } else { a + (tau + d) },
                delta: d,
                coef: c.as_slice(),
            });
            if last {
                break;
            }
            propagate::matvec(step, z.as_slice(), next.as_mut_slice());
            std::mem::swap(&mut z, &mut next);
            tau += d;
        }
    }
}

/// LU factors with row pivoting (P·V = L·U, L unit lower, both in `lu`),
/// solved by plain loops: the same substitutions as `nalgebra::LU::solve`
/// (column by column, in the same order, so the same bits), without its
/// generic column operations, which took most of a measurement over a
/// long ringing.
struct Factors {
    lu: DMatrix<f64>,
    perm: Vec<usize>,
}

impl Factors {
    fn of(m: DMatrix<f64>) -> Factors {
        let n = m.nrows();
        let lu = m.lu();
        let mut perm: Vec<usize> = (0..n).collect();
        let mut idx = DVector::from_iterator(n, (0..n).map(|i| i as f64));
        lu.p().permute_rows(&mut idx);
        for (p, v) in perm.iter_mut().zip(idx.iter()) {
            *p = *v as usize;
        }
        let (l, u) = (lu.l(), lu.u());
        Factors {
            lu: DMatrix::from_fn(n, n, |i, j| if i > j { l[(i, j)] } else { u[(i, j)] }),
            perm,
        }
    }

    /// Solves V·x = b in place; false where U has a zero on its diagonal.
    fn solve(&self, b: &mut DVector<f64>) -> bool {
        let n = self.perm.len();
        let permuted: Vec<f64> = self.perm.iter().map(|&i| b[i]).collect();
        b.as_mut_slice().copy_from_slice(&permuted);
        let a = self.lu.as_slice();
        let x = b.as_mut_slice();
        for i in 0..n {
            let xi = x[i];
            let col = &a[i * n..(i + 1) * n];
            for k in i + 1..n {
                x[k] -= col[k] * xi;
            }
        }
        for i in (0..n).rev() {
            let col = &a[i * n..(i + 1) * n];
            if col[i] == 0.0 {
                return false;
            }
            x[i] /= col[i];
            let xi = x[i];
            for k in 0..i {
                x[k] -= col[k] * xi;
            }
        }
        true
    }
}

/// Most polynomial pieces one segment's stretch may need before a
/// measurement refuses it (`MeasureError::TooFast`): 2²⁰ ≈ 10⁶, the cap
/// of the Taylor sub-steps over one span (`propagate::substeps`). A
/// segment needs that many only where the output swings through about
/// 5·10⁵ radians inside it (an oscillation far faster than the record
/// between two events, e.g. a 1 THz source over more than 80 ns) — seconds
/// of work; beyond, the walk would take minutes to hours.
pub(crate) const MAX_PIECES: usize = 1 << 20;

/// Whether a stretch needing `need` pieces is within [`MAX_PIECES`] (a
/// NaN count is not).
pub(crate) fn within_piece_cap(need: f64) -> bool {
    need <= MAX_PIECES as f64
}
