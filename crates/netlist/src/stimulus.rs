//! Source waveforms that the solver can follow exactly: constant,
//! piecewise linear (optionally repeating) and sine.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::value::{self, SiValue};

/// One (time, value) corner of a piecewise-linear waveform.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Point {
    /// Time in seconds.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub time: f64,
    /// Value in volts or amperes.
    #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
    #[schemars(with = "SiValue")]
    pub value: f64,
}

/// A source waveform, tagged by `kind` in JSON.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Stimulus {
    /// A constant value.
    Constant {
        /// The value (V or A).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        value: f64,
    },
    /// Straight lines through `points` (times strictly increasing). Before the
    /// first point the first value holds, after the last the last value
    /// holds; with `period` the pattern over [0, period) repeats (all point
    /// times must then lie in [0, period]).
    PiecewiseLinear {
        /// Corners of the waveform.
        points: Vec<Point>,
        /// Repeat period in seconds (optional).
        #[serde(
            default,
            deserialize_with = "value::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        period: Option<f64>,
    },
    /// offset + amplitude·sin(2π·frequency·t + phase).
    Sine {
        /// DC offset (V or A).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        offset: f64,
        /// Peak amplitude (V or A).
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        amplitude: f64,
        /// Frequency in hertz; must be positive.
        #[serde(deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        frequency: f64,
        /// Phase in radians at t = 0 (default 0).
        #[serde(default, deserialize_with = "value::de", serialize_with = "value::ser")]
        #[schemars(with = "SiValue")]
        phase: f64,
    },
}

/// A straight piece of a waveform: value(t) = `value + slope·(t − start)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LinearPiece {
    /// Start of the piece (s); `f64::NEG_INFINITY` before the first corner.
    pub start: f64,
    /// End of the piece (s); `f64::INFINITY` after the last corner.
    pub end: f64,
    /// Value at `start` (or, for an unbounded start, everywhere).
    pub value: f64,
    /// Slope in units per second.
    pub slope: f64,
}

impl LinearPiece {
    /// The value at time `t` inside the piece.
    pub fn at(&self, t: f64) -> f64 {
        if self.slope == 0.0 {
            self.value
        } else {
            self.value + self.slope * (t - self.start)
        }
    }
}

impl Stimulus {
    /// A constant waveform.
    pub fn constant(value: f64) -> Self {
        Stimulus::Constant { value }
    }

    /// A non-repeating piecewise-linear waveform through `(time, value)` pairs.
    pub fn pwl(points: &[(f64, f64)]) -> Self {
        Stimulus::PiecewiseLinear {
            points: points
                .iter()
                .map(|&(time, value)| Point { time, value })
                .collect(),
            period: None,
        }
    }

    /// A sine wave: offset + amplitude·sin(2π·frequency·t + phase).
    pub fn sine(offset: f64, amplitude: f64, frequency: f64, phase: f64) -> Self {
        Stimulus::Sine {
            offset,
            amplitude,
            frequency,
            phase,
        }
    }

    /// The value at time `t` (right-continuous at corners).
    pub fn value_at(&self, t: f64) -> f64 {
        match self {
            Stimulus::Sine {
                offset,
                amplitude,
                frequency,
                phase,
            } => offset + amplitude * (2.0 * std::f64::consts::PI * frequency * t + phase).sin(),
            _ => self.piece_at(t).map(|p| p.at(t)).unwrap_or(0.0),
        }
    }

    /// The straight piece that holds at time `t` (right-continuous), with
    /// its exact start and end corners; `None` for a sine or an empty list.
    ///
    /// For a repeating waveform, corner times are computed as
    /// `k·period + point.time` (never by accumulation) so that the same
    /// corner of every repetition is found with the same rounding.
    pub fn piece_at(&self, t: f64) -> Option<LinearPiece> {
        match self {
            Stimulus::Constant { value } => Some(LinearPiece {
                start: f64::NEG_INFINITY,
                end: f64::INFINITY,
                value: *value,
                slope: 0.0,
            }),
            Stimulus::Sine { .. } => None,
            Stimulus::PiecewiseLinear { points, period } => {
                if points.is_empty() {
                    return None;
                }
                match period {
                    // An infinite period (validation refuses one) repeats
                    // nothing: k·p would be NaN.
                    Some(p) if *p > 0.0 && p.is_finite() => {
                        let k = (t / p).floor();
                        // Rounding of t/p may land one period off either
                        // way; k·p (the form every schedule uses for the
                        // same instant) decides, so a corner computed
                        // elsewhere as k·p falls in the new repetition.
                        let k = if k * p > t {
                            k - 1.0
                        } else if (k + 1.0) * p <= t {
                            k + 1.0
                        } else {
                            k
                        };
                        let local = pwl_piece(points, t - k * p);
                        let shift = |x: f64| if x.is_finite() { k * p + x } else { x };
                        // Before the first corner the first value holds until
                        // that corner; after the last corner the last value
                        // holds until the period ends.
                        let start = if local.start.is_finite() {
                            shift(local.start)
                        } else {
                            k * p
                        };
                        let end = if local.end.is_finite() {
                            shift(local.end)
                        } else {
                            (k + 1.0) * p
                        };
                        let value = if local.start.is_finite() {
                            local.value
                        } else {
                            local.at(0.0)
                        };
                        Some(LinearPiece {
                            start,
                            end,
                            value,
                            slope: local.slope,
                        })
                    }
                    _ => Some(pwl_piece(points, t)),
                }
            }
        }
    }
}

fn pwl_piece(points: &[Point], t: f64) -> LinearPiece {
    let first = points[0];
    let last = points[points.len() - 1];
    // A NaN instant goes here too rather than to an index below the
    // first corner.
    if t < first.time || t.is_nan() {
        return LinearPiece {
            start: f64::NEG_INFINITY,
            end: first.time,
            value: first.value,
            slope: 0.0,
        };
    }
    if t >= last.time {
        return LinearPiece {
            start: last.time,
            end: f64::INFINITY,
            value: last.value,
            slope: 0.0,
        };
    }
    // Last corner at or before t.
    let i = points.partition_point(|p| p.time <= t) - 1;
    let (a, b) = (points[i], points[i + 1]);
    LinearPiece {
        start: a.time,
        end: b.time,
        value: a.value,
        slope: (b.value - a.value) / (b.time - a.time),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pwl_holds_and_interpolates() {
        let w = Stimulus::pwl(&[(1.0, 0.0), (2.0, 10.0), (4.0, 10.0)]);
        assert_eq!(w.value_at(0.0), 0.0);
        assert_eq!(w.value_at(1.5), 5.0);
        assert_eq!(w.value_at(3.0), 10.0);
        assert_eq!(w.value_at(9.0), 10.0);
        let p = w.piece_at(1.5).unwrap();
        assert_eq!((p.start, p.end, p.slope), (1.0, 2.0, 10.0));
    }

    #[test]
    fn repeating_pwl_corner_at_k_times_period() {
        // 3·(1e-5) is not exactly 3e-5; the corner there must start the new
        // repetition whatever t/p rounds to.
        let p = 1e-5;
        let w = Stimulus::PiecewiseLinear {
            points: vec![
                Point {
                    time: 0.0,
                    value: 0.0,
                },
                Point {
                    time: p,
                    value: 1.0,
                },
            ],
            period: Some(p),
        };
        for k in 1..2000 {
            let t = k as f64 * p;
            assert_eq!(w.value_at(t), 0.0, "k = {k}");
            assert_eq!(w.piece_at(t).unwrap().start, t);
        }
    }

    #[test]
    fn repeating_pwl() {
        let w = Stimulus::PiecewiseLinear {
            points: vec![
                Point {
                    time: 0.0,
                    value: 0.0,
                },
                Point {
                    time: 1.0,
                    value: 1.0,
                },
            ],
            period: Some(2.0),
        };
        assert_eq!(w.value_at(4.5), 0.5);
        assert_eq!(w.value_at(5.5), 1.0);
        let p = w.piece_at(5.5).unwrap();
        assert_eq!((p.start, p.end), (5.0, 6.0));
    }
}
