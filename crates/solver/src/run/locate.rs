//! Stage 2: locate the earliest state event inside an interval, on the
//! exact solution.
//!
//! The interval is split into sub-intervals with ρ·δ ≤ 1/2 (ρ bounds the
//! fastest dynamics of the mode, so δ is a small fraction of its fastest
//! oscillation period). On each, a guard g(τ) = r·e^{Mτ}z is checked at both
//! ends with its exact derivative: a crossing shows as g < 0 at the end, a
//! dip below zero and back as g′ < 0 at the start and g′ > 0 at the end.
//! Only then is the guard expanded as a Taylor polynomial and its root (or
//! its minimum, for a grazing touch) refined to machine precision. A
//! touch that does not go below the tolerance is not an event — on
//! purpose, so a current that just reaches zero and turns back keeps its
//! conduction state.
//!
//! On an interval length the schedule repeats, the guard polynomials are
//! cached per length (`GuardPolys`), and a crossing expected near an
//! earlier one is found on the polynomial of that earlier crossing's
//! exponential in the offset (`near_crossing`, `near::NearTerms`): two or
//! three terms where the interval's polynomial has a dozen, with the same
//! definition of the located instant (the first representable time where
//! the guard's polynomial is below zero).
//!
//! Stiff spans (more than `propagate::STIFF_SUBSTEPS` sub-intervals by the
//! rule above, e.g. a 22 ps RC behind a 5 µs switching interval) are
//! scanned by a different rule. The rule above bounds the step by the
//! fastest mode all the way through, although a decaying mode only
//! matters while it is alive. The mode's eigenvalues λ are computed once
//! (`propagate::Spectrum`, on the balanced matrix). A component e^{λτ}
//! with −Re λ·τ ≥ `propagate::DEAD` (60) has fallen below rounding of the
//! state (e⁻⁶⁰ ≈ 9e-27: a margin of 1e9 below 2⁻⁵² for non-normal growth
//! of the component before it decays). So τ into the span only the
//! eigenvalues still alive bound the step: the sub-interval starting at
//! τ has length δ₀·2ʲ, the longest with |λ|·δ ≤ 1/2 for every λ alive at
//! τ (δ₀ = 1/(2 max|λ|); powers of two so that the exponentials e^{Mδ}
//! are cached per mode). A fast real mode thus sets the step for the
//! first 2·60·|λ|/(−Re λ) sub-intervals only (about 120), then the slow
//! modes and the oscillations (whose |Im λ| stays alive as long as they
//! do) set it. Within each sub-interval the live part of the guard varies
//! as slowly as under the rule above, so the same checks apply — end
//! value, then a dip between a falling start and a rising end — on exact
//! states from the cached exponentials; a derivative within rounding noise
//! of its terms (64·ε·Σ|drow·z|, what dead fast components leave) counts
//! as zero. A crossing is refined on exact states e^{Mσ}z (Illinois steps
//! kept inside the bracket, bisection where they stall) to the first
//! representable point past it, as `root_in` does on polynomials; a dip's
//! minimum is found by Illinois steps on g′ to √ε of its sub-interval.
//! Before the scan and at its sub-intervals 1, 2, 4, …, the energy
//! envelope (`crate::envelope`) may clear the rest of the span at once: a
//! floor under every guard over all of it, from the stored energy of the
//! deviation from the mode's equilibrium (a slowly decaying ringing whose
//! dips never reach zero needs no scan of its periods). Where
//! the eigenvalues cannot be trusted (the Schur iteration fails, a value is
//! not finite, their sum is not the trace, or a fast growing mode) the
//! rule above is kept.

use nalgebra::{DMatrix, DVector};

use super::Simulator;
use crate::crossing::roots::{exact_root, guard_root, illinois_point, near_root};
use crate::crossing::{at_end, same_instant, Crossing, Scales};
use crate::envelope::Envelope;
use crate::mode::{Guard, GuardKind, Mode};
use crate::near::{NearAnchor, NearExp, NearTerms, Served, NEAR_REACH};
use crate::propagate;
use crate::propagate::{dot_slices, Spectrum};

/// Whether guard `g` may cross zero in an interval from state `za` to
/// `zb`: negative (beyond its tolerance) at the end, or falling at the
/// start and rising at the end (a dip that may go below zero and back).
#[inline(always)]
pub(super) fn suspect_at_end(g: &Guard, za: &[f64], zb: &[f64], scales: Scales) -> bool {
    let da = g.sdrow.dot(za);
    if da < 0.0 && g.sdrow.dot(zb) > 0.0 {
        return true;
    }
    let (gb, sb) = g.srow.dot_and_magnitude(zb);
    // The tolerance matters only for a negative end value.
    gb < 0.0 && {
        let tol = scales.guard_zero(&g.kind, sb.max(g.srow.dot_and_magnitude(za).1));
        gb < -tol
    }
}

/// Whether any of `mode`'s own guards may cross zero from `za` to `zb`
/// (`suspect_at_end`), written as a loop so that it stays inline in the
/// loop of every interval; each guard's rows read from its cache line
/// (`Mode::guard_lines`), the same products.
#[inline(always)]
fn any_suspect(mode: &Mode, za: &[f64], zb: &[f64], scales: Scales) -> bool {
    for (i, line) in mode.guard_lines.iter().enumerate() {
        let g = || &mode.guards[i];
        let da = line.slope(za, g);
        if da < 0.0 && line.slope(zb, g) > 0.0 {
            return true;
        }
        let (gb, sb) = line.value(zb, g);
        if gb < 0.0 && gb < -scales.guard_zero_of(line.of_current, sb.max(line.value(za, g).1)) {
            return true;
        }
    }
    false
}

/// The crossing at `time` of the guards with bits `(diodes, comparators)`.
fn crossing(time: f64, (diodes, comparators): (u64, u64)) -> Crossing {
    Crossing {
        time,
        diodes,
        comparators,
    }
}

/// (diode bits, comparator bits) of a guard.
fn bits_of(g: &Guard) -> (u64, u64) {
    match g.kind {
        GuardKind::DiodeCurrent(k) | GuardKind::DiodeVoltage(k) => (1u64 << k, 0),
        GuardKind::DiodePair(a, b) => ((1u64 << a) | (1u64 << b), 0),
        GuardKind::Comparator { index, .. } => (0, 1u64 << index),
    }
}

/// The guards that hold now: the mode's diode guards, and for each
/// closed-loop gate the guard of its present state (bit c of `off_mask`:
/// comparator c is on and may turn off; of `on_mask`: it is off and may
/// turn on).
fn active<'m>(
    mode: &'m Mode,
    off_mask: u64,
    on_mask: u64,
) -> impl Iterator<Item = &'m Guard> + Clone + 'm {
    mode.guards.iter().chain(
        mode.cmp_guards
            .iter()
            .enumerate()
            .filter_map(move |(c, pair)| {
                if off_mask >> c & 1 == 1 {
                    pair[0].as_ref()
                } else if on_mask >> c & 1 == 1 {
                    pair[1].as_ref()
                } else {
                    None
                }
            }),
    )
}

impl Simulator {
    /// Earliest guard crossing within (0, h]: its time τ from the start
    /// and the diodes and comparators whose guards fired there. `z_next`
    /// must hold the state at `h` on entry; when τ < h it holds the state
    /// at τ on return.
    #[inline(always)]
    pub(super) fn locate(&mut self, h: f64) -> Option<Crossing> {
        let masks = if self.cc.comparators.is_empty() {
            (0, 0)
        } else {
            self.comparator_masks()
        };
        if !self.may_cross(h, masks) {
            return None;
        }
        self.stats.searched_intervals += 1;
        // Borrowed out of `self` for the duration (an `Arc` clone costs two
        // atomic operations per interval).
        let modes = std::mem::take(&mut self.modes.list);
        let found = self.locate_in(&modes[self.mode as usize], h, masks);
        self.modes.list = modes;
        found
    }

    /// Whether an interval of length `h` may hold a crossing of the
    /// guards active now (`masks`: see `active`): false only where the
    /// exact end-point checks rule it out, which is the common case of an
    /// interval with no event. Over one Taylor reach a guard may cross
    /// only if it ends below zero or dips (`suspect_at_end`); a longer
    /// interval is always searched.
    #[inline(always)]
    fn may_cross(&self, h: f64, (off_mask, on_mask): (u64, u64)) -> bool {
        let mode = &self.modes[self.mode as usize];
        if mode.guards.is_empty() && off_mask == 0 && on_mask == 0 {
            return false;
        }
        if propagate::substeps(mode.rate, h) != 1 {
            return true;
        }
        // The run's scales as of the last resolved instant: floors are
        // 1e-13 of them, so a lag of one interval does not matter.
        let scales = self.scales.seen;
        let (za, zb) = (self.z.as_slice(), self.z_next.as_slice());
        if off_mask == 0 && on_mask == 0 {
            // No closed-loop gate: the mode's own guards only, without
            // the chained iterator.
            any_suspect(mode, za, zb, scales)
        } else {
            active(mode, off_mask, on_mask).any(|g| suspect_at_end(g, za, zb, scales))
        }
    }

    /// The search of [`Simulator::locate`] once `may_cross` holds.
    #[inline(never)]
    fn locate_in(
        &mut self,
        mode: &Mode,
        h: f64,
        (off_mask, on_mask): (u64, u64),
    ) -> Option<Crossing> {
        let guards = active(mode, off_mask, on_mask);
        let n = propagate::substeps(mode.rate, h);
        if n == 1 && off_mask == 0 && on_mask == 0 && self.shortcuts.guard_polynomials {
            if let Some(found) = self.locate_cached(mode, h) {
                return found;
            }
        }
        if n > propagate::STIFF_SUBSTEPS {
            if self.refused.is_some() {
                // `step` refused the span and left NaN: nothing to locate.
                return None;
            }
            if let Some(sp) = self.spectrum() {
                let guards: Vec<&Guard> = guards.collect();
                return self.locate_stiff(mode, &sp, &guards, h);
            }
        }
        let d = h / n as f64;
        let mut za = std::mem::take(&mut self.buf.za);
        za.copy_from(&self.z);
        let mut terms = std::mem::take(&mut self.buf.terms);
        let mut coef = std::mem::take(&mut self.buf.coef);
        let mut found: Option<(f64, (u64, u64), f64)> = None;
        let scales = self.update_scales();
        for i in 0..n {
            propagate::taylor_terms(&mode.m, &mode.weight, mode.live, &za, d, &mut terms);
            for g in guards.clone() {
                coef.clear();
                let mut scale = 0.0;
                for w in terms.terms() {
                    let (c, a) = g.srow.dot_and_magnitude(w);
                    coef.push(c);
                    scale += a;
                }
                let tol = scales.guard_zero(&g.kind, scale);
                if let Some(s) = guard_root(&coef, tol, None) {
                    found = merge(found, (i as f64 + s) * d, bits_of(g), s, h);
                }
            }
            if let Some((t, _, sigma)) = found {
                if at_end(t, h) {
                    break;
                }
                // The state at the crossing, from the same expansion,
                // ready for the caller in `z_next`.
                terms.state_at(sigma, self.z_next.as_mut_slice());
                break;
            }
            let zs = za.as_mut_slice();
            zs.fill(0.0);
            for w in terms.terms() {
                for (x, &wi) in zs.iter_mut().zip(w) {
                    *x += wi;
                }
            }
        }
        self.buf.terms = terms;
        self.buf.za = za;
        self.buf.coef = coef;
        // A crossing at the very end belongs to the scheduled instant (and
        // `z_next` must then be the state at h again).
        found.map(|(t, b, _)| crossing(if at_end(t, h) { h } else { t }, b))
    }
}

impl Simulator {
    /// [`Simulator::locate_in`] over a stiff span (see the module docs).
    fn locate_stiff(
        &mut self,
        mode: &Mode,
        sp: &Spectrum,
        guards: &[&Guard],
        h: f64,
    ) -> Option<Crossing> {
        let scales = self.update_scales();
        let mi = self.mode as usize;
        let mut za = self.z.as_slice().to_vec();
        let mut zb = vec![0.0; za.len()];
        let mut s = 0.0;
        let envelope = self.envelope(mode);
        let mut count = 0usize;
        loop {
            // At sub-intervals 0, 1, 2, 4, …: the rest of the span needs no
            // search where the energy envelope keeps every guard above its
            // zero band (a ringing that decays without reaching it).
            if count & count.wrapping_sub(1) == 0 {
                if let Some(env) = &envelope {
                    // The deviation's growth need only be bounded until
                    // every live component has died (a span of 1e306 s
                    // would otherwise turn the rounding margin of the
                    // growth rate into an infinite factor).
                    let span = (h - s).min(sp.settled_after());
                    if clears(env, mode, guards, &za, span, scales) {
                        self.stats.envelope_skips += 1;
                        return None;
                    }
                }
            }
            count += 1;
            let d = sp.step_at(s);
            // d is ∞ once nothing is alive (never NaN: rates are finite).
            let last = s + d >= h || d.is_nan();
            let b = if last { h } else { s + d };
            if last {
                zb.copy_from_slice(self.z_next.as_slice());
            } else {
                let bits = d.to_bits();
                let cache = &mut self.modes.caches[mi].stiff_steps;
                if let Some((_, e)) = cache.iter().find(|(k, _)| *k == bits) {
                    propagate::matvec(e, &za, &mut zb);
                } else {
                    let e = propagate::expm(&mode.m, d);
                    propagate::matvec(&e, &za, &mut zb);
                    if cache.len() < 64 {
                        self.stats.exponentials += 1;
                        cache.push((bits, e));
                    }
                }
            }
            self.stats.stiff_substeps += 1;
            let mut found: Found = None;
            for g in guards {
                // The exact states inside come from the mode's ladder of
                // exponentials (built on the first guard that needs it).
                let ladder = &mut self.modes.caches[mi].ladder;
                if let Some(sigma) = stiff_root(mode, ladder, g, (&za, &zb), b - s, scales) {
                    found = merge(found, s + sigma, bits_of(g), sigma, h);
                }
            }
            if let Some((t, bits, sigma)) = found {
                // A crossing at the very end belongs to the scheduled
                // instant (`z_next` holds the state at h).
                if at_end(t, h) {
                    return Some(crossing(h, bits));
                }
                let e = propagate::expm(&mode.m, sigma);
                propagate::matvec(&e, &za, self.z_next.as_mut_slice());
                return Some(crossing(t, bits));
            }
            if last {
                return None;
            }
            s = b;
            std::mem::swap(&mut za, &mut zb);
        }
    }
}

/// Whether every guard in `guards` stays above its zero band over a span
/// of length `span` from state `z`, by the energy envelope `env`.
fn clears(
    env: &Envelope,
    mode: &Mode,
    guards: &[&Guard],
    z: &[f64],
    span: f64,
    scales: Scales,
) -> bool {
    let Some(dev) = env.deviation(&mode.m, z, span) else {
        return false;
    };
    guards.iter().all(|g| {
        let (_, magnitude) = g.srow.dot_and_magnitude(z);
        env.floor(&dev, &g.row) >= -0.5 * scales.guard_zero(&g.kind, magnitude)
    })
}

/// Exact states e^{Mσ}·z at any σ of a stiff sub-interval, without a
/// matrix exponential per σ: with δ = [`propagate::TAYLOR_REACH`]/ρ (the
/// Taylor rule's step for the mode's rate ρ), the binary digits of
/// ⌊σ/δ⌋ pick exponentials e^{Mδ·2ⁱ} from the mode's ladder, and a Taylor
/// remainder shorter than δ finishes (ρ·r ≤ 1/2, the same rule as every
/// other Taylor step). Each rung is computed once per mode, so a state
/// costs at most as many products with a vector as the ladder has rungs,
/// where an exponential of σ costs about that many products of matrices.
/// Exact to rounding, as `propagate::expm`: in the unit test the two agree
/// to 1e-11 of the state's scale over a span of 2·10⁵ time constants, and
/// the ladder is within 4e-12 of a 50-digit reference where one f64
/// exponential is within 2.1e-12.
struct Ladder<'a> {
    m: &'a DMatrix<f64>,
    w: &'a [f64],
    rungs: &'a [DMatrix<f64>],
    step: f64,
}

/// Rungs a ladder may have: σ/δ up to 2⁶⁰.
const MAX_RUNGS: usize = 60;

impl<'a> Ladder<'a> {
    /// The ladder of `mode` long enough for σ up to `span`, extending the
    /// cached rungs `rungs` as needed; `None` where the mode has no finite
    /// rate or the span needs more than [`MAX_RUNGS`].
    fn reach(mode: &'a Mode, rungs: &'a mut Vec<DMatrix<f64>>, span: f64) -> Option<Ladder<'a>> {
        if !(mode.rate > 0.0 && mode.rate.is_finite()) {
            return None;
        }
        let step = propagate::TAYLOR_REACH / mode.rate;
        let q = (span / step).floor();
        if q.is_nan() || q >= (1u64 << MAX_RUNGS) as f64 {
            return None;
        }
        let need = (64 - (q as u64).leading_zeros()) as usize;
        // Each rung its own exponential: squaring the one below doubles
        // its relative error at every rung (3.6e-11 after 20 rungs in the
        // unit test, where one exponential is 2e-12 from the true state).
        while rungs.len() < need {
            let i = rungs.len() as i32;
            rungs.push(propagate::expm(&mode.m, step * 2f64.powi(i)));
        }
        Some(Ladder {
            m: &mode.m,
            w: &mode.weight,
            rungs,
            step,
        })
    }

    /// The state e^{Mσ}·z.
    fn at(&self, z: &[f64], sigma: f64) -> Vec<f64> {
        let q = (sigma / self.step).floor().max(0.0);
        let r = sigma - q * self.step;
        let mut cur = DVector::from_column_slice(z);
        let mut next = DVector::zeros(z.len());
        let mut bits = q as u64;
        let mut i = 0;
        while bits != 0 {
            if bits & 1 == 1 {
                propagate::matvec(&self.rungs[i], cur.as_slice(), next.as_mut_slice());
                std::mem::swap(&mut cur, &mut next);
            }
            bits >>= 1;
            i += 1;
        }
        propagate::taylor(self.m, self.w, &cur, r)
            .as_slice()
            .to_vec()
    }
}

/// The state e^{Mσ}·z, from the ladder where there is one.
fn exact_at(ladder: Option<&Ladder<'_>>, m: &DMatrix<f64>, z: &[f64], sigma: f64) -> Vec<f64> {
    if let Some(l) = ladder {
        return l.at(z, sigma);
    }
    let e = propagate::expm(m, sigma);
    let mut out = vec![0.0; z.len()];
    propagate::matvec(&e, z, &mut out);
    out
}

/// Where guard `g` first goes below zero in a stiff sub-interval of length
/// `d` from state `za` (its end state `zb`), as σ from its start: through
/// its end value, or below zero at an interior minimum. On exact states
/// (`Ladder`, with the mode's cached `rungs`).
fn stiff_root(
    mode: &Mode,
    rungs: &mut Vec<DMatrix<f64>>,
    g: &Guard,
    (za, zb): (&[f64], &[f64]),
    d: f64,
    scales: Scales,
) -> Option<f64> {
    let (ga, sa) = g.srow.dot_and_magnitude(za);
    let (gb, sb) = g.srow.dot_and_magnitude(zb);
    let tol = scales.guard_zero(&g.kind, sa.max(sb));
    // Derivatives within rounding of their terms count as zero.
    let (da, dsa) = g.sdrow.dot_and_magnitude(za);
    let (db, dsb) = g.sdrow.dot_and_magnitude(zb);
    let noise = |s: f64| 64.0 * f64::EPSILON * s;
    let crosses = gb < -tol;
    let dips = da < -noise(dsa) && db > noise(dsb);
    if !crosses && !dips {
        return None;
    }
    let ladder = Ladder::reach(mode, rungs, d);
    let at = |sigma: f64| exact_at(ladder.as_ref(), &mode.m, za, sigma);
    let value = |sigma: f64| dot_slices(&g.row, &at(sigma));
    if crosses {
        return Some(exact_root(value, 0.0, d, ga, gb));
    }
    // A dip: the minimum where the derivative turns upward, by Illinois
    // steps on g′ kept inside the bracket (bisection every fourth step).
    // The minimum's place is needed to about √ε of the sub-interval only:
    // there g″·Δ²/2 ≤ ρ²d²·ε/2 of the guard's terms (ρd ≤ 1/2), below
    // rounding of g itself. Any point already below −tol is a crossing.
    let (mut a, mut b) = (0.0, d);
    let (mut fa, mut fb) = (dot_slices(&g.drow, za), dot_slices(&g.drow, zb));
    if !(fa < 0.0 && fb > 0.0) {
        // The scaled and plain rows disagree on a sign within rounding:
        // no interior minimum beyond the ends.
        return None;
    }
    let width = d * f64::EPSILON.sqrt();
    let mut side = 0i8;
    let mut smin = 0.5 * d;
    let mut gm = f64::INFINITY;
    for i in 0..200 {
        let m = illinois_point(i, (a, b), (fa, fb));
        if m <= a || m >= b {
            break;
        }
        let z = at(m);
        let (gz, dz) = (dot_slices(&g.row, &z), dot_slices(&g.drow, &z));
        if gz < gm {
            (smin, gm) = (m, gz);
        }
        if gm < -tol {
            break;
        }
        if dz < 0.0 {
            (a, fa) = (m, dz);
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        } else {
            (b, fb) = (m, dz);
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        }
        if b - a <= width {
            break;
        }
    }
    (gm < -tol).then(|| exact_root(value, 0.0, smin, ga, gm))
}

/// Earliest crossing so far: (τ, (diode bits, comparator bits), σ in
/// its sub-interval); the others at the same instant fire with it.
type Found = Option<(f64, (u64, u64), f64)>;

/// Adds a guard's crossing at `tau` (σ = `s` in its sub-interval) to the
/// earliest found so far in an interval of length `h`.
fn merge(found: Found, tau: f64, bit: (u64, u64), s: f64, h: f64) -> Found {
    match found {
        Some((t, b, sg)) if same_instant(t, tau, h) => Some((
            t.min(tau),
            (b.0 | bit.0, b.1 | bit.1),
            if tau < t { s } else { sg },
        )),
        Some((t, b, sg)) if t < tau => Some((t, b, sg)),
        _ => Some((tau, bit, s)),
    }
}

/// The guard polynomials of a mode over one cached interval length h:
/// for guard g and term k the row q = r·(Mh)ᵏ/k!, so that the guard's
/// coefficients at start state z are q·z, without the Taylor vectors.
pub(super) struct GuardPolys {
    bits: u64,
    /// Per guard: one row of n_z per Taylor term (beyond them
    /// ‖(Mh)ᵏ/k!‖∞ ≤ 1e-18), and Σₖ|qₖ| (one row: the scale of
    /// the guard's terms at z is its product with |z|).
    rows: Vec<Vec<f64>>,
    abs: Vec<Vec<f64>>,
    /// Per guard: how many of its rows count, up to the last with an
    /// entry above [`TERM_FLOOR`] of the same entry of `abs`. The terms
    /// past it add at most 2⁻⁶⁰ of the guard's scale |q|·|z| each (the
    /// magnitude its zero band is 1e-10 of), below the rounding of the
    /// evaluation itself: the series of the matrix is cut where its norm
    /// falls below 1e-18, but a guard sees only the dynamics that reach
    /// it, and the current of a discontinuous buck's diode needs a dozen
    /// terms where the matrix, with its 1/L entries next to its 1/C ones,
    /// needs thirty. (A guard affine in time, r·M² = 0, keeps two; one
    /// that cannot move keeps one.)
    kept: Vec<usize>,
    /// Per guard: its latest crossings over this length, where the next
    /// search starts (see [`Hints`]).
    hints: Vec<Hints>,
    /// e^{M·t₀} at an earlier crossing t₀ into this length, with its
    /// polynomial in t − t₀: the state at a crossing t within
    /// [`NEAR_REACH`](crate::near::NEAR_REACH)/‖M‖₁ of it is a product
    /// per term and Horner's rule, or first order about a nearer
    /// polynomial once the crossing settles (`NearAnchor`,
    /// `Shortcuts::nearby_lengths`).
    anchor: Option<NearAnchor>,
    /// The latest crossing whose state was formed here (NaN before one),
    /// and the crossings since the anchor was made: an anchor is made
    /// only where crossings move slowly enough for it to serve the next,
    /// and one replaces another only after [`ANCHOR_PAYBACK`] crossings
    /// (`anchored_state`).
    last_t: f64,
    since_anchor: u32,
}

/// Crossings of a length after which a new anchor (one exponential) may
/// replace the one before where that one no longer serves: a crossing
/// that drifts out of reach every few periods (a converter starting up)
/// took an exponential each time, tens of times the Taylor terms of the
/// crossing's own length.
const ANCHOR_PAYBACK: u32 = 32;

/// The two latest crossings σ of one guard over one cached length,
/// for the next search to start from where the crossing is expected: the
/// latest moved on by the step between the two, in ulps. The result does
/// not depend on the start where the crossing is clean; a settled
/// converter's crossing drifts by a steady number of ulps a period (60 in
/// the phases bench's discontinuous buck on its steady state, which its
/// latest crossing alone never caught), with a few ulps of rounding on
/// top, and one settling moves by a steady fraction of itself, so that
/// the step leaves a thousandth of its error to Newton's method.
#[derive(Clone, Copy, Debug, Default)]
struct Hints {
    latest: Option<f64>,
    before: Option<f64>,
    /// The reciprocal of the guard's slope at the latest crossing found
    /// on a nearby length's polynomial (0 before one): `near_root`.
    inv_slope: f64,
}

impl Hints {
    fn push(&mut self, s: f64) {
        self.before = self.latest;
        self.latest = Some(s);
    }

    /// Where the next crossing is expected: the latest one plus the
    /// step from the one before (both in (0, 1): the same sign, so their
    /// bits are ordered as they are), the latest where the step leaves
    /// (0, 1), none before a crossing.
    fn expected(&self) -> Option<f64> {
        let latest = self.latest?;
        let Some(before) = self.before else {
            return Some(latest);
        };
        let (l, b) = (latest.to_bits() as i64, before.to_bits() as i64);
        let x = l
            .checked_add(l - b)
            .map(|x| f64::from_bits(x.max(0) as u64))
            .filter(|&x| x > 0.0 && x < 1.0);
        Some(x.unwrap_or(latest))
    }
}

/// The smallest part of a guard's term magnitudes a Taylor term of its
/// polynomial may carry and still be kept (see `GuardPolys::kept`).
const TERM_FLOOR: f64 = 1.0 / (1u64 << 60) as f64;

impl GuardPolys {
    fn build(mode: &Mode, h: f64) -> GuardPolys {
        let n = mode.m.nrows();
        let mh = &mode.m * h;
        let mut t = DMatrix::<f64>::identity(n, n);
        let mut rows: Vec<Vec<f64>> = vec![vec![]; mode.guards.len()];
        let mut terms = 0;
        for k in 0..60 {
            if k > 0 {
                t = &mh * &t / k as f64;
            }
            for (g, r) in mode.guards.iter().zip(rows.iter_mut()) {
                let gr = DVector::from_column_slice(&g.row);
                r.extend((t.transpose() * gr).iter().copied());
            }
            terms = k + 1;
            let norm = t
                .row_iter()
                .map(|row| row.iter().map(|v| v.abs()).sum::<f64>())
                .fold(0.0, f64::max);
            if norm == 0.0 || (k >= 3 && norm <= 1e-18) {
                break;
            }
        }
        let abs = rows
            .iter()
            .map(|r| {
                let mut sum = vec![0.0; n];
                for q in r.chunks_exact(n.max(1)) {
                    for (s, v) in sum.iter_mut().zip(q) {
                        *s += v.abs();
                    }
                }
                sum
            })
            .collect();
        let kept = rows
            .iter()
            .zip(&abs)
            .map(|(r, ab)| {
                r.chunks_exact(n.max(1))
                    .take(terms)
                    .rposition(|q| q.iter().zip(ab).any(|(v, a)| v.abs() > TERM_FLOOR * a))
                    .map_or(1, |k| k + 1)
            })
            .collect();
        GuardPolys {
            bits: h.to_bits(),
            hints: vec![Hints::default(); rows.len()],
            anchor: None,
            last_t: f64::NAN,
            since_anchor: 0,
            rows,
            abs,
            kept,
        }
    }
}

impl Simulator {
    /// [`Simulator::locate_in`] over one Taylor reach of a length the
    /// schedule repeats (its exponential is cached), with the guard
    /// polynomials of that length cached too: coefficients are dot
    /// products with the start state, and the state at a crossing comes
    /// from a cached exponential of the crossing's own length when that
    /// length came back, else from the Taylor vectors. `None` when the
    /// length is not a cached one (the caller then expands as usual).
    fn locate_cached(&mut self, mode: &Mode, h: f64) -> Option<Option<Crossing>> {
        let mi = self.mode as usize;
        let bits = h.to_bits();
        let cache = &mut self.modes.caches[mi];
        // The polynomials searched last in this mode first (polynomials are
        // only ever added, and only for scheduled lengths).
        let pi = match cache.polys.get(cache.last_polys) {
            Some(p) if p.bits == bits => cache.last_polys,
            _ => {
                if !cache.scheduled.iter().any(|(b, _)| *b == bits) {
                    return None;
                }
                let pi = match cache.polys.iter().position(|p| p.bits == bits) {
                    Some(i) => i,
                    None if cache.polys.len() < 16 => {
                        cache.polys.push(GuardPolys::build(mode, h));
                        cache.polys.len() - 1
                    }
                    None => return None,
                };
                cache.last_polys = pi;
                pi
            }
        };
        let scales = self.update_scales();
        let z = self.z.as_slice();
        let mut za_abs = std::mem::take(&mut self.buf.za);
        for (a, &v) in za_abs.as_mut_slice().iter_mut().zip(z) {
            *a = v.abs();
        }
        // The coefficients in the scratch buffer, long enough for any
        // guard (at most 60 terms, `GuardPolys::build`): each search
        // writes the ones it reads (a stack array cleared at every call
        // cost as much as the products that fill it).
        let mut coef = std::mem::take(&mut self.buf.coef);
        if coef.len() < 64 {
            coef.resize(64, 0.0);
        }
        let nearby = self.shortcuts.nearby_lengths;
        let gp = &mut self.modes.caches[mi].polys[pi];
        let mut found: Found = None;
        // The crossings found, to start the next search from (a few are
        // enough: converters have a handful of guards).
        let mut hits = [(0usize, 0.0f64); 4];
        let mut n_hits = 0;
        // The terms of the anchor's polynomial at z, once a guard needs
        // them (`near_crossing`).
        let mut near_w = std::mem::take(&mut self.buf.near);
        let mut terms: Option<NearTerms> = None;
        for (gi, g) in mode.guards.iter().enumerate() {
            let scale = dot_slices(&gp.abs[gi], za_abs.as_slice());
            let tol = scales.guard_zero(&g.kind, scale);
            let hints = gp.hints[gi];
            let expected = hints.expected();
            let near = match (expected, hints.latest) {
                (Some(hint), Some(latest)) if nearby => near_crossing(
                    mode,
                    gi,
                    (z, self.z_next.as_slice()),
                    (h, hint, (hint - latest).abs() * h, tol),
                    (gp.anchor.as_mut(), &mut gp.hints[gi].inv_slope),
                    (&mut terms, &mut near_w),
                ),
                _ => None,
            };
            let root = near
                .inspect(|_| self.stats.near_crossings += 1)
                .or_else(|| {
                    let coef = &mut coef[..gp.kept[gi]];
                    propagate::rows_dot(&gp.rows[gi], z, coef);
                    guard_root(coef, tol, expected).map(|s| (s * h, s))
                });
            if let Some((t, s)) = root {
                found = merge(found, t, bits_of(g), s, h);
                if n_hits < hits.len() {
                    hits[n_hits] = (gi, s);
                    n_hits += 1;
                }
            }
        }
        for &(gi, s) in &hits[..n_hits] {
            gp.hints[gi].push(s);
        }
        self.buf.za = za_abs;
        self.buf.coef = coef;
        let Some((t, b, _)) = found else {
            self.buf.near = near_w;
            return Some(None);
        };
        // A crossing at the very end belongs to the scheduled instant
        // (`z_next` still holds the state at h).
        if at_end(t, h) {
            self.buf.near = near_w;
            return Some(Some(crossing(h, b)));
        }
        // The state at the crossing from the terms a guard's search
        // formed, where they serve it, else from the anchor.
        let from_terms = terms.filter(|nt| nt.serves(t)).is_some_and(|nt| {
            nt.state(
                &near_w,
                t - nt.h0,
                (self.z_next.as_mut_slice(), self.buf.z_try.as_mut_slice()),
                &mode.weight,
            )
        });
        self.buf.near = near_w;
        if from_terms {
            self.stats.near_steps += 1;
        } else if nearby {
            self.anchored_state(mode, pi, t);
        } else if !self.modes.caches[mi].advance_repeated(
            &mode.m,
            t,
            (self.z.as_slice(), self.z_next.as_mut_slice()),
            &mut self.stats,
            self.shortcuts.repeated_lengths,
        ) {
            // The state at the crossing by Taylor terms over the
            // crossing's own length, into `z_next`: a clamp 10 ns into a
            // span of 2.45 µs needs a few terms where the span's
            // expansion evaluated at σ needed all of the span's.
            mode.advance_into(
                self.z.as_slice(),
                t,
                self.z_next.as_mut_slice(),
                &mut self.buf.advance,
            );
        }
        Some(Some(crossing(t, b)))
    }
}

/// Guard `gi`'s crossing through the end of a cached length h, from the
/// polynomial of the length's anchor about a centre near the expected
/// crossing (`hint`, σ; `spread`, how far the crossing may lie from it,
/// in time): where the guard starts at or above zero and ends below its
/// zero band (`tol`) between the states `(z, z_end)`, its coefficients
/// are the guard's row times the anchor's terms at z (a few products of
/// z's length, formed once per search into `near`, for the state at the
/// crossing too), and `near_root` finds the crossing on them. Where the
/// interval's own polynomial needs a dozen terms and a search over
/// (0, 1), this needs two or three and one Newton step: the same instant
/// to the rounding of the two polynomials (both are the guard's value to
/// a few ulps of its terms' magnitude). `None` (the caller then searches
/// as usual) without an anchor serving the hint, where the guard does not
/// cross through the end, or where the window misses or the terms do not
/// serve the answer.
fn near_crossing(
    mode: &Mode,
    gi: usize,
    (z, z_end): (&[f64], &[f64]),
    (h, hint, spread, tol): (f64, f64, f64, f64),
    (anchor, inv_slope): (Option<&mut NearAnchor>, &mut f64),
    (terms, near): (&mut Option<NearTerms>, &mut Vec<f64>),
) -> Option<(f64, f64)> {
    let (line, g) = (&mode.guard_lines[gi], &mode.guards[gi]);
    if !(line.value(z, || g).0 >= 0.0 && line.value(z_end, || g).0 < -tol) {
        return None;
    }
    let th = hint * h;
    let anchor = anchor.filter(|a| a.serves(th))?;
    let nt = match *terms {
        Some(nt) => nt,
        None => *terms.insert(anchor.terms_near(&mode.m, th, spread, z, near)),
    };
    let n = z.len();
    let mut c = [0.0; 6];
    let c = &mut c[..=nt.last];
    for (k, ck) in c.iter_mut().enumerate() {
        *ck = line.value(&near[k * n..(k + 1) * n], || g).0;
    }
    near_root(c, nt.h0, h, th - nt.h0, inv_slope)
        .filter(|&t| nt.serves(t))
        .map(|t| (t, t / h))
}

impl Simulator {
    /// The state at a crossing `t` into the cached length of
    /// `polys[pi]`, into `z_next`: from the length's anchor (e^{M·t₀} of
    /// an earlier crossing) where t lies within its reach (first order
    /// within rounding of t₀, else its polynomial in t − t₀, else Taylor
    /// terms of t − t₀), else from a fresh exponential of t, which becomes
    /// the anchor. The reach of [`NearExp`] is where a crossing's own
    /// length would need eight or more Taylor terms in a converter whose
    /// crossing lies a tenth of its time constants into the interval; a
    /// converter that settles moves its crossing by about 1e-7 of it a
    /// period (the discontinuous buck of the phases bench), so one
    /// exponential serves thousands of periods. Exact to rounding every
    /// way, as the Taylor vectors of t are
    /// (`a_moving_turn_off_is_advanced_from_an_anchor` compares them to
    /// 1e-12 of the states' scale).
    fn anchored_state(&mut self, mode: &Mode, pi: usize, t: f64) {
        let mi = self.mode as usize;
        let gp = &mut self.modes.caches[mi].polys[pi];
        let z = self.z.as_slice();
        let moved = (t - gp.last_t).abs();
        gp.last_t = t;
        gp.since_anchor = gp.since_anchor.saturating_add(1);
        let Some(anchor) = gp.anchor.as_mut().filter(|a| a.serves(t)) else {
            let slow = moved * propagate::norm1(&mode.m) <= 0.5 * NEAR_REACH;
            if !slow || (gp.anchor.is_some() && gp.since_anchor < ANCHOR_PAYBACK) {
                // The crossing moved by more than half a reach since the
                // one before (or this is the first), so an exponential
                // here would not serve the next one either, or the anchor
                // it would replace was made lately: the Taylor terms of
                // the crossing's own length, as without the shortcut (a
                // two-phase buck starting up made an exponential almost
                // every period and ran 40 % slower than without it).
                mode.advance_into(z, t, self.z_next.as_mut_slice(), &mut self.buf.advance);
                return;
            }
            self.stats.exponentials += 1;
            gp.since_anchor = 0;
            let near = NearExp::new(&mode.m, t);
            propagate::matvec(&near.phi, z, self.z_next.as_mut_slice());
            gp.anchor = Some(NearAnchor::new(near));
            return;
        };
        let scratch = (self.buf.z_try.as_mut_slice(), self.buf.za.as_mut_slice());
        let out = self.z_next.as_mut_slice();
        match anchor.advance(&mode.m, t, (z, out), &mode.weight, scratch) {
            Served::Exact => self.stats.cache_hits += 1,
            Served::Near => self.stats.near_steps += 1,
            Served::Refused => {
                // The Taylor terms of t − t₀ about the nearer polynomial's
                // centre.
                self.stats.near_steps += 1;
                let near = anchor.nearer(t);
                propagate::matvec(&near.phi, z, self.buf.z_try.as_mut_slice());
                mode.advance_into(
                    self.buf.z_try.as_slice(),
                    t - near.h0,
                    self.z_next.as_mut_slice(),
                    &mut self.buf.advance,
                );
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compile::Compiled;
    use crate::mode::ModeKey;

    /// A crossing that drifts by a steady number of ulps a period is
    /// expected where it lands; the first has no expectation, the second
    /// the first; a step that would leave (0, 1) falls back to the latest.
    #[test]
    fn a_drifting_crossing_is_expected_where_it_lands() {
        let mut h = Hints::default();
        assert_eq!(h.expected(), None);
        let s0 = 0.4375f64;
        let at = |k: i64| f64::from_bits((s0.to_bits() as i64 - 60 * k) as u64);
        h.push(at(0));
        assert_eq!(h.expected(), Some(at(0)));
        for k in 1..10 {
            h.push(at(k));
            assert_eq!(h.expected(), Some(at(k + 1)), "period {k}");
        }
        let mut edge = Hints::default();
        edge.push(0.5);
        edge.push(0.999_999_999_999);
        assert_eq!(edge.expected(), Some(0.999_999_999_999));
        let mut low = Hints::default();
        low.push(0.5);
        low.push(1e-300);
        assert_eq!(low.expected(), Some(1e-300));
    }

    /// A discontinuous buck's diode current over its 3 µs off interval
    /// keeps the terms of its own dynamics (the output filter's, ωh ≈
    /// 0.1), fewer than the matrix series has, and the dropped ones change
    /// its coefficients' sum by under 2⁻⁵⁸ of its scale at any state:
    /// below the rounding of its evaluation (the bound of
    /// `GuardPolys::kept`; common practice for a truncated series).
    #[test]
    fn a_guard_keeps_the_terms_its_own_dynamics_need() {
        use crate::mode::testing::{built, state};
        let c = crate::test_util::light_buck(0.0);
        // Switch off, diode on: the diode carries the inductor current.
        let (cc, mode) = built(&c, 0, 1);
        let h = 3e-6;
        let gp = GuardPolys::build(&mode, h);
        let n = mode.m.nrows();
        let terms = gp.rows[0].len() / n;
        assert!(gp.kept[0] < terms, "kept {} of {terms} terms", gp.kept[0]);
        let mut z = vec![0.0; n];
        z[state(&cc, "L1.current")] = 0.8;
        z[state(&cc, "Cout.voltage")] = 8.5;
        let sum = |k: usize| -> f64 {
            gp.rows[0]
                .chunks_exact(n)
                .take(k)
                .map(|q| dot_slices(q, &z))
                .sum()
        };
        let scale = dot_slices(&gp.abs[0], &z.iter().map(|v| v.abs()).collect::<Vec<_>>());
        assert!((sum(terms) - sum(gp.kept[0])).abs() <= scale / (1u64 << 58) as f64);
    }

    /// The ladder's state at σ equals e^{Mσ}·z from one exponential, to
    /// the conditioning of the problem, across a stiff span: a 1 Ω source resistance into a
    /// 10 nF capacitor (τ = 10 ns) beside a 1 mH / 10 µF tank, over up to
    /// 2 ms, a ratio of 2·10⁵ (the semigroup property e^{M(a+b)} =
    /// e^{Ma}·e^{Mb}; common practice).
    #[test]
    fn ladder_states_equal_one_exponential() {
        let c = fluxstep_netlist::Circuit::builder()
            .voltage_source("V1", "in", "gnd", 10.0)
            .resistor("Rs", "in", "a", 1.0)
            .capacitor("C1", "a", "gnd", 10e-9)
            .resistor("R2", "a", "b", 100.0)
            .inductor("L1", "b", "c", 1e-3)
            .capacitor("C2", "c", "gnd", 10e-6)
            .build()
            .expect("valid");
        let cc = Compiled::compile(&c).expect("compiles");
        let mode = Mode::build(
            &cc,
            ModeKey {
                switches: 0,
                diodes: 0,
                ramps: 0,
            },
        )
        .expect("builds");
        let mut z = vec![0.0; cc.n_z()];
        for (i, v) in z.iter_mut().enumerate().take(cc.n_x) {
            *v = 0.3 + i as f64;
        }
        for (i, x) in cc.x0.iter().enumerate() {
            z[i] += x;
        }
        z[cc.n_x] = 1.0;
        let mut rungs = vec![];
        let span = 2e-3;
        let ladder = Ladder::reach(&mode, &mut rungs, span).expect("a finite rate");
        assert!(ladder.rungs.len() > 15, "{} rungs", ladder.rungs.len());
        // Against the state at σ = 1.2360679775000002e-3 s computed with
        // 50 significant digits (mpmath's Padé exponential of the same M):
        // within 4e-12, where one f64 exponential is 2.1e-12 away (the
        // problem's own conditioning, ‖M‖σ ≈ 1e5).
        #[allow(clippy::excessive_precision)] // the digits as computed
        let reference = [
            0.010_564_634_071_169_371_543,
            -0.010_564_528_424_839_331_301,
            1.056_452_949_197_397_709_9,
        ];
        let at = ladder.at(&z, 1.236_067_977_500_000_2e-3);
        for (x, r) in at.iter().zip(reference) {
            assert!((x - r).abs() <= 4e-12 * r.abs().max(1.0), "{x} vs {r}");
        }
        let scale = z.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for k in 0..200 {
            let sigma = span * ((k as f64 * 0.618_033_988_75) % 1.0);
            let a = ladder.at(&z, sigma);
            let b = exact_at(None, &mode.m, &z, sigma);
            for (x, y) in a.iter().zip(&b) {
                assert!((x - y).abs() <= 1e-11 * scale, "σ = {sigma:e}: {x} vs {y}");
            }
        }
    }
}
