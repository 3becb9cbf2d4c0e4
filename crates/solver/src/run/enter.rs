//! Stage 5b: entering a scheduled instant — source corners, controller
//! updates, ramp ends, gate edges and comparator ticks, then the
//! conduction pattern that follows (`resolve`); or, where only gate edges
//! and ramp phases can happen, the plain path (`plain_instant`: the
//! remembered transition first, the instant's events logged together).

use super::instant::coincident_until;
use super::record::{After, Who};
use super::resolve::Moment;
use super::Simulator;
use crate::error::SolverError;
use crate::events::{EventCause, EventKind};

impl Simulator {
    /// Applies everything scheduled at `t`: source corners, gate edges, then
    /// the conduction pattern that follows.
    pub(super) fn apply_scheduled(&mut self, t: f64) -> Result<(), SolverError> {
        self.begin_instant();
        if self.shortcuts.plain_instants && self.plain_instants_allowed() {
            return self.plain_instant(t);
        }
        let corners = self.set_inputs(t);
        // Set bits in increasing order (none in the usual case).
        let mut rest = corners;
        while rest != 0 {
            let si = rest.trailing_zeros() as usize;
            rest &= rest - 1;
            if si < self.cc.sources.len() && !self.cc.sources[si].internal {
                self.push_event(
                    t,
                    EventKind::SourceBreakpoint,
                    Who::Source(si),
                    None,
                    After::Unchanged,
                )?;
            }
        }
        if !self.sched.controllers.is_empty() || !self.sched.pending.is_empty() {
            self.run_controllers(t)?;
        }
        self.settle_instant(t)
    }

    /// The start of every scheduled instant: counted, its kind set, and
    /// the state before it kept for the events it logs.
    #[inline(always)]
    pub(super) fn begin_instant(&mut self) {
        self.stats.scheduled_events += 1;
        self.rec.cause = EventCause::Scheduled;
        self.keep_before();
    }

    /// Keeps the present state (x, without the inputs) as the state
    /// before the events about to be logged.
    #[inline(always)]
    pub(super) fn keep_before(&mut self) {
        let n_x = self.cc.n_x;
        self.rec.before.clear();
        crate::propagate::extend_small(&mut self.rec.before, &self.z.as_slice()[..n_x]);
    }

    /// Whether instants can have nothing but gate edges and transition
    /// phases: constant inputs (no source corner), no controller, no
    /// comparator.
    #[inline(always)]
    fn plain_instants_allowed(&self) -> bool {
        self.sched.const_inputs.is_some()
            && self.sched.controllers.is_empty()
            && self.sched.pending.is_empty()
            && self.cc.comparators.is_empty()
    }

    /// [`Simulator::apply_scheduled`] at an instant with nothing but gate
    /// edges and transition phases (constant inputs, so no source corner;
    /// no controller, no comparator): the same steps in the same order,
    /// with the remembered transition tried first and the full `resolve`
    /// only if it does not apply (its own replay attempt then fails the
    /// same way, changing nothing). The instant's events are logged
    /// together (`push_instant`: the same records as one by one). This is
    /// the instant of every fixed-frequency converter in open loop; a
    /// contract test checks it gives the bits of the general path.
    #[inline(always)]
    pub(super) fn plain_instant(&mut self, t: f64) -> Result<(), SolverError> {
        self.plain_instants += 1;
        self.set_inputs(t);
        if self.ramps.next <= coincident_until(t) {
            self.end_ramps(t);
        }
        let old = self.key.switches;
        if self.take_due_edges(t) {
            self.key.switches = self.switch_bits();
        }
        let switched = old ^ self.key.switches;
        if switched & self.ramps.switches != 0 {
            if let Err(e) = self.start_ramps(t, switched) {
                // The general path logs the switches before their ramps.
                self.push_instant(t, switched, 0)?;
                return Err(e);
            }
        }
        let scales = self.update_scales();
        if self.shortcuts.replay {
            if let Some((to, projected)) = self.remembered_target(0, scales) {
                let old = self.enter_remembered(to, projected);
                return self.push_instant(t, switched, old ^ self.key.diodes);
            }
        }
        self.push_instant(t, switched, 0)?;
        // The cause as `log_switch_changes` gives it: the last switch.
        let cause = (switched != 0).then(|| {
            let i = 63 - switched.leading_zeros() as usize;
            (i, self.key.switches >> i & 1 == 1)
        });
        self.resolve(0, cause, Moment::Run)
    }
}
