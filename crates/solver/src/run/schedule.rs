//! Stage 1: the schedule — gate edges and source corners, computed as
//! `k·T + phase` so that every period repeats the same interval lengths.

use fluxstep_netlist::{Edge, SignalShape, Stimulus};

use super::instant::{coincident_until, TimeKey};
use crate::compile::Compiled;
use crate::control::{Apply, Command, Controller, Sampling};

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

    /// Appends the edges of `shape` in [t0, t1) after the last, written
    /// in place (`SignalShape::edges_into`).
    pub fn extend_from_shape(&mut self, shape: &SignalShape, t0: f64, t1: f64) {
        if 2 * self.head > self.buf.len() {
            self.compact();
        }
        shape.edges_into(t0, t1, &mut self.buf);
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
    /// Every gate signal's upcoming edges.
    pub(super) queues: Queues,
    /// Present state of each gate signal (written by
    /// [`Schedule::set_signal`] only).
    pub(super) signal_on: Vec<bool>,
    /// For each signal, the bits of the switches it drives.
    pub(super) signal_switches: Vec<u64>,
    /// The bits of the switches whose signals are on: kept with
    /// `signal_on`, so that an edge costs its own switches, not a pass
    /// over all of them (a twelve-phase converter has twelve).
    pub(super) switches_on: u64,
    /// Per comparator: whether its turn-off comparison counts yet (the
    /// minimum on-time has passed).
    pub(super) cmp_enabled_off: Vec<bool>,
    /// Per comparator: its ticks within a period as (phase, what).
    pub(super) cmp_ticks: Vec<Vec<(f64, Tick)>>,
    /// The circuit's gates, changed at run time by controllers.
    pub(super) gates: Vec<fluxstep_netlist::Gate>,
    /// Per gate: the origin of its cycles (moved by frequency changes).
    pub(super) gate_origin: Vec<f64>,
    /// For each signal, the index of its gate.
    pub(super) signal_gate: Vec<usize>,
    pub(super) controllers: Vec<Slot>,
    pub(super) pending: Vec<Pending>,
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

/// What a comparator tick does.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Tick {
    /// The clock edge: turn on (or off, for valley control).
    Clock,
    /// The minimum on-time has passed: the turn-off comparison counts.
    EnableOff,
    /// The maximum on-time is reached: turn off.
    ForceOff,
}

/// A controller and how it samples.
pub(super) struct Slot {
    pub sampling: Sampling,
    pub controller: Box<dyn Controller>,
    pub inputs: Vec<usize>,
}

/// Commands waiting for their delay to pass.
pub(super) struct Pending {
    pub time: f64,
    pub key: Option<TimeKey>,
    pub apply: Apply,
    pub commands: Vec<Command>,
}

/// Each gate signal's upcoming edges, read and changed only through
/// [`Schedule::signal_mut`], [`Schedule::take_due`] and the look-ups of
/// this module, which keep `fronts` true.
pub(super) struct Queues {
    signals: Vec<SignalBuffer>,
    /// When `valid`: each signal's front edge time, side by side, so
    /// that the next edge is the least of a short array rather than a
    /// pass over every queue (a twelve-phase converter has twelve).
    /// Cleared when a queue runs empty or is changed other than by
    /// taking its front; the next [`Schedule::next_gate_edge`] then takes
    /// the pass over the queues (refilling the empty ones) and writes it
    /// again.
    fronts: Vec<f64>,
    valid: bool,
    /// Whether `fronts` is kept at all: from [`FRONTS_FROM`] signals (and
    /// off in the tests that compare the two ways).
    pub(super) keep: bool,
    /// Look-ups answered from `fronts` (tests only).
    #[cfg(test)]
    pub(super) from_fronts: u64,
}

impl Queues {
    /// The queues of `signals`, their fronts not yet read.
    pub(super) fn new(signals: Vec<SignalBuffer>) -> Self {
        Queues {
            keep: signals.len() >= FRONTS_FROM,
            signals,
            fronts: vec![],
            valid: false,
            #[cfg(test)]
            from_fronts: 0,
        }
    }

    /// [`Schedule::next_gate_edge`] where `fronts` is kept: from it where
    /// it is valid, else by a pass that writes it. Out of line, so that
    /// the loop of one or two signals stays as small as it was.
    #[inline(never)]
    fn next_edge_kept(
        &mut self,
        shapes: &[(String, SignalShape)],
        t_end: f64,
    ) -> (f64, Option<TimeKey>) {
        if !self.valid {
            return self.pass::<true>(shapes, t_end);
        }
        #[cfg(test)]
        {
            self.from_fronts += 1;
        }
        // The least front, then the first signal there with a key (else
        // the first there): what the pass over the queues finds, as every
        // queue is non-empty and its front is in `fronts`.
        let least = self
            .fronts
            .iter()
            .fold(f64::INFINITY, |m, &t| if t < m { t } else { m });
        if least > t_end {
            return (t_end, None);
        }
        let mut key = None;
        for (b, &t) in self.signals.iter().zip(&self.fronts) {
            if t == least {
                let e = b.edges.front().expect("a valid front has an edge");
                if let Some(period) = e.period {
                    key = Some(TimeKey {
                        cycle: e.cycle,
                        phase: e.phase,
                        period,
                    });
                    break;
                }
            }
        }
        (least, key)
    }

    /// [`Schedule::next_gate_edge`] by a pass over every queue, refilling
    /// the empty ones; with `KEEP`, writes `fronts` (valid where every
    /// queue then has an edge).
    #[inline(always)]
    fn pass<const KEEP: bool>(
        &mut self,
        shapes: &[(String, SignalShape)],
        t_end: f64,
    ) -> (f64, Option<TimeKey>) {
        let mut best = (t_end, None);
        if KEEP {
            self.fronts.clear();
        }
        for (b, (_, shape)) in self.signals.iter_mut().zip(shapes) {
            if b.edges.is_empty() {
                b.refill(shape, b.filled_to);
            }
            if let Some(e) = b.edges.front() {
                if KEEP {
                    self.fronts.push(e.time);
                }
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
        if KEEP {
            self.valid = self.fronts.len() == self.signals.len();
        }
        best
    }
}

/// Fewest gate signals for which [`Queues`] keeps their fronts side by
/// side: with one or two, the pass over the queues costs less than
/// keeping them.
const FRONTS_FROM: usize = 3;

/// Upcoming edges of one gate signal, refilled a chunk of periods at a time.
pub(super) struct SignalBuffer {
    pub edges: EdgeQueue,
    pub filled_to: f64,
    pub chunk: f64,
}

impl SignalBuffer {
    /// Fills the buffer with the edges of `shape` past `upto`, a chunk of
    /// periods at a time. Out of line: it runs once per chunk.
    #[cold]
    #[inline(never)]
    fn refill(&mut self, shape: &SignalShape, upto: f64) {
        while self.filled_to <= upto && self.filled_to.is_finite() {
            let to = self.filled_to + self.chunk;
            self.edges.extend_from_shape(shape, self.filled_to, to);
            self.filled_to = to;
        }
    }
}

/// Stage 1, handed only the schedule and the compiled circuit (its signal
/// shapes, comparators and sources).
impl Schedule {
    /// Sets gate signal `i` `on`, and the bits of the switches it drives.
    #[inline(always)]
    pub(super) fn set_signal(&mut self, i: usize, on: bool) {
        if self.signal_on[i] != on {
            self.signal_on[i] = on;
            self.switches_on ^= self.signal_switches[i];
        }
    }

    /// Fills signal `i`'s buffer of edges (of `shape`) past `upto`.
    pub(super) fn refill(&mut self, shape: &SignalShape, i: usize, upto: f64) {
        self.queues.valid = false;
        self.queues.signals[i].refill(shape, upto);
    }

    /// The earliest front of the signal buffers before `t_end` (or at it,
    /// with a key) and its key; `(t_end, None)` if there is none. Of equal
    /// instants, the first signal wins unless a later one has a key where
    /// it has none. The general loop (`next_scheduled`) and the lane take
    /// their next edge here (`shapes`: the compiled signals).
    #[inline(always)]
    pub(super) fn next_gate_edge(
        &mut self,
        shapes: &[(String, SignalShape)],
        t_end: f64,
    ) -> (f64, Option<TimeKey>) {
        if self.queues.keep {
            return self.queues.next_edge_kept(shapes, t_end);
        }
        self.queues.pass::<false>(shapes, t_end)
    }

    /// The number of gate signals.
    pub(super) fn signal_count(&self) -> usize {
        self.queues.signals.len()
    }

    /// Signal `i`'s queue, to change it in any way (`fronts` is written
    /// again at the next look-up).
    pub(super) fn signal_mut(&mut self, i: usize) -> &mut SignalBuffer {
        self.queues.valid = false;
        &mut self.queues.signals[i]
    }

    /// Takes signal `i`'s front edge if it is due by `until`: its new
    /// state (`set_signal` is the caller's), else `None`. Keeps `fronts`.
    #[inline(always)]
    pub(super) fn take_due(&mut self, i: usize, until: f64) -> Option<bool> {
        let q = &mut self.queues;
        let b = &mut q.signals[i];
        let e = b.edges.front()?;
        if e.time > until {
            return None;
        }
        let on = e.on;
        b.edges.pop_front();
        if q.valid {
            match b.edges.front() {
                Some(next) => q.fronts[i] = next.time,
                None => q.valid = false,
            }
        }
        Some(on)
    }

    /// The next scheduled instant after `now` (capped at `t_end`) and its
    /// key: a gate edge, controller sample or command, comparator tick,
    /// source corner, or `ramp_next` (the end of a running ramp phase).
    pub(super) fn next_scheduled(
        &mut self,
        cc: &Compiled,
        (now, ramp_next): (f64, f64),
        t_end: f64,
    ) -> (f64, Option<TimeKey>) {
        let mut best = self.next_gate_edge(&cc.signals, t_end);
        if self.gates_only {
            // Nothing else is ever scheduled.
            return best;
        }
        if !self.controllers.is_empty() || !self.pending.is_empty() {
            if let Some((time, key)) = self.next_control(now) {
                if time < best.0 || (time == best.0 && best.1.is_none() && key.is_some()) {
                    best = (time, key);
                }
            }
        }
        if !cc.comparators.is_empty() {
            if let Some((time, key)) = self.next_tick(&cc.comparators, now) {
                if time < best.0 || (time == best.0 && best.1.is_none()) {
                    best = (time, Some(key));
                }
            }
        }
        // Constant sources have no corners.
        let corners = if self.const_inputs.is_some() {
            &[][..]
        } else {
            &self.pwl_sources[..]
        };
        for &si in corners {
            let w = cc.sources[si]
                .waveform
                .as_ref()
                .expect("piecewise-linear source");
            if matches!(w, Stimulus::Constant { .. }) {
                continue;
            }
            if let Some(p) = w.piece_at(now) {
                if p.end.is_finite() && p.end > now && p.end < best.0 {
                    best = (p.end, None);
                }
            }
        }
        if ramp_next < best.0 {
            best = (ramp_next, None);
        }
        best
    }

    /// Whether anything is scheduled at the instant `t` (with the edges
    /// that coincide with it), `ramp_next` being the end of a running ramp
    /// phase.
    pub(super) fn has_scheduled_at(&self, cc: &Compiled, t: f64, ramp_next: f64) -> bool {
        let until = coincident_until(t);
        ramp_next <= until
            || self
                .queues
                .signals
                .iter()
                .any(|b| b.edges.front().is_some_and(|e| e.time <= until))
            || self.has_tick_at(&cc.comparators, t)
            || self.has_control_at(t)
            || self.pwl_sources.iter().any(|&si| {
                cc.sources[si]
                    .waveform
                    .as_ref()
                    .and_then(|w| w.piece_at(t))
                    .is_some_and(|p| p.start == t)
            })
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
