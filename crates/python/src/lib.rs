//! Python bindings of fluxstep: the extension module `fluxstep._fluxstep`
//! behind the Python package `fluxstep` (built with maturin, see
//! docs/python.md). The last stage beside the command line: it wraps the
//! netlist, solver and analysis crates and has no logic of its own.
//!
//! # Brief overview
//!
//! - `circuit`: `Circuit` (from a file, JSON text or a dict — the dict takes
//!   the JSON route) and `CircuitBuilder`.
//! - `run`: `simulate` and its result `Run` (vectorised exact evaluation,
//!   vertices, measurements, events as records and a structured array, the
//!   summary). Runs go in slices cut at the circuit's own gate edges, so
//!   Ctrl-C is seen between slices and the result keeps every bit.
//! - `analysis`: `steady.find`, `response.frequency_response` /
//!   `loop_gain` / `log_frequencies`, `sweep.Sweep`.
//! - `errors`: Rust errors as the exceptions of `fluxstep._errors`.
//!
//! Tested from Python (`crates/python/tests`, run by `.ci/run`).

// Every public item is part of the bindings' surface.
#![deny(missing_docs)]

mod analysis;
mod circuit;
mod convert;
mod errors;
mod run;
mod simulate;
mod sweep;

use pyo3::prelude::*;

/// The native part of the `fluxstep` Python package.
#[pymodule]
fn _fluxstep(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<circuit::PyCircuit>()?;
    m.add_class::<circuit::PyBuilder>()?;
    m.add_function(wrap_pyfunction!(circuit::load, m)?)?;
    m.add_class::<run::PyRun>()?;
    m.add_function(wrap_pyfunction!(simulate::simulate, m)?)?;
    m.add_function(wrap_pyfunction!(simulate::plain_run_seconds, m)?)?;
    m.add_class::<analysis::PySteadyOptions>()?;
    m.add_class::<analysis::PySteady>()?;
    m.add_function(wrap_pyfunction!(analysis::steady_find, m)?)?;
    m.add_function(wrap_pyfunction!(analysis::losses, m)?)?;
    m.add_class::<analysis::PyResponse>()?;
    m.add_class::<analysis::PyLoopGain>()?;
    m.add_function(wrap_pyfunction!(analysis::frequency_response, m)?)?;
    m.add_function(wrap_pyfunction!(analysis::loop_gain, m)?)?;
    m.add_function(wrap_pyfunction!(analysis::log_frequencies, m)?)?;
    m.add_class::<sweep::PySweep>()?;
    m.add_class::<sweep::PyTable>()?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
