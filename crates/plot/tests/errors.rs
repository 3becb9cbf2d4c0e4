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

/// Small deterministic generator so the sweep below is reproducible.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

#[test]
fn random_figures_never_panic_and_keep_one_polyline_per_trace() {
    let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
    let mut rendered = 0;
    let specials = [f64::NAN, f64::INFINITY, 0.0, -0.0, 1e308, -1e308, 5e-324];
    for case in 0..400 {
        let mut fig = Figure::new(format!("case {case}"))
            .with_size(40 + rng.below(1500) as u32, 40 + rng.below(1200) as u32);
        let panels = if rng.below(20) == 0 {
            0
        } else {
            1 + rng.below(3)
        };
        for p in 0..panels {
            let mut panel = Panel::new(format!("p{p}"));
            let unit = ["A", "V", "W", ""][rng.below(4) as usize];
            let traces = if rng.below(20) == 0 {
                0
            } else {
                1 + rng.below(2)
            };
            for t in 0..traces {
                let n = rng.below(60) as usize;
                let scale = 10f64.powi(rng.below(60) as i32 - 30);
                let mut time = rng.unit() * scale - 0.5 * scale;
                let mut pts = Vec::with_capacity(n);
                for _ in 0..n {
                    if rng.below(5) > 0 {
                        time += rng.unit() * scale;
                    }
                    if rng.below(500) == 0 {
                        time -= scale;
                    }
                    let mut v = (rng.unit() - 0.5) * 10f64.powi(rng.below(40) as i32 - 20);
                    if rng.below(400) == 0 {
                        v = specials[rng.below(specials.len() as u64) as usize];
                    }
                    pts.push((time, v));
                }
                panel = panel.with_trace(Trace::new(format!("t{t}"), unit, pts));
            }
            if rng.below(3) == 0 {
                let a = rng.unit();
                panel = panel.with_annotation(Annotation::Ripple {
                    trace_index: rng.below(3) as usize,
                    min: a,
                    max: a + rng.unit(),
                });
            }
            if rng.below(3) == 0 {
                let times = (0..rng.below(30))
                    .map(|k| (rng.unit() * 1e-5, format!("k{}", k % 3)))
                    .collect();
                panel = panel.with_annotation(Annotation::EventMarkers { times });
            }
            fig = fig.with_panel(panel);
        }
        if rng.below(3) == 0 {
            let a = (rng.unit() - 0.5) * 1e-4;
            fig = fig.with_window(a, a + rng.unit() * 1e-4);
        }
        let traces: usize = fig.panels.iter().map(|p| p.traces.len()).sum();
        if let Ok(svg) = render_svg(&fig) {
            roxmltree::Document::parse(&svg).unwrap_or_else(|e| panic!("case {case}: {e}"));
            assert_eq!(svg.matches("<polyline").count(), traces, "case {case}");
            rendered += 1;
        }
    }
    // The sweep is only worth its time if a good share of cases get drawn.
    assert!(rendered > 100, "only {rendered} of 400 cases rendered");
}
