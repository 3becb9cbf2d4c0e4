//! Loss data of parts that the simulation itself does not need: datasheet
//! switching-energy tables of a switch, the recovered charge of a diode,
//! and the Steinmetz parameters of an inductor's core. The losses analysis
//! evaluates them on the exact solution (switched current and blocking
//! voltage of each edge, flux waveform of each period).

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::value::{self, SiValue};

/// One point of an energy curve.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EnergyPoint {
    /// Switched current in amperes; not negative, strictly increasing
    /// along a curve.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub current: f64,
    /// Energy of one edge at that current, in joules; finite, not negative.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub energy: f64,
}

/// Energy against switched current, measured at one blocking voltage.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EnergyCurve {
    /// The blocking voltage the curve was measured at, in volts; positive,
    /// strictly increasing from curve to curve.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub voltage: f64,
    /// At least two points, currents strictly increasing.
    pub points: Vec<EnergyPoint>,
}

/// A datasheet table of the energy of one kind of edge (turn-on or
/// turn-off) against switched current and blocking voltage.
///
/// With one curve the energy scales linearly from the curve's voltage
/// (common practice with datasheet curves measured at one voltage); with
/// several it is interpolated linearly in current along the two curves
/// around the blocking voltage, then linearly in voltage between them.
/// A current or (with several curves) a voltage outside the table has no
/// value: it is reported, never extrapolated.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EnergyTable {
    /// One curve per measured blocking voltage, voltages increasing.
    pub curves: Vec<EnergyCurve>,
}

impl EnergyTable {
    /// A table of one curve measured at `voltage`.
    pub fn single(voltage: f64, points: &[(f64, f64)]) -> EnergyTable {
        EnergyTable {
            curves: vec![EnergyCurve {
                voltage,
                points: points
                    .iter()
                    .map(|&(current, energy)| EnergyPoint { current, energy })
                    .collect(),
            }],
        }
    }

    /// The first problem of the table, as (field path below the table,
    /// reason): at least one curve, voltages positive and increasing, at
    /// least two points per curve, currents non-negative and strictly
    /// increasing, energies finite and non-negative.
    pub fn problem(&self) -> Option<(String, String)> {
        if self.curves.is_empty() {
            return Some(("curves".into(), "needs at least one curve".into()));
        }
        for (k, c) in self.curves.iter().enumerate() {
            let at = |f: &str| format!("curves[{k}].{f}");
            if !(c.voltage.is_finite() && c.voltage > 0.0) {
                return Some((
                    at("voltage"),
                    format!("must be positive, got {}", c.voltage),
                ));
            }
            if k > 0 && c.voltage <= self.curves[k - 1].voltage {
                return Some((
                    at("voltage"),
                    format!(
                        "curve voltages must be strictly increasing: {} follows {}",
                        c.voltage,
                        self.curves[k - 1].voltage
                    ),
                ));
            }
            if c.points.len() < 2 {
                return Some((
                    at("points"),
                    format!("needs at least two points, got {}", c.points.len()),
                ));
            }
            for (j, p) in c.points.iter().enumerate() {
                let here = |f: &str| format!("curves[{k}].points[{j}].{f}");
                if !(p.current.is_finite() && p.current >= 0.0) {
                    return Some((
                        here("current"),
                        format!("must be finite and not negative, got {}", p.current),
                    ));
                }
                if j > 0 && p.current <= c.points[j - 1].current {
                    return Some((
                        here("current"),
                        format!(
                            "currents must be strictly increasing: {} follows {}",
                            p.current,
                            c.points[j - 1].current
                        ),
                    ));
                }
                if !(p.energy.is_finite() && p.energy >= 0.0) {
                    return Some((
                        here("energy"),
                        format!("must be finite and not negative, got {}", p.energy),
                    ));
                }
            }
        }
        None
    }

    /// The energy of an edge switching current `i` (A) against blocking
    /// voltage `v` (V); `None` outside the table. Assumes a table without
    /// [`EnergyTable::problem`].
    pub fn at(&self, i: f64, v: f64) -> Option<f64> {
        let along = |c: &EnergyCurve| -> Option<f64> {
            let p = &c.points;
            if !(i >= p[0].current && i <= p[p.len() - 1].current) {
                return None;
            }
            let k = p.partition_point(|x| x.current <= i).clamp(1, p.len() - 1);
            let s = (i - p[k - 1].current) / (p[k].current - p[k - 1].current);
            Some(p[k - 1].energy + s * (p[k].energy - p[k - 1].energy))
        };
        match self.curves.as_slice() {
            [] => None,
            [c] => Some(along(c)? * v / c.voltage),
            cs => {
                if !(v >= cs[0].voltage && v <= cs[cs.len() - 1].voltage) {
                    return None;
                }
                let k = cs
                    .partition_point(|c| c.voltage <= v)
                    .clamp(1, cs.len() - 1);
                let (a, b) = (&cs[k - 1], &cs[k]);
                let (ea, eb) = (along(a)?, along(b)?);
                let s = (v - a.voltage) / (b.voltage - a.voltage);
                Some(ea + s * (eb - ea))
            }
        }
    }
}

/// Datasheet switching energies of a switch: evaluated at each hard edge
/// (positive switched current, positive blocking voltage) by the losses
/// analysis, beside the simulation of the ideal (or transition-model)
/// switch.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SwitchingEnergy {
    /// Energy of a turn-on (Eon).
    pub turn_on: EnergyTable,
    /// Energy of a turn-off (Eoff).
    pub turn_off: EnergyTable,
}

/// Steinmetz parameters of an inductor's core, for the core loss by the
/// improved generalised Steinmetz equation (K. Venkatachalam,
/// C. R. Sullivan, T. Abdallah & H. Tacca, IEEE COMPEL 2002): the loss per
/// volume under sinusoidal flux of peak B̂ (T) at frequency f (Hz) is
/// k·f^α·B̂^β (W/m³). The flux density is B = L·i / (N·A).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CoreModel {
    /// Steinmetz coefficient k in W/m³ (with f in Hz and B in T); positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub k: f64,
    /// Frequency exponent α; between 1 and 3 (published fits of ferrite,
    /// powder and laminated cores lie there).
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub alpha: f64,
    /// Flux-density exponent β; between 1 and 4.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub beta: f64,
    /// Number of turns N; positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub turns: f64,
    /// Effective core cross-section A in m²; positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub area: f64,
    /// Effective core volume in m³; positive.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub volume: f64,
}

impl CoreModel {
    /// Range of α accepted.
    pub const ALPHA: (f64, f64) = (1.0, 3.0);
    /// Range of β accepted.
    pub const BETA: (f64, f64) = (1.0, 4.0);
}
