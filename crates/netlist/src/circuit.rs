//! The circuit as a whole: elements, gates, compensators and optional run
//! settings, the ground node and the names of recordable outputs. Reading
//! and writing JSON is in `json`, the builder in `builder`, the rules in
//! `validate`; this module depends on none of them.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::element::*;
use crate::error::Problem;
use crate::gate::{Gate, SignalShape};
use crate::limits::DesignLimits;
use crate::timing::TimingRule;
use crate::value::{self, SiValue};

/// The name of the ground node. `"0"` is accepted as an alias.
pub const GROUND: &str = "gnd";

/// True if `node` names ground (`gnd` or `0`).
pub fn is_ground(node: &str) -> bool {
    node == GROUND || node == "0"
}

/// A circuit: named elements on named nodes, plus the gate signals that
/// drive its switches. Values are SI units.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Circuit {
    /// Free text describing the circuit (optional).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub description: String,
    /// The elements.
    pub elements: Vec<Element>,
    /// The gate signals.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub gates: Vec<Gate>,
    /// Analog compensators whose states join the circuit state (optional).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub compensators: Vec<Compensator>,
    /// Default settings for a transient run (optional).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub run: Option<RunSettings>,
}

/// A linear analog compensator: it measures a circuit output, forms the
/// error `reference − input`, and drives its own output `NAME.output`
/// (usable as the control of a voltage-mode gate). Its states are solved
/// exactly together with the circuit's.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Compensator {
    /// Unique name; its output is `NAME.output`.
    pub name: String,
    /// The output measured (a node, `ELEMENT.current`, …).
    pub input: String,
    /// Set-point: the block acts on `reference − input`.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub reference: f64,
    /// The transfer law.
    pub law: CompensatorLaw,
}

/// The transfer law of a [`Compensator`], tagged by `kind` in JSON.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum CompensatorLaw {
    /// u = kp·e + ki·∫e dt.
    Pi {
        /// Proportional gain.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        kp: f64,
        /// Integral gain (1/s).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        ki: f64,
    },
    /// G(s) = gain · (1/s if `integrator`) · Π(1 + s/ωz) / Π(1 + s/ωp),
    /// ω = 2π·f, the usual form for voltage-mode compensators (one
    /// integrator and two zeros and poles, or fewer). The numerator may not
    /// have more zeros than the denominator has poles (integrator included).
    PolesZeros {
        /// Gain (for an integrator: the gain in 1/s at frequencies well
        /// below every zero and pole).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        gain: f64,
        /// Whether there is a pole at the origin (default true).
        #[serde(default = "yes")]
        integrator: bool,
        /// Zero frequencies in hertz (positive: left half-plane).
        #[serde(default)]
        zeros_hz: Vec<f64>,
        /// Pole frequencies in hertz (positive: left half-plane).
        #[serde(default)]
        poles_hz: Vec<f64>,
    },
    /// x' = A x + B e, u = C x + D e (single input, single output).
    StateSpace {
        /// n × n matrix, rows first.
        a: Vec<Vec<f64>>,
        /// n entries.
        b: Vec<f64>,
        /// n entries.
        c: Vec<f64>,
        /// Direct feed-through.
        #[serde(default)]
        d: f64,
    },
}

fn yes() -> bool {
    true
}

/// Default settings for a transient run, overridable from the command line.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RunSettings {
    /// Stop time in seconds.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub stop_time: f64,
    /// Start of the recorded window in seconds (default: the whole run).
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub record_from: Option<f64>,
    /// Outputs to record and plot, in any of the forms of
    /// [`OUTPUT_FORMS`]: a node name for its voltage, `ELEMENT.current` /
    /// `ELEMENT.voltage`, a winding `ELEMENT.WINDING.current`, …
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub outputs: Vec<String>,
    /// What the run does when a switch or diode leaves inductor current
    /// with no path: `"stop"` (default) or `"conserve_flux"`.
    #[serde(default, skip_serializing_if = "is_default")]
    pub on_interruption: InterruptionPolicy,
    /// What the run does when closed switches short a source or capacitor
    /// through their on-resistance: `"stop"` (default) or `"record"`.
    #[serde(default, skip_serializing_if = "is_default")]
    pub on_shoot_through: ShootThroughPolicy,
    /// Timing rules checked over the run (see docs/timing.md); a violated
    /// rule makes `fluxstep run` exit with status 1.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub timing: Vec<TimingRule>,
    /// Design limits a report checks the design against (see
    /// docs/report.md); a failed limit makes `fluxstep report` exit with
    /// status 1.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub limits: Option<DesignLimits>,
    /// The converter's loads (default none): elements whose absorbed power
    /// is the output power in the efficiency. Without them, resistors from
    /// the output node to ground (directly or through one switch) are
    /// taken (docs/losses.md).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub loads: Vec<String>,
}

impl RunSettings {
    /// Settings that stop at `stop_time`, record everything, name no
    /// outputs and stop on every diagnostic.
    pub fn default_for(stop_time: f64) -> RunSettings {
        RunSettings {
            stop_time,
            record_from: None,
            outputs: Vec::new(),
            on_interruption: InterruptionPolicy::Stop,
            on_shoot_through: ShootThroughPolicy::Stop,
            timing: Vec::new(),
            limits: None,
            loads: Vec::new(),
        }
    }
}

fn is_default<T: Default + PartialEq>(v: &T) -> bool {
    *v == T::default()
}

/// What a run does when a switch or diode leaves inductor current with no
/// path (physically: the voltage spike that destroys a transistor).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum InterruptionPolicy {
    /// Default. Stop the run with a diagnostic naming the switch, the
    /// inductors, the current and the stored energy.
    #[default]
    Stop,
    /// Go on with the flux-conserving jump (inductors left in series share
    /// current by conservation of flux linkage) and log the energy lost.
    ConserveFlux,
}

/// What a run does when closed switches short a voltage source or a
/// capacitor through their on-resistance. A short with no resistance at
/// all always stops the run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum ShootThroughPolicy {
    /// Default. Stop the run with a diagnostic naming the loop.
    #[default]
    Stop,
    /// Log a shoot-through event each time the short begins and go on.
    Record,
}

/// Every form an output name can take, for messages that list them.
pub const OUTPUT_FORMS: &str = "a node name (its voltage to ground), ELEMENT.current, \
ELEMENT.voltage, a coupled winding COUPLED.WINDING.current or .voltage, a transformer side \
TRANSFORMER.primary.current / TRANSFORMER.secondary.current (or .voltage), a switch's body \
diode SWITCH.body_diode.current or .voltage, or COMPENSATOR.output";

impl Circuit {
    /// The element with this name.
    pub fn element(&self, name: &str) -> Option<&Element> {
        self.elements.iter().find(|e| e.name() == name)
    }

    /// Every gate signal by name with its shape.
    pub fn signals(&self) -> Vec<(String, SignalShape)> {
        self.gates.iter().flat_map(|g| g.signals()).collect()
    }

    /// Every node name, ground first (as `gnd`), then in order of first use.
    pub fn nodes(&self) -> Vec<String> {
        let mut out = vec![GROUND.to_string()];
        // A set beside the list keeps this linear in the terminals.
        let mut seen: std::collections::HashSet<&str> = [GROUND].into_iter().collect();
        for e in &self.elements {
            for (_, n) in e.terminals() {
                let n = if is_ground(n) { GROUND } else { n };
                if seen.insert(n) {
                    out.push(n.to_string());
                }
            }
        }
        out
    }
}

/// An output that can be recorded: a node voltage, an element's current
/// or voltage, or a compensator's output.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub enum OutputName {
    /// Output of a compensator (`NAME.output`).
    Signal(String),
    /// Voltage of a node with respect to ground.
    Node(String),
    /// Current of an element (for windings and body diodes: `ELEMENT.PART`).
    Current(String),
    /// Voltage of an element (for windings and body diodes: `ELEMENT.PART`).
    Voltage(String),
}

impl OutputName {
    /// Parses `NODE`, `ELEMENT.current`, `ELEMENT.voltage`,
    /// `ELEMENT.PART.current` or `ELEMENT.PART.voltage`.
    ///
    /// # Errors
    ///
    /// A [`Problem`] naming the field `outputs` when the suffix is unknown.
    pub fn parse(text: &str) -> Result<OutputName, Problem> {
        match text.rsplit_once('.') {
            None if !text.is_empty() => Ok(OutputName::Node(if is_ground(text) {
                GROUND.into()
            } else {
                text.into()
            })),
            Some((e, "current")) if !e.is_empty() => Ok(OutputName::Current(e.into())),
            Some((e, "voltage")) if !e.is_empty() => Ok(OutputName::Voltage(e.into())),
            Some((e, "output")) if !e.is_empty() => Ok(OutputName::Signal(e.into())),
            _ => Err(Problem {
                element: None,
                field: Some("outputs".into()),
                node: None,
                message: format!("unknown output {text:?}: expected {OUTPUT_FORMS}"),
            }),
        }
    }

    /// The SI unit of the output: "A" for a current, "V" for a voltage, and
    /// "" for a compensator output (its unit follows from its law and input,
    /// so it is shown as a plain number).
    pub fn unit(&self) -> &'static str {
        match self {
            OutputName::Current(_) => "A",
            OutputName::Node(_) | OutputName::Voltage(_) => "V",
            OutputName::Signal(_) => "",
        }
    }

    /// The quantity in plain words, for axis titles: "current", "voltage"
    /// or "control signal".
    pub fn quantity(&self) -> &'static str {
        match self {
            OutputName::Current(_) => "current",
            OutputName::Node(_) | OutputName::Voltage(_) => "voltage",
            OutputName::Signal(_) => "control signal",
        }
    }
}

impl std::fmt::Display for OutputName {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            OutputName::Node(n) => write!(f, "{n}"),
            OutputName::Current(e) => write!(f, "{e}.current"),
            OutputName::Voltage(e) => write!(f, "{e}.voltage"),
            OutputName::Signal(e) => write!(f, "{e}.output"),
        }
    }
}
