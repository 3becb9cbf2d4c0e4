//! Integration tests of the exact solver, one binary.
//!
//! - `corpus`: the checked case corpus, one circuit per file in
//!   `tests/data` with expected quantities, tolerances and sources, run
//!   under every setting of the solver's shortcuts.
//! - `measure`: exact measurements against closed forms and against an
//!   independent search on `Waveform::value`.
//! - `physics::util`: helpers (circuits, energy balance, closed forms).
//! - `physics::exact`: elementary circuits against closed-form solutions.
//! - `physics::converters`: buck (continuous and discontinuous conduction),
//!   boost and rectifier against textbook relations.
//! - `physics::crosscheck`: the buck against an adaptive Runge–Kutta solver.
//! - `physics::control`: closed-loop gates and compensators.
//! - `physics::structure`: jumps, interruption, shoot-through, chatter,
//!   floating nodes, magnetics and dead time.
//! - `physics::transition`: finite switching transitions (clamped
//!   inductive switching, stray-inductance overshoot).
//! - `physics::issue_20`: many diodes (three-phase bridge sequence, a
//!   24-diode multiplier, interleaved-buck ripple cancellation, a diode
//!   loop around a source).
//! - `physics::issue_13`, `physics::issue_19`: regression tests of those
//!   issues (outputs a designer can trust; extreme scales and the
//!   metamorphic scaling laws).

mod corpus;
mod measure;
mod physics;
