//! Restarting a run from a given state, and what an analysis needs to know
//! of the present mode (the seam of [`crate::dynamics`]).

use nalgebra::DMatrix;

use super::resolve::Moment;
use super::Simulator;
use crate::dynamics::entry_jump;
use crate::error::SolverError;

impl Simulator {
    /// The index of a state in [`Simulator::state`] by its name (as in
    /// [`Simulator::state_names`], e.g. `L1.current`, `C1.voltage`).
    ///
    /// # Errors
    ///
    /// [`SolverError::InvalidState`] listing the state names when `name`
    /// is not one of them.
    pub fn state_index(&self, name: &str) -> Result<usize, SolverError> {
        self.cc
            .state_names
            .iter()
            .position(|n| n == name)
            .ok_or_else(|| SolverError::InvalidState {
                reason: format!(
                    "no state named {name:?}; the states are {}",
                    self.cc.state_names.join(", ")
                ),
            })
    }

    /// Replaces the state (inductor currents, capacitor voltages, oscillator
    /// and compensator states, in [`Simulator::state_names`] order) at the
    /// present time, then finds the conduction pattern the new state
    /// allows, as at t = 0 (a jump that restores a capacitor loop or an
    /// inductor cutset applies, and is not logged). Gates keep their present
    /// state and schedule, so restarting at a period boundary restarts the
    /// period. Nothing recorded so far changes.
    ///
    /// # Errors
    ///
    /// [`SolverError::InvalidState`] for a wrong length or a non-finite
    /// entry (naming the state); a diagnostic when no conduction pattern
    /// can hold the state (e.g. an inductor current with no path).
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{Options, Simulator};
    ///
    /// let c = Circuit::builder()
    ///     .voltage_source("V1", "in", "gnd", 1.0)
    ///     .resistor("R1", "in", "a", 1.0)
    ///     .inductor("L1", "a", "gnd", 1e-3)
    ///     .build()
    ///     .unwrap();
    /// let mut sim = Simulator::new(&c, Options::default()).unwrap();
    /// let i = sim.state_index("L1.current").unwrap();
    /// let mut x = sim.state().to_vec();
    /// x[i] = 1.0; // already at the final current: nothing moves
    /// sim.set_state(&x).unwrap();
    /// sim.advance_to(1e-3).unwrap();
    /// assert!((sim.state()[i] - 1.0).abs() < 1e-12);
    /// ```
    pub fn set_state(&mut self, x: &[f64]) -> Result<(), SolverError> {
        let n_x = self.cc.n_x;
        if x.len() != n_x {
            return Err(SolverError::InvalidState {
                reason: format!(
                    "{} values given for {n_x} states ({})",
                    x.len(),
                    self.cc.state_names.join(", ")
                ),
            });
        }
        if let Some(i) = x.iter().position(|v| !v.is_finite()) {
            return Err(SolverError::InvalidState {
                reason: format!("{} = {} is not finite", self.cc.state_names[i], x[i]),
            });
        }
        self.z.as_mut_slice()[..n_x].copy_from_slice(x);
        // The state changed from outside: the energy balance starts afresh.
        self.certifier.close(&self.rec.wave);
        self.resolve(0, None, Moment::Start)
    }

    /// Names of the inputs whose values are entries of the extended state
    /// (see [`Simulator::input_index`]).
    pub fn input_names(&self) -> Vec<String> {
        self.cc
            .sources
            .iter()
            .filter(|s| s.input.is_some())
            .map(|s| s.name.clone())
            .collect()
    }

    /// The index in the extended state z of a named input: a source with
    /// a constant or piecewise-linear waveform (its value, V or A), a
    /// closed-loop gate's comparison threshold (`GATE.turn_off_threshold`,
    /// `GATE.turn_on_threshold`: the reference of a current-mode gate, the
    /// ramp of a voltage-mode gate) or a compensator's set-point
    /// (`COMPENSATOR.reference`). Perturbing that entry perturbs the input
    /// (see [`crate::dynamics`]).
    ///
    /// # Errors
    ///
    /// [`SolverError::InvalidState`] listing the input names (a sine
    /// source is an oscillator state, not an input).
    pub fn input_index(&self, name: &str) -> Result<usize, SolverError> {
        self.cc
            .sources
            .iter()
            .find(|s| s.name == name)
            .and_then(|s| s.input)
            .map(|k| self.cc.n_x + k)
            .ok_or_else(|| SolverError::InvalidState {
                reason: format!(
                    "no input named {name:?}; the inputs are {}",
                    self.input_names().join(", ")
                ),
            })
    }

    /// The indices of states that no circuit quantity drives (the
    /// oscillators behind sine sources): forced, not free to settle.
    pub fn forced_states(&self) -> Vec<usize> {
        let mut v: Vec<usize> = self
            .cc
            .oscillators
            .iter()
            .flat_map(|&(s, c, _)| [s, c])
            .collect();
        v.sort_unstable();
        v
    }

    /// The present mode's dynamics z′ = M z over the extended state (see
    /// [`crate::dynamics`]).
    pub fn present_matrix(&self) -> &DMatrix<f64> {
        &self.modes[self.mode as usize].m
    }

    /// The jump z⁺ = P z⁻ applied on entering the present mode, `None` for
    /// the identity.
    pub fn present_entry_jump(&self) -> Option<&DMatrix<f64>> {
        entry_jump(&self.modes[self.mode as usize])
    }

    /// The present extended state z = [x; u; u′] (see [`crate::dynamics`]).
    pub fn extended_state(&self) -> &[f64] {
        self.z.as_slice()
    }
}
