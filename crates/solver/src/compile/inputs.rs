//! Pass one of compiling: the layout of the extended state, states `x`
//! first (windings, capacitors, oscillators, compensators), then inputs `u`
//! (the unit input, sources, comparator thresholds, set-points, ramps).
//!
//! The z indices of `u` are fixed only once every input is counted, so
//! comparator threshold rows are built last ([`threshold_rows`]).

use nalgebra::DMatrix;

use fluxstep_netlist::{Circuit, ComparatorSpec, Element, SignalShape, Stimulus};

use super::compensator::realise;
use super::{CompiledComparison, SourceRef};

/// The states `x` of a circuit, with what pass one learnt on the way.
pub(super) struct StateLayout {
    /// Names of the states, in z order.
    pub names: Vec<String>,
    /// Initial values of the states.
    pub x0: Vec<f64>,
    /// Scale of each state for norms (√L for currents, √C for voltages, 1 else).
    pub x_scale: Vec<f64>,
    /// The circuit's independent sources, in element order (name, waveform).
    pub sources: Vec<(String, Stimulus)>,
    /// z index of the first sine oscillator's states.
    pub osc_start: usize,
    /// The compensators' realisations, in circuit order.
    pub compensators: Vec<RealisedCompensator>,
}

/// A compensator's (A, B, C, D) and the z indices of its states.
pub(super) struct RealisedCompensator {
    pub states: Vec<usize>,
    pub a: DMatrix<f64>,
    pub b: Vec<f64>,
    pub c: Vec<f64>,
    pub d: f64,
}

/// The inputs `u` counted so far, and the sources that read them.
pub(super) struct Inputs {
    /// Number of states `x` (the first input sits at z index `n_x`).
    n_x: usize,
    /// Number of inputs so far (`u_0 = 1` included).
    pub n_u: usize,
    /// Per input: whether it may ramp (a piecewise-linear waveform, a
    /// switch's transition ramp), so that z holds its slope too. The unit
    /// input and constant waveforms never do.
    pub ramping: Vec<bool>,
    /// Every source entry, circuit sources first.
    pub sources: Vec<SourceRef>,
    /// Oscillators: (sin state, cos state, ω).
    pub oscillators: Vec<(usize, usize, f64)>,
}

impl Inputs {
    /// Adds an input `u_k` driven by `waveform` and a source entry reading
    /// it; returns the input's z index and the source entry's index.
    fn push_input(&mut self, name: String, waveform: Stimulus, internal: bool) -> (usize, usize) {
        let z = self.n_x + self.n_u;
        self.ramping
            .push(!matches!(waveform, Stimulus::Constant { .. }));
        self.sources.push(SourceRef {
            name,
            terms: vec![(z, 1.0)],
            waveform: Some(waveform),
            input: Some(self.n_u),
            internal,
        });
        self.n_u += 1;
        (z, self.sources.len() - 1)
    }

    /// Per input, the z index of its slope: after the inputs, in input
    /// order, for the inputs that may ramp only (`ramping`); `None` for
    /// the others, whose slope is zero for good.
    pub fn slopes(&self) -> Vec<Option<usize>> {
        let mut next = self.n_x + self.n_u;
        self.ramping
            .iter()
            .map(|&r| {
                r.then(|| {
                    next += 1;
                    next - 1
                })
            })
            .collect()
    }
}

/// A comparison of a comparator gate whose threshold input is numbered but
/// whose row over z is not built yet.
pub(super) struct PendingComparison {
    above: bool,
    /// Threshold terms over z (z index, coefficient).
    threshold: Vec<(usize, f64)>,
    /// Its threshold input's source entry.
    source: usize,
}

/// A comparator gate during pass one.
pub(super) struct PendingThresholds {
    signal: usize,
    spec: ComparatorSpec,
    turn_off: Option<PendingComparison>,
    turn_on: Option<PendingComparison>,
}

/// A comparator gate with its threshold rows, waiting for its sensed output.
pub(super) struct PendingComparator {
    /// Index of the gate's signal.
    pub signal: usize,
    pub spec: ComparatorSpec,
    pub turn_off: Option<CompiledComparison>,
    pub turn_on: Option<CompiledComparison>,
}

/// A compensator's set-point input.
pub(super) struct SetPoint {
    /// z index of the input.
    pub z: usize,
    /// Its source entry.
    pub source: usize,
}

/// The states: inductor and winding currents, capacitor voltages in
/// element order, then two oscillator states per sine source, then the
/// compensators' states (last in x).
pub(super) fn states(circuit: &Circuit) -> StateLayout {
    let mut names = vec![];
    let mut x0 = vec![];
    let mut x_scale = vec![];
    let mut sources: Vec<(String, Stimulus)> = vec![];
    for e in &circuit.elements {
        match e {
            Element::Inductor(l) => {
                names.push(format!("{}.current", l.name));
                x0.push(l.initial_current.unwrap_or(0.0));
                x_scale.push(l.inductance.sqrt());
            }
            Element::CoupledInductors(k) => {
                for w in &k.windings {
                    names.push(format!("{}.{}.current", k.name, w.name));
                    x0.push(w.initial_current.unwrap_or(0.0));
                    x_scale.push(w.inductance.sqrt());
                }
            }
            Element::Capacitor(cap) => {
                names.push(format!("{}.voltage", cap.name));
                x0.push(cap.initial_voltage.unwrap_or(0.0));
                x_scale.push(cap.capacitance.sqrt());
            }
            Element::VoltageSource(s) => sources.push((s.name.clone(), s.waveform.clone())),
            Element::CurrentSource(s) => sources.push((s.name.clone(), s.waveform.clone())),
            _ => {}
        }
    }
    let osc_start = names.len();
    for (name, w) in &sources {
        if let Stimulus::Sine { phase, .. } = w {
            names.push(format!("{name}.oscillator_sin"));
            names.push(format!("{name}.oscillator_cos"));
            x0.push(phase.sin());
            x0.push(phase.cos());
            x_scale.push(1.0);
            x_scale.push(1.0);
        }
    }
    let mut compensators = vec![];
    for k in &circuit.compensators {
        let (a, b, c, d) = realise(&k.law);
        let first = names.len();
        for i in 0..b.len() {
            names.push(format!("{}.state{i}", k.name));
            x0.push(0.0);
            x_scale.push(1.0);
        }
        compensators.push(RealisedCompensator {
            states: (first..first + b.len()).collect(),
            a,
            b,
            c,
            d,
        });
    }
    StateLayout {
        names,
        x0,
        x_scale,
        sources,
        osc_start,
        compensators,
    }
}

/// The circuit's sources: a sine reads its oscillator state and the unit
/// input; any other waveform gets an input of its own.
pub(super) fn circuit_sources(layout: &StateLayout) -> Inputs {
    let n_x = layout.names.len();
    let mut inputs = Inputs {
        n_x,
        n_u: 1, // u_0 = 1
        ramping: vec![false],
        sources: vec![],
        oscillators: vec![],
    };
    let mut osc_next = layout.osc_start;
    for (name, w) in &layout.sources {
        match w {
            Stimulus::Sine {
                offset,
                amplitude,
                frequency,
                ..
            } => {
                let (s, co) = (osc_next, osc_next + 1);
                osc_next += 2;
                inputs
                    .oscillators
                    .push((s, co, 2.0 * std::f64::consts::PI * frequency));
                // offset·1 + amplitude·sin: the constant input sits at z[n_x].
                inputs.sources.push(SourceRef {
                    name: name.clone(),
                    terms: vec![(n_x, *offset), (s, *amplitude)],
                    waveform: None,
                    input: None,
                    internal: false,
                });
            }
            _ => {
                inputs.push_input(name.clone(), w.clone(), false);
            }
        }
    }
    inputs
}

/// Comparator thresholds: a constant (times the unit input) or, with a
/// slope, a sawtooth input restarting at every clock edge, exact like any
/// piecewise-linear source.
pub(super) fn comparator_thresholds(
    circuit: &Circuit,
    signals: &[(String, SignalShape)],
    inputs: &mut Inputs,
) -> Vec<PendingThresholds> {
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
                // Always an input (constant, or a sawtooth restarting at
                // each clock edge), so a controller can move the reference
                // at run time without rebuilding any mode.
                let waveform = match (spec.period, cmp.slope != 0.0) {
                    (Some(t), true) => Stimulus::PiecewiseLinear {
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
                    _ => Stimulus::Constant { value: cmp.base },
                };
                let (z, source) = inputs.push_input(format!("{sig_name}.{which}"), waveform, true);
                PendingComparison {
                    above: cmp.above,
                    threshold: vec![(z, 1.0)],
                    source,
                }
            })
        };
        let turn_off = make(spec.turn_off, "turn_off_threshold");
        let turn_on = make(spec.turn_on, "turn_on_threshold");
        comparisons.push(PendingThresholds {
            signal: si,
            spec,
            turn_off,
            turn_on,
        });
    }
    comparisons
}

/// Compensator set-points, also inputs so a controller can move them at
/// run time without rebuilding any mode.
pub(super) fn set_points(circuit: &Circuit, inputs: &mut Inputs) -> Vec<SetPoint> {
    circuit
        .compensators
        .iter()
        .map(|k| {
            let (z, source) = inputs.push_input(
                format!("{}.reference", k.name),
                Stimulus::Constant { value: k.reference },
                true,
            );
            SetPoint { z, source }
        })
        .collect()
}

/// Ramp inputs of switches with a transition model, in circuit order, one
/// entry per switch (set by the run loop only, never by the schedule).
pub(super) fn ramp_inputs(circuit: &Circuit, inputs: &mut Inputs) -> Vec<Option<usize>> {
    let mut ramps = vec![];
    for e in &circuit.elements {
        if let Element::Switch(s) = e {
            if s.transition.is_some() {
                ramps.push(Some(inputs.n_u));
                inputs.n_u += 1;
                inputs.ramping.push(true);
            } else {
                ramps.push(None);
            }
        }
    }
    ramps
}

/// The comparators' threshold rows over z, once `n_z` is known.
pub(super) fn threshold_rows(pending: Vec<PendingThresholds>, nz: usize) -> Vec<PendingComparator> {
    let row_of = |terms: Vec<(usize, f64)>| {
        let mut r = vec![0.0; nz];
        for (i, v) in terms {
            r[i] += v;
        }
        r
    };
    let conv = |x: Option<PendingComparison>| {
        x.map(|p| CompiledComparison {
            above: p.above,
            source: p.source,
            threshold: row_of(p.threshold),
        })
    };
    pending
        .into_iter()
        .map(|p| PendingComparator {
            signal: p.signal,
            spec: p.spec,
            turn_off: conv(p.turn_off),
            turn_on: conv(p.turn_on),
        })
        .collect()
}
