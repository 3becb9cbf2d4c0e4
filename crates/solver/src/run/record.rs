//! Stage 4: recording — segments into the waveform (or a sink) and events
//! into the log, each only when the recording window keeps it.

use super::{SegmentSink, SegmentView, Simulator};
use crate::error::SolverError;
use crate::events::{EventCause, EventKind, EventLog, InstantEvents, JumpInfo};
use crate::options::Record;
use crate::propagate;
use crate::waveform::{Segment, Waveform};

/// What the record stage owns: the waveform's segments (or the sink that
/// takes them instead), the event log, the chatter window over the latest
/// events, the event count, the kind of the present instant and the state
/// before it.
pub(super) struct Recorder {
    pub(super) wave: Waveform,
    pub(super) log: EventLog,
    pub(super) sink: Option<SegmentSink>,
    /// The latest events, a ring of `chatter_events + 1` (oldest at
    /// `recent_head` once full).
    pub(super) recent: Vec<(f64, u32)>,
    pub(super) recent_head: usize,
    /// The chatter window in seconds, resolved from
    /// [`crate::Options::chatter_window`] and the circuit's time scale.
    pub(super) chatter_window: f64,
    /// Every event counted, kept or not (for the event limit).
    pub(super) n_events: usize,
    /// The kind of the present instant, logged with its events.
    pub(super) cause: EventCause,
    /// The circuit state x before the present instant (each event logs it).
    pub(super) before: Vec<f64>,
}

impl Recorder {
    /// An empty record of the compiled circuit: its output, switch and
    /// state names, and its element ids in the log — switches, then
    /// diodes, then sources (see `Simulator::who_id`).
    pub(super) fn new(cc: &crate::compile::Compiled) -> Recorder {
        let wave = Waveform {
            segments: vec![],
            states: vec![],
            n_z: cc.n_z(),
            modes: vec![],
            output_names: cc.outputs.iter().map(|(n, _)| n.clone()).collect(),
            n_x: cc.n_x,
            switch_names: cc.switches.iter().map(|s| s.name.clone()).collect(),
        };
        let mut log = EventLog::new(cc.state_names.clone());
        for name in cc
            .switches
            .iter()
            .map(|s| &s.name)
            .chain(cc.diodes.iter().map(|d| &d.name))
            .chain(cc.sources.iter().map(|s| &s.name))
        {
            log.names_push(name);
        }
        Recorder {
            wave,
            log,
            sink: None,
            recent: vec![],
            recent_head: 0,
            chatter_window: 0.0,
            n_events: 0,
            cause: EventCause::Start,
            before: vec![],
        }
    }
}

/// The element an event concerns, named only when text is needed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum Who {
    Switch(usize),
    Diode(usize),
    Source(usize),
    /// Several elements (a jump): the id of their joined names in the log.
    Named(u32),
}

/// The state an event leaves, for its record ([`Simulator::push_event`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum After {
    /// The present state (the event is part of an instant's jump).
    Present,
    /// The state as it was before the instant (a gate edge or source
    /// corner that moves no state by itself).
    Unchanged,
}

impl Simulator {
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

    /// Whether an event at `time` is kept: inside the recorded window,
    /// ends included.
    fn keeps(&self, time: f64) -> bool {
        match self.opts.record {
            Record::All => true,
            Record::Window { from, to } => time >= from && time <= to,
            Record::Nothing => false,
        }
    }

    /// Records the segment from now to `t1` (start state `z`), which ends
    /// at a scheduled instant: all of it, or under [`Record::Window`]
    /// exactly its part inside `[from, to]`. `len` is the length the
    /// state was advanced by (the schedule's own length between periodic
    /// edges, which can differ from `t1 − t` in the last bits).
    #[inline(always)]
    pub(super) fn record(&mut self, t1: f64, len: f64) {
        self.record_ending(t1, len, crate::dynamics::SCHEDULED_END);
    }

    /// Records the segment from now to `t1`, which ends at a located state
    /// event: the guards of the diodes `fired` and comparators `cmp_fired`
    /// crossed zero there (kept for the saltation matrices of
    /// [`crate::dynamics`]).
    pub(super) fn record_located(&mut self, t1: f64, len: f64, fired: u64, cmp_fired: u64) {
        self.record_ending(t1, len, crate::dynamics::crossing_code(fired, cmp_fired));
    }

    #[inline(always)]
    fn record_ending(&mut self, t1: f64, len: f64, end: u32) {
        let t0 = self.t;
        if t1 <= t0 {
            return;
        }
        if let Some(sink) = self.rec.sink.as_mut() {
            let view = SegmentView {
                t0,
                t1,
                mode: &self.modes[self.mode as usize],
                z0: &self.z,
            };
            sink(&view);
        }
        match self.opts.record {
            Record::All => self.push_segment(t0, t1, len, end),
            Record::Window { from, to } => {
                if t0 >= from && t1 <= to {
                    self.push_segment(t0, t1, len, end);
                } else if t1 > from && t0 < to {
                    self.push_clipped(t0, t1, from, to, end);
                }
            }
            Record::Nothing => {}
        }
    }

    /// Appends the segment [t0, t1] that starts at the present state.
    #[inline(always)]
    fn push_segment(&mut self, t0: f64, t1: f64, len: f64, end: u32) {
        propagate::extend_small(&mut self.rec.wave.states, self.z.as_slice());
        self.rec.wave.segments.push(Segment {
            t0,
            t1,
            len,
            mode: self.mode,
            end,
        });
    }

    /// Appends the part of the segment [t0, t1] inside the window
    /// [from, to], which it crosses at one end or both: the recorded run
    /// covers exactly the window. A segment that starts before `from`
    /// starts its record at `from` with the state there, by the same
    /// exact propagation [`crate::Waveform`] uses inside a segment (so the
    /// clipped record gives the same bits at every instant it keeps).
    /// Happens at most twice per window, so it may allocate.
    #[cold]
    #[inline(never)]
    fn push_clipped(&mut self, t0: f64, t1: f64, from: f64, to: f64, end: u32) {
        let (a, b) = (t0.max(from), t1.min(to));
        if a > t0 {
            let m = &self.modes[self.mode as usize];
            let z = propagate::advance(&m.m, &m.weight, m.rate, &self.z, a - t0);
            propagate::extend_small(&mut self.rec.wave.states, z.as_slice());
        } else {
            propagate::extend_small(&mut self.rec.wave.states, self.z.as_slice());
        }
        // Cut short by the window's end, the record ends at no event.
        let end = if b < t1 {
            crate::dynamics::SCHEDULED_END
        } else {
            end
        };
        // A clipped piece has no scheduled length of its own.
        self.rec.wave.segments.push(Segment {
            t0: a,
            t1: b,
            len: b - a,
            mode: self.mode,
            end,
        });
    }

    /// Counts an event (event limit, chatter) and logs it if kept. The state
    /// before is `self.rec.before`; after is the present state or the same
    /// as before (`after`).
    #[inline]
    pub(super) fn push_event(
        &mut self,
        time: f64,
        kind: EventKind,
        who: Who,
        jump: Option<JumpInfo>,
        after: After,
    ) -> Result<(), SolverError> {
        self.rec.n_events += 1;
        if self.rec.n_events > self.opts.max_events {
            return Err(self.event_limit_error(time));
        }
        self.check_budget(time)?;
        // The last `chatter_events + 1` events in a ring: more than
        // `chatter_events` fall within the window exactly when the oldest
        // of them does (times never decrease).
        let window = self.rec.chatter_window;
        let cap = self.opts.chatter_events + 1;
        let id = self.who_id(&who);
        let oldest = if self.rec.recent.len() < cap {
            self.rec.recent.push((time, id));
            self.rec.recent[0].0
        } else {
            self.rec.recent[self.rec.recent_head] = (time, id);
            self.rec.recent_head += 1;
            if self.rec.recent_head == cap {
                self.rec.recent_head = 0;
            }
            self.rec.recent[self.rec.recent_head].0
        };
        if self.rec.recent.len() == cap && oldest >= time - window {
            return Err(self.chatter_error(time));
        }
        if self.keeps(time) {
            let after = match after {
                After::Present => &self.z.as_slice()[..self.cc.n_x],
                After::Unchanged => &self.rec.before[..],
            };
            if !self.rec.log.push(
                time,
                kind,
                self.rec.cause,
                id,
                jump,
                &self.rec.before,
                after,
            ) {
                // The log numbers its records and snapshots with 32 bits.
                return Err(self.log_full_error(time));
            }
        }
        Ok(())
    }

    /// Counts and logs the events of one instant at once: a switch event
    /// for each bit of `switched` (the state as it was, `before`), then a
    /// diode event for each bit of `diodes` (the state after: the present
    /// one), each in increasing order, of the kind the present pattern
    /// gives. The same records as [`Simulator::push_event`] one by one in
    /// that order, which it falls back to where a limit or the chatter
    /// window could be reached within the instant. The states are shared:
    /// one snapshot before and one after for the whole instant, where one
    /// by one a second diode event took two more.
    pub(super) fn push_instant(
        &mut self,
        time: f64,
        switched: u64,
        diodes: u64,
    ) -> Result<(), SolverError> {
        // One switch and one diode at most is the usual instant (a
        // population count is a dozen instructions without a native one).
        let k = if switched & switched.wrapping_sub(1) == 0 && diodes & diodes.wrapping_sub(1) == 0
        {
            (switched != 0) as usize + (diodes != 0) as usize
        } else {
            (switched.count_ones() + diodes.count_ones()) as usize
        };
        if k == 0 {
            return Ok(());
        }
        self.check_budget(time)?;
        let cap = self.opts.chatter_events + 1;
        let len = self.rec.recent.len();
        // The chatter check of the last event decides for all (times never
        // decrease), and the oldest of the ring after k more is known.
        let quiet = if len == cap {
            k < cap && {
                let mut oldest = self.rec.recent_head + k;
                if oldest >= cap {
                    oldest -= cap;
                }
                self.rec.recent[oldest].0 < time - self.rec.chatter_window
            }
        } else {
            len + k < cap
        };
        if !quiet || self.rec.n_events + k > self.opts.max_events {
            return self.push_instant_one_by_one(time, switched, diodes);
        }
        let base = self.cc.switches.len() as u32;
        if self.keeps(time) {
            let after = &self.z.as_slice()[..self.cc.n_x];
            let group = InstantEvents {
                time,
                count: k as u32,
                cause: self.rec.cause,
                switches: (switched, self.key.switches),
                diodes: (diodes, self.key.diodes),
                base,
            };
            // Refused (nothing added): one by one gives the same refusal.
            if !self.rec.log.push_instant(group, &self.rec.before, after) {
                return self.push_instant_one_by_one(time, switched, diodes);
            }
        }
        self.rec.n_events += k;
        for (mut mask, offset) in [(switched, 0), (diodes, base)] {
            while mask != 0 {
                let id = offset + mask.trailing_zeros();
                mask &= mask - 1;
                self.note_recent(time, id, cap);
            }
        }
        Ok(())
    }

    /// Puts event `id` at `time` into the ring of the last `cap` events.
    #[inline(always)]
    fn note_recent(&mut self, time: f64, id: u32, cap: usize) {
        if self.rec.recent.len() < cap {
            self.rec.recent.push((time, id));
        } else {
            self.rec.recent[self.rec.recent_head] = (time, id);
            self.rec.recent_head += 1;
            if self.rec.recent_head == cap {
                self.rec.recent_head = 0;
            }
        }
    }

    /// [`Simulator::push_instant`] by [`Simulator::push_event`], one event
    /// at a time.
    #[cold]
    #[inline(never)]
    fn push_instant_one_by_one(
        &mut self,
        time: f64,
        switched: u64,
        diodes: u64,
    ) -> Result<(), SolverError> {
        for (changed, on, diode) in [
            (switched, self.key.switches, false),
            (diodes, self.key.diodes, true),
        ] {
            let mut bits = changed;
            while bits != 0 {
                let i = bits.trailing_zeros() as usize;
                bits &= bits - 1;
                let up = on >> i & 1 == 1;
                let (kind, who) = match (diode, up) {
                    (false, true) => (EventKind::SwitchOn, Who::Switch(i)),
                    (false, false) => (EventKind::SwitchOff, Who::Switch(i)),
                    (true, true) => (EventKind::DiodeOn, Who::Diode(i)),
                    (true, false) => (EventKind::DiodeOff, Who::Diode(i)),
                };
                // A diode's event follows the instant's jump; a switch's
                // is logged with the state as it was.
                let after = if diode {
                    After::Present
                } else {
                    After::Unchanged
                };
                self.push_event(time, kind, who, None, after)?;
            }
        }
        Ok(())
    }

    /// Stops the run with [`SolverError::MemoryBudget`] once the recorded
    /// waveform and event log occupy more than
    /// [`crate::Options::memory_budget`]. Called at every event and every
    /// scheduled instant, so the record overshoots the budget by at most
    /// one segment and one instant's events.
    #[inline]
    pub(super) fn check_budget(&self, time: f64) -> Result<(), SolverError> {
        if self.rec.wave.memory_bytes() + self.rec.log.memory_bytes() > self.opts.memory_budget {
            return Err(self.budget_error(time));
        }
        Ok(())
    }

    /// The diagnostic of a record past the memory budget.
    #[cold]
    #[inline(never)]
    fn budget_error(&self, time: f64) -> SolverError {
        SolverError::MemoryBudget {
            time,
            budget: self.opts.memory_budget,
        }
    }

    /// The diagnostic of too many events within the chatter window (kept
    /// out of line: `push_event` runs at every event).
    #[cold]
    #[inline(never)]
    fn chatter_error(&self, time: f64) -> SolverError {
        let mut elements: Vec<String> = self
            .rec
            .recent
            .iter()
            .map(|&(_, id)| self.rec.log.name(id).to_string())
            .collect();
        elements.sort();
        elements.dedup();
        SolverError::Chatter {
            time,
            count: self.rec.recent.len(),
            window: self.rec.chatter_window,
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
            limit: self.rec.log.len(),
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::options::{Options, Record};
    use crate::run::Simulator;
    use crate::test_util::example;

    /// A window records exactly [from, to]: the first segment starts at
    /// `from` and the last ends at `to`, to the bit, the segments join up,
    /// and the state at `from` (cut inside an interval) is the full
    /// record's state there (common practice: a measurement covers
    /// exactly the window asked for).
    #[test]
    fn a_window_records_exactly_its_span() {
        let c = example("buck_dcm.json");
        let (from, to) = (2.345_678e-4, 4.1e-4);
        let run = |record: Record| {
            let mut sim = Simulator::new(
                &c,
                Options {
                    record,
                    ..Options::default()
                },
            )
            .expect("compiles");
            sim.advance_to(5e-4).expect("runs");
            sim.finish()
        };
        let (window, all) = (run(Record::Window { from, to }), run(Record::All));
        let segs = window.waveform.segments();
        assert!(segs.len() > 20, "{} segments", segs.len());
        assert_eq!(segs[0].t0.to_bits(), from.to_bits());
        assert_eq!(segs[segs.len() - 1].t1.to_bits(), to.to_bits());
        for pair in segs.windows(2) {
            assert_eq!(pair[0].t1.to_bits(), pair[1].t0.to_bits());
        }
        let (a, b) = (
            window.waveform.state(from).expect("recorded"),
            all.waveform.state(from).expect("recorded"),
        );
        for (x, y) in a.iter().zip(&b) {
            assert!((x - y).abs() <= 1e-12 * y.abs().max(1.0), "{x} vs {y}");
        }
        // Events only inside the window, and all of those.
        let inside = |t: f64| (from..=to).contains(&t);
        let n_all = all.events.iter().filter(|e| inside(e.time)).count();
        assert!(window.events.iter().all(|e| inside(e.time)));
        assert_eq!(window.events.len(), n_all);
    }
}
