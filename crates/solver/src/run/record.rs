//! Stage 4: recording — segments into the waveform (or a sink) and events
//! into the log, each only when the recording window keeps it.

use super::{SegmentView, Simulator};
use crate::error::SolverError;
use crate::events::EventKind;
use crate::options::Record;
use crate::propagate;
use crate::waveform::Segment;

/// The element an event concerns, named only when text is needed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum Who {
    Switch(usize),
    Diode(usize),
    Source(usize),
    /// Several elements (a jump): the id of their joined names in the log.
    Named(u32),
}

impl Simulator {
    pub(super) fn name_of(&self, who: &Who) -> String {
        match who {
            Who::Switch(i) => self.cc.switches[*i].name.clone(),
            Who::Diode(i) => self.cc.diodes[*i].name.clone(),
            Who::Source(i) => self.cc.sources[*i].name.clone(),
            Who::Named(id) => self.log.name(*id).to_string(),
        }
    }

    /// The element's id in the log (names were interned in this order when
    /// the simulator was built).
    fn who_id(&self, who: &Who) -> u32 {
        let (ns, nd) = (self.cc.switches.len(), self.cc.diodes.len());
        match who {
            Who::Switch(i) => *i as u32,
            Who::Diode(i) => (ns + i) as u32,
            Who::Source(i) => (ns + nd + i) as u32,
            Who::Named(id) => *id,
        }
    }

    fn keeps(&self, t0: f64, t1: f64) -> bool {
        match self.opts.record {
            Record::All => true,
            Record::Window { from, to } => t1 >= from && t0 <= to,
            Record::Nothing => false,
        }
    }

    /// Records the segment from now to `t1` (start state `z`).
    #[inline(always)]
    pub(super) fn record(&mut self, t1: f64) {
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
        if self.keeps(t0, t1) {
            propagate::extend_small(&mut self.wave.states, self.z.as_slice());
            self.wave.segments.push(Segment {
                t0,
                t1,
                mode: self.mode,
            });
        }
    }

    /// Counts an event (event limit, chatter) and logs it if kept. The state
    /// before is `self.before`; after is the present state when
    /// `changed_state`, else the same as before.
    #[inline]
    pub(super) fn push_event(
        &mut self,
        time: f64,
        kind: EventKind,
        who: Who,
        energy: Option<f64>,
        changed_state: bool,
    ) -> Result<(), SolverError> {
        self.n_events += 1;
        if self.n_events > self.opts.max_events {
            return Err(self.event_limit_error(time));
        }
        // The last `chatter_events + 1` events in a ring: more than
        // `chatter_events` fall within the window exactly when the oldest
        // of them does (times never decrease).
        let window = self.opts.chatter_window;
        let cap = self.opts.chatter_events + 1;
        let oldest = if self.recent.len() < cap {
            self.recent.push((time, who));
            self.recent[0].0
        } else {
            self.recent[self.recent_head] = (time, who);
            self.recent_head += 1;
            if self.recent_head == cap {
                self.recent_head = 0;
            }
            self.recent[self.recent_head].0
        };
        if self.recent.len() == cap && oldest >= time - window {
            return Err(self.chatter_error(time));
        }
        if self.keeps(time, time) {
            let id = self.who_id(&who);
            let after = if changed_state {
                &self.z.as_slice()[..self.cc.n_x]
            } else {
                &self.before[..]
            };
            if !self.log.push(time, kind, id, energy, &self.before, after) {
                // The log numbers its records and snapshots with 32 bits.
                return Err(self.log_full_error(time));
            }
        }
        Ok(())
    }

    /// The diagnostic of too many events within the chatter window (kept
    /// out of line: `push_event` runs at every event).
    #[cold]
    #[inline(never)]
    fn chatter_error(&self, time: f64) -> SolverError {
        let mut elements: Vec<String> = self.recent.iter().map(|(_, w)| self.name_of(w)).collect();
        elements.sort();
        elements.dedup();
        SolverError::Chatter {
            time,
            count: self.recent.len(),
            window: self.opts.chatter_window,
            elements,
        }
    }

    /// The diagnostic of more events than the options allow.
    #[cold]
    #[inline(never)]
    fn event_limit_error(&self, time: f64) -> SolverError {
        SolverError::EventLimit {
            time,
            limit: self.opts.max_events,
        }
    }

    /// The diagnostic of a log that cannot number another record.
    #[cold]
    #[inline(never)]
    fn log_full_error(&self, time: f64) -> SolverError {
        SolverError::EventLimit {
            time,
            limit: self.log.len(),
        }
    }
}
