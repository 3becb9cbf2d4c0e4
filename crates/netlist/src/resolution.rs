//! Whether `f64` time can resolve the circuit's periods and durations over
//! a run: a period of 1e-300 s added to a time of 1e-3 s changes nothing,
//! and a run that steps by it computes garbage while seeming to succeed.

use crate::circuit::{Circuit, CompensatorLaw};
use crate::element::Element;
use crate::error::Problem;
use crate::gate::Gate;
use crate::stimulus::Stimulus;

/// The smallest duration, as a fraction of the run's stop time, that the
/// checks of [`Circuit::time_resolution_problems`] accept: 2⁻⁴⁰ ≈ 9.1e-13.
/// Near the stop time `T` one `f64` step is 2⁻⁵²·T or less, so such a
/// duration still spans at least 2¹² = 4,096 steps: an event placed
/// inside it is known to 2.4e-4 of it or better. Smaller durations would
/// be rounded away as the run goes on.
pub const MIN_DURATION_RATIO: f64 = 1.0 / (1u64 << 40) as f64;

/// The most switches a circuit may have: the solver keeps the on/off
/// pattern of the switches in one 64-bit word.
pub const MAX_SWITCHES: usize = 64;

/// The most diodes (diode elements plus switches' body diodes) a circuit
/// may have: the solver keeps the conduction pattern of the diodes in one
/// 64-bit word.
pub const MAX_DIODES: usize = 64;

impl Circuit {
    /// Problems with the size of the circuit: more than [`MAX_SWITCHES`]
    /// switches or more than [`MAX_DIODES`] diodes (body diodes included).
    pub fn size_problems(&self) -> Vec<Problem> {
        let switches = self
            .elements
            .iter()
            .filter(|e| matches!(e, Element::Switch(_)))
            .count();
        let diodes = self
            .elements
            .iter()
            .filter(|e| match e {
                Element::Diode(_) => true,
                Element::Switch(s) => s.body_diode.is_some(),
                _ => false,
            })
            .count();
        let mut out = vec![];
        if switches > MAX_SWITCHES {
            out.push(Problem::circuit(format!(
                "{switches} switches: at most {MAX_SWITCHES} are supported"
            )));
        }
        if diodes > MAX_DIODES {
            out.push(Problem::circuit(format!(
                "{diodes} diodes (body diodes of switches included): at most {MAX_DIODES} are supported"
            )));
        }
        out
    }

    /// Problems with periods and durations (gate periods, on and off
    /// times, dead times, repeating source periods, spacing of waveform
    /// points, sine periods) too short for `f64` time to resolve over a run
    /// to `stop` s: each must be at least [`MIN_DURATION_RATIO`]·`stop`.
    /// A compensator's pole time constants 1/(2π·f) (and, for a
    /// state-space law, 1/ρ with ρ the largest row sum of |A|, a bound on
    /// its rates) count as durations. Each problem names the gate or element and its field. Zero
    /// durations (no dead time, two points at one instant for a step) are
    /// exact and allowed. [`Circuit::validate`] applies this with the
    /// file's `run.stop_time`; callers that choose another stop time check
    /// it themselves.
    pub fn time_resolution_problems(&self, stop: f64) -> Vec<Problem> {
        let mut out = vec![];
        if !(stop.is_finite() && stop > 0.0) {
            return out;
        }
        let floor = MIN_DURATION_RATIO * stop;
        let mut check = |who: &str, field: &str, what: &str, d: f64| {
            // NaN and negative values are the value rules' business.
            if d > 0.0 && d < floor {
                out.push(Problem::field(
                    who,
                    field,
                    format!(
                        "{what} of {d:e} s is too short to resolve in a run to {stop:e} s: \
                         durations must be at least {floor:.3e} s (2^-40 of the stop time) \
                         for the time arithmetic to hold them"
                    ),
                ));
            }
        };
        for g in &self.gates {
            match g {
                Gate::Pwm {
                    name,
                    frequency,
                    duty,
                    ..
                }
                | Gate::ComplementaryPwm {
                    name,
                    frequency,
                    duty,
                    ..
                } => {
                    let t = 1.0 / frequency;
                    check(name, "frequency", "the period", t);
                    if *duty > 0.0 && *duty < 1.0 {
                        check(name, "duty", "the on time", duty * t);
                        check(name, "duty", "the off time", (1.0 - duty) * t);
                    }
                    if let Gate::ComplementaryPwm {
                        dead_time_high,
                        dead_time_low,
                        ..
                    } = g
                    {
                        check(name, "dead_time_high", "the dead time", *dead_time_high);
                        check(name, "dead_time_low", "the dead time", *dead_time_low);
                    }
                }
                other => {
                    for (signal, shape) in other.signals() {
                        if let Some(p) = shape.period {
                            check(&signal, "period", "the period", p);
                        }
                        for w in shape.transitions.windows(2) {
                            check(
                                &signal,
                                "transitions",
                                "the time between two transitions",
                                w[1].0 - w[0].0,
                            );
                        }
                    }
                }
            }
        }
        for e in &self.elements {
            let (name, waveform) = match e {
                Element::VoltageSource(s) => (&s.name, &s.waveform),
                Element::CurrentSource(s) => (&s.name, &s.waveform),
                _ => continue,
            };
            match waveform {
                Stimulus::PiecewiseLinear { points, period } => {
                    if let Some(p) = period {
                        check(name, "waveform.period", "the period", *p);
                    }
                    for w in points.windows(2) {
                        check(
                            name,
                            "waveform.points",
                            "the time between two points",
                            w[1].time - w[0].time,
                        );
                    }
                }
                Stimulus::Sine { frequency, .. } => {
                    check(name, "waveform.frequency", "the period", 1.0 / frequency);
                }
                _ => {}
            }
        }
        // A compensator's poles are time constants of its states: one
        // shorter than time can resolve over the run follows its input
        // within rounding, and solving it exactly costs hundreds of
        // squarings per exponential (a pole at 1e100 Hz beside a 2 ms run).
        for c in &self.compensators {
            match &c.law {
                CompensatorLaw::PolesZeros { poles_hz, .. } => {
                    for (j, p) in poles_hz.iter().enumerate() {
                        let tau = 1.0 / (2.0 * std::f64::consts::PI * p);
                        check(
                            &c.name,
                            &format!("law.poles_hz[{j}]"),
                            "the time constant 1/(2π·f)",
                            tau,
                        );
                    }
                }
                CompensatorLaw::StateSpace { a, .. } => {
                    // No rate of x' = A x exceeds the largest row sum of
                    // |A| (a bound on every eigenvalue's modulus).
                    let rate = a
                        .iter()
                        .map(|r| r.iter().map(|v| v.abs()).sum::<f64>())
                        .fold(0.0, f64::max);
                    if rate.is_finite() {
                        check(
                            &c.name,
                            "law.a",
                            "the shortest time constant the rows of A allow (1/max row sum of |A|)",
                            1.0 / rate,
                        );
                    }
                }
                CompensatorLaw::Pi { .. } => {}
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue 19: too many diodes is a rule of the file (exit 2 from
    /// `check`), not a run that fails later with an empty pattern.
    #[test]
    fn issue_19_more_diodes_than_supported_is_a_validation_problem() {
        let mut b = Circuit::builder()
            .voltage_source("V1", "a", "gnd", 1.0)
            .resistor("R1", "a", "b", 1.0);
        for i in 0..70 {
            b = b.diode(&format!("D{i}"), "b", "gnd");
        }
        let err = b.build().unwrap_err().to_string();
        assert!(
            err.contains("70 diodes") && err.contains("at most 64"),
            "{err}"
        );
    }

    /// Issue 19: a repeating source with a period of 1e-300 s must be
    /// refused, naming the element and the field, not run to garbage.
    #[test]
    fn issue_19_a_period_below_the_time_resolution_is_refused() {
        let text = r#"{
          "elements": [
            {"kind": "voltage_source", "name": "V1", "nodes": ["in", "gnd"],
             "waveform": {"kind": "piecewise_linear", "period": 1e-300,
                          "points": [{"time": 0, "value": 0}, {"time": 5e-301, "value": 24}]}},
            {"kind": "inductor", "name": "L1", "nodes": ["in", "out"], "inductance": "10u"},
            {"kind": "resistor", "name": "R1", "nodes": ["out", "gnd"], "resistance": 1}
          ],
          "run": {"stop_time": "1m"}
        }"#;
        let err = Circuit::from_json(text).unwrap_err().to_string();
        assert!(err.contains("V1.waveform.period"), "{err}");
        assert!(err.contains("too short to resolve"), "{err}");
        let c = Circuit::from_json_unchecked(text).unwrap();
        assert!(c.time_resolution_problems(1e-290).is_empty());
    }

    #[test]
    fn issue_19_dead_times_and_pwm_periods_are_checked_against_the_stop_time() {
        let c = Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 12.0)
            .switch("S1", "in", "sw", "hb.high")
            .switch("S2", "sw", "gnd", "hb.low")
            .inductor("L1", "sw", "out", 22e-6)
            .resistor("R1", "out", "gnd", 5.0)
            .complementary_pwm("hb", 100e3, 0.4, 1e-300, 0.0)
            .build_unchecked();
        let p = c.time_resolution_problems(1e-3);
        let fields: Vec<_> = p.iter().filter_map(|p| p.field.as_deref()).collect();
        assert!(fields.contains(&"dead_time_high"), "{p:?}");
        // A period of 10 µs is fine for 1 ms, not for 1e10 s.
        assert!(!fields.contains(&"frequency"), "{p:?}");
        let long = c.time_resolution_problems(1e10);
        assert!(long.iter().any(|p| p.field.as_deref() == Some("frequency")));
    }

    /// Issue 19: a compensator pole at 1e100 Hz (time constant 1.6e-101 s
    /// beside a 2 ms run) is refused, naming the compensator and the pole;
    /// one at 80 kHz is not. A state-space law whose rows of A allow rates
    /// beyond the resolution is refused the same way.
    #[test]
    fn issue_19_compensator_time_constants_are_checked_against_the_stop_time() {
        let text = |law: &str| {
            format!(
                r#"{{
              "elements": [
                {{"kind": "voltage_source", "name": "V1", "nodes": ["in", "gnd"],
                 "waveform": {{"kind": "constant", "value": 12}}}},
                {{"kind": "resistor", "name": "R1", "nodes": ["in", "out"], "resistance": 1}},
                {{"kind": "capacitor", "name": "C1", "nodes": ["out", "gnd"], "capacitance": "1u"}}
              ],
              "compensators": [{{"name": "K", "input": "out", "reference": 3.3, "law": {law}}}],
              "run": {{"stop_time": "2m"}}
            }}"#
            )
        };
        let pz = |p: f64| {
            format!(
                r#"{{"kind": "poles_zeros", "gain": 5000, "zeros_hz": [3500], "poles_hz": [80000, {p:e}]}}"#
            )
        };
        let err = Circuit::from_json(&text(&pz(1e100)))
            .unwrap_err()
            .to_string();
        assert!(err.contains("K.law.poles_hz[1]"), "{err}");
        assert!(err.contains("too short to resolve"), "{err}");
        assert!(!err.contains("poles_hz[0]"), "{err}");
        Circuit::from_json(&text(&pz(1e6))).unwrap();
        let ss =
            |a: f64| format!(r#"{{"kind": "state_space", "a": [[{a:e}]], "b": [1], "c": [1]}}"#);
        let err = Circuit::from_json(&text(&ss(-1e30)))
            .unwrap_err()
            .to_string();
        assert!(err.contains("K.law.a"), "{err}");
        Circuit::from_json(&text(&ss(-1e6))).unwrap();
    }
}
