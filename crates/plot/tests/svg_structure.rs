use fluxstep_plot::{render_svg, Figure, Panel, Trace};

use crate::common::{buck_like, switch_node, triangle_current, DUTY, PERIOD};

fn parse(svg: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse(svg).expect("the svg must be well-formed xml")
}

fn count(doc: &roxmltree::Document<'_>, tag: &str) -> usize {
    doc.descendants().filter(|n| n.has_tag_name(tag)).count()
}

fn texts(doc: &roxmltree::Document<'_>) -> Vec<(String, f64, f64, String)> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            let num = |a| {
                n.attribute(a)
                    .and_then(|v: &str| v.parse().ok())
                    .unwrap_or(f64::NAN)
            };
            (
                n.text().unwrap_or("").trim().to_string(),
                num("x"),
                num("y"),
                n.attribute("text-anchor").unwrap_or("").to_string(),
            )
        })
        .collect()
}

fn polyline_points(node: roxmltree::Node<'_, '_>) -> Vec<(f64, f64)> {
    node.attribute("points")
        .unwrap_or("")
        .split_whitespace()
        .map(|p| {
            let (x, y) = p.split_once(',').expect("x,y pair");
            (x.parse().expect("x"), y.parse().expect("y"))
        })
        .collect()
}

#[test]
fn one_polyline_per_trace_and_no_path() {
    let svg = render_svg(&buck_like()).unwrap();
    let doc = parse(&svg);
    assert_eq!(count(&doc, "polyline"), 2);
    assert_eq!(count(&doc, "path"), 0);

    // Three panels, one of them with two traces: four polylines.
    let fig = buck_like().with_panel(
        Panel::new("output")
            .with_trace(Trace::new(
                "output voltage",
                "V",
                vec![(0.0, 5.0), (50e-6, 5.01)],
            ))
            .with_trace(Trace::new("reference", "V", vec![(0.0, 5.0), (50e-6, 5.0)])),
    );
    let svg = render_svg(&fig).unwrap();
    assert_eq!(count(&parse(&svg), "polyline"), 4);
}

#[test]
fn axis_labels_use_si_prefixes() {
    let svg = render_svg(&buck_like()).unwrap();
    let doc = parse(&svg);
    let labels: Vec<String> = texts(&doc).into_iter().map(|t| t.0).collect();
    for wanted in [
        "time (µs)",
        "current (A)",
        "voltage (V)",
        "400 mA p-p",
        "avg 2.00 A",
    ] {
        assert!(
            labels.iter().any(|l| l == wanted),
            "missing {wanted:?} in {labels:?}"
        );
    }
    // 0…50 µs in 1-2-5 steps: the bottom labels read 0, 10, 20, … 50 or finer.
    assert!(labels.iter().any(|l| l == "50"), "{labels:?}");
    // A sub-ampere ripple panel is scaled to mA.
    let small = Figure::new("").with_panel(Panel::new("").with_trace(Trace::new(
        "ripple",
        "A",
        vec![(0.0, -0.2), (1e-3, 0.2)],
    )));
    let doc_svg = render_svg(&small).unwrap();
    let labels: Vec<String> = texts(&parse(&doc_svg)).into_iter().map(|t| t.0).collect();
    assert!(labels.iter().any(|l| l == "current (mA)"), "{labels:?}");
    assert!(labels.iter().any(|l| l == "time (ms)"), "{labels:?}");
}

#[test]
fn only_the_bottom_panel_has_time_labels() {
    let svg = render_svg(&buck_like()).unwrap();
    let doc = parse(&svg);
    // Top-anchored, centred texts are time labels; all must lie below the
    // lowest polyline vertex (the bottom panel's plot area).
    let lowest_top_curve = doc
        .descendants()
        .find(|n| n.has_tag_name("polyline"))
        .map(polyline_points)
        .unwrap()
        .iter()
        .map(|p| p.1)
        .fold(f64::MIN, f64::max);
    let time_labels: Vec<_> = texts(&doc)
        .into_iter()
        .filter(|t| t.3 == "middle" && t.0.parse::<f64>().is_ok())
        .collect();
    assert!(time_labels.len() >= 3, "{time_labels:?}");
    let bottom_curve = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .nth(1)
        .map(polyline_points)
        .unwrap();
    let bottom_of_plot = bottom_curve.iter().map(|p| p.1).fold(f64::MIN, f64::max);
    for t in &time_labels {
        assert!(t.2 > bottom_of_plot && t.2 > lowest_top_curve, "{t:?}");
    }
}

#[test]
fn time_labels_do_not_overlap() {
    // Check at several widths: narrower figures must drop ticks, not cram them.
    for width in [320, 480, 640, 960, 1600] {
        let svg = render_svg(&buck_like().with_size(width, 600)).unwrap();
        let doc = parse(&svg);
        let mut labels: Vec<_> = texts(&doc)
            .into_iter()
            .filter(|t| t.3 == "middle" && t.0.parse::<f64>().is_ok())
            .collect();
        labels.sort_by(|a, b| a.1.total_cmp(&b.1));
        // 12 px text, generous 0.7 em per glyph.
        let half = |s: &str| 0.5 * s.chars().count() as f64 * 12.0 * 0.7;
        for w in labels.windows(2) {
            assert!(
                w[0].1 + half(&w[0].0) + 4.0 < w[1].1 - half(&w[1].0),
                "width {width}: {:?} and {:?} overlap",
                w[0],
                w[1]
            );
        }
    }
}

#[test]
fn steps_are_vertical_and_corners_are_vertices() {
    let svg = render_svg(&buck_like()).unwrap();
    let doc = parse(&svg);
    let lines: Vec<_> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .collect();
    let node = polyline_points(lines[1]);
    // Each period has a rising and a falling edge drawn as vertical segments.
    let vertical = node
        .windows(2)
        .filter(|w| w[0].0 == w[1].0 && w[0].1 != w[1].1)
        .count();
    assert_eq!(vertical, 20);
    let current = polyline_points(lines[0]);
    assert_eq!(current.len(), 21, "one vertex per corner");
}

#[test]
fn legend_appears_only_with_several_traces() {
    let one = render_svg(&buck_like()).unwrap();
    let labels: Vec<String> = texts(&parse(&one)).into_iter().map(|t| t.0).collect();
    // Single-trace panels show their title, not a legend entry for the trace.
    assert!(
        !labels.iter().any(|l| l == "switch-node voltage"),
        "{labels:?}"
    );
    let two = Figure::new("").with_panel(
        Panel::new("outputs")
            .with_trace(Trace::new(
                "output voltage",
                "V",
                vec![(0.0, 5.0), (1e-3, 5.1)],
            ))
            .with_trace(Trace::new("set point", "V", vec![(0.0, 5.0), (1e-3, 5.0)])),
    );
    let svg = render_svg(&two).unwrap();
    let labels: Vec<String> = texts(&parse(&svg)).into_iter().map(|t| t.0).collect();
    assert!(labels.iter().any(|l| l == "output voltage"), "{labels:?}");
    assert!(labels.iter().any(|l| l == "set point"), "{labels:?}");
}

#[test]
fn window_cuts_traces_at_its_edges() {
    let fig = buck_like().with_window(12.5e-6, 27.5e-6);
    let svg = render_svg(&fig).unwrap();
    let doc = parse(&svg);
    let lines: Vec<_> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .collect();
    assert_eq!(lines.len(), 2);
    let full = render_svg(&buck_like()).unwrap();
    let full_doc = parse(&full);
    let full_lines: Vec<_> = full_doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .collect();
    let xs = |n| polyline_points(n).iter().map(|p| p.0).collect::<Vec<f64>>();
    let (win, all) = (xs(lines[0]), xs(full_lines[0]));
    // Same plot width, a third of the time: same pixel span, fewer vertices.
    let span = |v: &[f64]| {
        v.iter().cloned().fold(f64::MIN, f64::max) - v.iter().cloned().fold(f64::MAX, f64::min)
    };
    assert!(
        (span(&win) - span(&all)).abs() <= 2.0,
        "{} vs {}",
        span(&win),
        span(&all)
    );
    assert!(win.len() < all.len() / 2, "{} vs {}", win.len(), all.len());
    // An event instant inside the window stays a vertex at its exact pixel.
    let x_of = |t: f64| win[0] + (t - 12.5e-6) / 15e-6 * span(&win);
    assert!(win.iter().any(|x| (x - x_of(15e-6)).abs() <= 1.0));
}

#[test]
fn dense_traces_are_thinned_but_keep_their_extremes() {
    // A million vertices of a fast triangle: 2000 periods, one 5 V spike.
    let n = 1_000_000;
    let mut pts: Vec<(f64, f64)> = (0..n)
        .map(|i| {
            let t = i as f64 * 1e-9;
            let phase = (i % 500) as f64 / 500.0;
            (t, 1.0 + 0.1 * (1.0 - (2.0 * phase - 1.0).abs()))
        })
        .collect();
    pts[654_321].1 = 5.0;
    let fig = Figure::new("")
        .with_size(800, 300)
        .with_panel(Panel::new("dense").with_trace(Trace::new("i", "A", pts)));
    let start = std::time::Instant::now();
    let svg = render_svg(&fig).unwrap();
    let elapsed = start.elapsed();
    let doc = parse(&svg);
    let line = doc
        .descendants()
        .find(|n| n.has_tag_name("polyline"))
        .unwrap();
    let pts = polyline_points(line);
    assert!(pts.len() <= 4 * 800, "{} vertices", pts.len());
    // The spike is the highest point of the curve and survives thinning:
    // its pixel row sits far above the triangle tops.
    let top = pts.iter().map(|p| p.1).fold(f64::MAX, f64::min);
    let second = pts
        .iter()
        .map(|p| p.1)
        .filter(|y| *y > top + 1.0)
        .fold(f64::MAX, f64::min);
    assert!(
        second - top > 50.0,
        "spike at {top}, triangle tops at {second}"
    );
    assert!(elapsed.as_secs_f64() < 5.0, "took {elapsed:?}");
}

#[test]
fn labels_are_escaped() {
    let fig = Figure::new("a <b> & \"c\"").with_panel(
        Panel::new("x & y")
            .with_trace(Trace::new("p<q", "V", vec![(0.0, 0.0), (1.0, 1.0)]))
            .with_trace(Trace::new("r\u{1}s", "V", vec![(0.0, 1.0), (1.0, 0.0)])),
    );
    let svg = render_svg(&fig).unwrap();
    let doc = parse(&svg);
    let labels: Vec<String> = texts(&doc).into_iter().map(|t| t.0).collect();
    assert!(labels.iter().any(|l| l == "a <b> & \"c\""), "{labels:?}");
    assert!(labels.iter().any(|l| l == "p<q"), "{labels:?}");
}

#[test]
fn rendering_is_deterministic() {
    let a = render_svg(&buck_like()).unwrap();
    let b = render_svg(&buck_like()).unwrap();
    assert_eq!(a, b);
}

#[test]
fn flat_and_single_instant_traces_render() {
    // A flat DC level, and a trace that touches the window at one instant.
    let fig = Figure::new("")
        .with_panel(Panel::new("dc").with_trace(Trace::new(
            "v",
            "V",
            vec![(0.0, 12.0), (1e-3, 12.0)],
        )))
        .with_panel(Panel::new("zero").with_trace(Trace::new(
            "i",
            "A",
            vec![(0.0, 0.0), (1e-3, 0.0)],
        )))
        .with_panel(Panel::new("late").with_trace(Trace::new(
            "p",
            "W",
            vec![(2e-3, 1.0), (3e-3, 2.0)],
        )));
    let svg = render_svg(&fig.with_window(0.0, 1e-3)).unwrap();
    assert_eq!(count(&parse(&svg), "polyline"), 3);
    let _ = (
        triangle_current(1, PERIOD, DUTY),
        switch_node(1, PERIOD, DUTY),
    );
}

/// Seven current panels in the default size are about 60 px high, less
/// than the rotated "current (A)" is long: their value axes read "A", so
/// that the titles stay beside their own panels; one tall panel keeps the
/// whole title (common practice: an axis title never runs past its axis).
#[test]
fn a_value_axis_title_longer_than_its_panel_is_shortened_to_its_unit() {
    // The texts of a figure of `n` inductor-current panels.
    let labels = |n: usize| -> Vec<String> {
        let fig = (0..n).fold(Figure::new("currents"), |fig, k| {
            fig.with_panel(Panel::new(format!("L{k}.current")).with_trace(Trace::new(
                "current",
                "A",
                vec![(0.0, 8.0), (1e-6, 12.0), (4e-6, 8.0)],
            )))
        });
        texts(&parse(&render_svg(&fig).unwrap()))
            .into_iter()
            .map(|t| t.0)
            .collect()
    };
    let seven = labels(7);
    assert!(!seven.iter().any(|l| l == "current (A)"), "{seven:?}");
    assert_eq!(seven.iter().filter(|l| *l == "A").count(), 7, "{seven:?}");
    let one = labels(1);
    assert!(one.iter().any(|l| l == "current (A)"), "{one:?}");
}
