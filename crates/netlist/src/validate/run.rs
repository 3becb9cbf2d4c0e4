//! Run settings: the stop time and recorded window, then the timing rules
//! (`timing`), the design limits (`limits`), the loads and the recorded
//! outputs.

use super::checker::{num, Checker};
use crate::circuit::OutputName;
use crate::error::Problem;

impl Checker<'_> {
    /// The run settings, when there are any.
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
}
