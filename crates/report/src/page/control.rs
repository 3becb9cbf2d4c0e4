//! Sections 7 and 8: loop gains with their margins and Bode figures, and
//! the sweep's spread and worst cases.

use std::fmt::Write as _;

use fluxstep_netlist::si::format_si_short;
use fluxstep_plot::{bode_figure, render_svg, BodeMarks, BodePoint, PlotError};

use super::{heading, inline_svg, Page};
use crate::sheet::{esc, key, Sheet};

/// Section 7: one table and Bode figure per loop.
pub(super) fn loops(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    heading(b, 6);
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
                    opt(s, "crossover_hz", m.crossover_hz, "Hz"),
                    opt(s, "phase_margin_deg", m.phase_margin_deg, "°"),
                    opt(s, "phase_crossover_hz", m.phase_crossover_hz, "Hz"),
                    opt(s, "gain_margin_db", m.gain_margin_db, "dB"),
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

    Ok(())
}

/// Section 8: points by status and, per figure, min, max and worst case.
pub(super) fn sweep(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    heading(b, 7);
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
                let min = cell(s, "min", &fig.min);
                let max = cell(s, "max", &fig.max);
                let worst = cell(s, "worst", &fig.worst);
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

    Ok(())
}
