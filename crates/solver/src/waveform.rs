//! Exact dense output: the run kept as segments (start time, start state,
//! mode), so any output can be evaluated at any instant, integrated, or
//! sampled at every event plus a grid.

use std::sync::Arc;

use nalgebra::DVector;

use crate::error::SolverError;
use crate::mode::Mode;
use crate::propagate;

/// Every form of output name the circuit format accepts, for error
/// messages.
pub(crate) const OUTPUT_FORMS: &str = "an output is a node name, ELEMENT.current or \
    ELEMENT.voltage of a two-terminal element, ELEMENT.WINDING.current or .voltage of a \
    coupled-inductor winding, XFMR.primary or XFMR.secondary with .current or .voltage of \
    an ideal transformer, SWITCH.body_diode.current or .voltage, or COMPENSATOR.output";

/// The position of output `name` among `names` (canonical output names).
///
/// # Errors
///
/// [`SolverError::UnknownOutput`] for a name that is malformed or names
/// nothing in the circuit, with every accepted form listed.
pub(crate) fn output_position<'a>(
    names: impl IntoIterator<Item = &'a str>,
    name: &str,
) -> Result<usize, SolverError> {
    let parsed =
        fluxstep_netlist::OutputName::parse(name).map_err(|p| SolverError::UnknownOutput {
            name: name.into(),
            reason: format!("{}; {OUTPUT_FORMS}", p.message),
        })?;
    let key = parsed.to_string();
    names
        .into_iter()
        .position(|n| n == key)
        .ok_or_else(|| SolverError::UnknownOutput {
            name: name.into(),
            reason: format!("no node or element of that name in this circuit; {OUTPUT_FORMS}"),
        })
}

/// Why an output has no value at an instant.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum ValueError {
    /// The instant lies outside the recorded window (or nothing was
    /// recorded: `span` is `None`).
    #[error("{output}: t = {time:e} s is outside the recorded window{}",
        span.map(|(a, b)| format!(" [{a:e}, {b:e}] s")).unwrap_or_else(|| " (nothing recorded)".into()))]
    OutsideRecord {
        /// The output's name.
        output: String,
        /// The instant asked for (s).
        time: f64,
        /// The recorded window, if any.
        span: Option<(f64, f64)>,
    },
    /// The output is undetermined there: it depends on a free potential
    /// (a floating node, or the voltage of an open element across one).
    #[error("{output} is undetermined (floating) at t = {time:e} s")]
    Undetermined {
        /// The output's name.
        output: String,
        /// The instant asked for (s).
        time: f64,
    },
    /// The id belongs to another circuit's waveform.
    #[error("output id {index} does not belong to this waveform")]
    ForeignOutput {
        /// The id's index.
        index: usize,
    },
}

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
    /// `ELEMENT.voltage` (windings `ELEMENT.WINDING.current`, transformer
    /// sides `XFMR.primary.current`, body diodes
    /// `SWITCH.body_diode.current`, compensators `NAME.output`). The same
    /// look-up as [`crate::Simulator::output`].
    ///
    /// # Errors
    ///
    /// [`SolverError::UnknownOutput`], listing every accepted form.
    pub fn output(&self, name: &str) -> Result<OutputId, SolverError> {
        output_position(self.output_names.iter().map(String::as_str), name).map(OutputId)
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

    /// Segment `i` holding `t` (right value, or left limit with `left`),
    /// or why there is none.
    fn locate(&self, id: OutputId, t: f64, left: bool) -> Result<usize, ValueError> {
        if !self.has_output(id) {
            return Err(ValueError::ForeignOutput { index: id.0 });
        }
        self.find(t, left).ok_or_else(|| ValueError::OutsideRecord {
            output: self.output_name(id).to_string(),
            time: t,
            span: self.span(),
        })
    }

    /// The output of segment `i` at `t`, or why it is undetermined.
    fn value_in(&self, i: usize, id: OutputId, t: f64) -> Result<f64, ValueError> {
        let z = self.state_in(i, t);
        self.out_in(i, id, &z)
            .ok_or_else(|| ValueError::Undetermined {
                output: self.output_name(id).to_string(),
                time: t,
            })
    }

    /// Value of an output at `t` (the value just after an event at `t`).
    ///
    /// # Errors
    ///
    /// [`ValueError::OutsideRecord`] outside the recorded window,
    /// [`ValueError::Undetermined`] where the output floats,
    /// [`ValueError::ForeignOutput`] for another waveform's id.
    pub fn value(&self, id: OutputId, t: f64) -> Result<f64, ValueError> {
        let i = self.locate(id, t, false)?;
        self.value_in(i, id, t)
    }

    /// Value just before `t` (the left limit at an event).
    ///
    /// # Errors
    ///
    /// As [`Waveform::value`].
    pub fn value_before(&self, id: OutputId, t: f64) -> Result<f64, ValueError> {
        let i = self.locate(id, t, true)?;
        self.value_in(i, id, t)
    }

    /// Time derivative of an output at `t` (just after an event at `t`):
    /// the inductor voltage over inductance of `L1.current` (di/dt), the
    /// current over capacitance of `C1.voltage` (dv/dt), the slew rate of
    /// a node. Exact from the mode: with z′ = M z and output y = c·z,
    /// y′ = c·(M z), no finite difference. An output that steps at an
    /// event has a slope on each side; this is the one after.
    ///
    /// # Errors
    ///
    /// As [`Waveform::value`].
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{simulate, Options};
    ///
    /// // 1 V across 1 mH through 1 Ω: di/dt = (1 − i)/1e-3 A/s.
    /// let c = Circuit::builder()
    ///     .voltage_source("V1", "in", "gnd", 1.0)
    ///     .resistor("R1", "in", "a", 1.0)
    ///     .inductor("L1", "a", "gnd", 1e-3)
    ///     .build()
    ///     .unwrap();
    /// let run = simulate(&c, 2e-3, Options::default()).unwrap();
    /// let w = &run.waveform;
    /// let il = w.output("L1.current").unwrap();
    /// let i = w.value(il, 1e-3).unwrap();
    /// assert!((w.slope(il, 1e-3).unwrap() - (1.0 - i) / 1e-3).abs() < 1e-9);
    /// ```
    pub fn slope(&self, id: OutputId, t: f64) -> Result<f64, ValueError> {
        let i = self.locate(id, t, false)?;
        self.slope_in(i, id, t)
    }

    /// Time derivative just before `t` (the left limit at an event).
    ///
    /// # Errors
    ///
    /// As [`Waveform::value`].
    pub fn slope_before(&self, id: OutputId, t: f64) -> Result<f64, ValueError> {
        let i = self.locate(id, t, true)?;
        self.slope_in(i, id, t)
    }

    fn slope_in(&self, i: usize, id: OutputId, t: f64) -> Result<f64, ValueError> {
        let m = &self.modes[self.segments[i].mode as usize];
        if m.undetermined[id.0] {
            return Err(ValueError::Undetermined {
                output: self.output_name(id).to_string(),
                time: t,
            });
        }
        let z = self.state_in(i, t);
        Ok(slope_of(m, id.0, z.as_slice()))
    }

    /// The state vector (inductor currents, capacitor voltages, oscillator
    /// states) at `t`.
    pub fn state(&self, t: f64) -> Option<Vec<f64>> {
        let i = self.find(t, false)?;
        Some(self.state_in(i, t).iter().take(self.n_x).copied().collect())
    }

    /// Bytes the recorded segments and their start states occupy (what
    /// [`crate::Options::memory_budget`] counts for the waveform).
    pub fn memory_bytes(&self) -> usize {
        self.segments.len() * std::mem::size_of::<Segment>()
            + self.states.len() * std::mem::size_of::<f64>()
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
        times
            .into_iter()
            .map(|t| (t, self.value(id, t).ok()))
            .collect()
    }

    /// ∫ f(outputs) dt over [t0, t1] ∩ the recorded window, where `f`
    /// receives the values of `ids` (`None` if any is undetermined there,
    /// in which case that stretch counts as zero). Exact up to rounding: see
    /// the note on the quadrature rule.
    pub fn integrate(&self, ids: &[OutputId], t0: f64, t1: f64, f: impl Fn(&[f64]) -> f64) -> f64 {
        self.integrate_timed(ids, t0, t1, |_, v| f(v))
    }

    /// As [`Waveform::integrate`], with `f` also given the time: ∫ f(t,
    /// outputs) dt, for weights such as e^(−(t1 − t)/τ) (the response of a
    /// first-order system to a power). Exact up to rounding where `f` is
    /// smooth in t on the scale of the sub-intervals (the Gauss–Legendre
    /// rule integrates polynomials of degree 15 exactly on each).
    pub fn integrate_timed(
        &self,
        ids: &[OutputId],
        t0: f64,
        t1: f64,
        f: impl Fn(f64, &[f64]) -> f64,
    ) -> f64 {
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
            for step in 0..n {
                let mut part = 0.0;
                let start = a + step as f64 * d;
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
                    part += w * f(start + 0.5 * d * (x + 1.0), &vals);
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

/// y′ = c·(M z) for output row `row` of mode `m` at state `z`.
pub(crate) fn slope_of(m: &Mode, row: usize, z: &[f64]) -> f64 {
    let c = m.c.row(row);
    let mut sum = 0.0;
    for (j, cj) in c.iter().enumerate() {
        if *cj != 0.0 {
            let mz: f64 = m.m.row(j).iter().zip(z).map(|(a, b)| a * b).sum();
            sum += cj * mz;
        }
    }
    sum
}
