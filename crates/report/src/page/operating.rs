//! Sections 3 to 5: the operating point (steady state or transient
//! window, outputs, inductor currents, ripple), the waveform figure and
//! the stress on switches and diodes, all from the solver's measurements.

use std::fmt::Write as _;

use fluxstep_netlist::si::format_si_short;
use fluxstep_plot::{render_svg, review_figure, PlotError, ReviewOptions};
use fluxstep_solver::measure::{without_rounding_noise, Measurement};
use serde_json::Value;

use super::{heading, inline_svg, unit_of, Page};
use crate::gather::Basis;
use crate::sheet::{esc, key, Sheet};

/// Section 3: how the operating point was found, then the measurements over
/// its span.
pub(super) fn operating_point(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    let span_words = p.span_words;
    let (a, e) = f.window;
    heading(b, 2);
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

    Ok(())
}

/// Section 4: the review figure of the span, with zoom columns.
pub(super) fn waveforms(p: &Page, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    let title = p.title;
    let e = f.window.1;
    heading(b, 3);
    let run = f.run();
    let stopped = match &f.basis {
        Basis::Transient {
            stopped: Some(x), ..
        } => Some((x.time().unwrap_or(e), "stopped".to_string())),
        _ => None,
    };
    let fig = review_figure(
        title,
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

    Ok(())
}

pub(super) fn peak_abs(m: &Measurement) -> (f64, f64) {
    if m.max.abs() >= m.min.abs() {
        (m.max.abs(), m.time_of_max)
    } else {
        (m.min.abs(), m.time_of_min)
    }
}

/// Section 5: the largest current and voltage of each switch and diode.
pub(super) fn stress(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    let span_words = p.span_words;
    heading(b, 4);
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

    Ok(())
}
