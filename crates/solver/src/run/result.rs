//! What a run hands back: its counters, its records, and the view of a
//! segment a sink receives.

use nalgebra::DVector;

use super::dot_iter;
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
    /// Stiff spans: intervals that the Taylor rule would split into more
    /// than 64 sub-steps, advanced by one exponential instead (see
    /// `propagate.rs`). 0 for ordinary converters.
    pub stiff_spans: usize,
    /// Sub-intervals scanned for state events in stiff spans (their
    /// lengths grow as fast decaying modes die out, see `locate.rs`).
    pub stiff_substeps: usize,
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
}
