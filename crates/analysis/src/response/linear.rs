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
    /// e^{M_xx·h}: the state block of the segment's transition matrix,
    /// computed once for all frequencies.
    exx: DMatrix<f64>,
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
            let mxx = seg.matrix.view((0, 0), (n, n)).clone_owned();
            pieces.push(Piece {
                m: seg.matrix.clone(),
                length: seg.length(),
                c: seg.outputs.row(out_index).iter().copied().collect(),
                exx: (mxx * seg.length()).exp(),
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
            let cu: f64 = self
                .entries
                .iter()
                .map(|&(k, sign)| sign * piece.c[k])
                .sum();
            let bu: Vec<f64> = (0..n).map(|r| input_column(&piece.m, r)).collect();
            let e = piece_map(piece, n, s, &bu, cu)
                .unwrap_or_else(|| piece_map_van_loan(piece, n, s, &bu, cu));
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

/// The map of (w, û, q) over one piece at s = j2πf, from the piece's real
/// transition matrix: with A = M − s·I (state block), e^{A·h} = e^{−s·h}·e^{M·h},
/// F = ∫₀ʰ e^{Aτ} dτ and G = ∫₀ʰ F(τ) dτ give w(h) = e^{Ah} w₀ + F b û and
/// q(h) = c·F w₀ + (c·G b + c_u h) û. F and G come from A⁻¹ (F = A⁻¹(e^{Ah} − I),
/// G = A⁻¹(F − h I)), or from their Taylor series where ‖A·h‖ ≤ 1/4 and the
/// differences would cancel (above that the inverse form loses at most a
/// few digits to cancellation). `None` where A is too close to singular
/// for the inverse (s at an undamped mode): the caller then takes the
/// exponential of the augmented matrix instead.
fn piece_map(piece: &Piece, n: usize, s: C64, b: &[f64], cu: f64) -> Option<DMatrix<C64>> {
    let h = piece.length;
    let mut a = DMatrix::<C64>::from_fn(n, n, |r, c| C64::new(piece.m[(r, c)], 0.0));
    for r in 0..n {
        a[(r, r)] -= s;
    }
    let decay = (-s * h).exp();
    let eah = piece.exx.map(|v| C64::new(v, 0.0) * decay);
    let norm_ah = a.iter().map(|v| v.norm()).fold(0.0, f64::max) * n as f64 * h;
    let ident = DMatrix::<C64>::identity(n, n);
    let (f, g) = if norm_ah <= 0.25 {
        // Σ (Ah)ᵏ h/(k+1)! and Σ (Ah)ᵏ h²/(k+2)!, until a term's bound
        // ‖Ah‖ᵏ/k! falls below 1e-17 (at most 14 terms for ‖Ah‖ ≤ 0.25).
        let ah = &a * C64::new(h, 0.0);
        let mut term = ident.clone();
        let mut f = DMatrix::<C64>::zeros(n, n);
        let mut g = DMatrix::<C64>::zeros(n, n);
        let mut fact1 = 1.0; // (k+1)!
        let mut bound = 1.0; // ‖Ah‖ᵏ/k!
        for k in 0..24 {
            fact1 *= (k + 1) as f64;
            let fact2 = fact1 * (k + 2) as f64;
            f += &term * C64::new(h / fact1, 0.0);
            g += &term * C64::new(h * h / fact2, 0.0);
            bound *= norm_ah / (k + 1) as f64;
            if bound < 1e-17 {
                break;
            }
            term = &term * &ah;
        }
        (f, g)
    } else {
        let lu = a.lu();
        let f = lu.solve(&(&eah - &ident))?;
        let g = lu.solve(&(&f - &ident * C64::new(h, 0.0)))?;
        // ‖F‖ ≤ h·max‖e^{Aτ}‖: far beyond that, A⁻¹ amplified rounding.
        let bound = 10.0 * h * (1.0 + eah.iter().map(|v| v.norm()).fold(0.0, f64::max)) * n as f64;
        if f.iter().any(|v| v.norm() > bound || v.norm().is_nan())
            || g.iter().any(|v| !v.re.is_finite() || !v.im.is_finite())
        {
            return None;
        }
        (f, g)
    };
    let size = n + 2;
    let (iu, iq) = (n, n + 1);
    let mut e = DMatrix::<C64>::identity(size, size);
    for r in 0..n {
        for c in 0..n {
            e[(r, c)] = eah[(r, c)];
        }
        e[(r, iu)] = (0..n).map(|k| f[(r, k)] * b[k]).sum();
    }
    for c in 0..n {
        e[(iq, c)] = (0..n).map(|k| f[(k, c)] * piece.c[k]).sum();
    }
    let cgb: C64 = (0..n)
        .map(|r| piece.c[r] * (0..n).map(|k| g[(r, k)] * b[k]).sum::<C64>())
        .sum();
    e[(iq, iu)] = cgb + C64::new(cu * h, 0.0);
    Some(e)
}

/// The same map by one exponential of Van Loan's augmented matrix
/// [[M − s, b, 0], [0, 0, 0], [c, c_u, 0]]·h (C. F. Van Loan, IEEE TAC 1978).
fn piece_map_van_loan(piece: &Piece, n: usize, s: C64, b: &[f64], cu: f64) -> DMatrix<C64> {
    let size = n + 2;
    let (iu, iq) = (n, n + 1);
    let mut g = DMatrix::<C64>::zeros(size, size);
    for r in 0..n {
        for c in 0..n {
            g[(r, c)] = C64::new(piece.m[(r, c)], 0.0);
        }
        g[(r, r)] -= s;
        g[(r, iu)] = C64::new(b[r], 0.0);
        g[(iq, r)] = C64::new(piece.c[r], 0.0);
    }
    g[(iq, iu)] = C64::new(cu, 0.0);
    (g * C64::new(piece.length, 0.0)).exp()
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

#[cfg(test)]
mod tests {
    use super::*;

    /// The inverse and Taylor forms against the augmented exponential, on
    /// a damped LC pair with an integrator-like slow state, at frequencies
    /// on both sides of ‖A·h‖ = 0.5: the same to 1e-11 relative.
    #[test]
    fn fast_piece_map_matches_van_loan() {
        let m = DMatrix::from_row_slice(
            3,
            3,
            &[-50.0, -4.5e4, 0.0, 2.1e4, -2.0e3, 0.0, 0.0, 1.0, -1e-3],
        );
        let h = 2.5e-6;
        let piece = Piece {
            exx: (&m * h).exp(),
            m,
            length: h,
            c: vec![0.3, 1.0, -0.2],
        };
        let b = [1.0e4, 0.0, 0.5];
        for f in [1.0, 1e3, 3e4, 1e6, 4e7] {
            let s = C64::new(0.0, 2.0 * std::f64::consts::PI * f);
            let fast = piece_map(&piece, 3, s, &b, 0.7).expect("well conditioned");
            let slow = piece_map_van_loan(&piece, 3, s, &b, 0.7);
            let scale = slow.iter().map(|v| v.norm()).fold(0.0, f64::max);
            for (x, y) in fast.iter().zip(slow.iter()) {
                assert!((x - y).norm() <= 1e-11 * scale, "{f} Hz: {x} against {y}");
            }
        }
    }
}
