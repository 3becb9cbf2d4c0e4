//! Run options: one plain struct; every field's doc starts with its default.

/// What to do when a mode leaves inductor current with no path.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum OnInterruption {
    /// Default. Stop the run with [`crate::SolverError::InductorInterrupted`].
    #[default]
    Stop,
    /// Continue with the flux-conserving jump (inductors left in series
    /// share current by conservation of flux linkage) and record the energy
    /// dumped as a [`crate::EventKind::FluxJump`] event.
    ConserveFlux,
}

/// What to do when closed switches short a voltage source or a capacitor
/// through their on-resistance (both switches of a half-bridge on at once).
/// A short with no resistance at all always stops the run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum OnShootThrough {
    /// Default. Stop the run with [`crate::SolverError::ShortCircuit`].
    #[default]
    Stop,
    /// Record a [`crate::EventKind::ShootThrough`] event each time the
    /// short begins and go on (the current is limited by the resistances).
    Record,
}

/// Which part of the run to keep.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub enum Record {
    /// Default. Keep every segment and event.
    #[default]
    All,
    /// Keep segments and events that overlap [from, to] only; memory stays
    /// bounded however long the run.
    Window {
        /// Start (s).
        from: f64,
        /// End (s).
        to: f64,
    },
    /// Keep nothing (a sink, if set, still sees every segment).
    Nothing,
}

/// Options of a transient run.
#[derive(Clone, Debug)]
pub struct Options {
    /// Default `Record::All`. What to keep in the waveform and event log.
    pub record: Record,
    /// Default `Stop`. Stop or conserve flux when an inductor current is interrupted.
    pub on_interruption: OnInterruption,
    /// Default `Stop`. Stop or record when closed switches short a source
    /// or capacitor through their on-resistance.
    pub on_shoot_through: OnShootThrough,
    /// Default 1e9. The run stops with an error after this many events.
    pub max_events: usize,
    /// Default 200. More events than this within `chatter_window` stop the
    /// run with a chatter diagnostic instead of hanging.
    pub chatter_events: usize,
    /// Default 1e-12 s. Window for `chatter_events`; lower it for circuits
    /// that switch faster than a few nanoseconds.
    pub chatter_window: f64,
    /// Default [`DEFAULT_MEMORY_BUDGET`] (2 GiB). Bytes the recorded
    /// waveform and event log may occupy together; a run whose record
    /// would grow past it stops with [`crate::SolverError::MemoryBudget`]
    /// (what was recorded up to there is kept). Raise it for long records
    /// on a machine with the memory, or record a window instead of
    /// everything ([`Record::Window`]).
    pub memory_budget: usize,
}

/// The default of [`Options::memory_budget`]: 2 GiB, which a laptop can
/// hold beside the rest of the process.
pub const DEFAULT_MEMORY_BUDGET: usize = 2 << 30;

impl Default for Options {
    fn default() -> Self {
        Options {
            record: Record::All,
            on_interruption: OnInterruption::Stop,
            on_shoot_through: OnShootThrough::Stop,
            max_events: 1_000_000_000,
            chatter_events: 200,
            chatter_window: 1e-12,
            memory_budget: DEFAULT_MEMORY_BUDGET,
        }
    }
}
