//! Design limits of a circuit file's run settings: the figures a design
//! review checks a converter against (output ripple, inductor saturation,
//! switch voltage ratings with derating, phase margin, junction
//! temperature), validated against the circuit they belong to.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::circuit::Circuit;
use crate::element::Element;
use crate::error::Problem;
use crate::value::{self, SiValue};

/// Limits a design must meet; every field is optional and only the limits
/// given are checked. The report marks each figure pass or fail against
/// them, and `fluxstep report` exits with status 1 when one fails.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct DesignLimits {
    /// Default `"out"`. The node whose ripple `max_output_ripple` limits.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub output: Option<String>,
    /// Largest peak-to-peak ripple of the output voltage over one period
    /// of the steady state, in volts.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub max_output_ripple: Option<f64>,
    /// Saturation current of inductors (amperes): each inductor's peak
    /// current magnitude must stay below it.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub saturation_current: Vec<PartLimit>,
    /// Voltage rating of switches and diodes (volts): each part's peak
    /// blocking voltage magnitude must stay below `derating` × rating.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub voltage_rating: Vec<PartLimit>,
    /// Default 1 (no derating). The fraction of a voltage rating a design
    /// may use, in (0, 1]; 0.8 is common practice.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub derating: Option<f64>,
    /// Smallest phase margin of every closed loop, in degrees.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub min_phase_margin: Option<f64>,
    /// Largest junction temperature of every part with a thermal network,
    /// in °C.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub max_junction_temperature: Option<f64>,
}

/// A limit that belongs to one element.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PartLimit {
    /// The element's name.
    pub element: String,
    /// The limit in SI units (A for a saturation current, V for a rating).
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub value: f64,
}

impl DesignLimits {
    /// The output node whose ripple is limited (`"out"` by default).
    pub fn ripple_output(&self) -> &str {
        self.output.as_deref().unwrap_or("out")
    }

    /// The derating factor (1 by default).
    pub fn derating_factor(&self) -> f64 {
        self.derating.unwrap_or(1.0)
    }

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
