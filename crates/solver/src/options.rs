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

/// The automatic chatter window as a fraction of the circuit's time scale
/// (see [`Options::chatter_window`]): 2e-7, i.e. 1 ps at 200 kHz. Ideal
/// parts chatter at a single instant or within rounding of it, so any
/// window far below a switching period and far above the rounding of
/// time (2e-16 of it) separates chatter from fast but real switching.
pub const CHATTER_FRACTION: f64 = 2e-7;

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
    /// Default 0: automatic, [`CHATTER_FRACTION`] of the circuit's own
    /// time scale — its shortest gate period, or without periodic gates
    /// 2π/ρ of the first mode (ρ bounds its fastest dynamics), or 1e-12 s
    /// when neither exists. So a 200 kHz converter gets 1 ps, and the
    /// same converter scaled to 200 THz gets 1e-21 s. A positive value is
    /// taken as the window in seconds. The window for `chatter_events`.
    pub chatter_window: f64,
    /// Default [`DEFAULT_MEMORY_BUDGET`] (2 GiB). Bytes the recorded
    /// waveform and event log may occupy together; a run whose record
    /// would grow past it stops with [`crate::SolverError::MemoryBudget`]
    /// (what was recorded up to there is kept). Raise it for long records
    /// on a machine with the memory, or record a window instead of
    /// everything ([`Record::Window`]).
    pub memory_budget: usize,
    /// Default `Some(`[`DEFAULT_ENERGY_TOLERANCE`]`)`. The run's energy
    /// certificate (see [`crate::EnergyCertificate`]) is brought up to date
    /// at the end of every `advance_to`; a residual beyond this fraction of
    /// its largest term stops the run with
    /// [`crate::SolverError::EnergyBalance`]. `None` skips the check (and
    /// its cost: a few quadratic forms per recorded segment, more where
    /// lengths do not repeat).
    pub energy_tolerance: Option<f64>,
}

/// The energy certificate's default tolerance: 1e-6 of the largest term of
/// the balance. Exact runs of the example circuits stay below 1e-11; a
/// residual of a millionth means the numbers cannot be trusted.
pub const DEFAULT_ENERGY_TOLERANCE: f64 = 1e-6;

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
            chatter_window: 0.0,
            memory_budget: DEFAULT_MEMORY_BUDGET,
            energy_tolerance: Some(DEFAULT_ENERGY_TOLERANCE),
        }
    }
}
