//! Design limits within their circuit: figures positive and in range, and
//! every part named by a limit of the right kind.

use crate::circuit::Circuit;
use crate::element::Element;
use crate::error::Problem;
use crate::limits::DesignLimits;

impl DesignLimits {
    /// Every problem of these limits within `circuit`, each naming its
    /// field under `run.limits`: values must be positive and finite, the
    /// derating factor in (0, 1], a phase margin below 180°, saturation
    /// currents must name inductors and voltage ratings switches or
    /// diodes, and the ripple output a node.
    pub fn problems(&self, circuit: &Circuit) -> Vec<Problem> {
        let mut out = Vec::new();
        let mut push = |field: String, message: String| {
            out.push(Problem {
                element: None,
                field: Some(field),
                node: None,
                message,
            })
        };
        let positive = |v: f64| v.is_finite() && v > 0.0;
        if let Some(node) = &self.output {
            if !circuit.nodes().iter().any(|n| n == node) {
                push(
                    "run.limits.output".into(),
                    format!("no node is named '{node}'"),
                );
            }
        }
        if let Some(v) = self.max_output_ripple.filter(|v| !positive(*v)) {
            push(
                "run.limits.max_output_ripple".into(),
                format!("must be a positive voltage in volts, got {v}"),
            );
        }
        if let Some(v) = self
            .derating
            .filter(|v| !(v.is_finite() && *v > 0.0 && *v <= 1.0))
        {
            push(
                "run.limits.derating".into(),
                format!("must lie in (0, 1], got {v}"),
            );
        }
        if let Some(v) = self
            .min_phase_margin
            .filter(|v| !(v.is_finite() && *v > 0.0 && *v < 180.0))
        {
            push(
                "run.limits.min_phase_margin".into(),
                format!("must lie in (0, 180) degrees, got {v}"),
            );
        }
        if let Some(v) = self.max_junction_temperature.filter(|v| !v.is_finite()) {
            push(
                "run.limits.max_junction_temperature".into(),
                format!("must be a finite temperature in °C, got {v}"),
            );
        }
        for (list, name, wants) in [
            (
                &self.saturation_current,
                "saturation_current",
                "an inductor",
            ),
            (&self.voltage_rating, "voltage_rating", "a switch or diode"),
        ] {
            for (i, p) in list.iter().enumerate() {
                let at = |f: &str| format!("run.limits.{name}[{i}].{f}");
                let fits = match circuit.element(&p.element) {
                    Some(Element::Inductor(_)) => name == "saturation_current",
                    Some(Element::Switch(_) | Element::Diode(_)) => name == "voltage_rating",
                    Some(_) => false,
                    None => {
                        push(
                            at("element"),
                            format!("no element is named '{}'", p.element),
                        );
                        continue;
                    }
                };
                if !fits {
                    push(at("element"), format!("'{}' is not {wants}", p.element));
                }
                if !positive(p.value) {
                    push(
                        at("value"),
                        format!("must be positive and finite, got {}", p.value),
                    );
                }
            }
        }
        out
    }
}
