//! Circuit rules: every problem is collected, none stops the search.
//!
//! The checks run in a fixed order (below) so the list of problems is
//! deterministic and reads in the order of the file. Each [`Problem`] names the element (or
//! gate) by its name — or by its position, `elements[3]`, when the name
//! itself is unusable — the field as written in JSON, and the node where a
//! node is involved.
//!
//! The rules, by theme, in the order they run:
//!
//! - `names`: element, winding and node names usable and unique;
//! - `values`: each element's values (positive, finite, in range), the
//!   inductance matrix of coupled inductors, waveform times;
//! - `gates`: gate names, signal timing, closed-loop thresholds, and every
//!   switch's gate signal defined;
//! - `topology`: the element graph — shorted elements, dangling nodes,
//!   loops of voltage sources, parts without ground, cuts of current
//!   sources;
//! - `run`: run settings, timing rules (`timing`), design limits
//!   (`limits`), loads and outputs;
//! - `compensators`: names, measured outputs, realisable laws;
//! - then the size of the circuit and the time resolution of its periods
//!   (`crate::resolution`).
//!
//! `checker` holds the collector they all report to and the small checks
//! they share; `outputs` says whether an output name names something the
//! circuit has.

mod checker;
mod compensators;
mod gates;
mod limits;
mod names;
mod outputs;
mod run;
mod timing;
mod topology;
mod values;

use crate::circuit::Circuit;
use crate::error::{NetlistError, Problem};
use checker::Checker;

impl Circuit {
    /// Checks every rule and returns all problems at once.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Invalid`] with one [`Problem`] per broken rule.
    pub fn validate(&self) -> Result<(), NetlistError> {
        let problems = problems(self);
        if problems.is_empty() {
            Ok(())
        } else {
            Err(NetlistError::Invalid(problems))
        }
    }
}

/// Every rule the circuit breaks, each naming its element and field, in
/// the fixed order of the checks.
fn problems(circuit: &Circuit) -> Vec<Problem> {
    let mut c = Checker::new(circuit);
    c.element_names();
    c.node_names();
    for i in 0..circuit.elements.len() {
        c.element_values(i);
    }
    c.gates();
    c.gate_references();
    c.topology();
    c.run_settings();
    c.compensators();
    c.out.extend(circuit.size_problems());
    if let Some(run) = &circuit.run {
        // Other rules (positive, finite) speak for a bad stop time itself.
        c.out
            .extend(circuit.time_resolution_problems(run.stop_time));
    }
    c.out
}
