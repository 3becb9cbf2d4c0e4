//! Small-signal frequency response and loop gain from the exact switched
//! model, linearised around its periodic steady state.
//!
//! # What is computed
//!
//! Around the periodic orbit the converter is a linear periodic system
//! (G. C. Verghese, M. E. Elbuluk & J. G. Kassakian, "A general approach
//! to sampled-data modeling for power electronic circuits", IEEE TPEL
//! 1986): inside each interval δx′ = M δx + b û(t); at each scheduled
//! instant the jump P; at each located event the saltation matrix, which
//! also carries an input that moves the event (a comparator reference);
//! at each PWM edge that depends on the duty cycle, the impulse
//! (P f⁻ − f⁺)·∂t/∂d · d̂(t_edge) of an edge moved by ∂t/∂d · d̂.
//!
//! For an input û·e^{j2πft} the steady-state response of such a system is a
//! sum of components at f + k·fs. fluxstep reports the component at f
//! itself — the fundamental (0, 0) element of the harmonic transfer
//! function, which is what a network analyser locked to f measures — and
//! computes it exactly, intersample behaviour included: with
//! δx(t) = w(t)·e^{j2πft}, w is T-periodic and obeys
//! w′ = (M − j2πf) w + b û, so one period of exact complex matrix
//! exponentials (Van Loan's augmented form also integrates the output)
//! and the periodicity w(T) = w(0) give the period average of y·e^{−j2πft}.
//! Nothing is averaged or sampled, and the result holds at every
//! frequency, up to and beyond fs/2 (marked beyond the Nyquist frequency
//! there: the sidebands then alias onto lower frequencies).
//!
//! # How each input perturbs the circuit
//!
//! - A source value (`Vin`), a compensator set-point (`K.reference`) or a
//!   current-mode gate's reference (`pc.reference`): the input's value
//!   becomes value + û·e^{j2πft}, continuously in time.
//! - A PWM gate's duty cycle (`drive.duty`): each edge whose instant depends
//!   on the duty moves by T·d̂(t_e), with d̂ evaluated at the edge's own
//!   nominal instant t_e (natural sampling); edges at fixed phases (the
//!   turn-on of trailing-edge modulation) stay.
//! - A closed-loop gate's sense input (`vm.sense`): the comparator sees its
//!   sensed quantity plus the input (the loop's break point for loop gain).
//! - A current injected into a node (`injection:out`): a zero-valued
//!   current source pushing û into the node (output impedance in Ω).

mod linear;
mod margins;

use nalgebra::Complex;
use serde::Serialize;

use fluxstep_netlist::{Circuit, CurrentSource, Element, Gate, Stimulus};

use crate::steady::{find, SteadyOptions, SteadyState};
use crate::AnalysisError;
pub use margins::{Margins, Resonance};

/// A small-signal input.
#[derive(Clone, Debug, PartialEq)]
pub enum Input {
    /// The value of an input of the circuit: a source (constant or
    /// piecewise linear), `GATE.reference` of a current-mode gate,
    /// `COMPENSATOR.reference`.
    Value(String),
    /// The duty cycle of a PWM gate.
    Duty(String),
    /// A signal added to what a closed-loop gate's comparator senses.
    Sense(String),
    /// A current injected into a node (A).
    Injection(String),
}

impl Input {
    /// Reads an input as written on the command line: `SOURCE`,
    /// `GATE.duty`, `GATE.reference`, `GATE.sense`, `COMPENSATOR.reference`
    /// or `injection:NODE`.
    pub fn parse(text: &str) -> Input {
        if let Some(node) = text.strip_prefix("injection:") {
            return Input::Injection(node.to_string());
        }
        match text.rsplit_once('.') {
            Some((g, "duty")) => Input::Duty(g.to_string()),
            Some((g, "sense")) => Input::Sense(g.to_string()),
            _ => Input::Value(text.to_string()),
        }
    }

    /// The input as written on the command line.
    pub fn name(&self) -> String {
        match self {
            Input::Value(n) => n.clone(),
            Input::Duty(g) => format!("{g}.duty"),
            Input::Sense(g) => format!("{g}.sense"),
            Input::Injection(n) => format!("injection:{n}"),
        }
    }

    /// The unit of the input (for transfer-function units).
    fn unit(&self, circuit: &Circuit) -> &'static str {
        match self {
            Input::Duty(_) => "",
            Input::Injection(_) => "A",
            Input::Sense(_) | Input::Value(_) => {
                let name = match self {
                    Input::Value(n) => n.as_str(),
                    _ => "",
                };
                match circuit.element(name) {
                    Some(Element::CurrentSource(_)) => "A",
                    Some(_) => "V",
                    None => "",
                }
            }
        }
    }
}

/// One frequency of a response.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Point {
    /// Frequency (Hz).
    pub frequency: f64,
    /// Real part of the transfer function (output unit per input unit).
    pub re: f64,
    /// Imaginary part.
    pub im: f64,
    /// 20·log10 |H| (dB).
    pub magnitude_db: f64,
    /// ∠H in degrees, in (−180, 180].
    pub phase_deg: f64,
    /// Whether the frequency lies above half the switching frequency.
    pub beyond_nyquist: bool,
}

impl Point {
    fn new(frequency: f64, h: Complex<f64>, fs: f64) -> Point {
        Point {
            frequency,
            re: h.re,
            im: h.im,
            magnitude_db: 20.0 * h.norm().log10(),
            phase_deg: h.arg().to_degrees(),
            // fs = 1/T carries the rounding of T: fs/2 itself is not beyond.
            beyond_nyquist: frequency > 0.5 * fs * (1.0 + 1e-12),
        }
    }

    /// The value as a complex number.
    pub fn value(&self) -> Complex<f64> {
        Complex::new(self.re, self.im)
    }
}

/// A frequency response.
#[derive(Debug)]
pub struct Response {
    /// The input, as written.
    pub input: String,
    /// The output.
    pub output: String,
    /// Unit of the transfer function (e.g. "V/V", "V/A" = Ω).
    pub unit: String,
    /// Switching frequency 1/T of the orbit (Hz).
    pub switching_frequency: f64,
    /// One entry per frequency asked for, in that order.
    pub points: Vec<Point>,
    /// Peaks of the magnitude (see [`Resonance`]).
    pub resonances: Vec<Resonance>,
    /// The periodic steady state linearised.
    pub steady: SteadyState,
}

/// A loop gain with its margins.
#[derive(Debug)]
pub struct LoopGain {
    /// Where the loop is broken.
    pub point: BreakPoint,
    /// T(f) = −(returned signal)/(signal at the comparator), one entry per
    /// frequency asked for.
    pub points: Vec<Point>,
    /// Crossover, phase and gain margins, refined on the exact T(f).
    pub margins: Margins,
    /// Switching frequency (Hz).
    pub switching_frequency: f64,
    /// The periodic steady state linearised.
    pub steady: SteadyState,
}

/// `points` frequencies spaced evenly on a log scale from `from` to `to`
/// (Hz), both included.
///
/// # Errors
///
/// [`AnalysisError::InvalidOption`] unless 0 < from ≤ to (finite) and
/// points ≥ 1 (from = to needs points = 1).
pub fn log_frequencies(from: f64, to: f64, points: usize) -> Result<Vec<f64>, AnalysisError> {
    let bad = |field, reason: String| Err(AnalysisError::InvalidOption { field, reason });
    if !(from > 0.0 && from.is_finite()) {
        return bad(
            "from",
            format!("the lowest frequency must be positive, got {from} Hz"),
        );
    }
    if !(to >= from && to.is_finite()) {
        return bad(
            "to",
            format!("the highest frequency must be at least {from} Hz, got {to} Hz"),
        );
    }
    if points == 0 {
        return bad("points", "at least one frequency is needed".into());
    }
    if points == 1 {
        return Ok(vec![from]);
    }
    let (a, b) = (from.ln(), to.ln());
    Ok((0..points)
        .map(|k| {
            if k == 0 {
                from
            } else if k + 1 == points {
                to
            } else {
                (a + (b - a) * k as f64 / (points - 1) as f64).exp()
            }
        })
        .collect())
}

/// The circuit with a zero current source for an injection input (so that
/// its orbit is unchanged) and the input as the linear model sees it.
fn prepare(circuit: &Circuit, input: &Input) -> Result<(Circuit, Input), AnalysisError> {
    let Input::Injection(node) = input else {
        return Ok((circuit.clone(), input.clone()));
    };
    let nodes = circuit.nodes();
    if !nodes.iter().any(|n| n == node) || fluxstep_netlist::is_ground(node) {
        return Err(AnalysisError::UnknownInput {
            name: input.name(),
            valid: nodes
                .iter()
                .skip(1)
                .map(|n| format!("injection:{n}"))
                .collect(),
        });
    }
    let mut name = "injection".to_string();
    while circuit.element(&name).is_some() {
        name.push('_');
    }
    let mut c = circuit.clone();
    c.elements.push(Element::CurrentSource(CurrentSource {
        name: name.clone(),
        nodes: ["gnd".into(), node.clone()],
        waveform: Stimulus::Constant { value: 0.0 },
    }));
    Ok((c, Input::Value(name)))
}

fn check_frequencies(freqs: &[f64]) -> Result<(), AnalysisError> {
    if freqs.is_empty() {
        return Err(AnalysisError::InvalidOption {
            field: "frequencies",
            reason: "at least one frequency is needed".into(),
        });
    }
    if let Some(f) = freqs.iter().find(|f| !(**f > 0.0 && f.is_finite())) {
        return Err(AnalysisError::InvalidOption {
            field: "frequencies",
            reason: format!("every frequency must be positive and finite, got {f} Hz"),
        });
    }
    Ok(())
}

fn steady_for_response(
    circuit: &Circuit,
    opts: &SteadyOptions,
) -> Result<SteadyState, AnalysisError> {
    // The ramps of a transition model restart from the state at each
    // clamp, a reset the linearised period map does not include: refuse
    // rather than answer wrongly.
    for e in &circuit.elements {
        if let fluxstep_netlist::Element::Switch(s) = e {
            if s.transition.is_some() {
                return Err(AnalysisError::LossModel {
                    element: s.name.clone(),
                    field: "transition".into(),
                    reason: "is not linearised by the small-signal response; \
                             analyse the converter without the transition model"
                        .into(),
                });
            }
        }
    }
    let ss = find(
        circuit,
        &SteadyOptions {
            record_periods: 2,
            ..opts.clone()
        },
    )?;
    if !ss.is_stable() {
        return Err(AnalysisError::Unstable {
            multipliers: ss.multipliers.iter().map(|m| (m.re, m.im)).collect(),
        });
    }
    Ok(ss)
}

/// The frequency response from `input` to `output` at `frequencies` (Hz).
///
/// # Errors
///
/// The steady-state errors unchanged; [`AnalysisError::Unstable`] when the
/// orbit is unstable (a small-signal response of it would be meaningless);
/// [`AnalysisError::UnknownInput`] / [`AnalysisError::UnknownOutput`]
/// listing the valid names; [`AnalysisError::InvalidOption`] for a
/// frequency that is not positive.
///
/// # Example
///
/// ```
/// use fluxstep_analysis::response::{frequency_response, Input};
/// use fluxstep_analysis::steady::SteadyOptions;
/// use fluxstep_netlist::Circuit;
///
/// let buck = Circuit::builder()
///     .voltage_source("Vin", "in", "gnd", 12.0)
///     .switch("S1", "in", "sw", "drive")
///     .diode("D1", "gnd", "sw")
///     .inductor("L1", "sw", "out", 100e-6)
///     .capacitor("C1", "out", "gnd", 100e-6)
///     .resistor("Rload", "out", "gnd", 5.0)
///     .pwm("drive", 100e3, 0.5)
///     .build()
///     .unwrap();
/// let input = Input::parse("drive.duty");
/// let r = frequency_response(&buck, &input, "out", &[10.0], &SteadyOptions::default()).unwrap();
/// // Well below the LC resonance the duty-to-output gain is Vin (Erickson & Maksimović).
/// assert!((r.points[0].magnitude_db - 20.0 * 12f64.log10()).abs() < 0.05);
/// ```
pub fn frequency_response(
    circuit: &Circuit,
    input: &Input,
    output: &str,
    frequencies: &[f64],
    opts: &SteadyOptions,
) -> Result<Response, AnalysisError> {
    check_frequencies(frequencies)?;
    let (c, model_input) = prepare(circuit, input)?;
    let ss = steady_for_response(&c, opts)?;
    let lin = linear::Linearized::new(&c, &ss, &model_input, output)?;
    let fs = 1.0 / lin.period();
    let points: Vec<Point> = frequencies
        .iter()
        .map(|&f| Point::new(f, lin.transfer(f), fs))
        .collect();
    let unit_out = fluxstep_netlist::OutputName::parse(output).map_or("", |o| o.unit());
    let unit_in = input.unit(circuit);
    let unit = match unit_in {
        "" => unit_out.to_string(),
        u => format!("{unit_out}/{u}"),
    };
    Ok(Response {
        input: input.name(),
        output: output.to_string(),
        unit,
        switching_frequency: fs,
        resonances: margins::resonances(&points),
        points,
        steady: ss,
    })
}

/// Where a loop is broken for its loop gain.
#[derive(Clone, Debug, PartialEq)]
pub enum BreakPoint {
    /// At a closed-loop gate's sense input: what the comparator compares
    /// (for a voltage-mode gate, the compensator's output).
    GateSense(String),
    /// At a compensator's input: the node voltage it measures.
    CompensatorInput(String),
}

impl BreakPoint {
    /// The break point named `name` in `circuit`: a closed-loop gate or a
    /// compensator.
    ///
    /// # Errors
    ///
    /// [`AnalysisError::UnknownInput`] listing the closed-loop gates and
    /// compensators.
    pub fn named(circuit: &Circuit, name: &str) -> Result<BreakPoint, AnalysisError> {
        if circuit
            .gates
            .iter()
            .any(|g| g.name() == name && g.comparator().is_some())
        {
            return Ok(BreakPoint::GateSense(name.into()));
        }
        if circuit.compensators.iter().any(|k| k.name == name) {
            return Ok(BreakPoint::CompensatorInput(name.into()));
        }
        Err(AnalysisError::UnknownInput {
            name: format!("loop break point {name}"),
            valid: circuit
                .gates
                .iter()
                .filter(|g| g.comparator().is_some())
                .map(|g| g.name().to_string())
                .chain(circuit.compensators.iter().map(|k| k.name.clone()))
                .collect(),
        })
    }
}

/// The circuit prepared for a loop break, the input that injects there and
/// the output that returns: at a gate's sense, the comparator's sense input
/// and its sensed output; at a compensator's input, a zero-valued voltage
/// source in series with the measurement (the compensator then measures
/// node + source) and the node itself.
fn prepare_break(
    circuit: &Circuit,
    point: &BreakPoint,
) -> Result<(Circuit, Input, String), AnalysisError> {
    match point {
        BreakPoint::GateSense(gate) => {
            let sense = circuit
                .gates
                .iter()
                .find(|g| g.name() == gate)
                .and_then(Gate::comparator)
                .map(|spec| spec.sense)
                .ok_or_else(|| AnalysisError::UnknownInput {
                    name: format!("{gate}.sense"),
                    valid: circuit
                        .gates
                        .iter()
                        .filter(|g| g.comparator().is_some())
                        .map(|g| g.name().to_string())
                        .collect(),
                })?;
            Ok((circuit.clone(), Input::Sense(gate.clone()), sense))
        }
        BreakPoint::CompensatorInput(name) => {
            let mut c = circuit.clone();
            let k = c
                .compensators
                .iter_mut()
                .find(|k| k.name == *name)
                .ok_or_else(|| AnalysisError::UnknownInput {
                    name: name.clone(),
                    valid: circuit
                        .compensators
                        .iter()
                        .map(|k| k.name.clone())
                        .collect(),
                })?;
            let node = k.input.clone();
            if !circuit.nodes().contains(&node) {
                return Err(AnalysisError::InvalidOption {
                    field: "loop",
                    reason: format!(
                        "compensator {name} measures {node}, not a node voltage: break the loop at its gate instead"
                    ),
                });
            }
            let unique = |base: &str| {
                let mut s = base.to_string();
                while circuit.element(&s).is_some() || circuit.nodes().contains(&s) {
                    s.push('_');
                }
                s
            };
            let (source, sensed) = (unique("loop_injection"), unique("loop_sense"));
            k.input = sensed.clone();
            c.elements
                .push(Element::VoltageSource(fluxstep_netlist::VoltageSource {
                    name: source.clone(),
                    nodes: [sensed.clone(), node.clone()],
                    waveform: Stimulus::Constant { value: 0.0 },
                }));
            // The measured node needs a second terminal; 1 GΩ draws nothing
            // that matters and keeps the netlist's rules.
            c.elements
                .push(Element::Resistor(fluxstep_netlist::Resistor {
                    name: unique("loop_sense_load"),
                    nodes: [sensed, "gnd".into()],
                    resistance: 1e9,
                }));
            Ok((c, Input::Value(source), node))
        }
    }
}

/// The loop gain of a closed loop broken at `point`: a signal v̂ injected
/// there returns as x̂ through the loop, and T = −x̂ / (x̂ + v̂) —
/// R. D. Middlebrook's voltage injection ("Measurement of loop gain in
/// feedback systems", Int. J. Electronics 1975), exact here because a
/// comparator or a compensator input draws no current.
///
/// # Errors
///
/// As [`frequency_response`]; [`AnalysisError::UnknownInput`] for a break
/// point that is neither a closed-loop gate nor a compensator.
pub fn loop_gain(
    circuit: &Circuit,
    point: &BreakPoint,
    frequencies: &[f64],
    opts: &SteadyOptions,
) -> Result<LoopGain, AnalysisError> {
    check_frequencies(frequencies)?;
    let (c, input, ret) = prepare_break(circuit, point)?;
    let ss = steady_for_response(&c, opts)?;
    let lin = linear::Linearized::new(&c, &ss, &input, &ret)?;
    let fs = 1.0 / lin.period();
    let t_of = |f: f64| {
        let x = lin.transfer(f);
        -x / (x + 1.0)
    };
    let points: Vec<Point> = frequencies
        .iter()
        .map(|&f| Point::new(f, t_of(f), fs))
        .collect();
    let margins = margins::margins(frequencies, &points, &t_of);
    Ok(LoopGain {
        point: point.clone(),
        points,
        margins,
        switching_frequency: fs,
        steady: ss,
    })
}
