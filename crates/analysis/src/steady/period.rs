//! The period of a circuit's steady state: the common period of its
//! periodic gates, clocked comparator gates and periodic sources, and the
//! time from which everything repeats.

use fluxstep_netlist::{Circuit, Element, Stimulus};

use crate::AnalysisError;

/// Largest multiple of the base period searched for a common period.
pub(crate) const MAX_MULTIPLE: u64 = 100_000;

/// Relative tolerance for "these two periods are in an integer ratio":
/// periods are written with a handful of significant digits, so a true
/// ratio misses an integer by rounding only, far below this; a looser tolerance would take 103993/33102 for π.
const RATIO_TOL: f64 = 1e-12;

/// The steady-state period as `multiple` periods of `base`, where `base` is
/// the period of the first periodic part (so that period boundaries,
/// computed as `k·base`, fall on that part's own edges to the bit), and the
/// earliest time from which the circuit repeats (after soft-start, gate
/// start/stop times and the corners of non-repeating sources).
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct CommonPeriod {
    pub base: f64,
    pub multiple: u64,
    pub repeats_from: f64,
    /// The periodic parts and their periods, for messages.
    pub parts: Vec<(String, f64)>,
}

/// Finds the common period of `circuit`.
pub(crate) fn common_period(circuit: &Circuit) -> Result<CommonPeriod, AnalysisError> {
    let mut parts: Vec<(String, f64)> = vec![];
    let mut repeats_from: f64 = 0.0;
    for gate in &circuit.gates {
        if let Some(spec) = gate.comparator() {
            if let Some(p) = spec.period {
                parts.push((format!("gate {}", gate.name()), p));
            }
            continue;
        }
        for (name, shape) in gate.signals() {
            for t in [shape.start, shape.stop].into_iter().flatten() {
                repeats_from = repeats_from.max(t);
            }
            match shape.period {
                Some(p) => parts.push((format!("gate signal {name}"), p)),
                None => {
                    if let Some(&(t, _)) = shape.transitions.last() {
                        repeats_from = repeats_from.max(t);
                    }
                }
            }
        }
    }
    for e in &circuit.elements {
        let (name, stim) = match e {
            Element::VoltageSource(s) => (&s.name, &s.waveform),
            Element::CurrentSource(s) => (&s.name, &s.waveform),
            _ => continue,
        };
        match stim {
            Stimulus::Constant { .. } => {}
            Stimulus::Sine { frequency, .. } => {
                parts.push((format!("source {name}"), 1.0 / frequency));
            }
            Stimulus::PiecewiseLinear { points, period } => match period {
                Some(p) => parts.push((format!("source {name}"), *p)),
                None => {
                    if let Some(last) = points.last() {
                        repeats_from = repeats_from.max(last.time);
                    }
                }
            },
        }
    }
    let Some(&(_, base)) = parts.first() else {
        return Err(AnalysisError::NoPeriod);
    };
    // The smallest multiple of `base` that each part's period divides.
    let mut multiple: u64 = 1;
    for (_, p) in &parts {
        let need = smallest_multiple(base, *p).ok_or_else(|| AnalysisError::Incommensurate {
            periods: parts.clone(),
            max_multiple: MAX_MULTIPLE,
        })?;
        multiple = lcm(multiple, need);
        if multiple > MAX_MULTIPLE {
            return Err(AnalysisError::Incommensurate {
                periods: parts.clone(),
                max_multiple: MAX_MULTIPLE,
            });
        }
    }
    Ok(CommonPeriod {
        base,
        multiple,
        repeats_from,
        parts,
    })
}

/// The smallest m ≤ MAX_MULTIPLE with m·base an integer multiple of `p`.
fn smallest_multiple(base: f64, p: f64) -> Option<u64> {
    let r = base / p;
    (1..=MAX_MULTIPLE).find(|&m| {
        let k = m as f64 * r;
        k.round() >= 1.0 && (k - k.round()).abs() <= RATIO_TOL * k
    })
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

fn lcm(a: u64, b: u64) -> u64 {
    a / gcd(a, b) * b
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn multiples_of_commensurate_periods() {
        assert_eq!(smallest_multiple(10e-6, 10e-6), Some(1));
        assert_eq!(smallest_multiple(10e-6, 20e-6), Some(2));
        assert_eq!(smallest_multiple(20e-6, 10e-6), Some(1));
        assert_eq!(smallest_multiple(10e-6, 30e-6), Some(3));
        // 1/100 kHz against 1/50 Hz: 2000 switching periods per line period.
        assert_eq!(smallest_multiple(1e-5, 0.02), Some(2000));
        assert_eq!(lcm(4, 6), 12);
    }

    #[test]
    fn incommensurate_periods_have_no_multiple() {
        assert_eq!(smallest_multiple(1.0, std::f64::consts::PI), None);
    }
}
