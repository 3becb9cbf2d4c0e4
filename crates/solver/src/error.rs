//! The solver's error type: every variant names the element, node and time
//! it concerns.

use fluxstep_netlist::NetlistError;

/// Everything that can stop compiling or running a circuit.
#[derive(Debug, thiserror::Error)]
pub enum SolverError {
    /// The circuit itself is invalid.
    #[error(transparent)]
    Netlist(#[from] NetlistError),
    /// An output name does not name a node or element of the circuit.
    #[error("unknown output {name:?}: {reason}")]
    UnknownOutput {
        /// The output as written.
        name: String,
        /// Why it was rejected.
        reason: String,
    },
    /// An output has no value now: it depends on a free potential (a
    /// floating node, or the voltage of an open element across one).
    #[error("t = {time:e} s: {output} is undetermined (floating)")]
    Undetermined {
        /// The output's name.
        output: String,
        /// The present time (s).
        time: f64,
    },
    /// A switch or diode opened while inductors carried current with no path
    /// left for it: physically an unbounded voltage spike (an arc across a
    /// contact, the avalanche that destroys a transistor).
    #[error(
        "t = {time:e} s: inductor current interrupted{}: {} carried {current:.6e} A with no path left{}; \
         stored energy {energy:.6e} J would be released as a voltage spike. \
         Add a freewheeling path (e.g. a diode), or allow the flux-conserving jump \
         (run setting on_interruption = \"conserve_flux\", Options::on_interruption).",
        cause.as_ref().map(|c| format!(" by {c}")).unwrap_or_default(),
        inductors.join(", "),
        if sources.is_empty() {
            String::new()
        } else {
            format!(
                " (current source {} also drives that path: its own energy is not counted)",
                sources.join(", ")
            )
        }
    )]
    InductorInterrupted {
        /// Time of the interruption (s).
        time: f64,
        /// The switching action that caused it (e.g. `switch S1 opened`), if known.
        cause: Option<String>,
        /// The inductor (winding) names left without a path.
        inductors: Vec<String>,
        /// The largest magnitude of the interrupted currents (A).
        current: f64,
        /// Energy that the flux-conserving jump would dissipate, ½·L·I² for
        /// a single inductor (J).
        energy: f64,
        /// Current sources that drive the interrupted path too, named apart
        /// from the inductors (their energy is not in `energy`).
        sources: Vec<String>,
    },
    /// Closed switches and conducting diodes short a voltage source or a
    /// charged capacitor (e.g. both switches of a half-bridge on at once).
    #[error(
        "t = {time:e} s: short circuit (shoot-through){}: {} form a zero-resistance loop across {}",
        cause.as_ref().map(|c| format!(" after {c}")).unwrap_or_default(),
        switches.join(", "),
        shorted.join(", ")
    )]
    ShortCircuit {
        /// Time of the short (s).
        time: f64,
        /// The switching action that caused it, if known.
        cause: Option<String>,
        /// Switches and diodes in the loop.
        switches: Vec<String>,
        /// The voltage sources and capacitors shorted.
        shorted: Vec<String>,
    },
    /// A current source was left with no path for its current.
    #[error("t = {time:e} s: current source(s) {} left with no path (node {node})", sources.join(", "))]
    CurrentSourceOpen {
        /// Time (s).
        time: f64,
        /// The current sources.
        sources: Vec<String>,
        /// A node of the isolated part.
        node: String,
    },
    /// No conduction pattern of the diodes is consistent with the state.
    #[error("t = {time:e} s: no consistent conduction pattern for diodes {}: {reason}", diodes.join(", "))]
    NoConsistentPattern {
        /// Time (s).
        time: f64,
        /// The diodes.
        diodes: Vec<String>,
        /// What went wrong with the closest candidate.
        reason: String,
    },
    /// A conduction pattern whose equations have no unique solution that the
    /// solver does not (yet) reduce.
    #[error("t = {time:e} s: unsupported circuit structure in the mode with {pattern}: {reason}")]
    Unsupported {
        /// Time (s).
        time: f64,
        /// The conduction pattern, as text.
        pattern: String,
        /// What is not supported.
        reason: String,
    },
    /// A switch's finite transition did not complete: nothing clamped its
    /// ramp (no diode turned on or off) before its gate changed again.
    #[error("t = {time:e} s: the {edge} transition of switch {switch} did not complete: {reason}")]
    TransitionIncomplete {
        /// When it was found (s).
        time: f64,
        /// The switch.
        switch: String,
        /// `turn-off` or `turn-on`.
        edge: String,
        /// What happened.
        reason: String,
    },
    /// Too many events in a tiny window: ideal elements chattering.
    #[error(
        "t = {time:e} s: chatter: {count} events within {window:e} s involving {}",
        elements.join(", ")
    )]
    Chatter {
        /// Time (s).
        time: f64,
        /// Events counted in the window.
        count: usize,
        /// The window length (s).
        window: f64,
        /// Elements that switched in the window.
        elements: Vec<String>,
    },
    /// The run exceeded its event limit.
    #[error("t = {time:e} s: event limit of {limit} reached")]
    EventLimit {
        /// Time (s).
        time: f64,
        /// The limit.
        limit: usize,
    },
    /// The recorded waveform and event log would grow past the memory
    /// budget ([`crate::Options::memory_budget`]).
    #[error(
        "t = {time:e} s: the recorded waveform and events reached the memory budget of {budget} bytes"
    )]
    MemoryBudget {
        /// Time (s).
        time: f64,
        /// The budget (bytes).
        budget: usize,
    },
    /// The run's energy balance failed its tolerance (see
    /// [`crate::EnergyCertificate`]): the numbers of the run cannot be
    /// trusted.
    #[error(
        "t = {time:e} s: the energy balance does not close: sources delivered \
         what the parts dissipated and stored to within {residual:.3e} J, \
         {:.1e} of the balance's largest term ({scale:.3e} J), beyond the tolerance \
         {tolerance:e} (checked from t = {from:e} s). The run's results are not \
         trustworthy; please report the circuit file",
        residual.abs() / scale
    )]
    EnergyBalance {
        /// Time (s): the end of the check that failed.
        time: f64,
        /// Start of the stretch that check took (s).
        from: f64,
        /// delivered − dissipated − jumps − stored change (J).
        residual: f64,
        /// The balance's largest term (J).
        scale: f64,
        /// The tolerance (relative).
        tolerance: f64,
    },
    /// A value became NaN or infinite.
    #[error("t = {time:e} s: {what} is not finite")]
    NonFinite {
        /// Time (s).
        time: f64,
        /// The state or output concerned.
        what: String,
    },
    /// A controller asked for something impossible (an unknown gate, a duty
    /// outside [0, 1], an edge in the past…), or was set up wrongly.
    #[error("t = {time:e} s: controller: {message}")]
    Control {
        /// Time (s).
        time: f64,
        /// What was wrong, naming the gate or output.
        message: String,
    },
    /// A state given to restart a run is unusable (wrong length, not
    /// finite, an unknown state name).
    #[error("invalid state: {reason}")]
    InvalidState {
        /// What was wrong, naming the state.
        reason: String,
    },
    /// A time argument is invalid (before the present time, not finite…).
    /// See also [`SolverError::time`].
    #[error("invalid time {time:e} s: {reason}")]
    BadTime {
        /// The time given (s).
        time: f64,
        /// Why it is invalid.
        reason: String,
    },
}

impl SolverError {
    /// The instant of the run the diagnostic concerns (s), where it has
    /// one: the time of an interruption, short, chatter, limit or
    /// non-finite value. `None` for errors that are not about an instant
    /// of the run (an invalid circuit, an unknown output, a bad time
    /// argument).
    pub fn time(&self) -> Option<f64> {
        match self {
            SolverError::InductorInterrupted { time, .. }
            | SolverError::ShortCircuit { time, .. }
            | SolverError::CurrentSourceOpen { time, .. }
            | SolverError::NoConsistentPattern { time, .. }
            | SolverError::Unsupported { time, .. }
            | SolverError::TransitionIncomplete { time, .. }
            | SolverError::Chatter { time, .. }
            | SolverError::EventLimit { time, .. }
            | SolverError::MemoryBudget { time, .. }
            | SolverError::EnergyBalance { time, .. }
            | SolverError::NonFinite { time, .. }
            | SolverError::Control { time, .. }
            | SolverError::Undetermined { time, .. } => Some(*time),
            SolverError::Netlist(_)
            | SolverError::UnknownOutput { .. }
            | SolverError::BadTime { .. }
            | SolverError::InvalidState { .. } => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue 13: a sentence after a full stop starts with a capital, and
    /// the interruption diagnostic names the run setting that allows the jump.
    #[test]
    fn issue_13_interruption_message_reads_as_sentences() {
        let e = SolverError::InductorInterrupted {
            time: 5e-5,
            cause: Some("switch S1 opening".into()),
            inductors: vec!["L1".into()],
            current: 4.7,
            energy: 1.1e-3,
            sources: vec!["I1".into()],
        };
        let text = e.to_string();
        for (i, _) in text.match_indices(". ") {
            if text[..i].ends_with("e.g") {
                continue;
            }
            let next = text[i + 2..].chars().next().unwrap();
            assert!(next.is_uppercase(), "{text}");
        }
        assert!(text.contains("conserve_flux"), "{text}");
        assert!(text.contains("current source I1 also drives"), "{text}");
        assert_eq!(e.time(), Some(5e-5));
    }
}
