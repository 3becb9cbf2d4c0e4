//! The circuit as a whole: elements, gates and optional run settings, with
//! JSON read/write and a builder that reads like a converter schematic.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::element::*;
use crate::error::{NetlistError, Problem};
use crate::gate::{Gate, SignalShape, Transition};
use crate::limits::DesignLimits;
use crate::timing::TimingRule;
use crate::value::{self, SiValue};
use crate::waveform::Waveform;

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
    /// Reads a circuit from JSON text and validates it.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Json`] naming the path of a malformed field (e.g.
    /// `elements[1].inductance`), or [`NetlistError::Invalid`] listing every
    /// rule the circuit breaks.
    ///
    /// # Example
    ///
    /// ```
    /// let c = fluxstep_netlist::Circuit::from_json(r#"{"elements": [
    ///   {"kind": "voltage_source", "name": "V1", "nodes": ["in", "gnd"],
    ///    "waveform": {"kind": "constant", "value": "12"}},
    ///   {"kind": "resistor", "name": "R1", "nodes": ["in", "gnd"], "resistance": "1k"}
    /// ]}"#).unwrap();
    /// assert_eq!(c.elements.len(), 2);
    /// ```
    pub fn from_json(text: &str) -> Result<Circuit, NetlistError> {
        let c = Self::from_json_unchecked(text)?;
        c.validate()?;
        Ok(c)
    }

    /// Reads a circuit from JSON text without the circuit rules (format only).
    ///
    /// # Errors
    ///
    /// [`NetlistError::Json`] naming the path of the malformed field.
    pub fn from_json_unchecked(text: &str) -> Result<Circuit, NetlistError> {
        // A byte-order mark (some editors write one) is not part of the JSON.
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        if let Ok(value) = serde_json::from_str::<serde_json::Value>(text) {
            positional_arrays(&value)?;
        }
        let de = &mut serde_json::Deserializer::from_str(text);
        serde_path_to_error::deserialize(de).map_err(|e| {
            let path = e.path().to_string();
            let inner = e.into_inner();
            let message = inner.to_string();
            let eof = inner.classify() == serde_json::error::Category::Eof;
            let (path, message) = if eof || path == "." || path.is_empty() || path.contains('?') {
                // Cut short, not an object, or not JSON where the path ends
                // (`?`): the position is the only place there is to name.
                let at = format!("line {} column {}", inner.line(), inner.column());
                let message = message
                    .strip_suffix(&format!(" at {at}"))
                    .map(str::to_string)
                    .unwrap_or(message);
                (at, message)
            } else {
                (narrow_path(text, path, &message), message)
            };
            NetlistError::Json { path, message }
        })
    }

    /// Reads and validates a circuit from a JSON file.
    ///
    /// # Errors
    ///
    /// As [`Circuit::from_json`], plus [`NetlistError::Io`].
    pub fn from_file(path: impl AsRef<std::path::Path>) -> Result<Circuit, NetlistError> {
        let p = path.as_ref();
        let text = std::fs::read_to_string(p).map_err(|source| NetlistError::Io {
            path: p.display().to_string(),
            source,
        })?;
        Self::from_json(&text)
    }

    /// The circuit as pretty JSON; reading it back gives an identical circuit.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("a circuit always serializes")
    }

    /// Checks every rule and returns all problems at once.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Invalid`] with one [`Problem`] per broken rule.
    pub fn validate(&self) -> Result<(), NetlistError> {
        let problems = crate::validate::problems(self);
        if problems.is_empty() {
            Ok(())
        } else {
            Err(NetlistError::Invalid(problems))
        }
    }

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

    /// Starts a builder.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// // An asynchronous buck: 12 V in, 100 kHz, 40 % duty.
    /// let buck = Circuit::builder()
    ///     .voltage_source("Vin", "in", "gnd", 12.0)
    ///     .switch("S1", "in", "sw", "drive")
    ///     .diode("D1", "gnd", "sw")
    ///     .inductor("L1", "sw", "out", 22e-6)
    ///     .capacitor("C1", "out", "gnd", 100e-6)
    ///     .resistor("Rload", "out", "gnd", 2.0)
    ///     .pwm("drive", 100e3, 0.4)
    ///     .build()
    ///     .unwrap();
    /// assert_eq!(buck.elements.len(), 6);
    /// ```
    pub fn builder() -> CircuitBuilder {
        CircuitBuilder::default()
    }
}

/// One step of a JSON error path: a member name or a list index.
#[derive(Clone, Debug, PartialEq)]
enum Step {
    Key(String),
    Index(usize),
}

/// Reads a path as `serde_path_to_error` writes it (`elements[2].waveform`).
fn parse_path(path: &str) -> Option<Vec<Step>> {
    let mut steps = Vec::new();
    for part in path.split('.') {
        let (key, mut rest) = part.split_at(part.find('[').unwrap_or(part.len()));
        if !key.is_empty() {
            steps.push(Step::Key(key.to_string()));
        }
        while let Some(r) = rest.strip_prefix('[') {
            let end = r.find(']')?;
            steps.push(Step::Index(r[..end].parse().ok()?));
            rest = &r[end + 1..];
        }
        if !rest.is_empty() {
            return None;
        }
    }
    Some(steps)
}

fn value_at<'v>(v: &'v mut serde_json::Value, steps: &[Step]) -> Option<&'v mut serde_json::Value> {
    steps.iter().try_fold(v, |v, s| match s {
        Step::Key(k) => v.get_mut(k.as_str()),
        Step::Index(i) => v.get_mut(*i),
    })
}

/// Narrows the path of a JSON error below an internally tagged object.
///
/// serde buffers an element, waveform or gate (each tagged by `"kind"`)
/// before it reads the fields, so `serde_path_to_error` can name only the
/// object (`elements[2]`), not the field (`elements[2].inductance`). The
/// member at fault is found by reproducing the same error — same message,
/// and the same object as far as tracking reaches, so an identical mistake
/// elsewhere in the file cannot be mistaken for it — on changed copies of
/// the document, one level at a time:
///
/// - in a list, the culprit is the first item: the shortest prefix of the
///   list that still fails the same way ends with it (found by bisection,
///   so long piecewise-linear tables stay cheap);
/// - a bad or unknown member of an object: the object cut down to that
///   member (plus `kind`) fails the same way, since serde reports the first
///   bad member before it checks for missing ones;
/// - a missing field `f`: narrowing stops at the object where supplying
///   `f` changes the error (into anything but "unknown field"); above it,
///   the member holding that object is the one whose removal changes the
///   error;
/// - a flattened member (a diode's model) is read after the others, so the
///   cut-down object reports a missing field first; there the member whose
///   removal changes the error (to anything but its own absence) is taken.
///
/// Narrowing stops where no member reproduces the error. This runs only
/// after a failure, so good input pays nothing for it.
fn narrow_path(text: &str, path: String, message: &str) -> String {
    use serde_json::Value;

    // The error of a document as (tracked path, message).
    let error = |doc: &Value| -> Option<(String, String)> {
        serde_path_to_error::deserialize::<_, Circuit>(doc)
            .err()
            .map(|e| (e.path().to_string(), e.into_inner().to_string()))
    };
    let (Ok(mut doc), Some(mut shown)) = (serde_json::from_str::<Value>(text), parse_path(&path))
    else {
        return path;
    };
    // The document read as a value must fail exactly as the text did (the
    // text's message adds "at line L column C"), or the search would chase
    // a different error.
    let Some(baseline) = error(&doc).filter(|(p, m)| *p == path && message.starts_with(m.as_str()))
    else {
        return path;
    };
    let same = |e: Option<(String, String)>| e.as_ref() == Some(&baseline);
    let missing = baseline
        .1
        .strip_prefix("missing field `")
        .and_then(|r| r.strip_suffix('`'))
        .map(str::to_string);
    // A copy of `doc` with the value at `nav` changed by `f`.
    let changed = |doc: &Value, nav: &[Step], f: &dyn Fn(&mut Value)| {
        let mut trial = doc.clone();
        if let Some(v) = value_at(&mut trial, nav) {
            f(v);
        }
        trial
    };
    let without = |doc: &Value, nav: &[Step], key: &str| {
        error(&changed(doc, nav, &|v| {
            if let Value::Object(m) = v {
                m.remove(key);
            }
        }))
    };
    loop {
        let here = value_at(&mut doc, &shown).cloned();
        match here {
            Some(Value::Array(items)) if !baseline.1.starts_with("invalid length") => {
                // A wrong length is the list's own fault, not an item's.
                let prefix = |len: usize| {
                    changed(&doc, &shown, &|v| {
                        if let Value::Array(a) = v {
                            a.truncate(len);
                        }
                    })
                };
                if items.is_empty() || same(error(&prefix(0))) {
                    // The emptied list fails the same way: the fault is its own.
                    break;
                }
                // The shortest failing prefix: fails at `hi`, not below `lo`.
                let (mut lo, mut hi) = (1, items.len());
                while lo < hi {
                    let mid = lo + (hi - lo) / 2;
                    if same(error(&prefix(mid))) {
                        hi = mid;
                    } else {
                        lo = mid + 1;
                    }
                }
                doc = prefix(hi);
                shown.push(Step::Index(hi - 1));
            }
            Some(Value::Object(m)) => {
                let keys: Vec<String> = m.keys().filter(|k| *k != "kind").cloned().collect();
                if let Some(f) = &missing {
                    // This object is the one missing `f` if supplying `f`
                    // changes the error into anything but "unknown field".
                    if !m.contains_key(f) {
                        let e = error(&changed(&doc, &shown, &|v| {
                            if let Value::Object(m) = v {
                                m.insert(f.clone(), Value::from(0));
                            }
                        }));
                        let unknown = format!("unknown field `{f}`");
                        if !same(e.clone()) && !e.is_some_and(|(_, m)| m.starts_with(&unknown)) {
                            break;
                        }
                    }
                    // Only a list or an object can hold the missing field.
                    let holder = keys.into_iter().find(|k| {
                        (m[k].is_object() || m[k].is_array()) && !same(without(&doc, &shown, k))
                    });
                    match holder {
                        Some(k) => shown.push(Step::Key(k)),
                        None => break,
                    }
                    continue;
                }
                let cut = |keep: Option<&str>| {
                    changed(&doc, &shown, &|v| {
                        if let Value::Object(m) = v {
                            m.retain(|k, _| k == "kind" || Some(k.as_str()) == keep);
                        }
                    })
                };
                if same(error(&cut(None))) {
                    // The emptied object fails the same way: the fault is its own.
                    break;
                }
                if let Some(k) = keys.iter().find(|k| same(error(&cut(Some(k))))) {
                    doc = cut(Some(k));
                    shown.push(Step::Key(k.clone()));
                    continue;
                }
                // Flattened members are read after the others, so cutting
                // the object down reports a missing field first; removing
                // the culprit instead makes the error go away (or become
                // another one).
                let removed = keys.into_iter().find(|k| {
                    let e = without(&doc, &shown, k);
                    !same(e.clone()) && e.map(|(_, m)| m) != Some(format!("missing field `{k}`"))
                });
                shown.extend(removed.map(Step::Key));
                break;
            }
            _ => break,
        }
    }
    shown.iter().fold(String::new(), |mut out, s| {
        match s {
            Step::Key(k) if out.is_empty() => out.push_str(k),
            Step::Key(k) => {
                out.push('.');
                out.push_str(k);
            }
            Step::Index(i) => out.push_str(&format!("[{i}]")),
        }
        out
    })
}

/// Builds a [`Circuit`] element by element; [`CircuitBuilder::build`] validates.
#[derive(Clone, Debug, Default)]
pub struct CircuitBuilder {
    circuit: Circuit,
}

fn nodes(a: &str, b: &str) -> [String; 2] {
    [a.to_string(), b.to_string()]
}

impl CircuitBuilder {
    /// Adds any element.
    pub fn element(mut self, e: Element) -> Self {
        self.circuit.elements.push(e);
        self
    }

    /// Adds any gate.
    pub fn gate(mut self, g: Gate) -> Self {
        self.circuit.gates.push(g);
        self
    }

    /// Sets the description.
    pub fn description(mut self, text: &str) -> Self {
        self.circuit.description = text.to_string();
        self
    }

    /// Adds a resistor `a`–`b` of `ohms`.
    pub fn resistor(self, name: &str, a: &str, b: &str, ohms: f64) -> Self {
        self.element(Element::Resistor(Resistor {
            name: name.into(),
            nodes: nodes(a, b),
            resistance: ohms,
        }))
    }

    /// Adds an inductor `a`→`b` of `henries`, starting at zero current.
    pub fn inductor(self, name: &str, a: &str, b: &str, henries: f64) -> Self {
        self.element(Element::Inductor(Inductor {
            name: name.into(),
            nodes: nodes(a, b),
            inductance: henries,
            initial_current: None,
            winding_resistance: None,
            core: None,
        }))
    }

    /// Adds an inductor carrying `amps` (a → b) at t = 0.
    pub fn inductor_with_current(
        self,
        name: &str,
        a: &str,
        b: &str,
        henries: f64,
        amps: f64,
    ) -> Self {
        self.element(Element::Inductor(Inductor {
            name: name.into(),
            nodes: nodes(a, b),
            inductance: henries,
            initial_current: Some(amps),
            winding_resistance: None,
            core: None,
        }))
    }

    /// Adds a capacitor `a`–`b` of `farads`, starting discharged.
    pub fn capacitor(self, name: &str, a: &str, b: &str, farads: f64) -> Self {
        self.element(Element::Capacitor(Capacitor {
            name: name.into(),
            nodes: nodes(a, b),
            capacitance: farads,
            initial_voltage: None,
            esr: None,
        }))
    }

    /// Adds a capacitor charged to `volts` (v(a) − v(b)) at t = 0.
    pub fn capacitor_with_voltage(
        self,
        name: &str,
        a: &str,
        b: &str,
        farads: f64,
        volts: f64,
    ) -> Self {
        self.element(Element::Capacitor(Capacitor {
            name: name.into(),
            nodes: nodes(a, b),
            capacitance: farads,
            initial_voltage: Some(volts),
            esr: None,
        }))
    }

    /// Adds a constant voltage source, `plus` − `minus` = `volts`.
    pub fn voltage_source(self, name: &str, plus: &str, minus: &str, volts: f64) -> Self {
        self.voltage_waveform(name, plus, minus, Waveform::constant(volts))
    }

    /// Adds a voltage source following `waveform`.
    pub fn voltage_waveform(self, name: &str, plus: &str, minus: &str, waveform: Waveform) -> Self {
        self.element(Element::VoltageSource(VoltageSource {
            name: name.into(),
            nodes: nodes(plus, minus),
            waveform,
        }))
    }

    /// Adds a current source pushing `waveform` from `from` through itself to `to`.
    pub fn current_source(self, name: &str, from: &str, to: &str, waveform: Waveform) -> Self {
        self.element(Element::CurrentSource(CurrentSource {
            name: name.into(),
            nodes: nodes(from, to),
            waveform,
        }))
    }

    /// Adds an ideal switch `a`–`b` driven by gate signal `gate`.
    pub fn switch(self, name: &str, a: &str, b: &str, gate: &str) -> Self {
        self.element(Element::Switch(Switch {
            name: name.into(),
            nodes: nodes(a, b),
            gate: gate.into(),
            on_resistance: None,
            body_diode: None,
            thermal: None,
            transition: None,
            switching_energy: None,
        }))
    }

    /// Adds an ideal switch `a`–`b` that is open at first and closes
    /// (`true`) or opens (`false`) at each of the given times (strictly
    /// increasing), driven by a gate of explicit transitions of the same
    /// name — the usual way to close a switch onto a charged capacitor or
    /// open one under inductor current at a chosen instant.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    ///
    /// let c = Circuit::builder()
    ///     .capacitor_with_voltage("C1", "a", "gnd", 1e-6, 10.0)
    ///     .capacitor("C2", "b", "gnd", 1e-6)
    ///     .timed_switch("S1", "a", "b", &[(1e-6, true), (5e-6, false)])
    ///     .build()
    ///     .unwrap();
    /// assert_eq!(c.gates[0].name(), "S1");
    /// ```
    pub fn timed_switch(self, name: &str, a: &str, b: &str, times: &[(f64, bool)]) -> Self {
        self.switch(name, a, b, name).gate(Gate::Transitions {
            name: name.into(),
            initial: false,
            transitions: times
                .iter()
                .map(|&(time, on)| Transition { time, on })
                .collect(),
            period: None,
        })
    }

    /// Adds a switch with an anti-parallel body diode (a transistor), drain
    /// `a`, source `b`; the body diode conducts from `b` to `a`.
    pub fn transistor(
        self,
        name: &str,
        a: &str,
        b: &str,
        gate: &str,
        on_resistance: f64,
        body: DiodeModel,
    ) -> Self {
        self.element(Element::Switch(Switch {
            name: name.into(),
            nodes: nodes(a, b),
            gate: gate.into(),
            on_resistance: (on_resistance != 0.0).then_some(on_resistance),
            body_diode: Some(body),
            thermal: None,
            transition: None,
            switching_energy: None,
        }))
    }

    /// Adds an ideal diode, `anode` → `cathode`.
    pub fn diode(self, name: &str, anode: &str, cathode: &str) -> Self {
        self.element(Element::Diode(Diode {
            name: name.into(),
            nodes: nodes(anode, cathode),
            model: DiodeModel::default(),
            thermal: None,
        }))
    }

    /// Adds a diode with a forward voltage and on-resistance.
    pub fn diode_model(self, name: &str, anode: &str, cathode: &str, model: DiodeModel) -> Self {
        self.element(Element::Diode(Diode {
            name: name.into(),
            nodes: nodes(anode, cathode),
            model,
            thermal: None,
        }))
    }

    /// Adds fixed-frequency PWM gate `name` (rising at k·T, duty in [0, 1]).
    pub fn pwm(self, name: &str, frequency: f64, duty: f64) -> Self {
        self.gate(Gate::Pwm {
            name: name.into(),
            frequency,
            duty,
            delay: 0.0,
            start: None,
            stop: None,
        })
    }

    /// Adds a complementary pair `name.high` / `name.low` with dead times.
    pub fn complementary_pwm(
        self,
        name: &str,
        frequency: f64,
        duty: f64,
        dead_time_high: f64,
        dead_time_low: f64,
    ) -> Self {
        self.gate(Gate::ComplementaryPwm {
            name: name.into(),
            frequency,
            duty,
            delay: 0.0,
            dead_time_high,
            dead_time_low,
            start: None,
            stop: None,
        })
    }

    /// Sets the default run settings.
    pub fn run(mut self, stop_time: f64, outputs: &[&str]) -> Self {
        self.circuit.run = Some(RunSettings {
            outputs: outputs.iter().map(|s| s.to_string()).collect(),
            ..RunSettings::default_for(stop_time)
        });
        self
    }

    /// Validates and returns the circuit.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Invalid`] listing every problem.
    pub fn build(self) -> Result<Circuit, NetlistError> {
        self.circuit.validate()?;
        Ok(self.circuit)
    }

    /// Returns the circuit without validating it (for tests of validation).
    pub fn build_unchecked(self) -> Circuit {
        self.circuit
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

/// Refuses arrays where the format has objects. serde reads a struct or a
/// tagged enum from a sequence of its fields in order, so without this
/// check `["inductor", "L1", ["sw", "out"], "22u"]` would pass for an
/// inductor: a format nobody documented, which breaks silently when a
/// field is added. Apart from the matrix `a` of a state-space law, no field
/// of the format holds an array of arrays, so an array inside an array is
/// such a positional object; the top level and `run` must be objects.
fn positional_arrays(value: &serde_json::Value) -> Result<(), NetlistError> {
    use serde_json::Value;
    fn walk(v: &Value, path: &mut String) -> Result<(), NetlistError> {
        match v {
            Value::Array(items) => {
                for (i, item) in items.iter().enumerate() {
                    let len = path.len();
                    path.push_str(&format!("[{i}]"));
                    // A state-space law's `a` is the one matrix of the
                    // format: its rows are arrays of numbers.
                    let matrix = path[..len].ends_with(".a");
                    if item.is_array() && !matrix {
                        let what = match path.split('.').next_back() {
                            Some(p) if p.starts_with("points") || p.starts_with("transitions") => {
                                "expected an object with named fields (`time`, …), not an array"
                            }
                            _ => "expected an object with `kind` and named fields, not an array",
                        };
                        return Err(NetlistError::Json {
                            path: path.clone(),
                            message: what.into(),
                        });
                    }
                    walk(item, path)?;
                    path.truncate(len);
                }
                Ok(())
            }
            Value::Object(map) => {
                for (k, item) in map {
                    let len = path.len();
                    if !path.is_empty() {
                        path.push('.');
                    }
                    path.push_str(k);
                    if k == "run" && item.is_array() && len == 0 {
                        return Err(NetlistError::Json {
                            path: path.clone(),
                            message: "expected an object with named fields (`stop_time`, …), not an array".into(),
                        });
                    }
                    walk(item, path)?;
                    path.truncate(len);
                }
                Ok(())
            }
            _ => Ok(()),
        }
    }
    if value.is_array() {
        return Err(NetlistError::Json {
            path: "the top level".into(),
            message: "expected an object with `elements` (a circuit), not an array".into(),
        });
    }
    walk(value, &mut String::new())
}
