//! Circuit description for fluxstep: the first stage of the pipeline
//! (JSON file or builder → **netlist** → solver → analysis → plot).
//!
//! A [`Circuit`] holds named [`Element`]s on named nodes and the [`Gate`]
//! signals that drive its switches, all in SI units. It reads and writes JSON
//! ([`Circuit::from_json`], [`Circuit::to_json`]), where every value may be a
//! number or a string with an SI prefix (see [`parse_si`]), and it is
//! validated as a whole ([`Circuit::validate`]): every problem is reported
//! at once, each naming the element, field and node.
//!
//! # Brief overview
//!
//! - [`Circuit`] and [`CircuitBuilder`]: the description and a builder that
//!   reads like a schematic.
//! - [`Element`]: resistor, inductor, capacitor, coupled inductors, ideal
//!   transformer, voltage and current sources, switch, diode.
//! - [`Stimulus`]: constant, piecewise-linear and sine sources.
//! - [`Gate`] and [`SignalShape`]: PWM, complementary PWM with dead time,
//!   explicit transitions; exact edge times.
//! - [`TimingRule`] and [`TimingCheck`]: timing rules of the run settings
//!   (dead time, on-time, diode conduction, …), evaluated by the analysis
//!   crate.
//! - [`NetlistError`] and [`Problem`]: what went wrong and where.
//! - [`graph::UnionFind`]: the disjoint sets behind every connectivity
//!   check, shared with the solver.
//! - [`si`]: SI prefixes both ways — the one formatter of every number
//!   fluxstep prints for people ([`si::format_si_digits`],
//!   [`si::format_si_short`], [`si::format_si_instant`]) and the serde
//!   helpers that read prefixed values.
//!
//! Sign convention: an element's voltage is v(first terminal) − v(second)
//! and its current flows first → second through it. Ground is `gnd` (`0`
//! is an alias).
//!
//! # Example
//!
//! ```
//! use fluxstep_netlist::Circuit;
//!
//! let boost = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 5.0)
//!     .inductor("L1", "in", "sw", 10e-6)
//!     .switch("S1", "sw", "gnd", "drive")
//!     .diode("D1", "sw", "out")
//!     .capacitor("C1", "out", "gnd", 47e-6)
//!     .resistor("Rload", "out", "gnd", 10.0)
//!     .pwm("drive", 200e3, 0.5)
//!     .build()
//!     .unwrap();
//! let text = boost.to_json();
//! assert_eq!(Circuit::from_json(&text).unwrap(), boost);
//! ```

// Every public item is part of the format users write by hand or of the
// embedding API, so each one must say what it means.
#![deny(missing_docs)]

mod builder;
mod circuit;
mod element;
mod error;
mod gate;
pub mod graph;
mod json;
mod limits;
mod loss_data;
mod resolution;
pub mod si;
mod stimulus;
mod timing;
mod validate;
mod value;

pub use builder::CircuitBuilder;
pub use circuit::{
    is_ground, Circuit, Compensator, CompensatorLaw, InterruptionPolicy, OutputName, RunSettings,
    ShootThroughPolicy, GROUND, OUTPUT_FORMS,
};
pub use element::*;
pub use error::{NetlistError, Problem};
pub use gate::{ComparatorSpec, Comparison, Edge, Gate, SignalShape, Transition};
pub use limits::{DesignLimits, PartLimit};
pub use loss_data::{CoreModel, EnergyCurve, EnergyPoint, EnergyTable, SwitchingEnergy};
pub use resolution::{MAX_DIODES, MAX_SWITCHES, MIN_DURATION_RATIO};
pub use stimulus::{LinearPiece, Point, Stimulus};
pub use timing::{EdgeSense, TimingCheck, TimingRule};
pub use value::{parse_si, ValueError, PREFIXES};

/// The JSON Schema of the circuit format, as pretty JSON text.
pub fn json_schema() -> String {
    let schema = schemars::schema_for!(Circuit);
    serde_json::to_string_pretty(&schema).expect("a schema always serializes") + "\n"
}
