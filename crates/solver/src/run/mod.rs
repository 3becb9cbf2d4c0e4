//! The transient run, read as stages (one file each), in the order of
//! `Simulator::advance_to`: the next scheduled instant (`schedule.rs`) →
//! the interval's length (`instant.rs`) → the exact advance over it
//! (`advance.rs`) → the earliest state event inside it (`locate.rs`) →
//! the end of the interval (`finish.rs`): at that event, or at the
//! scheduled instant and what is due there (`enter.rs`), with the
//! conduction pattern that follows (`resolve.rs` with `replay.rs`,
//! `lcp.rs`, `checks.rs`) and the record (`record.rs`). Below them:
//! `gates.rs`, `inputs.rs`, `control.rs` and `sampled.rs` (closed loops),
//! `transition.rs` (switching ramps). `lane.rs` runs stretches of cached
//! periodic intervals at once with the same functions. `build.rs` makes a
//! simulator, `access.rs` is what a user reads of it, `result.rs` what a
//! run returns. The state is grouped by owner (`ModeSet`, `Schedule`,
//! `Recorder`, `ScaleWatch`, `Memo`, `Candidates`, `Ramps`, `Buffers`;
//! docs/architecture.md).
//!
//! The loop is built not to allocate: state vectors are swapped between two
//! buffers, matrix-vector products write into scratch space, events are
//! only built when they are kept, and diagnostics only turn into text when a
//! run actually stops.

mod access;
mod advance;
mod build;
mod certify;
mod checks;
mod control;
mod enter;
mod finish;
mod gates;
mod inputs;
mod instant;
mod lane;
mod lcp;
mod locate;
mod modeset;
pub(crate) mod paths;
mod record;
mod replay;
mod resolve;
mod restart;
mod result;
mod sampled;
mod scales;
mod schedule;
mod transition;

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use fluxstep_netlist::Circuit;

use crate::compile::Compiled;
use crate::crossing::Crossing;
use crate::error::SolverError;
use crate::events::{adopt, EventCause, EventLog};
use crate::mode::{pattern_text, Mode, ModeKey};
use crate::options::{Options, Record, CHATTER_FRACTION};
use crate::propagate;
use crate::waveform::{OutputId, Waveform};

pub use certify::EnergyCertificate;
use instant::TimeKey;
use modeset::MAX_AGAIN;
use paths::Shortcuts;
use resolve::Moment;
#[cfg(feature = "stage-timers")]
pub use result::StageTimes;
pub use result::{RunResult, SegmentSink, SegmentView, Stats};
use schedule::{EdgeQueue, SignalBuffer};

/// A circuit being simulated: advance it to a time or by whole switching
/// periods, and read its state in between.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::{Options, Simulator};
///
/// let c = Circuit::builder()
///     .voltage_source("V1", "in", "gnd", 1.0)
///     .resistor("R1", "in", "a", 1.0)
///     .inductor("L1", "a", "gnd", 1e-3)
///     .build()
///     .unwrap();
/// let mut sim = Simulator::new(&c, Options::default()).unwrap();
/// sim.advance_to(1e-3).unwrap();
/// let i = sim.output_value("L1.current").unwrap();
/// assert!((i - (1.0 - (-1.0f64).exp())).abs() < 1e-12);
/// ```
pub struct Simulator {
    /// The circuit as compiled (never changed by a run).
    cc: Compiled,
    opts: Options,
    /// The present state, owned by the loop itself: the time and its
    /// place in the periodic schedule, the state vector, the candidate
    /// next state (end of the interval being advanced), and the mode's
    /// number and conduction pattern.
    t: f64,
    tkey: Option<TimeKey>,
    z: DVector<f64>,
    z_next: DVector<f64>,
    mode: u32,
    key: ModeKey,
    /// The mode set: modes met so far and their caches (`modeset.rs`).
    modes: modeset::ModeSet,
    /// The schedule: gate signals and their upcoming edges, comparator
    /// ticks, controllers and their pending updates, source corners
    /// (`schedule.rs`).
    sched: schedule::Schedule,
    /// The recorder: waveform segments, event log, sink, chatter window
    /// (`record.rs`).
    rec: record::Recorder,
    stats: Stats,
    /// The scale watch: the largest inductor current and capacitor or
    /// source voltage seen so far (`scales.rs`).
    scales: scales::ScaleWatch,
    /// Candidate diode patterns of the search by distance (`resolve.rs`).
    candidates: resolve::Candidates,
    /// Remembered transitions (see `replay::Remembered`), at most 64.
    memo: replay::Memo,
    /// Which shortcuts the run may take (`paths.rs`; all on but in tests
    /// and through [`Simulator::set_shortcuts`]).
    shortcuts: Shortcuts,
    /// Whether the lane (`lane.rs`) runs; off with plain instants, in
    /// the contract tests and through `Shortcuts`.
    lane: bool,
    /// Intervals the lane advanced (for the contract tests).
    lane_steps: usize,
    /// Instants that took the plain path (for the contract test).
    plain_instants: usize,
    /// Scratch space of the stages (no state between calls).
    buf: advance::Buffers,
    /// The energy certificate and what it keeps between checks
    /// (`certify.rs`).
    certifier: certify::Certifier,
    /// Switches with a transition model and where each is in its
    /// transition (`transition.rs`).
    ramps: transition::Ramps,
    /// Why `step` refused a stiff span (see `locate::check_resolvable`),
    /// reported by `check_finite` in place of the NaN it left.
    pub(super) refused: Option<SolverError>,
    /// The last crossing located at the very instant the interval started
    /// (see [`Simulator::check_progress`]).
    stalled: finish::Stall,
    /// Wall time per stage (the `stage-timers` feature).
    #[cfg(feature = "stage-timers")]
    times: StageTimes,
}

/// Runs a stage's call, adding its wall time to `$sim.times.$stage` with
/// the `stage-timers` feature; just the call without it.
macro_rules! timed {
    ($sim:ident, $stage:ident, $call:expr) => {{
        #[cfg(feature = "stage-timers")]
        let start = std::time::Instant::now();
        let out = $call;
        #[cfg(feature = "stage-timers")]
        {
            $sim.times.$stage += start.elapsed();
        }
        out
    }};
}

pub(crate) fn dot_iter(a: impl IntoIterator<Item = f64>, b: &[f64]) -> f64 {
    a.into_iter().zip(b).map(|(x, y)| x * y).sum()
}

impl Simulator {
    /// Advances by `n` whole periods of the first periodic gate signal.
    ///
    /// # Errors
    ///
    /// As [`Simulator::advance_to`]; [`SolverError::BadTime`] if the circuit
    /// has no periodic gate.
    pub fn advance_periods(&mut self, n: u64) -> Result<(), SolverError> {
        let p = self.period().ok_or(SolverError::BadTime {
            time: self.t,
            reason: "the circuit has no periodic gate signal to count periods by".into(),
        })?;
        // k·T computed from the cycle number, never accumulated.
        let k = (self.t / p).round();
        let target = if (k * p - self.t).abs() <= 1e-9 * p {
            (k + n as f64) * p
        } else {
            self.t + n as f64 * p
        };
        self.advance_to(target)
    }

    /// Advances the circuit exactly to time `t_end`.
    ///
    /// # Errors
    ///
    /// A diagnostic ([`SolverError::InductorInterrupted`],
    /// [`SolverError::ShortCircuit`], [`SolverError::Chatter`], …) that
    /// names the elements and the time; the simulator then stays at the
    /// instant of the problem.
    pub fn advance_to(&mut self, t_end: f64) -> Result<(), SolverError> {
        if !t_end.is_finite() || t_end < self.t {
            return Err(SolverError::BadTime {
                time: t_end,
                reason: format!(
                    "must be finite and not before the present time {:e} s",
                    self.t
                ),
            });
        }
        self.reserve_for(t_end);
        while self.t < t_end {
            // A stretch of cached periodic intervals first; the lane
            // returns at the first interval it does not handle, untouched.
            timed!(self, lane, self.run_lane(t_end))?;
            let (t_next, key_next) = timed!(
                self,
                schedule,
                self.sched
                    .next_scheduled(&self.cc, (self.t, self.ramps.next), t_end)
            );
            let h = instant::interval_length(self.t, self.tkey, t_next, key_next);
            timed!(
                self,
                advance,
                self.step(h, key_next.is_some() && self.tkey.is_some())
            );
            if let Some(c) = timed!(self, locate, self.locate(h)) {
                if c.time < h {
                    timed!(self, finish, self.enter_crossing(c))?;
                    continue;
                }
            }
            timed!(self, finish, self.finish_interval(t_next, h, key_next))?;
            if t_next < t_end
                || self
                    .sched
                    .has_scheduled_at(&self.cc, t_next, self.ramps.next)
            {
                timed!(self, instants, self.apply_scheduled(t_next))?;
            }
        }
        self.certify()
    }

    /// Reserves room for the record up to `t_end`, as
    /// [`Simulator::advance_to`] does for its own span (nothing when less is
    /// recorded than everything). A caller that advances in slices toward a
    /// known stop time calls this once, so that the buffers are not grown
    /// by copying at each slice.
    pub fn reserve_until(&mut self, t_end: f64) {
        if t_end.is_finite() && t_end > self.t {
            self.reserve_for(t_end);
        }
    }

    /// When everything is recorded, reserves room for the segments and
    /// events expected up to `t_end` from the gates' edges per second (with
    /// a margin for diode events), so that the buffers do not grow by
    /// doubling and copying. Room reserved but never written costs no
    /// physical memory.
    fn reserve_for(&mut self, t_end: f64) {
        if self.opts.record != Record::All {
            return;
        }
        let per_second: f64 = self
            .cc
            .signals
            .iter()
            .filter_map(|(_, s)| s.period.map(|p| s.transitions.len() as f64 / p))
            .sum();
        let expected = 2.0 * per_second * (t_end - self.t);
        // At most about 140 MB ahead (with a handful of states): past that
        // doubling costs little next to the run itself, and a run that
        // stops early should not have claimed gigabytes.
        let cap = 1_000_000.0;
        if expected.is_nan() || expected < 1.0 {
            return;
        }
        // `reserve` does nothing where the room is there already.
        let n = expected.min(cap) as usize;
        self.rec.wave.segments.reserve(n);
        self.rec.wave.states.reserve(n * self.rec.wave.n_z);
        self.rec.log.reserve(2 * n);
    }

    fn mode_id(&mut self, key: ModeKey) -> Result<u32, SolverError> {
        if let Some(i) = self.modes.find(key) {
            return Ok(i);
        }
        let m = Arc::new(Mode::build(&self.cc, key)?);
        if let Some(reason) = m.too_fast(&self.cc) {
            return Err(SolverError::Unsupported {
                time: self.t,
                pattern: pattern_text(&self.cc, key),
                reason,
            });
        }
        self.rec.wave.modes.push(m.clone());
        Ok(self.modes.insert(key, m))
    }
}

/// Runs a transient from the circuit's initial state to `stop_time`.
///
/// # Errors
///
/// As [`Simulator::new`] and [`Simulator::advance_to`].
pub fn simulate(
    circuit: &Circuit,
    stop_time: f64,
    opts: Options,
) -> Result<RunResult, SolverError> {
    let mut sim = Simulator::new(circuit, opts)?;
    sim.advance_to(stop_time)?;
    Ok(sim.finish())
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::test_util::{self, example};

    /// Runs a circuit file for `stop` seconds with or without replay of
    /// remembered transitions.
    fn run(file: &str, stop: f64, replay: bool) -> RunResult {
        let c = example(file);
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        sim.shortcuts.replay = replay;
        sim.advance_to(stop).expect("runs");
        sim.finish()
    }

    /// Contract: a run in reused storage records exactly what a fresh run
    /// records.
    #[test]
    fn reused_storage_gives_the_same_records() {
        let c = example("buck_dcm.json");
        let fresh = || {
            let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
            sim.advance_to(1e-3).expect("runs");
            sim.finish()
        };
        let (a, old) = (fresh(), fresh());
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        sim.reuse_storage(old);
        sim.advance_to(1e-3).expect("runs");
        let b = sim.finish();
        assert!(a.events.len() > 100);
        assert_eq!(a.events, b.events);
        assert_eq!(a.waveform.segments, b.waveform.segments);
        assert_eq!(a.waveform.states, b.waveform.states);
    }

    /// Contract: the plain instant is only a shortcut of the general one,
    /// so every converter gives the same bits with and without it — states of every
    /// segment, the whole event log, and the counters.
    #[test]
    fn plain_instants_give_the_same_bits_as_the_general_path() {
        let mut plain_counts = vec![];
        // The example converters, and a synchronous buck with transition
        // models on both switches (ramp phases start and end at plain
        // instants).
        let ramps = crate::test_util::sync_buck(None, true);
        let runs = EXAMPLES
            .iter()
            .map(|&(file, stop)| (file, example(file), stop))
            .chain([("sync buck with transition models", ramps, 1e-3)]);
        for (file, c, stop) in runs {
            let run = |plain: bool| {
                let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
                sim.shortcuts.plain_instants = plain;
                sim.lane = plain;
                sim.advance_to(stop).expect("runs");
                let steps = (sim.plain_instants, sim.lane_steps);
                (sim.finish(), steps)
            };
            let ((a, steps), (b, _)) = (run(true), run(false));
            plain_counts.push((file, steps, a.stats.scheduled_events));
            assert!(a.events.len() > 10, "{file}: too few events to test");
            assert_eq!(
                a.events.to_json(),
                b.events.to_json(),
                "{file}: event logs differ"
            );
            // Down to the numbering of the stored snapshots.
            assert!(a.events == b.events, "{file}: event storage differs");
            assert_eq!(a.waveform.segments, b.waveform.segments, "{file}");
            let bits = |r: &RunResult| -> Vec<u64> {
                r.waveform.states.iter().map(|v| v.to_bits()).collect()
            };
            assert_eq!(bits(&a), bits(&b), "{file}: segment states differ");
            assert_eq!(a.stats, b.stats, "{file}: counters differ");
        }
        // The plain path must have carried the open-loop fixed-frequency
        // converters for most of their edges, and the lane (not with
        // transition models) for most of their intervals, or the test
        // proves nothing.
        for (file, (steps, lane), edges) in plain_counts {
            if ["buck.json", "boost.json", "sync_buck.json", "buck_dcm.json"].contains(&file) {
                assert!(
                    2 * lane > edges,
                    "{file}: the lane took only {lane} intervals for {edges} edges"
                );
            }
            if [
                "buck.json",
                "boost.json",
                "sync_buck.json",
                "buck_dcm.json",
                "sync buck with transition models",
            ]
            .contains(&file)
            {
                assert!(
                    2 * steps > edges,
                    "{file}: the plain path took only {steps} of {edges} edges"
                );
            }
        }
    }

    /// Contract: where the event limit or the chatter window stops a run,
    /// the plain path (which logs an instant's events together) stops it at the
    /// same event with the same diagnostic and the same log, including
    /// limits that fall between the two events of one instant.
    #[test]
    fn plain_instants_stop_at_the_same_event_as_the_general_path() {
        let c = example("buck.json");
        let stop = |opts: &Options, plain: bool| {
            let mut sim = Simulator::new(&c, opts.clone()).expect("compiles");
            sim.shortcuts.plain_instants = plain;
            sim.lane = plain;
            let err = sim.advance_to(2e-3).expect_err("must stop");
            let steps = sim.plain_instants;
            (format!("{err:?}"), sim.finish(), steps)
        };
        let mut cases: Vec<Options> = [401, 402, 777, 1000]
            .into_iter()
            .map(|max_events| Options {
                max_events,
                ..Options::default()
            })
            .collect();
        // 200 kHz: two instants of two events each per 5 µs period.
        for (chatter_events, chatter_window) in [(3, 2.5e-6), (4, 4.9e-6), (5, 5.2e-6)] {
            cases.push(Options {
                chatter_events,
                chatter_window,
                ..Options::default()
            });
        }
        let mut plain_used = 0;
        for opts in &cases {
            let (ea, a, steps) = stop(opts, true);
            let (eb, b, _) = stop(opts, false);
            plain_used += steps;
            assert_eq!(ea, eb, "{opts:?}");
            assert_eq!(a.events.to_json(), b.events.to_json(), "{opts:?}");
            assert_eq!(a.waveform.segments, b.waveform.segments, "{opts:?}");
        }
        assert!(
            plain_used > 100,
            "the plain path took only {plain_used} instants"
        );
        // In discontinuous conduction the lane logs the located turn-off
        // as a plain instant too (`lane_crossing`): limits at every event
        // of two periods (four events each: switch on; switch off and
        // diode on; diode off).
        let c = example("buck_dcm.json");
        let mut last_is_crossing = vec![];
        for max_events in 400..=408 {
            let opts = Options {
                max_events,
                ..Options::default()
            };
            let stop = |plain: bool| {
                let mut sim = Simulator::new(&c, opts.clone()).expect("compiles");
                sim.shortcuts.plain_instants = plain;
                sim.lane = plain;
                let err = sim.advance_to(2e-3).expect_err("must stop");
                (format!("{err:?}"), sim.finish())
            };
            let ((ea, a), (eb, b)) = (stop(true), stop(false));
            assert_eq!(ea, eb, "{max_events}");
            assert_eq!(a.events.to_json(), b.events.to_json(), "{max_events}");
            assert_eq!(a.waveform.segments, b.waveform.segments, "{max_events}");
            let last = a.events.iter().last().expect("events before the limit");
            last_is_crossing.push(last.cause == EventCause::Crossing);
        }
        // Where the log of limit m ends with a located turn-off, limit
        // m − 1 refused that turn-off itself: both must be among the cases.
        assert_eq!(last_is_crossing.iter().filter(|&&x| x).count(), 2);
        assert!(
            last_is_crossing[1..].contains(&true),
            "no limit fell on a located turn-off"
        );
    }

    /// Contract: the same holds when the run is advanced in pieces and
    /// records only a window.
    #[test]
    fn plain_instants_give_the_same_bits_when_stepped() {
        for file in ["buck.json", "buck_dcm.json", "sync_buck.json"] {
            let c = example(file);
            let stepped = |plain: bool| {
                let opts = Options {
                    record: Record::Window {
                        from: 2e-4,
                        to: 6e-4,
                    },
                    ..Options::default()
                };
                let mut sim = Simulator::new(&c, opts).expect("compiles");
                sim.shortcuts.plain_instants = plain;
                sim.lane = plain;
                for _ in 0..25 {
                    sim.advance_periods(3).expect("runs");
                }
                sim.advance_to(sim.time() + 1.234e-6).expect("runs");
                sim.advance_periods(2).expect("runs");
                let steps = sim.plain_instants;
                (sim.finish(), steps)
            };
            let ((a, steps), (b, _)) = (stepped(true), stepped(false));
            assert!(
                steps > 50,
                "{file}: the plain path took only {steps} instants"
            );
            assert!(a.events.len() > 10, "{file}: too few events to test");
            assert_eq!(a.events.to_json(), b.events.to_json(), "{file}");
            assert_eq!(a.waveform.segments, b.waveform.segments, "{file}");
            let bits = |r: &RunResult| -> Vec<u64> {
                r.waveform.states.iter().map(|v| v.to_bits()).collect()
            };
            assert_eq!(bits(&a), bits(&b), "{file}: segment states differ");
            assert_eq!(a.stats, b.stats, "{file}: counters differ");
        }
    }

    /// The buck in discontinuous conduction caches the lengths of its idle
    /// interval once they repeat, and the cached exponential agrees with
    /// the Taylor steps it replaces to a few units of the last place
    /// (both exact to rounding: `propagate.rs` notes; common practice).
    #[test]
    fn lengths_that_come_back_are_cached_and_agree() {
        // A light-load buck started near its steady state (demo values).
        let c = Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 12.0)
            .switch("S1", "in", "sw", "drive")
            .diode("D1", "gnd", "sw")
            .inductor("L1", "sw", "out", 10e-6)
            .capacitor_with_voltage("C1", "out", "gnd", 100e-6, 9.94)
            .resistor("Rload", "out", "gnd", 50.0)
            .pwm("drive", 100e3, 0.4)
            .build()
            .expect("valid");
        let run = |cache: bool| {
            let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
            sim.shortcuts.repeated_lengths = cache;
            // Long enough for the located instant to settle to its last
            // bits (the output capacitor's time constant is 5 ms).
            sim.advance_to(60e-3).expect("runs");
            sim.finish()
        };
        let (a, b) = (run(true), run(false));
        // Without the cache every idle interval is a Taylor advance; with
        // it most of the 6,000 are cached steps, and each exponential made
        // for them serves many intervals.
        let gained = a.stats.cache_hits - b.stats.cache_hits;
        let made = a.stats.exponentials - b.stats.exponentials;
        assert!(gained > 3000, "only {gained} idle intervals cached");
        assert!(
            20 * made < gained,
            "{made} exponentials for {gained} cached intervals"
        );
        assert_eq!(a.waveform.segments.len(), b.waveform.segments.len());
        let scale = b.waveform.states.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for (x, y) in a.waveform.states.iter().zip(&b.waveform.states) {
            assert!((x - y).abs() <= 1e-12 * scale, "{x} vs {y}");
        }
        for (s, t) in a.waveform.segments.iter().zip(&b.waveform.segments) {
            assert!((s.t0 - t.t0).abs() <= 1e-12 * 60e-3, "{} vs {}", s.t0, t.t0);
            assert_eq!(s.mode, t.mode);
        }
    }

    /// Under a controller the interval lengths move every period: they are
    /// advanced from the cached exponential of a nearby length and a short
    /// Taylor remainder, or from the cache of lengths that come back once
    /// the loop settles. Both agree with plain Taylor steps to 1e-12 of the
    /// states' scale, with the same modes and instants to 1e-12 of the run
    /// (e^{M(h₀+δ)} = e^{Mδ}e^{Mh₀}, exact to rounding either way; common
    /// practice).
    #[test]
    fn nearby_lengths_advance_as_the_taylor_path_does() {
        use crate::control::{Apply, Commands, Sampling};
        let run = |near: bool| {
            // A buck under a sampled PI loop, started away from its steady
            // state (demo values).
            let c = Circuit::builder()
                .voltage_source("Vin", "in", "gnd", 12.0)
                .switch("S1", "in", "sw", "drive")
                .diode("D1", "gnd", "sw")
                .inductor_with_current("L1", "sw", "out", 47e-6, 2.0)
                .capacitor_with_voltage("C1", "out", "gnd", 100e-6, 4.0)
                .resistor("Rload", "out", "gnd", 2.0)
                .pwm("drive", 100e3, 0.4)
                .build()
                .expect("valid");
            let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
            sim.shortcuts.nearby_lengths = near;
            let mut integral = 0.4;
            let pi = move |_t: f64, y: &[Option<f64>], cmd: &mut Commands| {
                let e = 4.8 - y[0].expect("the output is determined");
                integral = (integral + 200.0 * 10e-6 * e).clamp(0.0, 0.9);
                cmd.set_duty("drive", (0.01 * e + integral).clamp(0.0, 0.9));
            };
            let sampling = Sampling {
                inputs: vec!["out".into()],
                period: 10e-6,
                offset: 0.0,
                delay: 1e-6,
                apply: Apply::NextPeriod,
            };
            sim.add_controller(sampling, Box::new(pi)).expect("valid");
            sim.advance_to(100e-3).expect("runs");
            sim.finish()
        };
        let (a, b) = (run(true), run(false));
        assert_eq!(b.stats.near_steps, 0);
        assert!(
            a.stats.near_steps > 2000,
            "only {} nearby steps",
            a.stats.near_steps
        );
        // Once settled, the lengths come back to the bit and are cached.
        assert!(
            a.stats.cache_hits > b.stats.cache_hits + 10_000,
            "{:?} vs {:?}",
            a.stats,
            b.stats
        );
        compare_runs(&a, &b, 100e-3, "PI buck");
        // And every example converter.
        for &(file, stop) in EXAMPLES {
            let c = example(file);
            compare_runs(
                &run_nearby(&c, stop, true),
                &run_nearby(&c, stop, false),
                stop,
                file,
            );
        }
    }

    /// A discontinuous buck that settles over thousands of periods moves
    /// its diode turn-off a little every period: the state there comes
    /// from the exponential of an earlier turn-off (the anchor of its
    /// interval length) and a polynomial in the offset, a handful of
    /// exponentials for the whole run; the turn-off itself is found on that
    /// polynomial too. Agrees with the interval's own guard polynomial and
    /// the Taylor vectors of each turn-off's own length to 1e-12 of the
    /// states' scale, with
    /// the same modes and instants to 1e-12 of the run (e^{M(t₀+δ)} =
    /// e^{Mδ}e^{Mt₀}; common practice).
    #[test]
    fn a_moving_turn_off_is_advanced_from_an_anchor() {
        let c = crate::test_util::light_buck(8.5);
        let stop = 2000.0 / 250e3;
        let (a, b) = (run_nearby(&c, stop, true), run_nearby(&c, stop, false));
        assert_eq!(a.stats.state_events, 2000, "one turn-off a period");
        assert!(
            a.stats.near_steps >= 1900,
            "turn-offs from the anchor: {:?}",
            a.stats
        );
        assert!(
            a.stats.exponentials < 30,
            "a handful of exponentials: {:?}",
            a.stats
        );
        // And the turn-offs are located on the anchor's polynomial (two or
        // three terms) rather than the interval's own: all but the first
        // and those that left an anchor's reach before it had served 32
        // crossings (1,870 of 2,000).
        assert!(
            a.stats.near_crossings >= 1800 && b.stats.near_crossings == 0,
            "{:?} vs {:?}",
            a.stats,
            b.stats
        );
        compare_runs(&a, &b, stop, "settling DCM buck");
    }

    /// Two interleaved phases at light load, starting up (demo values):
    /// each diode turns off inside its period, in intervals whose modes
    /// carry both phases' guards, so the turn-offs found on the anchors'
    /// polynomials share one set of terms between guards and are merged
    /// with the other guard's search; anchors are made sparingly while the
    /// turn-offs move fast. They agree with the intervals' own polynomials and
    /// the Taylor vectors of each turn-off's length: instants to 1e-12 of
    /// the run, states to 1e-12 of their scale (e^{M(t₀+δ)} = e^{Mδ}e^{Mt₀};
    /// common practice).
    #[test]
    fn interleaved_turn_offs_are_located_near_their_anchors() {
        let f = 250e3;
        let c = test_util::interleaved_buck(
            test_util::Interleaved {
                phases: 2,
                f,
                duty: 0.3,
                vin: 12.0,
                l: 2.2e-6,
                i0: None,
                c: 470e-6,
                v0: 3.0,
                r: 30.0,
            },
            |_| (None, None),
        );
        let stop = 2000.0 / f;
        let (a, b) = (run_nearby(&c, stop, true), run_nearby(&c, stop, false));
        // Two turn-offs a period once the start-up's first periods are
        // past.
        assert!(a.stats.state_events >= 3900, "{:?}", a.stats);
        // The turn-offs move out of an anchor's reach every few periods
        // while the output rises: a new anchor (one exponential) each
        // time took 1,623 exponentials in this run and 40 % more time than
        // the Taylor terms; at most one per 32 crossings of a length now
        // (73 here), and none where the crossing moves by half a reach a
        // period.
        assert!(a.stats.exponentials < 100, "{:?}", a.stats);
        assert!(
            a.stats.near_crossings >= 200 && b.stats.near_crossings == 0,
            "{:?} vs {:?}",
            a.stats,
            b.stats
        );
        compare_runs(&a, &b, stop, "two-phase DCM buck");
    }

    /// Runs `c` for `stop` seconds with the `nearby_lengths` shortcut on
    /// or off.
    fn run_nearby(c: &Circuit, stop: f64, near: bool) -> RunResult {
        let mut sim = Simulator::new(c, Options::default()).expect("compiles");
        sim.shortcuts.nearby_lengths = near;
        sim.advance_to(stop).expect("runs");
        sim.finish()
    }

    /// Asserts two runs of the same circuit agree: the same modes, segment
    /// ends within 1e-12 of `stop`, states within 1e-12 of their scale.
    fn compare_runs(a: &RunResult, b: &RunResult, stop: f64, what: &str) {
        assert_eq!(
            a.waveform.segments.len(),
            b.waveform.segments.len(),
            "{what}"
        );
        let scale = b.waveform.states.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for (x, y) in a.waveform.states.iter().zip(&b.waveform.states) {
            assert!((x - y).abs() <= 1e-12 * scale, "{what}: {x} vs {y}");
        }
        for (s, t) in a.waveform.segments.iter().zip(&b.waveform.segments) {
            assert!(
                (s.t1 - t.t1).abs() <= 1e-12 * stop,
                "{what}: {} vs {}",
                s.t1,
                t.t1
            );
            assert_eq!(s.mode, t.mode, "{what}");
        }
    }

    /// Guard polynomials cached per interval length locate the same
    /// turn-offs as the Taylor expansion, to a few units of the last place
    /// of the period, and give the same states to 1e-12 of their scale
    /// (both are the exact solution up to rounding; common practice).
    #[test]
    fn cached_guard_polynomials_locate_as_the_expansion_does() {
        let c = example("buck_dcm.json");
        let run = |cached: bool| {
            let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
            sim.shortcuts.guard_polynomials = cached;
            sim.advance_to(5e-3).expect("runs");
            let used = sim
                .modes
                .caches
                .iter()
                .map(|c| c.polys.len())
                .sum::<usize>();
            (sim.finish(), used)
        };
        let ((a, used), (b, unused)) = (run(true), run(false));
        assert!(used > 0 && unused == 0, "cache used {used}, {unused}");
        assert!(a.stats.state_events > 400, "{:?}", a.stats);
        assert_eq!(a.stats.state_events, b.stats.state_events);
        assert_eq!(a.events.len(), b.events.len());
        // 200 kHz.
        let period = 5e-6;
        for (x, y) in a.events.iter().zip(b.events.iter()) {
            assert_eq!((x.kind, x.element), (y.kind, y.element));
            assert!(
                (x.time - y.time).abs() <= 1e-12 * period,
                "{} vs {}",
                x.time,
                y.time
            );
        }
        let scale = b.waveform.states.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for (x, y) in a.waveform.states.iter().zip(&b.waveform.states) {
            assert!((x - y).abs() <= 1e-12 * scale, "{x} vs {y}");
        }
    }

    /// The example converters that switch at a fixed frequency or under
    /// a loop of their own (the first ten of the shared list).
    const EXAMPLES: &[(&str, f64)] = test_util::EXAMPLES.split_at(10).0;

    /// Contract: the gate signals' fronts kept side by side are only a
    /// shortcut of the pass over their queues, so the same bits — states
    /// of every segment, the event log and the counters — for every
    /// example converter, the twelve-phase buck over 50 periods, a
    /// three-phase buck whose duty cycles and delays a sampled controller
    /// changes every 4 µs (each change rewrites the queues), and one whose
    /// second phase starts late and third stops early (a queue that runs
    /// empty for good).
    #[test]
    fn gate_fronts_give_the_same_bits_as_the_pass_over_the_queues() {
        use crate::control::{Commands, Sampling};
        // Three phases, 200 kHz, the duty and delays moved by a controller
        // (demo values).
        let three = |limits: bool| {
            test_util::interleaved_buck(
                test_util::Interleaved {
                    phases: 3,
                    f: 200e3,
                    duty: 0.3,
                    vin: 12.0,
                    l: 4.7e-6,
                    i0: Some(1.0),
                    c: 47e-6,
                    v0: 3.0,
                    r: 1.0,
                },
                |k| match (limits, k) {
                    (true, 2) => (Some(21e-6), None),
                    (true, 3) => (None, Some(203e-6)),
                    _ => (None, None),
                },
            )
        };
        let run = |c: &Circuit, stop: f64, fronts: bool, control: bool| {
            let mut sim = Simulator::new(c, Options::default()).expect("compiles");
            sim.sched.queues.keep &= fronts;
            if control {
                let mut n = 0u32;
                let step = move |_t: f64, y: &[Option<f64>], cmd: &mut Commands| {
                    n += 1;
                    let e = 3.3 - y[0].expect("the output is determined");
                    let d = (0.3 + 0.05 * e).clamp(0.05, 0.9);
                    for k in 1..=3 {
                        cmd.set_duty(&format!("ph{k}"), d);
                    }
                    // Every third sample, a phase's delay moves too.
                    if n.is_multiple_of(3) {
                        let k = 1 + n % 3 + (n / 3) % 2;
                        cmd.set_delay(&format!("ph{k}"), 0.1e-6 * f64::from(n % 7));
                    }
                };
                let sampling = Sampling {
                    inputs: vec!["out".into()],
                    period: 4e-6,
                    ..Sampling::default()
                };
                sim.add_controller(sampling, Box::new(step)).expect("valid");
            }
            sim.advance_to(stop).expect("runs");
            let used = sim.sched.queues.from_fronts;
            (sim.finish(), used)
        };
        let mut cases: Vec<(String, Circuit, f64, bool)> = test_util::EXAMPLES
            .iter()
            .map(|&(file, stop)| (file.to_string(), example(file), stop, false))
            .collect();
        cases.push((
            "interleaved_buck_12.json, 50 periods".into(),
            example("interleaved_buck_12.json"),
            200e-6,
            false,
        ));
        cases.push((
            "three phases, one starting late, one stopping early".into(),
            three(true),
            400e-6,
            false,
        ));
        cases.push((
            "three phases under control".into(),
            three(false),
            400e-6,
            true,
        ));
        let mut fronts_used = vec![];
        for (what, c, stop, control) in &cases {
            let ((a, used), (b, unused)) = (
                run(c, *stop, true, *control),
                run(c, *stop, false, *control),
            );
            assert_eq!(unused, 0, "{what}");
            fronts_used.push((what.clone(), used, a.stats.scheduled_events));
            assert_eq!(
                a.events.to_json(),
                b.events.to_json(),
                "{what}: event logs differ"
            );
            assert_eq!(a.waveform.segments, b.waveform.segments, "{what}");
            let bits = |r: &RunResult| -> Vec<u64> {
                r.waveform.states.iter().map(|v| v.to_bits()).collect()
            };
            assert_eq!(bits(&a), bits(&b), "{what}: segment states differ");
            assert_eq!(a.stats, b.stats, "{what}: counters differ");
        }
        // The fronts must have answered most look-ups of the twelve phases
        // and of the phases under control (three signals or more, many
        // periods), or the test proves nothing.
        let n = fronts_used.len();
        for (what, used, edges) in [&fronts_used[n - 3], &fronts_used[n - 1]] {
            assert!(
                2 * *used as usize > *edges && *edges > 200,
                "{what}: fronts used {used} times for {edges} scheduled events"
            );
        }
    }

    /// Contract: replaying a remembered transition is only a shortcut, so
    /// every converter gives the same bits with and without it — states of
    /// every segment and the whole event log.
    #[test]
    fn replay_gives_the_same_bits_as_the_full_search() {
        for &(file, stop) in EXAMPLES {
            let a = run(file, stop, true);
            let b = run(file, stop, false);
            assert!(a.events.len() > 10, "{file}: too few events to test");
            assert_eq!(
                a.events.to_json(),
                b.events.to_json(),
                "{file}: event logs differ"
            );
            assert_eq!(
                a.waveform.segments.len(),
                b.waveform.segments.len(),
                "{file}"
            );
            let bits = |r: &RunResult| -> Vec<u64> {
                r.waveform.states.iter().map(|v| v.to_bits()).collect()
            };
            assert_eq!(bits(&a), bits(&b), "{file}: segment states differ");
        }
    }
}
