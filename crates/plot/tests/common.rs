use fluxstep_plot::{Annotation, Figure, Panel, Trace};

/// Ten periods of a buck-like triangle between 1.8 A and 2.2 A over 50 µs,
/// rising for `duty` of each period: vertices only at the corners, as the
/// solver hands them over. A made-up scenario, not a measured converter.
pub fn triangle_current(periods: usize, period: f64, duty: f64) -> Vec<(f64, f64)> {
    let mut pts = Vec::new();
    for k in 0..periods {
        let t = k as f64 * period;
        pts.push((t, 1.8));
        pts.push((t + duty * period, 2.2));
    }
    pts.push((periods as f64 * period, 1.8));
    pts
}

/// The matching switch-node voltage: 12 V while the switch conducts, 0 V
/// while the diode freewheels, with vertical steps (two vertices per edge).
pub fn switch_node(periods: usize, period: f64, duty: f64) -> Vec<(f64, f64)> {
    let mut pts = Vec::new();
    for k in 0..periods {
        let t = k as f64 * period;
        let off = t + duty * period;
        pts.extend([(t, 0.0), (t, 12.0), (off, 12.0), (off, 0.0)]);
    }
    pts.push((periods as f64 * period, 0.0));
    pts
}

pub const PERIOD: f64 = 5e-6;
pub const DUTY: f64 = 0.4;

/// Gate edges of the made-up buck, for event markers.
pub fn gate_edges(periods: usize) -> Vec<(f64, String)> {
    let mut v = Vec::new();
    for k in 0..periods {
        let t = k as f64 * PERIOD;
        v.push((t, "gate on".to_string()));
        v.push((t + DUTY * PERIOD, "gate off".to_string()));
    }
    v
}

/// Current on top (with ripple, average and gate markers), switch node below.
pub fn buck_like() -> Figure {
    Figure::new("buck-like test waveforms, 200 kHz, 40 % duty")
        .with_size(960, 600)
        .with_panel(
            Panel::new("inductor current")
                .with_trace(Trace::new(
                    "inductor current",
                    "A",
                    triangle_current(10, PERIOD, DUTY),
                ))
                .with_annotation(Annotation::Ripple {
                    trace_index: 0,
                    min: 1.8,
                    max: 2.2,
                })
                .with_annotation(Annotation::Average {
                    trace_index: 0,
                    value: 2.0,
                })
                .with_annotation(Annotation::EventMarkers {
                    times: gate_edges(10),
                }),
        )
        .with_panel(Panel::new("switch node").with_trace(Trace::new(
            "switch-node voltage",
            "V",
            switch_node(10, PERIOD, DUTY),
        )))
}
