//! The transient run, read as stages: find the next scheduled instant →
//! locate the earliest state event before it → advance exactly → resolve
//! the conduction pattern → record.

use std::collections::{HashMap, VecDeque};
use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use fluxstep_netlist::{Circuit, Edge};

use crate::compile::Compiled;
use crate::error::SolverError;
use crate::events::{Event, EventKind, EventLog};
use crate::mode::{pattern_text, ConstraintKind, GuardKind, Mode, ModeKey, ModeProblem};
use crate::options::{OnInterruption, Options, Record};
use crate::propagate;
use crate::waveform::{OutputId, Segment, Waveform};

/// Relative tolerance for "this linear function of the state is zero",
/// measured against the sum of the magnitudes of its terms (so it scales
/// with the circuit and ignores cancellation noise).
const ZERO_REL: f64 = 1e-10;

/// An instant of a periodic schedule: `cycle·period + phase`.
#[derive(Clone, Copy, Debug, PartialEq)]
struct TimeKey {
    cycle: i64,
    phase: f64,
    period: f64,
}

struct SignalBuffer {
    edges: VecDeque<Edge>,
    filled_to: f64,
    chunk: f64,
}

/// Counters of a run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Stats {
    /// Scheduled instants processed (gate edges, source corners, stop).
    pub scheduled_events: usize,
    /// State events located (diode turn-on/turn-off).
    pub state_events: usize,
    /// Distinct modes compiled.
    pub modes: usize,
    /// Intervals advanced with a cached matrix exponential.
    pub cache_hits: usize,
    /// Matrix exponentials computed.
    pub exponentials: usize,
}

/// A view of one finished segment, handed to a streaming sink.
pub struct SegmentView<'a> {
    /// Start (s).
    pub t0: f64,
    /// End (s).
    pub t1: f64,
    mode: &'a Mode,
    z0: &'a DVector<f64>,
}

impl SegmentView<'_> {
    /// Value of an output at `t` in [t0, t1]; `None` if undetermined.
    pub fn value(&self, id: OutputId, t: f64) -> Option<f64> {
        if self.mode.undetermined[id.0] {
            return None;
        }
        let z = propagate::advance(
            &self.mode.m,
            self.mode.rate,
            self.z0,
            (t - self.t0).max(0.0),
        );
        Some(
            self.mode
                .c
                .row(id.0)
                .iter()
                .zip(z.iter())
                .map(|(a, b)| a * b)
                .sum(),
        )
    }
}

/// A streaming receiver of segments (for runs too long to keep).
pub type SegmentSink = Box<dyn FnMut(&SegmentView<'_>)>;

/// The result of a finished run.
#[derive(Debug)]
pub struct RunResult {
    /// The recorded waveform.
    pub waveform: Waveform,
    /// The recorded events.
    pub events: EventLog,
    /// Counters.
    pub stats: Stats,
}

/// A circuit being simulated: advance it to a time or by whole switching
/// periods, and read its state in between.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::{Options, Simulator};
///
/// let c = Circuit::builder()
///     .voltage_source("V1", "in", "gnd", 1.0)
///     .resistor("R1", "in", "a", 1.0)
///     .inductor("L1", "a", "gnd", 1e-3)
///     .build()
///     .unwrap();
/// let mut sim = Simulator::new(&c, Options::default()).unwrap();
/// sim.advance_to(1e-3).unwrap();
/// let i = sim.output_value("L1.current").unwrap().unwrap();
/// assert!((i - (1.0 - (-1.0f64).exp())).abs() < 1e-12);
/// ```
pub struct Simulator {
    cc: Compiled,
    opts: Options,
    mode_index: HashMap<ModeKey, u32>,
    modes: Vec<Arc<Mode>>,
    discs: Vec<Vec<(u64, DMatrix<f64>)>>,
    t: f64,
    tkey: Option<TimeKey>,
    z: DVector<f64>,
    mode: u32,
    key: ModeKey,
    signals: Vec<SignalBuffer>,
    wave: Waveform,
    log: EventLog,
    sink: Option<SegmentSink>,
    recent: VecDeque<(f64, String)>,
    stats: Stats,
    terms: Vec<DVector<f64>>,
    seen: (f64, f64),
}

impl Simulator {
    /// Compiles the circuit and resolves its conduction pattern at t = 0.
    ///
    /// # Errors
    ///
    /// An invalid circuit, or an initial state no mode can hold (e.g. an
    /// inductor with initial current and no path).
    pub fn new(circuit: &Circuit, opts: Options) -> Result<Simulator, SolverError> {
        let cc = Compiled::compile(circuit)?;
        if cc.switches.len() > 64 || cc.diodes.len() > 16 {
            return Err(SolverError::Unsupported {
                time: 0.0,
                pattern: String::new(),
                reason: format!(
                    "{} switches and {} diodes: at most 64 switches and 16 diodes are supported",
                    cc.switches.len(),
                    cc.diodes.len()
                ),
            });
        }
        let nz = cc.n_z();
        let mut z = DVector::zeros(nz);
        for (i, v) in cc.x0.iter().enumerate() {
            z[i] = *v;
        }
        let signals = cc
            .signals
            .iter()
            .map(|(_, s)| SignalBuffer {
                edges: VecDeque::new(),
                filled_to: 0.0,
                chunk: s.period.map(|p| 64.0 * p).unwrap_or(f64::INFINITY),
            })
            .collect();
        let wave = Waveform {
            segments: vec![],
            modes: vec![],
            output_names: cc.outputs.iter().map(|(n, _)| n.clone()).collect(),
            n_x: cc.n_x,
        };
        let log = EventLog {
            state_names: cc.state_names.clone(),
            events: vec![],
        };
        let mut sim = Simulator {
            cc,
            opts,
            mode_index: HashMap::new(),
            modes: vec![],
            discs: vec![],
            t: 0.0,
            tkey: None,
            z,
            mode: 0,
            key: ModeKey {
                switches: 0,
                diodes: 0,
            },
            signals,
            wave,
            log,
            sink: None,
            recent: VecDeque::new(),
            stats: Stats::default(),
            terms: vec![],
            seen: (0.0, 0.0),
        };
        sim.set_inputs(0.0);
        let mut sw = 0u64;
        for (i, s) in sim.cc.switches.iter().enumerate() {
            if sim.cc.signals[s.signal].1.is_on(0.0) {
                sw |= 1 << i;
            }
        }
        sim.key.switches = sw;
        // Edges at t = 0 are already reflected in the initial switch states.
        for i in 0..sim.signals.len() {
            sim.refill(i, 0.0);
            while sim.signals[i].edges.front().is_some_and(|e| e.time <= 0.0) {
                sim.signals[i].edges.pop_front();
            }
        }
        sim.key.diodes = 0;
        sim.resolve(0, None, true)?;
        Ok(sim)
    }

    /// Sends every finished segment to `sink` (in addition to what
    /// [`Options::record`] keeps), e.g. to measure a million-cycle run in
    /// bounded memory.
    pub fn set_sink(&mut self, sink: SegmentSink) {
        self.sink = Some(sink);
    }

    /// Present time (s).
    pub fn time(&self) -> f64 {
        self.t
    }

    /// Present state: inductor currents, capacitor voltages, oscillator states.
    pub fn state(&self) -> &[f64] {
        &self.z.as_slice()[..self.cc.n_x]
    }

    /// Names of the state entries.
    pub fn state_names(&self) -> &[String] {
        &self.cc.state_names
    }

    /// Present conduction pattern as text (`S1 on, D1 blocking`).
    pub fn pattern(&self) -> String {
        pattern_text(&self.cc, self.key)
    }

    /// Present value of an output; `Ok(None)` when it is undetermined (a
    /// floating node).
    ///
    /// # Errors
    ///
    /// [`SolverError::UnknownOutput`] for a name that is not an output.
    pub fn output_value(&self, name: &str) -> Result<Option<f64>, SolverError> {
        let i = self.cc.output_index(name)?;
        let m = &self.modes[self.mode as usize];
        if m.undetermined[i] {
            return Ok(None);
        }
        Ok(Some(
            m.c.row(i)
                .iter()
                .zip(self.z.iter())
                .map(|(a, b)| a * b)
                .sum(),
        ))
    }

    /// Stored energy in inductors and capacitors now (J).
    pub fn stored_energy(&self) -> f64 {
        self.cc.stored_energy(self.z.as_slice())
    }

    /// The switching period used by [`Simulator::advance_periods`]: the
    /// period of the first periodic gate signal.
    pub fn period(&self) -> Option<f64> {
        self.cc.signals.iter().find_map(|(_, s)| s.period)
    }

    /// The recorded waveform so far.
    pub fn waveform(&self) -> &Waveform {
        &self.wave
    }

    /// The recorded events so far.
    pub fn events(&self) -> &EventLog {
        &self.log
    }

    /// Counters so far.
    pub fn stats(&self) -> Stats {
        let mut s = self.stats;
        s.modes = self.modes.len();
        s
    }

    /// Ends the run and hands over what was recorded.
    pub fn finish(self) -> RunResult {
        let stats = self.stats();
        RunResult {
            waveform: self.wave,
            events: self.log,
            stats,
        }
    }

    /// Advances by `n` whole periods of the first periodic gate signal.
    ///
    /// # Errors
    ///
    /// As [`Simulator::advance_to`]; [`SolverError::BadTime`] if the circuit
    /// has no periodic gate.
    pub fn advance_periods(&mut self, n: u64) -> Result<(), SolverError> {
        let p = self.period().ok_or(SolverError::BadTime {
            time: self.t,
            reason: "the circuit has no periodic gate signal to count periods by".into(),
        })?;
        // k·T computed from the cycle number, never accumulated.
        let k = (self.t / p).round();
        let target = if (k * p - self.t).abs() <= 1e-9 * p {
            (k + n as f64) * p
        } else {
            self.t + n as f64 * p
        };
        self.advance_to(target)
    }

    /// Advances the circuit exactly to time `t_end`.
    ///
    /// # Errors
    ///
    /// A diagnostic ([`SolverError::InductorInterrupted`],
    /// [`SolverError::ShortCircuit`], [`SolverError::Chatter`], …) that
    /// names the elements and the time; the simulator then stays at the
    /// instant of the problem.
    pub fn advance_to(&mut self, t_end: f64) -> Result<(), SolverError> {
        if !t_end.is_finite() || t_end < self.t {
            return Err(SolverError::BadTime {
                time: t_end,
                reason: format!(
                    "must be finite and not before the present time {:e} s",
                    self.t
                ),
            });
        }
        while self.t < t_end {
            let (t_next, key_next) = self.next_scheduled(t_end);
            let h = match (self.tkey, key_next) {
                (Some(a), Some(b)) if a.period.to_bits() == b.period.to_bits() => {
                    (b.cycle - a.cycle) as f64 * a.period + (b.phase - a.phase)
                }
                _ => t_next - self.t,
            };
            let h = if h > 0.0 { h } else { t_next - self.t };
            if let Some((tau, fired)) = self.locate(h) {
                if tau < h {
                    let z_e = propagate::advance(
                        &self.modes[self.mode as usize].m,
                        self.modes[self.mode as usize].rate,
                        &self.z,
                        tau,
                    );
                    let t_e = self.t + tau;
                    self.record(t_e, &z_e);
                    self.t = t_e;
                    self.tkey = None;
                    self.z = z_e;
                    self.check_finite()?;
                    self.stats.state_events += 1;
                    self.resolve(fired, None, false)?;
                    continue;
                }
            }
            let z_new = self.step(h, key_next.is_some() && self.tkey.is_some());
            self.record(t_next, &z_new);
            self.t = t_next;
            self.tkey = key_next;
            self.z = z_new;
            self.check_finite()?;
            if t_next < t_end || self.has_scheduled_at(t_next) {
                self.apply_scheduled(t_next)?;
            }
        }
        Ok(())
    }

    fn check_finite(&self) -> Result<(), SolverError> {
        if let Some(i) = self.z.iter().position(|v| !v.is_finite()) {
            let what = if i < self.cc.n_x {
                self.cc.state_names[i].clone()
            } else {
                "a source value".into()
            };
            return Err(SolverError::NonFinite { time: self.t, what });
        }
        Ok(())
    }

    fn refill(&mut self, i: usize, upto: f64) {
        let shape = &self.cc.signals[i].1;
        let b = &mut self.signals[i];
        while b.filled_to <= upto && b.filled_to.is_finite() {
            let to = b.filled_to + b.chunk;
            b.edges.extend(shape.edges(b.filled_to, to));
            b.filled_to = to;
        }
    }

    /// Next scheduled instant after now (capped at `t_end`) and its key.
    fn next_scheduled(&mut self, t_end: f64) -> (f64, Option<TimeKey>) {
        let mut best = (t_end, None);
        for i in 0..self.signals.len() {
            if self.signals[i].edges.is_empty() {
                let from = self.signals[i].filled_to;
                self.refill(i, from);
            }
            if let Some(e) = self.signals[i].edges.front() {
                if e.time < best.0 || (e.time == best.0 && best.1.is_none()) {
                    let key = e.period.map(|period| TimeKey {
                        cycle: e.cycle,
                        phase: e.phase,
                        period,
                    });
                    best = (e.time, key);
                }
            }
        }
        for s in &self.cc.sources {
            if let Some(w) = &s.waveform {
                if let Some(p) = w.piece_at(self.t) {
                    if p.end.is_finite() && p.end > self.t && p.end < best.0 {
                        best = (p.end, None);
                    }
                }
            }
        }
        best
    }

    fn has_scheduled_at(&self, t: f64) -> bool {
        self.signals
            .iter()
            .any(|b| b.edges.front().is_some_and(|e| e.time <= t))
            || self.cc.sources.iter().any(|s| {
                s.waveform
                    .as_ref()
                    .and_then(|w| w.piece_at(t))
                    .is_some_and(|p| p.start == t)
            })
    }

    /// Sets the input part of z (values and slopes) for time t.
    fn set_inputs(&mut self, t: f64) -> Vec<String> {
        let nx = self.cc.n_x;
        let nu = self.cc.n_u;
        self.z[nx] = 1.0;
        let mut corners = vec![];
        for s in &self.cc.sources {
            if let (Some(w), Some(k)) = (&s.waveform, s.input) {
                let p = w.piece_at(t).expect("piecewise-linear source has a piece");
                let (v, sl) = (p.at(t), p.slope);
                if p.start == t && t > 0.0 {
                    corners.push(s.name.clone());
                }
                self.z[nx + k] = v;
                self.z[nx + nu + k] = sl;
            }
        }
        corners
    }

    fn apply_scheduled(&mut self, t: f64) -> Result<(), SolverError> {
        self.stats.scheduled_events += 1;
        let before = self.state().to_vec();
        let corners = self.set_inputs(t);
        for name in corners {
            self.push_event(Event {
                time: t,
                kind: EventKind::SourceBreakpoint,
                element: name,
                energy: None,
                before: before.clone(),
                after: before.clone(),
            })?;
        }
        let mut changed = false;
        let mut cause = None;
        for i in 0..self.signals.len() {
            while self.signals[i].edges.front().is_some_and(|e| e.time <= t) {
                self.signals[i].edges.pop_front();
                changed = true;
            }
        }
        if changed {
            let mut sw = 0u64;
            for (i, s) in self.cc.switches.iter().enumerate() {
                if self.cc.signals[s.signal].1.is_on(t) {
                    sw |= 1 << i;
                }
            }
            let diff = sw ^ self.key.switches;
            for i in 0..self.cc.switches.len() {
                if diff >> i & 1 == 1 {
                    let on = sw >> i & 1 == 1;
                    let name = self.cc.switches[i].name.clone();
                    cause = Some(format!(
                        "switch {name} {}",
                        if on { "closing" } else { "opening" }
                    ));
                    self.push_event(Event {
                        time: t,
                        kind: if on {
                            EventKind::SwitchOn
                        } else {
                            EventKind::SwitchOff
                        },
                        element: name,
                        energy: None,
                        before: before.clone(),
                        after: before.clone(),
                    })?;
                }
            }
            self.key.switches = sw;
        }
        self.resolve(0, cause, false)
    }

    fn push_event(&mut self, e: Event) -> Result<(), SolverError> {
        if self.log.events.len() + self.stats.state_events >= self.opts.max_events {
            return Err(SolverError::EventLimit {
                time: e.time,
                limit: self.opts.max_events,
            });
        }
        self.recent.push_back((e.time, e.element.clone()));
        while self
            .recent
            .front()
            .is_some_and(|(t, _)| *t < e.time - self.opts.chatter_window)
        {
            self.recent.pop_front();
        }
        if self.recent.len() > self.opts.chatter_events {
            let mut elements: Vec<String> = self.recent.iter().map(|(_, n)| n.clone()).collect();
            elements.sort();
            elements.dedup();
            return Err(SolverError::Chatter {
                time: e.time,
                count: self.recent.len(),
                window: self.opts.chatter_window,
                elements,
            });
        }
        let keep = match self.opts.record {
            Record::All => true,
            Record::Window { from, to } => e.time >= from && e.time <= to,
            Record::Nothing => false,
        };
        if keep {
            self.log.events.push(e);
        }
        Ok(())
    }

    fn mode_id(&mut self, key: ModeKey) -> Result<u32, SolverError> {
        if let Some(&i) = self.mode_index.get(&key) {
            return Ok(i);
        }
        let m = Mode::build(&self.cc, key)?;
        let i = self.modes.len() as u32;
        let m = Arc::new(m);
        self.modes.push(m.clone());
        self.wave.modes.push(m);
        self.discs.push(vec![]);
        self.mode_index.insert(key, i);
        Ok(i)
    }

    /// Exact advance over `h` in the present mode.
    fn step(&mut self, h: f64, cacheable: bool) -> DVector<f64> {
        let mi = self.mode as usize;
        let bits = h.to_bits();
        if let Some((_, phi)) = self.discs[mi].iter().find(|(b, _)| *b == bits) {
            self.stats.cache_hits += 1;
            return phi * &self.z;
        }
        let m = &self.modes[mi];
        if cacheable && self.discs[mi].len() < 16 {
            self.stats.exponentials += 1;
            let phi = propagate::expm(&m.m, h);
            let z = &phi * &self.z;
            self.discs[mi].push((bits, phi));
            return z;
        }
        propagate::advance(&m.m, m.rate, &self.z, h)
    }

    fn record(&mut self, t1: f64, _z1: &DVector<f64>) {
        let t0 = self.t;
        if t1 <= t0 {
            return;
        }
        if let Some(sink) = self.sink.as_mut() {
            let view = SegmentView {
                t0,
                t1,
                mode: &self.modes[self.mode as usize],
                z0: &self.z,
            };
            sink(&view);
        }
        let keep = match self.opts.record {
            Record::All => true,
            Record::Window { from, to } => t1 >= from && t0 <= to,
            Record::Nothing => false,
        };
        if keep {
            self.wave.segments.push(Segment {
                t0,
                t1,
                mode: self.mode,
                z0: self.z.clone(),
            });
        }
    }

    /// Earliest guard crossing within (0, h]: (τ, bit set of diodes whose
    /// guard fired).
    fn locate(&mut self, h: f64) -> Option<(f64, u64)> {
        let mode = self.modes[self.mode as usize].clone();
        if mode.guards.is_empty() {
            return None;
        }
        let n = propagate::substeps(mode.rate, h);
        let d = h / n as f64;
        let mut za = self.z.clone();
        let mut terms = std::mem::take(&mut self.terms);
        let mut found: Option<(f64, u64)> = None;
        let scales = self.scales();
        for i in 0..n {
            propagate::taylor_terms(&mode.m, &za, d, &mut terms);
            for g in &mode.guards {
                let coef: Vec<f64> = terms.iter().map(|w| dot(&g.row, w)).collect();
                let scale: f64 = terms
                    .iter()
                    .map(|w| {
                        g.row
                            .iter()
                            .zip(w.iter())
                            .map(|(a, b)| (a * b).abs())
                            .sum::<f64>()
                    })
                    .sum();
                let tol = ZERO_REL * scale + guard_floor(&g.kind, scales);
                let (gb, db) = propagate::poly(&coef, 1.0);
                let da = coef.get(1).copied().unwrap_or(0.0);
                let root = if gb < -tol {
                    Some(root_in(&coef, 0.0, 1.0, tol))
                } else if da < 0.0 && db > 0.0 {
                    // An interior minimum: find it, then look below zero there.
                    let smin = stationary(&coef);
                    let (gm, _) = propagate::poly(&coef, smin);
                    (gm < -tol).then(|| root_in(&coef, 0.0, smin, tol))
                } else {
                    None
                };
                if let Some(s) = root {
                    let tau = (i as f64 + s) * d;
                    let bit = match g.kind {
                        GuardKind::DiodeCurrent(k) | GuardKind::DiodeVoltage(k) => 1u64 << k,
                        GuardKind::DiodePair(a, b) => (1u64 << a) | (1u64 << b),
                    };
                    found = match found {
                        Some((t, bits)) if (t - tau).abs() <= 1e-13 * h => {
                            Some((t.min(tau), bits | bit))
                        }
                        Some((t, bits)) if t < tau => Some((t, bits)),
                        _ => Some((tau, bit)),
                    };
                }
            }
            if found.is_some() {
                break;
            }
            let mut next = terms[0].clone();
            for w in terms.iter().skip(1) {
                next += w;
            }
            za = next;
        }
        self.terms = terms;
        // A crossing at the very end belongs to the scheduled instant.
        found.map(|(t, b)| (if t >= h * (1.0 - 1e-14) { h } else { t }, b))
    }

    /// Finds the conduction pattern consistent with the present state, with
    /// the diodes in `flips` toggled first; applies any jump and logs.
    fn resolve(
        &mut self,
        flips: u64,
        cause: Option<String>,
        initial: bool,
    ) -> Result<(), SolverError> {
        let nd = self.cc.diodes.len();
        let first = self.key.diodes ^ flips;
        let mut cands: Vec<u64> = (0..1u64 << nd).collect();
        cands.sort_by_key(|&c| ((c ^ first).count_ones(), c));
        let mut interruption: Option<SolverError> = None;
        let mut other: Option<SolverError> = None;
        let passes: &[bool] = if self.opts.on_interruption == OnInterruption::ConserveFlux {
            &[false, true]
        } else {
            &[false]
        };
        for &allow_cut in passes {
            for &c in &cands {
                let key = ModeKey {
                    switches: self.key.switches,
                    diodes: c,
                };
                let mi = self.mode_id(key)?;
                let mode = self.modes[mi as usize].clone();
                if let Some(p) = &mode.problem {
                    if other.is_none() || matches!(p, ModeProblem::Short { .. }) {
                        other = Some(self.problem_error(p, key, &cause));
                    }
                    continue;
                }
                // Constraint residuals, measured against the largest inductor
                // current (cutsets) or capacitor/source voltage (loops) in the
                // circuit: a located zero crossing leaves ~1e-17 of that
                // behind, which the projection removes silently; anything
                // above 1e-11 of it is a real jump.
                let z1 = if mode.constraints.is_empty() {
                    self.z.clone()
                } else {
                    &mode.p * &self.z
                };
                let (i_scale, v_scale) = self.scales();
                let mut cut_violated = vec![];
                let mut loop_violated = false;
                for (r, kind) in mode.constraints.iter().enumerate() {
                    let row = mode.h.row(r);
                    let v: f64 = row.iter().zip(self.z.iter()).map(|(a, b)| a * b).sum();
                    match kind {
                        ConstraintKind::Cutset { windings, .. } if v.abs() > 1e-11 * i_scale => {
                            cut_violated.extend(windings.iter().copied())
                        }
                        ConstraintKind::Loop { .. } if v.abs() > 1e-11 * v_scale => {
                            loop_violated = true
                        }
                        _ => {}
                    }
                }
                if !cut_violated.is_empty() && !allow_cut {
                    if interruption.is_none() {
                        let names: Vec<String> = cut_violated
                            .iter()
                            .map(|&b| self.cc.branches[b].name.clone())
                            .collect();
                        let current = cut_violated
                            .iter()
                            .filter_map(|&b| match self.cc.branches[b].kind {
                                crate::compile::BranchKind::Winding { state } => {
                                    Some(self.z[state].abs())
                                }
                                _ => None,
                            })
                            .fold(0.0, f64::max);
                        let energy = self.cc.stored_energy(self.z.as_slice())
                            - self.cc.stored_energy(z1.as_slice());
                        interruption = Some(SolverError::InductorInterrupted {
                            time: self.t,
                            cause: cause.clone(),
                            inductors: names,
                            current,
                            energy,
                        });
                    }
                    continue;
                }
                if let Some((row, node, srcs)) = mode.free_checks.iter().find(|(row, _, _)| {
                    let v: f64 = row.iter().zip(z1.iter()).map(|(a, b)| a * b).sum();
                    let s: f64 = row.iter().zip(z1.iter()).map(|(a, b)| (a * b).abs()).sum();
                    v.abs() > 1e-9 * s + 1e-300
                }) {
                    let _ = row;
                    if other.is_none() {
                        other = Some(SolverError::CurrentSourceOpen {
                            time: self.t,
                            sources: srcs.clone(),
                            node: self.cc.nodes[*node].clone(),
                        });
                    }
                    continue;
                }
                if !guards_hold(&mode, &z1, self.scales()) {
                    continue;
                }
                // Commit.
                let before = self.state().to_vec();
                let e0 = self.cc.stored_energy(self.z.as_slice());
                let e1 = self.cc.stored_energy(z1.as_slice());
                let old = self.key.diodes;
                self.key = key;
                self.mode = mi;
                self.z = z1;
                let after = self.state().to_vec();
                if !cut_violated.is_empty() || loop_violated {
                    let mut names: Vec<String> = vec![];
                    for kind in &mode.constraints {
                        match kind {
                            ConstraintKind::Cutset { windings, .. } => names
                                .extend(windings.iter().map(|&b| self.cc.branches[b].name.clone())),
                            ConstraintKind::Loop { caps } => {
                                names.extend(caps.iter().map(|&b| self.cc.branches[b].name.clone()))
                            }
                        }
                    }
                    self.push_event(Event {
                        time: self.t,
                        kind: if cut_violated.is_empty() {
                            EventKind::ChargeJump
                        } else {
                            EventKind::FluxJump
                        },
                        element: names.join(","),
                        energy: Some(e0 - e1),
                        before: before.clone(),
                        after: after.clone(),
                    })?;
                }
                if !initial {
                    for k in 0..nd {
                        if (old ^ c) >> k & 1 == 1 {
                            let on = c >> k & 1 == 1;
                            self.push_event(Event {
                                time: self.t,
                                kind: if on {
                                    EventKind::DiodeOn
                                } else {
                                    EventKind::DiodeOff
                                },
                                element: self.cc.diodes[k].name.clone(),
                                energy: None,
                                before: before.clone(),
                                after: after.clone(),
                            })?;
                        }
                    }
                }
                return Ok(());
            }
        }
        Err(interruption
            .or(other)
            .unwrap_or_else(|| SolverError::NoConsistentPattern {
                time: self.t,
                diodes: self.cc.diodes.iter().map(|d| d.name.clone()).collect(),
                reason: "every pattern violates a diode condition".into(),
            }))
    }

    /// Largest inductor current and largest capacitor or source voltage seen
    /// so far in the run (never the present value alone: at a located zero
    /// crossing the only inductor current is itself ~1e-17 A).
    fn scales(&mut self) -> (f64, f64) {
        let (i_now, v_now) = self.scales_now();
        self.seen.0 = self.seen.0.max(i_now);
        self.seen.1 = self.seen.1.max(v_now);
        self.seen
    }

    fn scales_now(&self) -> (f64, f64) {
        let mut i_s: f64 = 0.0;
        for g in &self.cc.groups {
            for &s in &g.states {
                i_s = i_s.max(self.z[s].abs());
            }
        }
        let mut v_s: f64 = 0.0;
        for &(s, _) in &self.cc.caps {
            v_s = v_s.max(self.z[s].abs());
        }
        for src in &self.cc.sources {
            let v: f64 = src.terms.iter().map(|&(k, f)| f * self.z[k]).sum();
            v_s = v_s.max(v.abs());
        }
        (i_s, v_s)
    }

    fn problem_error(&self, p: &ModeProblem, key: ModeKey, cause: &Option<String>) -> SolverError {
        match p {
            ModeProblem::Short { switches, shorted } => SolverError::ShortCircuit {
                time: self.t,
                cause: cause.clone(),
                switches: switches.clone(),
                shorted: shorted.clone(),
            },
            ModeProblem::Unsupported(reason) => SolverError::Unsupported {
                time: self.t,
                pattern: pattern_text(&self.cc, key),
                reason: reason.clone(),
            },
        }
    }
}

fn dot(a: &[f64], b: &DVector<f64>) -> f64 {
    a.iter().zip(b.iter()).map(|(x, y)| x * y).sum()
}

/// True if every guard is ≥ 0 at z and, where it is zero, its first
/// non-zero derivative (up to the third) is positive: the mode can be
/// entered and held for some positive time.
fn guards_hold(mode: &Mode, z: &DVector<f64>, scales: (f64, f64)) -> bool {
    let mut ders = vec![z.clone()];
    for k in 1..4 {
        ders.push(&mode.m * &ders[k - 1]);
    }
    mode.guards.iter().all(|g| {
        let floor = guard_floor(&g.kind, scales);
        for (k, d) in ders.iter().enumerate() {
            let v = dot(&g.row, d);
            let s: f64 = g.row.iter().zip(d.iter()).map(|(a, b)| (a * b).abs()).sum();
            let tol = ZERO_REL * s + floor * mode.rate.powi(k as i32);
            if v > tol {
                return true;
            }
            if v < -tol {
                return false;
            }
        }
        true
    })
}

/// Absolute floor under which a guard counts as zero: 1e-13 of the largest
/// inductor current (current guards) or capacitor/source voltage (voltage
/// guards). Without it a current left at 1e-33 A by a located zero crossing
/// would be judged by its own size and look negative.
fn guard_floor(kind: &GuardKind, (i_scale, v_scale): (f64, f64)) -> f64 {
    let s = match kind {
        GuardKind::DiodeCurrent(_) => i_scale,
        GuardKind::DiodeVoltage(_) | GuardKind::DiodePair(..) => v_scale,
    };
    1e-13 * s + f64::MIN_POSITIVE
}

/// Root of the polynomial in [lo, hi] where p(lo) ≥ −tol > … and p(hi) < 0:
/// safeguarded Newton, returning the first point at or after the crossing.
fn root_in(c: &[f64], lo: f64, hi: f64, _tol: f64) -> f64 {
    let (mut a, mut b) = (lo, hi);
    let (fa, _) = propagate::poly(c, a);
    if fa < 0.0 {
        return a;
    }
    let mut s = 0.5 * (a + b);
    for _ in 0..200 {
        let (v, dv) = propagate::poly(c, s);
        if v < 0.0 {
            b = s;
        } else {
            a = s;
        }
        if b - a <= f64::EPSILON * b.max(1e-300) {
            break;
        }
        let newton = s - v / dv;
        s = if dv != 0.0 && newton > a && newton < b {
            newton
        } else {
            0.5 * (a + b)
        };
        if s == a || s == b {
            s = 0.5 * (a + b);
            if s == a || s == b {
                break;
            }
        }
    }
    b
}

/// Where the polynomial's derivative crosses zero upward inside [0, 1]
/// (the caller has checked p'(0) < 0 < p'(1)).
fn stationary(c: &[f64]) -> f64 {
    let dc: Vec<f64> = c
        .iter()
        .enumerate()
        .skip(1)
        .map(|(k, a)| k as f64 * a)
        .collect();
    let (mut a, mut b) = (0.0, 1.0);
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        let (v, _) = propagate::poly(&dc, m);
        if v < 0.0 {
            a = m;
        } else {
            b = m;
        }
        if b - a <= f64::EPSILON {
            break;
        }
    }
    0.5 * (a + b)
}

/// Runs a transient from the circuit's initial state to `stop_time`.
///
/// # Errors
///
/// As [`Simulator::new`] and [`Simulator::advance_to`].
pub fn simulate(
    circuit: &Circuit,
    stop_time: f64,
    opts: Options,
) -> Result<RunResult, SolverError> {
    let mut sim = Simulator::new(circuit, opts)?;
    sim.advance_to(stop_time)?;
    Ok(sim.finish())
}
