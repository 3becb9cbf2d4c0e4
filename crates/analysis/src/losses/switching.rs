//! Switching and reverse-recovery energies from datasheet tables, taken at
//! the exact switched current and blocking voltage of every edge.
//!
//! A switch's turn-off switches the current it carried just before the
//! edge against the voltage it blocks just after; a turn-on the reverse
//! (current just after, voltage just before). Both values come from the
//! exact solution at the edge's instant. The energy is read from a table
//! of energy against current by linear interpolation, scaled linearly
//! from the table's reference voltage (common practice with datasheet
//! curves measured at one voltage). A diode's reverse-recovery energy is
//! taken as Qrr·Vr with Vr the reverse voltage just after it stops
//! conducting (common practice). Edges outside a table are reported, never
//! extrapolated.

use serde::{Deserialize, Serialize};

use fluxstep_solver::{EventKind, EventLog, Waveform};

use crate::AnalysisError;

/// Energy (J) against switched current (A), measured at `reference_voltage`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EnergyTable {
    /// Switched currents (A), strictly increasing, non-negative.
    pub current: Vec<f64>,
    /// Energies (J) at those currents, finite and non-negative.
    pub energy: Vec<f64>,
    /// The blocking voltage the table was measured at (V), positive; the
    /// energy scales by V/`reference_voltage`.
    pub reference_voltage: f64,
}

impl EnergyTable {
    /// Checks the table, naming `element` and `field` in the error.
    ///
    /// # Errors
    ///
    /// [`AnalysisError::LossModel`] for fewer than two points, lengths that
    /// differ, currents that are negative or not strictly increasing,
    /// energies that are negative or not finite, or a reference voltage
    /// that is not positive.
    pub fn validate(&self, element: &str, field: &str) -> Result<(), AnalysisError> {
        let bad = |what: String| {
            Err(AnalysisError::LossModel {
                element: element.into(),
                field: field.into(),
                reason: what,
            })
        };
        if self.current.len() < 2 || self.current.len() != self.energy.len() {
            return bad(format!(
                "needs at least two points and as many energies as currents, got {} and {}",
                self.current.len(),
                self.energy.len()
            ));
        }
        if !self.current.iter().all(|i| i.is_finite() && *i >= 0.0)
            || self.current.windows(2).any(|w| w[1] <= w[0])
        {
            return bad("currents must be non-negative and strictly increasing".into());
        }
        if !self.energy.iter().all(|e| e.is_finite() && *e >= 0.0) {
            return bad("energies must be finite and non-negative".into());
        }
        if !(self.reference_voltage.is_finite() && self.reference_voltage > 0.0) {
            return bad(format!(
                "reference_voltage must be positive, got {}",
                self.reference_voltage
            ));
        }
        Ok(())
    }

    /// The energy at current `i` and blocking voltage `v`; `None` outside
    /// the table's current range.
    pub fn at(&self, i: f64, v: f64) -> Option<f64> {
        let (c, e) = (&self.current, &self.energy);
        if !(i >= c[0] && i <= c[c.len() - 1]) {
            return None;
        }
        let k = c.partition_point(|x| *x <= i).clamp(1, c.len() - 1);
        let s = (i - c[k - 1]) / (c[k] - c[k - 1]);
        Some((e[k - 1] + s * (e[k] - e[k - 1])) * v / self.reference_voltage)
    }
}

/// The switching model of one switch.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SwitchEnergies {
    /// The switch.
    pub element: String,
    /// Turn-on energy.
    pub turn_on: EnergyTable,
    /// Turn-off energy.
    pub turn_off: EnergyTable,
}

/// One edge that fell outside its table.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct OutsideTable {
    /// The switch.
    pub element: String,
    /// When (s).
    pub time: f64,
    /// True for a turn-on.
    pub on: bool,
    /// The switched current (A).
    pub current: f64,
    /// The blocking voltage (V).
    pub voltage: f64,
}

/// Switching energy of one switch over a window.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SwitchingLoss {
    /// The switch.
    pub element: String,
    /// Sum of turn-on energies (J).
    pub turn_on: f64,
    /// Sum of turn-off energies (J).
    pub turn_off: f64,
    /// Edges counted.
    pub edges: usize,
    /// Edges outside the tables (not counted).
    pub outside: Vec<OutsideTable>,
}

/// Switching energy of `model`'s switch over `[t0, t1)`, each edge taken
/// at its exact switched current and blocking voltage.
///
/// # Errors
///
/// [`AnalysisError::LossModel`] for an invalid table; [`AnalysisError::UnknownOutput`]
/// when the switch's current or voltage is not recorded.
pub fn switching_loss(
    model: &SwitchEnergies,
    waveform: &Waveform,
    events: &EventLog,
    t0: f64,
    t1: f64,
) -> Result<SwitchingLoss, AnalysisError> {
    model.turn_on.validate(&model.element, "turn_on")?;
    model.turn_off.validate(&model.element, "turn_off")?;
    let output = |q: &str| {
        let name = format!("{}.{q}", model.element);
        waveform
            .output(&name)
            .map_err(|_| AnalysisError::UnknownOutput {
                name,
                valid: waveform.output_names().to_vec(),
            })
    };
    let (iv, vv) = (output("current")?, output("voltage")?);
    let mut out = SwitchingLoss {
        element: model.element.clone(),
        turn_on: 0.0,
        turn_off: 0.0,
        edges: 0,
        outside: vec![],
    };
    for ev in events.of(&model.element) {
        let on = match ev.kind {
            EventKind::SwitchOn => true,
            EventKind::SwitchOff => false,
            _ => continue,
        };
        if !(ev.time >= t0 && ev.time < t1) {
            continue;
        }
        // Conducting side after a turn-on, before a turn-off; blocking
        // side the other way. An undetermined value (a floating node) is
        // taken as zero: nothing is switched there.
        let before = |id| waveform.value_before(id, ev.time).unwrap_or(0.0);
        let after = |id| waveform.value(id, ev.time).unwrap_or(0.0);
        let (i, v) = if on {
            (after(iv), before(vv))
        } else {
            (before(iv), after(vv))
        };
        let (i, v) = (i.abs(), v.abs());
        let table = if on { &model.turn_on } else { &model.turn_off };
        match table.at(i, v) {
            Some(e) => {
                out.edges += 1;
                if on {
                    out.turn_on += e;
                } else {
                    out.turn_off += e;
                }
            }
            None => out.outside.push(OutsideTable {
                element: model.element.clone(),
                time: ev.time,
                on,
                current: i,
                voltage: v,
            }),
        }
    }
    Ok(out)
}
