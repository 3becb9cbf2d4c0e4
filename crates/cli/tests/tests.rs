//! Integration tests of the `fluxstep` binary, one test binary; each module
//! runs the binary as a user does.
//!
//! - `common`: helpers (run the binary, find an example circuit, make a
//!   scratch folder).
//! - `cli`: `check`, usage and help, exit codes, and the example
//!   descriptions' cautions.
//! - `run`: `run` end to end on every example circuit, its files and exit
//!   codes.
//! - `timing`: `run` with timing rules, and `compare`.
//! - `steady`: `steady` (periodic steady state).
//! - `response`: `response` (small-signal response and loop gain).
//! - `sweep`: `sweep` and `merge` (threads and shards give the same bytes).
//! - `report`: `report` (the design-review page and its summary).

mod cli;
mod common;
mod report;
mod response;
mod run;
mod steady;
mod sweep;
mod timing;
