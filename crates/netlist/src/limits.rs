//! Design limits of a circuit file's run settings: the figures a design
//! review checks a converter against (output ripple, inductor saturation,
//! switch voltage ratings with derating, phase margin, junction
//! temperature). The rules that check them against the circuit they
//! belong to are with the other circuit rules (`validate`).

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

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
}
