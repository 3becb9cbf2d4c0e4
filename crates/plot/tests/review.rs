//! Review figures of solver runs (issue 13): what the figure claims is
//! what the solver measured, and what it draws is exact at sub-pixel
//! resolution.

use fluxstep_netlist::Circuit;
use fluxstep_plot::{output_trace, render_svg, review_figure, Annotation, ReviewOptions};
use fluxstep_solver::measure::measure;
use fluxstep_solver::{simulate, Options};

fn buck() -> Circuit {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../examples/circuits/buck.json"
    );
    Circuit::from_file(path).unwrap()
}

fn polylines(svg: &str) -> Vec<Vec<(f64, f64)>> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .map(|n| {
            n.attribute("points")
                .unwrap()
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect()
        })
        .collect()
}

/// The SVG backend rounds to whole pixels, which draws a ramp as a
/// staircase of one-pixel kinks; the figure writes sub-pixel vertices.
#[test]
fn issue_13_svg_coordinates_are_not_all_integers() {
    let run = simulate(&buck(), 1e-3, Options::default()).unwrap();
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into()],
        window: Some((1e-3 - 25e-6, 1e-3)),
        ..ReviewOptions::default()
    };
    let fig = review_figure("buck", &run.waveform, Some(&run.events), &opts).unwrap();
    let svg = render_svg(&fig).unwrap();
    let lines = polylines(&svg);
    assert_eq!(lines.len(), 2);
    let fractional = lines[0]
        .iter()
        .filter(|(x, y)| x.fract() != 0.0 || y.fract() != 0.0)
        .count();
    assert!(
        fractional > lines[0].len() / 2,
        "{fractional} of {}",
        lines[0].len()
    );
    // Precision of at least 0.1 px: two decimals are written.
    assert!(lines[0]
        .iter()
        .any(|(x, _)| (x * 10.0).fract().abs() > 1e-9));
}

/// An inductor driven by a constant voltage with no resistance carries
/// i = V·t / L: an exact straight line, drawn as one line (two vertices),
/// not as a chain of interior samples.
#[test]
fn issue_13_an_exact_straight_segment_is_one_line() {
    let c = Circuit::builder()
        .voltage_source("V1", "a", "gnd", 10.0)
        .inductor("L1", "a", "gnd", 1e-3)
        .build()
        .unwrap();
    let run = simulate(&c, 1e-3, Options::default()).unwrap();
    let trace = output_trace(&run.waveform, "L1.current", 0.0, 1e-3, 960).unwrap();
    assert_eq!(trace.points.len(), 2, "{:?}", trace.points);
    assert_eq!(trace.points[1], (1e-3, 10.0 * 1e-3 / 1e-3));
    // A curved piece keeps its interior vertices.
    let c = Circuit::builder()
        .voltage_source("V1", "a", "gnd", 10.0)
        .resistor("R1", "a", "b", 1.0)
        .inductor("L1", "b", "gnd", 1e-3)
        .build()
        .unwrap();
    let run = simulate(&c, 1e-3, Options::default()).unwrap();
    let trace = output_trace(&run.waveform, "L1.current", 0.0, 1e-3, 960).unwrap();
    assert!(trace.points.len() > 10);
}

fn ripple(fig: &fluxstep_plot::Figure, panel: usize) -> Option<(f64, f64)> {
    fig.panels[panel].annotations.iter().find_map(|a| match a {
        Annotation::Ripple { min, max, .. } => Some((*min, *max)),
        _ => None,
    })
}

fn average(fig: &fluxstep_plot::Figure, panel: usize) -> Option<f64> {
    fig.panels[panel].annotations.iter().find_map(|a| match a {
        Annotation::Average { value, .. } => Some(*value),
        _ => None,
    })
}

/// The ripple bracket belongs on inductor currents in periodic operation,
/// with the solver's exact extremes of one period; a diode's pulses get an
/// average only. Source of the expectation: common practice (a ripple is a
/// property of one period of a repeating waveform).
#[test]
fn issue_13_ripple_only_on_inductor_currents_from_the_solver_measurement() {
    let run = simulate(&buck(), 1e-3, Options::default()).unwrap();
    let (t0, t1) = (1e-3 - 25e-6, 1e-3);
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "D1.current".into(), "sw".into()],
        window: Some((t0, t1)),
        ..ReviewOptions::default()
    };
    let fig = review_figure("buck", &run.waveform, Some(&run.events), &opts).unwrap();
    let (lo, hi) = ripple(&fig, 0).expect("inductor current ripple");
    let il = run.waveform.output("L1.current").unwrap();
    let last = measure(&run.waveform, il, t1 - 5e-6, t1).unwrap();
    assert_eq!((lo, hi), (last.min, last.max));
    let whole = measure(&run.waveform, il, t0, t1).unwrap();
    assert_eq!(average(&fig, 0), Some(whole.average));
    assert!(
        ripple(&fig, 1).is_none(),
        "no ripple bracket on diode pulses"
    );
    assert!(average(&fig, 1).is_some());
    assert!(ripple(&fig, 2).is_none() && average(&fig, 2).is_none());
    // A window that holds the start-up is not periodic operation.
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into()],
        window: Some((0.0, 100e-6)),
        ..ReviewOptions::default()
    };
    let fig = review_figure("buck", &run.waveform, Some(&run.events), &opts).unwrap();
    assert!(ripple(&fig, 0).is_none());
}

/// A compensator output is a control signal, not a voltage.
#[test]
fn issue_13_axis_quantity_comes_from_the_output() {
    let trace = {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../examples/circuits/voltage_mode_buck.json"
        );
        let c = Circuit::from_file(path).unwrap();
        let run = simulate(&c, 0.2e-3, Options::default()).unwrap();
        output_trace(&run.waveform, "K.output", 0.1e-3, 0.2e-3, 960).unwrap()
    };
    assert_eq!(trace.unit, "");
    assert_eq!(trace.quantity, "control signal");
    let fig = fluxstep_plot::Figure::new("")
        .with_panel(fluxstep_plot::Panel::new("K.output").with_trace(trace));
    let svg = render_svg(&fig).unwrap();
    assert!(svg.contains("control signal"));
    assert!(!svg.contains("voltage ("));
}

/// Zoom columns: one more polyline per trace and column, each inside its
/// column, and a stopped run's instant as a red line with its label.
#[test]
fn issue_13_zoom_columns_and_the_stop_instant() {
    let run = simulate(&buck(), 1e-3, Options::default()).unwrap();
    let (t0, t1) = (1e-3 - 25e-6, 1e-3);
    let turn_off = run
        .events
        .of_kind(fluxstep_solver::EventKind::SwitchOff)
        .map(|e| e.time)
        .find(|t| *t > t0)
        .unwrap();
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into()],
        window: Some((t0, t1)),
        zoom: vec![turn_off, turn_off + 5e-6],
        zoom_span: Some(200e-9),
        stopped: Some((t1 - 1e-6, "stopped: example".into())),
        ..ReviewOptions::default()
    };
    let fig = review_figure("buck", &run.waveform, Some(&run.events), &opts).unwrap();
    assert_eq!(fig.zooms.len(), 2);
    let svg = render_svg(&fig).unwrap();
    let lines = polylines(&svg);
    assert_eq!(lines.len(), 2 * 3);
    // The zoom polylines lie right of the main plots.
    let main_right = lines[0].iter().map(|p| p.0).fold(0.0, f64::max);
    for l in &lines[2..] {
        assert!(l.iter().all(|p| p.0 > main_right), "{l:?}");
    }
    assert!(svg.contains("zoom 1") && svg.contains("zoom 2"));
    assert!(svg.contains("stopped: example"));
    assert!(svg.contains("#D01C1C"));
}

/// Issue 19: a window of thousands of periods (here 5 ms of the 200 kHz
/// buck, 2,000 switching events, about fifty per column of a 20 px trace)
/// keeps a trace whose size follows the figure's width, not the record,
/// and whose envelope is the record's: its lowest and highest vertex are
/// the measured minimum and maximum of the inductor current (common
/// practice: min/max decimation draws the same envelope).
#[test]
fn issue_19_a_long_window_is_thinned_to_the_figure_width_keeping_its_envelope() {
    let run = simulate(&buck(), 5e-3, Options::default()).unwrap();
    let w = &run.waveform;
    let (t0, t1) = w.span().unwrap();
    let all = output_trace(w, "L1.current", t0, t1, 2000).unwrap();
    let trace = output_trace(w, "L1.current", t0, t1, 20).unwrap();
    // At most four vertices per half-pixel column, where 2,000 px keep
    // about four per period.
    assert!(all.points.len() > 8000, "{}", all.points.len());
    assert!(trace.points.len() <= 4 * 2 * 21, "{}", trace.points.len());
    assert!(trace.points.len() > 40, "{}", trace.points.len());
    let id = w.output("L1.current").unwrap();
    let m = measure(w, id, t0, t1).unwrap();
    let lo = trace
        .points
        .iter()
        .map(|p| p.1)
        .fold(f64::INFINITY, f64::min);
    let hi = trace
        .points
        .iter()
        .map(|p| p.1)
        .fold(f64::NEG_INFINITY, f64::max);
    assert!(
        (lo - m.min).abs() <= 1e-9 * m.max.abs(),
        "{lo} vs {}",
        m.min
    );
    assert!(
        (hi - m.max).abs() <= 1e-9 * m.max.abs(),
        "{hi} vs {}",
        m.max
    );
    // Time order is kept.
    assert!(trace.points.windows(2).all(|p| p[0].0 <= p[1].0));
}

/// An interleaved buck of twelve equal phases at D = 3/12 cancels its
/// ripple: the current into the output capacitor is zero (common
/// practice: at D = k/N the phase ripples sum to a constant). What the
/// solver leaves there is rounding noise, which the numbers show as 0 A;
/// the figure draws the same zero, not a wiggle of 1e-14 A on an axis
/// that can only read 0, while the inductor currents keep their ripple.
#[test]
fn a_trace_of_rounding_noise_is_drawn_as_the_zero_its_numbers_show() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../examples/circuits/interleaved_buck_12.json"
    );
    let c = Circuit::from_file(path).unwrap();
    let run = simulate(&c, 40e-6, Options::default()).unwrap();
    let w = &run.waveform;
    let (t0, t1) = (32e-6, 40e-6);
    let raw = output_trace(w, "Cout.current", t0, t1, 1400).unwrap();
    let largest = raw.points.iter().map(|p| p.1.abs()).fold(0.0, f64::max);
    // The raw vertices are noise: not all zero, but far below an ampere.
    assert!(largest > 0.0 && largest < 1e-9, "{largest}");
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "Cout.current".into()],
        window: Some((t0, t1)),
        ..ReviewOptions::default()
    };
    let fig = review_figure("interleaved", w, Some(&run.events), &opts).unwrap();
    let drawn = &fig.panels[1].traces[0].points;
    assert!(!drawn.is_empty());
    assert!(drawn.iter().all(|p| p.1 == 0.0));
    // The inductor's ripple is drawn as it is.
    let l1 = &fig.panels[0].traces[0].points;
    let (lo, hi) = l1
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.1), b.max(p.1))
        });
    assert!(hi - lo > 1.0, "{lo} … {hi}");
}
