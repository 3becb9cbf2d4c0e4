//! The gate descriptions as written in JSON: the scheduled signals (PWM,
//! complementary pair, explicit transitions) and the closed-loop gates.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::value::{self, SiValue};

/// One (time, on/off) transition of an explicit gate signal.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Transition {
    /// Time in seconds.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub time: f64,
    /// State from this time on.
    pub on: bool,
}

/// A gate definition, tagged by `kind` in JSON.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Gate {
    /// Fixed-frequency PWM: on over [k·T + delay, k·T + delay + duty·T).
    Pwm {
        /// Signal name that switches refer to.
        name: String,
        /// Switching frequency in hertz; must be positive.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        frequency: f64,
        /// Duty cycle in [0, 1].
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        duty: f64,
        /// Delay of the first rising edge in seconds (default 0).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        delay: f64,
        /// The signal is held off before this time (optional).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        start: Option<f64>,
        /// The signal is held off from this time on (optional).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        stop: Option<f64>,
    },
    /// A complementary pair for a half-bridge, signals `NAME.high` and
    /// `NAME.low`. The reference PWM (frequency, duty, delay) rises at
    /// k·T + delay and falls at k·T + delay + duty·T. The high side turns on
    /// `dead_time_high` after the reference rises and off when it falls; the
    /// low side turns on `dead_time_low` after the reference falls and off
    /// when the next period begins. Each dead time must fit in its part of
    /// the period.
    ComplementaryPwm {
        /// Pair name; switches refer to `NAME.high` and `NAME.low`.
        name: String,
        /// Switching frequency in hertz; must be positive.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        frequency: f64,
        /// Duty cycle of the reference PWM in [0, 1].
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        duty: f64,
        /// Delay of the reference rising edge in seconds (default 0).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        delay: f64,
        /// Dead time before each high-side rising edge, in seconds.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        dead_time_high: f64,
        /// Dead time before each low-side rising edge, in seconds.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        dead_time_low: f64,
        /// Both signals are held off before this time (optional).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        start: Option<f64>,
        /// Both signals are held off from this time on (optional).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        stop: Option<f64>,
    },
    /// An explicit list of transitions (times strictly increasing). With
    /// `period`, the list describes [0, period) and repeats; all times must
    /// then lie in [0, period).
    Transitions {
        /// Signal name that switches refer to.
        name: String,
        /// State before the first transition (default off).
        #[serde(default)]
        initial: bool,
        /// The transitions.
        transitions: Vec<Transition>,
        /// Repeat period in seconds (optional).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        period: Option<f64>,
    },
    /// Peak-current control: on at every clock edge k·T; off when the sensed
    /// output rises above `reference − slope·τ` (τ: time since the clock,
    /// `slope`: compensation ramp in units per second), or at `max_duty`.
    PeakCurrent {
        /// Signal name that switches refer to.
        name: String,
        /// Clock frequency in hertz; must be positive.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        frequency: f64,
        /// The output compared (usually `L1.current`).
        sense: String,
        /// Peak reference (A, or the sensed output's unit).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        reference: f64,
        /// Compensation ramp slope subtracted from the reference, per second (default 0).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        slope: f64,
        /// Longest on-time as a fraction of the period (default 1: no limit).
        #[serde(
            default = "one",
            deserialize_with = "value::de",
            serialize_with = "value::ser"
        )]
        #[schemars(with = "SiValue")]
        max_duty: f64,
    },
    /// Valley-current control: off at every clock edge k·T; on when the
    /// sensed output falls below `reference + slope·τ`.
    ValleyCurrent {
        /// Signal name that switches refer to.
        name: String,
        /// Clock frequency in hertz; must be positive.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        frequency: f64,
        /// The output compared (usually `L1.current`).
        sense: String,
        /// Valley reference.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        reference: f64,
        /// Compensation ramp slope added to the reference, per second (default 0).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        slope: f64,
    },
    /// Hysteretic control: off when the sensed output rises above `high`,
    /// on when it falls below `low`. Starts on if the output is below `high`.
    Hysteretic {
        /// Signal name that switches refer to.
        name: String,
        /// The output compared (e.g. the output node).
        sense: String,
        /// Lower threshold (turns on).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        low: f64,
        /// Upper threshold (turns off); must exceed `low`.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        high: f64,
    },
    /// Analog voltage-mode PWM: on at every clock edge k·T; off when the
    /// `control` output falls below a sawtooth rising from `ramp_low` to
    /// `ramp_high` over the period; the on-time is held within
    /// [`min_duty`, `max_duty`] of the period.
    VoltageMode {
        /// Signal name that switches refer to.
        name: String,
        /// Clock frequency in hertz; must be positive.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        frequency: f64,
        /// The control output (e.g. a compensator's `NAME.output`).
        control: String,
        /// Sawtooth value at the clock edge.
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        ramp_low: f64,
        /// Sawtooth value at the end of the period; must exceed `ramp_low`.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        ramp_high: f64,
        /// Shortest on-time as a fraction of the period (default 0).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        min_duty: f64,
        /// Longest on-time as a fraction of the period (default 1).
        #[serde(
            default = "one",
            deserialize_with = "value::de",
            serialize_with = "value::ser"
        )]
        #[schemars(with = "SiValue")]
        max_duty: f64,
    },
}

fn one() -> f64 {
    1.0
}

impl Gate {
    /// The gate's own name (a complementary pair's signals add `.high`/`.low`).
    pub fn name(&self) -> &str {
        match self {
            Gate::Pwm { name, .. }
            | Gate::ComplementaryPwm { name, .. }
            | Gate::Transitions { name, .. }
            | Gate::PeakCurrent { name, .. }
            | Gate::ValleyCurrent { name, .. }
            | Gate::Hysteretic { name, .. }
            | Gate::VoltageMode { name, .. } => name,
        }
    }
}
