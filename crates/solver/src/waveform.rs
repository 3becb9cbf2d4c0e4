//! Exact dense output: the run kept as segments (start time, start state,
//! mode), so any output can be evaluated at any instant, integrated, or
//! sampled at every event plus a grid.

use std::sync::Arc;

use nalgebra::DVector;

use crate::mode::Mode;
use crate::propagate;

/// One stretch of the run inside a single mode, with no event inside.
#[derive(Clone, Debug, PartialEq)]
pub struct Segment {
    /// Start time (s).
    pub t0: f64,
    /// End time (s).
    pub t1: f64,
    pub(crate) mode: u32,
    /// How the segment ended: [`crate::dynamics::SCHEDULED_END`] at a
    /// scheduled instant (or the end of the record), else the located state
    /// event's code (see `dynamics::crossing_code`). Fits in the padding
    /// after `mode`, so a segment stays 24 bytes.
    pub(crate) end: u32,
}

/// Identifies an output of a circuit (a node voltage, an element current or voltage).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct OutputId(pub(crate) usize);

/// The recorded run: exact at every instant inside the recorded window.
#[derive(Clone, Debug, Default)]
pub struct Waveform {
    pub(crate) segments: Vec<Segment>,
    /// Start states of all segments, one after another (one allocation for
    /// the whole run instead of one per segment).
    pub(crate) states: Vec<f64>,
    pub(crate) n_z: usize,
    pub(crate) modes: Vec<Arc<Mode>>,
    pub(crate) output_names: Vec<String>,
    pub(crate) n_x: usize,
}

/// Gauss–Legendre nodes and weights on [−1, 1], 8 points. On a sub-interval
/// with ρ·δ ≤ 1/2 the integrand (a product of two outputs, a sum of
/// exponentials) has derivatives that shrink like (ρδ)ᵏ, so the rule's error
/// term, of order (ρδ)¹⁶/16!, is far below rounding.
#[allow(clippy::excessive_precision)] // tabulated to more digits than f64 holds
const GL8: [(f64, f64); 8] = [
    (-0.960_289_856_497_536_2, 0.101_228_536_290_376_26),
    (-0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (-0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (-0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (0.960_289_856_497_536_2, 0.101_228_536_290_376_26),
];

impl Waveform {
    /// The id of an output by name: a node name, `ELEMENT.current`,
    /// `ELEMENT.voltage` (windings `ELEMENT.WINDING.current`, body diodes
    /// `SWITCH.body_diode.current`).
    pub fn output(&self, name: &str) -> Option<OutputId> {
        let key = fluxstep_netlist::OutputName::parse(name).ok()?.to_string();
        self.output_names
            .iter()
            .position(|n| *n == key)
            .map(OutputId)
    }

    /// All output names, in id order.
    pub fn output_names(&self) -> &[String] {
        &self.output_names
    }

    /// The recorded segments in time order.
    pub fn segments(&self) -> &[Segment] {
        &self.segments
    }

    /// Start and end of the recorded window, if anything was recorded.
    pub fn span(&self) -> Option<(f64, f64)> {
        Some((self.segments.first()?.t0, self.segments.last()?.t1))
    }

    fn find(&self, t: f64, left: bool) -> Option<usize> {
        let (a, b) = self.span()?;
        if t < a || t > b {
            return None;
        }
        // Right-continuous: the segment whose [t0, t1) holds t; left limit:
        // the one whose (t0, t1] holds t.
        let i = if left {
            self.segments.partition_point(|s| s.t1 < t)
        } else {
            self.segments.partition_point(|s| s.t1 <= t)
        };
        Some(i.min(self.segments.len() - 1))
    }

    /// The start state of a segment.
    /// Start state of segment `i` (every segment keeps `n_z` entries, so
    /// segment i's start at `i·n_z`).
    pub(crate) fn z0(&self, i: usize) -> DVector<f64> {
        DVector::from_column_slice(&self.states[i * self.n_z..(i + 1) * self.n_z])
    }

    fn state_in(&self, i: usize, t: f64) -> DVector<f64> {
        let s = &self.segments[i];
        let m = &self.modes[s.mode as usize];
        propagate::advance(&m.m, m.rate, &self.z0(i), (t - s.t0).max(0.0))
    }

    fn out_in(&self, i: usize, id: OutputId, z: &DVector<f64>) -> Option<f64> {
        let m = &self.modes[self.segments[i].mode as usize];
        if m.undetermined[id.0] {
            return None;
        }
        Some(m.c.row(id.0).iter().zip(z.iter()).map(|(a, b)| a * b).sum())
    }

    /// Value of an output at `t` (the value just after an event at `t`);
    /// `None` outside the recorded window or where the output is
    /// undetermined (a floating node).
    pub fn value(&self, id: OutputId, t: f64) -> Option<f64> {
        let i = self.find(t, false)?;
        let z = self.state_in(i, t);
        self.out_in(i, id, &z)
    }

    /// Value just before `t` (the left limit at an event).
    pub fn value_before(&self, id: OutputId, t: f64) -> Option<f64> {
        let i = self.find(t, true)?;
        let z = self.state_in(i, t);
        self.out_in(i, id, &z)
    }

    /// The state vector (inductor currents, capacitor voltages, oscillator
    /// states) at `t`.
    pub fn state(&self, t: f64) -> Option<Vec<f64>> {
        let i = self.find(t, false)?;
        Some(self.state_in(i, t).iter().take(self.n_x).copied().collect())
    }

    /// Event instants (segment boundaries) inside [t0, t1].
    pub fn event_times(&self, t0: f64, t1: f64) -> Vec<f64> {
        let mut v: Vec<f64> = self
            .segments
            .iter()
            .map(|s| s.t0)
            .filter(|&t| t >= t0 && t <= t1)
            .collect();
        v.dedup();
        v
    }

    /// Vertices for drawing: at every event instant inside [t0, t1] the left
    /// and right values (a step becomes vertical), and `interior` equally
    /// spaced points inside each segment (for curved pieces). Undetermined
    /// stretches are skipped.
    pub fn vertices(&self, id: OutputId, t0: f64, t1: f64, interior: usize) -> Vec<(f64, f64)> {
        let mut out = vec![];
        for (i, s) in self.segments.iter().enumerate() {
            if s.t1 < t0 || s.t0 > t1 {
                continue;
            }
            let a = s.t0.max(t0);
            let b = s.t1.min(t1);
            let mut push = |t: f64| {
                let z = self.state_in(i, t);
                if let Some(v) = self.out_in(i, id, &z) {
                    out.push((t, v));
                }
            };
            push(a);
            for k in 1..=interior {
                let t = a + (b - a) * k as f64 / (interior + 1) as f64;
                if t > a && t < b {
                    push(t);
                }
            }
            if b > a {
                push(b);
            }
        }
        out
    }

    /// Samples at every event instant (right value) plus a uniform grid of
    /// `n` points over [t0, t1], merged in time order.
    pub fn sample(&self, id: OutputId, t0: f64, t1: f64, n: usize) -> Vec<(f64, Option<f64>)> {
        let mut times = self.event_times(t0, t1);
        for k in 0..n {
            let t = if n == 1 {
                t0
            } else {
                t0 + (t1 - t0) * k as f64 / (n - 1) as f64
            };
            times.push(t);
        }
        times.sort_by(f64::total_cmp);
        times.dedup();
        times.into_iter().map(|t| (t, self.value(id, t))).collect()
    }

    /// ∫ f(outputs) dt over [t0, t1] ∩ the recorded window, where `f`
    /// receives the values of `ids` (`None` if any is undetermined there,
    /// in which case that stretch counts as zero). Exact up to rounding: see
    /// the note on the quadrature rule.
    pub fn integrate(&self, ids: &[OutputId], t0: f64, t1: f64, f: impl Fn(&[f64]) -> f64) -> f64 {
        let mut total = 0.0;
        let mut vals = vec![0.0; ids.len()];
        for (i, s) in self.segments.iter().enumerate() {
            let a = s.t0.max(t0);
            let b = s.t1.min(t1);
            if b <= a {
                continue;
            }
            let m = &self.modes[s.mode as usize];
            if ids.iter().any(|id| m.undetermined[id.0]) {
                continue;
            }
            let n = propagate::substeps(m.rate, b - a);
            let d = (b - a) / n as f64;
            let mut z = propagate::advance(&m.m, m.rate, &self.z0(i), a - s.t0);
            for _ in 0..n {
                let mut part = 0.0;
                for &(x, w) in &GL8 {
                    let zz = propagate::taylor(&m.m, &z, 0.5 * d * (x + 1.0));
                    for (k, id) in ids.iter().enumerate() {
                        vals[k] =
                            m.c.row(id.0)
                                .iter()
                                .zip(zz.iter())
                                .map(|(p, q)| p * q)
                                .sum();
                    }
                    part += w * f(&vals);
                }
                total += 0.5 * d * part;
                z = propagate::taylor(&m.m, &z, d);
            }
        }
        total
    }

    /// Average of an output over [t0, t1].
    pub fn average(&self, id: OutputId, t0: f64, t1: f64) -> f64 {
        self.integrate(&[id], t0, t1, |v| v[0]) / (t1 - t0)
    }
}
