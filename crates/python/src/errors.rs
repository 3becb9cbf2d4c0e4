//! Rust errors as the Python exceptions of `fluxstep._errors`, with the
//! Rust messages unchanged and the details as attributes.

use fluxstep_analysis::sweep::SweepError;
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::NetlistError;
use fluxstep_solver::measure::MeasureError;
use fluxstep_solver::{SolverError, ValueError};
use pyo3::exceptions::PyOSError;
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList};

/// An instance of exception class `name` of `fluxstep._errors`, built from
/// `args` and `kwargs`, as a `PyErr` ready to raise.
fn raise(py: Python<'_>, name: &str, message: String, kwargs: Option<&Bound<'_, PyDict>>) -> PyErr {
    let made = (|| -> PyResult<PyErr> {
        let class = py.import("fluxstep._errors")?.getattr(name)?;
        let value = class.call((message.clone(),), kwargs)?;
        Ok(PyErr::from_value(value))
    })();
    made.unwrap_or_else(|e| e)
}

/// The text `check` prints for a circuit that breaks rules: a heading with
/// the count, then one line per problem.
fn invalid_text(problems: &[fluxstep_netlist::Problem]) -> String {
    let count = match problems.len() {
        1 => "1 problem".to_string(),
        n => format!("{n} problems"),
    };
    let mut text = format!("invalid circuit, {count}:");
    for p in problems {
        text.push_str(&format!("\n  {p}"));
    }
    text
}

/// A netlist error as `CircuitError` (an unreadable file as `OSError`).
pub fn circuit_error(py: Python<'_>, e: NetlistError, context: Option<&str>) -> PyErr {
    let prefix = context.map(|c| format!("{c}: ")).unwrap_or_default();
    match e {
        NetlistError::Io { path, source } => PyOSError::new_err((
            source.raw_os_error().unwrap_or(2),
            format!("cannot read {path}: {source}"),
            path,
        )),
        NetlistError::Json { path, message } => {
            let kw = PyDict::new(py);
            let _ = kw.set_item("path", &path);
            raise(
                py,
                "CircuitError",
                format!("{prefix}{path}: {message}"),
                Some(&kw),
            )
        }
        NetlistError::Invalid(problems) => {
            let kw = PyDict::new(py);
            let list = PyList::empty(py);
            for p in &problems {
                let d = PyDict::new(py);
                let _ = d.set_item("element", p.element.as_deref());
                let _ = d.set_item("field", p.field.as_deref());
                let _ = d.set_item("node", p.node.as_deref());
                let _ = d.set_item("message", &p.message);
                let _ = list.append(d);
            }
            let _ = kw.set_item("problems", list);
            raise(
                py,
                "CircuitError",
                format!("{prefix}{}", invalid_text(&problems)),
                Some(&kw),
            )
        }
    }
}

/// A short name of a solver diagnostic, for `SimulationError.kind`.
fn solver_kind(e: &SolverError) -> &'static str {
    match e {
        SolverError::Netlist(_) => "invalid_circuit",
        SolverError::UnknownOutput { .. } => "unknown_output",
        SolverError::Undetermined { .. } => "undetermined",
        SolverError::InductorInterrupted { .. } => "inductor_interrupted",
        SolverError::ShortCircuit { .. } => "short_circuit",
        SolverError::CurrentSourceOpen { .. } => "current_source_open",
        SolverError::NoConsistentPattern { .. } => "no_consistent_pattern",
        SolverError::Unsupported { .. } => "unsupported",
        SolverError::TransitionIncomplete { .. } => "transition_incomplete",
        SolverError::Chatter { .. } => "chatter",
        SolverError::EventLimit { .. } => "event_limit",
        SolverError::MemoryBudget { .. } => "memory_budget",
        SolverError::EnergyBalance { .. } => "energy_balance",
        SolverError::NonFinite { .. } => "non_finite",
        SolverError::Control { .. } => "control",
        SolverError::InvalidState { .. } => "invalid_state",
        SolverError::BadTime { .. } => "bad_time",
    }
}

/// A solver error as `SimulationError` (not raised: for `Run.stopped`).
pub fn simulation_error_value(py: Python<'_>, e: &SolverError) -> PyErr {
    let kw = PyDict::new(py);
    let _ = kw.set_item("time", e.time());
    let _ = kw.set_item("kind", solver_kind(e));
    raise(py, "SimulationError", e.to_string(), Some(&kw))
}

/// A solver error as the exception that fits it.
pub fn solver_error(py: Python<'_>, e: SolverError) -> PyErr {
    match e {
        SolverError::Netlist(n) => circuit_error(py, n, None),
        SolverError::UnknownOutput { .. } => raise(py, "OutputError", e.to_string(), None),
        e => simulation_error_value(py, &e),
    }
}

/// A measurement error as `MeasureError`.
pub fn measure_error(py: Python<'_>, e: MeasureError) -> PyErr {
    raise(py, "MeasureError", e.to_string(), None)
}

/// Why an output has no value, as `UnavailableValueError`.
pub fn value_error(py: Python<'_>, e: ValueError) -> PyErr {
    raise(py, "UnavailableValueError", e.to_string(), None)
}

/// An unknown output, as `OutputError`.
pub fn output_error(py: Python<'_>, message: String) -> PyErr {
    raise(py, "OutputError", message, None)
}

/// An analysis error as the exception that fits it.
pub fn analysis_error(py: Python<'_>, e: AnalysisError) -> PyErr {
    let kind = match &e {
        AnalysisError::Solver(_) => return solver_error(py, into_solver(e)),
        AnalysisError::Measure(_) => return raise(py, "MeasureError", e.to_string(), None),
        AnalysisError::UnknownOutput { .. } => return output_error(py, e.to_string()),
        AnalysisError::UnknownInput { .. } => "unknown_input",
        AnalysisError::Unstable { .. } => "unstable",
        AnalysisError::NoPeriod => "no_period",
        AnalysisError::Incommensurate { .. } => "incommensurate",
        AnalysisError::InvalidOption { .. } => "invalid_option",
        AnalysisError::NotConverged { .. } => "not_converged",
        AnalysisError::Undetermined { .. } => "undetermined",
        AnalysisError::Multipliers { .. } => "multipliers",
        AnalysisError::Timing { .. } => "timing",
        AnalysisError::UnknownLoad { .. } => "unknown_load",
        AnalysisError::LossModel { .. } => "loss_model",
    };
    let kw = PyDict::new(py);
    let _ = kw.set_item("kind", kind);
    if let AnalysisError::NotConverged { history, .. } = &e {
        let list = PyList::empty(py);
        for h in history {
            let d = PyDict::new(py);
            let _ = d.set_item("residual", h.residual);
            let _ = d.set_item("damping", h.damping);
            let _ = d.set_item("trials", h.trials);
            let _ = d.set_item("newton", h.newton);
            let _ = list.append(d);
        }
        let _ = kw.set_item("history", list);
    }
    raise(py, "AnalysisError", e.to_string(), Some(&kw))
}

fn into_solver(e: AnalysisError) -> SolverError {
    match e {
        AnalysisError::Solver(s) => s,
        _ => unreachable!("called for the solver variant only"),
    }
}

/// A sweep error as `SweepError` (a bad base circuit as `CircuitError`).
pub fn sweep_error(py: Python<'_>, e: SweepError) -> PyErr {
    match e {
        SweepError::Circuit { path, source } => circuit_error(py, source, Some(&path)),
        SweepError::Io { .. } => PyOSError::new_err(e.to_string()),
        e => raise(py, "SweepError", e.to_string(), None),
    }
}

/// A warning of class `StoppedRunWarning` with `message`.
pub fn warn_stopped(py: Python<'_>, message: &str) -> PyResult<()> {
    let class = py
        .import("fluxstep._errors")?
        .getattr("StoppedRunWarning")?;
    py.import("warnings")?
        .call_method1("warn", (message, class, 2))?;
    Ok(())
}
