//! Event location's one home: what counts as zero ([`Scales`] and the
//! tolerances derived from them), the root finders on guard polynomials
//! and on exact solutions ([`roots`]), and the named result of a search
//! ([`Crossing`]).
//!
//! The transient loop (`run/locate.rs`, the replay check and the pattern
//! search in `run/resolve.rs`, the clamp of a transition in
//! `run/transition.rs`) and the measurements (`measure/extremes.rs`) ask
//! this module; none of them writes a threshold of its own. Changing what
//! counts as a crossing is a change here.

pub(crate) mod roots;
mod tolerance;

pub(crate) use tolerance::{at_end, same_instant, Scales, EDGE_REL, SOURCE_BALANCE_REL};

/// The earliest state event inside an interval: when, and whose guards
/// fired there (others within [`same_instant`] of it fire with it).
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Crossing {
    /// Time from the start of the interval (the interval's length itself
    /// when the crossing belongs to the scheduled instant at its end).
    pub time: f64,
    /// Bit k: diode k's guard fired.
    pub diodes: u64,
    /// Bit c: comparator c's guard fired.
    pub comparators: u64,
}
