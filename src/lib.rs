//! fluxstep: exact switching simulation of power converters.
//!
//! This facade re-exports the pipeline's crates in data-flow order:
//! [`netlist`] (circuit description, JSON, validation) → [`solver`] (exact
//! piecewise-linear transient: modes, matrix exponentials, located events)
//! → [`analysis`] (periodic steady state and its stability, small-signal
//! response, sweeps over operating points and tolerances) → [`plot`]
//! (SVG design-review figures) → [`report`] (the design-review page: one
//! self-contained HTML file, `report::write`). The `fluxstep` binary
//! (fluxstep-cli) wires the same crates to JSON files.
//!
//! Simulation results do not replace measurement on real hardware, local
//! electrical codes or qualified review, least of all where mains voltages
//! or large stored energies are involved.
//!
//! # Example
//!
//! ```
//! use fluxstep::netlist::Circuit;
//! use fluxstep::solver::{simulate, Options};
//!
//! // Inverting buck-boost, 12 V in, 100 kHz, 60 % duty: Vout ≈ −D/(1−D)·Vin.
//! let c = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 12.0)
//!     .switch("S1", "in", "sw", "drive")
//!     .inductor("L1", "sw", "gnd", 100e-6)
//!     .diode("D1", "out", "sw")
//!     .capacitor("C1", "out", "gnd", 220e-6)
//!     .resistor("Rload", "out", "gnd", 20.0)
//!     .pwm("drive", 100e3, 0.6)
//!     .build()
//!     .unwrap();
//! let run = simulate(&c, 20e-3, Options::default()).unwrap();
//! let out = run.waveform.output("out").unwrap();
//! let v = run.waveform.average(out, 19.9e-3, 20e-3);
//! assert!((v + 18.0).abs() < 0.5, "{v}");
//! ```

pub use fluxstep_analysis as analysis;
pub use fluxstep_netlist as netlist;
pub use fluxstep_plot as plot;
pub use fluxstep_report as report;
pub use fluxstep_solver as solver;

/// The README's Rust examples, compiled and run as doctests.
#[doc = include_str!("../README.md")]
#[cfg(doctest)]
pub struct ReadmeDoctests;
