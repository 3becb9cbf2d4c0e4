//! Closed-loop gates: comparator clocks (scheduled ticks at k·T + phase)
//! and the switching of a gate when its comparison is met (a state event
//! located like a diode's).

use super::instant::{coincident_until, next_on_grid, on_grid, TimeKey};
use super::resolve::Moment;
use super::schedule::{Schedule, Tick};
use super::{dot_iter, Simulator};
use crate::compile::CompiledComparator;
use crate::error::SolverError;

/// The comparators' part of the schedule: their ticks on the grid
/// k·T + phase.
impl Schedule {
    /// The next tick of the `comparators` strictly after `t`: its time and key.
    pub(super) fn next_tick(
        &self,
        comparators: &[CompiledComparator],
        t: f64,
    ) -> Option<(f64, TimeKey)> {
        let mut best: Option<(f64, TimeKey)> = None;
        for (cmp, ticks) in comparators.iter().zip(&self.cmp_ticks) {
            let Some(p) = cmp.spec.period else {
                continue;
            };
            for &(phase, _) in ticks {
                let (time, k) = next_on_grid(t, p, phase);
                if best.is_none_or(|(b, _)| time < b) {
                    best = Some((
                        time,
                        TimeKey {
                            cycle: k,
                            phase,
                            period: p,
                        },
                    ));
                }
            }
        }
        best
    }

    /// Ticks due exactly at `t`, as (comparator, what).
    fn ticks_at(&self, comparators: &[CompiledComparator], t: f64) -> Vec<(usize, Tick)> {
        let mut out = vec![];
        for (ci, (cmp, ticks)) in comparators.iter().zip(&self.cmp_ticks).enumerate() {
            let Some(p) = cmp.spec.period else {
                continue;
            };
            for &(phase, what) in ticks {
                if on_grid(t, p, phase).is_some() {
                    out.push((ci, what));
                }
            }
        }
        out
    }

    /// Whether a comparator ticks exactly at `t`.
    pub(super) fn has_tick_at(&self, comparators: &[CompiledComparator], t: f64) -> bool {
        !comparators.is_empty() && !self.ticks_at(comparators, t).is_empty()
    }
}

impl Simulator {
    /// The ticks of comparator `ci` as (phase, what), phases in [0, T).
    /// Computed once per comparator (see `Simulator::new`).
    pub(super) fn make_ticks(&self, ci: usize) -> Vec<(f64, Tick)> {
        let cmp = &self.cc.comparators[ci];
        let Some(t) = cmp.spec.period else {
            return vec![];
        };
        let mut v = vec![(0.0, Tick::Clock)];
        if cmp.spec.min_duty > 0.0 {
            v.push((cmp.spec.min_duty * t, Tick::EnableOff));
        }
        if cmp.spec.max_duty < 1.0 {
            v.push((cmp.spec.max_duty * t, Tick::ForceOff));
        }
        v
    }

    /// Bits of the comparators whose turn-off guard (bit set in the first
    /// mask) or turn-on guard (second mask) is active now.
    pub(super) fn comparator_masks(&self) -> (u64, u64) {
        let (mut off, mut on) = (0u64, 0u64);
        for (ci, cmp) in self.cc.comparators.iter().enumerate().take(64) {
            if self.sched.signal_on[cmp.signal] {
                if cmp.turn_off.is_some() && self.sched.cmp_enabled_off[ci] {
                    off |= 1 << ci;
                }
            } else if cmp.turn_on.is_some() {
                on |= 1 << ci;
            }
        }
        (off, on)
    }

    /// Whether comparator `ci`'s comparison for leaving its present state
    /// is already met (guard ≤ 0 now, in the present mode).
    fn comparison_met(&self, ci: usize, turning_off: bool) -> bool {
        let mode = &self.modes[self.mode as usize];
        let Some(g) = &mode.cmp_guards[ci][if turning_off { 0 } else { 1 }] else {
            return false;
        };
        dot_iter(g.row.iter().copied(), self.z.as_slice()) <= 0.0
    }

    /// Sets a comparator gate's signal and logs the switches it drives;
    /// returns the cause for diagnostics.
    fn set_comparator(
        &mut self,
        ci: usize,
        on: bool,
        t: f64,
    ) -> Result<Option<(usize, bool)>, SolverError> {
        let sig = self.cc.comparators[ci].signal;
        if self.sched.signal_on[sig] == on {
            return Ok(None);
        }
        self.sched.set_signal(sig, on);
        // The switches it drives follow it: their new bits are `on`.
        self.log_switch_changes(t)
    }

    /// Applies the comparator ticks due at `t`; returns whether a gate
    /// changed and the cause.
    pub(super) fn apply_ticks(&mut self, t: f64) -> Result<Option<(usize, bool)>, SolverError> {
        let mut cause = None;
        if self.cc.comparators.is_empty() {
            return Ok(None);
        }
        for (ci, what) in self.sched.ticks_at(&self.cc.comparators, t) {
            let spec = self.cc.comparators[ci].spec.clone();
            let on = self.sched.signal_on[self.cc.comparators[ci].signal];
            let c = match what {
                Tick::Clock => {
                    self.sched.cmp_enabled_off[ci] = spec.min_duty == 0.0;
                    match spec.clock_turns {
                        // A pulse whose turn-off comparison is already met
                        // (and may count) is skipped.
                        Some(true) if !on => {
                            if self.sched.cmp_enabled_off[ci] && self.comparison_met(ci, true) {
                                None
                            } else {
                                self.set_comparator(ci, true, t)?
                            }
                        }
                        Some(false) if on => self.set_comparator(ci, false, t)?,
                        _ => None,
                    }
                }
                Tick::EnableOff => {
                    self.sched.cmp_enabled_off[ci] = true;
                    if on && self.comparison_met(ci, true) {
                        self.set_comparator(ci, false, t)?
                    } else {
                        None
                    }
                }
                Tick::ForceOff if on => self.set_comparator(ci, false, t)?,
                Tick::ForceOff => None,
            };
            cause = cause.or(c);
        }
        Ok(cause)
    }

    /// Comparators without a clock (hysteretic) take their state at t = 0:
    /// on unless their turn-off comparison is already met; clocked ones
    /// start with their clock tick at t = 0.
    pub(super) fn start_comparators(&mut self) -> Result<Option<(usize, bool)>, SolverError> {
        let mut cause = None;
        for ci in 0..self.cc.comparators.len() {
            if self.cc.comparators[ci].spec.period.is_none() {
                self.sched.cmp_enabled_off[ci] = true;
                let met = self.comparison_met(ci, true);
                if let Some(c) = self.set_comparator(ci, !met, 0.0)? {
                    cause = Some(c);
                }
            }
        }
        if let Some(c) = self.apply_ticks(0.0)? {
            cause = Some(c);
        }
        Ok(cause)
    }

    /// Toggles the comparators whose guard fired (state event). Inline:
    /// at every located diode event of a circuit without comparators it is
    /// an empty loop, not worth a call to cold code.
    #[inline]
    pub(super) fn fire_comparators(
        &mut self,
        bits: u64,
        t: f64,
    ) -> Result<Option<(usize, bool)>, SolverError> {
        let mut cause = None;
        for ci in 0..self.cc.comparators.len().min(64) {
            if bits >> ci & 1 == 1 {
                let on = self.sched.signal_on[self.cc.comparators[ci].signal];
                if let Some(c) = self.set_comparator(ci, !on, t)? {
                    cause = Some(c);
                }
            }
        }
        Ok(cause)
    }

    /// Gate edges and comparator ticks due at `t`, then the conduction
    /// pattern that follows.
    pub(super) fn settle_instant(&mut self, t: f64) -> Result<(), SolverError> {
        if self.ramps.next <= coincident_until(t) {
            self.end_ramps(t);
        }
        let mut cause = self.take_gate_edges(t)?;
        if !self.cc.comparators.is_empty() {
            if let Some(c) = self.apply_ticks(t)? {
                cause = Some(c);
            }
        }
        self.resolve(0, cause, Moment::Run)
    }
}

#[cfg(test)]
mod tests {
    use crate::options::Options;
    use crate::run::Simulator;
    use crate::test_util::example;

    use super::Tick;

    /// A peak-current gate's ticks: the clock at the start of each period
    /// and the forced turn-off at the maximum duty, on the grid k·T +
    /// phase to the bit; the turn-off comparison is the active guard while
    /// the switch is on (common practice: fixed-frequency peak-current
    /// control with a duty limit).
    #[test]
    fn comparator_ticks_follow_the_clock() {
        let c = example("peak_current_buck.json");
        let sim = Simulator::new(&c, Options::default()).expect("compiles");
        let period = 1e-5;
        let ticks = &sim.sched.cmp_ticks[0];
        assert_eq!(ticks.len(), 2);
        assert!(matches!(ticks[0], (p, Tick::Clock) if p == 0.0));
        assert!(matches!(ticks[1], (p, Tick::ForceOff) if p == 0.9 * period));
        let mut t = 0.0;
        for k in 0..1000i64 {
            let (force, key) = sim.sched.next_tick(&sim.cc.comparators, t).expect("a tick");
            assert_eq!(
                force.to_bits(),
                (k as f64 * period + 0.9 * period).to_bits()
            );
            assert_eq!((key.cycle, key.phase), (k, 0.9 * period));
            let (clock, key) = sim
                .sched
                .next_tick(&sim.cc.comparators, force)
                .expect("a tick");
            assert_eq!(clock.to_bits(), ((k + 1) as f64 * period).to_bits());
            assert_eq!((key.cycle, key.phase), (k + 1, 0.0));
            assert!(
                sim.sched.has_tick_at(&sim.cc.comparators, force)
                    && sim.sched.has_tick_at(&sim.cc.comparators, clock)
            );
            assert!(!sim
                .sched
                .has_tick_at(&sim.cc.comparators, f64::from_bits(clock.to_bits() + 1)));
            t = clock;
        }
        // On at t = 0 (the clock): only the turn-off guard is active.
        assert!(sim.sched.signal_on[sim.cc.comparators[0].signal]);
        assert_eq!(sim.comparator_masks(), (1, 0));
    }
}
