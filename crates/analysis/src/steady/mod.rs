//! Periodic steady state by shooting, with its stability.
//!
//! A switching converter in steady state repeats itself every period T:
//! its state x₀ at the start of a period is a fixed point of the exact
//! period map, P(x₀) = x₀. Settling a transient until it stops changing is
//! slow (a slow output filter needs tens of thousands of periods) and
//! misleading (a state that changes by 1e-13 per period may still be far
//! from the fixed point, and an unstable orbit is never reached). Shooting
//! solves P(x) − x = 0 by Newton's method with the exact Jacobian of P
//! (T. J. Aprille & T. N. Trick, "Steady-state analysis of nonlinear
//! circuits with periodic inputs", Proc. IEEE 1972): the product of the
//! segments' transition matrices e^{M·h}, the jumps on entering modes, and
//! at every located event (diode turn-on/turn-off, comparator crossing)
//! the saltation matrix (Leine & Nijmeijer 2004). For a fixed event
//! sequence P is affine, so one Newton step lands on the fixed point up to
//! rounding; when the sequence changes between iterates (the onset of
//! discontinuous conduction) the step is halved until the residual falls.
//!
//! The Jacobian at the fixed point is the monodromy matrix; its
//! eigenvalues, the Floquet multipliers, say whether the orbit is stable
//! (all inside the unit circle), how fast it settles, and how it loses
//! stability (a real multiplier through −1 is the period-doubling of
//! current-mode control above 50 % duty). An unstable orbit is found and
//! reported as unstable, never replaced by another one.
//!
//! What is computed exactly and what is not: every period is the solver's
//! exact solution and every Jacobian factor is exact up to rounding; the
//! only approximation is Newton's stopping rule (the residual tolerance).
//! States driven by sine sources (their oscillators) are forced, not
//! unknowns. Sampled controllers written in Rust are not part of a circuit
//! file, so they do not take part.

mod monodromy;
mod period;

use std::time::{Duration, Instant};

use nalgebra::{Complex, DMatrix, DVector};
use serde::Serialize;

use fluxstep_netlist::Circuit;
use fluxstep_solver::measure::{measure, Measurement};
use fluxstep_solver::{Options, Record, RunResult, Simulator};

use crate::AnalysisError;
pub(crate) use monodromy::saltation;
use monodromy::segments_jacobian;
use period::common_period;

/// A multiplier this close to 1 counts as exactly 1 (a conserved
/// quantity): rounding of a period's product of transition matrices is far
/// below it, and a real slow mode (|λ| = 1 − 1e-10 takes 10¹⁰ periods per
/// factor e) is no steady state a designer could observe.
const UNIT_MULTIPLIER: f64 = 1e-10;

/// Plain periods taken where no fraction of a Newton step reduces the
/// residual: enough for a loop held at a duty limit to come off it.
const PLAIN_BURST: usize = 50;

/// Options of a steady-state search.
#[derive(Clone, Debug)]
pub struct SteadyOptions {
    /// Default 1e-12. Newton stops when every state's change over one
    /// period is at most this fraction of that state's scale (its largest
    /// magnitude over the period). Below about 1e-14 rounding of the
    /// period map itself decides.
    pub tolerance: f64,
    /// Default 50. Most Newton iterations (each simulates one period, more
    /// when a step is halved).
    pub max_iterations: usize,
    /// Default 60 s of wall time; `None` for no limit. The search stops
    /// with [`AnalysisError::NotConverged`] and its history when reached.
    pub time_limit: Option<Duration>,
    /// Default 1. Find a fixed point of the map over this many periods
    /// (a period-k orbit, e.g. 2 for the period-two orbit of current-mode
    /// control).
    pub period_multiple: u64,
    /// Default 0. Periods of plain transient from the circuit's initial
    /// state before the first Newton iterate (a start nearer the orbit).
    pub settle_periods: u64,
    /// Default 1. Periods recorded in the result's waveform (the figure of
    /// two periods uses 2); measurements cover the first.
    pub record_periods: u64,
    /// Default: the solver's defaults. Interruption and shoot-through
    /// policies, event limits; the record setting is replaced.
    pub solver: Options,
}

impl Default for SteadyOptions {
    fn default() -> Self {
        SteadyOptions {
            tolerance: 1e-12,
            max_iterations: 50,
            time_limit: Some(Duration::from_secs(60)),
            period_multiple: 1,
            settle_periods: 0,
            record_periods: 1,
            solver: Options::default(),
        }
    }
}

/// One Newton iterate.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Iteration {
    /// The largest change of a state over one period from this iterate,
    /// relative to that state's scale.
    pub residual: f64,
    /// The fraction of the Newton step that led here (1 for a full step,
    /// 0 for the starting point).
    pub damping: f64,
    /// Periods simulated to find this iterate (more than 1 when steps were
    /// halved).
    pub trials: usize,
    /// Whether this iterate came from a Newton step; false for the
    /// starting point and for a plain period (x ← P(x)) taken where the
    /// Newton matrix was singular.
    pub newton: bool,
}

/// What a Floquet multiplier says about the orbit, in plain words.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reading {
    /// |λ| < 0.99: a disturbance along this mode dies out within about a
    /// hundred periods or fewer.
    Stable,
    /// 0.99 ≤ |λ| ≤ 1: a slow mode (an output filter, an integrator); it
    /// still settles, over −1/ln|λ| periods per factor e.
    Slow,
    /// |λ| > 1 with a complex or positive real λ: the orbit is unstable.
    Unstable,
    /// A real multiplier beyond −1: the orbit is unstable by period
    /// doubling (subharmonic oscillation).
    PeriodDoubling,
}

/// A Floquet multiplier (eigenvalue of the monodromy matrix).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Multiplier {
    /// Real part.
    pub re: f64,
    /// Imaginary part.
    pub im: f64,
    /// |λ|.
    pub magnitude: f64,
    /// Periods per factor e of decay, −1/ln|λ| (infinite at |λ| = 1,
    /// negative for growth).
    pub periods_per_e: f64,
    /// The plain-words reading.
    pub reading: Reading,
}

impl Multiplier {
    fn new(l: Complex<f64>) -> Multiplier {
        let magnitude = l.norm();
        // A multiplier is real when its imaginary part is rounding only.
        let real = l.im.abs() <= 1e-12 * magnitude.max(1e-300);
        let reading = if magnitude > 1.0 + 1e-12 {
            if real && l.re < 0.0 {
                Reading::PeriodDoubling
            } else {
                Reading::Unstable
            }
        } else if magnitude >= 0.99 {
            Reading::Slow
        } else {
            Reading::Stable
        };
        Multiplier {
            re: l.re,
            im: if real { 0.0 } else { l.im },
            magnitude,
            periods_per_e: -1.0 / magnitude.ln(),
            reading,
        }
    }
}

/// A periodic steady state.
#[derive(Debug)]
pub struct SteadyState {
    /// The period T of the orbit (s): the common period of the circuit's
    /// periodic parts times [`SteadyOptions::period_multiple`].
    pub period: f64,
    /// The time at which the recorded period starts (s), a whole number of
    /// switching periods from t = 0.
    pub start_time: f64,
    /// Names of the states, in the order of `state`.
    pub state_names: Vec<String>,
    /// The state at the start of the period.
    pub state: Vec<f64>,
    /// The exact run over the recorded periods from `state`: waveform,
    /// event log and counters.
    pub run: RunResult,
    /// The indices of the states that are unknowns of the search (all but
    /// the oscillators of sine sources), the rows and columns of
    /// `monodromy`.
    pub free_states: Vec<usize>,
    /// ∂x(T)/∂x(0) at the orbit, over `free_states`, saltation included.
    pub monodromy: DMatrix<f64>,
    /// Floquet multipliers, largest magnitude first.
    pub multipliers: Vec<Multiplier>,
    /// Newton iterates, the starting point first.
    pub iterations: Vec<Iteration>,
    /// The residual of the recorded period: the largest change of a state
    /// over it, relative to that state's scale.
    pub residual: f64,
}

impl SteadyState {
    /// End of the first recorded period (s).
    pub fn end_time(&self) -> f64 {
        self.start_time + self.period
    }

    /// Newton steps taken (iterates after the starting point).
    pub fn newton_steps(&self) -> usize {
        self.iterations.len().saturating_sub(1)
    }

    /// Whether every multiplier lies inside the unit circle.
    pub fn is_stable(&self) -> bool {
        self.multipliers.iter().all(|m| m.magnitude <= 1.0)
    }

    /// Average, RMS, extremes with their instants and ripple of an output
    /// over one period, exactly.
    ///
    /// # Errors
    ///
    /// [`AnalysisError::UnknownOutput`] listing the outputs; otherwise as
    /// [`fluxstep_solver::measure::measure`] (e.g. a floating node).
    pub fn measurement(&self, output: &str) -> Result<Measurement, AnalysisError> {
        let wave = &self.run.waveform;
        let id = wave
            .output(output)
            .map_err(|_| AnalysisError::UnknownOutput {
                name: output.to_string(),
                valid: wave.output_names().to_vec(),
            })?;
        Ok(measure(wave, id, self.start_time, self.end_time())?)
    }

    /// Measurements of every output that is determined over the period
    /// (floating nodes are left out), in output order.
    pub fn measurements(&self) -> Vec<Measurement> {
        self.run
            .waveform
            .output_names()
            .iter()
            .filter_map(|n| self.measurement(n).ok())
            .collect()
    }
}

/// ∂z(end)/∂z(start) over the extended state for the recorded segments
/// `segments` of `wave`: the jump into the first segment's mode, each
/// segment's transition matrix, at every boundary the jump into the next
/// mode or, after a located event, the saltation matrix; and finally
/// `end_jump`, the jump applied at the instant that ends the last segment
/// (`None` for none). Exact up to rounding.
pub fn period_jacobian(
    wave: &fluxstep_solver::Waveform,
    segments: std::ops::Range<usize>,
    end_jump: Option<&DMatrix<f64>>,
) -> DMatrix<f64> {
    let phi = segments_jacobian(wave, segments);
    match end_jump {
        Some(j) => j * phi,
        None => phi,
    }
}

/// The outcome of simulating one period from a given state.
struct Period {
    x_start: Vec<f64>,
    x_end: Vec<f64>,
    segments: std::ops::Range<usize>,
    /// The jump on entering the mode at the end of the period.
    end_jump: Option<DMatrix<f64>>,
    scale: Vec<f64>,
}

/// The shooting machinery: a simulator kept at a period boundary.
struct Shooter<'c> {
    circuit: &'c Circuit,
    options: Options,
    base: f64,
    multiple: u64,
    first: u64,
    sim: Simulator,
    /// The present boundary, in base periods.
    n: u64,
    free: Vec<usize>,
}

impl<'c> Shooter<'c> {
    fn fresh(
        circuit: &Circuit,
        options: &Options,
        base: f64,
        first: u64,
    ) -> Result<Simulator, AnalysisError> {
        let mut sim = Simulator::new(circuit, options.clone())?;
        let t = first as f64 * base;
        if t > 0.0 {
            sim.advance_to(t)?;
        }
        Ok(sim)
    }

    /// Simulates one period from `x` (free states; forced states keep their
    /// values at the boundary).
    fn period(&mut self, x: &[f64]) -> Result<Period, AnalysisError> {
        let outcome = self.try_period(x);
        if outcome.is_err() {
            // The simulator stopped inside a period: start again from the
            // first boundary so later trials see a clean state.
            self.sim = Self::fresh(self.circuit, &self.options, self.base, self.first)?;
            self.n = self.first;
        }
        outcome
    }

    fn try_period(&mut self, x: &[f64]) -> Result<Period, AnalysisError> {
        let mut full = self.sim.state().to_vec();
        for &i in &self.free {
            full[i] = x[i];
        }
        let seg0 = self.sim.waveform().segments().len();
        self.sim.set_state(&full)?;
        let x_start = self.sim.state().to_vec();
        let t1 = (self.n + self.multiple) as f64 * self.base;
        self.sim.advance_to(t1)?;
        self.n += self.multiple;
        let wave = self.sim.waveform();
        let seg1 = wave.segments().len();
        let x_end = self.sim.state().to_vec();
        let n_x = x_end.len();
        let mut scale: Vec<f64> = (0..n_x)
            .map(|i| x_start[i].abs().max(x_end[i].abs()))
            .collect();
        for k in seg0..seg1 {
            let d = wave.segment_dynamics(k).expect("recorded");
            for (s, v) in scale.iter_mut().zip(d.start) {
                *s = s.max(v.abs());
            }
        }
        Ok(Period {
            x_start,
            x_end,
            segments: seg0..seg1,
            end_jump: self.sim.present_entry_jump().cloned(),
            scale,
        })
    }

    /// ∂x(T)/∂x(0) over the free states for the period just simulated.
    fn jacobian(&self, p: &Period) -> DMatrix<f64> {
        let phi = period_jacobian(self.sim.waveform(), p.segments.clone(), p.end_jump.as_ref());
        let f = &self.free;
        DMatrix::from_fn(f.len(), f.len(), |r, c| phi[(f[r], f[c])])
    }
}

/// The largest change over the period relative to each state's scale.
fn residual(p: &Period, free: &[usize]) -> f64 {
    residual_on(p, &p.scale, free)
}

/// The largest change over the period relative to `scale`.
fn residual_on(p: &Period, scale: &[f64], free: &[usize]) -> f64 {
    let top = free.iter().map(|&i| scale[i]).fold(0.0, f64::max);
    let floor = 1e-9 * top + f64::MIN_POSITIVE;
    free.iter()
        .map(|&i| (p.x_end[i] - p.x_start[i]).abs() / scale[i].max(floor))
        .fold(0.0, f64::max)
}

fn check_options(o: &SteadyOptions) -> Result<(), AnalysisError> {
    let bad = |field, reason: &str| {
        Err(AnalysisError::InvalidOption {
            field,
            reason: reason.into(),
        })
    };
    if !(o.tolerance > 0.0 && o.tolerance < 1.0) {
        return bad("tolerance", "must lie in (0, 1)");
    }
    if o.max_iterations == 0 {
        return bad("max_iterations", "must be at least 1");
    }
    if o.period_multiple == 0 {
        return bad("period_multiple", "must be at least 1");
    }
    if o.record_periods == 0 {
        return bad("record_periods", "must be at least 1");
    }
    Ok(())
}

/// The steady-state period of `circuit` (s): the common period of its
/// periodic gates, clocked comparator gates and periodic sources — what
/// [`find`] uses, without simulating anything.
///
/// # Errors
///
/// [`AnalysisError::NoPeriod`] or [`AnalysisError::Incommensurate`], as
/// [`find`].
pub fn period(circuit: &Circuit) -> Result<f64, AnalysisError> {
    let cp = common_period(circuit)?;
    Ok(cp.multiple as f64 * cp.base)
}

/// Finds the periodic steady state of `circuit` by shooting.
///
/// # Errors
///
/// - [`AnalysisError::NoPeriod`] when nothing in the circuit repeats;
///   [`AnalysisError::Incommensurate`] naming the gates and sources whose
///   periods have no common multiple;
/// - [`AnalysisError::NotConverged`] with the residual history when the
///   iteration or time limit is reached or no step reduces the residual;
/// - [`AnalysisError::Undetermined`] when a state has no single steady
///   value (a multiplier of exactly 1);
/// - [`AnalysisError::Solver`] for a circuit the solver rejects, or a
///   diagnostic on the converged orbit itself;
/// - [`AnalysisError::InvalidOption`] for an option out of range.
///
/// # Example
///
/// See the crate documentation.
pub fn find(circuit: &Circuit, opts: &SteadyOptions) -> Result<SteadyState, AnalysisError> {
    check_options(opts)?;
    match shoot(circuit, opts) {
        // A closed loop can take Newton into a region where its modulator
        // is held at a duty limit: there the integrator's drift per period
        // is tiny next to the state the step produced, and the search
        // "converges" on an orbit whose loop does nothing (a multiplier of
        // exactly 1). Settling by plain periods first starts the search
        // where the loop acts; a true family of orbits (a capacitor with
        // no DC path) is still reported as such.
        Err(AnalysisError::Undetermined { .. }) if opts.settle_periods < RETRY_SETTLE => shoot(
            circuit,
            &SteadyOptions {
                settle_periods: opts.settle_periods + RETRY_SETTLE,
                ..opts.clone()
            },
        ),
        other => other,
    }
}

/// Periods of plain transient before the second attempt of a search whose
/// first ended on an orbit with a multiplier of 1.
const RETRY_SETTLE: u64 = 2000;

fn shoot(circuit: &Circuit, opts: &SteadyOptions) -> Result<SteadyState, AnalysisError> {
    let started = Instant::now();
    let cp = common_period(circuit)?;
    let multiple = cp.multiple * opts.period_multiple;
    let period = multiple as f64 * cp.base;
    // The first boundary from which everything repeats, plus settling.
    let mut first = (cp.repeats_from / cp.base).ceil() as u64;
    while (first as f64) * cp.base < cp.repeats_from {
        first += 1;
    }
    first += opts.settle_periods * multiple;
    let t_start = first as f64 * cp.base;
    let solver = Options {
        record: Record::Window {
            from: t_start,
            to: f64::INFINITY,
        },
        ..opts.solver.clone()
    };
    let sim = Shooter::fresh(circuit, &solver, cp.base, first)?;
    let forced = sim.forced_states();
    let free: Vec<usize> = (0..sim.state().len())
        .filter(|i| !forced.contains(i))
        .collect();
    let mut shooter = Shooter {
        circuit,
        options: solver,
        base: cp.base,
        multiple,
        first,
        sim,
        n: first,
        free: free.clone(),
    };
    let (x, history) = converge(&mut shooter, &free, opts, started)?;
    let at = Boundaries {
        base: cp.base,
        multiple,
        first,
        t_start,
        period,
    };
    recorded_orbit(circuit, opts, &at, x, free, history)
}

/// The period's boundaries the search and the recorded orbit share.
struct Boundaries {
    /// The common period of the circuit's signals.
    base: f64,
    /// Base periods per steady-state period.
    multiple: u64,
    /// The index of the first boundary of the search.
    first: u64,
    /// Its time.
    t_start: f64,
    /// The steady-state period.
    period: f64,
}

/// Damped Newton on the period map from the shooter's present state, with
/// bursts of plain periods where no step helps; returns the start of the
/// periodic orbit and the history of the iterations.
fn converge(
    shooter: &mut Shooter<'_>,
    free: &[usize],
    opts: &SteadyOptions,
    started: Instant,
) -> Result<(Vec<f64>, Vec<Iteration>), AnalysisError> {
    let mut x = shooter.sim.state().to_vec();
    let mut p = shooter.period(&x)?;
    let mut r = residual(&p, free);
    let mut history = vec![Iteration {
        residual: r,
        damping: 0.0,
        trials: 1,
        newton: false,
    }];
    let not_converged = |reason: String, history: Vec<Iteration>| AnalysisError::NotConverged {
        reason,
        tolerance: opts.tolerance,
        history,
    };
    while r > opts.tolerance {
        if history.len() > opts.max_iterations {
            return Err(not_converged(
                format!("iteration limit {} reached", opts.max_iterations),
                history,
            ));
        }
        let j = shooter.jacobian(&p);
        let f = DVector::from_iterator(free.len(), free.iter().map(|&i| p.x_end[i] - p.x_start[i]));
        let a = &j - DMatrix::identity(free.len(), free.len());
        // Where I − Φ is singular here (a multiplier of exactly 1: e.g. a
        // current-mode loop whose comparator has not yet fired, so the
        // current just integrates), Newton has no step; one plain period
        // (x ← P(x)) moves on until the event sequence gives one. A state
        // that truly has no steady value is caught on the orbit below.
        let newton = a
            .clone()
            .lu()
            .solve(&(-&f))
            .filter(|d| d.iter().all(|v| v.is_finite()));
        let is_newton = newton.is_some();
        let delta = newton.unwrap_or_else(|| f.clone());
        // Damped step: halve until the residual falls (a change of event
        // sequence makes the affine prediction overshoot).
        let mut lambda = 1.0;
        let mut trials = 0;
        let mut stepped = false;
        while lambda >= 1.0 / 1024.0 {
            if let Some(limit) = opts.time_limit {
                if started.elapsed() > limit {
                    return Err(not_converged(
                        format!("time limit {limit:?} reached"),
                        history,
                    ));
                }
            }
            trials += 1;
            let mut x_try = p.x_start.clone();
            for (k, &i) in free.iter().enumerate() {
                x_try[i] += lambda * delta[k];
            }
            if let Ok(p_try) = shooter.period(&x_try) {
                // Judged on the present iterate's scales as well as its
                // own: a step that blows a state up (an integrator sent to
                // 1e11) shrinks its own relative residual without being any
                // nearer the orbit.
                let r_try = residual(&p_try, free).max(residual_on(&p_try, &p.scale, free));
                if r_try < r || r_try <= opts.tolerance {
                    x = x_try;
                    p = p_try;
                    r = r_try;
                    stepped = true;
                    break;
                }
            }
            lambda *= 0.5;
        }
        if !stepped {
            // No fraction of the step reduces the residual: the map is far
            // from affine around here (a loop held at a duty limit, an
            // integrator winding up, conduction modes changing within the
            // step). Plain periods move towards the orbit of a stable loop;
            // Newton resumes from where they end.
            let mut next = p.x_end.clone();
            for _ in 0..PLAIN_BURST {
                p = shooter.period(&next)?;
                next = p.x_end.clone();
                trials += 1;
            }
            x = p.x_start.clone();
            r = residual(&p, free);
            history.push(Iteration {
                residual: r,
                damping: 0.0,
                trials,
                newton: false,
            });
            continue;
        }
        history.push(Iteration {
            residual: r,
            damping: lambda,
            trials,
            newton: is_newton,
        });
    }
    Ok((x, history))
}

/// The recorded orbit from `x`, its monodromy matrix and Floquet
/// multipliers; an orbit with a multiplier of 1 is one of a family and an
/// error.
fn recorded_orbit(
    circuit: &Circuit,
    opts: &SteadyOptions,
    at: &Boundaries,
    x: Vec<f64>,
    free: Vec<usize>,
    history: Vec<Iteration>,
) -> Result<SteadyState, AnalysisError> {
    let Boundaries {
        base,
        multiple,
        first,
        t_start,
        period,
    } = *at;
    // The recorded orbit: a fresh run from the first boundary, so its times
    // and bits do not depend on how many iterations it took.
    let record_end = t_start + opts.record_periods as f64 * period;
    let options = Options {
        record: Record::Window {
            from: t_start,
            to: record_end,
        },
        ..opts.solver.clone()
    };
    let sim = Shooter::fresh(circuit, &options, base, first)?;
    let mut last = Shooter {
        circuit,
        options,
        base,
        multiple,
        first,
        sim,
        n: first,
        free: free.clone(),
    };
    let p = last.period(&x)?;
    let monodromy = last.jacobian(&p);
    let residual = residual(&p, &free);
    if opts.record_periods > 1 {
        last.sim.advance_to(record_end)?;
    }
    let ident = DMatrix::identity(free.len(), free.len());
    let Some(eigenvalues) = fluxstep_solver::eigenvalues(&monodromy) else {
        // The eigenvalue iteration can stall on a multiplier of 1 of high
        // multiplicity (equal lossless phases); the singular values of
        // M − I still tell that case apart.
        let shifted = &monodromy - &ident;
        let smallest = shifted.singular_values().min();
        if smallest <= UNIT_MULTIPLIER {
            return Err(undetermined(&shifted, &free, last.sim.state_names()));
        }
        return Err(AnalysisError::Multipliers { states: free.len() });
    };
    let mut multipliers: Vec<Multiplier> =
        eigenvalues.iter().map(|l| Multiplier::new(*l)).collect();
    multipliers.sort_by(|a, b| {
        b.magnitude
            .total_cmp(&a.magnitude)
            .then(b.re.total_cmp(&a.re))
            .then(b.im.total_cmp(&a.im))
    });
    // A multiplier of 1 on the orbit: the state along its eigenvector stays
    // wherever it starts, so this orbit is one of a family.
    if multipliers
        .iter()
        .any(|m| (m.re - 1.0).abs() <= UNIT_MULTIPLIER && m.im.abs() <= UNIT_MULTIPLIER)
    {
        return Err(undetermined(
            &(&monodromy - ident),
            &free,
            last.sim.state_names(),
        ));
    }
    let state_names = last.sim.state_names().to_vec();
    Ok(SteadyState {
        period,
        start_time: t_start,
        state_names,
        state: p.x_start,
        run: last.sim.finish(),
        free_states: free,
        monodromy,
        multipliers,
        iterations: history,
        residual,
    })
}

/// The error for a singular Newton matrix I − Φ: the state with the
/// largest entry in its null direction (the smallest singular vector).
fn undetermined(a: &DMatrix<f64>, free: &[usize], names: &[String]) -> AnalysisError {
    let svd = a.clone().svd(false, true);
    let state = match (&svd.v_t, svd.singular_values.argmin()) {
        (Some(vt), (k, _)) => {
            let row = vt.row(k);
            let (j, _) = row.iter().enumerate().fold((0, -1.0), |(bj, bv), (j, v)| {
                if v.abs() > bv {
                    (j, v.abs())
                } else {
                    (bj, bv)
                }
            });
            names[free[j]].clone()
        }
        _ => names
            .get(free.first().copied().unwrap_or(0))
            .cloned()
            .unwrap_or_default(),
    };
    AnalysisError::Undetermined { state }
}
