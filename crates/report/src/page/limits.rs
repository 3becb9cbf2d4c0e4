//! Section 1, design limits: each limit of the file checked against the
//! facts (written into the summary as value, limit and pass), the banner
//! at the top of the page and the table of verdicts.

use std::fmt::Write as _;

use fluxstep_netlist::DesignLimits;
use fluxstep_plot::format_si_short;
use serde_json::Value;

use super::heading;
use super::operating::peak_abs;
use crate::gather::Facts;
use crate::sheet::{esc, key, Sheet};

/// A design limit checked: figure, value shown, limit shown, pass.
pub(super) struct Check {
    figure: String,
    value: String,
    limit: String,
    pass: Option<bool>,
}

/// A limit checked against a number: value, limit and verdict go into the
/// summary under `/limits/ID`.
fn checked(
    s: &mut Sheet,
    id: &str,
    figure: String,
    value: f64,
    unit: &str,
    limit: f64,
    pass: bool,
) -> Check {
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
}

/// Every limit of the file, in a fixed order: output ripple, saturation
/// currents, voltage ratings, phase margins, junction temperatures.
pub(super) fn checks(limits: &DesignLimits, f: &Facts, s: &mut Sheet) -> Vec<Check> {
    let mut out = vec![];
    ripple_and_saturation(limits, f, s, &mut out);
    voltage_ratings(limits, f, s, &mut out);
    phase_margins(limits, f, s, &mut out);
    junction_temperatures(limits, f, s, &mut out);
    out
}

/// The output ripple and each inductor's peak against its saturation current.
fn ripple_and_saturation(limits: &DesignLimits, f: &Facts, s: &mut Sheet, out: &mut Vec<Check>) {
    if let Some(max) = limits.max_output_ripple {
        let node = limits.ripple_output();
        match &f.ripple {
            Some(m) => out.push(checked(
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
                out.push(checked(
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
}

/// Each part's peak voltage against its derated voltage rating.
fn voltage_ratings(limits: &DesignLimits, f: &Facts, s: &mut Sheet, out: &mut Vec<Check>) {
    let derating = limits.derating_factor();
    for p in &limits.voltage_rating {
        let allowed = derating * p.value;
        match f.stress.iter().find(|(n, _, _)| *n == p.element) {
            Some((_, _, Some(v))) => {
                let peak = peak_abs(v).0;
                out.push(checked(
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
}

/// Each loop's phase margin against the minimum.
fn phase_margins(limits: &DesignLimits, f: &Facts, s: &mut Sheet, out: &mut Vec<Check>) {
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
}

/// Each part's peak junction temperature against the maximum.
fn junction_temperatures(limits: &DesignLimits, f: &Facts, s: &mut Sheet, out: &mut Vec<Check>) {
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
}

fn verdict(pass: Option<bool>) -> &'static str {
    match pass {
        Some(true) => "<td class=\"pass\">pass</td>",
        Some(false) => "<td class=\"fail\">FAIL</td>",
        None => "<td class=\"na\">not checked</td>",
    }
}

/// The failed limits as sentences without markup, for the banner and the
/// summary.
pub(super) fn failed(checks: &[Check]) -> Vec<String> {
    checks
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
        .collect()
}

/// The verdict banner at the top of the page.
pub(super) fn banner(b: &mut String, checks: &[Check], failed: &[String]) {
    if !failed.is_empty() {
        let _ = write!(
            b,
            "<div class=\"banner fail\" id=\"verdict\"><strong>{} design limit{} failed.</strong><ul>",
            failed.len(),
            if failed.len() == 1 { "" } else { "s" }
        );
        for x in failed {
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
}

/// Section 1: the table of limits with their verdicts.
pub(super) fn section(b: &mut String, checks: &[Check]) {
    heading(b, 0);
    if checks.is_empty() {
        b.push_str("<p>No limits are set. Add <code>run.limits</code> to the circuit file (docs/report.md) to have each figure marked pass or fail.</p>");
    } else {
        b.push_str("<table><thead><tr><th>figure</th><th class=\"n\">value</th><th class=\"n\">limit</th><th>verdict</th></tr></thead><tbody>");
        for k in checks {
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
}
