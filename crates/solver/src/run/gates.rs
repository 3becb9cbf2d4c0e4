//! Gate edges entering the switches: the switch bits the present signal
//! states give, taking the edges due at an instant, and logging the
//! switches they change (which may start a transition ramp). Used by the
//! instant stage (`enter.rs`), the comparators (`control.rs`) and
//! building (`build.rs`).

use super::instant::coincident_until;
use super::record::{After, Who};
use super::Simulator;
use crate::error::SolverError;
use crate::events::EventKind;

impl Simulator {
    /// Switch bits from the present signal states.
    #[inline(always)]
    pub(super) fn switch_bits(&self) -> u64 {
        self.sched.switches_on
    }

    /// Takes the gate edges due at `t`, logs the switches that changed (in
    /// increasing order) and returns the last of them as the cause of
    /// what follows.
    #[inline(always)]
    pub(super) fn take_gate_edges(&mut self, t: f64) -> Result<Option<(usize, bool)>, SolverError> {
        if !self.take_due_edges(t) {
            return Ok(None);
        }
        self.log_switch_changes(t)
    }

    /// Takes the gate edges due at `t` into the signal states, with those
    /// that coincide with it (within [`super::instant::COINCIDENT_ULPS`]); true if there
    /// were any.
    #[inline(always)]
    pub(super) fn take_due_edges(&mut self, t: f64) -> bool {
        let mut changed = false;
        let until = coincident_until(t);
        for i in 0..self.sched.signal_count() {
            while let Some(on) = self.sched.take_due(i, until) {
                self.sched.set_signal(i, on);
                changed = true;
            }
        }
        changed
    }

    /// Logs the switches whose state the present signals change (in
    /// increasing order) and takes their new bits; returns the last of
    /// them as the cause of what follows.
    #[inline(always)]
    pub(super) fn log_switch_changes(
        &mut self,
        t: f64,
    ) -> Result<Option<(usize, bool)>, SolverError> {
        let sw = self.switch_bits();
        let mut diff = sw ^ self.key.switches;
        let mut cause = None;
        while diff != 0 {
            let i = diff.trailing_zeros() as usize;
            diff &= diff - 1;
            let on = sw >> i & 1 == 1;
            cause = Some((i, on));
            let kind = if on {
                EventKind::SwitchOn
            } else {
                EventKind::SwitchOff
            };
            self.push_event(t, kind, Who::Switch(i), None, After::Unchanged)?;
        }
        let changed = sw ^ self.key.switches;
        self.key.switches = sw;
        if changed & self.ramps.switches != 0 {
            self.start_ramps(t, changed)?;
        }
        Ok(cause)
    }
}
