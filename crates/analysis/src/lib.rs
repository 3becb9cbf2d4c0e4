//! Analyses above the exact transient: the third stage of the pipeline
//! (netlist → solver → **analysis** → plot).
//!
//! The solver advances a circuit exactly between switching events; this
//! crate asks it questions a power-supply designer asks of a whole design:
//! the periodic steady state and its stability, and (in later modules) the
//! small-signal response and sweeps over operating points and tolerances.
//!
//! # Brief overview
//!
//! - [`sweep`]: sweeps over operating points, tolerance corners and Monte
//!   Carlo samples ([`sweep::Sweep`]), run in parallel with identical bits
//!   whatever the thread count, or in shards merged into the same table.

// Every public item is part of the embedding API.
#![deny(missing_docs)]

pub mod sweep;
