//! Text: cleaning, estimated widths, pixel rounding and font styles.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{FontDesc, FontFamily, FontStyle};

use super::CHAR_EM;

/// Control characters would make the SVG invalid XML.
pub(super) fn clean(text: &str) -> String {
    text.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

pub(super) fn text_width(text: &str, px: f64) -> f64 {
    text.chars().count() as f64 * px * CHAR_EM
}

/// Pixel coordinate; the clamp keeps absurd layouts from overflowing `i32`.
pub(super) fn px(v: f64) -> i32 {
    v.round().clamp(-1.0e6, 1.0e6) as i32
}

pub(super) fn font(size_px: f64, bold: bool) -> FontDesc<'static> {
    let style = if bold {
        FontStyle::Bold
    } else {
        FontStyle::Normal
    };
    // The SVG backend writes font-size = size / 1.24; undo that so the
    // constants above are the CSS pixel sizes that end up in the file, and
    // nudge by a few ulps so the division lands exactly on them ("13", not
    // "13.000000000000002").
    let mut size = size_px * 1.24;
    for _ in 0..8 {
        let back = size / 1.24;
        if back == size_px {
            break;
        }
        let bits = size.to_bits();
        size = f64::from_bits(if back < size_px { bits + 1 } else { bits - 1 });
    }
    FontDesc::new(FontFamily::SansSerif, size, style)
}

pub(super) fn text_style(
    size_px: f64,
    bold: bool,
    colour: &RGBColor,
    h: HPos,
    v: VPos,
) -> TextStyle<'static> {
    font(size_px, bold).color(colour).pos(Pos::new(h, v))
}
