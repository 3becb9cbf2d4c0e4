//! The lane: a stage that advances a stretch of cached periodic intervals
//! at once, the usual stretch of a fixed-frequency run.
//!
//! While every interval ends at a periodic gate edge before the stop time
//! (and starts at one, or at a located event) and has a cached
//! exponential or needs one Taylor reach (ρ·h ≤ 1/2), the general loop of
//! `advance_to` would only look up the next edge, advance (by the cached
//! exponential, or through `step` for a length not cached), locate a
//! guard that is suspect at the end, record the segment and apply the
//! edge or the located instant. The lane does exactly that with the
//! general stages' own functions (`step_uncached`, the rest of `step`
//! past the look-ups the lane makes itself; `locate`, `record`,
//! `plain_instant`; and `lane_crossing`, the located instant in
//! `plain_instant`'s shape), so the same bits, but without their
//! generality: no controller, comparator, source corner or transition
//! model (see `lane_open`). Anything else — a longer span without a
//! cached exponential, the stop time, an edge outside the periodic
//! schedule — returns to the general loop *before* anything is changed,
//! so the general loop handles that interval from the same state. The
//! contract tests `plain_instants_*` check the whole record of every
//! example converter with the lane and plain instants on and off.
//!
//! The lengths that start at a located event are new ones while a
//! converter in discontinuous conduction settles: the idle interval from
//! the diode's turn-off to the next edge. Returning to the general loop
//! for each of them ran both loops every period; taking them here through
//! `step` cut the phases bench's settling discontinuous buck from
//! 502–503 to 486–489 ns a period (the located turn-off from 3.12–3.20×
//! to 2.98–2.99× a scheduled event), for the same instructions. For the
//! same reason the located instant logs its diode events through the
//! scheduled instants' `push_instant` (`lane_crossing`): 49 instructions
//! fewer a period, and about 4 % less wall time over three code layouts.
//!
//! Why a loop of its own: the general loop with the same shortcuts as
//! branches (`may_cross`, `gates_only`, `plain_instant`) ran the
//! continuous-conduction benchmark 9 to 11 % slower in wall time for 4 %
//! more instructions (`once ccm all 60 reuse`), while this loop is within
//! 3 % of the earlier lane; see docs/architecture.md.

use super::instant::interval_length;
use super::modeset::PREFETCH_FROM;
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
            // The general loop's next edge (`gates_only`: nothing else is
            // scheduled); only a periodic one before the stop time.
            let (t_next, key_next) = self.sched.next_gate_edge(&self.cc.signals, t_end);
            if key_next.is_none() || t_next >= t_end {
                return Ok(());
            }
            let h = interval_length(self.t, self.tkey, t_next, key_next);
            if h.is_nan() || h <= 0.0 {
                return Ok(());
            }
            // `step`'s look-ups in its order, its stiff check before the
            // lengths that came back; any other length within one Taylor
            // reach through `step` itself (a nearby length, or a new one
            // cached), as the general loop would; a longer one returns.
            let mi = self.mode as usize;
            let cacheable = self.tkey.is_some();
            let bits = h.to_bits();
            let cache = &self.modes.caches[mi];
            // The span's reach only where no span of the schedule is
            // cached: the usual interval does not compute it.
            let found = match cache.find_scheduled(bits) {
                Some(phi) => Ok(phi),
                None => {
                    let substeps = propagate::substeps(self.modes[mi].rate, h);
                    let repeated = if !cacheable && substeps <= propagate::STIFF_SUBSTEPS {
                        cache.find_repeated(bits)
                    } else {
                        None
                    };
                    repeated.ok_or(substeps)
                }
            };
            match found {
                Ok(phi) => {
                    propagate::matvec(phi, self.z.as_slice(), self.z_next.as_mut_slice());
                    self.stats.cache_hits += 1;
                }
                // `step` past the look-up above and its stiff check (one
                // reach is not stiff).
                Err(1) => self.step_uncached(h, cacheable, false),
                Err(_) => return Ok(()),
            }
            self.lane_steps += 1;
            if self.z.len() >= PREFETCH_FROM {
                self.modes.prefetch_successor(mi);
            }
            // From here on the general loop's own stages.
            if let Some(c) = self.locate(h) {
                if c.time < h {
                    self.lane_crossing(c)?;
                    continue;
                }
            }
            self.finish_interval(t_next, h, key_next)?;
            self.lane_instant(t_next)?;
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
