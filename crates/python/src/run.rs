//! `simulate` and its result, `Run`: the solver's transient, run in slices
//! that end on the circuit's own gate edges so that Ctrl-C is seen between
//! them without changing a bit of the result.

use std::sync::OnceLock;

use fluxstep_netlist::OutputName;
use fluxstep_solver::measure::measure;
use fluxstep_solver::{OutputId, RunResult, Side, SolverError, ValueError};
use numpy::{PyArray1, PyArrayDyn, PyArrayMethods, PyUntypedArrayMethods};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList};

use crate::convert::{ser_to_py, to_py};
use crate::errors::{measure_error, simulation_error_value, solver_error, value_error};

/// The result of :func:`simulate`: the exact recorded waveform, the event
/// log, counters and the diagnostic that stopped the run, if any.
///
/// Every output is exact at every instant of the recorded window
/// (``span``): :meth:`waveform` evaluates it at any array of times,
/// :meth:`vertices` gives the exact segment end points for drawing,
/// :meth:`measure` the exact average, RMS and extremes.
#[pyclass(name = "Run", module = "fluxstep", frozen)]
pub struct PyRun {
    pub(crate) result: RunResult,
    pub(crate) stopped: Option<SolverError>,
    pub(crate) stop: f64,
    pub(crate) outputs: Vec<String>,
    pub(crate) summary: OnceLock<Py<PyDict>>,
}

impl PyRun {
    pub(crate) fn from_result(result: RunResult, stop: f64) -> PyRun {
        let outputs = result.waveform.output_names().to_vec();
        PyRun {
            result,
            stopped: None,
            stop,
            outputs,
            summary: OnceLock::new(),
        }
    }

    fn id(&self, py: Python<'_>, name: &str) -> PyResult<OutputId> {
        self.result
            .waveform
            .output(name)
            .map_err(|e| solver_error(py, e))
    }

    /// `t0`, `t1` or the recorded span's ends.
    fn window(
        &self,
        py: Python<'_>,
        t0: Option<f64>,
        t1: Option<f64>,
        subject: &str,
    ) -> PyResult<(f64, f64)> {
        let span = self.result.waveform.span();
        match (t0, t1, span) {
            (Some(a), Some(b), _) => Ok((a, b)),
            (a, b, Some((s0, s1))) => Ok((a.unwrap_or(s0), b.unwrap_or(s1))),
            _ => Err(measure_error(
                py,
                fluxstep_solver::measure::MeasureError::NothingRecorded {
                    subject: subject.to_string(),
                },
            )),
        }
    }

    /// Evaluates `f` at every time of `t` (any shape, or a number), one
    /// call per instant.
    fn evaluate<'py>(
        &self,
        py: Python<'py>,
        t: &Bound<'py, PyAny>,
        strict: bool,
        f: impl Fn(f64) -> Result<f64, ValueError> + Sync,
    ) -> PyResult<Bound<'py, PyAny>> {
        self.evaluate_batch(py, t, strict, &f, |times| {
            times.iter().map(|&x| f(x).unwrap_or(f64::NAN)).collect()
        })
    }

    /// Evaluates at every time of `t` (any shape, or a number): `batch`
    /// gives all values at once with NaN where there is none (a number is
    /// a batch of one, so it gets the same bits as in an array), and `f`
    /// the reason there is none, for the error of `strict`.
    fn evaluate_batch<'py>(
        &self,
        py: Python<'py>,
        t: &Bound<'py, PyAny>,
        strict: bool,
        f: &(impl Fn(f64) -> Result<f64, ValueError> + Sync),
        batch: impl Fn(&[f64]) -> Vec<f64> + Sync,
    ) -> PyResult<Bound<'py, PyAny>> {
        if let Ok(x) = t.extract::<f64>() {
            if !t.hasattr("shape")? || t.getattr("shape")?.len()? == 0 {
                // A number is a batch of one: the same bits as in an array.
                let v = batch(&[x]).first().copied().unwrap_or(f64::NAN);
                return match f(x) {
                    Err(e) if strict && v.is_nan() => Err(value_error(py, e)),
                    _ => Ok(v.into_pyobject(py)?.into_any()),
                };
            }
        }
        let np = py.import("numpy")?;
        let arr = np.call_method1("ascontiguousarray", (t, "float64"))?;
        let arr = arr.cast_into::<PyArrayDyn<f64>>()?;
        let shape = arr.shape().to_vec();
        let ro = arr.readonly();
        let times = ro.as_slice()?;
        let out = py.detach(|| batch(times));
        if strict {
            // The first instant without a value gives the reason.
            if let Some(k) = out.iter().position(|v| v.is_nan()) {
                if let Err(e) = f(times[k]) {
                    return Err(value_error(py, e));
                }
            }
        }
        Ok(PyArray1::from_vec(py, out).reshape(shape)?.into_any())
    }
}

/// Two arrays of equal length: times and values.
type Pair<'py> = (Bound<'py, PyArray1<f64>>, Bound<'py, PyArray1<f64>>);

fn side_of(side: &str) -> PyResult<Side> {
    match side {
        "after" => Ok(Side::After),
        "before" => Ok(Side::Before),
        other => Err(PyValueError::new_err(format!(
            "side must be \"after\" or \"before\", got {other:?}"
        ))),
    }
}

#[pymethods]
impl PyRun {
    /// The exact value of output ``name`` at ``t`` (s): a number, or a NumPy
    /// array of any shape (the result has the same shape).
    ///
    /// ``side="after"`` (default) gives the value just after an event at
    /// ``t``, ``"before"`` the left limit. Where the output has no value —
    /// ``t`` outside the recorded window (``span``), or the output
    /// undetermined because it floats — the result is NaN; with
    /// ``strict=True`` that raises UnavailableValueError instead, naming
    /// the output and the instant.
    ///
    /// Raises OutputError for an unknown output name.
    #[pyo3(signature = (name, t, *, side="after", strict=false))]
    fn waveform<'py>(
        &self,
        py: Python<'py>,
        name: &str,
        t: &Bound<'py, PyAny>,
        side: &str,
        strict: bool,
    ) -> PyResult<Bound<'py, PyAny>> {
        let id = self.id(py, name)?;
        let w = &self.result.waveform;
        let side = side_of(side)?;
        let one = |x| match side {
            Side::After => w.value(id, x),
            Side::Before => w.value_before(id, x),
        };
        self.evaluate_batch(py, t, strict, &one, |ts| {
            w.values(id, ts, side).unwrap_or_default()
        })
    }

    /// The exact time derivative of output ``name`` at ``t`` (unit per
    /// second: di/dt of an inductor current, dv/dt of a capacitor voltage),
    /// vectorised and with NaN where undefined, as :meth:`waveform`.
    #[pyo3(signature = (name, t, *, side="after", strict=false))]
    fn slope<'py>(
        &self,
        py: Python<'py>,
        name: &str,
        t: &Bound<'py, PyAny>,
        side: &str,
        strict: bool,
    ) -> PyResult<Bound<'py, PyAny>> {
        let id = self.id(py, name)?;
        let w = &self.result.waveform;
        let side = side_of(side)?;
        self.evaluate(py, t, strict, |x| match side {
            Side::After => w.slope(id, x),
            Side::Before => w.slope_before(id, x),
        })
    }

    /// The exact vertices of output ``name`` over ``[t0, t1]`` (default: the
    /// recorded span) as two arrays ``(t, value)``: at every event instant
    /// the values before and after (a step is vertical), plus ``interior``
    /// equally spaced points inside each segment for curved pieces.
    /// Undetermined stretches are left out.
    #[pyo3(signature = (name, t0=None, t1=None, interior=0))]
    fn vertices<'py>(
        &self,
        py: Python<'py>,
        name: &str,
        t0: Option<f64>,
        t1: Option<f64>,
        interior: usize,
    ) -> PyResult<Pair<'py>> {
        let id = self.id(py, name)?;
        let Ok((a, b)) = self.window(py, t0, t1, name) else {
            let empty = || PyArray1::from_vec(py, vec![]);
            return Ok((empty(), empty()));
        };
        let w = &self.result.waveform;
        let v = py.detach(|| w.vertices(id, a, b, interior));
        let (ts, vs): (Vec<f64>, Vec<f64>) = v.into_iter().unzip();
        Ok((PyArray1::from_vec(py, ts), PyArray1::from_vec(py, vs)))
    }

    /// Exact measurements of output ``name`` over ``[t0, t1]`` (default: the
    /// recorded span) as a dict: ``average``, ``rms``, ``min``, ``max``,
    /// ``peak_to_peak``, ``time_of_min``, ``time_of_max``, the window and
    /// the ``unit``. Each end of the window sees the one-sided value inside
    /// it, so windows of whole periods tile.
    ///
    /// Raises MeasureError for a window outside the record or an output
    /// that floats inside it, OutputError for an unknown name.
    #[pyo3(signature = (name, t0=None, t1=None))]
    fn measure<'py>(
        &self,
        py: Python<'py>,
        name: &str,
        t0: Option<f64>,
        t1: Option<f64>,
    ) -> PyResult<Bound<'py, PyAny>> {
        let id = self.id(py, name)?;
        let (a, b) = self.window(py, t0, t1, name)?;
        let w = &self.result.waveform;
        let m = py
            .detach(|| measure(w, id, a, b))
            .map_err(|e| measure_error(py, e))?;
        let d = ser_to_py(py, &m)?;
        d.set_item("unit", unit(name))?;
        Ok(d)
    }

    /// Start and end of the recorded window (s), or None if nothing was recorded.
    #[getter]
    fn span(&self) -> Option<(f64, f64)> {
        self.result.waveform.span()
    }

    /// Every output the run can evaluate, canonical names in id order.
    #[getter]
    fn output_names(&self) -> Vec<String> {
        self.result.waveform.output_names().to_vec()
    }

    /// The outputs the summary measures.
    #[getter]
    fn outputs(&self) -> Vec<String> {
        self.outputs.clone()
    }

    /// The stop time asked for (s).
    #[getter]
    fn stop_time(&self) -> f64 {
        self.stop
    }

    /// The diagnostic that stopped the run before its stop time, as a
    /// SimulationError (not raised; ``raise run.stopped`` raises it), or None.
    #[getter]
    fn stopped(&self, py: Python<'_>) -> Option<Py<PyAny>> {
        self.stopped
            .as_ref()
            .map(|e| simulation_error_value(py, e).into_value(py).into_any())
    }

    /// Whether the run reached its stop time.
    #[getter]
    fn ok(&self) -> bool {
        self.stopped.is_none()
    }

    /// Names of the states (inductor currents, capacitor voltages, ...), in
    /// the order of each event's ``before`` and ``after``.
    #[getter]
    fn state_names(&self) -> Vec<String> {
        self.result.events.state_names().to_vec()
    }

    /// Every recorded event as a list of dicts: ``time`` (s), ``kind``
    /// (``switch_on``, ``switch_off``, ``diode_on``, ``diode_off``,
    /// ``source_breakpoint``, ``charge_jump``, ``flux_jump``,
    /// ``shoot_through``), ``cause`` (``start``, ``scheduled``,
    /// ``crossing``), ``element``, ``energy`` and ``moved`` of a jump (else
    /// None), and the state ``before`` and ``after`` (lists in the order of
    /// ``state_names``). See :attr:`events_array` for the same as a NumPy
    /// structured array.
    #[getter]
    fn events<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyList>> {
        let list = PyList::empty(py);
        for e in self.result.events.iter() {
            let d = PyDict::new(py);
            d.set_item("time", e.time)?;
            d.set_item("kind", ser_to_py(py, &e.kind)?)?;
            d.set_item("cause", ser_to_py(py, &e.cause)?)?;
            d.set_item("element", e.element)?;
            d.set_item("energy", e.energy)?;
            d.set_item("moved", e.moved)?;
            d.set_item("before", e.before.to_vec())?;
            d.set_item("after", e.after.to_vec())?;
            list.append(d)?;
        }
        Ok(list)
    }

    /// The events as a NumPy structured array with fields ``time`` (f8),
    /// ``kind``, ``cause``, ``element`` (str), ``energy`` and ``moved`` (f8,
    /// NaN where not a jump), ``before`` and ``after`` (f8 rows of the
    /// states in the order of ``state_names``). ``pandas.DataFrame`` reads
    /// the scalar fields directly.
    #[getter]
    fn events_array<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        let log = &self.result.events;
        let n = log.len();
        let ns = log.state_names().len();
        let mut time = Vec::with_capacity(n);
        let mut kind = Vec::with_capacity(n);
        let mut cause = Vec::with_capacity(n);
        let mut element = Vec::with_capacity(n);
        let mut energy = Vec::with_capacity(n);
        let mut moved = Vec::with_capacity(n);
        let mut before = Vec::with_capacity(n * ns);
        let mut after = Vec::with_capacity(n * ns);
        for e in log.iter() {
            time.push(e.time);
            kind.push(name_of(&e.kind));
            cause.push(name_of(&e.cause));
            element.push(e.element.to_string());
            energy.push(e.energy.unwrap_or(f64::NAN));
            moved.push(e.moved.unwrap_or(f64::NAN));
            before.extend_from_slice(e.before);
            after.extend_from_slice(e.after);
        }
        let width = |v: &[String]| {
            v.iter()
                .map(|s| s.chars().count())
                .max()
                .unwrap_or(1)
                .max(1)
        };
        let np = py.import("numpy")?;
        let dtype = PyList::new(
            py,
            [
                ("time", "f8".to_string()).into_pyobject(py)?.into_any(),
                ("kind", format!("U{}", width(&kind)))
                    .into_pyobject(py)?
                    .into_any(),
                ("cause", format!("U{}", width(&cause)))
                    .into_pyobject(py)?
                    .into_any(),
                ("element", format!("U{}", width(&element)))
                    .into_pyobject(py)?
                    .into_any(),
                ("energy", "f8".to_string()).into_pyobject(py)?.into_any(),
                ("moved", "f8".to_string()).into_pyobject(py)?.into_any(),
                ("before", "f8", (ns,)).into_pyobject(py)?.into_any(),
                ("after", "f8", (ns,)).into_pyobject(py)?.into_any(),
            ],
        )?;
        let kw = PyDict::new(py);
        kw.set_item("dtype", dtype)?;
        let arr = np.call_method("zeros", (n,), Some(&kw))?;
        arr.set_item("time", PyArray1::from_vec(py, time))?;
        arr.set_item("kind", kind)?;
        arr.set_item("cause", cause)?;
        arr.set_item("element", element)?;
        arr.set_item("energy", PyArray1::from_vec(py, energy))?;
        arr.set_item("moved", PyArray1::from_vec(py, moved))?;
        arr.set_item("before", PyArray1::from_vec(py, before).reshape([n, ns])?)?;
        arr.set_item("after", PyArray1::from_vec(py, after).reshape([n, ns])?)?;
        Ok(arr)
    }

    /// Counters: ``scheduled_events``, ``state_events`` (located),
    /// ``modes`` (conduction patterns met), ``cache_hits``,
    /// ``exponentials``, ``near_steps``, ``near_crossings`` (turn-offs
    /// found on a nearby length's polynomial), and per stage
    /// ``searched_intervals`` (event location searched them),
    /// ``replayed_transitions`` and ``resolved_patterns`` (patterns from
    /// memory and by the full resolution).
    #[getter]
    fn stats<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let s = self.result.stats;
        let d = PyDict::new(py);
        d.set_item("scheduled_events", s.scheduled_events)?;
        d.set_item("state_events", s.state_events)?;
        d.set_item("modes", s.modes)?;
        d.set_item("cache_hits", s.cache_hits)?;
        d.set_item("exponentials", s.exponentials)?;
        d.set_item("near_steps", s.near_steps)?;
        d.set_item("near_crossings", s.near_crossings)?;
        d.set_item("searched_intervals", s.searched_intervals)?;
        d.set_item("replayed_transitions", s.replayed_transitions)?;
        d.set_item("resolved_patterns", s.resolved_patterns)?;
        Ok(d)
    }

    /// The run's energy certificate, kept by the solver as the run went
    /// (docs/outputs.md): ``delivered``, ``dissipated``, ``jumps``,
    /// ``stored_change``, ``residual`` (J), ``relative`` (the residual over
    /// the balance's largest term), ``checked_time`` and
    /// ``unchecked_time`` (s) and ``checked_segments``.
    #[getter]
    fn certificate<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let c = self.result.certificate;
        let d = PyDict::new(py);
        d.set_item("delivered", c.delivered)?;
        d.set_item("dissipated", c.dissipated)?;
        d.set_item("jumps", c.jumps)?;
        d.set_item("stored_change", c.stored_change)?;
        d.set_item("residual", c.residual)?;
        d.set_item("relative", c.relative_residual())?;
        d.set_item("checked_time", c.checked_time)?;
        d.set_item("unchecked_time", c.unchecked_time)?;
        d.set_item("checked_segments", c.checked_segments)?;
        Ok(d)
    }

    /// The run's summary as a dict, the keys of the command line's
    /// ``summary.json``: ``stop_time``, ``window`` ([start, end] of the
    /// record, or None), ``events``, ``modes``, ``measurements`` (one dict
    /// per output of ``outputs`` over the window, as :meth:`measure`; an
    /// output that cannot be measured there has ``error`` instead) and
    /// ``stopped`` (``{"time", "diagnostic"}`` or None). Computed on first
    /// access; a fresh copy each time.
    #[getter]
    fn summary<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        if self.summary.get().is_none() {
            let d = self.make_summary(py)?;
            let _ = self.summary.set(d.unbind());
        }
        let d = self.summary.get().expect("set above").bind(py);
        py.import("copy")?.call_method1("deepcopy", (d,))
    }

    fn __repr__(&self) -> String {
        let span = match self.result.waveform.span() {
            Some((a, b)) => format!("recorded {a:e} … {b:e} s"),
            None => "nothing recorded".into(),
        };
        let stopped = match &self.stopped {
            Some(e) => format!(", stopped: {e}"),
            None => String::new(),
        };
        format!(
            "<fluxstep.Run to {:e} s: {span}, {} events{stopped}>",
            self.stop,
            self.result.events.len()
        )
    }
}

impl PyRun {
    fn make_summary<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let w = &self.result.waveform;
        let d = PyDict::new(py);
        d.set_item("stop_time", self.stop)?;
        d.set_item("window", w.span().map(|(a, b)| vec![a, b]))?;
        d.set_item("events", self.result.events.len())?;
        d.set_item("modes", self.result.stats.modes)?;
        let list = PyList::empty(py);
        if let Some((a, b)) = w.span() {
            let ids: Vec<(String, OutputId)> = self
                .outputs
                .iter()
                .filter_map(|o| w.output(o).ok().map(|id| (o.clone(), id)))
                .collect();
            let ms: Vec<_> = py.detach(|| {
                ids.iter()
                    .map(|(o, id)| (o.clone(), measure(w, *id, a, b)))
                    .collect()
            });
            for (o, m) in ms {
                let item = match m {
                    Ok(m) => {
                        let x = ser_to_py(py, &m)?;
                        x.set_item("unit", unit(&o))?;
                        x
                    }
                    Err(e) => {
                        let x = PyDict::new(py);
                        x.set_item("output", &o)?;
                        x.set_item("error", e.to_string())?;
                        x.into_any()
                    }
                };
                list.append(item)?;
            }
        }
        d.set_item("measurements", list)?;
        match &self.stopped {
            Some(e) => {
                let s = PyDict::new(py);
                s.set_item("time", e.time())?;
                s.set_item("diagnostic", e.to_string())?;
                d.set_item("stopped", s)?;
            }
            None => d.set_item("stopped", py.None())?,
        }
        Ok(d)
    }
}

/// The SI unit of an output name ("V", "A", or "" for a compensator output).
pub(crate) fn unit(name: &str) -> &'static str {
    OutputName::parse(name).map(|o| o.unit()).unwrap_or("")
}

/// The snake_case name serde gives a unit variant.
fn name_of<T: serde::Serialize>(v: &T) -> String {
    match serde_json::to_value(v) {
        Ok(serde_json::Value::String(s)) => s,
        _ => String::new(),
    }
}

/// A JSON value as Python objects (re-exported for the analysis module).
pub(crate) fn json_to_py<'py>(
    py: Python<'py>,
    v: &serde_json::Value,
) -> PyResult<Bound<'py, PyAny>> {
    to_py(py, v)
}
