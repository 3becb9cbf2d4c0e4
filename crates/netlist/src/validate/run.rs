//! Run settings: the stop time and recorded window, the timing rules (each
//! naming switches and diodes that exist), the design limits, the loads
//! and the recorded outputs.

use super::checker::{num, Checker};
use crate::circuit::OutputName;
use crate::element::Element;
use crate::error::Problem;
use crate::timing::TimingCheck;

impl Checker<'_> {
    fn run_problem(&mut self, field: &str, message: String) {
        self.out.push(Problem {
            element: None,
            field: Some(field.into()),
            node: None,
            message,
        });
    }

    pub(super) fn run_settings(&mut self) {
        let Some(run) = &self.circuit.run else { return };
        let stop = run.stop_time;
        let stop_ok = if !stop.is_finite() {
            self.run_problem(
                "run.stop_time",
                format!("must be a finite number, got {stop}"),
            );
            false
        } else if stop <= 0.0 {
            self.run_problem(
                "run.stop_time",
                format!("must be positive, got {}", num(stop)),
            );
            false
        } else {
            true
        };
        if let Some(r) = run.record_from {
            if !r.is_finite() {
                self.run_problem(
                    "run.record_from",
                    format!("must be a finite number, got {r}"),
                );
            } else if stop_ok && !(0.0..stop).contains(&r) {
                self.run_problem(
                    "run.record_from",
                    format!(
                        "must lie in [0, stop_time) = [0, {}) s, got {} s",
                        num(stop),
                        num(r)
                    ),
                );
            }
        }
        self.timing_rules();
        let Some(run) = &self.circuit.run else { return };
        if let Some(limits) = &run.limits {
            self.out.extend(limits.problems(self.circuit));
        }
        for (i, load) in run.loads.iter().enumerate() {
            if !self.circuit.elements.iter().any(|e| e.name() == load) {
                self.run_problem(
                    &format!("run.loads[{i}]"),
                    format!("{load:?} is not an element of the circuit"),
                );
            }
        }
        for (i, text) in run.outputs.iter().enumerate() {
            let field = format!("run.outputs[{i}]");
            let message = self.output_problem(text);
            if let Some(m) = message {
                let mut p = Problem {
                    element: None,
                    field: Some(field),
                    node: None,
                    message: m,
                };
                if let Ok(OutputName::Node(n)) = OutputName::parse(text) {
                    p = p.at_node(&n);
                }
                self.out.push(p);
            }
        }
    }

    /// The timing rules: each names switches where it needs switches,
    /// diodes (or body diodes) where it needs diodes, and positive finite
    /// limits. Each problem names the rule and its field.
    fn timing_rules(&mut self) {
        let Some(run) = &self.circuit.run else { return };
        let stop = run.stop_time;
        for (i, rule) in run.timing.iter().enumerate() {
            let rule_name = rule.display_name();
            let at = |f: &str| format!("run.timing[{i}].{f}");
            let mut out: Vec<(String, String)> = Vec::new();
            let limit = |field: &str, v: f64, out: &mut Vec<(String, String)>| {
                if !v.is_finite() || v <= 0.0 {
                    out.push((
                        at(field),
                        format!("must be a positive time in seconds, got {}", num(v)),
                    ));
                }
            };
            let switch = |name: &str, field: &str, out: &mut Vec<(String, String)>| match self
                .circuit
                .element(name)
            {
                Some(Element::Switch(_)) => {}
                Some(e) => out.push((
                    at(field),
                    format!(
                        "'{name}' is a {}; this field needs a switch",
                        e.kind_name().replace('_', " ")
                    ),
                )),
                None => out.push((at(field), format!("no element is named '{name}'"))),
            };
            let diode = |name: &str, field: &str, out: &mut Vec<(String, String)>| {
                let (base, part) = match name.split_once('.') {
                    Some((b, p)) => (b, Some(p)),
                    None => (name, None),
                };
                match (self.circuit.element(base), part) {
                    (Some(Element::Diode(_)), None) => {}
                    (Some(Element::Switch(s)), Some("body_diode")) if s.body_diode.is_some() => {}
                    (Some(Element::Switch(_)), Some("body_diode")) => {
                        out.push((at(field), format!("switch '{base}' has no body_diode")))
                    }
                    (Some(Element::Switch(_)), None) => out.push((
                        at(field),
                        format!(
                            "'{name}' is a switch; this field needs a diode (a switch's body \
                             diode is '{name}.body_diode')"
                        ),
                    )),
                    (Some(e), _) => out.push((
                        at(field),
                        format!(
                            "'{name}' is not a diode (it names a {}); this field needs a diode \
                             or SWITCH.body_diode",
                            e.kind_name().replace('_', " ")
                        ),
                    )),
                    (None, _) => out.push((at(field), format!("no element is named '{base}'"))),
                }
            };
            let range = |min: Option<f64>, max: Option<f64>, out: &mut Vec<(String, String)>| {
                if min.is_none() && max.is_none() {
                    out.push((at("min"), "give min, max or both".into()));
                }
                if let (Some(a), Some(b)) = (min, max) {
                    if a > b {
                        out.push((
                            at("max"),
                            format!("must not be below min = {}, got {}", num(a), num(b)),
                        ));
                    }
                }
            };
            match &rule.check {
                TimingCheck::DeadTime { switches, min } => {
                    switch(&switches[0], "switches[0]", &mut out);
                    switch(&switches[1], "switches[1]", &mut out);
                    if switches[0] == switches[1] {
                        out.push((at("switches"), "names the same switch twice".into()));
                    }
                    limit("min", *min, &mut out);
                }
                TimingCheck::OnTime {
                    switch: s,
                    min,
                    max,
                }
                | TimingCheck::OffTime {
                    switch: s,
                    min,
                    max,
                }
                | TimingCheck::SwitchingPeriod {
                    switch: s,
                    min,
                    max,
                } => {
                    switch(s, "switch", &mut out);
                    if let Some(v) = min {
                        limit("min", *v, &mut out);
                    }
                    if let Some(v) = max {
                        limit("max", *v, &mut out);
                    }
                    range(*min, *max, &mut out);
                }
                TimingCheck::NoOverlap { switches } => {
                    if switches.len() < 2 {
                        out.push((at("switches"), "name two or more switches".into()));
                    }
                    for (k, s) in switches.iter().enumerate() {
                        switch(s, &format!("switches[{k}]"), &mut out);
                    }
                }
                TimingCheck::DiodeConduction { diode: d, max } => {
                    diode(d, "diode", &mut out);
                    limit("max", *max, &mut out);
                }
                TimingCheck::HardTurnOn {
                    switch: s,
                    diode: d,
                    ..
                } => {
                    switch(s, "switch", &mut out);
                    diode(d, "diode", &mut out);
                }
                TimingCheck::EdgeDelay { switch: s, max, .. } => {
                    switch(s, "switch", &mut out);
                    limit("max", *max, &mut out);
                }
                TimingCheck::Band { output, min, max } => {
                    if let Some(m) = self.output_problem(output) {
                        out.push((at("output"), m));
                    }
                    if !min.is_finite() || !max.is_finite() || min > max {
                        out.push((
                            at("max"),
                            format!(
                                "the band needs finite min <= max, got [{}, {}]",
                                num(*min),
                                num(*max)
                            ),
                        ));
                    }
                }
            }
            for (field, v) in [("from", rule.from), ("to", rule.to)] {
                if let Some(v) = v {
                    if !v.is_finite() || v < 0.0 {
                        out.push((at(field), format!("must be a time >= 0 s, got {}", num(v))));
                    } else if stop.is_finite() && v > stop {
                        out.push((
                            at(field),
                            format!("lies after the stop time {} s, got {} s", num(stop), num(v)),
                        ));
                    }
                }
            }
            if let (Some(a), Some(b)) = (rule.from, rule.to) {
                if a >= b {
                    out.push((
                        at("to"),
                        format!("must be after from = {} s, got {} s", num(a), num(b)),
                    ));
                }
            }
            for (field, message) in out {
                self.run_problem(&field, format!("rule '{rule_name}': {message}"));
            }
        }
    }
}
