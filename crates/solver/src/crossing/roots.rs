//! Root finders of event location and measurement: on a guard's
//! polynomial in σ ∈ [0, 1] (`guard_root`, `root_in`, `stationary`), on an
//! exact solution evaluated at will (`exact_root`, stiff spans), and on a
//! piece's derivative (`derivative_bracket`, the extremes of `measure`).
//! Each returns the first representable point at or past what it looks
//! for, so that a located instant never sits before its crossing.

use crate::propagate;

/// Where the guard polynomial with coefficients `coef` (σ ∈ [0, 1])
/// first goes below −`tol`: through its end value, or below zero at an
/// interior minimum (a dip and back).
///
/// `hint`, if any, is where the crossing is expected (extrapolated from
/// the crossings of earlier periods). Where p < 0 there and p ≥ 0 at the
/// point below, the hint is the answer, as `root_in` defines it: a
/// settled crossing that has not moved, found in the time of one
/// evaluation. Otherwise one Newton step from the hint, which from a few
/// ulps away (a settled converter's rounding jitter) or a thousandth of a
/// period's drift away (one that settles) lands within rounding of the
/// crossing, and the [`WINDOW`] points around where it lands, evaluated
/// together: the first of them below zero, with those under it at or
/// above zero, is the answer. Two evaluations in a row where the search
/// takes four; where neither holds, the search, from the window's end
/// nearest the crossing.
pub(crate) fn guard_root(coef: &[f64], tol: f64, hint: Option<f64>) -> Option<f64> {
    // p(0) is the first coefficient (the evaluation at 0 gives it exactly).
    let g0 = coef.first().copied().unwrap_or(0.0);
    // The value alone first (`poly` gives the same bits with the
    // derivative, which only a dip needs).
    let (gb, known) = match hint.filter(|&h| h > 0.0 && h < 1.0) {
        Some(h) => {
            let below = f64::from_bits(h.to_bits() - 1);
            let [gb, at, under] = propagate::poly_values(coef, [1.0, h, below]);
            // The slope at the hint for Newton's step, before the branches
            // on the values: the hint is the answer in a fifth of the
            // searches of a settled converter, and the slope's chain of
            // products, started here, runs beside the values' chains
            // instead of after them.
            let slope = propagate::poly_slope(coef, h);
            let through = gb < -tol && g0 >= 0.0;
            if through && at < 0.0 && under >= 0.0 {
                return Some(h);
            }
            let mut known = (h, at);
            // Only a crossing through the end is looked for here (a dip
            // takes `stationary` below).
            let newton = through.then(|| h - at / slope);
            if let Some(points) = newton.and_then(window_at) {
                let v = propagate::poly_values(coef, points);
                // The usual window changes sign once: its points at or
                // above zero, counted without a branch, are then the
                // first ones (where the answer falls varies from period
                // to period, and a loop that stops there would mispredict
                // its exit); any other window is read point by point.
                let k = v.iter().filter(|&&p| p >= 0.0).count();
                let first_negative = if v[..k].iter().all(|&p| p >= 0.0) {
                    (k < WINDOW).then_some(k)
                } else {
                    v.iter().position(|&p| p < 0.0)
                };
                if let Some(i @ 1..) = first_negative {
                    return Some(points[i]);
                }
                // The crossing lies past the window's top (all of it at
                // or above zero) or below its bottom.
                let end = if first_negative.is_none() {
                    WINDOW - 1
                } else {
                    0
                };
                known = (points[end], v[end]);
            }
            (gb, Some(known))
        }
        None => (propagate::poly_value(coef, 1.0), None),
    };
    let da = coef.get(1).copied().unwrap_or(0.0);
    if gb < -tol {
        Some(search(
            coef,
            (0.0, 1.0),
            (g0, gb),
            known.map(|k| k.0),
            known,
        ))
    } else if da < 0.0 && propagate::poly(coef, 1.0).1 > 0.0 {
        // An interior minimum: find it, then look below zero there.
        let smin = stationary(coef);
        let gm = propagate::poly_value(coef, smin);
        (gm < -tol).then(|| root_in(coef, 0.0, smin, g0, gm, hint))
    } else {
        None
    }
}

/// The crossing of a guard near t₀, as a time from the start of its
/// interval, from its polynomial in δ = t − t₀ (`c`: the guard at t₀ + δ
/// is Σ cₖδᵏ, a few terms, `NearTerms`): one Newton step from `start` (a
/// δ; first order needs none), then the [`WINDOW`] representable times
/// around where it lands, each evaluated at δ = t − t₀ (exact where t
/// and t₀ lie within a factor of two, Sterbenz's lemma): the first below
/// zero, with those under it at or above zero, as `guard_root`'s window
/// gives it in σ. The crossing's instant is then a representable time
/// where the polynomial is below zero and the one under it is not, so it
/// never sits before its crossing. `None` where the window does not hold
/// the change of sign or leaves (0, `h`); the caller then searches the
/// interval's own polynomial.
pub(crate) fn near_root(
    c: &[f64],
    t0: f64,
    h: f64,
    start: f64,
    inv_slope: &mut f64,
) -> Option<f64> {
    // First order (a settled crossing): the root at once, from the
    // reciprocal of the slope the last search formed (the slope moves by
    // a tiny fraction a period, and the estimate only places the window:
    // the division, on the path from the state to the instant, is taken
    // only where the window misses); the slope's own reciprocal, for the
    // next search, beside it.
    if let [c0, c1] = *c {
        let r = *inv_slope;
        *inv_slope = 1.0 / c1;
        if r != 0.0 {
            if let Some(t) = window_root(c, t0, h, t0 - c0 * r) {
                return Some(t);
            }
        }
        return window_root(c, t0, h, t0 - c0 / c1);
    }
    let (v, d) = propagate::poly(c, start);
    window_root(c, t0, h, t0 + (start - v / d))
}

/// [`near_root`]'s window about `t`.
#[inline(always)]
fn window_root(c: &[f64], t0: f64, h: f64, t: f64) -> Option<f64> {
    if !(t > 0.0 && t < h) {
        return None;
    }
    let base = t.to_bits().checked_sub(WINDOW_BELOW)?;
    let points: [f64; WINDOW] = std::array::from_fn(|k| f64::from_bits(base + k as u64));
    let d = points.map(|p| p - t0);
    let v = match *c {
        [c0, c1] => d.map(|x| c0 + x * c1),
        _ => propagate::poly_values(c, d),
    };
    // The points at or above zero as bits, without a branch each: they
    // must be the first k, 1 ≤ k < WINDOW (a run of low bits).
    let mut above = 0u32;
    for (i, &p) in v.iter().enumerate() {
        above |= u32::from(p >= 0.0) << i;
    }
    let k = above.count_ones() as usize;
    let found = points[k.min(WINDOW - 1)];
    (above & (above + 1) == 0 && (1..WINDOW).contains(&k) && found < h).then_some(found)
}

/// Points `guard_root` evaluates together around a Newton estimate of
/// the crossing: [`WINDOW_BELOW`] below it, the estimate and those above.
/// On the phases bench's discontinuous buck (20,000 periods, settled or
/// settling) the answer was the estimate or one of the two points above
/// it in all but 58 of 36,000 windows, and the point below it in 51 of
/// those; six points cost what five do on two-wide vectors.
pub(crate) const WINDOW: usize = 6;

/// Points of the window below the estimate.
const WINDOW_BELOW: u64 = 2;

/// The [`WINDOW`] consecutive points around `s`, or `None` where they do
/// not all lie strictly inside (0, 1) (or `s` is not finite).
fn window_at(s: f64) -> Option<[f64; WINDOW]> {
    if !(s > 0.0 && s < 1.0) {
        return None;
    }
    let base = s.to_bits().checked_sub(WINDOW_BELOW)?;
    let mut points = [0.0; WINDOW];
    for (k, p) in points.iter_mut().enumerate() {
        *p = f64::from_bits(base + k as u64);
    }
    (points[0] > 0.0 && points[WINDOW - 1] < 1.0).then_some(points)
}

/// Most points [`root_in`] walks, an ulp at a time, from where Newton's
/// steps stop to the first point past the crossing, before it bisects.
const WALK_STEPS: usize = 16;

/// Points of that walk evaluated together.
const WALK_BATCH: usize = 4;

/// Most coefficients whose derivative [`root_in`] forms once (longer
/// polynomials take `propagate::poly` at each evaluation).
const DERIVATIVE_TERMS: usize = 32;

/// k + 1 for k = 0, 1, …: the factors of the derivative's coefficients,
/// exact in f64.
const FACTORS: [f64; DERIVATIVE_TERMS] = {
    let mut f = [0.0; DERIVATIVE_TERMS];
    let mut k = 0;
    while k < DERIVATIVE_TERMS {
        f[k] = (k + 1) as f64;
        k += 1;
    }
    f
};

/// Root of the polynomial in [lo, hi] where p(lo) ≥ 0 > p(hi): Newton
/// from the secant guess, kept inside a shrinking bracket (bisection when a
/// step would leave it), stopped when the step falls to a few ulps; then the
/// point is nudged, an ulp at a time (up from a point where p ≥ 0, down from
/// one where p < 0), to a point where p < 0 whose predecessor has p ≥ 0, so
/// the returned instant is at or just after the crossing.
/// `fa` and `fb` are p(lo) and p(hi), which the caller has already.
/// A `hint` strictly inside the bracket replaces the secant guess.
pub(crate) fn root_in(c: &[f64], lo: f64, hi: f64, fa: f64, fb: f64, hint: Option<f64>) -> f64 {
    search(c, (lo, hi), (fa, fb), hint, None)
}

/// [`root_in`], where `known` may give a point and p there (the same
/// bits as `propagate::poly_value`), which is not evaluated again if the
/// hint is that point.
fn search(
    c: &[f64],
    (lo, hi): (f64, f64),
    (fa, fb): (f64, f64),
    hint: Option<f64>,
    known: Option<(f64, f64)>,
) -> f64 {
    let (mut a, mut b) = (lo, hi);
    if fa < 0.0 {
        return a;
    }
    // The derivative's coefficients (k+1)·cₖ₊₁ once, where `propagate::poly`
    // forms them at every evaluation: the same products and the same
    // Horner chains, so the same bits.
    let mut dbuf = [0.0f64; DERIVATIVE_TERMS];
    let dc: &[f64] = if (2..=DERIVATIVE_TERMS).contains(&c.len()) {
        let n1 = c.len() - 1;
        for ((d, &ck), &k) in dbuf[..n1].iter_mut().zip(&c[1..]).zip(&FACTORS[..n1]) {
            *d = k * ck;
        }
        &dbuf[..n1]
    } else {
        &[]
    };
    let poly = |s: f64| -> (f64, f64) {
        if dc.is_empty() {
            propagate::poly(c, s)
        } else {
            (propagate::poly_value(c, s), propagate::poly_value(dc, s))
        }
    };
    let mut s = if fa - fb > 0.0 {
        a + (b - a) * fa / (fa - fb)
    } else {
        0.5 * (a + b)
    };
    // From a hint: one Newton step from it (it narrows the bracket too),
    // which from a few ulps away lands within rounding of the crossing.
    if let Some(h) = hint.filter(|&h| h > a && h < b) {
        let (v, dv) = match known {
            Some((x, v)) if x == h && !dc.is_empty() => (v, propagate::poly_value(dc, h)),
            _ => poly(h),
        };
        if v < 0.0 {
            b = h;
        } else {
            a = h;
        }
        s = if dv != 0.0 { h - v / dv } else { h };
    }
    if !(s > a && s < b) {
        s = 0.5 * (a + b);
    }
    // Below this the sign of p is rounding noise: σ is as good as it gets.
    // Σ|cₖ| in order from −0, as `Iterator::sum` adds (the same bits).
    let mut abs_sum = -0.0;
    for x in c {
        abs_sum += x.abs();
    }
    let noise = 8.0 * f64::EPSILON * abs_sum;
    // The last point evaluated and its value, which the walk below would
    // otherwise evaluate again.
    let mut known = None;
    for _ in 0..100 {
        let (v, dv) = poly(s);
        if v.abs() <= noise {
            known = Some((s, v));
            break;
        }
        if v < 0.0 {
            b = s;
        } else {
            a = s;
        }
        if b - a <= f64::EPSILON * b.max(1e-300) {
            return b;
        }
        let newton = s - v / dv;
        if dv != 0.0 && newton > a && newton < b {
            let step = (newton - s).abs();
            s = newton;
            // σ lies in [0, 1]: an absolute step of a few ulps of 1 is the end.
            if step <= 4.0 * f64::EPSILON {
                break;
            }
        } else {
            s = 0.5 * (a + b);
        }
    }
    // Converged: the first point at or after the crossing. Step up from the
    // estimate an ulp at a time; if rounding noise hides the sign change
    // there, bisect what is left of the bracket.
    let vs = match known {
        Some((x, v)) if x == s => v,
        _ => propagate::poly_value(c, s),
    };
    // The walk's points are known before any is evaluated: they are
    // evaluated WALK_BATCH at a time (`poly_values`, the same bits each),
    // and read in order, as one at a time would; points past the answer
    // are evaluated for nothing.
    if vs < 0.0 {
        // Already past the crossing: step down while the point below is
        // still negative (p(a) ≥ 0 bounds the walk).
        b = b.min(s);
        let mut x = b;
        for _ in 0..WALK_STEPS / WALK_BATCH {
            let mut below = [x; WALK_BATCH];
            let mut y = x;
            for p in &mut below {
                // x > 0 where the point is used (checked below).
                y = f64::from_bits(y.to_bits().saturating_sub(1));
                *p = y;
            }
            let values = propagate::poly_values(c, below);
            for (&below, &v) in below.iter().zip(&values) {
                if x <= 0.0 || below <= a || v >= 0.0 {
                    return x;
                }
                x = below;
            }
        }
        b = x;
    } else {
        a = a.max(s);
        let mut x = a;
        for _ in 0..WALK_STEPS / WALK_BATCH {
            let mut points = [x; WALK_BATCH];
            let mut y = x;
            for p in &mut points {
                *p = y;
                y = f64::from_bits(y.to_bits() + 1);
            }
            let values = propagate::poly_values(c, points);
            for (&x, &v) in points.iter().zip(&values) {
                if x >= b {
                    return b;
                }
                // p(s) ≥ 0 is known (`vs`).
                if x != s && v < 0.0 {
                    return x;
                }
            }
            x = y;
        }
        a = x;
    }
    while b - a > f64::EPSILON * b.max(1e-300) {
        let m = 0.5 * (a + b);
        if m <= a || m >= b {
            break;
        }
        if propagate::poly_value(c, m) < 0.0 {
            b = m;
        } else {
            a = m;
        }
    }
    b
}

/// Where the polynomial's derivative crosses zero upward inside [0, 1]
/// (the caller has checked p′(0) < 0 < p′(1)).
pub(crate) fn stationary(c: &[f64]) -> f64 {
    let dc: Vec<f64> = c
        .iter()
        .enumerate()
        .skip(1)
        .map(|(k, a)| k as f64 * a)
        .collect();
    let (mut a, mut b) = (0.0, 1.0);
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        let (v, _) = propagate::poly(&dc, m);
        if v < 0.0 {
            a = m;
        } else {
            b = m;
        }
        if b - a <= f64::EPSILON {
            break;
        }
    }
    0.5 * (a + b)
}

/// The next trial point of an Illinois search on the bracket [a, b] whose
/// ends have the values `fa` and `fb`: the secant point, or the midpoint
/// on every fourth step (`i` % 4 = 3), where the two values do not have
/// strictly opposite signs, and where the secant point is not inside the
/// open bracket. (The crossing search, the stationary points of
/// measurements and the stiff dip search all step by it.)
pub(crate) fn illinois_point(i: usize, (a, b): (f64, f64), (fa, fb): (f64, f64)) -> f64 {
    let opposite = (fa > 0.0 && fb < 0.0) || (fa < 0.0 && fb > 0.0);
    if i % 4 == 3 || !opposite {
        return 0.5 * (a + b);
    }
    let x = a + (b - a) * fa / (fa - fb);
    if x > a && x < b {
        x
    } else {
        0.5 * (a + b)
    }
}

/// The first representable point past the zero of `f` in [lo, hi], where
/// f(lo) = `fa` ≥ 0 > f(hi) = `fb` (`lo` itself if `fa` < 0): Illinois
/// steps kept inside the bracket, bisection where they stall, until the
/// bracket is an ulp wide.
pub(crate) fn exact_root(f: impl Fn(f64) -> f64, lo: f64, hi: f64, fa: f64, fb: f64) -> f64 {
    if fa < 0.0 {
        return lo;
    }
    let (mut a, mut b, mut fa, mut fb) = (lo, hi, fa, fb);
    let mut side = 0i8;
    for i in 0..400 {
        let m = illinois_point(i, (a, b), (fa, fb));
        if m <= a || m >= b {
            break;
        }
        let fm = f(m);
        if fm < 0.0 {
            b = m;
            fb = fm;
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        } else {
            a = m;
            fa = fm;
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        }
    }
    b
}

/// Narrows a bracket `[lo, hi]` of a sign change of the derivative (sign of
/// `d_lo` at `lo`) until the two ends are adjacent floats or the derivative
/// vanishes; returns the final bracket. Illinois steps kept inside the
/// bracket, with a bisection every fourth step and wherever a step would
/// leave it, so it cannot leave the bracket and needs at most four times
/// bisection's count; near a simple stationary point it takes about ten
/// evaluations where bisection takes sixty. Where the computed derivative
/// changes sign once near the point (the ordinary case), the final pair
/// of adjacent floats is the one bisection finds.
pub(crate) fn derivative_bracket(coef: &[f64], lo: f64, hi: f64, d_lo: f64) -> (f64, f64) {
    // f > 0 on the side of `lo`.
    let sign = if d_lo < 0.0 { -1.0 } else { 1.0 };
    let f = |s: f64| sign * propagate::poly(coef, s).1;
    let (mut a, mut b) = (lo, hi);
    let (mut fa, mut fb) = (f(lo), f(hi));
    let mut side = 0i8;
    for i in 0..400 {
        let m = illinois_point(i, (a, b), (fa, fb));
        if m <= a || m >= b {
            break;
        }
        let fm = f(m);
        if fm == 0.0 {
            return (m, m);
        }
        if fm > 0.0 {
            (a, fa) = (m, fm);
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        } else {
            (b, fb) = (m, fm);
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        }
    }
    (a, b)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `near_root` returns a representable time t where the polynomial in
    /// δ = t − t₀ is below zero and at the time under t is not (the
    /// definition of a located instant, checked by evaluation here), for
    /// first-order and cubic polynomials with a simple root near t₀
    /// (p(δ) = (r − δ)·q(δ), q > 0 near the root; common practice), from
    /// a good reciprocal slope, none, or a wrong one (the window then
    /// misses and the division places it); `None` without a crossing in
    /// (0, h).
    #[test]
    fn a_near_root_is_the_first_time_past_the_crossing() {
        let mut rnd = crate::test_util::uniform(0x5eed_0f4e_a7c0_de01);
        let (t0, h) = (3.1e-6, 4.0e-6);
        for case in 0..2000 {
            // The root within 2⁻²⁰ of t₀ either side, a slope of either
            // size, and for the cubic a curvature the reach allows.
            let r = (rnd() - 0.5) * 2.0 * t0 / (1u64 << 20) as f64;
            let k = -(10f64.powf(8.0 * rnd() - 2.0));
            let (a, b) = ((rnd() - 0.5) * 1e3, (rnd() - 0.5) * 1e6);
            let cubic = case % 2 == 1;
            let c: Vec<f64> = if cubic {
                // (r − δ)(−k)(1 + aδ + bδ²), expanded.
                vec![-k * r, k * (1.0 - a * r), k * (a - b * r), k * b]
            } else {
                vec![-k * r, k]
            };
            let p = |t: f64| propagate::poly_value(&c, t - t0);
            for (inv, what) in [(1.0 / c[1], "good"), (0.0, "none"), (2.0 / c[1], "wrong")] {
                let mut inv_slope = inv;
                let start = if cubic { r * (1.0 + 1e-3 * rnd()) } else { 0.0 };
                let t = near_root(&c, t0, h, start, &mut inv_slope)
                    .unwrap_or_else(|| panic!("case {case} ({what}): no root"));
                let under = f64::from_bits(t.to_bits() - 1);
                assert!(p(t) < 0.0, "case {case} ({what}): p(t) ≥ 0");
                assert!(p(under) >= 0.0, "case {case} ({what}): not the first");
                assert!(
                    ((t - t0) - r).abs() <= 1e-15 * t0,
                    "case {case} ({what}): {} vs {r}",
                    t - t0
                );
                if !cubic {
                    assert_eq!(inv_slope, 1.0 / c[1], "the slope kept for the next");
                }
            }
        }
        // No crossing: a polynomial that stays above zero, and a root
        // past the interval's end.
        let mut inv = 0.0;
        assert_eq!(near_root(&[1.0, 0.0, 1.0], t0, h, 0.0, &mut inv), None);
        assert_eq!(near_root(&[1.0, -1.0e6], t0, h, 0.0, &mut inv), None);
    }

    /// Contract of `GuardPolys::kept`: coefficients that are ±0 at the top
    /// of a guard polynomial (the rows past its last non-zero one) change
    /// neither where `guard_root` puts the crossing nor the polynomial's
    /// value, to the bit: each Horner chain meets its first non-zero
    /// coefficient as ±0·u + c = c exactly (common practice). Random
    /// polynomials of degree 1 to 7 with a root inside, some with an
    /// interior dip, padded with up to six signed zeros.
    #[test]
    fn zero_top_terms_do_not_move_the_crossing() {
        let mut rnd = crate::test_util::uniform(0x9e37_79b9_7f4a_7c15u64);
        let mut crossings = 0;
        for case in 0..4000 {
            let len = 2 + (rnd() * 7.0) as usize;
            let r = 0.01 + 0.98 * rnd();
            let k = 10f64.powf(6.0 * rnd() - 3.0);
            // (r − σ)·q(σ), q > 0 on [0, 1], or for a quarter of the cases
            // a positive value with a dip (σ − m)² − d around the middle.
            let mut c = vec![0.0; len];
            if case % 4 == 3 && len >= 3 {
                let (m, d) = (0.2 + 0.6 * rnd(), 0.1 * rnd() * rnd());
                c[0] = k * (m * m - d);
                c[1] = -2.0 * k * m;
                c[2] = k;
            } else {
                c[0] = k * r;
                c[1] = -k;
                for (i, ci) in c.iter_mut().enumerate().skip(2) {
                    *ci = k * 0.1f64.powi(i as i32) * (rnd() - 0.5);
                }
            }
            let pad = 1 + (rnd() * 6.0) as usize;
            let mut long = c.clone();
            long.extend((0..pad).map(|_| if rnd() < 0.5 { -0.0 } else { 0.0 }));
            let tol = k * 1e-12 * rnd();
            for hint in [None, Some(r), Some(rnd())] {
                let a = guard_root(&c, tol, hint);
                let b = guard_root(&long, tol, hint);
                assert_eq!(a.map(f64::to_bits), b.map(f64::to_bits), "case {case}");
                crossings += a.is_some() as usize;
            }
            for _ in 0..8 {
                let s = rnd();
                let (va, vb) = (
                    propagate::poly_value(&c, s),
                    propagate::poly_value(&long, s),
                );
                // Equal, up to the sign of a zero result.
                assert!(va == vb, "case {case}: {va} vs {vb}");
                let (da, db) = (propagate::poly(&c, s).1, propagate::poly(&long, s).1);
                assert!(da == db, "case {case}: {da} vs {db}");
            }
        }
        assert!(crossings > 6000, "only {crossings} crossings tested");
    }

    /// Contract of `root_in`: the returned point has p < 0 and the point
    /// just below it p ≥ 0 (the first instant after the crossing), and it
    /// lies within a few ulps of the exact root. Polynomials with a known
    /// simple root r in (0, 1): p(σ) = (r − σ)·q(σ), q > 0 on [0, 1]
    /// (common practice). `guard_root` with a hint returns the hint where
    /// it is such a point, else such a point too, the same as `root_in`'s
    /// wherever rounding does not blur the crossing.
    #[test]
    fn root_is_the_first_point_past_the_crossing() {
        let mut rnd = crate::test_util::uniform(0x1234_5678_9abc_def1u64);
        let mut moved = 0;
        let mut hinted_at_root = 0;
        for case in 0..2000 {
            let r = 0.01 + 0.98 * rnd();
            // q(σ) = 1 + a σ + b σ², positive on [0, 1] for a, b ≥ 0, times
            // a scale; then a tail of terms too small to move the root, as a
            // Taylor series has.
            let (a, b, k) = (rnd(), rnd(), 10f64.powf(6.0 * rnd() - 3.0));
            let q = [k, k * a, k * b];
            let mut c = vec![0.0; 14];
            for (i, &qi) in q.iter().enumerate() {
                c[i] += r * qi;
                c[i + 1] -= qi;
            }
            for (i, ci) in c.iter_mut().enumerate().skip(4) {
                *ci += k * 1e-5f64.powi(i as i32) * (rnd() - 0.5);
            }
            let fb = propagate::poly(&c, 1.0).0;
            let x = root_in(&c, 0.0, 1.0, c[0], fb, None);
            let below = f64::from_bits(x.to_bits() - 1);
            assert!(propagate::poly(&c, x).0 < 0.0, "case {case}: p(x) ≥ 0");
            assert!(
                propagate::poly(&c, below).0 >= 0.0,
                "case {case}: not the first point past the crossing"
            );
            assert!((x - r).abs() <= 1e-14, "case {case}: {x} vs {r}");
            // Started from a hint — an earlier crossing a few ulps off, or
            // one far away — the search ends at the same point.
            let ulps = (rnd() * 64.0) as u64;
            for hint in [
                f64::from_bits(x.to_bits() + ulps),
                f64::from_bits(x.to_bits() - ulps),
                0.9 * x + 0.1 * rnd(),
                rnd(),
            ] {
                let y = root_in(&c, 0.0, 1.0, c[0], fb, Some(hint));
                // `guard_root` from the same hint: the hint itself where it
                // is a first point past the crossing (a settled crossing
                // that has not moved), else where one Newton step and its
                // window or the search end.
                let g = guard_root(&c, 0.0, Some(hint)).expect("p(1) < 0");
                let at_hint = propagate::poly_value(&c, hint) < 0.0
                    && propagate::poly_value(&c, f64::from_bits(hint.to_bits() - 1)) >= 0.0;
                if at_hint {
                    assert_eq!(g, hint, "case {case}");
                }
                hinted_at_root += usize::from(at_hint);
                for y in [y, g] {
                    if y != x {
                        // Only where rounding blurs the crossing: then y is
                        // a first point past it too, as close to the root.
                        moved += 1;
                        let below = f64::from_bits(y.to_bits() - 1);
                        assert!(propagate::poly(&c, y).0 < 0.0, "case {case}: p(y) ≥ 0");
                        assert!(propagate::poly(&c, below).0 >= 0.0, "case {case}");
                        assert!((y - r).abs() <= 1e-14, "case {case}: {y} vs {r}");
                    }
                }
            }
        }
        assert!(
            moved <= 80,
            "{moved} of 16000 hinted searches ended elsewhere"
        );
        // Every case's first hint with 0 ulps is the answer itself.
        assert!(hinted_at_root >= 2000 / 64, "{hinted_at_root}");
    }
}
