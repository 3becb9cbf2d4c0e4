//! Reading and writing circuits as JSON: format errors name the path of
//! the field at fault (`elements[2].inductance`), and arrays in place of
//! objects are refused.

use serde_json::{Map, Value};

use crate::circuit::Circuit;
use crate::error::NetlistError;

impl Circuit {
    /// Reads a circuit from JSON text and validates it.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Json`] naming the path of a malformed field (e.g.
    /// `elements[1].inductance`), or [`NetlistError::Invalid`] listing every
    /// rule the circuit breaks.
    ///
    /// # Example
    ///
    /// ```
    /// let c = fluxstep_netlist::Circuit::from_json(r#"{"elements": [
    ///   {"kind": "voltage_source", "name": "V1", "nodes": ["in", "gnd"],
    ///    "waveform": {"kind": "constant", "value": "12"}},
    ///   {"kind": "resistor", "name": "R1", "nodes": ["in", "gnd"], "resistance": "1k"}
    /// ]}"#).unwrap();
    /// assert_eq!(c.elements.len(), 2);
    /// ```
    pub fn from_json(text: &str) -> Result<Circuit, NetlistError> {
        let c = Self::from_json_unchecked(text)?;
        c.validate()?;
        Ok(c)
    }

    /// Reads a circuit from JSON text without the circuit rules (format only).
    ///
    /// # Errors
    ///
    /// [`NetlistError::Json`] naming the path of the malformed field.
    pub fn from_json_unchecked(text: &str) -> Result<Circuit, NetlistError> {
        // A byte-order mark (some editors write one) is not part of the JSON.
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        if let Ok(value) = serde_json::from_str::<Value>(text) {
            positional_arrays(&value)?;
        }
        let de = &mut serde_json::Deserializer::from_str(text);
        serde_path_to_error::deserialize(de).map_err(|e| {
            let path = e.path().to_string();
            let inner = e.into_inner();
            let message = inner.to_string();
            let eof = inner.classify() == serde_json::error::Category::Eof;
            let (path, message) = if eof || path == "." || path.is_empty() || path.contains('?') {
                // Cut short, not an object, or not JSON where the path ends
                // (`?`): the position is the only place there is to name.
                let at = format!("line {} column {}", inner.line(), inner.column());
                let message = message
                    .strip_suffix(&format!(" at {at}"))
                    .map(str::to_string)
                    .unwrap_or(message);
                (at, message)
            } else {
                (narrow_path(text, path, &message), message)
            };
            NetlistError::Json { path, message }
        })
    }

    /// Reads and validates a circuit from a JSON file.
    ///
    /// # Errors
    ///
    /// As [`Circuit::from_json`], plus [`NetlistError::Io`].
    pub fn from_file(path: impl AsRef<std::path::Path>) -> Result<Circuit, NetlistError> {
        let p = path.as_ref();
        let text = std::fs::read_to_string(p).map_err(|source| NetlistError::Io {
            path: p.display().to_string(),
            source,
        })?;
        Self::from_json(&text)
    }

    /// The circuit as pretty JSON; reading it back gives an identical circuit.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("a circuit always serializes")
    }
}

/// One step of a JSON error path: a member name or a list index.
#[derive(Clone, Debug, PartialEq)]
enum Step {
    Key(String),
    Index(usize),
}

/// Reads a path as `serde_path_to_error` writes it (`elements[2].waveform`).
fn parse_path(path: &str) -> Option<Vec<Step>> {
    let mut steps = Vec::new();
    for part in path.split('.') {
        let (key, mut rest) = part.split_at(part.find('[').unwrap_or(part.len()));
        if !key.is_empty() {
            steps.push(Step::Key(key.to_string()));
        }
        while let Some(r) = rest.strip_prefix('[') {
            let end = r.find(']')?;
            steps.push(Step::Index(r[..end].parse().ok()?));
            rest = &r[end + 1..];
        }
        if !rest.is_empty() {
            return None;
        }
    }
    Some(steps)
}

/// The value at `steps` inside `v`, if there is one.
fn value_at<'v>(v: &'v mut Value, steps: &[Step]) -> Option<&'v mut Value> {
    steps.iter().try_fold(v, |v, s| match s {
        Step::Key(k) => v.get_mut(k.as_str()),
        Step::Index(i) => v.get_mut(*i),
    })
}

/// Narrows the path of a JSON error below an internally tagged object.
///
/// serde buffers an element, waveform or gate (each tagged by `"kind"`)
/// before it reads the fields, so `serde_path_to_error` can name only the
/// object (`elements[2]`), not the field (`elements[2].inductance`). The
/// member at fault is found by reproducing the same error — same message,
/// and the same object as far as tracking reaches, so an identical mistake
/// elsewhere in the file cannot be mistaken for it — on changed copies of
/// the document, one level at a time:
///
/// - in a list, the culprit is the first item: the shortest prefix of the
///   list that still fails the same way ends with it (found by bisection,
///   so long piecewise-linear tables stay cheap);
/// - a bad or unknown member of an object: the object cut down to that
///   member (plus `kind`) fails the same way, since serde reports the first
///   bad member before it checks for missing ones;
/// - a missing field `f`: narrowing stops at the object where supplying
///   `f` changes the error (into anything but "unknown field"); above it,
///   the member holding that object is the one whose removal changes the
///   error;
/// - a flattened member (a diode's model) is read after the others, so the
///   cut-down object reports a missing field first; there the member whose
///   removal changes the error (to anything but its own absence) is taken.
///
/// Narrowing stops where no member reproduces the error. This runs only
/// after a failure, so good input pays nothing for it.
fn narrow_path(text: &str, path: String, message: &str) -> String {
    let (Ok(mut doc), Some(mut shown)) = (serde_json::from_str::<Value>(text), parse_path(&path))
    else {
        return path;
    };
    // The document read as a value must fail exactly as the text did (the
    // text's message adds "at line L column C"), or the search would chase
    // a different error.
    let Some(baseline) =
        error_of(&doc).filter(|(p, m)| *p == path && message.starts_with(m.as_str()))
    else {
        return path;
    };
    let trace = Trace::new(baseline);
    loop {
        let found = match value_at(&mut doc, &shown).cloned() {
            // A wrong length is the list's own fault, not an item's.
            Some(Value::Array(items)) if !trace.baseline.1.starts_with("invalid length") => {
                trace.in_list(&doc, &shown, items.len())
            }
            Some(Value::Object(m)) => trace.in_object(&doc, &shown, &m),
            _ => Found::Here(None),
        };
        match found {
            Found::Below(step, cut) => {
                if let Some(cut) = cut {
                    doc = cut;
                }
                shown.push(step);
            }
            Found::Here(last) => {
                shown.extend(last);
                break;
            }
        }
    }
    shown.iter().fold(String::new(), |mut out, s| {
        match s {
            Step::Key(k) if out.is_empty() => out.push_str(k),
            Step::Key(k) => {
                out.push('.');
                out.push_str(k);
            }
            Step::Index(i) => out.push_str(&format!("[{i}]")),
        }
        out
    })
}

/// The error of a document as (tracked path, message).
fn error_of(doc: &Value) -> Option<(String, String)> {
    serde_path_to_error::deserialize::<_, Circuit>(doc)
        .err()
        .map(|e| (e.path().to_string(), e.into_inner().to_string()))
}

/// A copy of `doc` with the value at `nav` changed by `f`.
fn changed(doc: &Value, nav: &[Step], f: &dyn Fn(&mut Value)) -> Value {
    let mut trial = doc.clone();
    if let Some(v) = value_at(&mut trial, nav) {
        f(v);
    }
    trial
}

/// The error of `doc` without the member `key` of the object at `nav`.
fn error_without(doc: &Value, nav: &[Step], key: &str) -> Option<(String, String)> {
    error_of(&changed(doc, nav, &|v| {
        if let Value::Object(m) = v {
            m.remove(key);
        }
    }))
}

/// What one level of [`narrow_path`] found.
enum Found {
    /// The fault lies below this step; the document is cut down to the
    /// given copy, if any, from here on.
    Below(Step, Option<Value>),
    /// The fault is here, or in the member given, and narrowing stops.
    Here(Option<Step>),
}

/// The error being traced, reproduced on changed copies of the document.
struct Trace {
    /// The error of the whole document as (tracked path, message).
    baseline: (String, String),
    /// The field named by a "missing field" error.
    missing: Option<String>,
}

impl Trace {
    fn new(baseline: (String, String)) -> Self {
        let missing = baseline
            .1
            .strip_prefix("missing field `")
            .and_then(|r| r.strip_suffix('`'))
            .map(str::to_string);
        Trace { baseline, missing }
    }

    /// Whether an error is the one traced.
    fn same(&self, e: &Option<(String, String)>) -> bool {
        e.as_ref() == Some(&self.baseline)
    }

    /// The culprit in a list of `len` items at `shown`: the last item of
    /// the shortest prefix that fails the same way.
    fn in_list(&self, doc: &Value, shown: &[Step], len: usize) -> Found {
        let prefix = |len: usize| {
            changed(doc, shown, &|v| {
                if let Value::Array(a) = v {
                    a.truncate(len);
                }
            })
        };
        if len == 0 || self.same(&error_of(&prefix(0))) {
            // The emptied list fails the same way: the fault is its own.
            return Found::Here(None);
        }
        // The shortest failing prefix: fails at `hi`, not below `lo`.
        let (mut lo, mut hi) = (1, len);
        while lo < hi {
            let mid = lo + (hi - lo) / 2;
            if self.same(&error_of(&prefix(mid))) {
                hi = mid;
            } else {
                lo = mid + 1;
            }
        }
        Found::Below(Step::Index(hi - 1), Some(prefix(hi)))
    }

    /// The culprit among the members of the object `m` at `shown`.
    fn in_object(&self, doc: &Value, shown: &[Step], m: &Map<String, Value>) -> Found {
        let keys: Vec<String> = m.keys().filter(|k| *k != "kind").cloned().collect();
        if let Some(f) = &self.missing {
            // This object is the one missing `f` if supplying `f` changes
            // the error into anything but "unknown field".
            if !m.contains_key(f) {
                let e = error_of(&changed(doc, shown, &|v| {
                    if let Value::Object(m) = v {
                        m.insert(f.clone(), Value::from(0));
                    }
                }));
                let unknown = format!("unknown field `{f}`");
                if !self.same(&e) && !e.is_some_and(|(_, m)| m.starts_with(&unknown)) {
                    return Found::Here(None);
                }
            }
            // Only a list or an object can hold the missing field.
            let holder = keys.into_iter().find(|k| {
                (m[k].is_object() || m[k].is_array()) && !self.same(&error_without(doc, shown, k))
            });
            return match holder {
                Some(k) => Found::Below(Step::Key(k), None),
                None => Found::Here(None),
            };
        }
        let cut = |keep: Option<&str>| {
            changed(doc, shown, &|v| {
                if let Value::Object(m) = v {
                    m.retain(|k, _| k == "kind" || Some(k.as_str()) == keep);
                }
            })
        };
        if self.same(&error_of(&cut(None))) {
            // The emptied object fails the same way: the fault is its own.
            return Found::Here(None);
        }
        if let Some(k) = keys.iter().find(|k| self.same(&error_of(&cut(Some(k))))) {
            return Found::Below(Step::Key(k.clone()), Some(cut(Some(k))));
        }
        // Flattened members are read after the others, so cutting the
        // object down reports a missing field first; removing the culprit
        // instead makes the error go away (or become another one).
        let removed = keys.into_iter().find(|k| {
            let e = error_without(doc, shown, k);
            !self.same(&e) && e.map(|(_, m)| m) != Some(format!("missing field `{k}`"))
        });
        Found::Here(removed.map(Step::Key))
    }
}

/// Refuses arrays where the format has objects. serde reads a struct or a
/// tagged enum from a sequence of its fields in order, so without this
/// check `["inductor", "L1", ["sw", "out"], "22u"]` would pass for an
/// inductor: a format nobody documented, which breaks silently when a
/// field is added. Apart from the matrix `a` of a state-space law, no field
/// of the format holds an array of arrays, so an array inside an array is
/// such a positional object; the top level and `run` must be objects.
fn positional_arrays(value: &Value) -> Result<(), NetlistError> {
    fn walk(v: &Value, path: &mut String) -> Result<(), NetlistError> {
        match v {
            Value::Array(items) => {
                for (i, item) in items.iter().enumerate() {
                    let len = path.len();
                    path.push_str(&format!("[{i}]"));
                    // A state-space law's `a` is the one matrix of the
                    // format: its rows are arrays of numbers.
                    let matrix = path[..len].ends_with(".a");
                    if item.is_array() && !matrix {
                        let what = match path.split('.').next_back() {
                            Some(p) if p.starts_with("points") || p.starts_with("transitions") => {
                                "expected an object with named fields (`time`, …), not an array"
                            }
                            _ => "expected an object with `kind` and named fields, not an array",
                        };
                        return Err(NetlistError::Json {
                            path: path.clone(),
                            message: what.into(),
                        });
                    }
                    walk(item, path)?;
                    path.truncate(len);
                }
                Ok(())
            }
            Value::Object(map) => {
                for (k, item) in map {
                    let len = path.len();
                    if !path.is_empty() {
                        path.push('.');
                    }
                    path.push_str(k);
                    if k == "run" && item.is_array() && len == 0 {
                        return Err(NetlistError::Json {
                            path: path.clone(),
                            message: "expected an object with named fields (`stop_time`, …), not an array".into(),
                        });
                    }
                    walk(item, path)?;
                    path.truncate(len);
                }
                Ok(())
            }
            _ => Ok(()),
        }
    }
    if value.is_array() {
        return Err(NetlistError::Json {
            path: "the top level".into(),
            message: "expected an object with `elements` (a circuit), not an array".into(),
        });
    }
    walk(value, &mut String::new())
}
