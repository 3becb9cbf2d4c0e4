//! Compile: a validated `Circuit` becomes numbered nodes, branches and an
//! extended state vector.
//!
//! The extended state is `z = [x; u; u']`: `x` holds inductor (winding)
//! currents, capacitor voltages and the two states of each sine source's
//! oscillator; `u` holds the value of every piecewise-linear or constant
//! source plus a constant `1` (index 0 of `u`, used for diode forward
//! voltages); `u'` holds their slopes. Between events `z' = M z` exactly, so
//! one matrix exponential advances everything, inputs included (this is Van
//! Loan's augmented matrix written as a state).

use nalgebra::DMatrix;

use fluxstep_netlist::{is_ground, Circuit, Element, SignalShape, Waveform};

use crate::error::SolverError;

/// What a source's value is, as a linear function of the extended state.
#[derive(Clone, Debug)]
pub(crate) struct SourceRef {
    pub name: String,
    /// (z index, coefficient) terms.
    pub terms: Vec<(usize, f64)>,
    /// The waveform (for breakpoints), `None` for a sine (an oscillator state).
    pub waveform: Option<Waveform>,
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
        self.n_x + 2 * self.n_u
    }

    pub fn compile(circuit: &Circuit) -> Result<Compiled, SolverError> {
        circuit.validate()?;
        let mut nodes: Vec<String> = vec!["gnd".into()];
        let mut node = |n: &str| -> usize {
            if is_ground(n) {
                return 0;
            }
            match nodes.iter().position(|x| x == n) {
                Some(i) => i,
                None => {
                    nodes.push(n.to_string());
                    nodes.len() - 1
                }
            }
        };
        let signals = circuit.signals();
        let mut c = Compiled {
            nodes: vec![],
            branches: vec![],
            n_x: 0,
            n_u: 1,
            state_names: vec![],
            groups: vec![],
            caps: vec![],
            sources: vec![],
            switches: vec![],
            diodes: vec![],
            signals: signals.clone(),
            oscillators: vec![],
            x0: vec![],
            x_scale: vec![],
            outputs: vec![],
            compensators: vec![],
            comparators: vec![],
        };
        // Pass 1: states (x) and inputs (u); z indices of u are fixed after.
        let mut x_names = vec![];
        let mut x0 = vec![];
        let mut x_scale = vec![];
        let mut pending_src: Vec<(String, Waveform)> = vec![];
        for e in &circuit.elements {
            match e {
                Element::Inductor(l) => {
                    x_names.push(format!("{}.current", l.name));
                    x0.push(l.initial_current.unwrap_or(0.0));
                    x_scale.push(l.inductance.sqrt());
                }
                Element::CoupledInductors(k) => {
                    for w in &k.windings {
                        x_names.push(format!("{}.{}.current", k.name, w.name));
                        x0.push(w.initial_current.unwrap_or(0.0));
                        x_scale.push(w.inductance.sqrt());
                    }
                }
                Element::Capacitor(cap) => {
                    x_names.push(format!("{}.voltage", cap.name));
                    x0.push(cap.initial_voltage.unwrap_or(0.0));
                    x_scale.push(cap.capacitance.sqrt());
                }
                Element::VoltageSource(s) => pending_src.push((s.name.clone(), s.waveform.clone())),
                Element::CurrentSource(s) => pending_src.push((s.name.clone(), s.waveform.clone())),
                _ => {}
            }
        }
        let osc_start = x_names.len();
        for (name, w) in &pending_src {
            if let Waveform::Sine { phase, .. } = w {
                x_names.push(format!("{name}.oscillator_sin"));
                x_names.push(format!("{name}.oscillator_cos"));
                x0.push(phase.sin());
                x0.push(phase.cos());
                x_scale.push(1.0);
                x_scale.push(1.0);
            }
        }
        // Compensator states come last in x.
        let mut realised = vec![];
        for k in &circuit.compensators {
            let (a, b, cv, d) = realise(&k.law);
            let first = x_names.len();
            for i in 0..b.len() {
                x_names.push(format!("{}.state{i}", k.name));
                x0.push(0.0);
                x_scale.push(1.0);
            }
            realised.push((k, (first..first + b.len()).collect::<Vec<_>>(), a, b, cv, d));
        }
        let n_x = x_names.len();
        c.n_x = n_x;
        let mut n_u = 1; // u_0 = 1
        let mut osc_next = osc_start;
        for (name, w) in &pending_src {
            match w {
                Waveform::Sine {
                    offset,
                    amplitude,
                    frequency,
                    ..
                } => {
                    let (s, co) = (osc_next, osc_next + 1);
                    osc_next += 2;
                    c.oscillators
                        .push((s, co, 2.0 * std::f64::consts::PI * frequency));
                    // offset·1 + amplitude·sin: the constant input sits at z[n_x].
                    c.sources.push(SourceRef {
                        name: name.clone(),
                        terms: vec![(n_x, *offset), (s, *amplitude)],
                        waveform: None,
                        input: None,
                        internal: false,
                    });
                }
                _ => {
                    c.sources.push(SourceRef {
                        name: name.clone(),
                        terms: vec![(n_x + n_u, 1.0)],
                        waveform: Some(w.clone()),
                        input: Some(n_u),
                        internal: false,
                    });
                    n_u += 1;
                }
            }
        }
        // Comparator thresholds: a constant (times the unit input) or, with
        // a slope, a sawtooth input restarting at every clock edge, exact
        // like any piecewise-linear source.
        let mut comparisons = vec![];
        for (si, (sig_name, _)) in signals.iter().enumerate() {
            let Some(gate) = circuit.gates.iter().find(|g| g.name() == sig_name) else {
                continue;
            };
            let Some(spec) = gate.comparator() else {
                continue;
            };
            let mut make = |cmp: Option<fluxstep_netlist::Comparison>, which: &str| {
                cmp.map(|cmp| {
                    // Always an input (constant, or a sawtooth restarting
                    // at each clock edge), so a controller can move the
                    // reference at run time without rebuilding any mode.
                    let waveform = match (spec.period, cmp.slope != 0.0) {
                        (Some(t), true) => Waveform::PiecewiseLinear {
                            points: vec![
                                fluxstep_netlist::Point {
                                    time: 0.0,
                                    value: cmp.base,
                                },
                                fluxstep_netlist::Point {
                                    time: t,
                                    value: cmp.base + cmp.slope * t,
                                },
                            ],
                            period: Some(t),
                        },
                        _ => Waveform::Constant { value: cmp.base },
                    };
                    c.sources.push(SourceRef {
                        name: format!("{sig_name}.{which}"),
                        terms: vec![(n_x + n_u, 1.0)],
                        waveform: Some(waveform),
                        input: Some(n_u),
                        internal: true,
                    });
                    let threshold = vec![(n_x + n_u, 1.0)];
                    n_u += 1;
                    (cmp.above, threshold, c.sources.len() - 1)
                })
            };
            let off = make(spec.turn_off, "turn_off_threshold");
            let on = make(spec.turn_on, "turn_on_threshold");
            comparisons.push((si, spec, off, on));
        }
        // Compensator set-points, also inputs for the same reason.
        let mut reference_inputs = vec![];
        for k in &circuit.compensators {
            c.sources.push(SourceRef {
                name: format!("{}.reference", k.name),
                terms: vec![(n_x + n_u, 1.0)],
                waveform: Some(Waveform::Constant { value: k.reference }),
                input: Some(n_u),
                internal: true,
            });
            reference_inputs.push((n_x + n_u, c.sources.len() - 1));
            n_u += 1;
        }
        // Ramp inputs of switches with a transition model, in circuit order
        // (set by the run loop only, never by the schedule).
        let mut ramp_inputs = vec![];
        for e in &circuit.elements {
            if let Element::Switch(s) = e {
                if s.transition.is_some() {
                    ramp_inputs.push(Some(n_u));
                    n_u += 1;
                } else {
                    ramp_inputs.push(None);
                }
            }
        }
        let mut ramp_inputs = ramp_inputs.into_iter();
        c.n_u = n_u;
        let nz = n_x + 2 * n_u;
        let row_of = |terms: Vec<(usize, f64)>| {
            let mut r = vec![0.0; nz];
            for (i, v) in terms {
                r[i] += v;
            }
            r
        };
        let pending_comparators: Vec<_> = comparisons
            .into_iter()
            .map(|(si, spec, off, on)| {
                let conv = |x: Option<PendingComparison>| {
                    x.map(|(above, t, source)| CompiledComparison {
                        above,
                        source,
                        threshold: row_of(t),
                    })
                };
                (si, spec, conv(off), conv(on))
            })
            .collect::<Vec<_>>();
        c.state_names = x_names;
        c.x0 = x0;
        c.x_scale = x_scale;

        // Pass 2: branches.
        let mut state = 0usize;
        let mut src = 0usize;
        let sig_index = |g: &str| {
            signals
                .iter()
                .position(|(n, _)| n == g)
                .expect("validated gate reference")
        };
        for e in &circuit.elements {
            match e {
                Element::Resistor(r) => c.branches.push(Branch {
                    name: r.name.clone(),
                    a: node(&r.nodes[0]),
                    b: node(&r.nodes[1]),
                    kind: BranchKind::Resistor {
                        g: 1.0 / r.resistance,
                    },
                }),
                Element::Inductor(l) => {
                    let (a, b) = (node(&l.nodes[0]), node(&l.nodes[1]));
                    let (b, series) =
                        series_part(&mut node, &l.name, "winding", b, l.winding_resistance);
                    c.branches.push(Branch {
                        name: l.name.clone(),
                        a,
                        b,
                        kind: BranchKind::Winding { state },
                    });
                    c.branches.extend(series);
                    let m = DMatrix::from_element(1, 1, l.inductance);
                    c.groups.push(InductorGroup {
                        states: vec![state],
                        l_inv: DMatrix::from_element(1, 1, 1.0 / l.inductance),
                        l: m,
                    });
                    state += 1;
                }
                Element::CoupledInductors(k) => {
                    let lm = k.inductance_matrix();
                    let n = lm.len();
                    let l = DMatrix::from_fn(n, n, |i, j| lm[i][j]);
                    // Where the general inverse fails (its determinant
                    // underflows for tiny inductances: two windings of
                    // 1e-200 H give det ≈ 1e-402 → 0), by Cholesky:
                    // validation proved L positive definite, and the
                    // factor keeps the scales apart. Ordinary windings
                    // keep the general inverse and its bits.
                    let finite = |m: &DMatrix<f64>| m.iter().all(|v| v.is_finite());
                    let l_inv = l
                        .clone()
                        .try_inverse()
                        .filter(finite)
                        .or_else(|| l.clone().cholesky().map(|ch| ch.inverse()))
                        .filter(finite)
                        .ok_or_else(|| SolverError::Unsupported {
                            time: 0.0,
                            pattern: "every pattern".into(),
                            reason: format!(
                                "the inductance matrix of {} has no finite inverse in 64-bit \
                                 arithmetic: check the windings' inductances",
                                k.name
                            ),
                        })?;
                    let mut states = vec![];
                    for w in &k.windings {
                        c.branches.push(Branch {
                            name: format!("{}.{}", k.name, w.name),
                            a: node(&w.nodes[0]),
                            b: node(&w.nodes[1]),
                            kind: BranchKind::Winding { state },
                        });
                        states.push(state);
                        state += 1;
                    }
                    c.groups.push(InductorGroup { states, l, l_inv });
                }
                Element::Capacitor(cap) => {
                    let (a, b) = (node(&cap.nodes[0]), node(&cap.nodes[1]));
                    let (b, series) = series_part(&mut node, &cap.name, "esr", b, cap.esr);
                    c.branches.push(Branch {
                        name: cap.name.clone(),
                        a,
                        b,
                        kind: BranchKind::Capacitor {
                            state,
                            c: cap.capacitance,
                        },
                    });
                    c.branches.extend(series);
                    c.caps.push((state, cap.capacitance));
                    state += 1;
                }
                Element::VoltageSource(s) => {
                    c.branches.push(Branch {
                        name: s.name.clone(),
                        a: node(&s.nodes[0]),
                        b: node(&s.nodes[1]),
                        kind: BranchKind::VSource { src },
                    });
                    src += 1;
                }
                Element::CurrentSource(s) => {
                    c.branches.push(Branch {
                        name: s.name.clone(),
                        a: node(&s.nodes[0]),
                        b: node(&s.nodes[1]),
                        kind: BranchKind::ISource { src },
                    });
                    src += 1;
                }
                Element::Switch(s) => {
                    let (a, b) = (node(&s.nodes[0]), node(&s.nodes[1]));
                    let input = ramp_inputs.next().expect("one entry per switch");
                    let transition = match (&s.transition, input) {
                        (Some(t), Some(k)) => Some(TransitionInfo {
                            value: n_x + k,
                            slope: n_x + n_u + k,
                            off: (t.turn_off.voltage_rate, t.turn_off.current_rate),
                            on: (t.turn_on.voltage_rate, t.turn_on.current_rate),
                            current_out: usize::MAX,
                            voltage_out: usize::MAX,
                            body_diode: s.body_diode.as_ref().map(|_| c.diodes.len()),
                        }),
                        _ => None,
                    };
                    c.switches.push(SwitchInfo {
                        name: s.name.clone(),
                        r_on: s.on_resistance.unwrap_or(0.0),
                        signal: sig_index(&s.gate),
                        transition,
                    });
                    c.branches.push(Branch {
                        name: s.name.clone(),
                        a,
                        b,
                        kind: BranchKind::Switch {
                            sw: c.switches.len() - 1,
                        },
                    });
                    if let Some(m) = &s.body_diode {
                        let name = format!("{}.body_diode", s.name);
                        c.diodes.push(DiodeInfo {
                            name: name.clone(),
                            branch: c.branches.len(),
                            vf: m.forward_voltage.unwrap_or(0.0),
                            r_on: m.on_resistance.unwrap_or(0.0),
                        });
                        c.branches.push(Branch {
                            name,
                            a: b,
                            b: a,
                            kind: BranchKind::Diode {
                                d: c.diodes.len() - 1,
                            },
                        });
                    }
                }
                Element::Diode(d) => {
                    c.diodes.push(DiodeInfo {
                        name: d.name.clone(),
                        branch: c.branches.len(),
                        vf: d.model.forward_voltage.unwrap_or(0.0),
                        r_on: d.model.on_resistance.unwrap_or(0.0),
                    });
                    c.branches.push(Branch {
                        name: d.name.clone(),
                        a: node(&d.nodes[0]),
                        b: node(&d.nodes[1]),
                        kind: BranchKind::Diode {
                            d: c.diodes.len() - 1,
                        },
                    });
                }
                Element::IdealTransformer(t) => {
                    let sec = (node(&t.secondary[0]), node(&t.secondary[1]));
                    c.branches.push(Branch {
                        name: t.name.clone(),
                        a: node(&t.primary[0]),
                        b: node(&t.primary[1]),
                        kind: BranchKind::Transformer {
                            n: t.turns_ratio,
                            sec,
                        },
                    });
                }
            }
        }
        c.nodes = nodes;
        // Outputs: every node voltage, every branch current and voltage.
        for (i, n) in c.nodes.iter().enumerate() {
            // Internal nodes of expanded series resistances (`C1.esr`) are
            // named with a '.', which no circuit node may contain; they are
            // not outputs (an output `C1.esr` would read as a part name).
            if !n.contains('.') {
                c.outputs.push((n.clone(), OutputDef::Node(i)));
            }
        }
        for (i, b) in c.branches.iter().enumerate() {
            if let BranchKind::Transformer { .. } = b.kind {
                c.outputs.push((
                    format!("{}.primary.current", b.name),
                    OutputDef::BranchCurrent(i),
                ));
                c.outputs.push((
                    format!("{}.primary.voltage", b.name),
                    OutputDef::BranchVoltage(i),
                ));
                c.outputs.push((
                    format!("{}.secondary.current", b.name),
                    OutputDef::SecondaryCurrent(i),
                ));
                c.outputs.push((
                    format!("{}.secondary.voltage", b.name),
                    OutputDef::SecondaryVoltage(i),
                ));
            } else {
                c.outputs
                    .push((format!("{}.current", b.name), OutputDef::BranchCurrent(i)));
                c.outputs
                    .push((format!("{}.voltage", b.name), OutputDef::BranchVoltage(i)));
            }
        }
        for (k, ((comp, states, a, b, cv, d), (reference_z, reference_source))) in
            realised.into_iter().zip(reference_inputs).enumerate()
        {
            c.outputs
                .push((format!("{}.output", comp.name), OutputDef::Compensator(k)));
            c.compensators.push(CompiledCompensator {
                name: comp.name.clone(),
                states,
                a,
                b,
                c: cv,
                d,
                reference_z,
                reference_source,
                input: usize::MAX,
            });
        }
        for k in 0..c.compensators.len() {
            let input = &circuit.compensators[k].input;
            c.compensators[k].input = c.output_index(input)?;
        }
        for k in 0..c.switches.len() {
            if c.switches[k].transition.is_some() {
                let name = c.switches[k].name.clone();
                let current_out = c.output_index(&format!("{name}.current"))?;
                let voltage_out = c.output_index(&format!("{name}.voltage"))?;
                let t = c.switches[k].transition.as_mut().expect("checked");
                t.current_out = current_out;
                t.voltage_out = voltage_out;
            }
        }
        for (signal, spec, turn_off, turn_on) in pending_comparators {
            let sense = c.output_index(&spec.sense)?;
            c.comparators.push(CompiledComparator {
                signal,
                spec,
                sense,
                turn_off,
                turn_on,
            });
        }
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

/// (above, threshold terms over z, source index) of a comparison being compiled.
type PendingComparison = (bool, Vec<(usize, f64)>, usize);

/// A state-space realisation (A, B, C, D) of a compensator law, single
/// input (the error) and single output.
/// The series resistance `ohms` of an inductor or capacitor `name`, expanded
/// into a resistor branch `NAME.PART` from a new internal node `NAME.PART`
/// to `b`: returns the node the element itself now ends at, and the
/// resistor branch (none for no or zero resistance, which is a plain short).
fn series_part(
    node: &mut impl FnMut(&str) -> usize,
    name: &str,
    part: &str,
    b: usize,
    ohms: Option<f64>,
) -> (usize, Option<Branch>) {
    match ohms {
        Some(r) if r > 0.0 => {
            let inner = node(&format!("{name}.{part}"));
            let branch = Branch {
                name: format!("{name}.{part}"),
                a: inner,
                b,
                kind: BranchKind::Resistor { g: 1.0 / r },
            };
            (inner, Some(branch))
        }
        _ => (b, None),
    }
}

fn realise(law: &fluxstep_netlist::CompensatorLaw) -> (DMatrix<f64>, Vec<f64>, Vec<f64>, f64) {
    use fluxstep_netlist::CompensatorLaw;
    match law {
        // x' = e; u = ki·x + kp·e.
        CompensatorLaw::Pi { kp, ki } => (DMatrix::zeros(1, 1), vec![1.0], vec![*ki], *kp),
        CompensatorLaw::StateSpace { a, b, c, d } => {
            let n = b.len();
            (
                DMatrix::from_fn(n, n, |i, j| a[i][j]),
                b.clone(),
                c.clone(),
                *d,
            )
        }
        CompensatorLaw::PolesZeros {
            gain,
            integrator,
            zeros_hz,
            poles_hz,
        } => {
            // A cascade of first-order sections, each with entries of the
            // order of its own 1/τ: the companion (canonical) form would
            // hold products like ωp² and make the rate bound — hence the
            // number of sub-steps — explode for poles at tens of kHz.
            let tau = |f: f64| 1.0 / (2.0 * std::f64::consts::PI * f);
            let mut zeros: Vec<f64> = zeros_hz.iter().map(|&f| tau(f)).collect();
            let mut sections: Vec<Section> = vec![];
            if *integrator {
                // (1 + s·τz)/s when a zero is left for it, else 1/s:
                // x' = e, y = x + τz·e.
                let tz = zeros.pop().unwrap_or(0.0);
                sections.push((DMatrix::zeros(1, 1), vec![1.0], vec![1.0], tz));
            }
            for &fp in poles_hz {
                let tp = tau(fp);
                // (1 + s·τz)/(1 + s·τp), or 1/(1 + s·τp) when no zero is
                // left: x' = (e − x)/τp, y = (τz/τp)·e + (1 − τz/τp)·x.
                let tz = zeros.pop().unwrap_or(0.0);
                sections.push((
                    DMatrix::from_element(1, 1, -1.0 / tp),
                    vec![1.0 / tp],
                    vec![1.0 - tz / tp],
                    tz / tp,
                ));
            }
            let (a, b, mut c, mut d) = cascade(&sections);
            for x in &mut c {
                *x *= gain;
            }
            d *= gain;
            (a, b, c, d)
        }
    }
}

/// (A, B, C, D) of a single-input, single-output block.
type Section = (DMatrix<f64>, Vec<f64>, Vec<f64>, f64);

/// Series connection of blocks, first to last: for G2·G1,
/// A = [[A1, 0], [B2·C1, A2]], B = [B1; B2·D1], C = [D2·C1, C2], D = D2·D1
/// (common practice; any control text).
fn cascade(sections: &[Section]) -> Section {
    let mut acc: Section = (DMatrix::zeros(0, 0), vec![], vec![], 1.0);
    for (a2, b2, c2, d2) in sections {
        let (a1, b1, c1, d1) = &acc;
        let (n1, n2) = (b1.len(), b2.len());
        let mut a = DMatrix::zeros(n1 + n2, n1 + n2);
        a.view_mut((0, 0), (n1, n1)).copy_from(a1);
        a.view_mut((n1, n1), (n2, n2)).copy_from(a2);
        for i in 0..n2 {
            for j in 0..n1 {
                a[(n1 + i, j)] = b2[i] * c1[j];
            }
        }
        let mut b = b1.clone();
        b.extend(b2.iter().map(|x| x * d1));
        let mut c: Vec<f64> = c1.iter().map(|x| d2 * x).collect();
        c.extend(c2.iter().copied());
        acc = (a, b, c, d2 * d1);
    }
    acc
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

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::Complex;

    /// The cascade realisation of gain/s·Π(1 + s/ωz)/Π(1 + s/ωp) has the
    /// same frequency response as the formula, C(jωI − A)⁻¹B + D
    /// (definition of the transfer function; common practice).
    #[test]
    fn poles_zeros_realisation_matches_its_transfer_function() {
        let (gain, zeros, poles) = (2199.1, vec![1.5e3, 1.5e3], vec![60e3, 60e3]);
        let law = fluxstep_netlist::CompensatorLaw::PolesZeros {
            gain,
            integrator: true,
            zeros_hz: zeros.clone(),
            poles_hz: poles.clone(),
        };
        let (a, b, c, d) = realise(&law);
        let n = b.len();
        assert_eq!(n, 3);
        // The rate bound stays of the order of the fastest pole, not its
        // square (canonical form) nor the lead gain times it (raw cascade).
        let wp = 2.0 * std::f64::consts::PI * 60e3;
        let rate = crate::mode::balanced_norm(&a, n, &vec![1.0; n]);
        assert!(
            rate <= 4.0 * wp,
            "rate bound {rate:e} vs the fastest pole {wp:e}"
        );
        for f in [10.0, 300.0, 1.5e3, 20e3, 60e3, 500e3] {
            let s = Complex::new(0.0, 2.0 * std::f64::consts::PI * f);
            let m = nalgebra::DMatrix::<Complex<f64>>::from_fn(n, n, |i, j| {
                (if i == j { s } else { Complex::new(0.0, 0.0) }) - Complex::new(a[(i, j)], 0.0)
            });
            let bv = nalgebra::DVector::<Complex<f64>>::from_fn(n, |i, _| Complex::new(b[i], 0.0));
            let x = m.lu().solve(&bv).unwrap();
            let g: Complex<f64> = (0..n).map(|i| x[i] * c[i]).sum::<Complex<f64>>() + d;
            let mut expect = Complex::new(gain, 0.0) / s;
            for &z in &zeros {
                expect *= Complex::new(1.0, 0.0) + s / (2.0 * std::f64::consts::PI * z);
            }
            for &p in &poles {
                expect /= Complex::new(1.0, 0.0) + s / (2.0 * std::f64::consts::PI * p);
            }
            assert!(
                (g - expect).norm() < 1e-12 * expect.norm(),
                "at {f} Hz: {g} vs {expect}"
            );
        }
    }
}
