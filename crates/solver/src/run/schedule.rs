//! Stage 1: the schedule — gate edges and source corners, computed as
//! `k·T + phase` so that every period repeats the same interval lengths.

use fluxstep_netlist::{Edge, Stimulus};

use super::instant::{coincident_until, TimeKey};
use super::record::{After, Who};
use super::resolve::Moment;
use super::Simulator;
use crate::error::SolverError;
use crate::events::{EventCause, EventKind};

/// A queue of upcoming edges: a vector and the index of its front, so that
/// looking at and taking the front is an index, not a ring's wrap-around
/// (this runs at every edge). Taken edges are dropped when the queue runs
/// empty or is extended past half of its taken part.
#[derive(Default)]
pub(super) struct EdgeQueue {
    buf: Vec<Edge>,
    head: usize,
}

impl EdgeQueue {
    /// The edges not yet taken, in order.
    fn live(&self) -> &[Edge] {
        self.buf.get(self.head..).unwrap_or(&[])
    }

    /// True when every edge has been taken.
    pub fn is_empty(&self) -> bool {
        self.head >= self.buf.len()
    }

    /// The next edge, if any.
    pub fn front(&self) -> Option<&Edge> {
        self.buf.get(self.head)
    }

    /// Live edge `i` (0 is the front).
    pub fn get(&self, i: usize) -> Option<&Edge> {
        self.live().get(i)
    }

    /// Takes the front edge (nothing if empty).
    pub fn pop_front(&mut self) {
        if self.head < self.buf.len() {
            self.head += 1;
            if self.head == self.buf.len() {
                self.buf.clear();
                self.head = 0;
            }
        }
    }

    /// Drops the taken edges from the vector.
    fn compact(&mut self) {
        self.buf.drain(..self.head);
        self.head = 0;
    }

    /// Appends edges after the last.
    pub fn extend(&mut self, edges: impl IntoIterator<Item = Edge>) {
        if 2 * self.head > self.buf.len() {
            self.compact();
        }
        self.buf.extend(edges);
    }

    /// The number of live edges `e` with `pred(e)` true, for a `pred` that
    /// holds on a prefix (as `slice::partition_point`).
    pub fn partition_point(&self, pred: impl FnMut(&Edge) -> bool) -> usize {
        self.live().partition_point(pred)
    }

    /// Inserts before live edge `i`.
    pub fn insert(&mut self, i: usize, e: Edge) {
        self.buf.insert(self.head + i, e);
    }

    /// Keeps the live edges for which `keep` is true, in order.
    pub fn retain(&mut self, keep: impl FnMut(&Edge) -> bool) {
        self.compact();
        self.buf.retain(keep);
    }
}

/// What the schedule stage owns: every gate signal's state and upcoming
/// edges, the comparators' ticks, the controllers and their pending
/// updates, and what is known of the sources' corners.
pub(super) struct Schedule {
    pub(super) signals: Vec<SignalBuffer>,
    /// Present state of each gate signal.
    pub(super) signal_on: Vec<bool>,
    /// Per comparator: whether its turn-off comparison counts yet (the
    /// minimum on-time has passed).
    pub(super) cmp_enabled_off: Vec<bool>,
    /// Per comparator: its ticks within a period as (phase, what).
    pub(super) cmp_ticks: Vec<Vec<(f64, super::control::Tick)>>,
    /// The circuit's gates, changed at run time by controllers.
    pub(super) gates: Vec<fluxstep_netlist::Gate>,
    /// Per gate: the origin of its cycles (moved by frequency changes).
    pub(super) gate_origin: Vec<f64>,
    /// For each signal, the index of its gate.
    pub(super) signal_gate: Vec<usize>,
    pub(super) controllers: Vec<super::sampled::Slot>,
    pub(super) pending: Vec<super::sampled::Pending>,
    /// Indices of piecewise-linear sources (the only ones with corners).
    pub(super) pwl_sources: Vec<usize>,
    /// When every piecewise-linear source is constant: the input entries
    /// of z and their values, written at every scheduled instant.
    pub(super) const_inputs: Option<Vec<(usize, f64)>>,
    /// Only gate edges are ever scheduled: constant inputs, no
    /// controller, no comparator, no transition model (kept by
    /// `Simulator::new` and `add_controller`).
    pub(super) gates_only: bool,
}

/// Upcoming edges of one gate signal, refilled a chunk of periods at a time.
pub(super) struct SignalBuffer {
    pub edges: EdgeQueue,
    pub filled_to: f64,
    pub chunk: f64,
}

impl Simulator {
    pub(super) fn refill(&mut self, i: usize, upto: f64) {
        let shape = &self.cc.signals[i].1;
        let b = &mut self.sched.signals[i];
        while b.filled_to <= upto && b.filled_to.is_finite() {
            let to = b.filled_to + b.chunk;
            b.edges.extend(shape.edges(b.filled_to, to));
            b.filled_to = to;
        }
    }

    /// Switch bits from the present signal states.
    pub(super) fn switch_bits(&self) -> u64 {
        let mut sw = 0u64;
        for (i, s) in self.cc.switches.iter().enumerate() {
            if self.sched.signal_on[s.signal] {
                sw |= 1 << i;
            }
        }
        sw
    }

    /// The earliest front of the signal buffers before `t_end` (or at it,
    /// with a key) and its key; `(t_end, None)` if there is none. Of equal
    /// instants, the first signal wins unless a later one has a key where
    /// it has none. The general loop (`next_scheduled`) and the lane take
    /// their next edge here.
    #[inline(always)]
    pub(super) fn next_gate_edge(&mut self, t_end: f64) -> (f64, Option<TimeKey>) {
        let mut best = (t_end, None);
        for i in 0..self.sched.signals.len() {
            if self.sched.signals[i].edges.is_empty() {
                let from = self.sched.signals[i].filled_to;
                self.refill(i, from);
            }
            if let Some(e) = self.sched.signals[i].edges.front() {
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
        best
    }

    /// Next scheduled instant after now (capped at `t_end`) and its key.
    pub(super) fn next_scheduled(&mut self, t_end: f64) -> (f64, Option<TimeKey>) {
        let mut best = self.next_gate_edge(t_end);
        if self.sched.gates_only {
            // Nothing else is ever scheduled.
            return best;
        }
        if !self.sched.controllers.is_empty() || !self.sched.pending.is_empty() {
            if let Some((time, key)) = self.next_control(self.t) {
                if time < best.0 || (time == best.0 && best.1.is_none() && key.is_some()) {
                    best = (time, key);
                }
            }
        }
        if !self.cc.comparators.is_empty() {
            if let Some((time, key)) = self.next_tick(self.t) {
                if time < best.0 || (time == best.0 && best.1.is_none()) {
                    best = (time, Some(key));
                }
            }
        }
        // Constant sources have no corners.
        let corners = if self.sched.const_inputs.is_some() {
            &[][..]
        } else {
            &self.sched.pwl_sources[..]
        };
        for &si in corners {
            let w = self.cc.sources[si]
                .waveform
                .as_ref()
                .expect("piecewise-linear source");
            if matches!(w, Stimulus::Constant { .. }) {
                continue;
            }
            if let Some(p) = w.piece_at(self.t) {
                if p.end.is_finite() && p.end > self.t && p.end < best.0 {
                    best = (p.end, None);
                }
            }
        }
        if self.ramps.next < best.0 {
            best = (self.ramps.next, None);
        }
        best
    }

    pub(super) fn has_scheduled_at(&self, t: f64) -> bool {
        let until = coincident_until(t);
        self.ramps.next <= until
            || self
                .sched
                .signals
                .iter()
                .any(|b| b.edges.front().is_some_and(|e| e.time <= until))
            || self.has_tick_at(t)
            || self.has_control_at(t)
            || self.sched.pwl_sources.iter().any(|&si| {
                self.cc.sources[si]
                    .waveform
                    .as_ref()
                    .and_then(|w| w.piece_at(t))
                    .is_some_and(|p| p.start == t)
            })
    }

    /// Sets the input part of z (values and slopes) for time t; returns a
    /// bit set of the sources that reached a corner at t.
    ///
    /// Constant inputs are written again every time on purpose: a cached
    /// matrix exponential need not carry them over to the last bit.
    #[inline(always)]
    pub(super) fn set_inputs(&mut self, t: f64) -> u64 {
        let nx = self.cc.n_x;
        let nu = self.cc.n_u;
        if let Some(list) = &self.sched.const_inputs {
            // Every source constant: the same entries every time, no corners.
            let z = self.z.as_mut_slice();
            for &(i, v) in list {
                z[i] = v;
            }
            return 0;
        }
        self.z[nx] = 1.0;
        let mut corners = 0u64;
        for &si in &self.sched.pwl_sources {
            let s = &self.cc.sources[si];
            let (Some(w), Some(k)) = (&s.waveform, s.input) else {
                continue;
            };
            if let Stimulus::Constant { value } = w {
                self.z[nx + k] = *value;
                self.z[nx + nu + k] = 0.0;
                continue;
            }
            let p = w.piece_at(t).expect("piecewise-linear source has a piece");
            if p.start == t && t > 0.0 && si < 64 {
                corners |= 1 << si;
            }
            self.z[nx + k] = p.at(t);
            self.z[nx + nu + k] = p.slope;
        }
        corners
    }

    /// The writes of [`Simulator::set_inputs`] when every piecewise-linear
    /// source is constant (the entry of 1, each value and its zero slope),
    /// in the order `set_inputs` makes them; `None` otherwise.
    pub(super) fn constant_inputs(&self) -> Option<Vec<(usize, f64)>> {
        let nx = self.cc.n_x;
        let nu = self.cc.n_u;
        let mut list = vec![(nx, 1.0)];
        for &si in &self.sched.pwl_sources {
            let s = &self.cc.sources[si];
            let (Some(w), Some(k)) = (&s.waveform, s.input) else {
                continue;
            };
            let Stimulus::Constant { value } = w else {
                return None;
            };
            list.push((nx + k, *value));
            list.push((nx + nu + k, 0.0));
        }
        Some(list)
    }

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
        for i in 0..self.sched.signals.len() {
            while let Some(e) = self.sched.signals[i].edges.front() {
                if e.time > until {
                    break;
                }
                self.sched.signal_on[i] = e.on;
                self.sched.signals[i].edges.pop_front();
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

#[cfg(test)]
mod tests {
    use std::collections::VecDeque;

    use fluxstep_netlist::Edge;

    use super::EdgeQueue;

    fn edge(time: f64) -> Edge {
        Edge {
            time,
            on: time as i64 % 2 == 0,
            cycle: 0,
            phase: time,
            period: None,
        }
    }

    /// Contract: the edge queue behaves as a double-ended queue under every
    /// operation the schedule uses, in random order.
    #[test]
    fn edge_queue_behaves_as_a_deque() {
        let mut uniform = crate::test_util::uniform(0x9e37_79b9_7f4a_7c15u64);
        let mut rnd = move |n: u64| (uniform() * n as f64) as u64;
        let (mut q, mut model) = (EdgeQueue::default(), VecDeque::new());
        let mut next = 0.0;
        for step in 0..20_000 {
            match rnd(6) {
                0 | 1 => {
                    let k = rnd(5);
                    let new: Vec<Edge> = (0..k).map(|i| edge(next + i as f64)).collect();
                    next += k as f64;
                    q.extend(new.clone());
                    model.extend(new);
                }
                2 | 3 => {
                    q.pop_front();
                    model.pop_front();
                }
                4 => {
                    let t = next - rnd(8) as f64 - 0.5;
                    let i = q.partition_point(|e| e.time <= t);
                    assert_eq!(i, model.partition_point(|e| e.time <= t), "step {step}");
                    q.insert(i, edge(t));
                    model.insert(i, edge(t));
                }
                _ => {
                    let t = next - rnd(4) as f64;
                    q.retain(|e| e.time < t);
                    model.retain(|e| e.time < t);
                }
            }
            assert_eq!(q.is_empty(), model.is_empty(), "step {step}");
            assert_eq!(q.front(), model.front(), "step {step}");
            let i = rnd(4) as usize;
            assert_eq!(q.get(i), model.get(i), "step {step}");
            assert_eq!(q.live().len(), model.len(), "step {step}");
        }
    }
}
