//! Integration tests of fluxstep-netlist, built as one binary (see the
//! `[[test]]` section of Cargo.toml).
//!
//! Modules:

/// Small valid circuits and assertions on problems, shared by the others.
mod common;
/// Every examples/circuits/*.json reads, validates and round-trips.
mod examples;
/// Issue 19: hostile input — positional arrays, a byte-order mark.
mod issue_19;
/// SI-prefix strings through JSON: good ones give the literal's bits, bad
/// ones fail naming their path (`elements[2].inductance`).
mod json_values;
/// Generated circuits survive to_json → from_json unchanged (proptest).
mod prop;
/// to_json → from_json gives an equal circuit with the same f64 bits.
mod round_trip;
/// docs/circuit.schema.json matches `json_schema()`.
mod schema;
/// One bad circuit per validation rule; the problem names element and field.
mod validate;
