use fluxstep_plot::{render_svg, write_svg, Annotation, Figure, Panel, PlotError, Trace};

fn one(trace: Trace) -> Figure {
    Figure::new("f").with_panel(Panel::new("p").with_trace(trace))
}

#[test]
fn non_finite_value_names_trace_and_time() {
    for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
        let fig = one(Trace::new(
            "inductor current",
            "A",
            vec![(0.0, 1.0), (2.5e-6, bad), (5e-6, 1.0)],
        ));
        let err = render_svg(&fig).unwrap_err();
        assert!(
            matches!(err, PlotError::NonFiniteValue { index: 1, .. }),
            "{err:?}"
        );
        let msg = err.to_string();
        assert!(msg.contains("inductor current"), "{msg}");
        assert!(msg.contains("2.5e-6"), "{msg}");
        assert_eq!(msg, msg.to_lowercase(), "messages are lowercase");
    }
}

#[test]
fn non_finite_time_names_trace() {
    let fig = one(Trace::new(
        "switch node",
        "V",
        vec![(0.0, 1.0), (f64::NAN, 1.0)],
    ));
    let msg = render_svg(&fig).unwrap_err().to_string();
    assert!(msg.contains("switch node") && msg.contains("time"), "{msg}");
}

#[test]
fn structural_mistakes_are_named() {
    let empty = Figure::new("empty");
    assert!(matches!(
        render_svg(&empty),
        Err(PlotError::EmptyFigure { .. })
    ));

    let no_traces = Figure::new("f").with_panel(Panel::new("lonely"));
    let msg = render_svg(&no_traces).unwrap_err().to_string();
    assert!(msg.contains("lonely"), "{msg}");

    let no_points = one(Trace::new("hollow", "A", vec![]));
    assert!(render_svg(&no_points)
        .unwrap_err()
        .to_string()
        .contains("hollow"));

    let backwards = one(Trace::new(
        "rewind",
        "A",
        vec![(0.0, 0.0), (2.0, 1.0), (1.0, 0.0)],
    ));
    let msg = render_svg(&backwards).unwrap_err().to_string();
    assert!(msg.contains("rewind") && msg.contains("t = 1"), "{msg}");

    let mixed = Figure::new("f").with_panel(
        Panel::new("mixed")
            .with_trace(Trace::new("i", "A", vec![(0.0, 0.0), (1.0, 1.0)]))
            .with_trace(Trace::new("v", "V", vec![(0.0, 0.0), (1.0, 1.0)])),
    );
    let msg = render_svg(&mixed).unwrap_err().to_string();
    assert!(msg.contains("mixed") && msg.contains("'v'"), "{msg}");

    let instant = one(Trace::new("dot", "A", vec![(1.0, 0.0)]));
    assert!(matches!(
        render_svg(&instant),
        Err(PlotError::NoTimeSpan { .. })
    ));
}

#[test]
fn bad_annotations_are_named() {
    let base =
        || Panel::new("current").with_trace(Trace::new("i", "A", vec![(0.0, 0.0), (1.0, 1.0)]));
    let cases = [
        Annotation::Average {
            trace_index: 3,
            value: 1.0,
        },
        Annotation::Average {
            trace_index: 0,
            value: f64::NAN,
        },
        Annotation::Ripple {
            trace_index: 0,
            min: 2.0,
            max: 1.0,
        },
        Annotation::Ripple {
            trace_index: 0,
            min: 0.0,
            max: f64::INFINITY,
        },
        Annotation::EventMarkers {
            times: vec![(f64::NAN, "gate on".into())],
        },
    ];
    for a in cases {
        let fig = Figure::new("f").with_panel(base().with_annotation(a.clone()));
        let msg = render_svg(&fig).unwrap_err().to_string();
        assert!(msg.contains("'current'"), "{a:?}: {msg}");
    }
}

#[test]
fn bad_windows_and_sizes_are_errors() {
    let fig = || one(Trace::new("i", "A", vec![(0.0, 0.0), (1.0, 1.0)]));
    for (a, b) in [
        (1.0, 1.0),
        (2.0, 1.0),
        (f64::NAN, 1.0),
        (0.0, f64::INFINITY),
    ] {
        assert!(matches!(
            render_svg(&fig().with_window(a, b)),
            Err(PlotError::InvalidWindow { .. })
        ));
    }
    for (w, h) in [(0, 100), (100, 0), (60, 60), (300, 80), (100_000, 500)] {
        assert!(
            matches!(
                render_svg(&fig().with_size(w, h)),
                Err(PlotError::BadSize { .. })
            ),
            "{w}x{h}"
        );
    }
    let huge = one(Trace::new(
        "huge",
        "V",
        vec![(0.0, -f64::MAX), (1.0, f64::MAX)],
    ));
    assert!(matches!(
        render_svg(&huge),
        Err(PlotError::RangeTooWide { .. })
    ));
}

#[test]
fn io_errors_name_the_path() {
    let fig = one(Trace::new("i", "A", vec![(0.0, 0.0), (1.0, 1.0)]));
    let path = std::env::temp_dir()
        .join("fluxstep-plot-no-such-dir")
        .join("x.svg");
    let err = write_svg(&fig, &path).unwrap_err();
    assert!(
        err.to_string().contains("fluxstep-plot-no-such-dir"),
        "{err}"
    );
    assert!(std::error::Error::source(&err).is_some());
}

#[test]
fn awkward_but_valid_data_renders() {
    // Extreme magnitudes, tiny ripple on a large level, duplicate vertices.
    let cases = vec![
        vec![(0.0, 1e-18), (1e-12, 2e-18)],
        vec![(0.0, 5.0), (1.0, 5.0 + 1e-14), (2.0, 5.0)],
        vec![(0.0, 1.0), (0.0, 1.0), (0.0, 2.0), (1.0, 2.0), (1.0, 2.0)],
        vec![(-1e300, 0.0), (1e300, 1.0)],
        vec![(0.0, 1e300), (1.0, -1e300)],
    ];
    for pts in cases {
        let fig = one(Trace::new("odd", "V", pts.clone()));
        let svg = render_svg(&fig).unwrap_or_else(|e| panic!("{pts:?}: {e}"));
        assert_eq!(svg.matches("<polyline").count(), 1, "{pts:?}");
    }
}
