//! Timing rules of the run settings: each names switches where it needs
//! switches, diodes (or body diodes) where it needs diodes, positive finite
//! limits, and a window inside the run.

use super::checker::{num, Checker};
use crate::element::Element;
use crate::timing::TimingCheck;

impl Checker<'_> {
    /// The timing rules, in order; each problem names the rule and its
    /// field.
    pub(super) fn timing_rules(&mut self) {
        let Some(run) = &self.circuit.run else { return };
        for (i, rule) in run.timing.iter().enumerate() {
            let mut found = RuleProblems {
                checker: self,
                index: i,
                out: Vec::new(),
            };
            found.check(&rule.check);
            found.window(rule.from, rule.to, run.stop_time);
            let out = found.out;
            let rule_name = rule.display_name();
            for (field, message) in out {
                self.run_problem(&field, format!("rule '{rule_name}': {message}"));
            }
        }
    }
}

/// The problems of one timing rule as (field, message), in the order the
/// checks find them.
struct RuleProblems<'c, 'a> {
    checker: &'c Checker<'a>,
    /// The rule's position in `run.timing`.
    index: usize,
    out: Vec<(String, String)>,
}

impl RuleProblems<'_, '_> {
    /// Reports `message` about the rule's `field`.
    fn push(&mut self, field: &str, message: String) {
        let at = format!("run.timing[{}].{field}", self.index);
        self.out.push((at, message));
    }

    /// The fields of each kind of rule.
    fn check(&mut self, check: &TimingCheck) {
        match check {
            TimingCheck::DeadTime { switches, min } => {
                self.switch(&switches[0], "switches[0]");
                self.switch(&switches[1], "switches[1]");
                if switches[0] == switches[1] {
                    self.push("switches", "names the same switch twice".into());
                }
                self.limit("min", *min);
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
                self.switch(s, "switch");
                if let Some(v) = min {
                    self.limit("min", *v);
                }
                if let Some(v) = max {
                    self.limit("max", *v);
                }
                self.range(*min, *max);
            }
            TimingCheck::NoOverlap { switches } => {
                if switches.len() < 2 {
                    self.push("switches", "name two or more switches".into());
                }
                for (k, s) in switches.iter().enumerate() {
                    self.switch(s, &format!("switches[{k}]"));
                }
            }
            TimingCheck::DiodeConduction { diode: d, max } => {
                self.diode(d, "diode");
                self.limit("max", *max);
            }
            TimingCheck::HardTurnOn {
                switch: s,
                diode: d,
                ..
            } => {
                self.switch(s, "switch");
                self.diode(d, "diode");
            }
            TimingCheck::EdgeDelay { switch: s, max, .. } => {
                self.switch(s, "switch");
                self.limit("max", *max);
            }
            TimingCheck::Band { output, min, max } => {
                if let Some(m) = self.checker.output_problem(output) {
                    self.push("output", m);
                }
                if !min.is_finite() || !max.is_finite() || min > max {
                    self.push(
                        "max",
                        format!(
                            "the band needs finite min <= max, got [{}, {}]",
                            num(*min),
                            num(*max)
                        ),
                    );
                }
            }
        }
    }

    /// A limit must be a positive, finite time.
    fn limit(&mut self, field: &str, v: f64) {
        if !v.is_finite() || v <= 0.0 {
            self.push(
                field,
                format!("must be a positive time in seconds, got {}", num(v)),
            );
        }
    }

    /// `name` must name a switch.
    fn switch(&mut self, name: &str, field: &str) {
        match self.checker.circuit.element(name) {
            Some(Element::Switch(_)) => {}
            Some(e) => self.push(
                field,
                format!(
                    "'{name}' is a {}; this field needs a switch",
                    e.kind_name().replace('_', " ")
                ),
            ),
            None => self.push(field, format!("no element is named '{name}'")),
        }
    }

    /// `name` must name a diode, or be `SWITCH.body_diode` of a switch that
    /// has one.
    fn diode(&mut self, name: &str, field: &str) {
        let (base, part) = match name.split_once('.') {
            Some((b, p)) => (b, Some(p)),
            None => (name, None),
        };
        match (self.checker.circuit.element(base), part) {
            (Some(Element::Diode(_)), None) => {}
            (Some(Element::Switch(s)), Some("body_diode")) if s.body_diode.is_some() => {}
            (Some(Element::Switch(_)), Some("body_diode")) => {
                self.push(field, format!("switch '{base}' has no body_diode"))
            }
            (Some(Element::Switch(_)), None) => self.push(
                field,
                format!(
                    "'{name}' is a switch; this field needs a diode (a switch's body \
                     diode is '{name}.body_diode')"
                ),
            ),
            (Some(e), _) => self.push(
                field,
                format!(
                    "'{name}' is not a diode (it names a {}); this field needs a diode \
                     or SWITCH.body_diode",
                    e.kind_name().replace('_', " ")
                ),
            ),
            (None, _) => self.push(field, format!("no element is named '{base}'")),
        }
    }

    /// At least one of `min` and `max`, and `min` not above `max`.
    fn range(&mut self, min: Option<f64>, max: Option<f64>) {
        if min.is_none() && max.is_none() {
            self.push("min", "give min, max or both".into());
        }
        if let (Some(a), Some(b)) = (min, max) {
            if a > b {
                self.push(
                    "max",
                    format!("must not be below min = {}, got {}", num(a), num(b)),
                );
            }
        }
    }

    /// `from` and `to` are times in [0, stop], `from` before `to`.
    fn window(&mut self, from: Option<f64>, to: Option<f64>, stop: f64) {
        for (field, v) in [("from", from), ("to", to)] {
            if let Some(v) = v {
                if !v.is_finite() || v < 0.0 {
                    self.push(field, format!("must be a time >= 0 s, got {}", num(v)));
                } else if stop.is_finite() && v > stop {
                    self.push(
                        field,
                        format!("lies after the stop time {} s, got {} s", num(stop), num(v)),
                    );
                }
            }
        }
        if let (Some(a), Some(b)) = (from, to) {
            if a >= b {
                self.push(
                    "to",
                    format!("must be after from = {} s, got {} s", num(a), num(b)),
                );
            }
        }
    }
}
