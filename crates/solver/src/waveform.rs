//! Exact dense output: the run kept as segments (start time, start state,
//! mode), so any output can be evaluated at any instant, integrated, or
//! sampled at every event plus a grid.

use std::sync::Arc;

use nalgebra::DVector;

use crate::compile::output_position;
use crate::error::SolverError;
use crate::mode::Mode;
use crate::propagate;

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
    /// The length the solver advanced the state by over this segment: the
    /// schedule's own length between two periodic edges, or the located
    /// event's offset from `t0`. Far into a run `t1 − t0` rounds to the
    /// grid of absolute time and can differ from it in the last bits.
    pub(crate) len: f64,
    pub(crate) mode: u32,
    /// How the segment ended: [`crate::dynamics::SCHEDULED_END`] at a
    /// scheduled instant (or the end of the record), else the located state
    /// event's code (see `dynamics::crossing_code`). Fits in the padding
    /// after `mode`.
    pub(crate) end: u32,
}

/// Which one-sided value an evaluation gives at an event instant, where an
/// output can step.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Side {
    /// The value just after (right-continuous), as [`Waveform::value`].
    #[default]
    After,
    /// The left limit, as [`Waveform::value_before`].
    Before,
}

/// An output over one sub-interval of a segment as a polynomial in the
/// fraction σ ∈ [0, 1] of the sub-interval (see [`Waveform::values`]).
#[derive(Default)]
struct OutputPoly {
    /// (segment, sub-interval) the coefficients belong to.
    key: Option<(usize, usize)>,
    /// State at the start of sub-interval `j` of segment `i`, kept to step
    /// on to the next sub-interval of the same segment.
    z: Option<(usize, usize, DVector<f64>)>,
    coef: Vec<f64>,
}

impl OutputPoly {
    /// Expands output `id` over sub-interval `j` (length `d`) of segment `i`.
    fn expand(
        &mut self,
        w: &Waveform,
        i: usize,
        j: usize,
        d: f64,
        id: OutputId,
        terms: &mut propagate::TaylorTerms,
    ) {
        let m = &w.modes[w.segments[i].mode as usize];
        // The state at the sub-interval's start, by whole sub-steps from the
        // segment's start (or from a kept earlier sub-interval's start: the
        // same operations, so the same bits whatever order instants come).
        let (mut k, mut z) = match self.z.take() {
            Some((si, sj, z)) if si == i && sj <= j => (sj, z),
            _ => (0, w.z0(i)),
        };
        while k < j {
            z = propagate::taylor(&m.m, &m.weight, &z, d);
            k += 1;
        }
        propagate::taylor_terms(&m.m, &m.weight, m.live, &z, d, terms);
        let row = m.c.row(id.0);
        self.coef.clear();
        self.coef.extend(
            terms
                .terms()
                .map(|wk| row.iter().zip(wk).map(|(a, b)| a * b).sum::<f64>()),
        );
        self.z = Some((i, j, z));
        self.key = Some((i, j));
    }
}

impl Segment {
    /// The length the state was advanced by over this segment (s): the
    /// schedule's own length between two periodic edges (the same bits for
    /// the same interval of every period), or the located event's offset
    /// from [`Segment::t0`]. Far into a run `t1 − t0` is rounded to the grid
    /// of absolute time (ulp(0.1 s) ≈ 1.4e-17 s) and can differ from this
    /// in the last bits; [`crate::measure::measure_period`] integrates over
    /// these lengths.
    pub fn length(&self) -> f64 {
        self.len
    }
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
    /// Switch names in circuit order (bit i of a mode key's switches).
    pub(crate) switch_names: Vec<String>,
}

/// One finite switching transition of a switch (see the circuit format's
/// `transition` field): the stretch between its gate edge and the end of
/// its second ramp.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TransitionSpan {
    /// The gate edge (s).
    pub t0: f64,
    /// When the first phase was clamped (s): a diode turned on (turn-off)
    /// or stopped conducting (turn-on).
    pub clamp: f64,
    /// The end of the second ramp (s).
    pub t1: f64,
    /// True for a turn-on.
    pub turn_on: bool,
}

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
        propagate::advance(&m.m, &m.weight, m.rate, &self.z0(i), (t - s.t0).max(0.0))
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

    /// Values of output `id` at many instants at once, each the one-sided
    /// value [`Waveform::value`] (`Side::After`) or
    /// [`Waveform::value_before`] (`Side::Before`) gives, and NaN where
    /// those give an error (outside the recorded window, or where the
    /// output floats; call them at a NaN's instant for the reason).
    ///
    /// Built for arrays of many instants: each sub-interval of a segment is
    /// expanded once into a polynomial in time (the Taylor terms of
    /// e^{Mτ}z that event location uses, dotted with the output's row), and
    /// each instant then costs one segment look-up (no search while the
    /// instants ascend) and one polynomial evaluation. The values are the
    /// same exact solution as [`Waveform::value`]'s, summed in another
    /// order: they agree to rounding (a test holds them within 1e-12 of the
    /// output's largest magnitude on the example circuits, 1e-9 for a
    /// compensator output, which is a difference of far larger terms), and
    /// they do not depend on the order or the number of the instants asked
    /// for.
    ///
    /// # Errors
    ///
    /// [`ValueError::ForeignOutput`] for another waveform's id.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{simulate, Options, Side};
    ///
    /// // 1 V across 1 mH through 1 Ω: i = 1 − e^(−t/1 ms).
    /// let c = Circuit::builder()
    ///     .voltage_source("V1", "in", "gnd", 1.0)
    ///     .resistor("R1", "in", "a", 1.0)
    ///     .inductor("L1", "a", "gnd", 1e-3)
    ///     .build()
    ///     .unwrap();
    /// let run = simulate(&c, 2e-3, Options::default()).unwrap();
    /// let il = run.waveform.output("L1.current").unwrap();
    /// let times: Vec<f64> = (0..=1000).map(|k| k as f64 * 2e-6).collect();
    /// let v = run.waveform.values(il, &times, Side::After).unwrap();
    /// for (t, i) in times.iter().zip(&v) {
    ///     assert!((i - (1.0 - (-t / 1e-3).exp())).abs() < 1e-12);
    /// }
    /// assert!(run.waveform.values(il, &[5e-3], Side::After).unwrap()[0].is_nan());
    /// ```
    pub fn values(&self, id: OutputId, times: &[f64], side: Side) -> Result<Vec<f64>, ValueError> {
        if !self.has_output(id) {
            return Err(ValueError::ForeignOutput { index: id.0 });
        }
        let left = side == Side::Before;
        let Some(span) = self.span() else {
            return Ok(vec![f64::NAN; times.len()]);
        };
        let mut poly = OutputPoly::default();
        let mut terms = propagate::TaylorTerms::default();
        // The segment of the previous instant, and its sub-interval
        // partition: count, length and inverse length.
        let mut seg: Option<(usize, usize, f64, f64)> = None;
        let out = times
            .iter()
            .map(|&t| {
                let hint = seg.map_or(0, |s| s.0);
                let Some(i) = self.find_near(t, left, hint, span) else {
                    return f64::NAN;
                };
                let s = &self.segments[i];
                let m = &self.modes[s.mode as usize];
                if m.undetermined[id.0] {
                    return f64::NAN;
                }
                let (_, n, d, inv) = match seg {
                    Some(x) if x.0 == i => x,
                    _ => {
                        // The sub-interval partition of the recorded span.
                        let n = propagate::substeps(m.rate, s.t1 - s.t0);
                        let d = (s.t1 - s.t0) / n as f64;
                        let x = (i, n, d, 1.0 / d);
                        seg = Some(x);
                        x
                    }
                };
                if n > propagate::STIFF_SUBSTEPS {
                    // A stiff segment (see `propagate::STIFF_SUBSTEPS`):
                    // its sub-intervals are too long for a Taylor
                    // polynomial, so each instant from one exponential,
                    // as `Waveform::value` does.
                    let z = self.state_in(i, t);
                    return self.out_in(i, id, &z).unwrap_or(f64::NAN);
                }
                let x = (t - s.t0).max(0.0) * inv;
                let j = (x as usize).min(n - 1);
                if poly.key != Some((i, j)) {
                    poly.expand(self, i, j, d, id, &mut terms);
                }
                propagate::poly_value(&poly.coef, x - j as f64)
            })
            .collect();
        Ok(out)
    }

    /// Segment holding `t` as [`Waveform::find`] gives it, checking the
    /// segment `hint` and the next before searching.
    fn find_near(&self, t: f64, left: bool, hint: usize, span: (f64, f64)) -> Option<usize> {
        let segs = &self.segments;
        let holds = |i: usize| -> bool {
            // `find`'s partition point is i exactly when segment i ends
            // past t and the one before does not (for the left limit: ends
            // at or past t, the one before ends before).
            let past = |s: &Segment| if left { s.t1 >= t } else { s.t1 > t };
            i < segs.len() && past(&segs[i]) && (i == 0 || !past(&segs[i - 1]))
        };
        if t < span.0 || t > span.1 {
            return None;
        }
        if holds(hint) {
            return Some(hint);
        }
        if holds(hint + 1) {
            return Some(hint + 1);
        }
        self.find(t, left)
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
        // Segments are in time order: start at the first that ends at or
        // after t0 and stop after the last that starts by t1, so drawing a
        // long record segment by segment stays linear.
        let first = self.segments.partition_point(|s| s.t1 < t0);
        for (i, s) in self.segments.iter().enumerate().skip(first) {
            if s.t0 > t1 {
                break;
            }
            if s.t1 < t0 {
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

    /// The finite transitions of `switch` within the record, in time
    /// order, from the modes of its segments (a transition cut by the
    /// record's ends is clipped to them). Empty for an unknown name or a
    /// switch without a transition model.
    pub fn transition_spans(&self, switch: &str) -> Vec<TransitionSpan> {
        let Some(i) = self.switch_names.iter().position(|n| n == switch) else {
            return vec![];
        };
        let (v_bit, i_bit) = (
            crate::mode::ramp_bit(i, true),
            crate::mode::ramp_bit(i, false),
        );
        let mut out: Vec<TransitionSpan> = vec![];
        let mut open: Option<TransitionSpan> = None;
        for s in &self.segments {
            let key = self.modes[s.mode as usize].key;
            let ramp = key.ramps & (v_bit | i_bit);
            if ramp == 0 {
                if let Some(t) = open.take() {
                    out.push(t);
                }
                continue;
            }
            let turn_on = key.switches >> i & 1 == 1;
            // The first phase: voltage ramp on turn-off, current on turn-on.
            let first = (ramp == v_bit) != turn_on;
            match open.as_mut() {
                Some(t) if t.turn_on == turn_on && t.t1 == s.t0 && !(first && t.clamp < t.t1) => {
                    if first {
                        t.clamp = s.t1;
                    }
                    t.t1 = s.t1;
                }
                _ => {
                    if let Some(t) = open.take() {
                        out.push(t);
                    }
                    open = Some(TransitionSpan {
                        t0: s.t0,
                        clamp: if first { s.t1 } else { s.t0 },
                        t1: s.t1,
                        turn_on,
                    });
                }
            }
        }
        out.extend(open);
        out
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
