//! The lane: a stage that advances a stretch of cached periodic intervals
//! at once, the usual stretch of a fixed-frequency run.
//!
//! While every interval ends at a periodic gate edge before the stop time
//! (and starts at one, or at a located event), its matrix exponential is
//! cached and it needs one Taylor reach (ρ·h ≤ 1/2), the general loop of
//! `advance_to` would only look up the next edge, multiply by the cached
//! exponential, locate a guard that is suspect at the end, record the
//! segment and apply the edge or the located instant. The lane does
//! exactly that with the general stages' own functions (`locate`,
//! `enter_crossing`, `record`, `plain_instant`), so the same bits, but
//! without their generality: no controller, comparator, source corner or
//! transition model (see `lane_open`). Anything else — a new interval
//! length, the stop time, an edge outside the periodic schedule — returns
//! to the general loop *before* anything is changed, so the general loop
//! handles that interval from the same state. The contract tests
//! `plain_instants_*` check the whole record of every example converter
//! with the lane and plain instants on and off.
//!
//! Why a loop of its own: the general loop with the same shortcuts as
//! branches (`may_cross`, `gates_only`, `plain_instant`) ran the
//! continuous-conduction benchmark 9 to 11 % slower in wall time for 4 %
//! more instructions (`once ccm all 60 reuse`), while this loop is within
//! 3 % of the earlier lane; see docs/architecture.md.

use super::locate::suspect_at_end;
use super::schedule::TimeKey;
use super::Simulator;
use crate::error::SolverError;
use crate::propagate;

impl Simulator {
    /// Whether the lane may run at all: nothing it leaves out is present.
    ///
    /// Nor a switch with a transition model: such a circuit spends six of
    /// its eight intervals a period in the general loop (ramps, located
    /// clamps, ramp ends), and running both drivers every period made its
    /// hot code outgrow the instruction cache. In the transitions bench,
    /// without the lane: 1.6 % more instructions, 45 % fewer first-level
    /// instruction-cache misses (callgrind's cache model), 8 % less wall
    /// time. The bits are the same either way (the lane's contract).
    fn lane_open(&self) -> bool {
        // `gates_only`: constant inputs, no comparator, no transition
        // model, no controller (cleared when one is added).
        self.lane
            && self.rec.sink.is_none()
            && self.sched.gates_only
            && self.sched.pending.is_empty()
    }

    /// Advances interval by interval while the lane's conditions hold (see
    /// the module notes); returns at the first interval the general loop
    /// must handle, with nothing of it done.
    pub(super) fn run_lane(&mut self, t_end: f64) -> Result<(), SolverError> {
        if !self.lane_open() {
            return Ok(());
        }
        loop {
            // A running transition has instants of its own (`transition.rs`).
            if self.key.ramps != 0 {
                return Ok(());
            }
            // The next edge: the earliest front of the signal buffers (the
            // first signal wins a tie, as in `next_scheduled`).
            let mut best: Option<(f64, usize)> = None;
            for i in 0..self.sched.signals.len() {
                if self.sched.signals[i].edges.is_empty() {
                    let from = self.sched.signals[i].filled_to;
                    self.refill(i, from);
                }
                if let Some(e) = self.sched.signals[i].edges.front() {
                    if best.is_none_or(|(t, _)| e.time < t) {
                        best = Some((e.time, i));
                    }
                }
            }
            let Some((_, si)) = best else {
                return Ok(());
            };
            let e = *self.sched.signals[si].edges.front().expect("found above");
            let Some(period) = e.period else {
                return Ok(());
            };
            // An edge at or after the stop time belongs to the general loop.
            if e.time >= t_end || e.time.is_nan() {
                return Ok(());
            }
            // The length as the general loop takes it: from the schedule's
            // (cycle, phase) pairs between two periodic edges, else by
            // subtraction (an interval that starts at a located event).
            let (h, from_schedule) = match self.tkey {
                Some(a) if period.to_bits() == a.period.to_bits() => (
                    (e.cycle - a.cycle) as f64 * a.period + (e.phase - a.phase),
                    true,
                ),
                Some(_) => return Ok(()),
                None => (e.time - self.t, false),
            };
            // As the general loop: a length that is not positive is not used.
            if h.is_nan() || h <= 0.0 {
                return Ok(());
            }
            let mi = self.mode as usize;
            let bits = h.to_bits();
            // The general step's look-ups, in its order: spans of the
            // schedule, then (for another length) lengths that came back.
            // A miss returns: the general step keeps the books of misses.
            let cached = self.caches[mi]
                .scheduled
                .iter()
                .find(|(b, _)| *b == bits)
                .or_else(|| {
                    if from_schedule {
                        None
                    } else {
                        self.caches[mi].repeated.iter().find(|(b, _)| *b == bits)
                    }
                });
            let Some((_, phi)) = cached else {
                return Ok(());
            };
            let mode = &self.modes[mi];
            if !mode.guards.is_empty() && propagate::substeps(mode.rate, h) != 1 {
                return Ok(());
            }
            propagate::matvec(phi, self.z.as_slice(), self.z_next.as_mut_slice());
            let (za, zb) = (self.z.as_slice(), self.z_next.as_slice());
            let scales = self.seen;
            let suspect = mode
                .guards
                .iter()
                .any(|g| suspect_at_end(g, za, zb, scales));
            // From here on exactly what the general loop does after the
            // same cached step.
            self.stats.cache_hits += 1;
            self.lane_steps += 1;
            if suspect {
                // The general loop's location and, for a crossing inside,
                // its located instant.
                if let Some(c) = self.locate(h) {
                    if c.time < h {
                        self.enter_crossing(c)?;
                        continue;
                    }
                }
            }
            self.record(e.time, h);
            self.t = e.time;
            self.tkey = Some(TimeKey {
                cycle: e.cycle,
                phase: e.phase,
                period,
            });
            std::mem::swap(&mut self.z, &mut self.z_next);
            self.check_finite()?;
            self.lane_instant(e.time)?;
        }
    }

    /// `apply_scheduled` at a gate edge for what the lane admits (constant
    /// inputs, so no source corner; no controller, no comparator): the
    /// same steps in the same order, with the remembered transition tried
    /// first and the full `resolve` only if it does not apply (its own
    /// replay attempt then fails the same way, changing nothing). The
    /// instant's events are logged together (`push_instant`: the same
    /// records as one by one).
    fn lane_instant(&mut self, t: f64) -> Result<(), SolverError> {
        self.begin_instant();
        self.plain_instant(t)
    }
}
