//! Switching and reverse-recovery energies from datasheet data, taken at
//! the exact switched current and blocking voltage of every edge.
//!
//! A switch's turn-off switches the current it carried just before the
//! edge against the voltage it blocks just after; a turn-on the reverse
//! (current just after, voltage just before). Both values come from the
//! exact solution at the edge's instant, and the energy is read from the
//! switch's [`EnergyTable`]s (linear interpolation; one curve scales
//! linearly from its voltage, common practice with datasheet curves). Only
//! hard edges dissipate: a switched current that is not positive (the
//! current flows in the body diode's direction) or a blocking voltage
//! that is not positive (a diode clamps the switch near zero volts) is a
//! soft edge, counted with zero energy (zero-voltage or zero-current
//! switching). Edges outside a table are reported, never extrapolated.
//!
//! A diode's reverse-recovery energy is taken as Qrr·Vr, with Vr the
//! reverse voltage just after it stops conducting, at each forced turn-off
//! (common practice): one that cuts the current it still carried (an
//! ideal switch closing), or one inside a switch's turn-on transition,
//! whose rising current took the diode's over (there Vr is the reverse
//! voltage at the transition's end, when the switch's voltage has fallen). A diode whose current
//! falls to zero by itself (discontinuous conduction) has no recovery
//! loss: its charge is gone before the reverse voltage appears
//! (R. W. Erickson & D. Maksimović, *Fundamentals of Power Electronics*,
//! 2nd ed., 2001, section 4.3; from memory).

use serde::{Deserialize, Serialize};

pub use fluxstep_netlist::{EnergyCurve, EnergyPoint, EnergyTable, SwitchingEnergy};
use fluxstep_solver::{EventKind, EventLog, OutputId, Waveform};

use crate::AnalysisError;

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
    /// Edges in the window, hard and soft.
    pub edges: usize,
    /// Soft edges (switched current or blocking voltage not positive):
    /// zero energy.
    pub soft: usize,
    /// Edges outside the tables (not counted).
    pub outside: Vec<OutsideTable>,
    /// `(instant, energy)` of every hard edge counted, in time order:
    /// the pulses that heat the junction.
    pub pulses: Vec<(f64, f64)>,
}

/// Switching energy of switch `element` with datasheet tables `model`
/// over `[t0, t1)`, each edge taken at its exact switched current and
/// blocking voltage (module notes: hard and soft edges).
///
/// # Errors
///
/// [`AnalysisError::LossModel`] for an invalid table (naming the field);
/// [`AnalysisError::UnknownOutput`] when the switch's current or voltage
/// is not recorded.
pub fn switching_loss(
    element: &str,
    model: &SwitchingEnergy,
    waveform: &Waveform,
    events: &EventLog,
    t0: f64,
    t1: f64,
) -> Result<SwitchingLoss, AnalysisError> {
    for (edge, t) in [("turn_on", &model.turn_on), ("turn_off", &model.turn_off)] {
        if let Some((at, reason)) = t.problem() {
            return Err(AnalysisError::LossModel {
                element: element.into(),
                field: format!("switching_energy.{edge}.{at}"),
                reason,
            });
        }
    }
    let (iv, vv) = (
        output(waveform, &format!("{element}.current"))?,
        output(waveform, &format!("{element}.voltage"))?,
    );
    let mut out = SwitchingLoss {
        element: element.into(),
        turn_on: 0.0,
        turn_off: 0.0,
        edges: 0,
        soft: 0,
        outside: vec![],
        pulses: vec![],
    };
    for ev in events.of(element) {
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
        out.edges += 1;
        if !(i > 0.0 && v > 0.0) {
            out.soft += 1;
            continue;
        }
        let table = if on { &model.turn_on } else { &model.turn_off };
        match table.at(i, v) {
            Some(e) => {
                if on {
                    out.turn_on += e;
                } else {
                    out.turn_off += e;
                }
                out.pulses.push((ev.time, e));
            }
            None => out.outside.push(OutsideTable {
                element: element.into(),
                time: ev.time,
                on,
                current: i,
                voltage: v,
            }),
        }
    }
    Ok(out)
}

/// Reverse-recovery energy of diode `diode` (a diode element, or a body
/// diode `SWITCH.body_diode`) with recovered charge `qrr` (C) over
/// `[t0, t1)`: Qrr·Vr at each forced turn-off (module notes).
///
/// # Errors
///
/// [`AnalysisError::UnknownOutput`] when the diode's current or voltage is
/// not recorded.
pub fn recovery_loss(
    diode: &str,
    qrr: f64,
    waveform: &Waveform,
    events: &EventLog,
    t0: f64,
    t1: f64,
) -> Result<RecoveryLoss, AnalysisError> {
    let (iv, vv) = (
        output(waveform, &format!("{diode}.current"))?,
        output(waveform, &format!("{diode}.voltage"))?,
    );
    let mut out = RecoveryLoss {
        element: diode.into(),
        energy: 0.0,
        forced: 0,
        natural: 0,
        pulses: vec![],
    };
    // A current left by a located zero crossing is rounding noise of the
    // diode's largest current in the window; a forced turn-off cuts a
    // current of the circuit's own size.
    let peak = fluxstep_solver::measure::measure(waveform, iv, t0, t1)
        .map(|m| m.min.abs().max(m.max.abs()))
        .unwrap_or(0.0);
    // Turn-on transitions of every switch: a diode whose current a
    // switch's rising current takes over stops inside one of them.
    let mut switches: Vec<&str> = events
        .of_kind(EventKind::SwitchOn)
        .map(|e| e.element)
        .collect();
    switches.sort_unstable();
    switches.dedup();
    let turn_ons: Vec<(f64, f64)> = switches
        .iter()
        .flat_map(|s| waveform.transition_spans(s))
        .filter(|s| s.turn_on)
        .map(|s| (s.t0, s.t1))
        .collect();
    for ev in events.of(diode) {
        if ev.kind != EventKind::DiodeOff || !(ev.time >= t0 && ev.time < t1) {
            continue;
        }
        let i = waveform.value_before(iv, ev.time).unwrap_or(0.0);
        let commutated = turn_ons
            .iter()
            .find(|&&(a, b)| ev.time >= a && ev.time <= b);
        if i > 1e-6 * peak || commutated.is_some() {
            // Inside a transition the reverse voltage builds up as the
            // switch's voltage falls: the diode blocks it fully at the
            // transition's end.
            let at = commutated.map_or(ev.time, |s| s.1);
            let vr = -waveform.value(vv, at).unwrap_or(0.0);
            if vr > 0.0 {
                out.energy += qrr * vr;
                out.forced += 1;
                out.pulses.push((ev.time, qrr * vr));
                continue;
            }
        }
        out.natural += 1;
    }
    Ok(out)
}

/// Reverse-recovery energy of one diode over a window.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RecoveryLoss {
    /// The diode.
    pub element: String,
    /// Sum of Qrr·Vr over the forced turn-offs (J).
    pub energy: f64,
    /// Forced turn-offs into a reverse voltage (module notes): each costs
    /// Qrr·Vr.
    pub forced: usize,
    /// Turn-offs without recovery loss: at zero current, or with no reverse
    /// voltage after (a parallel channel took the current over).
    pub natural: usize,
    /// `(instant, energy)` of every forced turn-off, in time order.
    pub pulses: Vec<(f64, f64)>,
}

fn output(waveform: &Waveform, name: &str) -> Result<OutputId, AnalysisError> {
    waveform
        .output(name)
        .map_err(|_| AnalysisError::UnknownOutput {
            name: name.into(),
            valid: waveform.output_names().to_vec(),
        })
}
