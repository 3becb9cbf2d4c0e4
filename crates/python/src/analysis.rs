//! The analyses of fluxstep-analysis: periodic steady state, small-signal
//! response and loop gain, losses. Same names and shapes as in Rust.

use std::time::Duration;

use fluxstep_analysis::response::{self, Input, Point};
use fluxstep_analysis::steady::{self, SteadyOptions, SteadyState};
use fluxstep_solver::{OnInterruption, OnShootThrough, Options};
use numpy::{PyArray1, PyArray2};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList};

use crate::circuit::circuit_arg;
use crate::convert::ser_to_py;
use crate::errors::analysis_error;
use crate::run::{unit, PyRun};

/// Options of a steady-state search (``fluxstep.steady.SteadyOptions``);
/// every default is the Rust one.
///
/// - ``tolerance`` (1e-12): Newton stops when every state's change over one
///   period is at most this fraction of that state's scale.
/// - ``max_iterations`` (50): most Newton iterations.
/// - ``time_limit`` (60.0 s of wall time; None for no limit).
/// - ``period_multiple`` (1): find a fixed point over this many periods.
/// - ``settle_periods`` (0): plain transient periods before the first iterate.
/// - ``record_periods`` (1): periods recorded in the result's run.
/// - ``on_interruption`` (``"stop"``) and ``on_shoot_through``
///   (``"stop"``): the solver's policies.
#[pyclass(name = "SteadyOptions", module = "fluxstep.steady", from_py_object)]
#[derive(Clone)]
pub struct PySteadyOptions {
    #[pyo3(get, set)]
    tolerance: f64,
    #[pyo3(get, set)]
    max_iterations: usize,
    #[pyo3(get, set)]
    time_limit: Option<f64>,
    #[pyo3(get, set)]
    period_multiple: u64,
    #[pyo3(get, set)]
    settle_periods: u64,
    #[pyo3(get, set)]
    record_periods: u64,
    #[pyo3(get, set)]
    on_interruption: String,
    #[pyo3(get, set)]
    on_shoot_through: String,
}

#[pymethods]
impl PySteadyOptions {
    #[new]
    #[pyo3(signature = (*, tolerance=1e-12, max_iterations=50, time_limit=Some(60.0),
        period_multiple=1, settle_periods=0, record_periods=1, on_interruption="stop".to_string(),
        on_shoot_through="stop".to_string()))]
    #[allow(clippy::too_many_arguments)]
    fn new(
        tolerance: f64,
        max_iterations: usize,
        time_limit: Option<f64>,
        period_multiple: u64,
        settle_periods: u64,
        record_periods: u64,
        on_interruption: String,
        on_shoot_through: String,
    ) -> Self {
        PySteadyOptions {
            tolerance,
            max_iterations,
            time_limit,
            period_multiple,
            settle_periods,
            record_periods,
            on_interruption,
            on_shoot_through,
        }
    }

    fn __repr__(&self) -> String {
        format!(
            "SteadyOptions(tolerance={:e}, max_iterations={}, time_limit={:?}, period_multiple={}, \
             settle_periods={}, record_periods={}, on_interruption={:?}, on_shoot_through={:?})",
            self.tolerance,
            self.max_iterations,
            self.time_limit,
            self.period_multiple,
            self.settle_periods,
            self.record_periods,
            self.on_interruption,
            self.on_shoot_through
        )
    }
}

impl PySteadyOptions {
    fn to_rust(&self) -> PyResult<SteadyOptions> {
        let on_interruption = match self.on_interruption.as_str() {
            "stop" => OnInterruption::Stop,
            "conserve_flux" => OnInterruption::ConserveFlux,
            o => {
                return Err(PyValueError::new_err(format!(
                    "on_interruption must be \"stop\" or \"conserve_flux\", got {o:?}"
                )))
            }
        };
        let on_shoot_through = match self.on_shoot_through.as_str() {
            "stop" => OnShootThrough::Stop,
            "record" => OnShootThrough::Record,
            o => {
                return Err(PyValueError::new_err(format!(
                    "on_shoot_through must be \"stop\" or \"record\", got {o:?}"
                )))
            }
        };
        let time_limit = match self.time_limit {
            None => None,
            Some(s) if s >= 0.0 && s.is_finite() => Some(Duration::from_secs_f64(s)),
            Some(s) => {
                return Err(PyValueError::new_err(format!(
                    "time_limit must be a non-negative number of seconds or None, got {s}"
                )))
            }
        };
        Ok(SteadyOptions {
            tolerance: self.tolerance,
            max_iterations: self.max_iterations,
            time_limit,
            period_multiple: self.period_multiple,
            settle_periods: self.settle_periods,
            record_periods: self.record_periods,
            solver: Options {
                on_interruption,
                on_shoot_through,
                ..Options::default()
            },
        })
    }
}

fn options(opts: Option<PySteadyOptions>) -> PyResult<SteadyOptions> {
    match opts {
        Some(o) => o.to_rust(),
        None => Ok(SteadyOptions::default()),
    }
}

/// A periodic steady state (``fluxstep.steady.SteadyState``): the state at
/// the start of the period, the exact run over the recorded periods (a
/// :class:`fluxstep.Run`), the monodromy matrix and its Floquet
/// multipliers, and the Newton history.
#[pyclass(name = "SteadyState", module = "fluxstep.steady", frozen)]
pub struct PySteady {
    inner: SteadyState,
    run: Py<PyRun>,
}

impl PySteady {
    fn new(py: Python<'_>, ss: SteadyState) -> PyResult<PySteady> {
        // A copy for the Python-side run (one or two periods: small); the
        // original stays in place for the steady state's own measurements.
        let result = fluxstep_solver::RunResult {
            waveform: ss.run.waveform.clone(),
            events: ss.run.events.clone(),
            stats: ss.run.stats,
            certificate: ss.run.certificate,
        };
        let end = ss.run.waveform.span().map_or(ss.end_time(), |(_, b)| b);
        let run = Py::new(py, PyRun::from_result(result, end))?;
        Ok(PySteady { inner: ss, run })
    }
}

#[pymethods]
impl PySteady {
    /// The period T of the orbit (s).
    #[getter]
    fn period(&self) -> f64 {
        self.inner.period
    }

    /// Start of the recorded period (s), a whole number of switching periods from 0.
    #[getter]
    fn start_time(&self) -> f64 {
        self.inner.start_time
    }

    /// End of the first recorded period (s).
    #[getter]
    fn end_time(&self) -> f64 {
        self.inner.end_time()
    }

    /// Names of the states, in the order of ``state``.
    #[getter]
    fn state_names(&self) -> Vec<String> {
        self.inner.state_names.clone()
    }

    /// The state at the start of the period.
    #[getter]
    fn state<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_vec(py, self.inner.state.clone())
    }

    /// The exact run over the recorded periods, from ``state``.
    #[getter]
    fn run(&self, py: Python<'_>) -> Py<PyRun> {
        self.run.clone_ref(py)
    }

    /// Indices of the states that are unknowns of the search (rows and
    /// columns of ``monodromy``).
    #[getter]
    fn free_states(&self) -> Vec<usize> {
        self.inner.free_states.clone()
    }

    /// ∂x(T)/∂x(0) at the orbit over ``free_states``, saltation included.
    #[getter]
    fn monodromy<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyArray2<f64>>> {
        let m = &self.inner.monodromy;
        let rows: Vec<Vec<f64>> = (0..m.nrows())
            .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
            .collect();
        if rows.is_empty() {
            return Ok(PyArray2::zeros(py, [0, 0], false));
        }
        Ok(PyArray2::from_vec2(py, &rows)?)
    }

    /// Floquet multipliers, largest magnitude first: dicts with ``re``,
    /// ``im``, ``magnitude``, ``periods_per_e`` and ``reading``
    /// (``stable``, ``slow``, ``unstable``, ``period_doubling``).
    #[getter]
    fn multipliers<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.inner.multipliers)
    }

    /// Newton iterates, the starting point first: dicts with ``residual``,
    /// ``damping``, ``trials``, ``newton``.
    #[getter]
    fn iterations<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.inner.iterations)
    }

    /// The residual of the recorded period.
    #[getter]
    fn residual(&self) -> f64 {
        self.inner.residual
    }

    /// Newton steps taken.
    #[getter]
    fn newton_steps(&self) -> usize {
        self.inner.newton_steps()
    }

    /// Whether every multiplier lies inside the unit circle.
    fn is_stable(&self) -> bool {
        self.inner.is_stable()
    }

    /// Exact measurements of ``output`` over one period (dict as
    /// :meth:`fluxstep.Run.measure`, with its ``unit``).
    fn measurement<'py>(&self, py: Python<'py>, output: &str) -> PyResult<Bound<'py, PyAny>> {
        let m = self
            .inner
            .measurement(output)
            .map_err(|e| analysis_error(py, e))?;
        let d = ser_to_py(py, &m)?;
        d.set_item("unit", unit(&m.output))?;
        Ok(d)
    }

    /// Measurements of every output determined over the period.
    fn measurements<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        let list = PyList::empty(py);
        for m in self.inner.measurements() {
            let d = ser_to_py(py, &m)?;
            d.set_item("unit", unit(&m.output))?;
            list.append(d)?;
        }
        Ok(list.into_any())
    }

    fn __repr__(&self) -> String {
        format!(
            "<fluxstep.steady.SteadyState: period {:e} s from {:e} s, {} Newton steps, residual {:.2e}, {}>",
            self.inner.period,
            self.inner.start_time,
            self.inner.newton_steps(),
            self.inner.residual,
            if self.inner.is_stable() { "stable" } else { "unstable" }
        )
    }
}

/// Finds the periodic steady state of ``circuit`` by shooting (Newton's
/// method on the exact period map with its exact Jacobian) and returns a
/// :class:`SteadyState`. Releases the GIL while it works; the search is
/// bounded by ``options.time_limit`` and ``max_iterations``.
///
/// Raises AnalysisError (``kind``: ``no_period``, ``incommensurate``,
/// ``not_converged`` with ``history``, ``undetermined``,
/// ``invalid_option``), SimulationError for a diagnostic on the orbit,
/// CircuitError for a circuit that cannot be read.
#[pyfunction]
#[pyo3(name = "find", signature = (circuit, options=None))]
pub fn steady_find(
    py: Python<'_>,
    circuit: &Bound<'_, PyAny>,
    options: Option<PySteadyOptions>,
) -> PyResult<PySteady> {
    let c = circuit_arg(py, circuit)?;
    let opts = self::options(options)?;
    let ss = py
        .detach(|| steady::find(&c, &opts))
        .map_err(|e| analysis_error(py, e))?;
    PySteady::new(py, ss)
}

/// Columns of response points: frequency, re, im, magnitude_db,
/// phase_deg, beyond_nyquist.
fn point_columns<'py>(py: Python<'py>, points: &[Point]) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    let col = |f: fn(&Point) -> f64| PyArray1::from_vec(py, points.iter().map(f).collect());
    d.set_item("frequency", col(|p| p.frequency))?;
    d.set_item("re", col(|p| p.re))?;
    d.set_item("im", col(|p| p.im))?;
    d.set_item("magnitude_db", col(|p| p.magnitude_db))?;
    d.set_item("phase_deg", col(|p| p.phase_deg))?;
    d.set_item(
        "beyond_nyquist",
        PyArray1::from_vec(py, points.iter().map(|p| p.beyond_nyquist).collect()),
    )?;
    Ok(d)
}

/// A frequency response (``fluxstep.response.Response``): ``input``,
/// ``output``, ``unit``, ``switching_frequency``, ``points`` (list of
/// dicts), ``resonances``, ``steady`` (the :class:`SteadyState` linearised)
/// and ``columns`` (NumPy arrays ready for ``pandas.DataFrame``).
#[pyclass(name = "Response", module = "fluxstep.response", frozen)]
pub struct PyResponse {
    #[pyo3(get)]
    input: String,
    #[pyo3(get)]
    output: String,
    #[pyo3(get)]
    unit: String,
    #[pyo3(get)]
    switching_frequency: f64,
    points_: Vec<Point>,
    resonances_: Vec<response::Resonance>,
    #[pyo3(get)]
    steady: Py<PySteady>,
}

#[pymethods]
impl PyResponse {
    /// One dict per frequency: ``frequency``, ``re``, ``im``,
    /// ``magnitude_db``, ``phase_deg``, ``beyond_nyquist``.
    #[getter]
    fn points<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.points_)
    }

    /// Peaks of the magnitude: ``frequency``, ``magnitude_db``, ``prominence_db``.
    #[getter]
    fn resonances<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.resonances_)
    }

    /// The points as columns of NumPy arrays (``pandas.DataFrame(r.columns)``).
    #[getter]
    fn columns<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        point_columns(py, &self.points_)
    }

    /// The complex transfer function at each frequency.
    #[getter]
    fn value<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        complex(py, &self.points_)
    }

    fn __repr__(&self) -> String {
        format!(
            "<fluxstep.response.Response {} → {} ({}), {} frequencies>",
            self.input,
            self.output,
            self.unit,
            self.points_.len()
        )
    }
}

fn complex<'py>(py: Python<'py>, points: &[Point]) -> PyResult<Bound<'py, PyAny>> {
    let re = PyArray1::from_vec(py, points.iter().map(|p| p.re).collect());
    let im = PyArray1::from_vec(py, points.iter().map(|p| p.im).collect());
    let j = num_complex_j(py)?;
    re.into_any().add(im.into_any().mul(j)?)
}

fn num_complex_j(py: Python<'_>) -> PyResult<Bound<'_, PyAny>> {
    py.eval(c"1j", None, None)
}

/// A loop gain (``fluxstep.response.LoopGain``): ``gate``, ``points``,
/// ``margins`` (``crossover_hz``, ``phase_margin_deg``,
/// ``phase_crossover_hz``, ``gain_margin_db``; None where not in range),
/// ``switching_frequency``, ``steady`` and ``columns``.
#[pyclass(name = "LoopGain", module = "fluxstep.response", frozen)]
pub struct PyLoopGain {
    #[pyo3(get)]
    gate: String,
    points_: Vec<Point>,
    margins_: response::Margins,
    #[pyo3(get)]
    switching_frequency: f64,
    #[pyo3(get)]
    steady: Py<PySteady>,
}

#[pymethods]
impl PyLoopGain {
    /// One dict per frequency, as :attr:`Response.points`.
    #[getter]
    fn points<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.points_)
    }

    /// Crossover and margins, refined on the exact loop gain.
    #[getter]
    fn margins<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.margins_)
    }

    /// The points as columns of NumPy arrays.
    #[getter]
    fn columns<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        point_columns(py, &self.points_)
    }

    /// The complex loop gain at each frequency.
    #[getter]
    fn value<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        complex(py, &self.points_)
    }

    fn __repr__(&self) -> String {
        format!(
            "<fluxstep.response.LoopGain of {}, {} frequencies>",
            self.gate,
            self.points_.len()
        )
    }
}

/// The exact small-signal response from ``input`` to ``output`` at
/// ``frequencies`` (Hz), linearised around the periodic steady state.
/// ``input`` is written as on the command line: ``SOURCE``,
/// ``GATE.duty``, ``GATE.reference``, ``GATE.sense``,
/// ``COMPENSATOR.reference`` or ``injection:NODE``.
///
/// Raises AnalysisError (``unstable``, ``unknown_input``,
/// ``invalid_option`` and the steady-state kinds), OutputError.
#[pyfunction]
#[pyo3(signature = (circuit, input, output, frequencies, options=None))]
pub fn frequency_response(
    py: Python<'_>,
    circuit: &Bound<'_, PyAny>,
    input: &str,
    output: &str,
    frequencies: Vec<f64>,
    options: Option<PySteadyOptions>,
) -> PyResult<PyResponse> {
    let c = circuit_arg(py, circuit)?;
    let opts = self::options(options)?;
    let input = Input::parse(input);
    let r = py
        .detach(|| response::frequency_response(&c, &input, output, &frequencies, &opts))
        .map_err(|e| analysis_error(py, e))?;
    Ok(PyResponse {
        input: r.input,
        output: r.output,
        unit: r.unit,
        switching_frequency: r.switching_frequency,
        points_: r.points,
        resonances_: r.resonances,
        steady: Py::new(py, PySteady::new(py, r.steady)?)?,
    })
}

/// The loop gain of a closed loop broken at ``gate``: a closed-loop gate
/// (at its comparator's sense input) or a compensator (at its input), at
/// ``frequencies`` (Hz), with crossover and margins.
///
/// Raises as :func:`frequency_response`; AnalysisError ``unknown_input``
/// when ``gate`` is neither a closed-loop gate nor a compensator.
#[pyfunction]
#[pyo3(signature = (circuit, gate, frequencies, options=None))]
pub fn loop_gain(
    py: Python<'_>,
    circuit: &Bound<'_, PyAny>,
    gate: &str,
    frequencies: Vec<f64>,
    options: Option<PySteadyOptions>,
) -> PyResult<PyLoopGain> {
    let c = circuit_arg(py, circuit)?;
    let opts = self::options(options)?;
    let point = response::BreakPoint::named(&c, gate).map_err(|e| analysis_error(py, e))?;
    let r = py
        .detach(|| response::loop_gain(&c, &point, &frequencies, &opts))
        .map_err(|e| analysis_error(py, e))?;
    Ok(PyLoopGain {
        gate: gate.to_string(),
        points_: r.points,
        margins_: r.margins,
        switching_frequency: r.switching_frequency,
        steady: Py::new(py, PySteady::new(py, r.steady)?)?,
    })
}

/// ``points`` frequencies evenly spaced on a log scale from ``start`` to
/// ``stop`` (Hz), both included, as a NumPy array.
///
/// Raises AnalysisError ``invalid_option`` unless 0 < start ≤ stop and
/// points ≥ 1.
#[pyfunction]
pub fn log_frequencies(
    py: Python<'_>,
    start: f64,
    stop: f64,
    points: usize,
) -> PyResult<Bound<'_, PyArray1<f64>>> {
    let f = response::log_frequencies(start, stop, points).map_err(|e| analysis_error(py, e))?;
    Ok(PyArray1::from_vec(py, f))
}

/// The loss breakdown of ``run`` (a :class:`Run` of ``circuit``) over
/// ``[t0, t1]`` (default: the recorded window), as a dict: ``t0``, ``t1``,
/// ``loads``, ``input_power``, ``output_power``, ``total_loss`` (W),
/// ``efficiency`` (None without loads), ``by_kind`` (W per mechanism),
/// ``by_part`` (a list, largest first, of ``part``, ``total`` and
/// ``by_kind``), ``parts`` (every loss with its ``energy`` in J and
/// ``power`` in W), ``stored`` (stored energy at both ends, J),
/// ``balance_residual`` (J) and ``balance_error`` (relative), and
/// ``outside_tables`` (switch edges outside their switching-energy table).
///
/// ``loads`` names the output elements; by default the file's
/// ``run.loads``, else the resistors from ``out`` to ground (directly or
/// through one switch). Every figure is an exact integral of the run or
/// an exact sum over its events (docs/losses.md).
///
/// Raises AnalysisError for an unknown load or bad loss data,
/// MeasureError for a window outside the record.
#[pyfunction]
#[pyo3(signature = (circuit, run, t0=None, t1=None, loads=None))]
pub fn losses<'py>(
    py: Python<'py>,
    circuit: &Bound<'_, PyAny>,
    run: &crate::run::PyRun,
    t0: Option<f64>,
    t1: Option<f64>,
    loads: Option<Vec<String>>,
) -> PyResult<Bound<'py, PyAny>> {
    use fluxstep_analysis::losses::{breakdown, LossOptions};
    let c = circuit_arg(py, circuit)?;
    let w = &run.result.waveform;
    let (a, b) = match (t0, t1, w.span()) {
        (Some(a), Some(b), _) => (a, b),
        (a, b, Some((s0, s1))) => (a.unwrap_or(s0), b.unwrap_or(s1)),
        _ => {
            return Err(crate::errors::measure_error(
                py,
                fluxstep_solver::measure::MeasureError::NothingRecorded {
                    subject: "losses".into(),
                },
            ))
        }
    };
    let loads = loads.unwrap_or_else(|| fluxstep_analysis::losses::loads(&c));
    let opts = LossOptions {
        loads: loads.clone(),
    };
    let events = &run.result.events;
    let r = py
        .detach(|| breakdown(&c, w, events, a, b, &opts))
        .map_err(|e| analysis_error(py, e))?;
    let d = PyDict::new(py);
    d.set_item("t0", r.t0)?;
    d.set_item("t1", r.t1)?;
    d.set_item("loads", loads)?;
    d.set_item("input_power", r.input_power())?;
    d.set_item("output_power", r.output_power())?;
    d.set_item("total_loss", r.total_loss())?;
    d.set_item("efficiency", r.efficiency())?;
    d.set_item("by_kind", ser_to_py(py, &r.by_kind())?)?;
    d.set_item("by_part", ser_to_py(py, &r.by_part())?)?;
    d.set_item("parts", ser_to_py(py, &r.parts)?)?;
    d.set_item("stored", r.stored)?;
    d.set_item("balance_residual", r.balance_residual())?;
    d.set_item("balance_error", r.balance_error())?;
    d.set_item("outside_tables", ser_to_py(py, &r.outside_tables)?)?;
    Ok(d.into_any())
}
