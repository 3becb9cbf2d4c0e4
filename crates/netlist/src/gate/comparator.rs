//! Closed-loop gates as comparators: what each compares, against which
//! threshold, and what its clock does — the form the solver needs,
//! whatever the control law's name.

use super::format::Gate;

/// One comparison of a comparator gate: met when the sensed output is
/// above (or below) `base + slope·τ`, τ being the time since the last clock
/// edge (0 for a gate without a clock).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Comparison {
    /// True: met when the output rises above the threshold; false: falls below.
    pub above: bool,
    /// Threshold at the clock edge.
    pub base: f64,
    /// Threshold slope per second since the clock edge.
    pub slope: f64,
}

/// A gate driven by comparing a circuit output with a threshold: what the
/// solver needs, whatever the control law's name.
#[derive(Clone, Debug, PartialEq)]
pub struct ComparatorSpec {
    /// The output compared.
    pub sense: String,
    /// Clock period, if the gate has a clock (edges at k·period).
    pub period: Option<f64>,
    /// What the clock does: `Some(true)` turns on, `Some(false)` turns off.
    pub clock_turns: Option<bool>,
    /// While on, turn off when this is met.
    pub turn_off: Option<Comparison>,
    /// While off, turn on when this is met.
    pub turn_on: Option<Comparison>,
    /// Turn-off comparisons are ignored before this fraction of the period.
    pub min_duty: f64,
    /// Forced off at this fraction of the period (1: never).
    pub max_duty: f64,
}

impl Gate {
    /// The comparator behind a closed-loop gate; `None` for scheduled gates.
    pub fn comparator(&self) -> Option<ComparatorSpec> {
        let clocked = |frequency: f64, on: bool| (Some(1.0 / frequency), Some(on));
        match self {
            Gate::PeakCurrent {
                frequency,
                sense,
                reference,
                slope,
                max_duty,
                ..
            } => {
                let (period, clock_turns) = clocked(*frequency, true);
                Some(ComparatorSpec {
                    sense: sense.clone(),
                    period,
                    clock_turns,
                    turn_off: Some(Comparison {
                        above: true,
                        base: *reference,
                        slope: -slope,
                    }),
                    turn_on: None,
                    min_duty: 0.0,
                    max_duty: *max_duty,
                })
            }
            Gate::ValleyCurrent {
                frequency,
                sense,
                reference,
                slope,
                ..
            } => {
                let (period, clock_turns) = clocked(*frequency, false);
                Some(ComparatorSpec {
                    sense: sense.clone(),
                    period,
                    clock_turns,
                    turn_off: None,
                    turn_on: Some(Comparison {
                        above: false,
                        base: *reference,
                        slope: *slope,
                    }),
                    min_duty: 0.0,
                    max_duty: 1.0,
                })
            }
            Gate::Hysteretic {
                sense, low, high, ..
            } => Some(ComparatorSpec {
                sense: sense.clone(),
                period: None,
                clock_turns: None,
                turn_off: Some(Comparison {
                    above: true,
                    base: *high,
                    slope: 0.0,
                }),
                turn_on: Some(Comparison {
                    above: false,
                    base: *low,
                    slope: 0.0,
                }),
                min_duty: 0.0,
                max_duty: 1.0,
            }),
            Gate::VoltageMode {
                frequency,
                control,
                ramp_low,
                ramp_high,
                min_duty,
                max_duty,
                ..
            } => {
                let (period, clock_turns) = clocked(*frequency, true);
                Some(ComparatorSpec {
                    sense: control.clone(),
                    period,
                    clock_turns,
                    turn_off: Some(Comparison {
                        above: false,
                        base: *ramp_low,
                        slope: (ramp_high - ramp_low) * frequency,
                    }),
                    turn_on: None,
                    min_duty: *min_duty,
                    max_duty: *max_duty,
                })
            }
            _ => None,
        }
    }
}
