//! Exact transient solver for switching converters: the second stage of the
//! pipeline (netlist → **solver** → analysis → plot).
//!
//! Between two switching events a circuit of ideal switches, diodes, R, L,
//! C, coupled inductors and sources is linear and time-invariant, so the
//! solver advances it **exactly** with a matrix exponential instead of
//! integrating step by step. Switching instants are scheduled (gate edges,
//! source corners, controller samples) or located on the exact solution to
//! machine precision (diode turn-on and turn-off, comparator thresholds of
//! closed-loop gates). Analog compensators are states of the same linear
//! system, so closed loops are exact too.
//!
//! # Brief overview
//!
//! - [`Simulator`]: compile a [`fluxstep_netlist::Circuit`], advance it to a
//!   time or by whole periods, read its state in between.
//! - [`simulate`]: one call from t = 0 to a stop time, returning a
//!   [`RunResult`].
//! - [`Waveform`]: exact dense output — any output at any instant, vertices
//!   for drawing, exact integrals.
//! - [`EventLog`]: every event with its cause, element and state;
//!   [`EventLog::compare`] against a golden log with [`Tolerances`].
//! - [`Options`]: what to record, how to treat interrupted inductors and
//!   resistive shoot-through.
//! - [`Shortcuts`]: the solver's shortcuts, each of which can be turned
//!   off to prove in a test that it changes nothing.
//! - [`control`]: sampled controllers written in Rust ([`control::Controller`]).
//! - [`measure`]: exact averages, RMS, extremes and element power.
//! - [`SolverError`]: diagnostics that name elements, nodes and times.
//!
//! # Stages
//!
//! [`Simulator::advance_to`] is one loop whose lines are stages in files of
//! their own: the next scheduled instant (`run/schedule.rs`) → the
//! interval's length (`run/instant.rs`) → the exact advance over it
//! (`run/advance.rs`) → the earliest state event inside it
//! (`run/locate.rs`, on the tolerances and root finders of `crossing/`) →
//! the end of the interval, at that event or at the scheduled instant
//! (`run/finish.rs`, `run/enter.rs`), with the conduction pattern that
//! follows (`run/resolve.rs`, `run/replay.rs`, `run/lcp.rs`,
//! `run/checks.rs`) and the record (`run/record.rs`). The lane
//! (`run/lane.rs`) runs stretches of cached periodic intervals with the
//! same functions. Each stage counts its work in [`Stats`]; the
//! `stage-timers` feature adds its wall time. Modes are built in named
//! steps (`mode/`). The map of stages, what each container owns, where a
//! change goes and which invariants the contract tests pin:
//! `docs/architecture.md` in the repository.
//!
//! # Example
//!
//! ```
//! use fluxstep_netlist::Circuit;
//! use fluxstep_solver::{simulate, Options};
//!
//! // Asynchronous buck, 12 V in, 100 kHz, 50 % duty.
//! let buck = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 12.0)
//!     .switch("S1", "in", "sw", "drive")
//!     .diode("D1", "gnd", "sw")
//!     .inductor("L1", "sw", "out", 100e-6)
//!     .capacitor("C1", "out", "gnd", 100e-6)
//!     .resistor("Rload", "out", "gnd", 5.0)
//!     .pwm("drive", 100e3, 0.5)
//!     .build()
//!     .unwrap();
//! let run = simulate(&buck, 2e-3, Options::default()).unwrap();
//! let out = run.waveform.output("out").unwrap();
//! let v = run.waveform.average(out, 1.9e-3, 2e-3);
//! assert!((v - 6.0).abs() < 0.3);
//! ```

// Every public item is part of the embedding API.
#![deny(missing_docs)]

mod compile;
pub mod control;
mod crossing;
pub mod dynamics;
mod envelope;
mod error;
mod events;
pub mod measure;
mod mode;
mod near;
mod options;
mod propagate;
mod run;
mod states;
#[cfg(test)]
mod test_util;
mod waveform;
mod waveform_ext;
mod waveform_integral;

pub use dynamics::{Crossed, SegmentDynamics};
pub use error::SolverError;
pub use events::{
    CompareError, Comparison, Difference, DifferenceKind, Event, EventCause, EventKind, EventLog,
    EventRef, SwitchEdge, Tolerances,
};
pub use mode::ModeKey;
pub use options::{
    OnInterruption, OnShootThrough, Options, Record, CHATTER_FRACTION, DEFAULT_ENERGY_TOLERANCE,
    DEFAULT_MEMORY_BUDGET,
};
pub use propagate::eigenvalues;
pub use run::paths::Shortcuts;
#[cfg(feature = "stage-timers")]
pub use run::StageTimes;
pub use run::{simulate, EnergyCertificate, RunResult, SegmentSink, SegmentView, Simulator, Stats};
pub use states::{state_counts, StateCounts};
pub use waveform::{OutputId, Segment, Side, TransitionSpan, ValueError, Waveform};
