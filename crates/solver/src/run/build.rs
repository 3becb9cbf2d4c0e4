//! Building a simulator: compile the circuit, set the schedule, the
//! recorder and the scale watch up, and resolve the conduction pattern at
//! t = 0.

use fluxstep_netlist::Circuit;

use super::*;

impl Simulator {
    /// Compiles the circuit and resolves its conduction pattern at t = 0.
    ///
    /// # Errors
    ///
    /// An invalid circuit, or an initial state no mode can hold (e.g. an
    /// inductor with initial current and no path).
    pub fn new(circuit: &Circuit, opts: Options) -> Result<Simulator, SolverError> {
        let cc = Compiled::compile(circuit)?;
        let ramp_switches = supported_sizes(&cc)?;
        let mut sim = Simulator::assemble(circuit, cc, opts, ramp_switches);
        sim.start_schedule();
        // The chatter window from the gates' periods; without periodic
        // gates it is set from the first mode below (the first resolve
        // logs at most one event per part, far from any chatter count).
        sim.rec.chatter_window = sim.opts.chatter_window;
        let shortest = sim
            .cc
            .signals
            .iter()
            .filter_map(|(_, s)| s.period)
            .filter(|p| p.is_finite() && *p > 0.0)
            .fold(f64::INFINITY, f64::min);
        if automatic(sim.rec.chatter_window) && shortest.is_finite() {
            sim.rec.chatter_window = CHATTER_FRACTION * shortest;
        }
        sim.resolve(0, None, Moment::Start)?;
        if automatic(sim.rec.chatter_window) {
            let rate = sim.modes[sim.mode as usize].rate;
            sim.rec.chatter_window = if rate > 0.0 && rate.is_finite() {
                CHATTER_FRACTION * std::f64::consts::TAU / rate
            } else {
                1e-12
            };
        }
        // Closed-loop gates decide their state at t = 0 from the circuit.
        if let Some(cause) = sim.start_comparators()? {
            sim.resolve(0, Some(cause), Moment::Run)?;
        }
        Ok(sim)
    }

    /// The simulator's containers at t = 0, before the first pattern.
    fn assemble(circuit: &Circuit, cc: Compiled, opts: Options, ramp_switches: u64) -> Simulator {
        let n_switches = cc.switches.len();
        let nz = cc.n_z();
        let mut z = DVector::zeros(nz);
        for (i, v) in cc.x0.iter().enumerate() {
            z[i] = *v;
        }
        let signals = cc
            .signals
            .iter()
            .map(|(_, s)| SignalBuffer {
                edges: EdgeQueue::default(),
                filled_to: 0.0,
                chunk: s.period.map(|p| 64.0 * p).unwrap_or(f64::INFINITY),
            })
            .collect();
        let signal_on: Vec<bool> = cc.signals.iter().map(|(_, s)| s.is_on(0.0)).collect();
        let mut signal_switches = vec![0u64; cc.signals.len()];
        for (i, s) in cc.switches.iter().enumerate() {
            signal_switches[s.signal] |= 1 << i;
        }
        let switches_on = signal_on
            .iter()
            .zip(&signal_switches)
            .filter(|(on, _)| **on)
            .fold(0, |bits, (_, s)| bits | s);
        let n_cmp = cc.comparators.len();
        let signal_gate = cc
            .signals
            .iter()
            .map(|(name, _)| {
                circuit
                    .gates
                    .iter()
                    .position(|g| g.signals().iter().any(|(n, _)| n == name))
                    .expect("every signal comes from a gate")
            })
            .collect();
        let pwl_sources = (0..cc.sources.len())
            .filter(|&i| cc.sources[i].input.is_some())
            .collect();
        let rec = record::Recorder::new(&cc);
        let scales = scales::ScaleWatch::new(&cc);
        let certifier = super::certify::Certifier::new(&cc);
        let mut sim = Simulator {
            cc,
            opts,
            modes: modeset::ModeSet::default(),
            t: 0.0,
            tkey: None,
            z_next: z.clone(),
            z,
            mode: 0,
            key: ModeKey {
                switches: 0,
                diodes: 0,
                ramps: 0,
            },
            sched: schedule::Schedule {
                queues: schedule::Queues::new(signals),
                signal_on,
                signal_switches,
                switches_on,
                cmp_enabled_off: vec![true; n_cmp],
                cmp_ticks: vec![],
                signal_gate,
                gates: circuit.gates.clone(),
                gate_origin: vec![0.0; circuit.gates.len()],
                controllers: vec![],
                pending: vec![],
                pwl_sources,
                const_inputs: None,
                gates_only: false,
            },
            rec,
            buf: advance::Buffers {
                z_try: DVector::zeros(nz),
                advance: propagate::Scratch::default(),
                terms: propagate::TaylorTerms::default(),
                za: DVector::zeros(nz),
                coef: vec![],
                near: vec![],
            },
            stats: Stats::default(),
            certifier,
            scales,
            candidates: resolve::Candidates::default(),
            memo: replay::Memo::default(),
            shortcuts: Shortcuts::ALL,
            plain_instants: 0,
            lane: true,
            lane_steps: 0,
            ramps: transition::Ramps::new(ramp_switches, n_switches),
            refused: None,
            stalled: finish::Stall::none(),
            #[cfg(feature = "stage-timers")]
            times: StageTimes::default(),
        };
        sim.sched.cmp_ticks = (0..n_cmp).map(|ci| sim.make_ticks(ci)).collect();
        sim
    }

    /// The inputs and switch states at t = 0 and the first edges of every
    /// signal (those at t = 0 are already in the initial signal states).
    fn start_schedule(&mut self) {
        self.sched.const_inputs = self.constant_inputs();
        self.sched.gates_only = self.sched.const_inputs.is_some()
            && self.cc.comparators.is_empty()
            && self.ramps.switches == 0;
        self.set_inputs(0.0);
        self.key.switches = self.switch_bits();
        for i in 0..self.sched.signal_count() {
            self.sched.refill(&self.cc.signals[i].1, i, 0.0);
            let b = self.sched.signal_mut(i);
            while b.edges.front().is_some_and(|e| e.time <= 0.0) {
                b.edges.pop_front();
            }
        }
    }
}

/// Whether a chatter window is left to the simulator (not set, or not
/// positive).
fn automatic(w: f64) -> bool {
    w.is_nan() || w <= 0.0
}

/// Refuses circuits beyond the bit sets' sizes (64 switches, 64 diodes,
/// transition models on the first 32 switches); returns the bits of the
/// switches with a transition model.
fn supported_sizes(cc: &Compiled) -> Result<u64, SolverError> {
    if cc.switches.len() > 64 || cc.diodes.len() > 64 {
        return Err(SolverError::Unsupported {
            time: 0.0,
            pattern: String::new(),
            reason: format!(
                "{} switches and {} diodes: at most 64 switches and 64 diodes are supported",
                cc.switches.len(),
                cc.diodes.len()
            ),
        });
    }
    let mut ramp_switches = 0u64;
    for (i, s) in cc.switches.iter().enumerate() {
        if s.transition.is_some() {
            if i >= 32 {
                return Err(SolverError::Unsupported {
                    time: 0.0,
                    pattern: String::new(),
                    reason: format!(
                        "switch {} has a transition model but is switch number {} of the circuit: \
                         only the first 32 switches may have one",
                        s.name,
                        i + 1
                    ),
                });
            }
            ramp_switches |= 1 << i;
        }
    }
    Ok(ramp_switches)
}
