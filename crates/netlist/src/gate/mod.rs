//! Gate signals that drive switches: fixed-frequency PWM, a complementary
//! half-bridge pair with dead times, explicit transition lists, and the
//! closed-loop gates that compare a circuit output with a threshold.
//!
//! Every edge time of a periodic signal is computed as `k·period + phase`
//! from the cycle number `k` and a phase that is the same `f64` in every
//! cycle — never by accumulating periods — so edge times do not drift and
//! the interval between two given edges has the same bits in every cycle.
//!
//! The parts, each depending only on the ones before it:
//!
//! - `format`: [`Gate`] and [`Transition`], the shapes written in JSON;
//! - `comparator`: [`ComparatorSpec`] and [`Comparison`], what a
//!   closed-loop gate compares ([`Gate::comparator`]);
//! - `edges`: [`SignalShape`] and [`Edge`], each signal as periodic
//!   transitions ([`Gate::signals`]) and the exact edge times within a
//!   window.

mod comparator;
mod edges;
mod format;

pub use comparator::{ComparatorSpec, Comparison};
pub use edges::{Edge, SignalShape};
pub use format::{Gate, Transition};
