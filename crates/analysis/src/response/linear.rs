//! The linear periodic model around an orbit, and its exact response to
//! one sinusoidal input (see the module notes of [`super`]).

use nalgebra::{Complex, DMatrix, DVector};

use fluxstep_netlist::{Circuit, Gate};
use fluxstep_solver::{Options, Simulator};

use super::Input;
use crate::steady::{saltation, SteadyState};
use crate::AnalysisError;

type C64 = Complex<f64>;

/// One interval of the period: z′ = M z for `length`, output row `c`.
struct Piece {
    m: DMatrix<f64>,
    length: f64,
    c: Vec<f64>,
}

/// The instant after a piece: δz⁺ = J δz⁻ (jump or saltation), plus the
/// duty impulse (P f⁻ − f⁺)·∂t/∂d where a duty-dependent edge falls.
struct Boundary {
    j: DMatrix<f64>,
    duty_impulse: Option<DVector<f64>>,
}

/// The linearised period, ready to evaluate at any frequency.
pub(crate) struct Linearized {
    n: usize,
    period: f64,
    pieces: Vec<Piece>,
    boundaries: Vec<Boundary>,
    /// Input entries of z and their signs (empty for a duty input).
    entries: Vec<(usize, f64)>,
}

/// The valid small-signal input names of a circuit, for messages.
fn valid_inputs(circuit: &Circuit, sim: &Simulator) -> Vec<String> {
    let mut v: Vec<String> = sim
        .input_names()
        .into_iter()
        .filter(|n| !n.contains(".turn_o"))
        .collect();
    for g in &circuit.gates {
        match g {
            Gate::Pwm { name, .. } | Gate::ComplementaryPwm { name, .. } => {
                v.push(format!("{name}.duty"))
            }
            Gate::PeakCurrent { name, .. } | Gate::ValleyCurrent { name, .. } => {
                v.push(format!("{name}.reference"));
                v.push(format!("{name}.sense"));
            }
            _ if g.comparator().is_some() => v.push(format!("{}.sense", g.name())),
            _ => {}
        }
    }
    v.extend(
        circuit
            .nodes()
            .iter()
            .skip(1)
            .map(|n| format!("injection:{n}")),
    );
    v
}

impl Linearized {
    pub(crate) fn new(
        circuit: &Circuit,
        ss: &SteadyState,
        input: &Input,
        output: &str,
    ) -> Result<Linearized, AnalysisError> {
        let sim = Simulator::new(circuit, Options::default())?;
        let unknown = || AnalysisError::UnknownInput {
            name: input.name(),
            valid: valid_inputs(circuit, &sim),
        };
        let gate = |name: &str| circuit.gates.iter().find(|g| g.name() == name);
        // The entries of z the input perturbs, with their signs.
        let entries: Vec<(usize, f64)> = match input {
            Input::Duty(_) | Input::Injection(_) => vec![],
            Input::Value(name) => {
                let target = match name.rsplit_once('.') {
                    Some((g, "reference")) => match gate(g) {
                        Some(Gate::PeakCurrent { .. }) => format!("{g}.turn_off_threshold"),
                        Some(Gate::ValleyCurrent { .. }) => format!("{g}.turn_on_threshold"),
                        _ => name.clone(),
                    },
                    _ => name.clone(),
                };
                if target.contains(".turn_o") && target == *name {
                    return Err(unknown());
                }
                vec![(sim.input_index(&target).map_err(|_| unknown())?, 1.0)]
            }
            // The comparator sees sense + v: as its thresholds minus v.
            Input::Sense(g) => {
                let found: Vec<(usize, f64)> = ["turn_off_threshold", "turn_on_threshold"]
                    .iter()
                    .filter_map(|w| sim.input_index(&format!("{g}.{w}")).ok())
                    .map(|k| (k, -1.0))
                    .collect();
                if found.is_empty() {
                    return Err(unknown());
                }
                found
            }
        };
        let duty_edges = match input {
            Input::Duty(g) => duty_edges(gate(g).ok_or_else(unknown)?).ok_or_else(unknown)?,
            _ => vec![],
        };
        let wave = &ss.run.waveform;
        let out_index = wave.output_names().iter().position(|n| {
            fluxstep_netlist::OutputName::parse(output)
                .map(|o| o.to_string() == *n)
                .unwrap_or(false)
        });
        let Some(out_index) = out_index else {
            return Err(AnalysisError::UnknownOutput {
                name: output.to_string(),
                valid: wave.output_names().to_vec(),
            });
        };
        let n = wave.state_len();
        let (t_start, t_end) = (ss.start_time, ss.end_time());
        // The segments of the first recorded period (a record window can
        // also keep the segment that ends where it starts).
        let first = wave
            .segments()
            .iter()
            .take_while(|s| s.t1 <= t_start)
            .count();
        let count = wave.segments()[first..]
            .iter()
            .take_while(|s| s.t0 < t_end)
            .count();
        if count == 0 || first + count >= wave.segments().len() {
            return Err(AnalysisError::InvalidOption {
                field: "record_periods",
                reason: "the linearisation needs the orbit recorded over two periods".into(),
            });
        }
        let mut pieces = vec![];
        let mut boundaries = vec![];
        for i in first..first + count {
            let seg = wave.segment_dynamics(i).expect("within the record");
            let next = wave
                .segment_dynamics(i + 1)
                .expect("the second period follows");
            if seg.undetermined[out_index] {
                return Err(AnalysisError::Measure(
                    fluxstep_solver::measure::MeasureError::Undetermined {
                        subject: output.to_string(),
                        time: seg.t0,
                    },
                ));
            }
            let z_end = seg.end_state();
            let f_before = seg.field(&z_end);
            let z_next = DVector::from_column_slice(next.start);
            let f_after = next.field(&z_next);
            let p = next
                .entry_jump
                .cloned()
                .unwrap_or_else(|| DMatrix::identity(z_end.len(), z_end.len()));
            let j = match seg.crossing {
                Some(g) => saltation(&p, g, &f_before, &f_after),
                None => p.clone(),
            };
            // A duty-dependent edge at this boundary (times relative to the
            // period start; an edge at phase T is the period's end).
            let rel = seg.t1 - t_start;
            let tol = 1e-9 * ss.period;
            let duty_impulse = duty_edges
                .iter()
                .find(|(phase, _)| (phase - rel).abs() <= tol)
                .map(|(_, slope)| (&p * &f_before - &f_after) * (*slope * ss.period));
            pieces.push(Piece {
                m: seg.matrix.clone(),
                length: seg.length(),
                c: seg.outputs.row(out_index).iter().copied().collect(),
            });
            boundaries.push(Boundary { j, duty_impulse });
        }
        if !matches!(input, Input::Duty(_)) || boundaries.iter().any(|b| b.duty_impulse.is_some()) {
            Ok(Linearized {
                n,
                period: ss.period,
                pieces,
                boundaries,
                entries,
            })
        } else {
            Err(AnalysisError::UnknownInput {
                name: format!(
                    "{} (no edge of it moves with the duty in the orbit)",
                    input.name()
                ),
                valid: valid_inputs(circuit, &sim),
            })
        }
    }

    pub(crate) fn period(&self) -> f64 {
        self.period
    }

    /// The fundamental component of the output per unit input at `f` (Hz).
    pub(crate) fn transfer(&self, f: f64) -> C64 {
        let n = self.n;
        let size = n + 2;
        let (iu, iq) = (n, n + 1);
        let s = C64::new(0.0, 2.0 * std::f64::consts::PI * f);
        let mut pi = DMatrix::<C64>::identity(size, size);
        let input_column = |mat: &DMatrix<f64>, r: usize| -> f64 {
            self.entries
                .iter()
                .map(|&(k, sign)| sign * mat[(r, k)])
                .sum()
        };
        for (piece, b) in self.pieces.iter().zip(&self.boundaries) {
            // Van Loan's augmented form: (w, û, q) with w′ = (M − s) w + b û,
            // q′ = c·w + c_u û.
            let mut g = DMatrix::<C64>::zeros(size, size);
            for r in 0..n {
                for c in 0..n {
                    g[(r, c)] = C64::new(piece.m[(r, c)], 0.0);
                }
                g[(r, r)] -= s;
                g[(r, iu)] = C64::new(input_column(&piece.m, r), 0.0);
                g[(iq, r)] = C64::new(piece.c[r], 0.0);
            }
            let cu: f64 = self
                .entries
                .iter()
                .map(|&(k, sign)| sign * piece.c[k])
                .sum();
            g[(iq, iu)] = C64::new(cu, 0.0);
            let e = (g * C64::new(piece.length, 0.0)).exp();
            pi = e * pi;
            let mut jb = DMatrix::<C64>::identity(size, size);
            for r in 0..n {
                for c in 0..n {
                    jb[(r, c)] = C64::new(b.j[(r, c)], 0.0);
                }
                let mut u = input_column(&b.j, r);
                if let Some(imp) = &b.duty_impulse {
                    u += imp[r];
                }
                jb[(r, iu)] = C64::new(u, 0.0);
            }
            pi = jb * pi;
        }
        // Periodic w: w0 = Π_ww w0 + Π_wu û.
        let a = DMatrix::<C64>::identity(n, n) - pi.view((0, 0), (n, n));
        let rhs = pi.view((0, iu), (n, 1)).clone_owned();
        let w0 = a.lu().solve(&rhs).unwrap_or_else(|| DMatrix::zeros(n, 1));
        let mut q = pi[(iq, iu)];
        for r in 0..n {
            q += pi[(iq, r)] * w0[(r, 0)];
        }
        q / self.period
    }
}

/// The edges of a PWM gate that move with its duty: (phase in the period,
/// ∂phase/∂duty in periods). Found by comparing the gate's signals at two
/// duties, so every kind of PWM gate (plain, complementary with dead
/// times, delayed) uses its own edge arithmetic.
fn duty_edges(gate: &Gate) -> Option<Vec<(f64, f64)>> {
    let eps = 1e-6;
    let mut moved = gate.clone();
    match &mut moved {
        Gate::Pwm { duty, .. } | Gate::ComplementaryPwm { duty, .. } => {
            *duty = if *duty + eps < 1.0 {
                *duty + eps
            } else {
                *duty - eps
            };
        }
        _ => return None,
    }
    let sign = match (gate, &moved) {
        (Gate::Pwm { duty: a, .. }, Gate::Pwm { duty: b, .. })
        | (Gate::ComplementaryPwm { duty: a, .. }, Gate::ComplementaryPwm { duty: b, .. }) => {
            (b - a).signum()
        }
        _ => return None,
    };
    let mut edges = vec![];
    for ((_, s0), (_, s1)) in gate.signals().iter().zip(moved.signals().iter()) {
        let period = s0.period?;
        for (a, b) in s0.transitions.iter().zip(&s1.transitions) {
            let d = (b.0 - a.0) * sign / (eps * period);
            if d.abs() > 0.5 {
                edges.push((a.0, d.round()));
            }
        }
    }
    Some(edges)
}
