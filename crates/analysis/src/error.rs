//! The analysis crate's error type: every variant names the gate, source,
//! state or iteration it concerns.

use fluxstep_solver::measure::MeasureError;
use fluxstep_solver::SolverError;

use crate::steady::Iteration;

/// Everything that can stop an analysis.
#[derive(Debug, thiserror::Error)]
pub enum AnalysisError {
    /// A timing rule could not be evaluated (not why it failed: that is
    /// its outcome).
    #[error("timing rule '{rule}': {reason}")]
    Timing {
        /// The rule's name.
        rule: String,
        /// Why.
        reason: String,
    },
    /// The circuit could not be compiled or simulated (unchanged from the
    /// solver, so a diagnostic reads the same as in a transient run).
    #[error(transparent)]
    Solver(#[from] SolverError),
    /// A measurement of the result failed (a floating node…).
    #[error(transparent)]
    Measure(#[from] MeasureError),
    /// An output name that the circuit does not have.
    #[error("unknown output {name:?}; the outputs are {}", valid.join(", "))]
    UnknownOutput {
        /// The name as given.
        name: String,
        /// Every output name of the circuit.
        valid: Vec<String>,
    },
    /// A small-signal input the circuit does not have.
    #[error("unknown input {name:?}; the inputs are {}", valid.join(", "))]
    UnknownInput {
        /// The name as given.
        name: String,
        /// Every valid input name.
        valid: Vec<String>,
    },
    /// The periodic orbit is unstable, so a small-signal response around
    /// it would be meaningless.
    #[error(
        "the periodic orbit is unstable (largest Floquet multiplier {:.4}{:+.4}i, magnitude above 1): \
         no small-signal response exists around it; stabilise the loop first \
         (e.g. a compensation ramp for current-mode control above 50 % duty)",
        multipliers.first().map(|m| m.0).unwrap_or(f64::NAN),
        multipliers.first().map(|m| m.1).unwrap_or(f64::NAN)
    )]
    Unstable {
        /// The multipliers (re, im), largest magnitude first.
        multipliers: Vec<(f64, f64)>,
    },
    /// Nothing in the circuit repeats, so it has no periodic steady state.
    #[error(
        "no periodic steady state: the circuit has no periodic gate, clocked \
         comparator gate or periodic source to take the period from"
    )]
    NoPeriod,
    /// The periodic parts of the circuit have no common period within the
    /// supported multiple.
    #[error(
        "no common period: {} (no common multiple within {max_multiple} periods of {})",
        periods.iter().map(|(n, p)| format!("{n} repeats every {p:e} s")).collect::<Vec<_>>().join(", "),
        periods.first().map(|(n, _)| n.as_str()).unwrap_or("")
    )]
    Incommensurate {
        /// Each periodic gate or source with its period (s).
        periods: Vec<(String, f64)>,
        /// The largest multiple of the first period tried.
        max_multiple: u64,
    },
    /// A load named for the loss breakdown is not an element of the circuit.
    #[error("unknown load {name:?}: a load is an element; the elements are {}", valid.join(", "))]
    UnknownLoad {
        /// The name as given.
        name: String,
        /// Every element name.
        valid: Vec<String>,
    },
    /// A loss or thermal model is out of range.
    #[error("{element}: {field} {reason}")]
    LossModel {
        /// The element the model belongs to.
        element: String,
        /// The field, as a path (`thermal.junction_case[1].tau`).
        field: String,
        /// Why it is invalid.
        reason: String,
    },
    /// An option is out of range.
    #[error("invalid option {field}: {reason}")]
    InvalidOption {
        /// The option's field name.
        field: &'static str,
        /// Why it is invalid.
        reason: String,
    },
    /// Newton's method did not reach the tolerance within the iteration or
    /// time limit; the history shows how far it got.
    #[error(
        "steady state not found: {reason} after {} iterations (last residual {:.3e}, tolerance {tolerance:.1e})",
        history.len(),
        history.last().map(|h| h.residual).unwrap_or(f64::NAN)
    )]
    NotConverged {
        /// Why the iteration stopped (limit reached, no descent…).
        reason: String,
        /// The tolerance asked for.
        tolerance: f64,
        /// One entry per Newton iteration.
        history: Vec<Iteration>,
    },
    /// The eigenvalues of the period map (the Floquet multipliers) could
    /// not be computed: the eigenvalue iteration did not converge.
    #[error(
        "the Floquet multipliers of the {states}-state period map could not be computed \
         (the eigenvalue iteration did not converge)"
    )]
    Multipliers {
        /// The number of free states of the period map.
        states: usize,
    },
    /// A Floquet multiplier equals 1: the period map leaves a state (or a
    /// combination of states) where it is, so it has no single steady value
    /// (e.g. a capacitor with no DC path, a lossless loop).
    #[error(
        "no single steady state: the period map keeps {state} where it starts \
         (a Floquet multiplier equals 1); give it a DC path or a loss"
    )]
    Undetermined {
        /// The state most involved.
        state: String,
    },
}
