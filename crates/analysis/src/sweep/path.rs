//! Parameter paths into a circuit: `NAME.field[.field…]` names one number
//! of the circuit's JSON form.
//!
//! `NAME` is an element, gate or compensator name (prefix `elements.`,
//! `gates.` or `compensators.` when two of them share a name); each further
//! step is an object member, a list index (`points.2`) or, in a list of
//! named objects, an item's name (`T1.windings.primary.inductance`). The
//! path must end at a number present in the base circuit, so an optional
//! field left out of the circuit (e.g. `initial_current`) is written there
//! first.

use serde_json::Value;

use super::SweepError;

/// One step from the circuit's JSON root to a number.
#[derive(Clone, Debug, PartialEq, Eq)]
enum Step {
    Key(String),
    Index(usize),
}

/// A resolved path: where the number sits in the circuit's JSON form.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) struct Resolved {
    /// The path as the user wrote it.
    pub text: String,
    steps: Vec<Step>,
    /// The unit of the quantity, from its field and element kind.
    pub unit: &'static str,
}

const GROUPS: [&str; 3] = ["elements", "gates", "compensators"];

impl Resolved {
    /// The number at this path in `doc`.
    pub fn get(&self, doc: &Value) -> Option<f64> {
        let mut v = doc;
        for s in &self.steps {
            v = match s {
                Step::Key(k) => v.get(k.as_str())?,
                Step::Index(i) => v.get(*i)?,
            };
        }
        v.as_f64()
    }

    /// Writes `value` at this path in `doc` (which has the base circuit's shape).
    pub fn set(&self, doc: &mut Value, value: f64) {
        let mut v = doc;
        for s in &self.steps {
            v = match s {
                Step::Key(k) => &mut v[k.as_str()],
                Step::Index(i) => &mut v[*i],
            };
        }
        *v = Value::from(value);
    }
}

/// Resolves `path` in the circuit's JSON form `doc`.
///
/// # Errors
///
/// [`SweepError::UnknownPath`] naming what is wrong and listing every valid path.
pub(crate) fn resolve(doc: &Value, path: &str) -> Result<Resolved, SweepError> {
    let fail = |reason: String| SweepError::UnknownPath {
        path: path.to_string(),
        reason,
        valid: valid_paths(doc),
    };
    let mut parts: Vec<&str> = path.split('.').collect();
    if parts.iter().any(|p| p.is_empty()) {
        return Err(fail("empty step (two dots, or a dot at an end)".into()));
    }
    let group = match parts.first() {
        Some(g) if GROUPS.contains(g) && parts.len() > 2 && !named(doc, g).is_empty() => {
            let g = *g;
            parts.remove(0);
            Some(g)
        }
        _ => None,
    };
    let name = parts[0];
    let mut found = vec![];
    for g in GROUPS {
        if group.is_some_and(|x| x != g) {
            continue;
        }
        if let Some(i) = named(doc, g).iter().position(|n| n == name) {
            found.push((g, i));
        }
    }
    let (g, i) = match found.as_slice() {
        [] => return Err(fail(format!("no element, gate or compensator named {name:?}"))),
        [one] => *one,
        _ => {
            return Err(fail(format!(
                "{name:?} names more than one of element, gate and compensator: prefix the path with elements., gates. or compensators."
            )))
        }
    };
    let mut steps = vec![Step::Key(g.into()), Step::Index(i)];
    let mut v = &doc[g][i];
    if parts.len() < 2 {
        return Err(fail(format!(
            "{name:?} is not a number: name a field, e.g. {name}.{}",
            first_number(v).unwrap_or("…".into())
        )));
    }
    for (k, part) in parts.iter().enumerate().skip(1) {
        let at = parts[..k].join(".");
        match v {
            Value::Object(m) => match m.get(*part) {
                Some(next) => {
                    steps.push(Step::Key(part.to_string()));
                    v = next;
                }
                None => {
                    return Err(fail(format!(
                        "{at} has no field {part:?} (optional fields must be written in the circuit before they can be swept)"
                    )))
                }
            },
            Value::Array(items) => {
                let idx = part.parse::<usize>().ok().filter(|&j| j < items.len()).or_else(|| {
                    items
                        .iter()
                        .position(|it| it.get("name").and_then(Value::as_str) == Some(part))
                });
                match idx {
                    Some(j) => {
                        steps.push(Step::Index(j));
                        v = &items[j];
                    }
                    None => {
                        return Err(fail(format!(
                            "{at} is a list of {} items with no item {part:?}",
                            items.len()
                        )))
                    }
                }
            }
            _ => return Err(fail(format!("{at} is a number and has no field {part:?}"))),
        }
    }
    if !v.is_number() {
        return Err(fail(format!("{path} is not a number")));
    }
    let kind = doc[g][i].get("kind").and_then(Value::as_str).unwrap_or("");
    let field = parts[parts.len() - 1];
    Ok(Resolved {
        text: path.to_string(),
        steps,
        unit: unit_of(kind, field),
    })
}

/// Names of the objects of one group (`elements`, `gates`, `compensators`).
fn named(doc: &Value, group: &str) -> Vec<String> {
    doc.get(group)
        .and_then(Value::as_array)
        .map(|a| {
            a.iter()
                .map(|e| {
                    e.get("name")
                        .and_then(Value::as_str)
                        .unwrap_or("")
                        .to_string()
                })
                .collect()
        })
        .unwrap_or_default()
}

fn first_number(v: &Value) -> Option<String> {
    let mut out = vec![];
    leaves(v, String::new(), &mut out);
    out.into_iter().next()
}

/// Every path to a number in the circuit, in document order.
pub(crate) fn valid_paths(doc: &Value) -> Vec<String> {
    let mut out = vec![];
    for g in GROUPS {
        let names = named(doc, g);
        let clash = |n: &str| {
            GROUPS
                .iter()
                .filter(|h| named(doc, h).iter().any(|m| m == n))
                .count()
                > 1
        };
        for (i, name) in names.iter().enumerate() {
            let prefix = if clash(name) {
                format!("{g}.{name}")
            } else {
                name.clone()
            };
            let mut fields = vec![];
            leaves(&doc[g][i], String::new(), &mut fields);
            out.extend(fields.into_iter().map(|f| format!("{prefix}.{f}")));
        }
    }
    out
}

fn leaves(v: &Value, at: String, out: &mut Vec<String>) {
    let join = |k: &str| {
        if at.is_empty() {
            k.to_string()
        } else {
            format!("{at}.{k}")
        }
    };
    match v {
        Value::Number(_) => out.push(at),
        Value::Object(m) => {
            for (k, x) in m {
                leaves(x, join(k), out);
            }
        }
        Value::Array(items) => {
            for (j, x) in items.iter().enumerate() {
                let step = match x.get("name").and_then(Value::as_str) {
                    Some(n) => n.to_string(),
                    None => j.to_string(),
                };
                leaves(x, join(&step), out);
            }
        }
        _ => {}
    }
}

/// The unit of a field, for tables and summaries ("" for ratios).
fn unit_of(kind: &str, field: &str) -> &'static str {
    match field {
        "inductance" | "mutual" => "H",
        "capacitance" => "F",
        "resistance" | "on_resistance" => "Ω",
        "frequency" => "Hz",
        "delay" | "start" | "stop" | "period" | "time" | "dead_time_high" | "dead_time_low" => "s",
        "initial_current" => "A",
        "initial_voltage" | "forward_voltage" => "V",
        "value" | "offset" | "amplitude" => match kind {
            "voltage_source" => "V",
            "current_source" => "A",
            _ => "",
        },
        "phase" => "rad",
        _ => "",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn doc() -> Value {
        serde_json::json!({
            "elements": [
                {"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"],
                 "waveform": {"kind": "constant", "value": 24.0}},
                {"kind": "inductor", "name": "L1", "nodes": ["sw", "out"], "inductance": 22e-6},
                {"kind": "coupled_inductors", "name": "T1", "windings": [
                    {"name": "p", "nodes": ["a", "b"], "inductance": 1e-3},
                    {"name": "s", "nodes": ["c", "d"], "inductance": 1e-4}],
                 "couplings": [{"windings": ["p", "s"], "k": 0.99}]}
            ],
            "gates": [{"kind": "pwm", "name": "drive", "frequency": 2e5, "duty": 0.5, "delay": 0.0}]
        })
    }

    #[test]
    fn paths_resolve_and_set() {
        let mut d = doc();
        let p = resolve(&d, "Vin.waveform.value").unwrap();
        assert_eq!(p.unit, "V");
        assert_eq!(p.get(&d), Some(24.0));
        p.set(&mut d, 12.0);
        assert_eq!(p.get(&d), Some(12.0));
        assert_eq!(resolve(&d, "drive.duty").unwrap().get(&d), Some(0.5));
        assert_eq!(
            resolve(&d, "T1.windings.s.inductance").unwrap().get(&d),
            Some(1e-4)
        );
        assert_eq!(
            resolve(&d, "T1.windings.1.inductance").unwrap().get(&d),
            Some(1e-4)
        );
        assert_eq!(resolve(&d, "gates.drive.frequency").unwrap().unit, "Hz");
    }

    #[test]
    fn unknown_paths_list_the_valid_ones() {
        let d = doc();
        for bad in [
            "L2.inductance",
            "L1.inductence",
            "L1",
            "L1.nodes.0",
            "drive..duty",
        ] {
            let Err(SweepError::UnknownPath { valid, .. }) = resolve(&d, bad) else {
                panic!("{bad} resolved");
            };
            assert!(valid.contains(&"L1.inductance".to_string()), "{valid:?}");
            assert!(valid.contains(&"T1.couplings.0.k".to_string()), "{valid:?}");
            assert!(valid.contains(&"drive.delay".to_string()), "{valid:?}");
        }
    }
}
