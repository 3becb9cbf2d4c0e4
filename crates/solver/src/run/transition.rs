//! Finite switching transitions: the clamped inductive switching model
//! (N. Mohan, T. Undeland & W. Robbins, *Power Electronics: Converters,
//! Applications and Design*, the chapter on switching losses).
//!
//! A switch with a transition model goes through two phases at each hard
//! edge. Turn-off: its voltage ramps from its on-state value at the set
//! rate while it keeps whatever current the circuit drives through it (it
//! is a voltage source of the ramp), until a diode turns on — the clamp;
//! then its current ramps to zero at the set rate (a current source of the
//! ramp) and it opens at the computed instant. Turn-on the reverse: the
//! current ramps from zero while the switch blocks, until a diode stops
//! conducting; then the voltage ramps to zero and it closes. A ramp's value
//! and slope are entries of the extended state (inputs), so each phase is
//! exact like any other interval; the clamp is a located diode event and
//! the end of a phase a scheduled instant. A stray inductance in series
//! with the switch follows the current ramp, with its L·di/dt.
//!
//! A turn-off that starts with no current a → b, or with a body diode
//! ready to take a negative current, and a turn-on that starts at no
//! positive voltage, are instantaneous: the switch changes at zero voltage
//! (a synchronous rectifier), as without the model. A hard turn-on while
//! no diode conducts has no current to take over: it starts with the
//! voltage fall.

use super::instant::coincident_until;
use super::Simulator;
use crate::crossing::EDGE_REL;
use crate::error::SolverError;
use crate::mode::ramp_bit;
use crate::propagate::dot_slices;

/// The switches with a transition model and where each is in its
/// transition.
pub(super) struct Ramps {
    /// Bit i set: switch i has a transition model.
    pub(super) switches: u64,
    /// Per switch: where it is in its transition.
    pub(super) phases: Vec<Phase>,
    /// The earliest end of a running ramp phase (∞ if none).
    pub(super) next: f64,
}

impl Ramps {
    /// The switches of bits `switches` (of `n` switches) have a
    /// transition model; none is in a transition.
    pub(super) fn new(switches: u64, n: usize) -> Ramps {
        Ramps {
            switches,
            phases: vec![Phase::Idle; n],
            next: f64::INFINITY,
        }
    }
}

/// Where a switch is in its transition.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum Phase {
    /// Not in a transition.
    Idle,
    /// Turn-off, voltage ramp (until a diode turns on).
    OffVoltage,
    /// Turn-off, current ramp to zero (ends at `end`).
    OffCurrent { end: f64 },
    /// Turn-on, current ramp (until a diode stops conducting).
    OnCurrent,
    /// Turn-on, voltage ramp to zero (ends at `end`).
    OnVoltage { end: f64 },
}

impl Simulator {
    /// The present value of output `k` (0 where it is undetermined): the
    /// same products summed in the same order as [`Simulator::value`]
    /// (`dot_slices` starts from the same zero as `Iterator::sum`), so the same
    /// bits, from the contiguous row of Cᵀ instead of a strided row of C.
    #[inline]
    fn output_now(&self, k: usize) -> f64 {
        let mode = &self.modes[self.mode as usize];
        if mode.undetermined.get(k) != Some(&false) {
            return 0.0;
        }
        let z = self.z.as_slice();
        let n = z.len();
        dot_slices(&mode.ct.as_slice()[k * n..(k + 1) * n], z)
    }

    /// Starts the transitions of the switches in `changed` (their new bits
    /// already in `key.switches`) at instant `t`: hard edges get a ramp,
    /// zero-voltage edges none.
    ///
    /// # Errors
    ///
    /// [`SolverError::TransitionIncomplete`] when a switch's gate changes
    /// while its previous transition is still running.
    #[cold]
    pub(super) fn start_ramps(&mut self, t: f64, changed: u64) -> Result<(), SolverError> {
        let mut rest = changed & self.ramps.switches;
        let scales = self.update_scales();
        while rest != 0 {
            let i = rest.trailing_zeros() as usize;
            rest &= rest - 1;
            let on = self.key.switches >> i & 1 == 1;
            let info = self.cc.switches[i]
                .transition
                .clone()
                .expect("ramp_switches marks switches with a model");
            if self.ramps.phases[i] != Phase::Idle {
                let (edge, reason) = match self.ramps.phases[i] {
                    Phase::OffVoltage => (
                        "turn-off",
                        "its voltage was still rising (no diode turned on to clamp it) when its gate turned on again",
                    ),
                    Phase::OnCurrent => (
                        "turn-on",
                        "its current was still rising (no diode stopped conducting) when its gate turned off again",
                    ),
                    _ => (
                        if on { "turn-off" } else { "turn-on" },
                        "its gate changed again before the transition ended",
                    ),
                };
                return Err(SolverError::TransitionIncomplete {
                    time: t,
                    switch: self.cc.switches[i].name.clone(),
                    edge: edge.into(),
                    reason: reason.into(),
                });
            }
            // Each edge reads only what it needs (the value does not
            // depend on when it is read: z changes only below).
            if on {
                let voltage = self.output_now(info.voltage_out);
                // Hard turn-on: positive voltage to be taken away. With a
                // diode conducting, the switch first takes over its
                // current; with none (discontinuous conduction, start-up)
                // there is no current to commutate and the voltage falls
                // at once.
                if voltage > EDGE_REL * scales.voltage {
                    if self.key.diodes != 0 {
                        let z = self.z.as_mut_slice();
                        z[info.value] = 0.0;
                        z[info.slope] = info.on.1;
                        self.key.ramps |= ramp_bit(i, false);
                        self.ramps.phases[i] = Phase::OnCurrent;
                    } else {
                        self.second_phase(i, false, voltage, t);
                        self.ramps.next = self.next_ramp_end();
                    }
                }
            } else {
                let current = self.output_now(info.current_out);
                let into_body = current < 0.0 && info.body_diode.is_some();
                if current.abs() > EDGE_REL * scales.current && !into_body {
                    let voltage = self.output_now(info.voltage_out);
                    let z = self.z.as_mut_slice();
                    z[info.value] = voltage;
                    z[info.slope] = info.off.0 * current.signum();
                    self.key.ramps |= ramp_bit(i, true);
                    self.ramps.phases[i] = Phase::OffVoltage;
                }
            }
        }
        Ok(())
    }

    /// At a located instant where diodes changed (`fired`): the first
    /// phase of every running transition ends (the clamp) and its second
    /// phase starts from the present current or voltage.
    #[cold]
    pub(super) fn clamp_ramps(&mut self, t: f64) {
        for i in 0..self.ramps.phases.len() {
            let phase = self.ramps.phases[i];
            if !matches!(phase, Phase::OffVoltage | Phase::OnCurrent) {
                continue;
            }
            let info = self.cc.switches[i]
                .transition
                .clone()
                .expect("a switch in a phase has a model");
            let off = phase == Phase::OffVoltage;
            let now = if off {
                self.output_now(info.current_out)
            } else {
                self.output_now(info.voltage_out)
            };
            self.second_phase(i, off, now, t);
        }
        self.ramps.next = self.next_ramp_end();
    }

    /// Starts the second phase of switch `i` at `t` from the present value
    /// `now`: the current fall of a turn-off (`off`) or the voltage fall
    /// of a turn-on, to zero at the set rate.
    fn second_phase(&mut self, i: usize, off: bool, now: f64, t: f64) {
        let info = self.cc.switches[i]
            .transition
            .as_ref()
            .expect("a switch in a phase has a model");
        let rate = if off { info.off.1 } else { info.on.0 };
        let (value, slope) = (info.value, info.slope);
        let z = self.z.as_mut_slice();
        z[value] = now;
        z[slope] = -rate * now.signum();
        // The end as t + |value|/rate; at least the next representable
        // instant so that the phase has an interval of its own.
        let end = (t + now.abs() / rate).max(f64::from_bits(t.to_bits() + 1));
        self.key.ramps &= !(ramp_bit(i, true) | ramp_bit(i, false));
        self.key.ramps |= ramp_bit(i, !off);
        self.ramps.phases[i] = if off {
            Phase::OffCurrent { end }
        } else {
            Phase::OnVoltage { end }
        };
    }

    /// Ends the second phases due at `t`: the switch takes its gate's
    /// state (open after a turn-off, closed after a turn-on).
    #[cold]
    pub(super) fn end_ramps(&mut self, t: f64) {
        let until = coincident_until(t);
        for i in 0..self.ramps.phases.len() {
            let end = match self.ramps.phases[i] {
                Phase::OffCurrent { end } | Phase::OnVoltage { end } => end,
                _ => continue,
            };
            if end > until {
                continue;
            }
            let info = self.cc.switches[i]
                .transition
                .as_ref()
                .expect("a switch in a phase has a model");
            let (value, slope) = (info.value, info.slope);
            let z = self.z.as_mut_slice();
            z[value] = 0.0;
            z[slope] = 0.0;
            self.key.ramps &= !(ramp_bit(i, true) | ramp_bit(i, false));
            self.ramps.phases[i] = Phase::Idle;
        }
        self.ramps.next = self.next_ramp_end();
    }

    /// The earliest end of a running second phase (∞ if none).
    fn next_ramp_end(&self) -> f64 {
        self.ramps
            .phases
            .iter()
            .filter_map(|p| match p {
                Phase::OffCurrent { end } | Phase::OnVoltage { end } => Some(*end),
                _ => None,
            })
            .fold(f64::INFINITY, f64::min)
    }

    /// True while any switch is in the first phase of a transition (a
    /// diode event then clamps it).
    #[inline(always)]
    pub(super) fn ramp_waits_for_clamp(&self) -> bool {
        self.key.ramps != 0
            && self
                .ramps
                .phases
                .iter()
                .any(|p| matches!(p, Phase::OffVoltage | Phase::OnCurrent))
    }
}

#[cfg(test)]
mod tests {
    use super::super::Simulator;
    use crate::options::Options;
    use crate::waveform::OutputId;

    /// `output_now` reads Cᵀ's contiguous row and must give the bits of
    /// `Simulator::value` (the same products summed in the same order),
    /// for every output, in every pattern a synchronous buck with
    /// transition models on both switches goes through (demo values).
    #[test]
    fn output_now_gives_the_bits_of_value() {
        let c = crate::test_util::sync_buck(Some((2.0, 12.0)), true);
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        let mut patterns = std::collections::HashSet::new();
        // Instants 3.1 ns apart over three periods (5 µs each): inside
        // every ramp phase (6 to 12 ns) too.
        for k in 1..5000 {
            sim.advance_to(k as f64 * 3.1e-9).expect("runs");
            patterns.insert(sim.key);
            for out in 0..sim.cc.outputs.len() {
                let want = sim.value(OutputId(out)).unwrap_or(0.0);
                let got = sim.output_now(out);
                assert_eq!(got.to_bits(), want.to_bits(), "output {out} at step {k}");
            }
        }
        assert!(
            patterns.len() >= 6,
            "only {} patterns visited",
            patterns.len()
        );
    }
}
