//! Exponentials of lengths near a cached one, as a polynomial in the
//! offset: e^{M(h₀+δ)} = Σₖ δᵏ·Mᵏe^{Mh₀}/k!, with the matrices
//! Pₖ = Mᵏe^{Mh₀}/k! made once. A converter that settles moves its located
//! instants a little every period, so the lengths from and to them are
//! new every period but stay close to one another; where a short Taylor
//! series of δ costs a chain of products, one after the other, the state
//! at h₀ + δ is here the products Pₖz (independent of one another) and
//! Horner's rule in δ. [`NearAnchor`] keeps such a polynomial from a fresh
//! exponential and moves a second one along with lengths that settle.
//! Used by event location for a moving crossing and the state there (a
//! guard's row times the terms Pₖz is its own polynomial in δ,
//! [`NearTerms`]) and by the exact advance for the lengths that follow it
//! (`run/locate.rs`, `run/advance.rs`).

use nalgebra::{DMatrix, DMatrixView, DMatrixViewMut};

use crate::propagate::{self, larger};

/// Terms of the series kept: δ⁰ to δ⁵.
const TERMS: usize = 6;

/// Largest ‖M‖₁·|δ| a [`NearExp`] serves: the first term left out is then
/// below (2⁻¹²)⁶/6! ≈ 3e-25 of ‖z‖₁ and the last one kept below
/// (2⁻¹²)⁵/5! ≈ 7e-21 of it, under the 1e-18 at which a Taylor series of
/// the solver stops (`propagate::taylor_done`; the bound ‖Mᵏ‖ ≤ ‖M‖ᵏ,
/// common practice). The last term kept is checked against the state in
/// energy units as well, where a badly scaled circuit could break the
/// bound in ‖·‖₁ ([`NearExp::apply`]).
pub(crate) const NEAR_REACH: f64 = 1.0 / 4096.0;

/// e^{M·h₀} and the polynomial in δ of e^{M(h₀+δ)} for |δ| within
/// [`NearExp::reach`].
#[derive(Clone, Debug)]
pub(crate) struct NearExp {
    /// h₀.
    pub(crate) h0: f64,
    /// e^{M·h₀}.
    pub(crate) phi: DMatrix<f64>,
    /// Largest |δ| served: [`NEAR_REACH`] / ‖M‖₁.
    pub(crate) reach: f64,
    /// ‖M‖₁.
    norm: f64,
    /// P₀ … P₅ one after the other, each n×n column-major.
    stacked: Vec<f64>,
    n: usize,
}

impl NearExp {
    /// The polynomial about h₀ from e^{M·h₀} (`phi`).
    pub(crate) fn from_phi(m: &DMatrix<f64>, h0: f64, phi: DMatrix<f64>) -> NearExp {
        let n = m.nrows();
        let norm = propagate::norm1(m);
        let mut blocks = Vec::with_capacity(TERMS);
        blocks.push(phi.clone());
        for k in 1..TERMS {
            let next = m * &blocks[k - 1] / k as f64;
            blocks.push(next);
        }
        let mut stacked = Vec::with_capacity(TERMS * n * n);
        for b in &blocks {
            stacked.extend_from_slice(b.as_slice());
        }
        NearExp {
            h0,
            phi,
            reach: if norm > 0.0 {
                NEAR_REACH / norm
            } else {
                f64::INFINITY
            },
            norm,
            stacked,
            n,
        }
    }

    /// The polynomial about h₀ from a fresh exponential.
    pub(crate) fn new(m: &DMatrix<f64>, h0: f64) -> NearExp {
        NearExp::from_phi(m, h0, propagate::expm(m, h0))
    }

    /// Whether h lies within reach of h₀.
    #[inline(always)]
    pub(crate) fn serves(&self, h: f64) -> bool {
        (h - self.h0).abs() <= self.reach
    }

    /// e^{M(h₀+δ)}·z to first order, P₀z + δ·P₁z, into `out` (`w`: two
    /// scratch vectors of z's length).
    #[inline(always)]
    fn first_order(
        &self,
        delta: f64,
        z: &[f64],
        (w0, w1): (&mut [f64], &mut [f64]),
        out: &mut [f64],
    ) {
        let n = self.n;
        let nn = n * n;
        let block = |t: usize| &self.stacked[t * nn..(t + 1) * nn];
        match n {
            3 => first_order_fixed::<3>(block(0), block(1), delta, z, out),
            4 => first_order_fixed::<4>(block(0), block(1), delta, z, out),
            5 => first_order_fixed::<5>(block(0), block(1), delta, z, out),
            6 => first_order_fixed::<6>(block(0), block(1), delta, z, out),
            _ => {
                block_product(block(0), z, w0);
                block_product(block(1), z, w1);
                for ((o, &a), &b) in out.iter_mut().zip(&*w0).zip(&*w1) {
                    *o = a + delta * b;
                }
            }
        }
    }

    /// e^{M(h₀+δ)}·z into `out` for |δ| within [`NearExp::reach`]: the
    /// products Pₖz, then Horner's rule in δ, up to the first
    /// term k whose bound (‖M‖₁·|δ|)ᵏ/k! is below 1e-18 ([`last_term`]).
    /// False (`out` then holds the sum, which the caller replaces) where
    /// that term is not below 1e-18 of the result, largest entry and in
    /// energy units (`w`: `Mode::weight`), the test by which a Taylor
    /// series of the solver stops: the caller then takes the Taylor path.
    pub(crate) fn apply(&self, delta: f64, z: &[f64], out: &mut [f64], w: &[f64]) -> bool {
        debug_assert!(delta.abs() <= self.reach || !delta.is_finite());
        let k = last_term(delta.abs() * self.norm);
        match self.n {
            3 => apply_fixed::<3>(&self.stacked, k, delta, z, out, w),
            4 => apply_fixed::<4>(&self.stacked, k, delta, z, out, w),
            5 => apply_fixed::<5>(&self.stacked, k, delta, z, out, w),
            6 => apply_fixed::<6>(&self.stacked, k, delta, z, out, w),
            7 => apply_fixed::<7>(&self.stacked, k, delta, z, out, w),
            8 => apply_fixed::<8>(&self.stacked, k, delta, z, out, w),
            _ => apply_general(&self.stacked, self.n, k, delta, z, out, w),
        }
    }
}

/// Largest ‖M‖₁·|δ| for which e^{Mδ}·w is taken to first order,
/// w + δ·M·w: the second-order term is then below 2⁻⁵⁵ of w (the jitter
/// of a settled crossing, a few ulps of its time).
pub(crate) const FIRST_ORDER_REACH: f64 = 1.0 / (1u64 << 27) as f64;

/// Lengths served beyond first order by the nearer polynomial of a
/// [`NearAnchor`] after which the next one makes a new nearer polynomial
/// there: a converter that settles moves its lengths by a steady fraction
/// of their distance from where they settle each period, so a polynomial
/// about a recent length leaves few terms or first order, and a new one
/// (a sum of six small matrices and five products) is made at most every
/// this many lengths.
const RELOCATE: u32 = 32;

/// How [`NearAnchor::advance`] served a length.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Served {
    /// The length of a polynomial's own exponential: one product.
    Exact,
    /// From a polynomial (or to first order about its centre).
    Near,
    /// Not served: the polynomial could not vouch for the state (see
    /// [`NearExp::apply`]); `out` holds nothing of use.
    Refused,
}

/// A polynomial about a length h₀ from a fresh exponential, and one
/// nearer the lengths served lately, made from the first's (never from
/// another made so: its error does not accumulate).
#[derive(Clone, Debug)]
pub(crate) struct NearAnchor {
    /// About h₀, from a fresh exponential: its reach is the anchor's.
    pub(crate) base: NearExp,
    local: Option<NearExp>,
    /// Lengths served beyond first order since `local` was made.
    served: u32,
}

impl NearAnchor {
    /// An anchor at `base` alone.
    pub(crate) fn new(base: NearExp) -> NearAnchor {
        NearAnchor {
            base,
            local: None,
            served: 0,
        }
    }

    /// Whether `h` lies within reach of the base.
    #[inline(always)]
    pub(crate) fn serves(&self, h: f64) -> bool {
        self.base.serves(h)
    }

    /// A nearer polynomial at h, from the base's (h − h₀ is exact where
    /// the two lie within a factor of two, Sterbenz's lemma, else within
    /// half an ulp of h, the rounding of h itself), in the place of the
    /// one before: the same numbers as [`NearExp::from_phi`] of
    /// [`NearExp::matrix`], without allocating.
    #[inline(never)]
    fn relocate(&mut self, m: &DMatrix<f64>, h: f64) {
        let d = h - self.base.h0;
        match &mut self.local {
            Some(local) => local.remake(&self.base, m, h, d),
            None => self.local = Some(NearExp::from_phi(m, h, self.base.matrix(d))),
        }
        self.served = 0;
    }

    /// The polynomial nearer `h`: the one about a recent length where it
    /// serves `h`, else the base.
    #[inline(always)]
    pub(crate) fn nearer(&self, h: f64) -> &NearExp {
        self.local
            .as_ref()
            .filter(|l| l.serves(h))
            .unwrap_or(&self.base)
    }

    /// e^{M·h}·z into `out` for an `h` the base serves (M is `m`, `w`
    /// `Mode::weight`, `scratch` two vectors of z's length): one product
    /// at the centre of the nearer polynomial, first order within
    /// [`FIRST_ORDER_REACH`] of it, a new nearer polynomial at h after
    /// [`RELOCATE`] lengths beyond first order, else the nearer
    /// polynomial (which may refuse).
    #[inline(always)]
    pub(crate) fn advance(
        &mut self,
        m: &DMatrix<f64>,
        h: f64,
        (z, out): (&[f64], &mut [f64]),
        w: &[f64],
        (wz, mw): (&mut [f64], &mut [f64]),
    ) -> Served {
        let near = self.nearer(h);
        let d = h - near.h0;
        if d == 0.0 {
            propagate::matvec(&near.phi, z, out);
            return Served::Exact;
        }
        if (d * near.norm).abs() <= FIRST_ORDER_REACH {
            // P₀z and P₁z side by side (P₁ = M·e^{Mh₀}, stacked), not
            // M·(e^{Mh₀}z) after e^{Mh₀}z: two independent products on
            // the path from the state to the next one instead of a chain.
            near.first_order(d, z, (wz, mw), out);
            return Served::Near;
        }
        self.advance_far(m, h, (z, out), w)
    }

    /// [`NearAnchor::advance`] beyond first order, out of line.
    #[inline(never)]
    fn advance_far(
        &mut self,
        m: &DMatrix<f64>,
        h: f64,
        (z, out): (&[f64], &mut [f64]),
        w: &[f64],
    ) -> Served {
        let near = self.nearer(h);
        let d = h - near.h0;
        if self.served >= RELOCATE {
            // The lengths have moved on: a nearer polynomial at h, from
            // the base's (h − h₀ is exact where the two lie within a
            // factor of two, Sterbenz's lemma, else within half an ulp of
            // h, the rounding of h itself).
            self.relocate(m, h);
            let local = self.local.as_ref().expect("made above");
            propagate::matvec(&local.phi, z, out);
            return Served::Near;
        }
        let applied = near.apply(d, z, out, w);
        self.served += 1;
        if applied {
            Served::Near
        } else {
            Served::Refused
        }
    }
}

/// The vectors wₖ = Pₖz of a polynomial about a centre h₀, k = 0…K: the
/// state at h₀ + δ is Σₖ δᵏwₖ, and a row r of the state (a guard) has
/// Σₖ δᵏ(r·wₖ) there, a polynomial of K + 1 terms in δ where the Taylor
/// polynomial over a whole interval needs a dozen. From
/// [`NearAnchor::terms_near`].
#[derive(Clone, Copy, Debug)]
pub(crate) struct NearTerms {
    /// h₀.
    pub(crate) h0: f64,
    /// ‖M‖₁.
    pub(crate) norm: f64,
    /// K: the last term.
    pub(crate) last: usize,
}

impl NearTerms {
    /// Whether the terms serve h: ‖M‖₁·|h − h₀| within what K terms
    /// serve (first order within [`FIRST_ORDER_REACH`], as
    /// [`NearAnchor::advance`] takes it, else the bounds of
    /// [`last_term`]).
    #[inline(always)]
    pub(crate) fn serves(&self, h: f64) -> bool {
        terms_for((h - self.h0).abs() * self.norm) <= self.last
    }

    /// The state at h₀ + δ from the vectors `w` (K + 1 of z's length, as
    /// [`NearAnchor::terms_near`] left them) into `out`, by Horner's rule
    /// in δ; false where the last term is not negligible beside the state
    /// (see [`NearExp::apply`]; first order is taken as
    /// [`NearAnchor::advance`] takes it, unchecked), `out` then of no use.
    /// `scratch`: z's length.
    #[inline(always)]
    pub(crate) fn state(
        &self,
        w: &[f64],
        delta: f64,
        (out, scratch): (&mut [f64], &mut [f64]),
        wt: &[f64],
    ) -> bool {
        let n = out.len();
        let k = self.last;
        let term = |t: usize| &w[t * n..(t + 1) * n];
        if k == 1 {
            for ((o, &a), &b) in out.iter_mut().zip(term(0)).zip(term(1)) {
                *o = a + delta * b;
            }
            return true;
        }
        out.copy_from_slice(term(k));
        let mut dk = 1.0;
        for t in (0..k).rev() {
            for (o, &y) in out.iter_mut().zip(term(t)) {
                *o = *o * delta + y;
            }
            dk *= delta;
        }
        // The last term at δ, beside the state.
        for (l, &v) in scratch.iter_mut().zip(term(k)) {
            *l = v * dk;
        }
        last_negligible(scratch, out, wt)
    }
}

/// Terms a length at q = ‖M‖₁·|δ| from a centre needs: 1 (first order)
/// within [`FIRST_ORDER_REACH`], else [`last_term`].
#[inline(always)]
fn terms_for(q: f64) -> usize {
    if q <= FIRST_ORDER_REACH {
        1
    } else {
        last_term(q)
    }
}

impl NearAnchor {
    /// The vectors wₖ = Pₖz (k = 0…K, one after the other into `out`) of
    /// the polynomial nearer `h`, for lengths within `spread` of h: K is
    /// what the farthest of them needs ([`terms_for`]). Lengths served
    /// beyond first order count towards the next nearer polynomial as in
    /// [`NearAnchor::advance`], which is made here at h when due. `h`
    /// must lie within the base's reach.
    pub(crate) fn terms_near(
        &mut self,
        m: &DMatrix<f64>,
        h: f64,
        spread: f64,
        z: &[f64],
        out: &mut Vec<f64>,
    ) -> NearTerms {
        let near = self.nearer(h);
        let mut k = terms_for(((h - near.h0).abs() + spread) * near.norm);
        if k > 1 {
            if self.served >= RELOCATE {
                // As in `advance_far`: h − h₀ is exact or within half an
                // ulp of h.
                self.relocate(m, h);
                k = terms_for(spread * self.base.norm);
            }
            self.served += 1;
        }
        let near = self.nearer(h);
        let n = near.n;
        if out.len() < (k + 1) * n {
            out.resize(TERMS * n, 0.0);
        }
        match n {
            3 => products_fixed::<3>(&near.stacked, k, z, out),
            4 => products_fixed::<4>(&near.stacked, k, z, out),
            5 => products_fixed::<5>(&near.stacked, k, z, out),
            6 => products_fixed::<6>(&near.stacked, k, z, out),
            _ => {
                for (t, y) in out.chunks_exact_mut(n).enumerate().take(k + 1) {
                    block_product(&near.stacked[t * n * n..(t + 1) * n * n], z, y);
                }
            }
        }
        NearTerms {
            h0: near.h0,
            norm: near.norm,
            last: k,
        }
    }
}

/// [`NearExp::first_order`] for N entries of z: P₀z + δ·P₁z.
#[inline(always)]
fn first_order_fixed<const N: usize>(
    p0: &[f64],
    p1: &[f64],
    delta: f64,
    z: &[f64],
    out: &mut [f64],
) {
    let z: &[f64; N] = z.try_into().expect("z has N entries");
    let out: &mut [f64; N] = out.try_into().expect("out has N entries");
    let (a, b) = (block_product_fixed(p0, z), block_product_fixed(p1, z));
    for i in 0..N {
        out[i] = a[i] + delta * b[i];
    }
}

/// wₜ = Pₜz for t = 0…k into `out` (N entries each), as
/// [`apply_terms`] forms them.
#[inline(always)]
fn products_fixed<const N: usize>(stacked: &[f64], k: usize, z: &[f64], out: &mut [f64]) {
    let z: &[f64; N] = z.try_into().expect("z has N entries");
    for (t, y) in out.chunks_exact_mut(N).enumerate().take(k + 1) {
        y.copy_from_slice(&block_product_fixed(
            &stacked[t * N * N..(t + 1) * N * N],
            z,
        ));
    }
}

/// y = P·z for an N×N column-major block P, each entry summed over the
/// columns in order from +0, unrolled: the product of every polynomial
/// term here.
#[inline(always)]
fn block_product_fixed<const N: usize>(block: &[f64], z: &[f64; N]) -> [f64; N] {
    let mut y = [0.0f64; N];
    for (j, &zj) in z.iter().enumerate() {
        let col: &[f64; N] = block[j * N..(j + 1) * N]
            .try_into()
            .expect("a column of an N×N block has N entries");
        for i in 0..N {
            y[i] += col[i] * zj;
        }
    }
    y
}

/// [`block_product_fixed`] for any length of z (y's length), the same
/// operations in the same order.
#[inline(always)]
fn block_product(block: &[f64], z: &[f64], y: &mut [f64]) {
    let n = y.len();
    y.fill(0.0);
    for (j, &zj) in z.iter().enumerate() {
        for (yi, &c) in y.iter_mut().zip(&block[j * n..(j + 1) * n]) {
            *yi += c * zj;
        }
    }
}

/// Above these values of q = ‖M‖₁·|δ| the bound qᵏ/k! of term k is above
/// 1e-18 (k = 1 to 4): (1e-18·k!)^{1/k}, rounded down.
const TERM_BOUNDS: [f64; 4] = [1e-18, 1.414e-9, 1.817e-6, 6.999e-5];

/// The last term kept at q = ‖M‖₁·|δ|: the first k whose bound qᵏ/k! is
/// below 1e-18, 5 at most (q is at most [`NEAR_REACH`], where term 5 is
/// below 1e-20). Term k bounds the ones after it by a factor q/(k+1) each
/// (common practice for the exponential series), so they add less than
/// it does.
#[inline(always)]
fn last_term(q: f64) -> usize {
    TERM_BOUNDS
        .iter()
        .position(|&b| q <= b)
        .map_or(TERMS - 1, |i| i + 1)
}

impl NearExp {
    /// e^{M(h₀+δ)} for |δ| within [`NearExp::reach`], by Horner's rule on
    /// the terms: a few products of small matrices where a fresh
    /// exponential costs tens of thousands of operations. The first term
    /// left out is below 3e-25 of ‖e^{Mh₀}‖₁ (see [`NEAR_REACH`]), under
    /// the 5.4e-20 at which [`propagate::expm_shifted`] stops.
    pub(crate) fn matrix(&self, delta: f64) -> DMatrix<f64> {
        let mut out = DMatrix::<f64>::zeros(self.n, self.n);
        self.matrix_into(delta, out.as_mut_slice());
        out
    }

    /// [`NearExp::matrix`] into `out` (n×n, column-major).
    fn matrix_into(&self, delta: f64, out: &mut [f64]) {
        let nn = self.n * self.n;
        let block = |t: usize| &self.stacked[t * nn..(t + 1) * nn];
        out.copy_from_slice(block(TERMS - 1));
        for t in (0..TERMS - 1).rev() {
            for (x, &p) in out.iter_mut().zip(block(t)) {
                *x = *x * delta + p;
            }
        }
    }

    /// This polynomial made again about h from `base`'s
    /// ([`NearAnchor::relocate`]; `d` = h − base.h₀): the same products
    /// and quotients as [`NearExp::from_phi`], in place.
    fn remake(&mut self, base: &NearExp, m: &DMatrix<f64>, h: f64, d: f64) {
        let (n, nn) = (self.n, self.n * self.n);
        base.matrix_into(d, self.phi.as_mut_slice());
        self.h0 = h;
        self.stacked[..nn].copy_from_slice(self.phi.as_slice());
        for k in 1..TERMS {
            let (done, rest) = self.stacked.split_at_mut(k * nn);
            let prev = DMatrixView::from_slice(&done[(k - 1) * nn..], n, n);
            let mut next = DMatrixViewMut::from_slice(&mut rest[..nn], n, n);
            m.mul_to(&prev, &mut next);
            for x in next.iter_mut() {
                *x /= k as f64;
            }
        }
    }
}

/// [`NearExp::apply`] for N entries of z, up to term `k` (1 to 5; each
/// count its own unrolled loop).
#[inline(always)]
fn apply_fixed<const N: usize>(
    stacked: &[f64],
    k: usize,
    delta: f64,
    z: &[f64],
    out: &mut [f64],
    w: &[f64],
) -> bool {
    match k {
        1 => apply_terms::<N, 1>(stacked, delta, z, out, w),
        2 => apply_terms::<N, 2>(stacked, delta, z, out, w),
        3 => apply_terms::<N, 3>(stacked, delta, z, out, w),
        4 => apply_terms::<N, 4>(stacked, delta, z, out, w),
        _ => apply_terms::<N, 5>(stacked, delta, z, out, w),
    }
}

/// [`apply_fixed`] up to term K: x = P_K z, then x ← x·δ + Pₜz for
/// t = K−1 down to 0 (the products are independent of one another; only
/// the short chain of Horner's rule is not).
#[inline(always)]
fn apply_terms<const N: usize, const K: usize>(
    stacked: &[f64],
    delta: f64,
    z: &[f64],
    out: &mut [f64],
    w: &[f64],
) -> bool {
    let z: &[f64; N] = z.try_into().expect("z has N entries");
    let out: &mut [f64; N] = out.try_into().expect("out has N entries");
    let product = |t: usize| block_product_fixed(&stacked[t * N * N..(t + 1) * N * N], z);
    let last = product(K);
    let mut x = last;
    let mut dk = 1.0;
    for t in (0..K).rev() {
        let y = product(t);
        for i in 0..N {
            x[i] = x[i] * delta + y[i];
        }
        dk *= delta;
    }
    *out = x;
    let mut term = last;
    for t in term.iter_mut() {
        *t *= dk;
    }
    last_negligible(&term, out, w)
}

/// [`NearExp::apply`] for any length of z, up to term `k`.
fn apply_general(
    stacked: &[f64],
    n: usize,
    k: usize,
    delta: f64,
    z: &[f64],
    out: &mut [f64],
    w: &[f64],
) -> bool {
    let product =
        |t: usize, y: &mut [f64]| block_product(&stacked[t * n * n..(t + 1) * n * n], z, y);
    let mut last = vec![0.0; n];
    product(k, &mut last);
    out.copy_from_slice(&last);
    let mut y = vec![0.0; n];
    let mut dk = 1.0;
    for t in (0..k).rev() {
        product(t, &mut y);
        for (x, &yt) in out.iter_mut().zip(&y) {
            *x = *x * delta + yt;
        }
        dk *= delta;
    }
    for t in last.iter_mut() {
        *t *= dk;
    }
    last_negligible(&last, out, w)
}

/// Whether the last term kept is negligible beside the result: below
/// 1e-18 of its largest entry, and in energy units too (the stopping test
/// of the solver's Taylor series, `propagate::taylor_done`).
#[inline(always)]
fn last_negligible(term: &[f64], x: &[f64], w: &[f64]) -> bool {
    let tn = term.iter().fold(0.0, |a, v| larger(a, v.abs()));
    if tn == 0.0 {
        return true;
    }
    let sn = x.iter().fold(0.0, |a, v| larger(a, v.abs()));
    tn <= sn * 1e-18 && propagate::negligible_in_energy(term, x, w)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The polynomial about h₀ gives e^{M(h₀+δ)}z as a fresh exponential
    /// of h₀ + δ does, to 1e-14 of the state, for offsets of either sign
    /// up to its reach (the semigroup property e^{M(a+b)} = e^{Ma}e^{Mb}
    /// and the Taylor series of e^{Mδ}; common practice), at a size with
    /// a fixed kernel and one without.
    #[test]
    fn near_lengths_match_fresh_exponentials() {
        for n in [3usize, 11] {
            // A damped chain: states coupled to their neighbours, the last
            // entry a constant input.
            let mut m = DMatrix::<f64>::zeros(n, n);
            for i in 0..n - 1 {
                m[(i, i)] = -2.0e3 * (i + 1) as f64;
                if i + 1 < n - 1 {
                    m[(i, i + 1)] = 5.0e4;
                    m[(i + 1, i)] = -5.0e4;
                }
                m[(i, n - 1)] = 1.0e3;
            }
            let z: Vec<f64> = (0..n).map(|i| 0.5 - 0.1 * i as f64).collect();
            let h0 = 3.1e-6;
            let near = NearExp::new(&m, h0);
            let w = vec![1.0; n - 1];
            for f in [-1.0, -0.37, 1e-9, 0.5, 1.0] {
                let d = f * near.reach;
                let mut out = vec![0.0; n];
                assert!(near.apply(d, &z, &mut out, &w), "n = {n}, δ = {d:e}");
                let e = propagate::expm(&m, h0 + d);
                let mut want = vec![0.0; n];
                propagate::matvec(&e, &z, &mut want);
                let scale = want.iter().fold(0.0f64, |a, v| a.max(v.abs()));
                for (a, b) in out.iter().zip(&want) {
                    assert!(
                        (a - b).abs() <= 1e-14 * scale,
                        "n = {n}, δ = {d:e}: {a} vs {b}"
                    );
                }
            }
        }
    }

    /// Each bound of the table keeps its term under 1e-18 and the one
    /// before it above (qᵏ/k!, the bound of term k of the exponential
    /// series; common practice), and the reach needs five terms at most.
    #[test]
    fn the_last_term_is_the_first_below_the_floor() {
        let fact = [1.0, 1.0, 2.0, 6.0, 24.0, 120.0];
        for (i, &b) in TERM_BOUNDS.iter().enumerate() {
            let k = i + 1;
            assert!(b.powi(k as i32) / fact[k] <= 1e-18, "term {k} at {b:e}");
            let above = b * 1.001;
            assert_eq!(last_term(above), k + 1, "just above the bound of {k}");
            assert_eq!(last_term(b), k);
            if k > 1 {
                assert!(above.powi(k as i32 - 1) / fact[k - 1] > 1e-18);
            }
        }
        assert!(NEAR_REACH.powi(5) / fact[5] <= 1e-20);
        assert_eq!(last_term(NEAR_REACH), 5);
        assert_eq!(last_term(0.0), 1);
    }

    /// The matrix of a nearby length equals a fresh exponential of it to
    /// 1e-14 of its norm (the series of e^{Mδ}; common practice), and
    /// applied to a state it gives what the polynomial gives.
    #[test]
    fn the_matrix_of_a_near_length_is_its_exponential() {
        let m = DMatrix::from_row_slice(
            3,
            3,
            &[-50.0, -1.0e4, 1.0e4, 1.0e5, -2.0e3, 0.0, 0.0, 0.0, 0.0],
        );
        let near = NearExp::new(&m, 2.7e-6);
        for f in [-1.0, 0.3, 1e-7, 1.0] {
            let d = f * near.reach;
            let got = near.matrix(d);
            let want = propagate::expm(&m, 2.7e-6 + d);
            let scale = propagate::norm1(&want);
            assert!((&got - &want).abs().max() <= 1e-14 * scale, "δ = {d:e}");
            let z = [0.4, 7.5, 1.0];
            let (mut a, mut b) = ([0.0; 3], [0.0; 3]);
            assert!(near.apply(d, &z, &mut a, &[1e-2, 1e-2]));
            propagate::matvec(&got, &z, &mut b);
            for (x, y) in a.iter().zip(&b) {
                assert!((x - y).abs() <= 1e-14 * y.abs().max(1.0), "{x} vs {y}");
            }
        }
    }

    /// A nearer polynomial made again in place of the one before holds
    /// the numbers of one made afresh from the base's matrix, to the bit,
    /// at the sizes with a kernel of their own and one without (the same
    /// operations in the same order; nothing to cite).
    #[test]
    fn a_polynomial_remade_in_place_is_the_one_made_afresh() {
        for n in [3usize, 9] {
            let mut m = DMatrix::<f64>::zeros(n, n);
            for i in 0..n - 1 {
                m[(i, i)] = -3.0e3 * (i + 1) as f64;
                m[(i, (i + 1) % (n - 1))] += 4.0e4;
                m[((i + 1) % (n - 1), i)] -= 4.0e4;
                m[(i, n - 1)] = 2.0e3;
            }
            let mut anchor = NearAnchor::new(NearExp::new(&m, 1.9e-6));
            let reach = anchor.base.reach;
            for f in [0.25, -0.5, 0.75] {
                let h = 1.9e-6 + f * reach;
                anchor.relocate(&m, h);
                let local = anchor.local.as_ref().expect("made");
                let fresh = NearExp::from_phi(&m, h, anchor.base.matrix(h - anchor.base.h0));
                assert_eq!(local.h0.to_bits(), fresh.h0.to_bits());
                assert!(local
                    .phi
                    .iter()
                    .zip(fresh.phi.iter())
                    .all(|(a, b)| a.to_bits() == b.to_bits()));
                assert!(local
                    .stacked
                    .iter()
                    .zip(&fresh.stacked)
                    .all(|(a, b)| a.to_bits() == b.to_bits()));
            }
        }
    }

    /// An anchor that follows lengths settling geometrically toward a
    /// value (a tenth of the reach off the base, the gap halving every
    /// 40 lengths) gives e^{Mh}z as a fresh exponential of h does, to
    /// 1e-14 of the state, at every length (the semigroup property;
    /// common practice); it makes nearer polynomials on the way, and
    /// once the lengths move by less than first order from one of them,
    /// serves them to first order from it.
    #[test]
    fn an_anchor_follows_settling_lengths() {
        let m = DMatrix::from_row_slice(
            3,
            3,
            &[-50.0, -1.0e4, 1.0e4, 1.0e5, -2.0e3, 0.0, 0.0, 0.0, 0.0],
        );
        let h0 = 2.7e-6;
        let mut anchor = NearAnchor::new(NearExp::new(&m, h0));
        let settle = h0 + 0.1 * anchor.base.reach;
        let z = [0.4, 7.5, 1.0];
        let (mut wz, mut mw) = ([0.0; 3], [0.0; 3]);
        let mut made = 0;
        let mut first_order = 0;
        for k in 0..2000 {
            let h = settle - 0.1 * anchor.base.reach * 0.5f64.powf(k as f64 / 40.0);
            let before = anchor.local.as_ref().map(|l| l.h0);
            let mut out = [0.0; 3];
            let served = anchor.advance(&m, h, (&z, &mut out), &[1e-2, 1e-2], (&mut wz, &mut mw));
            assert_ne!(served, Served::Refused, "length {k}");
            if anchor.local.as_ref().map(|l| l.h0) != before {
                made += 1;
            } else if (h - anchor.nearer(h).h0).abs() * anchor.base.norm <= FIRST_ORDER_REACH {
                first_order += 1;
            }
            let mut want = [0.0; 3];
            propagate::matvec(&propagate::expm(&m, h), &z, &mut want);
            for (x, y) in out.iter().zip(&want) {
                assert!(
                    (x - y).abs() <= 1e-14 * y.abs().max(1.0),
                    "length {k}: {x} vs {y}"
                );
            }
        }
        assert!(made >= 5, "{made} nearer polynomials");
        assert!(first_order > 1000, "{first_order} lengths to first order");
    }

    /// The check in energy units refuses what the largest entry alone
    /// would pass: a state tiny in value but weighted 1e30 times the
    /// other (as √L·i beside √C·v when impedances are scaled far apart)
    /// gets from the last term more than 1e-18 of its energy-weighted
    /// size, and the caller is told to take the Taylor path.
    #[test]
    fn a_badly_scaled_state_is_refused() {
        let m = DMatrix::from_row_slice(2, 2, &[0.0, 1.0e6, -1.0e6, 0.0]);
        let near = NearExp::new(&m, 1e-15);
        let mut out = [0.0; 2];
        // In units of the largest entry the last term is negligible; the
        // second state, weighted 1e30 times the first, is tiny in value
        // but not in energy.
        let z = [1.0, 1e-20];
        let ok = near.apply(near.reach, &z, &mut out, &[1.0, 1e30]);
        assert!(!ok, "{out:?}");
        assert!(near.apply(near.reach, &z, &mut out, &[1.0, 1.0]));
    }
}
