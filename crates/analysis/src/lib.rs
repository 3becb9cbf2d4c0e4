//! Analyses above the exact transient: the third stage of the pipeline
//! (netlist → solver → **analysis** → plot).
//!
//! The solver advances a circuit exactly between switching events; this
//! crate asks it the questions a power-supply designer asks of a whole
//! design, starting with the periodic steady state and its stability.
//! It reads the solver's record of a run through the sensitivity seam of
//! [`fluxstep_solver::dynamics`] (each segment's exact dynamics, the jump
//! on entering a mode, the guard at a located event) and never reopens
//! the transient loop.
//!
//! # Brief overview
//!
//! - [`steady::find`]: the periodic steady state by shooting — Newton's
//!   method on the exact period map with its exact Jacobian (transition
//!   matrices and saltation matrices) — returning a [`steady::SteadyState`]
//!   with the state at period start, the one-period waveform and event log,
//!   measurements, Floquet multipliers and the iteration history.
//! - [`steady::SteadyOptions`]: tolerance, iteration and time limits, period
//!   multiple, settling periods before the first iterate.
//! - [`response::frequency_response`]: the exact small-signal response of
//!   any output to a source value, a duty cycle, a reference, a comparator's
//!   sense input or a current injected into a node, from the linearised
//!   switched model (no averaging); [`response::loop_gain`] with crossover
//!   and phase and gain margins.
//! - [`sweep`]: sweeps over operating points, tolerance corners and Monte
//!   Carlo samples ([`sweep::Sweep`]), run in parallel with identical bits
//!   whatever the thread count, or in shards merged into the same table.
//! - [`losses`]: conduction and jump losses of every part from the exact
//!   integrals, efficiency and the energy balance over a window
//!   ([`losses::breakdown`] → [`losses::LossReport`]); junction
//!   temperature from Foster networks ([`losses::thermal`]); switching
//!   energies from datasheet tables at each edge's exact current and
//!   voltage ([`losses::switching`]).
//! - [`timing`]: timing rules (dead time, on-time, diode conduction,
//!   hard turn-on, delays, output bands) over a recorded run, with the
//!   worst-case margin of each, and golden event-log comparison in a
//!   designer's words; `assert_timing` / `assert_matches_golden` for tests.
//! - [`AnalysisError`]: every failure, naming what it concerns.
//!
//! # Example
//!
//! ```
//! use fluxstep_analysis::steady::{find, SteadyOptions};
//! use fluxstep_netlist::Circuit;
//!
//! // Asynchronous buck in continuous conduction: 12 V, 50 % duty.
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
//! let ss = find(&buck, &SteadyOptions::default()).unwrap();
//! // The period map is affine for a fixed event sequence: one Newton step.
//! assert!(ss.iterations.len() <= 3);
//! let vout = ss.measurement("out").unwrap().average;
//! assert!((vout - 6.0).abs() < 0.05); // D·Vin, less the small ripple effect
//! assert!(ss.is_stable());
//! ```

// Every public item is part of the embedding API.
#![deny(missing_docs)]

mod error;
pub mod losses;
pub mod response;
pub mod steady;
pub mod sweep;
pub mod timing;

pub use error::AnalysisError;
