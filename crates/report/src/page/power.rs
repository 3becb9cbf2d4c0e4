//! Section 6, losses and efficiency: the loss analysis by part, its bars,
//! and junction temperatures.

use std::fmt::Write as _;

use fluxstep_plot::{loss_chart_svg, LossBar, PlotError};

use super::{heading, Page};
use crate::sheet::{esc, key, Sheet};

/// Section 6: input and output power, losses by part and junction
/// temperatures.
pub(super) fn losses(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    heading(b, 5);
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

    Ok(())
}
