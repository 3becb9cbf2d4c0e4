//! `Circuit` and `CircuitBuilder`: the netlist crate's description and
//! builder, read from a file, a JSON text or a Python dict.

use std::path::PathBuf;

use fluxstep_netlist::{Circuit, CircuitBuilder, DiodeModel, Element, Gate, Stimulus};
use pyo3::exceptions::PyTypeError;
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyString};

use crate::convert::{ser_to_py, to_value};
use crate::errors::{circuit_error, solver_error};

/// A validated circuit: named elements on named nodes, the gate signals
/// that drive its switches, optional run settings. Read one with
/// :meth:`Circuit.from_file`, :meth:`Circuit.from_json`,
/// :meth:`Circuit.from_dict` (the same format as a dict) or
/// :func:`fluxstep.load`; build one with :class:`CircuitBuilder`.
///
/// Circuits compare equal when every element, gate and setting is equal
/// in every bit.
#[pyclass(name = "Circuit", module = "fluxstep", frozen, eq)]
#[derive(Clone, PartialEq)]
pub struct PyCircuit {
    pub(crate) inner: Circuit,
}

impl PyCircuit {
    fn from_text(py: Python<'_>, text: &str) -> PyResult<PyCircuit> {
        Circuit::from_json(text)
            .map(|inner| PyCircuit { inner })
            .map_err(|e| circuit_error(py, e, None))
    }
}

#[pymethods]
impl PyCircuit {
    /// Reads and validates a circuit file (JSON, see docs/netlist.md).
    ///
    /// Raises CircuitError listing every problem, or OSError when the file
    /// cannot be read.
    #[staticmethod]
    fn from_file(py: Python<'_>, path: PathBuf) -> PyResult<PyCircuit> {
        Circuit::from_file(&path)
            .map(|inner| PyCircuit { inner })
            .map_err(|e| circuit_error(py, e, Some(&path.display().to_string())))
    }

    /// Reads and validates a circuit from JSON text.
    ///
    /// Raises CircuitError naming the path of a malformed field, or
    /// listing every rule the circuit breaks.
    #[staticmethod]
    fn from_json(py: Python<'_>, text: &str) -> PyResult<PyCircuit> {
        Self::from_text(py, text)
    }

    /// Reads and validates a circuit from a dict in the JSON format (values
    /// may be numbers or strings with SI prefixes, as in a file). The dict
    /// takes exactly the route a JSON text takes, so both give identical
    /// circuits and identical errors.
    #[staticmethod]
    fn from_dict(py: Python<'_>, data: &Bound<'_, PyAny>) -> PyResult<PyCircuit> {
        if !data.is_instance_of::<PyDict>() {
            return Err(PyTypeError::new_err(format!(
                "a circuit dict is expected, got {}",
                data.get_type().name()?
            )));
        }
        let text = serde_json::to_string(&to_value(data, "")?).expect("a JSON value serializes");
        Self::from_text(py, &text)
    }

    /// The circuit as pretty JSON text; reading it back gives an equal circuit.
    fn to_json(&self) -> String {
        self.inner.to_json()
    }

    /// The circuit as a dict in the JSON format (values in SI units).
    fn to_dict<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.inner)
    }

    /// The description text.
    #[getter]
    fn description(&self) -> &str {
        &self.inner.description
    }

    /// Every node name, ground first (as ``gnd``), then in order of first use.
    #[getter]
    fn nodes(&self) -> Vec<String> {
        self.inner.nodes()
    }

    /// Every element name, in order.
    #[getter]
    fn elements(&self) -> Vec<String> {
        self.inner
            .elements
            .iter()
            .map(|e| e.name().to_string())
            .collect()
    }

    /// Every output that a run can record and evaluate (node voltages,
    /// element currents and voltages, compensator outputs), canonical names.
    #[getter]
    fn outputs(&self, py: Python<'_>) -> PyResult<Vec<String>> {
        let sim = fluxstep_solver::Simulator::new(&self.inner, fluxstep_solver::Options::default())
            .map_err(|e| solver_error(py, e))?;
        Ok(sim.waveform().output_names().to_vec())
    }

    /// The run settings of the file (``stop_time``, ``record_from``,
    /// ``outputs``, policies) as a dict, or None.
    #[getter]
    fn run_settings<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.inner.run)
    }

    fn __repr__(&self) -> String {
        format!(
            "<fluxstep.Circuit: {} elements, {} gates, nodes {}>",
            self.inner.elements.len(),
            self.inner.gates.len(),
            self.inner.nodes().join(", ")
        )
    }
}

/// Reads a circuit from whatever describes one: a :class:`Circuit` (returned
/// as is), a dict in the JSON format, JSON text (a string starting with
/// ``{``), or a path to a JSON file.
#[pyfunction]
pub fn load(py: Python<'_>, source: &Bound<'_, PyAny>) -> PyResult<PyCircuit> {
    if let Ok(c) = source.cast::<PyCircuit>() {
        return Ok(c.get().clone());
    }
    if source.is_instance_of::<PyDict>() {
        return PyCircuit::from_dict(py, source);
    }
    if let Ok(s) = source.cast::<PyString>() {
        let text = s.to_str()?;
        if text.trim_start().starts_with('{') {
            return PyCircuit::from_text(py, text);
        }
    }
    let path: PathBuf = source.extract().map_err(|_| {
        PyTypeError::new_err(format!(
            "a Circuit, a dict, JSON text or a path is expected, got {}",
            source
                .get_type()
                .name()
                .map(|n| n.to_string())
                .unwrap_or_default()
        ))
    })?;
    PyCircuit::from_file(py, path)
}

/// The circuit a call receives: a Circuit or anything :func:`load` reads.
pub fn circuit_arg(py: Python<'_>, source: &Bound<'_, PyAny>) -> PyResult<Circuit> {
    if let Ok(c) = source.cast::<PyCircuit>() {
        return Ok(c.get().inner.clone());
    }
    load(py, source).map(|c| c.inner)
}

/// A JSON part (a waveform, an element, a gate, a diode model) given as a
/// number, dict or JSON text, read with the circuit format's own rules.
fn part<T: serde::de::DeserializeOwned>(obj: &Bound<'_, PyAny>, what: &str) -> PyResult<T> {
    let value = to_value(obj, what)?;
    serde_json::from_value(value)
        .map_err(|e| pyo3::exceptions::PyValueError::new_err(format!("{what}: {e}")))
}

/// A source waveform: a number is a constant value; otherwise a dict in the
/// circuit format (``{"kind": "sine", ...}``).
fn waveform(obj: &Bound<'_, PyAny>) -> PyResult<Stimulus> {
    if let Ok(v) = obj.extract::<f64>() {
        return Ok(Stimulus::constant(v));
    }
    part(obj, "waveform")
}

/// Builds a circuit in code, reading like a schematic; mirrors the Rust
/// ``CircuitBuilder``. Every method returns the builder, so calls chain;
/// :meth:`build` validates and returns the :class:`Circuit`.
///
/// Example::
///
///     buck = (fluxstep.CircuitBuilder()
///             .voltage_source("Vin", "in", "gnd", 12.0)
///             .switch("S1", "in", "sw", "drive")
///             .diode("D1", "gnd", "sw")
///             .inductor("L1", "sw", "out", 22e-6)
///             .capacitor("C1", "out", "gnd", 100e-6)
///             .resistor("Rload", "out", "gnd", 2.0)
///             .pwm("drive", 100e3, 0.4)
///             .build())
#[pyclass(name = "CircuitBuilder", module = "fluxstep")]
#[derive(Default)]
pub struct PyBuilder {
    inner: Option<CircuitBuilder>,
}

impl PyBuilder {
    fn with(
        mut slf: PyRefMut<'_, Self>,
        f: impl FnOnce(CircuitBuilder) -> CircuitBuilder,
    ) -> PyRefMut<'_, Self> {
        let b = slf.inner.take().unwrap_or_default();
        slf.inner = Some(f(b));
        slf
    }
}

#[pymethods]
impl PyBuilder {
    #[new]
    fn new() -> Self {
        PyBuilder::default()
    }

    /// Sets the description.
    fn description<'a>(slf: PyRefMut<'a, Self>, text: &str) -> PyRefMut<'a, Self> {
        Self::with(slf, |b| b.description(text))
    }

    /// Adds a resistor ``a``–``b`` of ``ohms``.
    fn resistor<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        a: &str,
        b: &str,
        ohms: f64,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| x.resistor(name, a, b, ohms))
    }

    /// Adds an inductor ``a``→``b`` of ``henries``, carrying
    /// ``initial_current`` (a → b) at t = 0 when given.
    #[pyo3(signature = (name, a, b, henries, initial_current=None))]
    fn inductor<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        a: &str,
        b: &str,
        henries: f64,
        initial_current: Option<f64>,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| match initial_current {
            Some(i) => x.inductor_with_current(name, a, b, henries, i),
            None => x.inductor(name, a, b, henries),
        })
    }

    /// Adds a capacitor ``a``–``b`` of ``farads``, charged to
    /// ``initial_voltage`` (v(a) − v(b)) at t = 0 when given.
    #[pyo3(signature = (name, a, b, farads, initial_voltage=None))]
    fn capacitor<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        a: &str,
        b: &str,
        farads: f64,
        initial_voltage: Option<f64>,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| match initial_voltage {
            Some(v) => x.capacitor_with_voltage(name, a, b, farads, v),
            None => x.capacitor(name, a, b, farads),
        })
    }

    /// Adds a voltage source, ``plus`` − ``minus`` = ``value``: a number
    /// (constant volts) or a waveform dict of the circuit format.
    fn voltage_source<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        plus: &str,
        minus: &str,
        value: &Bound<'_, PyAny>,
    ) -> PyResult<PyRefMut<'a, Self>> {
        let w = waveform(value)?;
        Ok(Self::with(slf, |x| {
            x.voltage_waveform(name, plus, minus, w)
        }))
    }

    /// Adds a current source pushing ``value`` (a number in amperes or a
    /// waveform dict) from ``from_node`` through itself to ``to_node``.
    fn current_source<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        from_node: &str,
        to_node: &str,
        value: &Bound<'_, PyAny>,
    ) -> PyResult<PyRefMut<'a, Self>> {
        let w = waveform(value)?;
        Ok(Self::with(slf, |x| {
            x.current_source(name, from_node, to_node, w)
        }))
    }

    /// Adds an ideal switch ``a``–``b`` driven by gate signal ``gate``.
    fn switch<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        a: &str,
        b: &str,
        gate: &str,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| x.switch(name, a, b, gate))
    }

    /// Adds a switch that is open at first and closes (True) or opens
    /// (False) at each of ``times``, a list of ``(time, on)`` pairs.
    fn timed_switch<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        a: &str,
        b: &str,
        times: Vec<(f64, bool)>,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| x.timed_switch(name, a, b, &times))
    }

    /// Adds a switch with an anti-parallel body diode, drain ``a``, source
    /// ``b``; ``body`` is a diode model dict (``{}`` for an ideal one).
    #[pyo3(signature = (name, a, b, gate, on_resistance=0.0, body=None))]
    fn transistor<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        a: &str,
        b: &str,
        gate: &str,
        on_resistance: f64,
        body: Option<&Bound<'_, PyAny>>,
    ) -> PyResult<PyRefMut<'a, Self>> {
        let model: DiodeModel = match body {
            Some(m) => part(m, "body")?,
            None => DiodeModel::default(),
        };
        Ok(Self::with(slf, |x| {
            x.transistor(name, a, b, gate, on_resistance, model)
        }))
    }

    /// Adds a diode ``anode`` → ``cathode``: ideal, or with the diode model
    /// dict ``model`` (forward voltage, on-resistance) of the circuit format.
    #[pyo3(signature = (name, anode, cathode, model=None))]
    fn diode<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        anode: &str,
        cathode: &str,
        model: Option<&Bound<'_, PyAny>>,
    ) -> PyResult<PyRefMut<'a, Self>> {
        Ok(match model {
            Some(m) => {
                let m: DiodeModel = part(m, "model")?;
                Self::with(slf, |x| x.diode_model(name, anode, cathode, m))
            }
            None => Self::with(slf, |x| x.diode(name, anode, cathode)),
        })
    }

    /// Adds fixed-frequency PWM gate ``name`` (rising at k·T, duty in [0, 1]).
    fn pwm<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        frequency: f64,
        duty: f64,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| x.pwm(name, frequency, duty))
    }

    /// Adds a complementary pair ``name.high`` / ``name.low`` with dead times (s).
    fn complementary_pwm<'a>(
        slf: PyRefMut<'a, Self>,
        name: &str,
        frequency: f64,
        duty: f64,
        dead_time_high: f64,
        dead_time_low: f64,
    ) -> PyRefMut<'a, Self> {
        Self::with(slf, |x| {
            x.complementary_pwm(name, frequency, duty, dead_time_high, dead_time_low)
        })
    }

    /// Adds any element, given as a dict of the circuit format.
    fn element<'a>(
        slf: PyRefMut<'a, Self>,
        data: &Bound<'_, PyAny>,
    ) -> PyResult<PyRefMut<'a, Self>> {
        let e: Element = part(data, "element")?;
        Ok(Self::with(slf, |x| x.element(e)))
    }

    /// Adds any gate, given as a dict of the circuit format.
    fn gate<'a>(slf: PyRefMut<'a, Self>, data: &Bound<'_, PyAny>) -> PyResult<PyRefMut<'a, Self>> {
        let g: Gate = part(data, "gate")?;
        Ok(Self::with(slf, |x| x.gate(g)))
    }

    /// Sets the default run settings: stop time (s) and outputs.
    #[pyo3(signature = (stop_time, outputs=Vec::new()))]
    fn run<'a>(
        slf: PyRefMut<'a, Self>,
        stop_time: f64,
        outputs: Vec<String>,
    ) -> PyRefMut<'a, Self> {
        let names: Vec<&str> = outputs.iter().map(String::as_str).collect();
        Self::with(slf, |x| x.run(stop_time, &names))
    }

    /// Validates and returns the circuit; the builder can go on being used.
    ///
    /// Raises CircuitError listing every problem.
    fn build(&self, py: Python<'_>) -> PyResult<PyCircuit> {
        self.inner
            .clone()
            .unwrap_or_default()
            .build()
            .map(|inner| PyCircuit { inner })
            .map_err(|e| circuit_error(py, e, None))
    }
}
