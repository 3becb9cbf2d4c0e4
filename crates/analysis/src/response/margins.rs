//! Crossover, phase and gain margins of a loop gain, and resonant peaks of
//! a response, refined on the exact response rather than interpolated.

use nalgebra::Complex;
use serde::Serialize;

use super::Point;

/// Margins of a loop gain T(f).
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Margins {
    /// The first frequency where |T| falls through 1 (Hz), if in range.
    pub crossover_hz: Option<f64>,
    /// 180° + ∠T at the crossover (degrees).
    pub phase_margin_deg: Option<f64>,
    /// The first frequency where ∠T passes −180° (Hz), if in range.
    pub phase_crossover_hz: Option<f64>,
    /// −20·log10 |T| at the phase crossover (dB).
    pub gain_margin_db: Option<f64>,
}

/// A peak of a response's magnitude.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Resonance {
    /// Frequency of the highest grid point of the peak (Hz).
    pub frequency: f64,
    /// Magnitude there (dB).
    pub magnitude_db: f64,
    /// Height above the higher of the lowest points on either side (dB).
    pub prominence_db: f64,
}

/// Bisection on ln f between `a` and `b`, where `side(a) != side(b)`.
fn refine(a: f64, b: f64, side: impl Fn(f64) -> bool) -> f64 {
    let (mut lo, mut hi) = (a.ln(), b.ln());
    let s_lo = side(a);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if side(mid.exp()) == s_lo {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (0.5 * (lo + hi)).exp()
}

/// Margins from the grid `points`, refined with the exact `t_of`.
pub(crate) fn margins(
    freqs: &[f64],
    points: &[Point],
    t_of: &dyn Fn(f64) -> Complex<f64>,
) -> Margins {
    let mut m = Margins::default();
    for k in 1..points.len() {
        let (a, b) = (&points[k - 1], &points[k]);
        if m.crossover_hz.is_none() && a.magnitude_db >= 0.0 && b.magnitude_db < 0.0 {
            let fc = refine(freqs[k - 1], freqs[k], |f| t_of(f).norm() >= 1.0);
            m.crossover_hz = Some(fc);
            m.phase_margin_deg = Some(180.0 + t_of(fc).arg().to_degrees());
        }
        // ∠T through ±180°: the imaginary part changes sign where the real
        // part is negative.
        if m.phase_crossover_hz.is_none()
            && a.re < 0.0
            && b.re < 0.0
            && (a.im >= 0.0) != (b.im >= 0.0)
        {
            let fp = refine(freqs[k - 1], freqs[k], |f| t_of(f).im >= 0.0);
            m.phase_crossover_hz = Some(fp);
            m.gain_margin_db = Some(-20.0 * t_of(fp).norm().log10());
        }
    }
    m
}

/// Peaks of the magnitude with at least 1 dB of prominence on the grid.
pub(crate) fn resonances(points: &[Point]) -> Vec<Resonance> {
    let mag: Vec<f64> = points.iter().map(|p| p.magnitude_db).collect();
    let mut out = vec![];
    for k in 1..mag.len().saturating_sub(1) {
        if !(mag[k] > mag[k - 1] && mag[k] >= mag[k + 1]) {
            continue;
        }
        let left = mag[..k].iter().copied().fold(f64::INFINITY, f64::min);
        let right = mag[k + 1..].iter().copied().fold(f64::INFINITY, f64::min);
        let prominence = mag[k] - left.max(right);
        if prominence >= 1.0 {
            out.push(Resonance {
                frequency: points[k].frequency,
                magnitude_db: mag[k],
                prominence_db: prominence,
            });
        }
    }
    out
}
