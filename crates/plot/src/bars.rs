//! The loss breakdown chart: one horizontal bar per part, split into the
//! mechanisms of its loss (conduction, switching, recovery, core, jump),
//! with the part's total at the bar's end. Plain SVG: the bars' lengths
//! are the losses the caller computed; nothing is computed here.

use fluxstep_netlist::si::format_si_digits;

/// One part's loss, by mechanism.
#[derive(Clone, Debug, PartialEq)]
pub struct LossBar {
    /// The part (`Q1`, `L1.core`, `D1`).
    pub part: String,
    /// `(mechanism, watts)` in drawing order; the mechanism names the
    /// colour (see [`MECHANISMS`]).
    pub by_kind: Vec<(String, f64)>,
}

impl LossBar {
    /// The part's total loss (W).
    pub fn total(&self) -> f64 {
        self.by_kind.iter().map(|k| k.1).sum()
    }
}

/// The mechanisms the chart knows, with their fill colours, in legend
/// order. Any other name is drawn grey.
pub const MECHANISMS: [(&str, &str); 5] = [
    ("conduction", "#3b6e99"),
    ("switching", "#d9822b"),
    ("recovery", "#8f5ba8"),
    ("core", "#4f9a5c"),
    ("jump", "#b84a4a"),
];

fn colour(kind: &str) -> &'static str {
    MECHANISMS
        .iter()
        .find(|m| m.0 == kind)
        .map_or("#8a8a8a", |m| m.1)
}

/// Escapes text for SVG.
fn esc(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A horizontal stacked bar chart of `bars` (drawn in the order given),
/// with `title` on top when given and a legend of the mechanisms present.
/// The SVG has a fixed size for a file and a viewBox, so it also scales
/// with a page's container. Negative values (rounding noise of a lossless
/// part) are drawn as zero length but printed as given.
pub fn loss_chart_svg(title: Option<&str>, bars: &[LossBar]) -> String {
    let width = 720.0;
    let label_w = 170.0;
    let value_w = 100.0;
    let row = 22.0;
    let head = if title.is_some() { 30.0 } else { 6.0 };
    let kinds: Vec<&str> = MECHANISMS
        .iter()
        .map(|m| m.0)
        .filter(|k| {
            bars.iter()
                .any(|b| b.by_kind.iter().any(|(n, p)| n == k && *p > 0.0))
        })
        .collect();
    let legend = if kinds.is_empty() { 0.0 } else { 26.0 };
    let height = head + row * bars.len() as f64 + legend + 8.0;
    let top = bars.iter().map(LossBar::total).fold(0.0f64, f64::max);
    let span = width - label_w - value_w - 12.0;
    let mut svg = format!(
        "<svg class=\"bars\" width=\"{width}\" height=\"{height}\" viewBox=\"0 0 {width} {height}\" \
         role=\"img\" aria-label=\"loss by part\" font-family=\"sans-serif\" \
         xmlns=\"http://www.w3.org/2000/svg\">\
         <rect width=\"{width}\" height=\"{height}\" fill=\"#ffffff\"/>"
    );
    if let Some(t) = title {
        svg.push_str(&format!(
            "<text x=\"8\" y=\"20\" font-size=\"15\" font-weight=\"bold\">{}</text>",
            esc(t)
        ));
    }
    for (i, bar) in bars.iter().enumerate() {
        let y = head + row * i as f64;
        svg.push_str(&format!(
            "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\" font-size=\"12\">{}</text>",
            label_w - 6.0,
            y + 14.0,
            esc(&bar.part)
        ));
        let mut x = label_w;
        for (kind, p) in &bar.by_kind {
            let len = if top > 0.0 {
                span * p.max(0.0) / top
            } else {
                0.0
            };
            if len > 0.0 {
                svg.push_str(&format!(
                    "<rect x=\"{x:.2}\" y=\"{:.1}\" width=\"{len:.2}\" height=\"{:.1}\" fill=\"{}\"><title>{}: {}</title></rect>",
                    y + 3.0,
                    row - 6.0,
                    colour(kind),
                    esc(kind),
                    esc(&format_si_digits(*p, "W", 3))
                ));
            }
            x += len;
        }
        svg.push_str(&format!(
            "<text x=\"{:.1}\" y=\"{:.1}\" font-size=\"12\">{}</text>",
            x + 6.0,
            y + 14.0,
            esc(&format_si_digits(bar.total(), "W", 3)),
        ));
    }
    let mut x = label_w;
    let y = head + row * bars.len() as f64 + 10.0;
    for k in kinds {
        svg.push_str(&format!(
            "<rect x=\"{x:.1}\" y=\"{y:.1}\" width=\"12\" height=\"12\" fill=\"{}\"/>\
             <text x=\"{:.1}\" y=\"{:.1}\" font-size=\"12\">{k}</text>",
            colour(k),
            x + 16.0,
            y + 10.5
        ));
        x += 24.0 + 7.5 * k.len() as f64;
    }
    svg.push_str("</svg>");
    svg
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bar(part: &str, kinds: &[(&str, f64)]) -> LossBar {
        LossBar {
            part: part.into(),
            by_kind: kinds.iter().map(|(k, p)| (k.to_string(), *p)).collect(),
        }
    }

    #[test]
    fn bars_are_proportional_to_the_losses_and_stacked_by_mechanism() {
        let svg = loss_chart_svg(
            Some("losses"),
            &[
                bar("Q1", &[("conduction", 1.5), ("switching", 0.5)]),
                bar("L1.winding", &[("conduction", 0.5)]),
            ],
        );
        // 720 − 170 − 100 − 12 = 438 px for the largest total (2 W).
        assert!(svg.contains("width=\"328.50\""), "{svg}");
        assert!(svg.contains("x=\"498.50\""), "{svg}");
        assert!(svg.contains("width=\"109.50\""), "{svg}");
        assert!(
            svg.contains(">2.00 W<") && svg.contains(">500 mW<"),
            "{svg}"
        );
        // The legend names the mechanisms present, not the others.
        assert!(
            svg.contains(">switching<") && !svg.contains(">core<"),
            "{svg}"
        );
    }

    #[test]
    fn labels_are_escaped() {
        let svg = loss_chart_svg(None, &[bar("a<b&c", &[("conduction", 1.0)])]);
        assert!(svg.contains("a&lt;b&amp;c"), "{svg}");
    }
}
