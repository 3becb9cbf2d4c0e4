//! Reading circuit files, shared by every subcommand that takes one.

use std::path::Path;

use anyhow::Context;
use fluxstep_netlist::Circuit;

/// Reads and validates the circuit in `path`.
///
/// # Errors
///
/// The file cannot be read, is not a circuit in JSON, or breaks rules (the
/// [`fluxstep_netlist::NetlistError`] stays reachable by downcasting, so
/// the caller can list every problem).
pub fn read_circuit(path: &Path) -> anyhow::Result<Circuit> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("cannot read {}", path.display()))?;
    Circuit::from_json(&text).with_context(|| path.display().to_string())
}
