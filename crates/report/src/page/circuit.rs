//! Section 2, the circuit: every element, gate and compensator with its
//! values in SI units, flattened from the circuit's own JSON.

use std::fmt::Write as _;

use fluxstep_plot::format_si_short;
use serde_json::Value;

use super::{heading, unit_of, Page};
use crate::sheet::esc;

/// The unit of a circuit field by its name (values are SI).
fn field_unit(field: &str, kind: &str) -> &'static str {
    let last = field.rsplit('.').next().unwrap_or(field);
    match last {
        "inductance" | "magnetizing_inductance" => "H",
        "capacitance" => "F",
        "resistance" | "on_resistance" | "esr" | "winding_resistance" => "Ω",
        "forward_voltage" | "initial_voltage" | "ramp_low" | "ramp_high" => "V",
        "initial_current" => "A",
        "frequency" => "Hz",
        "time" | "delay" | "dead_time_high" | "dead_time_low" | "time_constant" | "period"
        | "start" | "stop" => "s",
        "slope" => "/s",
        "value" | "amplitude" | "offset" | "low" | "high" if kind == "current_source" => "A",
        "value" | "amplitude" | "offset" | "low" | "high" if kind == "voltage_source" => "V",
        "ambient" | "max_junction" => "°C",
        _ => "",
    }
}

/// Flattens a circuit part's JSON into `field = value` entries; numbers
/// get their SI unit, nested objects dotted names.
fn flatten(prefix: &str, v: &Value, kind: &str, out: &mut Vec<(String, String)>) {
    match v {
        Value::Object(map) => {
            for (k, x) in map {
                if prefix.is_empty() && ["kind", "name", "nodes"].contains(&k.as_str()) {
                    continue;
                }
                let name = if prefix.is_empty() {
                    k.clone()
                } else {
                    format!("{prefix}.{k}")
                };
                flatten(&name, x, kind, out);
            }
        }
        Value::Number(n) => {
            let x = n.as_f64().unwrap_or(f64::NAN);
            let unit = field_unit(prefix, kind);
            let text = match unit {
                "°C" => format!("{x} °C"),
                "" => format!("{x}"),
                u => format_si_short(x, u),
            };
            out.push((prefix.to_string(), text));
        }
        Value::Array(items) if items.iter().all(|i| !i.is_object()) => {
            let parts: Vec<String> = items
                .iter()
                .map(|i| match i {
                    Value::Number(n) => format_si_short(n.as_f64().unwrap_or(f64::NAN), ""),
                    other => other.to_string().trim_matches('"').to_string(),
                })
                .collect();
            out.push((prefix.to_string(), parts.join(", ")));
        }
        Value::Array(items) => {
            for (i, x) in items.iter().enumerate() {
                flatten(&format!("{prefix}[{i}]"), x, kind, out);
            }
        }
        Value::String(s) => out.push((prefix.to_string(), s.clone())),
        Value::Bool(b) => out.push((prefix.to_string(), b.to_string())),
        Value::Null => {}
    }
}

fn fields_cell(v: &Value, kind: &str) -> String {
    let mut entries = vec![];
    flatten("", v, kind, &mut entries);
    entries
        .iter()
        .map(|(k, x)| format!("<span class=\"f\">{} = {}</span>", esc(k), esc(x)))
        .collect::<Vec<_>>()
        .join(" ")
}

/// Section 2: the parts table, then gates and compensators when there are any.
pub(super) fn circuit(p: &Page, b: &mut String) {
    let c = p.c;
    heading(b, 1);
    if !c.description.is_empty() {
        let _ = write!(b, "<p class=\"desc\">{}</p>", esc(&c.description));
    }
    b.push_str("<table class=\"parts\"><thead><tr><th>element</th><th>kind</th><th>nodes</th><th>values</th></tr></thead><tbody>");
    for el in &c.elements {
        let v = serde_json::to_value(el).unwrap_or_default();
        let nodes = v
            .get("nodes")
            .and_then(|n| n.as_array())
            .map(|n| {
                n.iter()
                    .map(|x| x.as_str().unwrap_or("").to_string())
                    .collect::<Vec<_>>()
                    .join(" → ")
            })
            .unwrap_or_default();
        let kind = el.kind_name();
        let _ = write!(
            b,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(el.name()),
            esc(&kind.replace('_', " ")),
            esc(&nodes),
            fields_cell(&v, kind)
        );
    }
    b.push_str("</tbody></table>");
    if !c.gates.is_empty() {
        b.push_str("<h3>Gates</h3><table class=\"parts\"><thead><tr><th>gate</th><th>kind</th><th>settings</th></tr></thead><tbody>");
        for g in &c.gates {
            let v = serde_json::to_value(g).unwrap_or_default();
            let kind = v
                .get("kind")
                .and_then(|k| k.as_str())
                .unwrap_or("")
                .to_string();
            let _ = write!(
                b,
                "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
                esc(g.name()),
                esc(&kind.replace('_', " ")),
                fields_cell(&v, &kind)
            );
        }
        b.push_str("</tbody></table>");
    }
    if !c.compensators.is_empty() {
        b.push_str("<h3>Compensators</h3><table class=\"parts\"><thead><tr><th>compensator</th><th>input</th><th>law</th></tr></thead><tbody>");
        for k in &c.compensators {
            let v = serde_json::to_value(&k.law).unwrap_or_default();
            let mut entries = vec![];
            flatten("", &v, "", &mut entries);
            let law = entries
                .iter()
                .map(|(n, x)| format!("<span class=\"f\">{} = {}</span>", esc(n), esc(x)))
                .collect::<Vec<_>>()
                .join(" ");
            let _ = write!(
                b,
                "<tr><td>{}</td><td>{} (reference {})</td><td>{} {}</td></tr>",
                esc(&k.name),
                esc(&k.input),
                esc(&format_si_short(k.reference, unit_of(&k.input))),
                esc(v.get("kind").and_then(|x| x.as_str()).unwrap_or("")),
                law
            );
        }
        b.push_str("</tbody></table>");
    }
    b.push_str("</section>");
}
