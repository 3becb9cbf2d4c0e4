//! Circuit elements: each has a unique name and named terminals.
//!
//! Sign convention (used everywhere in fluxstep): an element's voltage is
//! v(first terminal) − v(second terminal), and its current flows from the
//! first terminal through the element to the second.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::loss_data::{CoreModel, SwitchingEnergy};
use crate::stimulus::Stimulus;
use crate::value::{self, SiValue};

/// One element of a circuit, tagged by `kind` in JSON.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Element {
    /// A linear resistor.
    Resistor(Resistor),
    /// A linear inductor.
    Inductor(Inductor),
    /// A linear capacitor.
    Capacitor(Capacitor),
    /// Two or more magnetically coupled windings.
    CoupledInductors(CoupledInductors),
    /// An ideal two-winding transformer (no magnetising inductance).
    IdealTransformer(IdealTransformer),
    /// An independent voltage source.
    VoltageSource(VoltageSource),
    /// An independent current source.
    CurrentSource(CurrentSource),
    /// An ideal switch driven by a gate signal.
    Switch(Switch),
    /// A diode (ideal, or piecewise linear with forward voltage and on-resistance).
    Diode(Diode),
}

/// A linear resistor between two nodes.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Resistor {
    /// Unique element name.
    pub name: String,
    /// Terminals `[a, b]`.
    pub nodes: [String; 2],
    /// Resistance in ohms; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub resistance: f64,
}

/// A linear inductor; its current (a → b) is a state of the circuit.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Inductor {
    /// Unique element name.
    pub name: String,
    /// Terminals `[a, b]`.
    pub nodes: [String; 2],
    /// Inductance in henries; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub inductance: f64,
    /// Current at t = 0 in amperes, flowing a → b (default 0).
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub initial_current: Option<f64>,
    /// Winding (copper) resistance in ohms in series with the inductance
    /// (default none); must not be negative. The solver expands it into a
    /// resistor named `ELEMENT.winding` on an internal node, so
    /// `ELEMENT.voltage` is the voltage across the inductance alone and
    /// `ELEMENT.winding.voltage` the drop across the resistance.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub winding_resistance: Option<f64>,
    /// Core-loss parameters (optional): the losses analysis evaluates the
    /// core loss from the exact flux waveform. See [`CoreModel`].
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub core: Option<CoreModel>,
}

/// A linear capacitor; its voltage v(a) − v(b) is a state of the circuit.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Capacitor {
    /// Unique element name.
    pub name: String,
    /// Terminals `[a, b]`.
    pub nodes: [String; 2],
    /// Capacitance in farads; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub capacitance: f64,
    /// Voltage v(a) − v(b) at t = 0 in volts (default 0).
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub initial_voltage: Option<f64>,
    /// Equivalent series resistance in ohms (default none); must not be
    /// negative. The solver expands it into a resistor named `ELEMENT.esr`
    /// on an internal node, so `ELEMENT.voltage` is the voltage across the
    /// capacitance alone (the state) and `ELEMENT.esr.voltage` the drop
    /// across the resistance.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub esr: Option<f64>,
}

/// One winding of a set of coupled inductors.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Winding {
    /// Winding name, unique within its element (outputs name it `ELEMENT.WINDING`).
    pub name: String,
    /// Terminals `[dotted, undotted]`: current entering the dotted end of
    /// every winding produces flux in the same direction.
    pub nodes: [String; 2],
    /// Self inductance in henries; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub inductance: f64,
    /// Current at t = 0 in amperes, dotted → undotted (default 0).
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub initial_current: Option<f64>,
}

/// Coupling between two windings, given either way.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Coupling {
    /// The two winding names.
    pub windings: [String; 2],
    /// Coupling coefficient k in [-1, 1]: M = k·√(L1·L2). Give this or `mutual`.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub k: Option<f64>,
    /// Mutual inductance M in henries. Give this or `k`.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub mutual: Option<f64>,
}

/// Magnetically coupled windings: v = L·di/dt with a full inductance matrix.
///
/// Pairs not listed in `couplings` have no mutual inductance. The inductance
/// matrix must be positive definite (|k| < 1 for two windings); leakage is
/// what k < 1 leaves.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CoupledInductors {
    /// Unique element name.
    pub name: String,
    /// Two or more windings.
    pub windings: Vec<Winding>,
    /// Pairwise couplings, by coefficient or mutual inductance.
    #[serde(default)]
    pub couplings: Vec<Coupling>,
}

impl CoupledInductors {
    /// The inductance matrix (henries), row and column order of `windings`.
    ///
    /// Unknown winding names in `couplings` are skipped here; validation
    /// reports them.
    pub fn inductance_matrix(&self) -> Vec<Vec<f64>> {
        let n = self.windings.len();
        let mut m = vec![vec![0.0; n]; n];
        for (i, w) in self.windings.iter().enumerate() {
            m[i][i] = w.inductance;
        }
        for c in &self.couplings {
            let pos = |name: &str| self.windings.iter().position(|w| w.name == name);
            if let (Some(i), Some(j)) = (pos(&c.windings[0]), pos(&c.windings[1])) {
                let mutual = match (c.k, c.mutual) {
                    (Some(k), _) => k * (m[i][i] * m[j][j]).sqrt(),
                    (None, Some(mu)) => mu,
                    (None, None) => 0.0,
                };
                m[i][j] = mutual;
                m[j][i] = mutual;
            }
        }
        m
    }
}

/// An ideal transformer: v_primary = n·v_secondary, i_secondary = −n·i_primary
/// (with both currents flowing first → second terminal of their winding,
/// dotted ends first), n = `turns_ratio` = Np/Ns.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct IdealTransformer {
    /// Unique element name.
    pub name: String,
    /// Primary terminals `[dotted, undotted]`.
    pub primary: [String; 2],
    /// Secondary terminals `[dotted, undotted]`.
    pub secondary: [String; 2],
    /// Turns ratio Np/Ns; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub turns_ratio: f64,
}

/// An independent voltage source: v(plus) − v(minus) = waveform(t).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct VoltageSource {
    /// Unique element name.
    pub name: String,
    /// Terminals `[plus, minus]`.
    pub nodes: [String; 2],
    /// The source voltage over time.
    pub waveform: Stimulus,
}

/// An independent current source: waveform(t) flows from the first terminal
/// through the source to the second (so it is pushed out of the second
/// terminal into the rest of the circuit).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CurrentSource {
    /// Unique element name.
    pub name: String,
    /// Terminals `[from, to]`.
    pub nodes: [String; 2],
    /// The source current over time.
    pub waveform: Stimulus,
}

/// A piecewise-linear diode model: blocks when v < Vf, conducts with
/// v = Vf + Ron·i when i > 0. The defaults (0 V, 0 Ω) give an ideal diode.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct DiodeModel {
    /// Forward voltage in volts (default 0); must not be negative.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub forward_voltage: Option<f64>,
    /// On-resistance in ohms (default 0); must not be negative.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub on_resistance: Option<f64>,
    /// Recovered charge Qrr in coulombs (default none); must not be
    /// negative. The losses analysis counts Qrr·Vr as recovery energy at
    /// each turn-off forced by a switching edge (common practice); a diode
    /// whose current falls to zero by itself (discontinuous conduction)
    /// has none.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub recovered_charge: Option<f64>,
}

/// An ideal switch: a short (or `on_resistance`) while its gate is on, open
/// while it is off.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Switch {
    /// Unique element name.
    pub name: String,
    /// Terminals `[a, b]` (for a transistor: drain/collector first).
    pub nodes: [String; 2],
    /// Name of the gate signal that drives it.
    pub gate: String,
    /// Resistance while on, in ohms (default 0: a short); must not be negative.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub on_resistance: Option<f64>,
    /// An anti-parallel diode (a transistor's body diode): anode at the
    /// second terminal, cathode at the first. Its outputs are named
    /// `SWITCH.body_diode`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub body_diode: Option<DiodeModel>,
    /// The thermal network from junction to ambient (optional), driven by
    /// the loss of the channel and body diode together.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub thermal: Option<ThermalNetwork>,
    /// Finite switching transitions (optional; default none: the switch
    /// changes state instantly). See [`SwitchTransition`].
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub transition: Option<SwitchTransition>,
    /// Datasheet switching energies (optional), counted by the losses
    /// analysis at each hard edge. See [`SwitchingEnergy`].
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub switching_energy: Option<SwitchingEnergy>,
}

/// The rates of one switching transition, both positive.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TransitionRates {
    /// Rate of change of the switch voltage in volts per second; must be
    /// positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub voltage_rate: f64,
    /// Rate of change of the switch current in amperes per second; must be
    /// positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub current_rate: f64,
}

/// The clamped inductive switching model of a switch (N. Mohan,
/// T. Undeland & W. Robbins, *Power Electronics*, chapter on switching
/// losses).
///
/// Turn-off: the switch voltage rises at `turn_off.voltage_rate` while the
/// switch still carries its current, until a diode turns on (the clamp);
/// then its current falls at `turn_off.current_rate` to zero and the switch
/// is open. Turn-on: the current rises at `turn_on.current_rate` while the
/// switch still blocks its voltage, until a diode stops conducting; then
/// the voltage falls at `turn_on.voltage_rate` to zero and the switch is
/// closed. Each phase is an exact ramp constraint. A turn-off that starts
/// with no current flowing a → b, or into its own body diode, and a
/// turn-on that starts with no positive voltage, are instantaneous (zero
/// voltage switching).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SwitchTransition {
    /// Rates of the turn-off: voltage rise, then current fall.
    pub turn_off: TransitionRates,
    /// Rates of the turn-on: current rise, then voltage fall.
    pub turn_on: TransitionRates,
}

/// One Foster stage of a thermal impedance: Z(t) = R·(1 − e^(−t/τ)).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct FosterPair {
    /// Thermal resistance in kelvin per watt; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub resistance: f64,
    /// Time constant τ = R·C in seconds; must be positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub time_constant: f64,
}

/// A semiconductor's thermal network: Foster stages from junction to case
/// (as datasheets give them), then from case to ambient (the heat sink),
/// all in series, driven by the part's loss.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ThermalNetwork {
    /// Foster stages junction → case; at least one.
    pub junction_case: Vec<FosterPair>,
    /// Foster stages case → ambient (default none: the case is held at
    /// ambient).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub case_ambient: Vec<FosterPair>,
    /// Ambient temperature in °C (default 25).
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub ambient: Option<f64>,
    /// Largest allowed junction temperature in °C (optional): above it the
    /// analysis warns, naming the element.
    #[serde(
        default,
        deserialize_with = "value::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub max_junction: Option<f64>,
}

impl ThermalNetwork {
    /// Every Foster stage, junction → case first.
    pub fn stages(&self) -> impl Iterator<Item = &FosterPair> {
        self.junction_case.iter().chain(&self.case_ambient)
    }

    /// The ambient temperature (°C), 25 by default.
    pub fn ambient(&self) -> f64 {
        self.ambient.unwrap_or(25.0)
    }
}

/// A diode from anode (first terminal) to cathode (second).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Diode {
    /// Unique element name.
    pub name: String,
    /// Terminals `[anode, cathode]`.
    pub nodes: [String; 2],
    /// Forward voltage and on-resistance (both default to 0: ideal).
    #[serde(flatten)]
    pub model: DiodeModel,
    /// The thermal network from junction to ambient (optional).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub thermal: Option<ThermalNetwork>,
}

impl Element {
    /// The element's unique name.
    pub fn name(&self) -> &str {
        match self {
            Element::Resistor(e) => &e.name,
            Element::Inductor(e) => &e.name,
            Element::Capacitor(e) => &e.name,
            Element::CoupledInductors(e) => &e.name,
            Element::IdealTransformer(e) => &e.name,
            Element::VoltageSource(e) => &e.name,
            Element::CurrentSource(e) => &e.name,
            Element::Switch(e) => &e.name,
            Element::Diode(e) => &e.name,
        }
    }

    /// The element kind as written in JSON (`"resistor"`, `"coupled_inductors"`…).
    pub fn kind_name(&self) -> &'static str {
        match self {
            Element::Resistor(_) => "resistor",
            Element::Inductor(_) => "inductor",
            Element::Capacitor(_) => "capacitor",
            Element::CoupledInductors(_) => "coupled_inductors",
            Element::IdealTransformer(_) => "ideal_transformer",
            Element::VoltageSource(_) => "voltage_source",
            Element::CurrentSource(_) => "current_source",
            Element::Switch(_) => "switch",
            Element::Diode(_) => "diode",
        }
    }

    /// Every terminal as (field name, node name), in order.
    pub fn terminals(&self) -> Vec<(String, &str)> {
        fn pair<'a>(field: &str, n: &'a [String; 2]) -> Vec<(String, &'a str)> {
            vec![
                (format!("{field}[0]"), n[0].as_str()),
                (format!("{field}[1]"), n[1].as_str()),
            ]
        }
        match self {
            Element::Resistor(e) => pair("nodes", &e.nodes),
            Element::Inductor(e) => pair("nodes", &e.nodes),
            Element::Capacitor(e) => pair("nodes", &e.nodes),
            Element::VoltageSource(e) => pair("nodes", &e.nodes),
            Element::CurrentSource(e) => pair("nodes", &e.nodes),
            Element::Switch(e) => pair("nodes", &e.nodes),
            Element::Diode(e) => pair("nodes", &e.nodes),
            Element::IdealTransformer(e) => {
                let mut v = pair("primary", &e.primary);
                v.extend(pair("secondary", &e.secondary));
                v
            }
            Element::CoupledInductors(e) => e
                .windings
                .iter()
                .enumerate()
                .flat_map(|(i, w)| pair(&format!("windings[{i}].nodes"), &w.nodes))
                .collect(),
        }
    }
}
