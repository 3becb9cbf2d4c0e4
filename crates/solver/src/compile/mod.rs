//! Compile: a validated `Circuit` becomes numbered nodes, branches and an
//! extended state vector.
//!
//! The extended state is `z = [x; u; u']`: `x` holds inductor (winding)
//! currents, capacitor voltages and the two states of each sine source's
//! oscillator; `u` holds the value of every piecewise-linear or constant
//! source plus a constant `1` (index 0 of `u`, used for diode forward
//! voltages); `u'` holds the slopes of the inputs that may ramp
//! (piecewise-linear sources, switch transition ramps; see
//! [`Compiled::slopes`]), a constant's being zero for good. Between events `z' = M z` exactly, so
//! one matrix exponential advances everything, inputs included (this is Van
//! Loan's augmented matrix written as a state).
//!
//! [`Compiled::compile`] runs the steps in order, each in a sibling file
//! handing the next a named struct: `inputs.rs` lays out the states and
//! inputs, `branches.rs` numbers nodes and builds each element's branches,
//! `outputs.rs` names the outputs and builds the compensators;
//! `compensator.rs` realises compensator laws.

mod branches;
mod compensator;
mod inputs;
mod outputs;

use nalgebra::DMatrix;

use fluxstep_netlist::{Circuit, SignalShape, Stimulus};

use crate::error::SolverError;

/// What a source's value is, as a linear function of the extended state.
#[derive(Clone, Debug)]
pub(crate) struct SourceRef {
    pub name: String,
    /// (z index, coefficient) terms.
    pub terms: Vec<(usize, f64)>,
    /// The waveform (for breakpoints), `None` for a sine (an oscillator state).
    pub waveform: Option<Stimulus>,
    /// Input index k (u_k at z[n_x + k]) for piecewise-linear sources.
    pub input: Option<usize>,
    /// A threshold ramp made by the solver for a comparator gate, not a
    /// circuit element (its corners are not logged as events).
    pub internal: bool,
}

/// A compensator realised as a state-space block on its own states.
#[derive(Clone, Debug)]
pub(crate) struct CompiledCompensator {
    pub name: String,
    pub states: Vec<usize>,
    pub a: DMatrix<f64>,
    pub b: Vec<f64>,
    pub c: Vec<f64>,
    pub d: f64,
    /// z index of the set-point input.
    pub reference_z: usize,
    /// Its source entry (changed at run time by controllers).
    pub reference_source: usize,
    /// Output index of the measured quantity.
    pub input: usize,
}

/// A comparison of a comparator gate, as a threshold row over z.
#[derive(Clone, Debug)]
pub(crate) struct CompiledComparison {
    pub above: bool,
    /// Its threshold input's source entry.
    pub source: usize,
    /// The threshold as a linear function of z (a constant times the unit
    /// input, or a sawtooth input).
    pub threshold: Vec<f64>,
}

/// A closed-loop gate.
#[derive(Clone, Debug)]
pub(crate) struct CompiledComparator {
    pub signal: usize,
    pub spec: fluxstep_netlist::ComparatorSpec,
    /// Output index of the sensed quantity.
    pub sense: usize,
    pub turn_off: Option<CompiledComparison>,
    pub turn_on: Option<CompiledComparison>,
}

#[derive(Clone, Debug)]
pub(crate) enum BranchKind {
    Resistor {
        g: f64,
    },
    Winding {
        state: usize,
    },
    Capacitor {
        state: usize,
        c: f64,
    },
    VSource {
        src: usize,
    },
    ISource {
        src: usize,
    },
    Switch {
        sw: usize,
    },
    Diode {
        d: usize,
    },
    /// Primary branch of an ideal transformer; the secondary nodes are given.
    Transformer {
        n: f64,
        sec: (usize, usize),
    },
}

#[derive(Clone, Debug)]
pub(crate) struct Branch {
    pub name: String,
    pub a: usize,
    pub b: usize,
    pub kind: BranchKind,
}

#[derive(Clone, Debug)]
pub(crate) struct SwitchInfo {
    pub name: String,
    pub r_on: f64,
    pub signal: usize,
    /// The finite-transition model, if the switch has one.
    pub transition: Option<TransitionInfo>,
}

/// A switch's transition model, compiled: during a ramp the switch is a
/// voltage or current source whose value and slope are the input entries
/// `z[value]` and `z[slope]` (set by the run loop at each phase's start).
#[derive(Clone, Debug)]
pub(crate) struct TransitionInfo {
    /// z index of the ramp's value (V or A).
    pub value: usize,
    /// z index of the ramp's slope (V/s or A/s).
    pub slope: usize,
    /// Turn-off rates (voltage, current).
    pub off: (f64, f64),
    /// Turn-on rates (voltage, current).
    pub on: (f64, f64),
    /// Output indices of the switch's current and voltage.
    pub current_out: usize,
    pub voltage_out: usize,
    /// Index of its body diode among the diodes, if it has one.
    pub body_diode: Option<usize>,
}

#[derive(Clone, Debug)]
pub(crate) struct DiodeInfo {
    pub name: String,
    pub branch: usize,
    pub vf: f64,
    pub r_on: f64,
}

/// A set of coupled windings (a lone inductor is a set of one).
#[derive(Clone, Debug)]
pub(crate) struct InductorGroup {
    pub states: Vec<usize>,
    pub l: DMatrix<f64>,
    pub l_inv: DMatrix<f64>,
}

/// What an output reads.
#[derive(Clone, Debug)]
pub(crate) enum OutputDef {
    Node(usize),
    BranchVoltage(usize),
    BranchCurrent(usize),
    /// Secondary winding of an ideal transformer (branch index).
    SecondaryVoltage(usize),
    SecondaryCurrent(usize),
    /// Output of compensator k.
    Compensator(usize),
}

/// The compiled circuit: everything the solver needs, numbered.
#[derive(Clone, Debug)]
pub(crate) struct Compiled {
    pub nodes: Vec<String>,
    pub branches: Vec<Branch>,
    pub n_x: usize,
    pub n_u: usize,
    /// Per input k (u_k at z[n_x + k]), the z index of its slope, after
    /// the inputs; `None` for an input that never ramps (the unit input,
    /// a constant source or threshold), whose slope is zero for good and
    /// takes no entry of z: a buck from a DC source has z = [iL, vC, 1,
    /// Vin], not six entries with two zeros in every product.
    pub slopes: Vec<Option<usize>>,
    pub state_names: Vec<String>,
    /// Energy weights: (state index, group) handled via groups and caps.
    pub groups: Vec<InductorGroup>,
    pub caps: Vec<(usize, f64)>,
    pub sources: Vec<SourceRef>,
    pub switches: Vec<SwitchInfo>,
    pub diodes: Vec<DiodeInfo>,
    pub signals: Vec<(String, SignalShape)>,
    /// Oscillators: (sin state, cos state, ω).
    pub oscillators: Vec<(usize, usize, f64)>,
    pub x0: Vec<f64>,
    /// Scale of each x state for norms (√L for currents, √C for voltages, 1 else).
    pub x_scale: Vec<f64>,
    pub outputs: Vec<(String, OutputDef)>,
    pub compensators: Vec<CompiledCompensator>,
    pub comparators: Vec<CompiledComparator>,
}

impl Compiled {
    /// Length of the extended state `[x; u; u']`.
    pub fn n_z(&self) -> usize {
        self.n_x + self.n_u + self.slopes.iter().flatten().count()
    }

    /// Each x state's energy scale for the Taylor series' stopping test
    /// (`Mode::weight`): √L for an inductor current, √C for a capacitor
    /// voltage, and 0 for the states that hold no energy (oscillators and
    /// compensators), whose units are their own and which that test
    /// judges apart.
    pub(crate) fn energy_weights(&self) -> Vec<f64> {
        let mut w = self.x_scale[..self.n_x.min(self.x_scale.len())].to_vec();
        let none = self.oscillators.iter().flat_map(|&(s, c, _)| [s, c]).chain(
            self.compensators
                .iter()
                .flat_map(|k| k.states.iter().copied()),
        );
        for i in none {
            if let Some(v) = w.get_mut(i) {
                *v = 0.0;
            }
        }
        w
    }

    /// Compiles a circuit (validated first) into numbered nodes, branches
    /// and the extended state; each step lives in a sibling file.
    ///
    /// # Errors
    ///
    /// The circuit's validation problems; [`SolverError::Unsupported`] for
    /// windings whose inductance matrix has no finite inverse;
    /// [`SolverError::UnknownOutput`] for an output name that reads nothing.
    pub fn compile(circuit: &Circuit) -> Result<Compiled, SolverError> {
        circuit.validate()?;
        let signals = circuit.signals();
        // Pass 1: states (x) and inputs (u); z indices of u are fixed after.
        let layout = inputs::states(circuit);
        let n_x = layout.names.len();
        let mut input = inputs::circuit_sources(&layout);
        let thresholds = inputs::comparator_thresholds(circuit, &signals, &mut input);
        let set_points = inputs::set_points(circuit, &mut input);
        let ramps = inputs::ramp_inputs(circuit, &mut input);
        let n_u = input.n_u;
        let slopes = input.slopes();
        let n_z = n_x + n_u + slopes.iter().flatten().count();
        let comparators = inputs::threshold_rows(thresholds, n_z);
        // Pass 2: branches.
        let net = branches::branches(circuit, &signals, ramps, n_x, &slopes)?;
        // Outputs, compensators, and what reads outputs by name.
        let mut outputs = outputs::network_outputs(&net.nodes, &net.branches);
        let compensators =
            outputs::compensators(circuit, layout.compensators, set_points, &mut outputs);
        let mut c = Compiled {
            nodes: net.nodes,
            branches: net.branches,
            n_x,
            n_u,
            slopes,
            state_names: layout.names,
            groups: net.groups,
            caps: net.caps,
            sources: input.sources,
            switches: net.switches,
            diodes: net.diodes,
            signals,
            oscillators: input.oscillators,
            x0: layout.x0,
            x_scale: layout.x_scale,
            outputs,
            compensators,
            comparators: vec![],
        };
        outputs::connect(&mut c, circuit, comparators)?;
        Ok(c)
    }

    /// Index of an output by its name (`NODE`, `ELEMENT.current`, …).
    pub fn output_index(&self, name: &str) -> Result<usize, SolverError> {
        output_position(self.outputs.iter().map(|(n, _)| n.as_str()), name)
    }

    /// What a jump from `a` to `b` moved: with `flux`, the largest change
    /// of flux linkage (L·i, by coupled group) of any inductor; else the
    /// largest change of charge C·v of any capacitor.
    pub fn moved(&self, a: &[f64], b: &[f64], flux: bool) -> f64 {
        let mut most = 0.0f64;
        if flux {
            for g in &self.groups {
                for (i, _) in g.states.iter().enumerate() {
                    let d: f64 = g
                        .states
                        .iter()
                        .enumerate()
                        .map(|(j, &sj)| g.l[(i, j)] * (b[sj] - a[sj]))
                        .sum();
                    most = most.max(d.abs());
                }
            }
        } else {
            for &(s, cap) in &self.caps {
                most = most.max((cap * (b[s] - a[s])).abs());
            }
        }
        most
    }

    /// Stored energy ½·iᵀL i + ½·C v² of the state part of `z`.
    pub fn stored_energy(&self, z: &[f64]) -> f64 {
        let mut e = 0.0;
        for g in &self.groups {
            for (i, &si) in g.states.iter().enumerate() {
                for (j, &sj) in g.states.iter().enumerate() {
                    e += 0.5 * g.l[(i, j)] * z[si] * z[sj];
                }
            }
        }
        for &(s, cap) in &self.caps {
            e += 0.5 * cap * z[s] * z[s];
        }
        e
    }
}

/// Every form of output name the circuit format accepts, for error
/// messages.
pub(crate) const OUTPUT_FORMS: &str = "an output is a node name, ELEMENT.current or \
    ELEMENT.voltage of a two-terminal element, ELEMENT.WINDING.current or .voltage of a \
    coupled-inductor winding, XFMR.primary or XFMR.secondary with .current or .voltage of \
    an ideal transformer, SWITCH.body_diode.current or .voltage, or COMPENSATOR.output";

/// The position of output `name` among `names` (canonical output names).
///
/// # Errors
///
/// [`SolverError::UnknownOutput`] for a name that is malformed or names
/// nothing in the circuit, with every accepted form listed.
pub(crate) fn output_position<'a>(
    names: impl IntoIterator<Item = &'a str>,
    name: &str,
) -> Result<usize, SolverError> {
    let parsed =
        fluxstep_netlist::OutputName::parse(name).map_err(|p| SolverError::UnknownOutput {
            name: name.into(),
            reason: format!("{}; {OUTPUT_FORMS}", p.message),
        })?;
    let key = parsed.to_string();
    names
        .into_iter()
        .position(|n| n == key)
        .ok_or_else(|| SolverError::UnknownOutput {
            name: name.into(),
            reason: format!("no node or element of that name in this circuit; {OUTPUT_FORMS}"),
        })
}
