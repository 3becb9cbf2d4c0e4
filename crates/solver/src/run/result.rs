//! What a run hands back: its counters, its records, and the view of a
//! segment a sink receives.

use nalgebra::DVector;

use super::{dot_iter, EnergyCertificate};
use crate::events::EventLog;
use crate::mode::Mode;
use crate::propagate;
use crate::waveform::{OutputId, Waveform};

/// Counters of a run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Stats {
    /// Scheduled instants processed (gate edges, source corners, stop).
    pub scheduled_events: usize,
    /// State events located (diode turn-on/turn-off).
    pub state_events: usize,
    /// Distinct modes compiled.
    pub modes: usize,
    /// Intervals advanced with a cached matrix exponential.
    pub cache_hits: usize,
    /// Matrix exponentials computed.
    pub exponentials: usize,
    /// Intervals advanced from the cached exponential of a nearby length
    /// and a short Taylor remainder.
    pub near_steps: usize,
    /// Crossings located on the polynomial of a nearby length about an
    /// earlier crossing (two or three terms) instead of the interval's own
    /// polynomial (`locate.rs`).
    pub near_crossings: usize,
    /// Stiff spans: intervals that the Taylor rule would split into more
    /// than 64 sub-steps, advanced by one exponential instead (see
    /// `propagate.rs`). 0 for ordinary converters.
    pub stiff_spans: usize,
    /// Sub-intervals scanned for state events in stiff spans (their
    /// lengths grow as fast decaying modes die out, see `locate.rs`).
    pub stiff_substeps: usize,
    /// Stiff spans, or their rests, left unscanned because the energy
    /// envelope keeps every guard above its zero band (`envelope.rs`).
    pub envelope_skips: usize,
    /// Intervals whose end-point checks could not rule a crossing out, so
    /// event location searched them (`locate.rs`).
    pub searched_intervals: usize,
    /// Transitions between conduction patterns replayed from memory
    /// (`replay.rs`), at located and scheduled instants alike.
    pub replayed_transitions: usize,
    /// Conduction patterns found by the full resolution (principal
    /// pivoting, then the search by distance) where no remembered
    /// transition applied (`resolve.rs`).
    pub resolved_patterns: usize,
}

/// Wall time spent in each stage of the loop (see docs/architecture.md),
/// kept only with the crate's `stage-timers` feature: two clock reads per
/// stage call, for profiling; without the feature the loop has none.
#[cfg(feature = "stage-timers")]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct StageTimes {
    /// Stage 1: the next scheduled instant (`next_scheduled`).
    pub schedule: std::time::Duration,
    /// Stage 2: the exact advance over the interval (`step`).
    pub advance: std::time::Duration,
    /// Stage 3: event location (`locate`).
    pub locate: std::time::Duration,
    /// Stages 4 and 5: ending the interval, at a located crossing with the
    /// pattern that follows (`enter_crossing`) or at its scheduled end with
    /// its record (`finish_interval`).
    pub finish: std::time::Duration,
    /// Stage 5b: the scheduled instant (`apply_scheduled`).
    pub instants: std::time::Duration,
    /// The lane (`run_lane`): stretches of cached periodic intervals, all
    /// of their stages together.
    pub lane: std::time::Duration,
}

/// A view of one finished segment, handed to a streaming sink.
pub struct SegmentView<'a> {
    /// Start (s).
    pub t0: f64,
    /// End (s).
    pub t1: f64,
    pub(super) mode: &'a Mode,
    pub(super) z0: &'a DVector<f64>,
}

impl SegmentView<'_> {
    /// Value of an output at `t` in [t0, t1]; `None` if undetermined.
    pub fn value(&self, id: OutputId, t: f64) -> Option<f64> {
        if *self.mode.undetermined.get(id.0)? {
            return None;
        }
        let z = propagate::advance(
            &self.mode.m,
            &self.mode.weight,
            self.mode.rate,
            self.z0,
            (t - self.t0).max(0.0),
        );
        Some(dot_iter(
            self.mode.c.row(id.0).iter().copied(),
            z.as_slice(),
        ))
    }
}

/// A streaming receiver of segments (for runs too long to keep).
pub type SegmentSink = Box<dyn FnMut(&SegmentView<'_>)>;

/// The result of a finished run.
#[derive(Debug)]
pub struct RunResult {
    /// The recorded waveform.
    pub waveform: Waveform,
    /// The recorded events.
    pub events: EventLog,
    /// Counters.
    pub stats: Stats,
    /// The energy balance over the recorded segments (see
    /// [`crate::Options::energy_tolerance`]).
    pub certificate: EnergyCertificate,
}

#[cfg(test)]
mod tests {
    use crate::options::Options;
    use crate::run::Simulator;
    use crate::test_util::example;

    /// Every resolution of a conduction pattern is either a replayed
    /// transition or a full one, so a run without replay resolves in full
    /// exactly as often as one with it replays and resolves together; and
    /// every located event was first an interval searched.
    #[test]
    fn stage_counters_add_up() {
        for file in ["buck_dcm.json", "boost.json", "flyback.json"] {
            let c = example(file);
            let run = |replay: bool| {
                let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
                sim.shortcuts.replay = replay;
                sim.advance_to(1e-3).expect("runs");
                sim.stats()
            };
            let (on, off) = (run(true), run(false));
            assert!(on.replayed_transitions > 100, "{file}: {on:?}");
            assert_eq!(off.replayed_transitions, 0, "{file}");
            assert_eq!(
                on.replayed_transitions + on.resolved_patterns,
                off.resolved_patterns,
                "{file}"
            );
            assert!(on.searched_intervals >= on.state_events, "{file}: {on:?}");
            assert!(on.state_events > 0, "{file}: {on:?}");
        }
    }

    /// With the `stage-timers` feature every stage of the loop has run
    /// for some time (wired to its own counter).
    #[cfg(feature = "stage-timers")]
    #[test]
    fn stage_timers_cover_every_stage() {
        let c = example("buck_dcm.json");
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        sim.lane = false;
        sim.advance_to(1e-3).expect("runs");
        let t = sim.stage_times();
        let zero = std::time::Duration::ZERO;
        for (name, d) in [
            ("schedule", t.schedule),
            ("advance", t.advance),
            ("locate", t.locate),
            ("finish", t.finish),
            ("instants", t.instants),
        ] {
            assert!(d > zero, "{name}: {t:?}");
        }
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        sim.advance_to(1e-3).expect("runs");
        assert!(sim.stage_times().lane > zero);
    }
}
