//! Sampled controllers inside the run: sample instants at `k·Ts + offset`
//! (scheduled like gate edges), commands applied after their delay, gate
//! schedules rebuilt from the instant a change takes effect.

use fluxstep_netlist::{Edge, Gate, Stimulus};

use super::instant::{next_on_grid, on_grid, TimeKey};
use super::schedule::{Pending, Schedule, Slot};
use super::{dot_iter, Simulator};
use crate::control::{Apply, Command, Commands, Controller, Sampling};
use crate::error::SolverError;

fn control_err(time: f64, message: String) -> SolverError {
    SolverError::Control { time, message }
}

/// The controllers' part of the schedule: their samples on the grid
/// k·T + offset and the commands pending.
impl Schedule {
    /// The cycle number if controller `i` samples exactly at `t`.
    fn sample_due(&self, i: usize, t: f64) -> Option<i64> {
        let s = &self.controllers[i].sampling;
        on_grid(t, s.period, s.offset)
    }

    /// The next sample or pending command strictly after `t`.
    pub(super) fn next_control(&self, t: f64) -> Option<(f64, Option<TimeKey>)> {
        let mut best: Option<(f64, Option<TimeKey>)> = None;
        for slot in &self.controllers {
            let s = &slot.sampling;
            let (time, k) = next_on_grid(t, s.period, s.offset);
            if best.is_none_or(|(b, _)| time < b) {
                best = Some((
                    time,
                    Some(TimeKey {
                        cycle: k,
                        phase: s.offset,
                        period: s.period,
                    }),
                ));
            }
        }
        for p in &self.pending {
            if p.time > t && best.is_none_or(|(b, _)| p.time < b) {
                best = Some((p.time, p.key));
            }
        }
        best
    }

    /// Whether a controller samples, or a command falls due, at `t`.
    pub(super) fn has_control_at(&self, t: f64) -> bool {
        (0..self.controllers.len()).any(|i| self.sample_due(i, t).is_some())
            || self.pending.iter().any(|p| p.time <= t)
    }
}

impl Simulator {
    /// Attaches a sampled controller. Its first sample is the first instant
    /// `k·period + offset` not before the present time.
    ///
    /// # Errors
    ///
    /// [`SolverError::UnknownOutput`] for an input that is not an output;
    /// [`SolverError::Control`] for a non-positive period or a negative
    /// offset or delay.
    pub fn add_controller(
        &mut self,
        sampling: Sampling,
        controller: Box<dyn Controller>,
    ) -> Result<(), SolverError> {
        if !(sampling.period > 0.0 && sampling.period.is_finite()) {
            return Err(control_err(
                self.t,
                format!("sample period must be positive, got {}", sampling.period),
            ));
        }
        let ok = |x: f64| x >= 0.0 && x.is_finite();
        if !(ok(sampling.offset) && ok(sampling.delay)) {
            return Err(control_err(
                self.t,
                "sample offset and delay must be finite and not negative".into(),
            ));
        }
        let inputs = sampling
            .inputs
            .iter()
            .map(|n| self.cc.output_index(n))
            .collect::<Result<Vec<_>, _>>()?;
        self.sched.gates_only = false;
        self.sched.controllers.push(Slot {
            sampling,
            controller,
            inputs,
        });
        // A sample due right now is taken now.
        let i = self.sched.controllers.len() - 1;
        if self.sched.sample_due(i, self.t).is_some() {
            let t = self.t;
            self.sample(i, t)?;
            self.apply_pending(t)?;
            self.settle_instant(t)?;
        }
        Ok(())
    }

    /// Samples the controllers due at `t` and applies commands that are due.
    pub(super) fn run_controllers(&mut self, t: f64) -> Result<(), SolverError> {
        for i in 0..self.sched.controllers.len() {
            if self.sched.sample_due(i, t).is_some() {
                self.sample(i, t)?;
            }
        }
        self.apply_pending(t)
    }

    fn sample(&mut self, i: usize, t: f64) -> Result<(), SolverError> {
        let k = self.sched.sample_due(i, t).expect("sampled only when due");
        let mode = &self.modes[self.mode as usize];
        let values: Vec<Option<f64>> = self.sched.controllers[i]
            .inputs
            .iter()
            .map(|&o| {
                (!mode.undetermined[o])
                    .then(|| dot_iter(mode.c.row(o).iter().copied(), self.z.as_slice()))
            })
            .collect();
        let mut commands = Commands::default();
        self.sched.controllers[i]
            .controller
            .sample(t, &values, &mut commands);
        if commands.list.is_empty() {
            return Ok(());
        }
        let s = &self.sched.controllers[i].sampling;
        let (time, key) = if s.delay == 0.0 {
            (t, None)
        } else {
            // k·Ts + (offset + delay): the same bits every period.
            let phase = s.offset + s.delay;
            (
                k as f64 * s.period + phase,
                Some(TimeKey {
                    cycle: k,
                    phase,
                    period: s.period,
                }),
            )
        };
        let pos = self.sched.pending.partition_point(|p| p.time <= time);
        self.sched.pending.insert(
            pos,
            Pending {
                time,
                key,
                apply: s.apply,
                commands: commands.list,
            },
        );
        Ok(())
    }

    fn apply_pending(&mut self, t: f64) -> Result<(), SolverError> {
        while self.sched.pending.first().is_some_and(|p| p.time <= t) {
            let p = self.sched.pending.remove(0);
            for c in p.commands {
                self.apply_command(t, p.apply, c)?;
            }
        }
        Ok(())
    }

    fn apply_command(&mut self, t: f64, apply: Apply, c: Command) -> Result<(), SolverError> {
        match c {
            Command::Duty(name, duty) => {
                if !(0.0..=1.0).contains(&duty) {
                    return Err(control_err(
                        t,
                        format!("duty {duty} for gate {name} is outside [0, 1]"),
                    ));
                }
                let gi = self.pwm_gate(&name, t)?;
                let t_from = self.effective_from(gi, t, apply);
                match &mut self.sched.gates[gi] {
                    Gate::Pwm { duty: d, .. } | Gate::ComplementaryPwm { duty: d, .. } => *d = duty,
                    _ => unreachable!("pwm_gate returns pwm gates"),
                }
                self.reschedule(gi, t_from)
            }
            Command::Delay(name, delay) => {
                if !delay.is_finite() {
                    return Err(control_err(
                        t,
                        format!("delay {delay} for gate {name} is not finite"),
                    ));
                }
                let gi = self.pwm_gate(&name, t)?;
                let t_from = self.effective_from(gi, t, apply);
                match &mut self.sched.gates[gi] {
                    Gate::Pwm { delay: d, .. } | Gate::ComplementaryPwm { delay: d, .. } => {
                        *d = delay
                    }
                    _ => unreachable!("pwm_gate returns pwm gates"),
                }
                self.reschedule(gi, t_from)
            }
            Command::Frequency(name, frequency) => {
                if !(frequency > 0.0 && frequency.is_finite()) {
                    return Err(control_err(
                        t,
                        format!("frequency {frequency} for gate {name} must be positive"),
                    ));
                }
                let gi = self.pwm_gate(&name, t)?;
                let t_from = self.effective_from(gi, t, apply);
                // The new period starts at t_from: the cycles' origin moves
                // there and the delay restarts from zero, so the first
                // edge is exactly t_from and later ones t_from + (k·T + phase).
                let new_delay = 0.0;
                self.sched.gate_origin[gi] = t_from;
                match &mut self.sched.gates[gi] {
                    Gate::Pwm {
                        frequency: f,
                        delay: d,
                        ..
                    }
                    | Gate::ComplementaryPwm {
                        frequency: f,
                        delay: d,
                        ..
                    } => {
                        *f = frequency;
                        *d = new_delay;
                    }
                    _ => unreachable!("pwm_gate returns pwm gates"),
                }
                self.reschedule(gi, t_from)
            }
            Command::Reference(name, value) => {
                if !value.is_finite() {
                    return Err(control_err(
                        t,
                        format!("reference {value} for {name} is not finite"),
                    ));
                }
                let mut sources = vec![];
                if let Some(k) = self.cc.compensators.iter().find(|k| k.name == name) {
                    sources.push(k.reference_source);
                }
                for cmp in &self.cc.comparators {
                    if self.cc.signals[cmp.signal].0 == name
                        && matches!(
                            self.sched.gates[self.sched.signal_gate[cmp.signal]],
                            Gate::PeakCurrent { .. } | Gate::ValleyCurrent { .. }
                        )
                    {
                        sources.extend(cmp.turn_off.iter().chain(&cmp.turn_on).map(|c| c.source));
                    }
                }
                if sources.is_empty() {
                    return Err(control_err(
                        t,
                        format!("no compensator or current-control gate is named {name}"),
                    ));
                }
                for si in sources {
                    let w = self.cc.sources[si]
                        .waveform
                        .as_mut()
                        .expect("internal inputs have waveforms");
                    match w {
                        Stimulus::Constant { value: v } => *v = value,
                        Stimulus::PiecewiseLinear { points, .. } => {
                            let shift = value - points[0].value;
                            for p in points.iter_mut() {
                                p.value += shift;
                            }
                        }
                        Stimulus::Sine { .. } => unreachable!("thresholds are never sines"),
                    }
                }
                self.set_inputs(t);
                Ok(())
            }
            Command::Edge(signal, time, on) => {
                let Some(si) = self.cc.signals.iter().position(|(n, _)| *n == signal) else {
                    return Err(control_err(t, format!("no gate signal is named {signal}")));
                };
                if !matches!(
                    self.sched.gates[self.sched.signal_gate[si]],
                    Gate::Transitions { .. }
                ) {
                    return Err(control_err(
                        t,
                        format!("edges can only be scheduled on transitions gates, not {signal}"),
                    ));
                }
                if !(time >= t && time.is_finite()) {
                    return Err(control_err(
                        t,
                        format!("edge of {signal} at {time:e} s lies in the past"),
                    ));
                }
                let b = self.sched.signal_mut(si);
                let pos = b.edges.partition_point(|e| e.time <= time);
                b.edges.insert(
                    pos,
                    Edge {
                        time,
                        on,
                        cycle: 0,
                        phase: time,
                        period: None,
                    },
                );
                Ok(())
            }
        }
    }

    fn pwm_gate(&self, name: &str, t: f64) -> Result<usize, SolverError> {
        self.sched
            .gates
            .iter()
            .position(|g| {
                g.name() == name && matches!(g, Gate::Pwm { .. } | Gate::ComplementaryPwm { .. })
            })
            .ok_or_else(|| {
                control_err(
                    t,
                    format!("no pwm or complementary_pwm gate is named {name}"),
                )
            })
    }

    /// When a change to gate `gi` takes effect: the next start of its
    /// (present) period not before `t`, or `t` itself.
    fn effective_from(&self, gi: usize, t: f64, apply: Apply) -> f64 {
        let (period, delay) = match &self.sched.gates[gi] {
            Gate::Pwm {
                frequency, delay, ..
            }
            | Gate::ComplementaryPwm {
                frequency, delay, ..
            } => (1.0 / frequency, *delay),
            _ => return t,
        };
        if apply == Apply::Immediately {
            return t;
        }
        let d0 = delay.rem_euclid(period);
        let o = self.sched.gate_origin[gi];
        let mut k = ((t - o - d0) / period).ceil();
        while o + (k * period + d0) < t {
            k += 1.0;
        }
        while o + ((k - 1.0) * period + d0) >= t {
            k -= 1.0;
        }
        o + (k * period + d0)
    }

    /// New shapes for gate `gi`'s signals (its definition already changed);
    /// buffered edges from `t_from` on are regenerated. Where the new
    /// schedule's state at `t_from` differs from the old one's just before
    /// (a restarted period whose first edge rounds a hair early, or a pulse
    /// cut short at once), an edge at `t_from` is added.
    fn reschedule(&mut self, gi: usize, t_from: f64) -> Result<(), SolverError> {
        for (name, mut shape) in self.sched.gates[gi].signals() {
            shape.origin = self.sched.gate_origin[gi];
            let si = self
                .cc
                .signals
                .iter()
                .position(|(n, _)| *n == name)
                .expect("signals of a known gate");
            let before = if t_from <= self.t {
                self.sched.signal_on[si]
            } else {
                self.cc.signals[si].1.was_on_before(t_from)
            };
            self.cc.signals[si].1 = shape;
            let b = self.sched.signal_mut(si);
            b.edges.retain(|e| e.time < t_from);
            // Only two periods ahead: a controller that changes the duty
            // every period would otherwise regenerate a long chunk each time.
            let shape = &self.cc.signals[si].1;
            let span = shape.period.map(|p| 2.0 * p).unwrap_or(b.chunk);
            let to = t_from + span;
            b.edges.extend(shape.edges(t_from, to));
            b.filled_to = to;
            let now = self.cc.signals[si].1.is_on(t_from);
            let b = self.sched.signal_mut(si);
            let pos = b.edges.partition_point(|e| e.time < t_from);
            let edge_at = b.edges.get(pos).is_some_and(|e| e.time == t_from);
            if now != before && !edge_at {
                b.edges.insert(
                    pos,
                    Edge {
                        time: t_from,
                        on: now,
                        cycle: 0,
                        phase: t_from,
                        period: None,
                    },
                );
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use std::cell::RefCell;
    use std::rc::Rc;

    use crate::control::{Commands, Sampling};
    use crate::options::Options;
    use crate::run::Simulator;
    use crate::test_util::example;

    /// A sampled controller runs at exactly k·T + offset (to the bit, from
    /// the cycle number), at every sample and no other instant, and reads
    /// the outputs' values at that instant (common practice: a digital
    /// controller's sample clock).
    #[test]
    fn samples_fall_on_their_grid_and_read_the_state_there() {
        let c = example("buck.json");
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        // (sample time, the inductor current read).
        type Readings = Vec<(f64, Option<f64>)>;
        let seen: Rc<RefCell<Readings>> = Rc::default();
        let log = seen.clone();
        let (period, offset) = (3.3e-6, 1.1e-6);
        sim.add_controller(
            Sampling {
                inputs: vec!["L1.current".into()],
                period,
                offset,
                ..Sampling::default()
            },
            Box::new(move |t: f64, inputs: &[Option<f64>], _: &mut Commands| {
                log.borrow_mut().push((t, inputs[0]));
            }),
        )
        .expect("a valid controller");
        let stop = 200e-6;
        sim.advance_to(stop).expect("runs");
        let run = sim.finish();
        let seen = seen.borrow();
        let expected = ((stop - offset) / period).floor() as usize + 1;
        assert_eq!(seen.len(), expected);
        let id = run.waveform.output("L1.current").expect("an output");
        for (k, &(t, v)) in seen.iter().enumerate() {
            assert_eq!(
                t.to_bits(),
                (k as f64 * period + offset).to_bits(),
                "sample {k}"
            );
            let v = v.expect("the inductor current is determined");
            let w = run.waveform.value(id, t).expect("recorded");
            assert!(
                (v - w).abs() <= 1e-12 * w.abs().max(1.0),
                "sample {k}: {v} vs {w}"
            );
        }
    }
}
