//! Exact propagation of `z' = M z`: cached matrix exponentials for the
//! interval lengths a schedule repeats, and a Taylor expansion for short
//! sub-intervals inside an interval (event location, dense output).
//!
//! The Taylor expansion is used only over lengths τ with ρ·τ ≤ 1/2, where ρ
//! bounds the rate of the fastest dynamics (see `Mode::rate`); with terms
//! kept until they fall below 2⁻⁶⁰ of the sum, the truncation error is far
//! below one unit in the last place, so this is as exact as the matrix
//! exponential itself (nalgebra's `exp`, Al-Mohy & Higham, SIAM J. Matrix
//! Anal. Appl. 2009).
//!
//! Stiff spans: where that rule would need more than [`STIFF_SUBSTEPS`]
//! sub-steps (a decaying mode far faster than the span, e.g. 1 fH behind
//! 1 Ω), the span is advanced by one matrix exponential instead
//! ([`expm`]: scaling and squaring, with the scaling done here in exact
//! powers of two where ‖Mτ‖ is too large for nalgebra's own). Ordinary
//! spans need one to a few sub-steps and keep the Taylor path and its
//! bits.

use nalgebra::{DMatrix, DVector};

/// Largest ρ·τ over which one Taylor expansion is used.
pub(crate) const TAYLOR_REACH: f64 = 0.5;

/// More Taylor sub-steps than this over one span: advance it by one
/// matrix exponential instead (see the module docs). No example circuit
/// comes near it (their spans need one to a few sub-steps), so their bits
/// do not depend on it.
pub(crate) const STIFF_SUBSTEPS: usize = 64;

/// Number of sub-intervals so that each has ρ·τ ≤ [`TAYLOR_REACH`].
pub(crate) fn substeps(rate: f64, tau: f64) -> usize {
    let x = rate * tau / TAYLOR_REACH;
    // The usual case without the call to `ceil`.
    if x <= 1.0 {
        return 1;
    }
    let s = x.ceil();
    if s.is_finite() && s >= 1.0 {
        (s as usize).min(1 << 20)
    } else {
        1
    }
}

/// −Re λ·τ past which a component e^{λτ} counts as dead (see `run/locate.rs`).
pub(crate) const DEAD: f64 = 60.0;

/// Phase error (rad) an oscillation may accumulate over a stiff span in
/// f64 arithmetic and time (ε·|Im λ|·max(h, t)) before the run refuses it.
pub(crate) const PHASE_LIMIT: f64 = 1e-6;

/// A mode's eigenvalues as stiff spans need them.
#[derive(Debug)]
pub(crate) struct Spectrum {
    /// (−Re λ, |λ|, |Im λ|) of each eigenvalue, fastest decay first.
    eig: Vec<(f64, f64, f64)>,
    /// Per index k: max |λ| over `eig[k..]` (0 past the end).
    alive_max: Vec<f64>,
    /// max |λ|.
    top: f64,
}

impl Spectrum {
    /// The eigenvalues of `m` (real Schur form), or `None` where they
    /// cannot be trusted: the iteration fails, a value is not finite,
    /// their sum is not the trace (to 1e-8 of Σ|λ|), or a mode grows
    /// faster than the span's slow dynamics could bound.
    pub(crate) fn of(m: &DMatrix<f64>) -> Option<Spectrum> {
        let ev = eigenvalues(m)?;
        let sum: f64 = ev.iter().map(|c| c.re).sum();
        let abs: f64 = ev.iter().map(|c| c.norm()).sum();
        if !abs.is_finite() || (sum - m.trace()).abs() > 1e-8 * abs + f64::MIN_POSITIVE {
            return None;
        }
        let mut eig: Vec<(f64, f64, f64)> =
            ev.iter().map(|c| (-c.re, c.norm(), c.im.abs())).collect();
        let top = eig.iter().map(|e| e.1).fold(0.0, f64::max);
        // A growing mode as fast as the fastest: nothing to gain, and its
        // growth is what the Taylor rule's bound is for.
        if eig.iter().any(|e| e.0 < 0.0 && -e.0 > 1e-3 * top) {
            return None;
        }
        eig.sort_by(|a, b| b.0.total_cmp(&a.0));
        let mut alive_max = vec![0.0f64; eig.len() + 1];
        for k in (0..eig.len()).rev() {
            alive_max[k] = alive_max[k + 1].max(eig[k].1);
        }
        Some(Spectrum {
            eig,
            alive_max,
            top,
        })
    }

    /// How far into a span every eigenvalue of non-zero size has died
    /// (−Re λ·τ ≥ [`DEAD`]): `DEAD` over the slowest decay among them; ∞
    /// where one of them does not decay, 0 where there is none. Beyond it
    /// the state's deviation from its equilibrium is below rounding of
    /// what it was at the start, by the rule the scan of a stiff span
    /// already steps by, so a bound on its growth need only cover this
    /// long (`crate::envelope`).
    pub(crate) fn settled_after(&self) -> f64 {
        let slowest = self
            .eig
            .iter()
            .filter(|e| e.1 > 0.0)
            .map(|e| e.0)
            .fold(f64::INFINITY, f64::min);
        if slowest > 0.0 {
            DEAD / slowest
        } else {
            f64::INFINITY
        }
    }

    /// max |λ| over the eigenvalues still alive τ into a span.
    pub(crate) fn alive_rate(&self, tau: f64) -> f64 {
        let k = self.eig.partition_point(|e| e.0 * tau >= DEAD);
        self.alive_max[k]
    }

    /// The sub-interval length at τ into a span: δ₀·2ʲ (δ₀ = 1/(2·top)),
    /// the longest with (alive rate)·δ ≤ 1/2; ∞ when nothing is alive.
    pub(crate) fn step_at(&self, tau: f64) -> f64 {
        let r = self.alive_rate(tau);
        if r <= 0.0 {
            return f64::INFINITY;
        }
        let d0 = TAYLOR_REACH / self.top;
        let j = (self.top / r).log2().floor().clamp(0.0, 1000.0) as i32;
        let mut d = d0;
        let mut left = j;
        while left > 0 {
            let k = left.min(512);
            d *= 2f64.powi(k);
            left -= k;
        }
        d
    }

    /// How many sub-intervals [`Spectrum::step_at`] cuts `[from, from +
    /// width]` into (τ measured from the span's start), counted stretch by
    /// stretch between the instants where an eigenvalue dies, without
    /// walking them: within one per stretch of what the walk makes.
    /// `∞` when the count is beyond what a walk could finish.
    pub(crate) fn pieces(&self, from: f64, width: f64) -> f64 {
        let end = from + width;
        let mut tau = from;
        let mut count = 0.0;
        // Deaths in increasing τ: `eig` is sorted by decreasing decay.
        let deaths = self
            .eig
            .iter()
            .filter(|e| e.0 > 0.0)
            .map(|e| DEAD / e.0)
            .chain(std::iter::once(f64::INFINITY));
        for death in deaths {
            if death <= tau {
                continue;
            }
            let stop = death.min(end);
            // The step is the same all through the stretch; read it inside
            // (at `tau` itself rounding may still count the eigenvalue
            // that just died as alive).
            let inside = if stop.is_finite() {
                tau + 0.5 * (stop - tau)
            } else {
                f64::INFINITY
            };
            let d = self.step_at(inside);
            count += ((stop - tau) / d).ceil().max(1.0);
            tau = stop;
            if tau >= end {
                break;
            }
        }
        if count.is_finite() {
            count
        } else {
            f64::INFINITY
        }
    }

    /// The fastest oscillation that stays alive over a span of length `h`
    /// ending at `t_end` and whose phase f64 cannot follow there (error
    /// ε·|Im λ|·max(h, t_end) above [`PHASE_LIMIT`]): its |Im λ|.
    pub(crate) fn unresolved(&self, h: f64, t_end: f64) -> Option<f64> {
        self.eig
            .iter()
            .filter(|e| e.0 * h < DEAD)
            .map(|e| e.2)
            .filter(|w| f64::EPSILON * w * h.max(t_end) > PHASE_LIMIT)
            .reduce(f64::max)
    }
}

/// D⁻¹MD with D diagonal, of powers of two (exact), such that each
/// state's couplings in and out weigh the same (B. N. Parlett &
/// C. Reinsch, "Balancing a matrix for calculation of eigenvalues and
/// eigenvectors", Numer. Math. 1969). Without it the Schur iteration
/// misses ±1.5e152i in a matrix holding 1e300 beside 2e4 (an inductance of
/// 1e-300 H across a capacitor) and reports a slow real decay instead.
/// The eigenvalues of a square matrix by the real Schur form of its
/// balanced copy (a diagonal similarity by powers of two, exact in
/// floating point), with a bound on the iterations: `None` if the
/// iteration does not converge within 10,000 steps, or a value is not
/// finite, rather than looping for ever.
pub fn eigenvalues(m: &DMatrix<f64>) -> Option<Vec<nalgebra::Complex<f64>>> {
    let schur = nalgebra::linalg::Schur::try_new(balanced(m), f64::EPSILON, 10_000)?;
    let ev: Vec<_> = schur.complex_eigenvalues().iter().copied().collect();
    ev.iter()
        .all(|c| c.re.is_finite() && c.im.is_finite())
        .then_some(ev)
}

fn balanced(m: &DMatrix<f64>) -> DMatrix<f64> {
    balancing(m).0
}

/// The balanced copy D⁻¹·M·D of `m` and the diagonal of D (powers of two,
/// so the similarity is exact in floating point; see [`eigenvalues`]).
pub(crate) fn balancing(m: &DMatrix<f64>) -> (DMatrix<f64>, Vec<f64>) {
    let n = m.nrows();
    let mut a = m.clone();
    let mut d = vec![1.0; n];
    for _ in 0..100 {
        let mut changed = false;
        for i in 0..n {
            let c: f64 = (0..n).filter(|&j| j != i).map(|j| a[(j, i)].abs()).sum();
            let r: f64 = (0..n).filter(|&j| j != i).map(|j| a[(i, j)].abs()).sum();
            if !(c > 0.0 && r > 0.0 && c.is_finite() && r.is_finite()) {
                continue;
            }
            let e = (0.5 * (r / c).log2()).round();
            if !e.is_finite() || e.abs() < 1.0 {
                continue;
            }
            let e = e.clamp(-1000.0, 1000.0) as i32;
            // Scale in two halves so no factor overflows.
            let (f1, f2) = (2f64.powi(e / 2), 2f64.powi(e - e / 2));
            for j in 0..n {
                a[(j, i)] = a[(j, i)] * f1 * f2;
                a[(i, j)] = a[(i, j)] / f1 / f2;
            }
            d[i] = d[i] * f1 * f2;
            changed = true;
        }
        if !changed {
            break;
        }
    }
    (a, d)
}

/// The sizes of `x`'s states (its first `w.len()` entries) in their own
/// units: the largest |wᵢ·xᵢ| over the circuit states (wᵢ > 0: √L or √C,
/// so in units of the square root of energy), and the largest |xᵢ| over
/// the states that hold no energy (wᵢ = 0: oscillators, compensators).
#[inline]
fn sizes(x: &[f64], w: &[f64]) -> (f64, f64) {
    x.iter().zip(w).fold((0.0f64, 0.0f64), |(e, o), (v, wi)| {
        if *wi > 0.0 {
            (larger(e, (v * wi).abs()), o)
        } else {
            (e, larger(o, v.abs()))
        }
    })
}

/// The larger of `m` and `v`, `m` where `v` is NaN: `f64::max` where `m`
/// is not NaN (every caller starts from 0 and takes absolute values), in
/// one instruction where `f64::max`'s handling of a NaN `m` takes four.
#[inline(always)]
pub(crate) fn larger(m: f64, v: f64) -> f64 {
    if v > m {
        v
    } else {
        m
    }
}

/// Whether a Taylor term that is already below 1e-18 of the state's
/// largest entry is negligible for every state too: its circuit states
/// weighted by their energy scales `w` below 1e-18 of the reference's,
/// and its other states below 1e-18 of the reference's others (see
/// [`sizes`]). The largest entry alone mixes units: with every impedance
/// ×1e12 the currents are 1e-12 of the voltages and kept only 1e-6 of
/// their own digits (1e-8 in the interrupted-inductor example); weighted,
/// √L·i and √C·v scale alike. A compensator's states have units of their
/// own realisation: in one weighted group with the circuit's, its states
/// of 5e-13 (the voltage-mode buck with impedances ×1.3e-10 and times
/// ×1.1e-8) kept only 1e-6 of their digits against the inductor's 0.46,
/// which moved its comparator's turn-off by 2.7e-11 of a period.
#[inline]
pub(crate) fn negligible_in_energy(term: &[f64], reference: &[f64], w: &[f64]) -> bool {
    let ((te, to), (re, ro)) = (sizes(term, w), sizes(reference, w));
    te <= 1e-18 * re && to <= 1e-18 * ro
}

/// Taylor vectors wₖ = Mᵏ z / k!·τᵏ, so that e^{Mτ} z = Σ wₖ; stops when a
/// term is negligible (in the largest entry and in energy units, see
/// [`negligible_in_energy`]; `w`: `Mode::weight`). Returns the sum.
pub(crate) fn taylor(m: &DMatrix<f64>, w: &[f64], z: &DVector<f64>, tau: f64) -> DVector<f64> {
    let mut sum = z.clone();
    let mut term = z.clone();
    let mut next = DVector::zeros(z.len());
    for k in 1..60 {
        matvec(m, term.as_slice(), next.as_mut_slice());
        next *= tau / k as f64;
        std::mem::swap(&mut term, &mut next);
        sum += &term;
        let tn = amax(term.as_slice());
        if tn == 0.0
            || (k >= 3
                && tn <= amax(sum.as_slice()) * 1e-18
                && negligible_in_energy(term.as_slice(), sum.as_slice(), w))
        {
            break;
        }
    }
    sum
}

/// e^{Mτ} z over any τ ≥ 0, by as many Taylor sub-steps as the rate needs.
pub(crate) fn advance(
    m: &DMatrix<f64>,
    w: &[f64],
    rate: f64,
    z: &DVector<f64>,
    tau: f64,
) -> DVector<f64> {
    if tau == 0.0 {
        return z.clone();
    }
    let n = substeps(rate, tau);
    if n > STIFF_SUBSTEPS {
        return expm(m, tau) * z;
    }
    let d = tau / n as f64;
    let mut x = z.clone();
    for _ in 0..n {
        x = taylor(m, w, &x, d);
    }
    x
}

/// Taylor terms wₖ = (Mδ)ᵏ z / k! over one sub-interval of length δ (with
/// ρ·δ ≤ [`TAYLOR_REACH`]), so that e^{Mδσ} z = Σ wₖ σᵏ for σ ∈ [0, 1].
/// A guard r·z(σ) is then the polynomial Σ (r·wₖ) σᵏ. Only the first
/// `live` rows of M may be non-zero (see `Mode::live`); `w` weighs the
/// states for the stopping test (see [`negligible_in_energy`]).
pub(crate) fn taylor_terms(
    m: &DMatrix<f64>,
    w: &[f64],
    live: usize,
    z: &DVector<f64>,
    delta: f64,
    out: &mut TaylorTerms,
) {
    let n = z.len();
    out.n = n;
    let d = &mut out.data;
    // Room for every term the loop below may make, once: no growth inside.
    if d.len() < 60 * n {
        d.resize(60 * n, 0.0);
    }
    d[..n].copy_from_slice(z.as_slice());
    let scale = amax(z.as_slice());
    let mut len = 1;
    for k in 1..60 {
        let (done, rest) = d.split_at_mut(k * n);
        let y = &mut rest[..n];
        let f = delta / k as f64;
        let tn = matvec_scaled(m, live, &done[(k - 1) * n..], y, f);
        len = k + 1;
        // In energy units against the larger of z and the first term (z
        // may be at rest, its states all zero).
        if tn == 0.0
            || (k >= 3 && tn <= scale * 1e-18 && {
                let (te, to) = sizes(y, w);
                let ((ae, ao), (be, bo)) = (sizes(&done[..n], w), sizes(&done[n..2 * n], w));
                te <= 1e-18 * ae.max(be) && to <= 1e-18 * ao.max(bo)
            })
        {
            break;
        }
    }
    out.len = len;
}

/// Largest magnitude (0 for an empty slice).
fn amax(x: &[f64]) -> f64 {
    x.iter().fold(0.0, |a, v| larger(a, v.abs()))
}

/// y = M x where only the first `live` rows of M may be non-zero. Row for
/// row the same operations in the same order as [`matvec`] (the first
/// term is added to +0 as there), so the results are the same bits; rows
/// past `live` come out as +0 either way.
#[inline(always)]
fn matvec_rows(m: &DMatrix<f64>, live: usize, x: &[f64], y: &mut [f64]) {
    let n = m.nrows();
    let data = m.as_slice();
    // Fixed sizes unroll completely (no loop counters or bounds checks);
    // converters mostly have 3 to 12 entries in z (each switch with a
    // transition model adds two: its ramp value and slope).
    match n {
        3 => return fixed::<3>(data, x, y),
        4 => return fixed::<4>(data, x, y),
        5 => return fixed::<5>(data, x, y),
        6 => return fixed::<6>(data, x, y),
        7 => return fixed::<7>(data, x, y),
        8 => return fixed::<8>(data, x, y),
        9 => return compact::<9>(data, x, y),
        10 => return compact::<10>(data, x, y),
        11 => return compact::<11>(data, x, y),
        12 => return compact::<12>(data, x, y),
        13 => return wide::<13>(data, x, y),
        14 => return wide::<14>(data, x, y),
        15 => return wide::<15>(data, x, y),
        16 => return wide::<16>(data, x, y),
        17 => return wide::<17>(data, x, y),
        18 => return wide::<18>(data, x, y),
        19 => return wide::<19>(data, x, y),
        20 => return wide::<20>(data, x, y),
        _ => {}
    }
    let (head, tail) = y.split_at_mut(live);
    for v in tail.iter_mut() {
        *v = 0.0;
    }
    let mut started = false;
    for (j, &xj) in x.iter().enumerate() {
        if xj != 0.0 {
            let col = &data[j * n..j * n + live];
            if started {
                for (yi, &mij) in head.iter_mut().zip(col) {
                    *yi += mij * xj;
                }
            } else {
                for (yi, &mij) in head.iter_mut().zip(col) {
                    *yi = 0.0 + mij * xj;
                }
                started = true;
            }
        }
    }
    if !started {
        for yi in head.iter_mut() {
            *yi = 0.0;
        }
    }
}

/// y = (M x)·f (each entry summed, then scaled, as a product followed by a
/// scaling would); returns the largest |yᵢ|. `f` must be positive.
#[inline(always)]
fn matvec_scaled(m: &DMatrix<f64>, live: usize, x: &[f64], y: &mut [f64], f: f64) -> f64 {
    let data = m.as_slice();
    match m.nrows() {
        3 => return scaled_fixed::<3>(data, x, y, f),
        4 => return scaled_fixed::<4>(data, x, y, f),
        5 => return scaled_fixed::<5>(data, x, y, f),
        6 => return scaled_fixed::<6>(data, x, y, f),
        7 => return scaled_fixed::<7>(data, x, y, f),
        8 => return scaled_fixed::<8>(data, x, y, f),
        9 => return scaled_compact::<9>(data, x, y, f),
        10 => return scaled_compact::<10>(data, x, y, f),
        11 => return scaled_compact::<11>(data, x, y, f),
        12 => return scaled_compact::<12>(data, x, y, f),
        _ => {}
    }
    matvec_rows(m, live, x, y);
    let mut tn: f64 = 0.0;
    for yi in y[..live].iter_mut() {
        *yi *= f;
        tn = larger(tn, yi.abs());
    }
    tn
}

#[inline(always)]
fn scaled_fixed<const N: usize>(data: &[f64], x: &[f64], y: &mut [f64], f: f64) -> f64 {
    fixed::<N>(data, x, y);
    let mut tn: f64 = 0.0;
    for yi in y.iter_mut() {
        *yi *= f;
        tn = larger(tn, yi.abs());
    }
    tn
}

/// [`fixed`] for 9 to 12 entries (switches with transition models add two
/// each): the same operations in the same order, so the same bits, with
/// the loop over columns kept as a loop. Fully unrolled at every call
/// site, as the smaller sizes are, these made the hot code of such a
/// circuit outgrow the instruction cache.
#[inline(always)]
fn compact<const N: usize>(data: &[f64], x: &[f64], y: &mut [f64]) {
    columns::<N, false>(data, x, y)
}

/// [`compact`] for 13 to 20 entries (a twelve-phase converter has 17):
/// every column, zero or not, so that the loop has no branch and its sums
/// stay in registers. A zero entry of x adds a signed zero to each sum, which
/// changes none (a sum that starts at +0 never becomes −0), so the bits
/// are those of [`compact`]; the branch and the column-by-column slices
/// of the general loop cost 1,500 instructions a product at 17 entries.
#[inline(never)]
fn wide<const N: usize>(data: &[f64], x: &[f64], y: &mut [f64]) {
    columns::<N, true>(data, x, y)
}

/// y = M x column by column for an N×N matrix: every column if `EVERY`
/// ([`wide`]), else those of the non-zero entries of x ([`compact`]).
/// On a processor with AVX the same loop runs four rows to an instruction
/// instead of two ([`columns_avx`]): multiplications and additions, never
/// fused, in the same order, so the same bits on every processor.
#[inline(always)]
fn columns<const N: usize, const EVERY: bool>(data: &[f64], x: &[f64], y: &mut [f64]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: `columns_avx` needs AVX alone, which the processor was
        // just found to have.
        return unsafe { columns_avx::<N, EVERY>(data, x, y) };
    }
    columns_plain::<N, EVERY>(data, x, y)
}

/// [`columns_plain`] compiled for AVX (256-bit vectors, no fused
/// multiply–add, so the operations and their rounding are those of the
/// plain build).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
fn columns_avx<const N: usize, const EVERY: bool>(data: &[f64], x: &[f64], y: &mut [f64]) {
    columns_plain::<N, EVERY>(data, x, y)
}

/// The loop of [`columns`].
#[inline(always)]
fn columns_plain<const N: usize, const EVERY: bool>(data: &[f64], x: &[f64], y: &mut [f64]) {
    let y: &mut [f64; N] = y.try_into().expect("y has as many entries as M has rows");
    let mut acc = [0.0f64; N];
    if EVERY {
        let x: &[f64; N] = x
            .try_into()
            .expect("x has as many entries as M has columns");
        let data: &[f64] = &data[..N * N];
        for (col, &xj) in data.chunks_exact(N).zip(x) {
            let col: &[f64; N] = col.try_into().expect("chunks of N");
            for i in 0..N {
                acc[i] += col[i] * xj;
            }
        }
    } else {
        // Runtime-length slices: the compiler keeps the column loop rolled.
        for (col, &xj) in data.chunks_exact(N).zip(x) {
            if xj != 0.0 {
                let col: &[f64; N] = col.try_into().expect("chunks of N");
                for i in 0..N {
                    acc[i] += col[i] * xj;
                }
            }
        }
    }
    *y = acc;
}

#[inline(always)]
fn scaled_compact<const N: usize>(data: &[f64], x: &[f64], y: &mut [f64], f: f64) -> f64 {
    compact::<N>(data, x, y);
    let mut tn: f64 = 0.0;
    for yi in y.iter_mut() {
        *yi *= f;
        tn = larger(tn, yi.abs());
    }
    tn
}

/// y = M x for an N×N matrix, all rows (rows that are zero in M give +0).
#[inline(always)]
fn fixed<const N: usize>(data: &[f64], x: &[f64], y: &mut [f64]) {
    let x: &[f64; N] = x
        .try_into()
        .expect("z has as many entries as M has columns");
    let y: &mut [f64; N] = y.try_into().expect("y has as many entries as M has rows");
    let mut acc = [0.0f64; N];
    for (j, &xj) in x.iter().enumerate() {
        if xj != 0.0 {
            let col: &[f64; N] = data[j * N..(j + 1) * N]
                .try_into()
                .expect("a column of an N×N matrix has N entries");
            for i in 0..N {
                acc[i] += col[i] * xj;
            }
        }
    }
    *y = acc;
}

/// Taylor terms kept between calls so that their vectors are reused.
#[derive(Clone, Debug, Default)]
pub(crate) struct TaylorTerms {
    /// Term k is `data[k·n..(k+1)·n]`.
    data: Vec<f64>,
    n: usize,
    len: usize,
}

impl TaylorTerms {
    /// The terms of the last expansion, in order.
    pub(crate) fn terms(&self) -> std::slice::ChunksExact<'_, f64> {
        self.data[..self.len * self.n].chunks_exact(self.n.max(1))
    }

    /// The state Σ wₖ σᵏ at σ ∈ [0, 1] of the sub-interval (Horner in σ),
    /// into `out`.
    pub(crate) fn state_at(&self, sigma: f64, out: &mut [f64]) {
        out.fill(0.0);
        for w in self.terms().rev() {
            for (x, &wi) in out.iter_mut().zip(w) {
                *x = *x * sigma + wi;
            }
        }
    }
}

/// Evaluates Σ cₖ σᵏ and its derivative. The value is [`poly_value`]'s
/// (the same bits); the derivative's coefficients (k+1)·cₖ₊₁ are evaluated
/// the same way.
pub(crate) fn poly(c: &[f64], s: f64) -> (f64, f64) {
    (poly_value(c, s), poly_slope(c, s))
}

/// The derivative of Σ cₖ σᵏ at σ alone, as [`poly`] gives it (the same
/// bits).
#[inline]
pub(crate) fn poly_slope(c: &[f64], s: f64) -> f64 {
    let Some(d) = c.get(1..) else {
        return 0.0;
    };
    let u = s * s;
    let mut i = d.len();
    let (mut e, mut o) = (0.0, 0.0);
    if i % 2 == 1 {
        i -= 1;
        e = (i + 1) as f64 * d[i];
    }
    while i >= 2 {
        i -= 2;
        e = e * u + (i + 1) as f64 * d[i];
        o = o * u + (i + 2) as f64 * d[i + 1];
    }
    e + s * o
}

/// Evaluates Σ cₖ σᵏ as E(σ²) + σ·O(σ²), E and O the even and odd parts
/// (two Horner chains in σ², each half as long as one chain in σ: the
/// evaluation's latency, which bounds the root search, halves). For σ in
/// [0, 1] the rounding error is bounded as Horner's, a few ulps of Σ|cₖσᵏ|.
#[inline]
pub(crate) fn poly_value(c: &[f64], s: f64) -> f64 {
    let u = s * s;
    let (mut e, body) = match c.len() % 2 {
        1 => (c[c.len() - 1], &c[..c.len() - 1]),
        _ => (0.0, c),
    };
    let mut o = 0.0;
    for p in body.rchunks_exact(2) {
        e = e * u + p[0];
        o = o * u + p[1];
    }
    e + s * o
}

/// [`poly_value`] at `L` points at once: each point's operations are
/// those of `poly_value`, in the same order (the same bits), and the
/// points' chains are interleaved, so that `L` evaluations take about the
/// latency of one. For the root search's walk over neighbouring points,
/// which are known before any of them is evaluated.
#[inline]
pub(crate) fn poly_values<const L: usize>(c: &[f64], s: [f64; L]) -> [f64; L] {
    let u = s.map(|x| x * x);
    let (mut e, body) = match c.len() % 2 {
        1 => ([c[c.len() - 1]; L], &c[..c.len() - 1]),
        _ => ([0.0; L], c),
    };
    let mut o = [0.0; L];
    for p in body.rchunks_exact(2) {
        for l in 0..L {
            e[l] = e[l] * u[l] + p[0];
            o[l] = o[l] * u[l] + p[1];
        }
    }
    let mut v = [0.0; L];
    for l in 0..L {
        v[l] = e[l] + s[l] * o[l];
    }
    v
}

/// ‖Mh‖₁ up to which nalgebra's `exp` gets the matrix as it is (ordinary
/// circuits stay far below and keep its bits). Above, its scaling loses
/// the slow part of a stiff matrix (e^{−1e-6} came out as 1 beside a
/// 1e13 entry) and gives NaN somewhere past 1e40.
const EXP_DIRECT: f64 = 1e6;

/// Largest ‖M‖₁·|Δ| for [`expm_shifted`]: each Taylor term of e^{MΔ} is
/// then below 2⁻²⁰ of the one before, so four reach rounding.
pub(crate) const SHIFT_REACH: f64 = 1.0 / (1u64 << 20) as f64;

/// e^{M(h₀+Δ)} from `phi0` = e^{Mh₀} for a short Δ (‖M‖₁·|Δ| ≤
/// [`SHIFT_REACH`]): e^{Mh₀}·e^{MΔ}, the second factor by its Taylor
/// series to rounding (terms below 2⁻⁶⁴ of the identity's norm). Exact
/// as [`expm`] is, to rounding: the unit test compares the two to 1e-14
/// of the exponential's norm.
pub(crate) fn expm_shifted(phi0: &DMatrix<f64>, m: &DMatrix<f64>, delta: f64) -> DMatrix<f64> {
    let n = m.nrows();
    let a = m * delta;
    let mut e = DMatrix::identity(n, n);
    let mut term = DMatrix::identity(n, n);
    for k in 1..32 {
        term = &term * &a / k as f64;
        e += &term;
        let size = norm1(&term);
        if size == 0.0 || size <= 5.4e-20 {
            break;
        }
    }
    phi0 * e
}

/// The largest column sum of |M| (the matrix 1-norm).
pub(crate) fn norm1(m: &DMatrix<f64>) -> f64 {
    m.column_iter()
        .map(|c| c.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

/// Matrix exponential e^{M h}.
///
/// Above [`EXP_DIRECT`], scaling and squaring done here so that it keeps
/// the slow part of a stiff matrix: B = Mh·2⁻ˢ with ‖B‖₁ ≤ 1/2 (s exact
/// powers of two, applied in steps that cannot underflow the factor), F =
/// e^B − I by its Taylor series without the identity (20 terms: the tail
/// is below 0.5²⁰/20! ≈ 4e-25 of ‖B‖), then s squarings of I + F carried
/// as F ← 2F + F² (N. J. Higham, *Functions of Matrices*, SIAM 2008,
/// §10.3, from memory: the identity is never added to the small entries,
/// so a decay of 1e-6 beside a rate of 1e13 keeps its digits). About 1000
/// squarings for an inductance of 1e-300 H behind an ohm. For decaying
/// modes the squarings damp their own rounding; an oscillation's phase
/// error grows as ε·ω·h, which the run checks before it trusts a stiff span
/// (`Spectrum::unresolved`). A non-finite input or overflow comes back as
/// non-finite, never as finite garbage.
pub(crate) fn expm(m: &DMatrix<f64>, h: f64) -> DMatrix<f64> {
    let a = m * h;
    let norm = norm1(&a);
    if norm <= EXP_DIRECT {
        return a.exp();
    }
    let n = a.nrows();
    if !norm.is_finite() {
        return DMatrix::from_element(n, n, f64::NAN);
    }
    // norm < 2^(e+1) with e = ⌊log₂ norm⌋, so 2^-(e+2)·norm < 1/2.
    let s = norm.log2().floor() as i32 + 2;
    let mut b = a;
    let mut left = s;
    while left > 0 {
        let k = left.min(512);
        b *= 2f64.powi(-k);
        left -= k;
    }
    // Hundreds of products of small matrices: a plain loop into reused
    // storage, not a general product with its packing and allocation
    // per call (five times faster for a 5×5).
    let mut term = b.clone();
    let mut f = b.clone();
    let mut next = DMatrix::zeros(n, n);
    for k in 2..=20 {
        square_product(&term, &b, &mut next);
        next /= k as f64;
        std::mem::swap(&mut term, &mut next);
        f += &term;
    }
    for _ in 0..s {
        square_product(&f, &f, &mut next);
        f *= 2.0;
        f += &next;
    }
    f + DMatrix::identity(n, n)
}

/// out = A·B for square column-major matrices of one size, column by
/// column (out[:, j] = Σₖ A[:, k]·B[k, j], k in order), without
/// allocating.
fn square_product(a: &DMatrix<f64>, b: &DMatrix<f64>, out: &mut DMatrix<f64>) {
    let n = a.nrows();
    let (a, b, o) = (a.as_slice(), b.as_slice(), out.as_mut_slice());
    for (col, bj) in o.chunks_exact_mut(n).zip(b.chunks_exact(n)) {
        col.fill(0.0);
        for (ak, &bkj) in a.chunks_exact(n).zip(bj) {
            if bkj != 0.0 {
                for (c, &aik) in col.iter_mut().zip(ak) {
                    *c += aik * bkj;
                }
            }
        }
    }
}

/// y = M x for a dense column-major matrix, into `y`, without allocating.
/// For the 4–12 states of a converter this plain loop beats a general
/// matrix-vector product, whose set-up cost dominates at that size.
pub(crate) fn matvec(m: &DMatrix<f64>, x: &[f64], y: &mut [f64]) {
    if m.nrows() == m.ncols() && (3..=20).contains(&m.nrows()) {
        return matvec_rows(m, m.nrows(), x, y);
    }
    let n = m.nrows();
    let data = m.as_slice();
    y.fill(0.0);
    for (j, &xj) in x.iter().enumerate() {
        if xj != 0.0 {
            let col = &data[j * n..(j + 1) * n];
            for (yi, &mij) in y.iter_mut().zip(col) {
                *yi += mij * xj;
            }
        }
    }
}

/// y = |M|·|x| (entrywise absolute values): the sizes of the terms each
/// entry of M·x is summed from. A product that cancels to nearly zero
/// keeps the rounding of its terms, up to ε times this, not times its own
/// size.
pub(crate) fn abs_matvec(m: &DMatrix<f64>, x: &[f64], y: &mut [f64]) {
    let n = m.nrows();
    let data = m.as_slice();
    y.fill(0.0);
    for (j, &xj) in x.iter().enumerate() {
        let xj = xj.abs();
        if xj != 0.0 {
            for (yi, &mij) in y.iter_mut().zip(&data[j * n..(j + 1) * n]) {
                *yi += mij.abs() * xj;
            }
        }
    }
}

/// Σ aᵢbᵢ over two slices of equal length, in index order from the same
/// start as `Iterator::sum` (so the same bits as `a.iter().zip(b)` summed),
/// unrolled for the common lengths.
#[inline(always)]
pub(crate) fn dot_slices(a: &[f64], b: &[f64]) -> f64 {
    match (a.len(), b.len()) {
        (4, 4) => dot_fixed::<4>(a, b),
        (5, 5) => dot_fixed::<5>(a, b),
        (6, 6) => dot_fixed::<6>(a, b),
        (7, 7) => dot_fixed::<7>(a, b),
        (8, 8) => dot_fixed::<8>(a, b),
        (9, 9) => dot_fixed::<9>(a, b),
        (10, 10) => dot_fixed::<10>(a, b),
        (11, 11) => dot_fixed::<11>(a, b),
        (12, 12) => dot_fixed::<12>(a, b),
        _ => a.iter().zip(b).map(|(x, y)| x * y).sum(),
    }
}

/// `out[k]` = row k of `rows` (rows of `z.len()` entries, one after
/// another) times z, for as many rows as `out` has: [`dot_slices`] of each
/// row, the same bits, with the dispatch on the length once for all rows.
#[inline]
pub(crate) fn rows_dot(rows: &[f64], z: &[f64], out: &mut [f64]) {
    #[inline(always)]
    fn fixed<const N: usize>(rows: &[f64], z: &[f64], out: &mut [f64]) {
        let z: &[f64; N] = z.try_into().expect("length checked by the caller");
        for (o, q) in out.iter_mut().zip(rows.chunks_exact(N)) {
            let q: &[f64; N] = q.try_into().expect("chunks of N");
            let mut acc: f64 = std::iter::empty::<f64>().sum();
            for i in 0..N {
                acc += q[i] * z[i];
            }
            *o = acc;
        }
    }
    match z.len() {
        4 => fixed::<4>(rows, z, out),
        5 => fixed::<5>(rows, z, out),
        6 => fixed::<6>(rows, z, out),
        7 => fixed::<7>(rows, z, out),
        8 => fixed::<8>(rows, z, out),
        9 => fixed::<9>(rows, z, out),
        10 => fixed::<10>(rows, z, out),
        11 => fixed::<11>(rows, z, out),
        12 => fixed::<12>(rows, z, out),
        n => {
            for (o, q) in out.iter_mut().zip(rows.chunks_exact(n.max(1))) {
                *o = dot_slices(q, z);
            }
        }
    }
}

#[inline(always)]
fn dot_fixed<const N: usize>(a: &[f64], b: &[f64]) -> f64 {
    let a: &[f64; N] = a.try_into().expect("length checked by the caller");
    let b: &[f64; N] = b.try_into().expect("length checked by the caller");
    let mut acc: f64 = std::iter::empty::<f64>().sum();
    for i in 0..N {
        acc += a[i] * b[i];
    }
    acc
}

/// `(Σ aᵢbᵢ, Σ |aᵢbᵢ|)`, unrolled for the common lengths.
#[inline(always)]
pub(crate) fn dot_and_magnitude(a: &[f64], b: &[f64]) -> (f64, f64) {
    match (a.len(), b.len()) {
        (4, 4) => dot_magnitude_fixed::<4>(a, b),
        (5, 5) => dot_magnitude_fixed::<5>(a, b),
        (6, 6) => dot_magnitude_fixed::<6>(a, b),
        (7, 7) => dot_magnitude_fixed::<7>(a, b),
        (8, 8) => dot_magnitude_fixed::<8>(a, b),
        (9, 9) => dot_magnitude_fixed::<9>(a, b),
        (10, 10) => dot_magnitude_fixed::<10>(a, b),
        (11, 11) => dot_magnitude_fixed::<11>(a, b),
        (12, 12) => dot_magnitude_fixed::<12>(a, b),
        _ => {
            let mut v = 0.0;
            let mut s = 0.0;
            for (x, y) in a.iter().zip(b) {
                let p = x * y;
                v += p;
                s += p.abs();
            }
            (v, s)
        }
    }
}

#[inline(always)]
fn dot_magnitude_fixed<const N: usize>(a: &[f64], b: &[f64]) -> (f64, f64) {
    let a: &[f64; N] = a.try_into().expect("length checked by the caller");
    let b: &[f64; N] = b.try_into().expect("length checked by the caller");
    let (mut v, mut s) = (0.0, 0.0);
    for i in 0..N {
        let p = a[i] * b[i];
        v += p;
        s += p.abs();
    }
    (v, s)
}

/// Scratch vectors for [`advance_into`].
#[derive(Clone, Debug, Default)]
pub(crate) struct Scratch {
    term: Vec<f64>,
    next: Vec<f64>,
    x: Vec<f64>,
    /// The odd columns' sums of [`term_product`].
    odd: Vec<f64>,
}

/// e^{Mτ} z into `out`, as [`advance`] does, without allocating (only the
/// first `live` rows of M may be non-zero; `w`: `Mode::weight`). τ may be
/// negative (a step back over a short remainder, see
/// `ModeCache::advance_near`).
pub(crate) fn advance_into(
    m: &DMatrix<f64>,
    (w, live): (&[f64], usize),
    rate: f64,
    z: &[f64],
    tau: f64,
    out: &mut [f64],
    s: &mut Scratch,
) {
    if tau == 0.0 {
        out.copy_from_slice(z);
        return;
    }
    let n = substeps(rate, tau.abs());
    if n > STIFF_SUBSTEPS {
        let e = expm(m, tau);
        matvec(&e, z, out);
        return;
    }
    let d = tau / n as f64;
    let data = m.as_slice();
    // Fixed sizes: the state and the terms in fixed arrays, the same
    // operations in the same order (the same bits).
    match z.len() {
        3 => taylor_fixed::<3>(data, (w, live), (n, d), z, out),
        4 => taylor_fixed::<4>(data, (w, live), (n, d), z, out),
        5 => taylor_fixed::<5>(data, (w, live), (n, d), z, out),
        6 => taylor_fixed::<6>(data, (w, live), (n, d), z, out),
        7 => taylor_fixed::<7>(data, (w, live), (n, d), z, out),
        8 => taylor_fixed::<8>(data, (w, live), (n, d), z, out),
        _ => taylor_general(m, (w, live), (n, d), z, out, s),
    }
}

/// [`advance_into`]'s Taylor sub-steps for any length of z: `n`
/// sub-steps of `d`, from `z` into `out`, in the scratch vectors.
fn taylor_general(
    m: &DMatrix<f64>,
    (w, live): (&[f64], usize),
    (n, d): (usize, f64),
    z: &[f64],
    out: &mut [f64],
    s: &mut Scratch,
) {
    let nz = z.len();
    s.term.resize(nz, 0.0);
    s.next.resize(nz, 0.0);
    s.x.resize(nz, 0.0);
    s.odd.resize(nz, 0.0);
    s.x.copy_from_slice(z);
    for _ in 0..n {
        s.term.copy_from_slice(&s.x);
        // Rows past `live` of M are zero: those entries of x stay as
        // they are, and of the terms only the first has them.
        let tail_max = amax(&s.x[live..]);
        for k in 1..60 {
            let f = d / k as f64;
            // The first term's product takes every column; the later
            // terms' entries past `live` are zero.
            let cols = if k == 1 { nz } else { live };
            let tn = term_product(m, (live, cols), &s.term, (&mut s.next, &mut s.odd), f);
            std::mem::swap(&mut s.term, &mut s.next);
            let sn = add_term(&mut s.x[..live], &s.term[..live], tail_max);
            if taylor_done(k, (tn, sn), &s.term, &s.x, w) {
                break;
            }
        }
    }
    out.copy_from_slice(&s.x);
}

/// A Taylor term from the one before: y = (M x)·f over the first `live`
/// rows (the rows past them are zero in M and come out +0), from the
/// first `cols` columns of M (the entries of x past them must be zero:
/// their products would only add zeros). Each entry is the sum of the
/// even columns' products plus that of the odd columns', each in column
/// order from +0: two chains of additions where one chain in column order
/// made the term's latency, which bounds the series, twice as long. The
/// odd sums go to `odd` (at least `live` entries). Returns the largest
/// |yᵢ|.
fn term_product(
    m: &DMatrix<f64>,
    (live, cols): (usize, usize),
    x: &[f64],
    (y, odd): (&mut [f64], &mut [f64]),
    f: f64,
) -> f64 {
    let n = m.nrows();
    let data = m.as_slice();
    let (head, tail) = y.split_at_mut(live);
    tail.fill(0.0);
    head.fill(0.0);
    let odd = &mut odd[..live];
    odd.fill(0.0);
    for (j, &xj) in x[..cols].iter().enumerate() {
        let col = &data[j * n..j * n + live];
        let acc: &mut [f64] = if j % 2 == 0 { &mut *head } else { &mut *odd };
        for (a, &c) in acc.iter_mut().zip(col) {
            *a += c * xj;
        }
    }
    let mut tn: f64 = 0.0;
    for (yi, &o) in head.iter_mut().zip(odd.iter()) {
        *yi = (*yi + o) * f;
        tn = larger(tn, yi.abs());
    }
    tn
}

/// [`term_product`] for an N-entry z, in place: the same operations on
/// the live rows in the same order (the same bits there; the rows past
/// `live` are zero rows of M and come out ±0, which add nothing to a
/// later sum that starts from +0), in fixed arrays.
#[inline(always)]
fn term_fixed<const N: usize>(data: &[f64], cols: usize, x: &mut [f64; N], f: f64) -> f64 {
    let mut even = [0.0f64; N];
    let mut odd = [0.0f64; N];
    let col = |j: usize| -> &[f64; N] {
        data[j * N..(j + 1) * N]
            .try_into()
            .expect("a column of an N×N matrix has N entries")
    };
    let cols = cols.min(N);
    let mut j = 0;
    while j + 1 < cols {
        let (ce, co) = (col(j), col(j + 1));
        for i in 0..N {
            even[i] += ce[i] * x[j];
            odd[i] += co[i] * x[j + 1];
        }
        j += 2;
    }
    if j < cols {
        let ce = col(j);
        for i in 0..N {
            even[i] += ce[i] * x[j];
        }
    }
    let mut tn: f64 = 0.0;
    for i in 0..N {
        x[i] = (even[i] + odd[i]) * f;
        tn = larger(tn, x[i].abs());
    }
    tn
}

/// Adds a Taylor term's live entries to the state's; returns the largest
/// magnitude of the state, `tail_max` that of its entries past them.
#[inline(always)]
fn add_term(x: &mut [f64], term: &[f64], tail_max: f64) -> f64 {
    let mut sn = tail_max;
    for (xi, &t) in x.iter_mut().zip(term) {
        *xi += t;
        sn = larger(sn, xi.abs());
    }
    sn
}

/// Whether the series stops after term `k` (largest magnitude `tn`; the
/// state's `sn`): a zero term, or from the third on one below 1e-18 of
/// the state and negligible in energy units too.
#[inline(always)]
fn taylor_done(k: usize, (tn, sn): (f64, f64), term: &[f64], x: &[f64], w: &[f64]) -> bool {
    tn == 0.0 || (k >= 3 && tn <= sn * 1e-18 && negligible_in_energy(term, x, w))
}

/// [`advance_into`]'s Taylor sub-steps for an N-entry z (N×N `data`,
/// column-major): `n` sub-steps of `d`, from `z` into `out`. Term for
/// term the operations of the general loop there ([`term_product`] as
/// [`term_fixed`], `add_term`, `taylor_done`), so the same bits, with the
/// state and the terms in fixed arrays instead of the scratch vectors.
#[inline(always)]
fn taylor_fixed<const N: usize>(
    data: &[f64],
    (w, live): (&[f64], usize),
    (n, d): (usize, f64),
    z: &[f64],
    out: &mut [f64],
) {
    let data: &[f64] = &data[..N * N];
    let mut x: [f64; N] = z.try_into().expect("z has N entries");
    let live = live.min(N);
    for _ in 0..n {
        let mut term = x;
        // Rows past `live` of M are zero: those entries of x stay as
        // they are, and of the terms only the first has them.
        let tail_max = amax(&x[live..]);
        for k in 1..60 {
            let f = d / k as f64;
            let cols = if k == 1 { N } else { live };
            let tn = term_fixed::<N>(data, cols, &mut term, f);
            let sn = add_term(&mut x[..live], &term[..live], tail_max);
            if taylor_done(k, (tn, sn), &term, &x, w) {
                break;
            }
        }
    }
    out.copy_from_slice(&x);
}

/// Appends a short slice: lengths up to 12 are copied as fixed-size arrays
/// (moves the compiler unrolls, no call to the system's copy routine).
#[inline(always)]
pub(crate) fn extend_small(v: &mut Vec<f64>, x: &[f64]) {
    #[inline(always)]
    fn fixed<const N: usize>(v: &mut Vec<f64>, x: &[f64]) {
        let a: &[f64; N] = x.try_into().expect("length matched by the caller");
        v.extend_from_slice(a);
    }
    match x.len() {
        1 => fixed::<1>(v, x),
        2 => fixed::<2>(v, x),
        3 => fixed::<3>(v, x),
        4 => fixed::<4>(v, x),
        5 => fixed::<5>(v, x),
        6 => fixed::<6>(v, x),
        7 => fixed::<7>(v, x),
        8 => fixed::<8>(v, x),
        9 => fixed::<9>(v, x),
        10 => fixed::<10>(v, x),
        11 => fixed::<11>(v, x),
        12 => fixed::<12>(v, x),
        _ => v.extend_from_slice(x),
    }
}

/// Whether every entry is finite, in one pass and a single test in the
/// usual case: v·0 is 0 for a finite v and NaN otherwise, so the sum is 0
/// exactly when every entry is finite. Fixed lengths unroll.
#[inline(always)]
pub(crate) fn all_finite(z: &[f64]) -> bool {
    #[inline(always)]
    fn fixed<const N: usize>(z: &[f64]) -> bool {
        let a: &[f64; N] = z.try_into().expect("length matched by the caller");
        let mut acc = 0.0;
        for v in a {
            acc += v * 0.0;
        }
        acc == 0.0
    }
    match z.len() {
        3 => fixed::<3>(z),
        4 => fixed::<4>(z),
        5 => fixed::<5>(z),
        6 => fixed::<6>(z),
        7 => fixed::<7>(z),
        8 => fixed::<8>(z),
        9 => fixed::<9>(z),
        10 => fixed::<10>(z),
        11 => fixed::<11>(z),
        12 => fixed::<12>(z),
        _ => z.iter().map(|v| v * 0.0).sum::<f64>() == 0.0,
    }
}

#[cfg(test)]
mod tests {
    use super::{
        advance_into, expm, expm_shifted, matvec, norm1, poly, poly_value, poly_values, substeps,
        taylor_general, Scratch, Spectrum, SHIFT_REACH, TAYLOR_REACH,
    };
    use nalgebra::DMatrix;

    /// Every size's product (unrolled, rolled, every column, on AVX
    /// where the processor has it, or the general loop) gives the bits of
    /// the plain column-by-column sum y += M[:, j]·x_j, skipping the zero
    /// entries of x, for x with zero entries, both signs and a range of
    /// magnitudes: a product's bits do not depend on its size's kernel or
    /// on the processor.
    #[test]
    fn every_product_kernel_gives_the_bits_of_the_plain_sum() {
        let mut u = crate::test_util::uniform(0x5eed);
        for n in 1..=24 {
            for trial in 0..20 {
                let m = DMatrix::from_fn(n, n, |_, _| {
                    let v = 2.0 * u() - 1.0;
                    v * 10f64.powi((u() * 9.0) as i32 - 4)
                });
                let x: Vec<f64> = (0..n)
                    .map(|j| match (j + trial) % 5 {
                        0 => 0.0,
                        _ => 6.0 * u() - 3.0,
                    })
                    .collect();
                let mut want = vec![0.0; n];
                for (j, &xj) in x.iter().enumerate() {
                    if xj != 0.0 {
                        for i in 0..n {
                            want[i] += m[(i, j)] * xj;
                        }
                    }
                }
                let mut y = vec![f64::NAN; n];
                matvec(&m, &x, &mut y);
                let bits = |v: &[f64]| v.iter().map(|a| a.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&y), bits(&want), "n = {n}, trial {trial}");
            }
        }
    }

    /// The Taylor loop in fixed arrays (3 to 8 entries) gives the bits of
    /// the general one in scratch vectors: random modes whose rows past
    /// `live` are zero, inputs in the tail of z, zero entries, states with
    /// and without an energy weight, steps forward and back, one sub-step
    /// and several.
    #[test]
    fn the_fixed_taylor_loop_gives_the_bits_of_the_general_one() {
        let mut u = crate::test_util::uniform(0x7a11_0e5d);
        let bits = |v: &[f64]| v.iter().map(|a| a.to_bits()).collect::<Vec<_>>();
        let mut scratch = Scratch::default();
        for n in 3..=8 {
            for trial in 0..40 {
                let live = 1 + trial % (n - 1);
                let m = DMatrix::from_fn(n, n, |i, _| {
                    if i >= live || u() < 0.2 {
                        0.0
                    } else {
                        (2.0 * u() - 1.0) * 10f64.powi((u() * 6.0) as i32)
                    }
                });
                let w: Vec<f64> = (0..live)
                    .map(|i| if (i + trial) % 3 == 0 { 0.0 } else { u() })
                    .collect();
                let z: Vec<f64> = (0..n)
                    .map(|j| {
                        if (j + trial) % 4 == 0 {
                            0.0
                        } else {
                            4.0 * u() - 2.0
                        }
                    })
                    .collect();
                let rate = norm1(&m);
                for tau in [
                    1e-7,
                    -3e-8,
                    1e-16,
                    0.5 / rate.max(1.0),
                    3.0 * TAYLOR_REACH / rate.max(1.0),
                ] {
                    let steps = substeps(rate, tau.abs());
                    let mut fixed = vec![f64::NAN; n];
                    advance_into(&m, (&w, live), rate, &z, tau, &mut fixed, &mut scratch);
                    let mut general = vec![f64::NAN; n];
                    let d = tau / steps as f64;
                    taylor_general(&m, (&w, live), (steps, d), &z, &mut general, &mut scratch);
                    assert_eq!(
                        bits(&fixed),
                        bits(&general),
                        "n = {n}, trial {trial}, τ = {tau:e}"
                    );
                }
            }
        }
    }

    /// e^{M(h₀+Δ)} = e^{Mh₀}·e^{MΔ} (M commutes with itself; common
    /// practice): the shifted exponential of a damped LC mode with an
    /// input column agrees with a fresh one, for shifts from one ulp of
    /// h₀ to the largest allowed, both signs, to 1e-14 of its norm.
    #[test]
    fn a_shifted_exponential_matches_a_fresh_one() {
        let m = DMatrix::from_row_slice(
            3,
            3,
            &[-4.0e3, -4.5e5, 5.0e5, 2.1e3, -33.0, 0.0, 0.0, 0.0, 0.0],
        );
        let h0 = 3.1e-6;
        let phi0 = expm(&m, h0);
        let reach = SHIFT_REACH / norm1(&m);
        let ulp = h0 * f64::EPSILON;
        for delta in [ulp, -3.0 * ulp, 1e-3 * reach, reach, -reach] {
            let want = expm(&m, h0 + delta);
            let got = expm_shifted(&phi0, &m, delta);
            let err = norm1(&(&got - &want)) / norm1(&want);
            assert!(err < 1e-14, "Δ = {delta:e}: {err:e}");
        }
    }

    /// e^{Mh} of the RL step z = [i, u], i′ = (u − i)/τ·… with u ≡ 1 V
    /// and R = 1 Ω: [[e^{−h/τ}, 1 − e^{−h/τ}], [0, 1]] (the RL step's
    /// closed form, common practice), for τ = L/R from 1e-15 down to
    /// 1e-300 s over h = 1 ms — up to ~1000 squarings, no NaN; and a slow
    /// decay of e^{−1e-6} beside a fast entry keeps its digits.
    #[test]
    fn exponential_of_a_huge_stiff_matrix_is_accurate() {
        for l in [1e-15, 1e-60, 1e-150, 1e-300] {
            let m = DMatrix::from_row_slice(2, 2, &[-1.0 / l, 1.0 / l, 0.0, 0.0]);
            let e = expm(&m, 1e-3);
            assert_eq!(e[(0, 0)], 0.0, "L = {l:e}");
            assert!(
                (e[(0, 1)] - 1.0).abs() <= 4.0 * f64::EPSILON,
                "L = {l:e}: {e}"
            );
            assert_eq!((e[(1, 0)], e[(1, 1)]), (0.0, 1.0), "L = {l:e}");
        }
        // Fast RL beside a slow RC decay (rate 1e-3/s over 1e-3 s) and its
        // input: e^{−1e-6} must come out to a few ulps.
        for l in [1e-12, 1e-40, 1e-300] {
            let m = DMatrix::from_row_slice(
                3,
                3,
                &[-1.0 / l, 1.0 / l, 0.0, 0.0, -1e-3, 1.0, 0.0, 0.0, 0.0],
            );
            let e = expm(&m, 1e-3);
            let slow = (-1e-6f64).exp();
            assert!(
                (e[(1, 1)] - slow).abs() <= 4.0 * f64::EPSILON,
                "L = {l:e}: {e}"
            );
            // ∫₀ʰ e^{−a s} ds = (1 − e^{−ah})/a, a = 1e-3 (common practice).
            let int = -(-1e-6f64).exp_m1() / 1e-3;
            assert!((e[(1, 2)] - int).abs() <= 1e-15 * int, "L = {l:e}: {e}");
            assert!(e.iter().all(|v| v.is_finite()));
        }
        let bad = DMatrix::from_row_slice(2, 2, &[f64::INFINITY, 0.0, 0.0, 0.0]);
        assert!(expm(&bad, 1.0).iter().all(|v| v.is_nan()));
    }

    /// The spectrum of an inductance of 1e-300 H across 47 µF shows the
    /// oscillation ω = 1/√(LC) (common practice) that the unbalanced Schur
    /// iteration misses, and a real decay dies at DEAD/rate.
    #[test]
    fn spectrum_sees_an_oscillation_behind_a_huge_entry() {
        let (l, c) = (1e-300, 47e-6);
        let m = DMatrix::from_row_slice(2, 2, &[0.0, -1.0 / l, 1.0 / c, 0.0]);
        let sp = Spectrum::of(&m).expect("trusted");
        let w = 1.0 / (l * c).sqrt();
        assert!((sp.top - w).abs() <= 1e-12 * w, "{sp:?}");
        assert!(sp.unresolved(1e-9, 1e-9).is_some());
        // A 1 fs decay beside a 1 s one: alive at first, dead after 60 fs.
        let m = DMatrix::from_row_slice(2, 2, &[-1e15, 0.0, 0.0, -1.0]);
        let sp = Spectrum::of(&m).expect("trusted");
        assert_eq!(sp.alive_rate(0.0), 1e15);
        assert_eq!(sp.alive_rate(6.1e-14), 1.0);
        assert!(sp.unresolved(1.0, 1.0).is_none());
        // The step grows by powers of two from 1/(2·1e15) to ≤ 1/2 s.
        let d = sp.step_at(1e-13);
        assert!(d <= 0.5 && d > 0.25, "{d}");
    }

    /// `Spectrum::pieces` counts the walk of `step_at` over a span without
    /// walking it: within one per stretch between two deaths of the walk's
    /// count (three eigenvalues here: 1e15, 1e9 and 1 /s), from the span's
    /// start and from inside it.
    #[test]
    fn piece_count_matches_the_walk() {
        let m = DMatrix::from_row_slice(3, 3, &[-1e15, 0.0, 0.0, 0.0, -1e9, 0.0, 0.0, 0.0, -1.0]);
        let sp = Spectrum::of(&m).expect("trusted");
        for (from, width) in [
            (0.0, 1e-3),
            (0.0, 10.0),
            (3e-14, 1e-6),
            (1e-7, 2.0),
            (0.0, 5e-14),
        ] {
            let mut tau = from;
            let mut walked = 0.0;
            while tau < from + width {
                tau += sp.step_at(tau).min(from + width - tau);
                walked += 1.0;
            }
            let counted = sp.pieces(from, width);
            assert!(
                (counted - walked).abs() <= 3.0,
                "[{from:e}, +{width:e}]: counted {counted}, walked {walked}"
            );
        }
        // An oscillation that never dies: ∞ pieces over an endless span.
        let m = DMatrix::from_row_slice(2, 2, &[0.0, -1e12, 1e12, 0.0]);
        let sp = Spectrum::of(&m).expect("trusted");
        assert_eq!(sp.pieces(0.0, f64::INFINITY), f64::INFINITY);
        assert!((sp.pieces(0.0, 1e-3) - 2e9).abs() <= 1.0);
    }

    /// The even/odd evaluation agrees with one Horner chain within the
    /// usual error bound of a polynomial evaluation, 2n·ε·Σ|cₖσᵏ| (N. J.
    /// Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed.,
    /// 2002, §5.1; from memory), for the value and for the derivative;
    /// and the value of `poly`, and of `poly_values` at each of its points,
    /// has exactly the bits of `poly_value`.
    #[test]
    fn even_odd_evaluation_agrees_with_horner() {
        let mut rnd = crate::test_util::uniform(0x2545_f491_4f6c_dd1du64);
        for case in 0..3000 {
            let n = (rnd() * 17.0) as usize;
            let c: Vec<f64> = (0..n)
                .map(|k| (rnd() - 0.5) * 10f64.powf(3.0 - 2.0 * k as f64 * rnd()))
                .collect();
            let s = if case % 10 == 0 { 0.0 } else { rnd() };
            let (mut v, mut d, mut sv, mut sd) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
            for (k, &a) in c.iter().enumerate().rev() {
                d = d * s + v;
                v = v * s + a;
                sv += (a * s.powi(k as i32)).abs();
                if k > 0 {
                    sd += (k as f64 * a * s.powi(k as i32 - 1)).abs();
                }
            }
            let bound = |sum: f64| 2.0 * (n as f64 + 1.0) * f64::EPSILON * sum + 1e-300;
            let (pv, pd) = poly(&c, s);
            assert_eq!(pv.to_bits(), poly_value(&c, s).to_bits(), "case {case}");
            // Four points at once, each with its own bits.
            let points = [s, rnd(), 1.0 - s, 0.5 * s];
            let each = points.map(|x| poly_value(&c, x).to_bits());
            assert_eq!(
                poly_values(&c, points).map(f64::to_bits),
                each,
                "case {case}"
            );
            assert!((pv - v).abs() <= bound(sv), "case {case}: {pv} vs {v}");
            assert!((pd - d).abs() <= bound(sd), "case {case}: {pd} vs {d}");
        }
        // At σ = 0 the value is the constant term.
        assert_eq!(poly_value(&[1.5, -2.0, 3.0], 0.0), 1.5);
        assert_eq!(poly(&[1.5, -2.0, 3.0], 0.0).1, -2.0);
    }
}
