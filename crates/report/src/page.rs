//! Laying the facts out as one HTML page: sections in the order a design
//! review reads them, every number through the [`Sheet`] so the summary
//! JSON holds exactly what the page shows.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use fluxstep_netlist::{Circuit, DesignLimits, OutputName};
use fluxstep_plot::{
    bode_figure, format_si_short, loss_chart_svg, render_svg, review_figure, BodeMarks, BodePoint,
    LossBar, ReviewOptions,
};
use fluxstep_solver::measure::{without_rounding_noise, Measurement};
use fluxstep_solver::{EventCause, EventKind};
use serde_json::Value;
use sha2::{Digest, Sha256};

use crate::gather::{Basis, Facts};
use crate::sheet::{esc, key, Sheet};
use crate::{Report, ReportOptions};

/// The sections, in page order: (element id, heading).
pub const SECTIONS: [(&str, &str); 11] = [
    ("limits", "Design limits"),
    ("circuit", "The circuit"),
    ("operating-point", "Operating point"),
    ("waveforms", "Waveforms"),
    ("stress", "Stress on switches and diodes"),
    ("losses", "Losses and efficiency"),
    ("loop", "Control loops"),
    ("sweep", "Sweep"),
    ("events", "Events and diagnostics"),
    ("certificate", "Certificate"),
    ("cautions", "Cautions"),
];

const STYLE: &str = include_str!("style.css");

fn unit_of(output: &str) -> &'static str {
    OutputName::parse(output).map(|o| o.unit()).unwrap_or("")
}

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

/// Returns an inline SVG that scales with its container.
fn inline_svg(svg: &str) -> String {
    let start = svg.find("<svg").unwrap_or(0);
    svg[start..].to_string()
}

/// A design limit checked: figure, value shown, limit shown, pass.
struct Check {
    figure: String,
    value: String,
    limit: String,
    pass: Option<bool>,
}

fn peak_abs(m: &Measurement) -> (f64, f64) {
    if m.max.abs() >= m.min.abs() {
        (m.max.abs(), m.time_of_max)
    } else {
        (m.min.abs(), m.time_of_min)
    }
}

fn limits_checks(limits: &DesignLimits, f: &Facts, s: &mut Sheet) -> Vec<Check> {
    let mut out = vec![];
    let check = |s: &mut Sheet,
                 id: &str,
                 figure: String,
                 value: f64,
                 unit: &str,
                 limit: f64,
                 pass: bool| {
        let p = format!("/limits/{}", key(id));
        let value = s.si(&format!("{p}/value"), value, unit);
        let limit = s.si(&format!("{p}/limit"), limit, unit);
        s.set(&format!("{p}/pass"), Value::Bool(pass));
        Check {
            figure,
            value,
            limit,
            pass: Some(pass),
        }
    };
    if let Some(max) = limits.max_output_ripple {
        let node = limits.ripple_output();
        match &f.ripple {
            Some(m) => out.push(check(
                s,
                "output_ripple",
                format!("output ripple of {node} (peak to peak)"),
                m.peak_to_peak,
                "V",
                max,
                m.peak_to_peak <= max,
            )),
            None => out.push(Check {
                figure: format!("output ripple of {node}"),
                value: "not determined".into(),
                limit: format_si_short(max, "V"),
                pass: Some(false),
            }),
        }
    }
    for p in &limits.saturation_current {
        match f.inductors.iter().find(|(n, _)| *n == p.element) {
            Some((_, m)) => {
                let peak = peak_abs(m).0;
                out.push(check(
                    s,
                    &format!("saturation_current.{}", p.element),
                    format!("peak current of {} vs its saturation current", p.element),
                    peak,
                    "A",
                    p.value,
                    peak < p.value,
                ))
            }
            None => out.push(Check {
                figure: format!("peak current of {}", p.element),
                value: "not determined".into(),
                limit: format_si_short(p.value, "A"),
                pass: Some(false),
            }),
        }
    }
    let derating = limits.derating_factor();
    for p in &limits.voltage_rating {
        let allowed = derating * p.value;
        match f.stress.iter().find(|(n, _, _)| *n == p.element) {
            Some((_, _, Some(v))) => {
                let peak = peak_abs(v).0;
                out.push(check(
                    s,
                    &format!("voltage_rating.{}", p.element),
                    format!(
                        "peak voltage of {} vs {:.0} % of its {} rating",
                        p.element,
                        derating * 100.0,
                        format_si_short(p.value, "V")
                    ),
                    peak,
                    "V",
                    allowed,
                    peak <= allowed,
                ))
            }
            _ => out.push(Check {
                figure: format!("peak voltage of {}", p.element),
                value: "not determined".into(),
                limit: format_si_short(allowed, "V"),
                pass: Some(false),
            }),
        }
    }
    if let Some(min) = limits.min_phase_margin {
        if f.loops.is_empty() {
            out.push(Check {
                figure: "phase margin".into(),
                value: "no closed loop".into(),
                limit: format!("{min:.1}°"),
                pass: None,
            });
        }
        for l in &f.loops {
            let pm = l
                .gain
                .as_ref()
                .ok()
                .and_then(|g| g.margins.phase_margin_deg);
            match pm {
                Some(pm) => {
                    let p = format!("/limits/{}", key(&format!("phase_margin.{}", l.name)));
                    let value = s.fixed(&format!("{p}/value"), pm, 1, "°");
                    let limit = s.fixed(&format!("{p}/limit"), min, 1, "°");
                    s.set(&format!("{p}/pass"), Value::Bool(pm >= min));
                    out.push(Check {
                        figure: format!("phase margin of the loop at {}", l.at),
                        value,
                        limit,
                        pass: Some(pm >= min),
                    });
                }
                None => out.push(Check {
                    figure: format!("phase margin of the loop at {}", l.at),
                    value: "no crossover found".into(),
                    limit: format!("{min:.1}°"),
                    pass: Some(false),
                }),
            }
        }
    }
    if let Some(max) = limits.max_junction_temperature {
        if f.junctions.is_empty() {
            out.push(Check {
                figure: "junction temperature".into(),
                value: "no part has a thermal network".into(),
                limit: format!("{max:.1} °C"),
                pass: None,
            });
        }
        for j in &f.junctions {
            match j {
                Ok(j) => {
                    let p = format!("/limits/{}", key(&format!("junction.{}", j.element)));
                    let value = s.fixed(&format!("{p}/value"), j.max, 1, "°C");
                    let limit = s.fixed(&format!("{p}/limit"), max, 1, "°C");
                    s.set(&format!("{p}/pass"), Value::Bool(j.max <= max));
                    out.push(Check {
                        figure: format!("junction temperature of {}", j.element),
                        value,
                        limit,
                        pass: Some(j.max <= max),
                    });
                }
                Err(e) => out.push(Check {
                    figure: "junction temperature".into(),
                    value: esc(e),
                    limit: format!("{max:.1} °C"),
                    pass: Some(false),
                }),
            }
        }
    }
    out
}

fn verdict(pass: Option<bool>) -> &'static str {
    match pass {
        Some(true) => "<td class=\"pass\">pass</td>",
        Some(false) => "<td class=\"fail\">FAIL</td>",
        None => "<td class=\"na\">not checked</td>",
    }
}

fn kind_words(k: EventKind) -> &'static str {
    match k {
        EventKind::SwitchOn => "switch on",
        EventKind::SwitchOff => "switch off",
        EventKind::DiodeOn => "diode on",
        EventKind::DiodeOff => "diode off",
        EventKind::SourceBreakpoint => "source corner",
        EventKind::ChargeJump => "charge-sharing jump",
        EventKind::FluxJump => "flux-conserving jump",
        EventKind::ShootThrough => "shoot-through",
    }
}

fn cause_words(c: EventCause) -> &'static str {
    match c {
        EventCause::Start => "at the start",
        EventCause::Scheduled => "at a scheduled instant",
        EventCause::Crossing => "located on the solution",
    }
}

pub(crate) fn render(
    c: &Circuit,
    opts: &ReportOptions,
    f: &Facts,
) -> Result<Report, fluxstep_plot::PlotError> {
    let mut s = Sheet::new();
    let mut body = String::new();
    let b = &mut body;
    let title = if opts.name.is_empty() {
        "circuit".to_string()
    } else {
        opts.name.clone()
    };
    s.set("/title", Value::from(title.clone()));
    let (a, e) = f.window;

    // Design limits first: the banner reads their outcome.
    let limits = c.run.as_ref().and_then(|r| r.limits.clone());
    let checks = limits
        .as_ref()
        .map(|l| limits_checks(l, f, &mut s))
        .unwrap_or_default();
    let failed: Vec<String> = checks
        .iter()
        .filter(|k| k.pass == Some(false))
        .map(|k| {
            let strip = |t: &str| {
                // The shown text without its markup, for the sentence.
                let mut out = String::new();
                let mut inside = false;
                for ch in t.chars() {
                    match ch {
                        '<' => inside = true,
                        '>' => inside = false,
                        c if !inside => out.push(c),
                        _ => {}
                    }
                }
                out.replace("&amp;", "&")
            };
            format!(
                "{}: {} against a limit of {}",
                k.figure,
                strip(&k.value),
                strip(&k.limit)
            )
        })
        .collect();
    s.set(
        "/limits_failed",
        Value::Array(failed.iter().map(|x| Value::from(x.clone())).collect()),
    );

    // The verdict banner at the top.
    if !failed.is_empty() {
        let _ = write!(
            b,
            "<div class=\"banner fail\" id=\"verdict\"><strong>{} design limit{} failed.</strong><ul>",
            failed.len(),
            if failed.len() == 1 { "" } else { "s" }
        );
        for x in &failed {
            let _ = write!(b, "<li>{}</li>", esc(x));
        }
        b.push_str("</ul></div>");
    } else if !checks.is_empty() {
        let _ = write!(
            b,
            "<div class=\"banner pass\" id=\"verdict\">Every design limit of the file is met ({} checked).</div>",
            checks.iter().filter(|k| k.pass.is_some()).count()
        );
    } else {
        b.push_str("<div class=\"banner none\" id=\"verdict\">The file gives no design limits: the figures below are not checked against any.</div>");
    }

    let section = |b: &mut String, i: usize| {
        let (id, heading) = SECTIONS[i];
        let _ = write!(b, "<section id=\"{id}\"><h2>{}. {heading}</h2>", i + 1);
    };

    // 1. Limits.
    section(b, 0);
    if checks.is_empty() {
        b.push_str("<p>No limits are set. Add <code>run.limits</code> to the circuit file (docs/report.md) to have each figure marked pass or fail.</p>");
    } else {
        b.push_str("<table><thead><tr><th>figure</th><th class=\"n\">value</th><th class=\"n\">limit</th><th>verdict</th></tr></thead><tbody>");
        for k in &checks {
            let _ = write!(
                b,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>{}</tr>",
                esc(&k.figure),
                k.value,
                k.limit,
                verdict(k.pass)
            );
        }
        b.push_str("</tbody></table>");
    }
    b.push_str("</section>");

    // 2. The circuit.
    section(b, 1);
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

    // 3. Operating point.
    section(b, 2);
    match &f.basis {
        Basis::Steady(ss) => {
            s.set(
                "/operating_point/basis",
                Value::from("periodic steady state"),
            );
            let _ = write!(
                b,
                "<p>Periodic steady state found by shooting: period {}, switching frequency {}, residual {} after {} Newton steps; the orbit is <strong>{}</strong>.</p>",
                s.si("/operating_point/period", ss.period, "s"),
                s.si("/operating_point/frequency", 1.0 / ss.period, "Hz"),
                s.sci("/operating_point/residual", ss.residual),
                s.count("/operating_point/newton_steps", ss.newton_steps()),
                if ss.is_stable() { "stable" } else { "unstable" }
            );
            s.set("/operating_point/stable", Value::Bool(ss.is_stable()));
            b.push_str("<h3>State at period start</h3><table class=\"narrow\"><thead><tr><th>state</th><th class=\"n\">value</th></tr></thead><tbody>");
            for (n, v) in ss.state_names.iter().zip(&ss.state) {
                let unit = if n.ends_with(".current") {
                    "A"
                } else if n.ends_with(".voltage") {
                    "V"
                } else {
                    ""
                };
                let cell = s.si(&format!("/operating_point/state/{}", key(n)), *v, unit);
                let _ = write!(b, "<tr><td>{}</td><td class=\"n\">{cell}</td></tr>", esc(n));
            }
            b.push_str("</tbody></table>");
        }
        Basis::Transient { why, stopped, .. } => {
            s.set("/operating_point/basis", Value::from("transient window"));
            let _ = write!(
                b,
                "<p class=\"warn\">No periodic steady state: {}. The figures below cover the transient window {} to {} of the file's run settings.</p>",
                esc(why),
                s.si("/operating_point/window/0", a, "s"),
                s.si("/operating_point/window/1", e, "s"),
            );
            if let Some(x) = stopped {
                let _ = write!(
                    b,
                    "<p class=\"warn\">The run stopped: {}</p>",
                    esc(&x.to_string())
                );
            }
        }
    }
    let shown = without_rounding_noise(&f.measurements);
    let span_words = match f.basis {
        Basis::Steady(_) => "over one period",
        Basis::Transient { .. } => "over the window",
    };
    let _ = write!(b, "<h3>Outputs {span_words}</h3>");
    b.push_str("<table><thead><tr><th>output</th><th class=\"n\">average</th><th class=\"n\">RMS</th><th class=\"n\">valley (min)</th><th class=\"n\">peak (max)</th><th class=\"n\">ripple (peak to peak)</th></tr></thead><tbody>");
    for m in &shown {
        let u = unit_of(&m.output);
        let p = format!("/operating_point/outputs/{}", key(&m.output));
        let _ = write!(
            b,
            "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            esc(&m.output),
            s.si(&format!("{p}/average"), m.average, u),
            s.si(&format!("{p}/rms"), m.rms, u),
            s.si(&format!("{p}/min"), m.min, u),
            s.si(&format!("{p}/max"), m.max, u),
            s.si(&format!("{p}/peak_to_peak"), m.peak_to_peak, u),
        );
    }
    b.push_str("</tbody></table>");
    if !f.inductors.is_empty() {
        let _ = write!(b, "<h3>Inductor currents {span_words}</h3>");
        b.push_str("<table><thead><tr><th>inductor</th><th class=\"n\">average</th><th class=\"n\">RMS</th><th class=\"n\">valley</th><th class=\"n\">peak</th><th class=\"n\">ripple</th><th>conduction</th></tr></thead><tbody>");
        let ms: Vec<Measurement> = f.inductors.iter().map(|(_, m)| m.clone()).collect();
        for (name, m) in f
            .inductors
            .iter()
            .map(|(n, _)| n)
            .zip(without_rounding_noise(&ms))
        {
            let p = format!("/operating_point/inductors/{}", key(name));
            // Continuous when the current keeps one sign through the period.
            let ccm = m.min > 0.0 || m.max < 0.0;
            let _ = write!(
                b,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
                esc(name),
                s.si(&format!("{p}/average"), m.average, "A"),
                s.si(&format!("{p}/rms"), m.rms, "A"),
                s.si(&format!("{p}/min"), m.min, "A"),
                s.si(&format!("{p}/max"), m.max, "A"),
                s.si(&format!("{p}/peak_to_peak"), m.peak_to_peak, "A"),
                if ccm { "continuous" } else { "reaches zero" }
            );
        }
        b.push_str("</tbody></table>");
    }
    if let Some(r) = &f.ripple {
        let r = &without_rounding_noise(std::slice::from_ref(r))[0];
        let _ = write!(
            b,
            "<p>Output ripple ({}): {} peak to peak around {}.</p>",
            esc(&r.output),
            s.si("/operating_point/output_ripple", r.peak_to_peak, "V"),
            s.si("/operating_point/output_average", r.average, "V"),
        );
    }
    b.push_str("</section>");

    // 4. Waveforms.
    section(b, 3);
    let run = f.run();
    let stopped = match &f.basis {
        Basis::Transient {
            stopped: Some(x), ..
        } => Some((x.time().unwrap_or(e), "stopped".to_string())),
        _ => None,
    };
    let fig = review_figure(
        &title,
        &run.waveform,
        Some(&run.events),
        &ReviewOptions {
            outputs: f.outputs.clone(),
            period: f.period,
            zoom: f.zoom.clone(),
            stopped,
            ..ReviewOptions::default()
        },
    )?;
    let _ = write!(
        b,
        "<figure>{}<figcaption>{}{}</figcaption></figure>",
        inline_svg(&render_svg(&fig)?),
        match f.basis {
            Basis::Steady(_) => "Two periods of the steady state.",
            Basis::Transient { .. } => "The recorded transient window.",
        },
        if f.zoom.is_empty() {
            String::new()
        } else {
            format!(
                " Zoom columns around {} (the first switch and diode turn-offs of the period).",
                f.zoom
                    .iter()
                    .map(|t| format_si_short(*t, "s"))
                    .collect::<Vec<_>>()
                    .join(" and ")
            )
        }
    );
    b.push_str("</section>");

    // 5. Stress.
    section(b, 4);
    if f.stress.is_empty() {
        b.push_str("<p>The circuit has no switch or diode.</p>");
    } else {
        let _ = write!(
            b,
            "<p>Largest magnitudes {span_words}, with the instant each is reached.</p>"
        );
        b.push_str("<table><thead><tr><th>part</th><th class=\"n\">peak current</th><th class=\"n\">at</th><th class=\"n\">peak voltage</th><th class=\"n\">at</th></tr></thead><tbody>");
        for (name, i, v) in &f.stress {
            let p = format!("/stress/{}", key(name));
            let mut cells = String::new();
            for (m, what, unit) in [(i, "current", "A"), (v, "voltage", "V")] {
                match m {
                    Some(m) => {
                        let (peak, at) = peak_abs(m);
                        let _ = write!(
                            cells,
                            "<td class=\"n\">{}</td><td class=\"n\">{}</td>",
                            s.si(&format!("{p}/peak_{what}"), peak, unit),
                            s.si(&format!("{p}/{what}_at"), at, "s")
                        );
                    }
                    None => cells.push_str("<td class=\"n\">undetermined</td><td></td>"),
                }
            }
            let _ = write!(b, "<tr><td>{}</td>{cells}</tr>", esc(name));
        }
        b.push_str("</tbody></table>");
        b.push_str("<p class=\"note\">A stray inductance enters these peaks only where the file models it as an inductor in the switching loop; the model has no other parasitic, so a spike not modelled does not appear here.</p>");
    }
    b.push_str("</section>");

    // 6. Losses.
    section(b, 5);
    match (&f.losses, f.loss_data) {
        (Err(x), _) => {
            let _ = write!(
                b,
                "<p class=\"warn\">The loss analysis could not run: {}</p>",
                esc(x)
            );
        }
        (Ok(_), false) => {
            b.push_str("<p>No loss data: every part of this circuit is ideal (no on-resistance, forward drop, ESR, winding resistance or non-load resistor), so it dissipates nothing and there is no efficiency to report. Add loss fields to the parts (docs/netlist.md) to see a breakdown.</p>");
        }
        (Ok(r), true) => {
            let _ = write!(
                b,
                "<p>Input power {}, output power {}, losses {}",
                s.si("/losses/input_power", r.input_power(), "W"),
                s.si("/losses/output_power", r.output_power(), "W"),
                s.si("/losses/total", r.total_loss(), "W"),
            );
            match r.efficiency() {
                Some(eta) => {
                    let _ = write!(
                        b,
                        ", efficiency {} (loads: {}).</p>",
                        s.fixed("/losses/efficiency_percent", eta * 100.0, 2, "%"),
                        esc(&f.loads.join(", "))
                    );
                }
                None => b.push_str(". No load resistor from the output node to ground, so the efficiency is not defined.</p>"),
            }
            let bars: Vec<LossBar> = r
                .by_part()
                .into_iter()
                .map(|t| LossBar {
                    part: t.part,
                    by_kind: t.by_kind,
                })
                .collect();
            b.push_str("<table class=\"narrow\"><thead><tr><th>part</th><th>kind</th><th class=\"n\">average loss</th></tr></thead><tbody>");
            for p in &r.parts {
                let kind = serde_json::to_value(p.kind)
                    .ok()
                    .and_then(|k| k.as_str().map(str::to_string))
                    .unwrap_or_default();
                let _ = write!(
                    b,
                    "<tr><td>{}</td><td>{}</td><td class=\"n\">{}</td></tr>",
                    esc(&p.name),
                    esc(&kind),
                    s.si(
                        &format!("/losses/parts/{}/{}", key(&p.name), key(&kind)),
                        p.power,
                        "W"
                    )
                );
            }
            b.push_str("</tbody></table>");
            let _ = write!(
                b,
                "<figure>{}<figcaption>Average loss by part and mechanism.</figcaption></figure>",
                loss_chart_svg(None, &bars)
            );
        }
    }
    if f.junctions.is_empty() {
        b.push_str("<p>No part has a thermal network: no junction temperature to report.</p>");
    } else {
        b.push_str("<h3>Junction temperatures</h3><table><thead><tr><th>part</th><th class=\"n\">average loss</th><th class=\"n\">mean</th><th class=\"n\">peak</th><th class=\"n\">ripple</th></tr></thead><tbody>");
        for j in &f.junctions {
            match j {
                Ok(j) => {
                    let p = format!("/losses/junction/{}", key(&j.element));
                    let _ = write!(
                        b,
                        "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                        esc(&j.element),
                        s.si(&format!("{p}/average_loss"), j.average_loss, "W"),
                        s.fixed(&format!("{p}/steady"), j.steady, 1, "°C"),
                        s.fixed(&format!("{p}/max"), j.max, 1, "°C"),
                        s.fixed(&format!("{p}/ripple"), j.ripple(), 2, "K"),
                    );
                }
                Err(x) => {
                    let _ = write!(b, "<tr><td colspan=\"5\">{}</td></tr>", esc(x));
                }
            }
        }
        b.push_str("</tbody></table>");
    }
    b.push_str("</section>");

    // 7. Loops.
    section(b, 6);
    if f.loops.is_empty() {
        b.push_str("<p>The circuit has no closed loop (no compensator and no closed-loop gate): nothing to show.</p>");
    }
    for l in &f.loops {
        let _ = write!(b, "<h3>Loop broken at {}</h3>", esc(&l.at));
        match &l.gain {
            Err(x) => {
                let _ = write!(
                    b,
                    "<p class=\"warn\">The loop gain could not be computed: {}</p>",
                    esc(x)
                );
            }
            Ok(g) => {
                let p = format!("/loops/{}", key(&l.name));
                let m = &g.margins;
                let opt = |s: &mut Sheet, k: &str, v: Option<f64>, unit: &str| match v {
                    Some(v) if unit == "Hz" => s.si(&format!("{p}/{k}"), v, unit),
                    Some(v) => s.fixed(&format!("{p}/{k}"), v, 1, unit),
                    None => "none in range".to_string(),
                };
                let _ = write!(
                    b,
                    "<table class=\"narrow\"><tbody><tr><td>crossover frequency</td><td class=\"n\">{}</td></tr><tr><td>phase margin</td><td class=\"n\">{}</td></tr><tr><td>phase crossover (−180°)</td><td class=\"n\">{}</td></tr><tr><td>gain margin</td><td class=\"n\">{}</td></tr></tbody></table>",
                    opt(&mut s, "crossover_hz", m.crossover_hz, "Hz"),
                    opt(&mut s, "phase_margin_deg", m.phase_margin_deg, "°"),
                    opt(&mut s, "phase_crossover_hz", m.phase_crossover_hz, "Hz"),
                    opt(&mut s, "gain_margin_db", m.gain_margin_db, "dB"),
                );
                let pts: Vec<BodePoint> = g
                    .points
                    .iter()
                    .map(|p| BodePoint {
                        frequency: p.frequency,
                        magnitude_db: p.magnitude_db,
                        phase_deg: p.phase_deg,
                    })
                    .collect();
                let marks = BodeMarks {
                    crossover: m.crossover_hz.zip(m.phase_margin_deg),
                    phase_crossover: m.phase_crossover_hz.zip(m.gain_margin_db),
                    switching_frequency: Some(g.switching_frequency),
                };
                let fig = bode_figure(
                    &format!("loop gain at {}", l.at),
                    "loop gain T",
                    &pts,
                    &marks,
                )?;
                let _ = write!(
                    b,
                    "<figure>{}<figcaption>Loop gain from the linearised switched model (no averaging).</figcaption></figure>",
                    inline_svg(&render_svg(&fig)?)
                );
            }
        }
    }
    b.push_str("</section>");

    // 8. Sweep.
    section(b, 7);
    match &f.sweep {
        None => b.push_str("<p>No sweep file was given (<code>fluxstep report FILE --sweep SWEEP.json</code> adds its worst cases here).</p>"),
        Some(Err(x)) => {
            let _ = write!(b, "<p class=\"warn\">The sweep could not run: {}</p>", esc(x));
        }
        Some(Ok(sum)) => {
            let _ = write!(
                b,
                "<p>{} points: {} ran, {} invalid, {} stopped on a diagnostic, {} not measurable.</p>",
                s.count("/sweep/points", sum.points as usize),
                s.count("/sweep/ok", sum.ok as usize),
                s.count("/sweep/invalid", sum.invalid as usize),
                s.count("/sweep/stopped", sum.stopped as usize),
                s.count("/sweep/failed", sum.failed as usize),
            );
            b.push_str("<table><thead><tr><th>figure</th><th class=\"n\">min</th><th class=\"n\">max</th><th class=\"n\">worst</th><th>worst at</th></tr></thead><tbody>");
            for fig in &sum.figures {
                let p = format!("/sweep/figures/{}", key(&fig.name));
                let cell = |s: &mut Sheet, k: &str, r: &Option<fluxstep_analysis::sweep::PointRef>| match r {
                    Some(r) => s.si(&format!("{p}/{k}"), r.value, &fig.unit),
                    None => "—".to_string(),
                };
                let min = cell(&mut s, "min", &fig.min);
                let max = cell(&mut s, "max", &fig.max);
                let worst = cell(&mut s, "worst", &fig.worst);
                let at = fig
                    .worst
                    .as_ref()
                    .map(|w| {
                        w.parameters
                            .iter()
                            .map(|(k, v)| format!("{k} = {}", format_si_short(*v, "")))
                            .collect::<Vec<_>>()
                            .join(", ")
                    })
                    .unwrap_or_default();
                let _ = write!(
                    b,
                    "<tr><td>{}</td><td class=\"n\">{min}</td><td class=\"n\">{max}</td><td class=\"n\">{worst}</td><td>{}</td></tr>",
                    esc(&fig.name),
                    esc(&at)
                );
            }
            b.push_str("</tbody></table>");
            for fig in &f.sweep_plots {
                b.push_str("<figure>");
                b.push_str(&inline_svg(&render_svg(fig)?));
                b.push_str("</figure>");
            }
        }
    }
    b.push_str("</section>");

    // 9. Events.
    section(b, 8);
    let events: Vec<_> = run
        .events
        .iter()
        .filter(|x| {
            x.time >= a && (x.time < e || matches!(f.basis, Basis::Transient { .. }) && x.time <= e)
        })
        .collect();
    let mut by_kind: BTreeMap<String, Vec<_>> = BTreeMap::new();
    for x in &events {
        by_kind
            .entry(kind_words(x.kind).to_string())
            .or_default()
            .push(*x);
    }
    let _ = write!(
        b,
        "<p>Events {span_words}, by kind, with the first three of each.</p>"
    );
    b.push_str("<table><thead><tr><th>kind</th><th class=\"n\">count</th><th>first events</th></tr></thead><tbody>");
    for (k, list) in &by_kind {
        let first = list
            .iter()
            .take(3)
            .map(|x| {
                format!(
                    "{} at {} ({})",
                    esc(x.element),
                    esc(&fluxstep_plot::format_si_digits(x.time, "s", 6)),
                    cause_words(x.cause)
                )
            })
            .collect::<Vec<_>>()
            .join("; ");
        let _ = write!(
            b,
            "<tr><td>{}</td><td class=\"n\">{}</td><td>{first}</td></tr>",
            esc(k),
            s.count(&format!("/events/counts/{}", key(k)), list.len()),
        );
    }
    b.push_str("</tbody></table>");
    let mut diagnostics: Vec<(Option<f64>, String)> = vec![];
    for x in &events {
        let energy = x
            .energy
            .map(|j| format_si_short(j, "J"))
            .unwrap_or_default();
        match x.kind {
            EventKind::ChargeJump => diagnostics.push((Some(x.time), format!("A switch or diode closed a loop of capacitors and sources ({}): their voltages jumped to share charge, dissipating {energy} at that instant. A real circuit shows a current spike here, limited only by the loop's resistance.", x.element))),
            EventKind::FluxJump => diagnostics.push((Some(x.time), format!("Inductor current lost its path ({}); the run went on with the flux-conserving jump, dumping {energy}. On hardware this is the voltage spike that destroys a transistor: add a freewheeling path.", x.element))),
            EventKind::ShootThrough => diagnostics.push((Some(x.time), format!("Closed switches short a source or capacitor ({}): a shoot-through. Check the dead time.", x.element))),
            _ => {}
        }
    }
    if let Basis::Transient { why, stopped, .. } = &f.basis {
        diagnostics.push((None, format!("No periodic steady state: {why}")));
        if let Some(x) = stopped {
            diagnostics.push((x.time(), x.to_string()));
        }
    }
    if let Basis::Steady(ss) = &f.basis {
        if !ss.is_stable() {
            diagnostics.push((Some(ss.start_time), "The periodic orbit is unstable (a Floquet multiplier lies outside the unit circle): the converter will not stay on it; peak-current control above 50 % duty without a compensation ramp does this.".into()));
        }
    }
    for j in f.junctions.iter().flatten() {
        if let Some(w) = j.warning() {
            diagnostics.push((Some(j.time_of_max), w));
        }
    }
    let count = s.count("/events/diagnostics", diagnostics.len());
    if diagnostics.is_empty() {
        let _ = write!(
            b,
            "<p>{count} diagnostics: no jump, shoot-through, interrupted current or stop.</p>"
        );
    } else {
        let _ = write!(
            b,
            "<h3>Diagnostics</h3><p>{count} in all, each with its instant.</p>"
        );
        b.push_str("<table><thead><tr><th class=\"n\">instant</th><th>what happened</th></tr></thead><tbody>");
        for (t, text) in &diagnostics {
            let _ = write!(
                b,
                "<tr><td class=\"n\">{}</td><td>{}</td></tr>",
                t.map(|t| fluxstep_plot::format_si_digits(t, "s", 6))
                    .unwrap_or_else(|| "—".into()),
                esc(text)
            );
        }
        b.push_str("</tbody></table>");
    }
    b.push_str("</section>");

    // 10. Certificate.
    section(b, 9);
    let version = env!("CARGO_PKG_VERSION");
    s.set("/certificate/version", Value::from(version));
    let hash = opts.input.as_ref().map(|bytes| {
        Sha256::digest(bytes)
            .iter()
            .map(|x| format!("{x:02x}"))
            .collect::<String>()
    });
    let residual = match &f.losses {
        Ok(r) => format!(
            "energy balance residual {} ({} of the largest energy in the balance) over {} to {}",
            s.si("/certificate/balance_residual", r.balance_residual(), "J"),
            s.sci("/certificate/balance_error", r.balance_error()),
            fluxstep_plot::format_si_digits(r.t0, "s", 6),
            fluxstep_plot::format_si_digits(r.t1, "s", 6),
        ),
        Err(x) => format!("no energy balance ({})", esc(x)),
    };
    let _ = write!(
        b,
        "<p class=\"cert\">fluxstep {version}; input {}{}; {residual}.</p>",
        esc(opts.file.as_deref().unwrap_or(&title)),
        match &hash {
            Some(h) => {
                s.set("/certificate/sha256", Value::from(h.clone()));
                format!(" (SHA-256 <code>{h}</code>)")
            }
            None => " (built in code: no file hash)".into(),
        }
    );
    b.push_str("<p>Same file and version, same bits: a run is deterministic, so a reviewer who runs <code>fluxstep report</code> on this file gets these numbers exactly.</p></section>");

    // 11. Cautions.
    section(b, 10);
    b.push_str("<ul><li>Simulation results do not replace measurement on real hardware, local electrical codes or qualified review — above all for mains voltages and large stored energies: inductors and capacitors can hold dangerous energy long after a supply is switched off.</li><li>The parts are ideal except for the loss fields the file gives: no parasitic capacitance, no stray inductance unless modelled as an element, no saturation, no temperature dependence of resistance.</li><li>Margins come from the small-signal model around one operating point; check the loop at the corners of input voltage, load and part tolerances.</li></ul></section>");

    let html = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>{t} — design review</title><style>{STYLE}</style></head>\
         <body><main><header><h1>{t}: design review</h1><p class=\"sub\">fluxstep {version} · exact switched simulation · numbers {span_words}</p></header>\
         {body}</main></body></html>\n",
        t = esc(&title),
    );
    Ok(Report {
        html,
        summary: s.summary,
        failed,
    })
}
