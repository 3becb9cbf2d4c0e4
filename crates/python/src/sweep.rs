//! Sweeps: operating points, corners and Monte Carlo samples over a base
//! circuit, and their result table. Same names and shapes as in Rust.

use std::path::PathBuf;

use fluxstep_analysis::sweep::{RunOptions, Shard, Summary, Sweep, SweepSpec, Table};
use numpy::PyArray1;
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList, PyString};

use crate::circuit::circuit_arg;
use crate::convert::{ser_to_py, to_value};
use crate::errors::{circuit_error, sweep_error};
use crate::run::json_to_py;

/// A sweep ready to run (``fluxstep.sweep.Sweep``): operating points,
/// tolerance corners and Monte Carlo samples over a base circuit.
///
/// ``spec`` is a path to a ``*.sweep.json`` file, its JSON text, or a dict
/// in the same format (see docs/sweeps.md). ``circuit`` (a Circuit or
/// anything :func:`fluxstep.load` reads) replaces the base circuit the
/// spec names; without it the spec's ``circuit`` path is read (relative to
/// the sweep file, or to the working folder for text and dicts).
///
/// Raises SweepError, CircuitError for the base circuit, OSError.
#[pyclass(name = "Sweep", module = "fluxstep.sweep", frozen)]
pub struct PySweep {
    inner: Sweep,
}

#[pymethods]
impl PySweep {
    #[new]
    #[pyo3(signature = (spec, circuit=None))]
    fn new(
        py: Python<'_>,
        spec: &Bound<'_, PyAny>,
        circuit: Option<&Bound<'_, PyAny>>,
    ) -> PyResult<Self> {
        let text = if spec.is_instance_of::<PyDict>() {
            Some(serde_json::to_string(&to_value(spec, "")?).expect("a JSON value serializes"))
        } else if let Ok(s) = spec.cast::<PyString>() {
            let s = s.to_str()?;
            s.trim_start().starts_with('{').then(|| s.to_string())
        } else {
            None
        };
        let inner = match (text, circuit) {
            (Some(text), circuit) => {
                let spec = SweepSpec::from_json(&text).map_err(|e| sweep_error(py, e))?;
                let c = match circuit {
                    Some(c) => circuit_arg(py, c)?,
                    None => fluxstep_netlist::Circuit::from_file(&spec.circuit)
                        .map_err(|e| circuit_error(py, e, Some(&spec.circuit)))?,
                };
                Sweep::new(spec, &c).map_err(|e| sweep_error(py, e))?
            }
            (None, None) => {
                let path: PathBuf = spec.extract()?;
                Sweep::from_file(&path).map_err(|e| sweep_error(py, e))?
            }
            (None, Some(c)) => {
                let path: PathBuf = spec.extract()?;
                let text = std::fs::read_to_string(&path).map_err(|e| {
                    pyo3::exceptions::PyOSError::new_err(format!(
                        "cannot read {}: {e}",
                        path.display()
                    ))
                })?;
                let spec = SweepSpec::from_json(&text).map_err(|e| sweep_error(py, e))?;
                Sweep::new(spec, &circuit_arg(py, c)?).map_err(|e| sweep_error(py, e))?
            }
        };
        Ok(PySweep { inner })
    }

    /// Number of points (grid combinations × Monte Carlo samples).
    #[getter]
    fn points(&self) -> u64 {
        self.inner.points()
    }

    /// What every table of this sweep holds besides its rows (fingerprint,
    /// parameter and figure columns with units).
    #[getter]
    fn meta<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, self.inner.meta())
    }

    /// Runs every point on ``threads`` threads (default: all cores) and
    /// returns the :class:`Table`, identical in every bit whatever the
    /// thread count. A point that fails is a row with its status and
    /// message, not an error. The GIL is released; Ctrl-C is seen between
    /// batches of points (the batches are the sweep's own shards, merged
    /// into exactly the single-run table) and raises KeyboardInterrupt.
    #[pyo3(signature = (threads=None))]
    fn run(&self, py: Python<'_>, threads: Option<usize>) -> PyResult<PyTable> {
        let total = self.inner.points();
        let workers = threads.unwrap_or_else(|| {
            std::thread::available_parallelism()
                .map(|n| n.get())
                .unwrap_or(1)
        }) as u64;
        // Batches of about 8 points per worker, at most 64 of them.
        let count = (total / (8 * workers.max(1))).clamp(1, 64);
        let sweep = &self.inner;
        let table = py.detach(|| -> PyResult<Table> {
            let mut shards = Vec::with_capacity(count as usize);
            for index in 0..count {
                let shard = Shard { index, count };
                let t = sweep
                    .run(&RunOptions {
                        threads,
                        shard: Some(shard),
                        progress: None,
                    })
                    .map_err(|e| Python::attach(|py| sweep_error(py, e)))?;
                shards.push((t, shard));
                if index + 1 < count {
                    Python::attach(|py| py.check_signals())?;
                }
            }
            if count == 1 {
                return Ok(shards.pop().expect("one shard").0);
            }
            Table::merge(shards).map_err(|e| Python::attach(|py| sweep_error(py, e)))
        })?;
        Ok(PyTable { inner: table })
    }

    fn __repr__(&self) -> String {
        format!("<fluxstep.sweep.Sweep of {} points>", self.inner.points())
    }
}

/// The table of a sweep run (``fluxstep.sweep.Table``): one row per point.
#[pyclass(name = "Table", module = "fluxstep.sweep", frozen)]
pub struct PyTable {
    inner: Table,
}

#[pymethods]
impl PyTable {
    /// The table as a dict of NumPy arrays, ready for
    /// ``pandas.DataFrame(table.columns)``: ``point`` (int), ``sample``
    /// (int; Monte Carlo sweeps only), one column per parameter path and
    /// per figure (float, NaN where a figure could not be measured),
    /// ``status`` (``ok``, ``invalid``, ``stopped``, ``failed``) and
    /// ``message``.
    #[getter]
    fn columns<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let t = &self.inner;
        let d = PyDict::new(py);
        d.set_item(
            "point",
            PyArray1::from_vec(py, t.rows.iter().map(|r| r.point as i64).collect()),
        )?;
        if t.meta.monte_carlo {
            d.set_item(
                "sample",
                PyArray1::from_vec(
                    py,
                    t.rows
                        .iter()
                        .map(|r| r.sample.map_or(-1, |s| s as i64))
                        .collect(),
                ),
            )?;
        }
        for (k, c) in t.meta.parameters.iter().enumerate() {
            d.set_item(
                &c.name,
                PyArray1::from_vec(py, t.rows.iter().map(|r| r.values[k]).collect()),
            )?;
        }
        for (k, c) in t.meta.figures.iter().enumerate() {
            d.set_item(
                &c.name,
                PyArray1::from_vec(
                    py,
                    t.rows
                        .iter()
                        .map(|r| r.figures[k].unwrap_or(f64::NAN))
                        .collect(),
                ),
            )?;
        }
        let np = py.import("numpy")?;
        let status: Vec<&str> = t.rows.iter().map(|r| r.status.as_str()).collect();
        let message: Vec<&str> = t.rows.iter().map(|r| r.message.as_str()).collect();
        d.set_item(
            "status",
            np.call_method1("array", (PyList::new(py, status)?,))?,
        )?;
        d.set_item(
            "message",
            np.call_method1("array", (PyList::new(py, message)?,))?,
        )?;
        Ok(d)
    }

    /// Number of rows.
    fn __len__(&self) -> usize {
        self.inner.rows.len()
    }

    /// Points whose status is not ``ok``.
    #[getter]
    fn failures(&self) -> usize {
        self.inner.failures()
    }

    /// Columns, units and fingerprint (as :attr:`Sweep.meta`).
    #[getter]
    fn meta<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        ser_to_py(py, &self.inner.meta)
    }

    /// The summary the command line writes (counts, and per figure the
    /// worst point, extremes, mean, standard deviation and percentiles).
    fn summary<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        let text = Summary::of(&self.inner).to_json();
        let v: serde_json::Value = serde_json::from_str(&text)
            .map_err(|e| pyo3::exceptions::PyRuntimeError::new_err(e.to_string()))?;
        json_to_py(py, &v)
    }

    /// The table as the CSV text the command line writes.
    fn to_csv(&self) -> String {
        self.inner.to_csv()
    }

    fn __repr__(&self) -> String {
        format!(
            "<fluxstep.sweep.Table: {} rows, {} failed>",
            self.inner.rows.len(),
            self.inner.failures()
        )
    }
}
