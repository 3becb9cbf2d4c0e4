//! Gate rules: unique usable names, timing of the scheduled signals
//! (frequency, duty, delay, dead times, transition times), thresholds and
//! duty limits of the closed-loop gates, and every switch's gate signal
//! defined.

use std::collections::HashMap;

use super::checker::{label, name_rule, num, quoted, Checker};
use crate::element::Element;
use crate::gate::{ComparatorSpec, Gate};

impl Checker<'_> {
    /// Gate names usable and unique, and each gate's values.
    pub(super) fn gates(&mut self) {
        let mut first: HashMap<&str, usize> = HashMap::new();
        for (i, g) in self.circuit.gates.iter().enumerate() {
            let name = g.name();
            let l = label(name, "gates", i);
            if let Some(why) = name_rule(name) {
                self.field(&l, "name", format!("gate name {name:?} {why}"));
            }
            // Signal names derive from gate names (`NAME`, or `NAME.high` and
            // `NAME.low`), and gate names cannot contain '.', so unique gate
            // names give unique signal names.
            if !name.is_empty() {
                match first.get(name) {
                    Some(&j) => self.field(
                        name,
                        "name",
                        format!(
                            "duplicate gate name '{name}': gates[{j}] and gates[{i}] both use it"
                        ),
                    ),
                    None => {
                        first.insert(name, i);
                    }
                }
            }
            self.gate_values(&l, g);
        }
    }

    /// The timing of a scheduled gate; closed-loop gates go to
    /// `comparator_values`.
    fn gate_values(&mut self, l: &str, g: &Gate) {
        if let Some(spec) = g.comparator() {
            self.comparator_values(l, g, &spec);
            return;
        }
        match g {
            Gate::Pwm {
                frequency,
                duty,
                delay,
                start,
                stop,
                ..
            } => {
                self.pwm_timing(l, *frequency, *duty, *delay);
                self.window(l, *start, *stop);
            }
            Gate::ComplementaryPwm {
                frequency,
                duty,
                delay,
                dead_time_high,
                dead_time_low,
                start,
                stop,
                ..
            } => {
                let period = self.pwm_timing(l, *frequency, *duty, *delay);
                let hi_ok = self.non_negative(l, "dead_time_high", *dead_time_high);
                let lo_ok = self.non_negative(l, "dead_time_low", *dead_time_low);
                if let Some((t, duty)) = period {
                    let on = duty * t;
                    let off = t - on;
                    if hi_ok && *dead_time_high > on {
                        self.field(
                            l,
                            "dead_time_high",
                            format!(
                                "dead time {} s does not fit in the high part of the period, duty·T = {} s",
                                num(*dead_time_high),
                                num(on)
                            ),
                        );
                    }
                    if lo_ok && *dead_time_low > off {
                        self.field(
                            l,
                            "dead_time_low",
                            format!(
                                "dead time {} s does not fit in the low part of the period, (1 − duty)·T = {} s",
                                num(*dead_time_low),
                                num(off)
                            ),
                        );
                    }
                }
                self.window(l, *start, *stop);
            }
            Gate::Transitions {
                transitions,
                period,
                ..
            } => {
                let mut times_ok = true;
                for (i, t) in transitions.iter().enumerate() {
                    times_ok &= self.finite(l, &format!("transitions[{i}].time"), t.time);
                }
                if times_ok {
                    let times: Vec<f64> = transitions.iter().map(|t| t.time).collect();
                    self.strictly_increasing(l, &times, "transition", |i| {
                        format!("transitions[{i}].time")
                    });
                }
                if let Some(p) = *period {
                    if self.positive(l, "period", p) && times_ok {
                        for (i, t) in transitions.iter().enumerate() {
                            if !(0.0..p).contains(&t.time) {
                                self.field(
                                    l,
                                    &format!("transitions[{i}].time"),
                                    format!(
                                        "time {} lies outside one period [0, {}) of a repeating signal",
                                        num(t.time),
                                        num(p)
                                    ),
                                );
                            }
                        }
                    }
                }
            }
            // Closed-loop gates were checked by `comparator_values`.
            Gate::PeakCurrent { .. }
            | Gate::ValleyCurrent { .. }
            | Gate::Hysteretic { .. }
            | Gate::VoltageMode { .. } => {}
        }
    }

    /// Closed-loop gates: a clock frequency, thresholds, duty limits and the
    /// output they compare.
    fn comparator_values(&mut self, l: &str, g: &Gate, spec: &ComparatorSpec) {
        match g {
            Gate::PeakCurrent {
                frequency,
                reference,
                slope,
                max_duty,
                ..
            } => {
                self.frequency(l, "frequency", *frequency);
                self.finite(l, "reference", *reference);
                self.non_negative(l, "slope", *slope);
                if self.finite(l, "max_duty", *max_duty) && !(*max_duty > 0.0 && *max_duty <= 1.0) {
                    self.field(
                        l,
                        "max_duty",
                        format!("must lie in (0, 1], got {}", num(*max_duty)),
                    );
                }
            }
            Gate::ValleyCurrent {
                frequency,
                reference,
                slope,
                ..
            } => {
                self.frequency(l, "frequency", *frequency);
                self.finite(l, "reference", *reference);
                self.non_negative(l, "slope", *slope);
            }
            Gate::Hysteretic { low, high, .. } => {
                // Both are checked for finiteness, then compared.
                let ok = [self.finite(l, "low", *low), self.finite(l, "high", *high)];
                if ok == [true, true] && low >= high {
                    self.field(
                        l,
                        "high",
                        format!("must exceed low = {}, got {}", num(*low), num(*high)),
                    );
                }
            }
            Gate::VoltageMode {
                frequency,
                ramp_low,
                ramp_high,
                min_duty,
                max_duty,
                ..
            } => {
                self.frequency(l, "frequency", *frequency);
                // Both are checked for finiteness (`&&` would skip the
                // second when the first fails), then compared.
                let ok = [
                    self.finite(l, "ramp_low", *ramp_low),
                    self.finite(l, "ramp_high", *ramp_high),
                ];
                if ok == [true, true] && ramp_low >= ramp_high {
                    self.field(
                        l,
                        "ramp_high",
                        format!(
                            "must exceed ramp_low = {}, got {}",
                            num(*ramp_low),
                            num(*ramp_high)
                        ),
                    );
                }
                let lo_ok = self.finite(l, "min_duty", *min_duty);
                let hi_ok = self.finite(l, "max_duty", *max_duty);
                if hi_ok && !(*max_duty > 0.0 && *max_duty <= 1.0) {
                    self.field(
                        l,
                        "max_duty",
                        format!("must lie in (0, 1], got {}", num(*max_duty)),
                    );
                } else if lo_ok && hi_ok && !(*min_duty >= 0.0 && min_duty < max_duty) {
                    self.field(
                        l,
                        "min_duty",
                        format!(
                            "must lie in [0, max_duty = {}), got {}",
                            num(*max_duty),
                            num(*min_duty)
                        ),
                    );
                }
            }
            _ => {}
        }
        let field = if matches!(g, Gate::VoltageMode { .. }) {
            "control"
        } else {
            "sense"
        };
        if let Some(why) = self.output_problem(&spec.sense) {
            self.field(l, field, why);
        }
    }

    /// Checks frequency, duty and delay of a PWM; returns (period, duty)
    /// when both are usable for further checks.
    fn pwm_timing(&mut self, l: &str, frequency: f64, duty: f64, delay: f64) -> Option<(f64, f64)> {
        let f_ok = self.frequency(l, "frequency", frequency);
        let mut d_ok = self.finite(l, "duty", duty);
        if d_ok && !(0.0..=1.0).contains(&duty) {
            self.field(
                l,
                "duty",
                format!("duty cycle must lie in [0, 1], got {}", num(duty)),
            );
            d_ok = false;
        }
        if self.finite(l, "delay", delay) && f_ok {
            let t = 1.0 / frequency;
            // Edges are placed at k·T + (delay mod T) for every k ≥ 0, so a
            // delay of a period or more would not postpone the first edge as
            // its name promises; `start` holds a signal off for longer.
            if !(0.0..t).contains(&delay) {
                self.field(
                    l,
                    "delay",
                    format!(
                        "delay must lie in [0, period) = [0, {}) s, got {} s (use start to hold the signal off longer)",
                        num(t),
                        num(delay)
                    ),
                );
            }
        }
        (f_ok && d_ok).then(|| (1.0 / frequency, duty))
    }

    /// `start` and `stop` finite, `stop` after `start`.
    fn window(&mut self, l: &str, start: Option<f64>, stop: Option<f64>) {
        let start_ok = start.is_none_or(|s| self.finite(l, "start", s));
        let stop_ok = stop.is_none_or(|s| self.finite(l, "stop", s));
        if let (Some(a), Some(b), true, true) = (start, stop, start_ok, stop_ok) {
            if a >= b {
                self.field(
                    l,
                    "stop",
                    format!(
                        "stop time {} s must come after start time {} s",
                        num(b),
                        num(a)
                    ),
                );
            }
        }
    }

    /// Every switch names a gate signal that exists.
    pub(super) fn gate_references(&mut self) {
        let signals: Vec<String> = self
            .circuit
            .gates
            .iter()
            .flat_map(|g| match g {
                Gate::ComplementaryPwm { name, .. } => {
                    vec![format!("{name}.high"), format!("{name}.low")]
                }
                _ => vec![g.name().to_string()],
            })
            .collect();
        for (i, e) in self.circuit.elements.iter().enumerate() {
            let Element::Switch(s) = e else { continue };
            if signals.contains(&s.gate) {
                continue;
            }
            let pair = self
                .circuit
                .gates
                .iter()
                .any(|g| matches!(g, Gate::ComplementaryPwm { name, .. } if *name == s.gate));
            let hint = if pair {
                format!(
                    " (the complementary pair '{0}' provides '{0}.high' and '{0}.low')",
                    s.gate
                )
            } else if signals.is_empty() {
                " (no gates are defined)".to_string()
            } else {
                let names: Vec<&str> = signals.iter().map(String::as_str).collect();
                format!(" (gate signals: {})", quoted(&names))
            };
            let label = self.labels[i].clone();
            self.field(
                &label,
                "gate",
                format!("unknown gate signal '{}'{hint}", s.gate),
            );
        }
    }
}
