//! Python objects ⇄ JSON values, so that a Python dict takes exactly the
//! route a JSON text takes (the same reader, the same checks, the same
//! error paths).

use pyo3::exceptions::PyTypeError;
use pyo3::prelude::*;
use pyo3::types::{PyBool, PyDict, PyFloat, PyInt, PyList, PyString, PyTuple};
use serde_json::{Map, Number, Value};

/// A Python structure of dicts, lists, tuples, strings, numbers, booleans
/// and `None` as a JSON value. `at` names the place for error messages.
///
/// # Errors
///
/// `TypeError` naming the place of a value JSON cannot hold (a set, an
/// object, a non-string key), `ValueError` for a number that is not finite.
pub fn to_value(obj: &Bound<'_, PyAny>, at: &str) -> PyResult<Value> {
    if obj.is_none() {
        return Ok(Value::Null);
    }
    if let Ok(b) = obj.cast::<PyBool>() {
        return Ok(Value::Bool(b.is_true()));
    }
    if let Ok(s) = obj.cast::<PyString>() {
        return Ok(Value::String(s.to_str()?.to_string()));
    }
    if obj.is_instance_of::<PyInt>() {
        if let Ok(i) = obj.extract::<i64>() {
            return Ok(Value::Number(i.into()));
        }
        if let Ok(u) = obj.extract::<u64>() {
            return Ok(Value::Number(u.into()));
        }
    }
    if obj.is_instance_of::<PyFloat>() || obj.is_instance_of::<PyInt>() {
        return float(obj.extract::<f64>()?, at);
    }
    if let Ok(d) = obj.cast::<PyDict>() {
        let mut m = Map::new();
        for (k, v) in d.iter() {
            let Ok(key) = k.cast::<PyString>() else {
                return Err(PyTypeError::new_err(format!(
                    "{}: keys must be strings, got {}",
                    name(at),
                    k.get_type().name()?
                )));
            };
            let key = key.to_str()?.to_string();
            let place = if at.is_empty() {
                key.clone()
            } else {
                format!("{at}.{key}")
            };
            m.insert(key, to_value(&v, &place)?);
        }
        return Ok(Value::Object(m));
    }
    if obj.is_instance_of::<PyList>() || obj.is_instance_of::<PyTuple>() {
        let mut v = vec![];
        for (i, item) in obj.try_iter()?.enumerate() {
            v.push(to_value(&item?, &format!("{at}[{i}]"))?);
        }
        return Ok(Value::Array(v));
    }
    // NumPy scalars and arrays: their own conversion to Python numbers and
    // lists (`tolist`), then the same rules.
    if obj.hasattr("tolist")? {
        let plain = obj.call_method0("tolist")?;
        if !plain.is(obj) {
            return to_value(&plain, at);
        }
    }
    Err(PyTypeError::new_err(format!(
        "{}: a circuit holds dicts, lists, strings, numbers, booleans and None, got {}",
        name(at),
        obj.get_type().name()?
    )))
}

fn name(at: &str) -> &str {
    if at.is_empty() {
        "the document"
    } else {
        at
    }
}

fn float(x: f64, at: &str) -> PyResult<Value> {
    Number::from_f64(x).map(Value::Number).ok_or_else(|| {
        pyo3::exceptions::PyValueError::new_err(format!("{}: {x} is not a finite number", name(at)))
    })
}

/// A JSON value as plain Python objects (dict, list, str, int, float,
/// bool, None).
pub fn to_py<'py>(py: Python<'py>, v: &Value) -> PyResult<Bound<'py, PyAny>> {
    Ok(match v {
        Value::Null => py.None().into_bound(py),
        Value::Bool(b) => PyBool::new(py, *b).to_owned().into_any(),
        Value::Number(n) => {
            if let Some(i) = n.as_i64() {
                i.into_pyobject(py)?.into_any()
            } else if let Some(u) = n.as_u64() {
                u.into_pyobject(py)?.into_any()
            } else {
                n.as_f64().unwrap_or(f64::NAN).into_pyobject(py)?.into_any()
            }
        }
        Value::String(s) => PyString::new(py, s).into_any(),
        Value::Array(a) => {
            let list = PyList::empty(py);
            for x in a {
                list.append(to_py(py, x)?)?;
            }
            list.into_any()
        }
        Value::Object(m) => {
            let d = PyDict::new(py);
            for (k, x) in m {
                d.set_item(k, to_py(py, x)?)?;
            }
            d.into_any()
        }
    })
}

/// Any serializable Rust value as plain Python objects.
pub fn ser_to_py<'py, T: serde::Serialize>(py: Python<'py>, v: &T) -> PyResult<Bound<'py, PyAny>> {
    let value = serde_json::to_value(v)
        .map_err(|e| pyo3::exceptions::PyRuntimeError::new_err(e.to_string()))?;
    to_py(py, &value)
}
