use std::path::PathBuf;

use fluxstep_plot::render_svg;
use resvg::{tiny_skia, usvg};

use fluxstep_plot::{Annotation, Figure, Panel, Trace};

use crate::common::{buck_like, switch_node, triangle_current, DUTY, PERIOD};

fn out_dir() -> PathBuf {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../target"));
    target.join("plot-check")
}

/// Options with whatever fonts the machine has. Without fonts the text is
/// simply missing from the PNG; the shapes, which this test checks, render.
fn options() -> usvg::Options<'static> {
    let mut opt = usvg::Options::default();
    let db = opt.fontdb_mut();
    db.load_system_fonts();
    // The SVG asks for the generic "sans-serif"; point it at a face that
    // exists, preferring a sans one.
    let families: Vec<String> = db
        .faces()
        .flat_map(|f| f.families.iter().map(|(name, _)| name.clone()))
        .collect();
    if let Some(name) = families
        .iter()
        .find(|n| n.contains("Sans") && !n.contains("Mono"))
        .or_else(|| families.first())
    {
        db.set_sans_serif_family(name.clone());
    }
    opt
}

/// Plot frames: the unfilled rectangles of the SVG, as (x0, y0, x1, y1).
fn frames(svg: &str) -> Vec<(u32, u32, u32, u32)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("rect") && n.attribute("fill") == Some("none"))
        .map(|n| {
            let a = |k| n.attribute(k).unwrap().parse::<u32>().unwrap();
            (a("x"), a("y"), a("x") + a("width"), a("y") + a("height"))
        })
        .collect()
}

/// Rasterises `svg` at `scale` and writes it as `name` under the check folder.
fn rasterise(svg: &str, width: u32, height: u32, scale: f32, name: &str) -> tiny_skia::Pixmap {
    let tree = usvg::Tree::from_str(svg, &options()).expect("resvg parses our svg");
    let (w, h) = (
        (width as f32 * scale) as u32,
        (height as f32 * scale) as u32,
    );
    let mut pixmap = tiny_skia::Pixmap::new(w, h).unwrap();
    resvg::render(
        &tree,
        tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    let dir = out_dir();
    std::fs::create_dir_all(&dir).unwrap();
    pixmap.save_png(dir.join(name)).unwrap();
    pixmap
}

#[test]
fn buck_like_figure_renders_to_png_with_both_waveforms_visible() {
    let figure = buck_like();
    let svg = render_svg(&figure).unwrap();
    let pixmap = rasterise(&svg, figure.width, figure.height, 1.0, "buck_like.png");
    // A double-size copy, for a person checking corners and text up close.
    rasterise(&svg, figure.width, figure.height, 2.0, "buck_like_2x.png");
    std::fs::write(out_dir().join("buck_like.svg"), &svg).unwrap();

    let frames = frames(&svg);
    assert_eq!(frames.len(), 2, "one frame per panel");
    let w = figure.width;
    // Strongly coloured pixels are trace ink: grid, frame and text are grey.
    let coloured = |(x0, y0, x1, y1): (u32, u32, u32, u32)| {
        let mut n = 0;
        for y in y0 + 2..y1 - 1 {
            for x in x0 + 2..x1 - 1 {
                let p = pixmap.pixels()[(y * w + x) as usize].demultiply();
                let (r, g, b) = (
                    i32::from(p.red()),
                    i32::from(p.green()),
                    i32::from(p.blue()),
                );
                if r.max(g).max(b) - r.min(g).min(b) > 60 {
                    n += 1;
                }
            }
        }
        n
    };
    for (i, frame) in frames.iter().enumerate() {
        let n = coloured(*frame);
        // Ten periods of a 2 px line across ~800 px: thousands of pixels.
        assert!(n > 1500, "panel {i} has only {n} trace pixels");
    }
    // Outside the plot frames the canvas is white apart from text and ticks:
    // the top-left corner pixel is background.
    let corner = pixmap.pixels()[0].demultiply();
    assert_eq!(
        (corner.red(), corner.green(), corner.blue()),
        (255, 255, 255)
    );
}

#[test]
fn three_panel_window_with_legend_renders() {
    // A made-up scenario: a window of a longer run, a sub-ampere current
    // (mA axis), and a panel with two traces (legend) and a dense ramp.
    let current: Vec<(f64, f64)> = triangle_current(40, PERIOD, DUTY)
        .into_iter()
        .map(|(t, i)| (t, (i - 2.0) * 0.5))
        .collect();
    let mut output = Vec::new();
    for k in 0..=20_000 {
        let t = k as f64 * 1e-8;
        output.push((
            t,
            5.0 + 0.02 * (t / 200e-6) + 0.004 * ((t / PERIOD) * std::f64::consts::TAU).sin(),
        ));
    }
    let figure = Figure::new("window 60-110 µs of a 200 µs run")
        .with_size(800, 560)
        .with_window(60e-6, 110e-6)
        .with_panel(
            Panel::new("capacitor current")
                .with_trace(Trace::new("capacitor current", "A", current))
                .with_annotation(Annotation::Ripple {
                    trace_index: 0,
                    min: -0.1,
                    max: 0.1,
                }),
        )
        .with_panel(Panel::new("switch node").with_trace(Trace::new(
            "switch-node voltage",
            "V",
            switch_node(40, PERIOD, DUTY),
        )))
        .with_panel(
            Panel::new("output")
                .with_trace(Trace::new("output voltage", "V", output))
                .with_trace(Trace::new(
                    "set point",
                    "V",
                    vec![(0.0, 5.0), (200e-6, 5.0)],
                ))
                .with_annotation(Annotation::Average {
                    trace_index: 0,
                    value: 5.01,
                }),
        );
    let svg = render_svg(&figure).unwrap();
    let pixmap = rasterise(&svg, figure.width, figure.height, 1.0, "three_panels.png");
    let frames = frames(&svg);
    assert_eq!(frames.len(), 3);
    let w = figure.width;
    for (i, (x0, y0, x1, y1)) in frames.into_iter().enumerate() {
        let mut n = 0;
        for y in y0 + 2..y1 - 1 {
            for x in x0 + 2..x1 - 1 {
                let p = pixmap.pixels()[(y * w + x) as usize].demultiply();
                let (r, g, b) = (
                    i32::from(p.red()),
                    i32::from(p.green()),
                    i32::from(p.blue()),
                );
                if r.max(g).max(b) - r.min(g).min(b) > 60 {
                    n += 1;
                }
            }
        }
        assert!(n > 500, "panel {i} has only {n} trace pixels");
    }
}

#[test]
fn narrow_figure_wraps_its_legend_and_keeps_its_plots() {
    // Three traces and two marker kinds in a narrow panel: the legend must
    // wrap below the title instead of running into it.
    let ramp = |label: &str, k: f64| {
        Trace::new(
            label,
            "A",
            (0..=50)
                .map(|i| (i as f64 * 1e-6, k * (i as f64 * 0.3).sin()))
                .collect(),
        )
    };
    let figure = Figure::new("narrow check")
        .with_size(420, 420)
        .with_panel(
            Panel::new("phase currents")
                .with_trace(ramp("phase one current", 1.0))
                .with_trace(ramp("phase two current", 0.7))
                .with_trace(ramp("phase three current", 0.4))
                .with_annotation(Annotation::EventMarkers {
                    times: vec![(10e-6, "diode on".into()), (30e-6, "diode off".into())],
                }),
        )
        .with_panel(Panel::new("switch node").with_trace(Trace::new(
            "switch-node voltage",
            "V",
            switch_node(10, PERIOD, DUTY),
        )));
    let svg = render_svg(&figure).unwrap();
    let pixmap = rasterise(&svg, figure.width, figure.height, 1.0, "narrow.png");
    assert_eq!(frames(&svg).len(), 2);
    assert!(pixmap.pixels().iter().any(|p| p.red() != 255));
}

/// The review figure of a real solver run (the buck of
/// examples/circuits/buck.json, last five periods): three panels, each with
/// trace ink, written to `target/plot-check/review_buck.png` for a person.
#[test]
fn review_figure_of_a_simulated_buck_renders() {
    use fluxstep_plot::{review_figure, ReviewOptions};
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../examples/circuits/buck.json"
    );
    let circuit = fluxstep_netlist::Circuit::from_file(path).unwrap();
    let run =
        fluxstep_solver::simulate(&circuit, 1e-3, fluxstep_solver::Options::default()).unwrap();
    let t1 = 1e-3;
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into(), "out".into()],
        window: Some((t1 - 25e-6, t1)),
        event_markers: true,
        ..ReviewOptions::default()
    };
    let fig = review_figure("asynchronous buck", &run.waveform, Some(&run.events), &opts).unwrap();
    let svg = render_svg(&fig).unwrap();
    std::fs::write(out_dir().join("review_buck.svg"), &svg).unwrap();
    let pixmap = rasterise(&svg, fig.width, fig.height, 1.0, "review_buck.png");
    assert_eq!(frames(&svg).len(), 3);
    assert_eq!(pixmap.width(), fig.width);
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_eq!(
        doc.descendants()
            .filter(|n| n.has_tag_name("polyline"))
            .count(),
        3
    );
}
