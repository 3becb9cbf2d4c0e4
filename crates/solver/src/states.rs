//! How many state variables a circuit has, by kind, read from the
//! compiled circuit so that front ends never count them on their own.

use fluxstep_netlist::Circuit;

use crate::compile::Compiled;
use crate::error::SolverError;

/// The state variables of a circuit by kind, as the solver numbers them
/// (before any mode removes dependent ones).
///
/// Their sum, [`StateCounts::total`], is the length of the state vector x.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct StateCounts {
    /// Inductor currents: one per inductor and one per coupled winding.
    pub inductor_currents: usize,
    /// Capacitor voltages: one per capacitor.
    pub capacitor_voltages: usize,
    /// Sine sources; each adds two states (the oscillator that makes the
    /// sine exact).
    pub sine_sources: usize,
    /// Compensator states: the order of each compensator's law.
    pub compensator_states: usize,
}

impl StateCounts {
    /// The total number of states (two per sine source).
    pub fn total(&self) -> usize {
        self.inductor_currents
            + self.capacitor_voltages
            + 2 * self.sine_sources
            + self.compensator_states
    }
}

/// Counts the state variables of a circuit by compiling it.
///
/// # Errors
///
/// As the solver's compilation: a circuit that cannot be numbered (for
/// example a singular coupling matrix).
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// let c = Circuit::builder()
///     .voltage_source("Vin", "in", "gnd", 12.0)
///     .inductor("L1", "in", "out", 10e-6)
///     .capacitor("C1", "out", "gnd", 10e-6)
///     .resistor("R1", "out", "gnd", 5.0)
///     .build()
///     .unwrap();
/// let s = fluxstep_solver::state_counts(&c).unwrap();
/// assert_eq!((s.inductor_currents, s.capacitor_voltages, s.total()), (1, 1, 2));
/// ```
pub fn state_counts(circuit: &Circuit) -> Result<StateCounts, SolverError> {
    let compiled = Compiled::compile(circuit)?;
    Ok(StateCounts {
        inductor_currents: compiled.groups.iter().map(|g| g.states.len()).sum(),
        capacitor_voltages: compiled.caps.len(),
        sine_sources: compiled.oscillators.len(),
        compensator_states: compiled.compensators.iter().map(|k| k.states.len()).sum(),
    })
}

#[cfg(test)]
mod tests {
    use fluxstep_netlist::Stimulus;

    use super::*;

    /// Counting rules from memory: one state per inductor current and
    /// capacitor voltage, two per sine oscillator; the sum is the length
    /// of x.
    #[test]
    fn counts_inductors_capacitors_sines_and_sum_to_n_x() {
        let buck = Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 24.0)
            .switch("S1", "in", "sw", "drive")
            .diode("D1", "gnd", "sw")
            .inductor("L1", "sw", "out", 22e-6)
            .capacitor("C1", "out", "gnd", 47e-6)
            .resistor("Rload", "out", "gnd", 6.0)
            .pwm("drive", 200e3, 0.5)
            .build()
            .unwrap();
        let s = state_counts(&buck).unwrap();
        assert_eq!(
            s,
            StateCounts {
                inductor_currents: 1,
                capacitor_voltages: 1,
                sine_sources: 0,
                compensator_states: 0
            }
        );
        assert_eq!(s.total(), Compiled::compile(&buck).unwrap().n_x);

        let sine = Circuit::builder()
            .voltage_waveform("V1", "a", "gnd", Stimulus::sine(0.0, 1.0, 50.0, 0.0))
            .resistor("R1", "a", "b", 1.0)
            .capacitor("C1", "b", "gnd", 1e-6)
            .build()
            .unwrap();
        let s = state_counts(&sine).unwrap();
        assert_eq!((s.capacitor_voltages, s.sine_sources, s.total()), (1, 1, 3));
        assert_eq!(s.total(), Compiled::compile(&sine).unwrap().n_x);
    }

    /// The closed-loop example's compensator (an integrator and two poles)
    /// adds three states; the sum still equals the length of x.
    #[test]
    fn counts_compensator_states() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../examples/circuits/voltage_mode_buck.json"
        );
        let c = Circuit::from_file(path).unwrap();
        let s = state_counts(&c).unwrap();
        assert_eq!(s.compensator_states, 3);
        assert_eq!(s.total(), Compiled::compile(&c).unwrap().n_x);
    }
}
