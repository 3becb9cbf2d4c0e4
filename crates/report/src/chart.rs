//! The loss breakdown chart: one horizontal bar per part, drawn as plain
//! SVG (the bars' lengths are the losses the analysis computed; nothing is
//! computed here).

use fluxstep_plot::format_si_digits;

use crate::sheet::esc;

/// A horizontal bar chart of `(label, watts)`, largest first as given.
/// The SVG scales with its container (viewBox, no fixed width).
pub(crate) fn loss_bars(bars: &[(String, f64)]) -> String {
    let width = 640.0;
    let label_w = 170.0;
    let value_w = 90.0;
    let row = 22.0;
    let height = row * bars.len() as f64 + 12.0;
    let top = bars.iter().map(|b| b.1.abs()).fold(0.0f64, f64::max);
    let span = width - label_w - value_w;
    let mut svg = format!(
        "<svg class=\"bars\" viewBox=\"0 0 {width} {height}\" role=\"img\" \
         aria-label=\"loss by part\" xmlns=\"http://www.w3.org/2000/svg\">"
    );
    for (i, (label, p)) in bars.iter().enumerate() {
        let y = 6.0 + row * i as f64;
        let len = if top > 0.0 { span * p.abs() / top } else { 0.0 };
        svg.push_str(&format!(
            "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\" font-size=\"12\">{}</text>\
             <rect x=\"{label_w}\" y=\"{:.1}\" width=\"{len:.2}\" height=\"{:.1}\" fill=\"#4a6d8c\"/>\
             <text x=\"{:.1}\" y=\"{:.1}\" font-size=\"12\">{}</text>",
            label_w - 6.0,
            y + 14.0,
            esc(label),
            y + 3.0,
            row - 6.0,
            label_w + len + 6.0,
            y + 14.0,
            esc(&format_si_digits(*p, "W", 3)),
        ));
    }
    svg.push_str("</svg>");
    svg
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bars_are_proportional_to_the_losses() {
        let svg = loss_bars(&[("Q1".into(), 2.0), ("L1.winding".into(), 0.5)]);
        // 640 − 170 − 90 = 380 px for the largest.
        assert!(svg.contains("width=\"380.00\""), "{svg}");
        assert!(svg.contains("width=\"95.00\""), "{svg}");
        assert!(svg.contains("500 mW"), "{svg}");
    }
}
