//! Timing rules declared in a circuit's run settings: what a control
//! design promises about its edges (dead times, on-times, periods, diode
//! conduction, delays, output bands). The netlist only describes and
//! validates them; the analysis crate evaluates them over a run.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::value::{self, SiValue};

/// One timing rule: a name for messages, an optional time window and the
/// check itself (tagged by `kind` in JSON, its fields beside the name).
///
/// ```json
/// {"name": "bridge dead time", "kind": "dead_time",
///  "switches": ["Q1", "Q2"], "min": "40n"}
/// ```
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct TimingRule {
    /// Name used in messages (default: the kind and elements, e.g.
    /// `dead_time Q1/Q2`).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub name: String,
    /// Start of the window the rule watches in seconds (default 0). A
    /// measurement counts when the instant it is reported at (see
    /// docs/timing.md) lies in the window.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub from: Option<f64>,
    /// End of the window in seconds (default: the end of the run).
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub to: Option<f64>,
    /// What the rule checks.
    #[serde(flatten)]
    pub check: TimingCheck,
}

/// Which edges of a switch an [`TimingCheck::EdgeDelay`] rule watches.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum EdgeSense {
    /// Turn-on edges.
    On,
    /// Turn-off edges.
    Off,
    /// Both (default).
    #[default]
    Both,
}

/// The check of a [`TimingRule`]. Times are in seconds; every limit must
/// be positive and finite.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum TimingCheck {
    /// Dead time: from one switch turning off to the other turning on, in
    /// either order, at least `min`. An overlap counts as a negative gap.
    DeadTime {
        /// The two switches.
        switches: [String; 2],
        /// Least allowed gap (s).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        min: f64,
    },
    /// On-time of a switch (turn-on to the following turn-off) within
    /// [`min`, `max`]; give at least one.
    OnTime {
        /// The switch.
        switch: String,
        /// Least on-time (s).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        min: Option<f64>,
        /// Greatest on-time (s).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        max: Option<f64>,
    },
    /// Off-time of a switch (turn-off to the following turn-on) within
    /// [`min`, `max`]; give at least one.
    OffTime {
        /// The switch.
        switch: String,
        /// Least off-time (s).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        min: Option<f64>,
        /// Greatest off-time (s).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        max: Option<f64>,
    },
    /// Switching period of a switch (one turn-on to the next) within
    /// [`min`, `max`]; give at least one.
    SwitchingPeriod {
        /// The switch.
        switch: String,
        /// Shortest period (s).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        min: Option<f64>,
        /// Longest period (s).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        max: Option<f64>,
    },
    /// No two of these switches on together; the margin is how close they
    /// came (the least gap from one turning off to another turning on).
    NoOverlap {
        /// Two or more switches.
        switches: Vec<String>,
    },
    /// Conduction time of a diode (or `SWITCH.body_diode`) per switching
    /// period at most `max` (per conduction interval when the circuit has
    /// no periodic gate).
    DiodeConduction {
        /// The diode, or a switch's body diode `SWITCH.body_diode`.
        diode: String,
        /// Longest conduction per period (s).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        max: f64,
    },
    /// A switch turning on while a diode conducts (hard turn-on, reverse
    /// recovery risk): counted; at most `max_count` allowed (default 0).
    HardTurnOn {
        /// The switch.
        switch: String,
        /// The diode, or a switch's body diode `SWITCH.body_diode`.
        diode: String,
        /// Occurrences allowed (default 0).
        #[serde(default)]
        max_count: u64,
    },
    /// Delay from a located crossing (a comparator threshold or a diode's
    /// current reaching zero, any event the solver located on the exact
    /// solution) to the edge of `switch` that follows it, at most `max`.
    EdgeDelay {
        /// The switch whose edges are timed.
        switch: String,
        /// Which edges (default both).
        #[serde(default)]
        edge: EdgeSense,
        /// Longest delay (s).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        max: f64,
    },
    /// An output stays within [`min`, `max`] over the rule's window (exact
    /// extremes), e.g. the output voltage during start-up.
    Band {
        /// The output (any form of `run.outputs`).
        output: String,
        /// Lower limit (V or A).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        min: f64,
        /// Upper limit (V or A).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        max: f64,
    },
}

impl TimingCheck {
    /// The kind as written in JSON (`"dead_time"`, …).
    pub fn kind_name(&self) -> &'static str {
        match self {
            TimingCheck::DeadTime { .. } => "dead_time",
            TimingCheck::OnTime { .. } => "on_time",
            TimingCheck::OffTime { .. } => "off_time",
            TimingCheck::SwitchingPeriod { .. } => "switching_period",
            TimingCheck::NoOverlap { .. } => "no_overlap",
            TimingCheck::DiodeConduction { .. } => "diode_conduction",
            TimingCheck::HardTurnOn { .. } => "hard_turn_on",
            TimingCheck::EdgeDelay { .. } => "edge_delay",
            TimingCheck::Band { .. } => "band",
        }
    }

    /// The elements (or output) the rule names, in order.
    pub fn subjects(&self) -> Vec<&str> {
        match self {
            TimingCheck::DeadTime { switches, .. } => switches.iter().map(|s| s.as_str()).collect(),
            TimingCheck::NoOverlap { switches } => switches.iter().map(|s| s.as_str()).collect(),
            TimingCheck::OnTime { switch, .. }
            | TimingCheck::OffTime { switch, .. }
            | TimingCheck::SwitchingPeriod { switch, .. }
            | TimingCheck::EdgeDelay { switch, .. } => vec![switch],
            TimingCheck::DiodeConduction { diode, .. } => vec![diode],
            TimingCheck::HardTurnOn { switch, diode, .. } => vec![switch, diode],
            TimingCheck::Band { output, .. } => vec![output],
        }
    }
}

impl TimingRule {
    /// A rule with the default name and no window.
    pub fn new(check: TimingCheck) -> TimingRule {
        TimingRule {
            name: String::new(),
            from: None,
            to: None,
            check,
        }
    }

    /// The same rule named `name`.
    pub fn named(mut self, name: impl Into<String>) -> TimingRule {
        self.name = name.into();
        self
    }

    /// The same rule watching only [`from`, `to`] (s).
    pub fn within(mut self, from: f64, to: f64) -> TimingRule {
        self.from = Some(from);
        self.to = Some(to);
        self
    }

    /// The name used in messages: `name`, or the kind and the elements.
    pub fn display_name(&self) -> String {
        if self.name.is_empty() {
            format!(
                "{} {}",
                self.check.kind_name(),
                self.check.subjects().join("/")
            )
        } else {
            self.name.clone()
        }
    }
}
