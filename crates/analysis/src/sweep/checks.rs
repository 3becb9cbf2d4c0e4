//! The checks of [`Sweep::new`](super::Sweep::new), one per part of the
//! spec, in the order their errors are reported: the grid, the Monte
//! Carlo tolerances, the figures, the run length and window, the plots.

use serde_json::Value;

use fluxstep_netlist::Circuit;
use fluxstep_solver::{Options, Record, Simulator};

use super::path::{self, Resolved};
use super::spec::{Figure, Margin, Measure, PlotSpec, SweepSpec, Window, WindowFigure};
use super::table::{Column, TableMeta};
use super::{
    expand, figure_unit, fingerprint, point, FigureKind, GridParam, Length, SweepError, Tol,
    DEFAULT_WINDOW_PERIODS,
};

/// The grid parameters: each path resolved once, its values expanded.
pub(super) fn grid(spec: &SweepSpec, base: &Value) -> Result<Vec<GridParam>, SweepError> {
    let invalid = |field: String, message: String| SweepError::Invalid { field, message };

    let mut grid: Vec<GridParam> = vec![];
    for (i, p) in spec.parameters.iter().enumerate() {
        let path = path::resolve(base, &p.path)?;
        if grid.iter().any(|g| g.path.text == p.path) {
            return Err(invalid(
                format!("parameters[{i}].path"),
                format!("{:?} is swept twice", p.path),
            ));
        }
        let nominal = path.get(base).expect("resolved paths end at a number");
        let values = expand(&p.values, nominal)
            .map_err(|m| invalid(format!("parameters[{i}].values"), m))?;
        grid.push(GridParam { path, values });
    }
    Ok(grid)
}

/// The Monte Carlo tolerances, the samples per grid point and the seed
/// (one sample and seed 0 without Monte Carlo).
pub(super) fn tolerances(
    spec: &SweepSpec,
    base: &Value,
) -> Result<(Vec<Tol>, u64, u64), SweepError> {
    let invalid = |field: String, message: String| SweepError::Invalid { field, message };

    let (mut tolerances, mut samples, mut seed) = (vec![], 1, 0);
    if let Some(mc) = &spec.monte_carlo {
        if mc.samples < 1 {
            return Err(invalid(
                "monte_carlo.samples".into(),
                format!("must be at least 1, got {}", mc.samples),
            ));
        }
        samples = mc.samples as u64;
        seed = mc.seed;
        for (i, t) in mc.tolerances.iter().enumerate() {
            let path = path::resolve(base, &t.path)?;
            if tolerances.iter().any(|x: &Tol| x.path.text == t.path) {
                return Err(invalid(
                    format!("monte_carlo.tolerances[{i}].path"),
                    format!("{:?} has two tolerances", t.path),
                ));
            }
            point::check_distribution(&t.distribution)
                .map_err(|m| invalid(format!("monte_carlo.tolerances[{i}].distribution"), m))?;
            tolerances.push(Tol {
                path,
                distribution: t.distribution.clone(),
                absolute: t.absolute,
            });
        }
    }
    Ok((tolerances, samples, seed))
}

/// The figures, each checked against the outputs and elements of the base
/// circuit, with their kinds.
pub(super) fn figures(
    spec: &SweepSpec,
    circuit: &Circuit,
    columns: &[Resolved],
) -> Result<(Vec<WindowFigure>, Vec<FigureKind>), SweepError> {
    let invalid = |field: String, message: String| SweepError::Invalid { field, message };

    // Outputs and elements the figures may name, from the base circuit.
    let sim = Simulator::new(
        circuit,
        Options {
            record: Record::Nothing,
            ..Options::default()
        },
    )
    .map_err(|e| SweepError::Compile(e.to_string()))?;
    let outputs = sim.waveform().output_names().to_vec();
    drop(sim);
    if spec.figures.is_empty() {
        return Err(invalid("figures".into(), "name at least one figure".into()));
    }
    let mut figures = vec![];
    let mut kinds = vec![];
    for (i, f) in spec.figures.iter().enumerate() {
        // A loop figure is checked as a figure of its own; window and
        // steady figures name an output (or an element for power).
        let owned;
        let wf = match f {
            Figure::Window(w) | Figure::Steady(w) => {
                kinds.push(if matches!(f, Figure::Window(_)) {
                    FigureKind::Window
                } else {
                    FigureKind::Steady
                });
                w
            }
            Figure::Loop(l) => {
                crate::response::BreakPoint::named(circuit, &l.at)
                    .map_err(|e| invalid(format!("figures[{i}].at"), e.to_string()))?;
                if l.points == 0 || !(l.from > 0.0 && l.from.is_finite()) {
                    return Err(invalid(
                        format!("figures[{i}]"),
                        "a loop figure needs from > 0 Hz and at least one point".into(),
                    ));
                }
                kinds.push(FigureKind::Loop(l.clone()));
                owned = WindowFigure {
                    name: l.name.clone(),
                    of: String::new(),
                    measure: Measure::Average,
                    worst: l.worst,
                };
                &owned
            }
        };
        let field = format!("figures[{i}]");
        if wf.name.is_empty()
            || matches!(wf.name.as_str(), "point" | "sample" | "status" | "message")
            || columns.iter().any(|c| c.text == wf.name)
            || figures.iter().any(|g: &WindowFigure| g.name == wf.name)
        {
            return Err(invalid(
                format!("{field}.name"),
                format!(
                    "{:?} must be unique and differ from the parameter paths and the columns point, sample, status and message",
                    wf.name
                ),
            ));
        }
        let known = if matches!(kinds.last(), Some(FigureKind::Loop(_))) {
            true
        } else if wf.measure == Measure::Power {
            outputs.contains(&format!("{}.current", wf.of))
                || outputs
                    .iter()
                    .any(|o| o.starts_with(&format!("{}.", wf.of)) && o.ends_with(".current"))
        } else {
            outputs.contains(&wf.of)
        };
        if !known {
            let what = if wf.measure == Measure::Power {
                "an element"
            } else {
                "an output"
            };
            return Err(invalid(
                format!("{field}.of"),
                format!(
                    "{:?} is not {what} of the circuit; outputs: {}",
                    wf.of,
                    outputs.join(", ")
                ),
            ));
        }
        figures.push(wf.clone());
    }
    Ok((figures, kinds))
}

/// The run length (periods or a stop time) and the measurement window.
pub(super) fn length_and_window(
    spec: &SweepSpec,
    circuit: &Circuit,
) -> Result<(Length, Window), SweepError> {
    let invalid = |field: String, message: String| SweepError::Invalid { field, message };

    let period = circuit.signals().iter().find_map(|(_, s)| s.period);
    let sim_spec = &spec.simulation;
    let run_stop = circuit.run.as_ref().map(|r| r.stop_time);
    let length = match (sim_spec.periods, sim_spec.stop_time, run_stop) {
        (Some(_), Some(_), _) => {
            return Err(invalid(
                "simulation".into(),
                "give periods or stop_time, not both".into(),
            ))
        }
        (Some(0), None, _) => {
            return Err(invalid(
                "simulation.periods".into(),
                "must be at least 1".into(),
            ))
        }
        (Some(n), None, _) => {
            if period.is_none() {
                return Err(invalid(
                    "simulation.periods".into(),
                    "the circuit has no periodic gate to count periods by; give stop_time".into(),
                ));
            }
            Length::Periods(n)
        }
        (None, Some(t), _) | (None, None, Some(t)) => {
            if t.is_nan() || t <= 0.0 {
                return Err(invalid(
                    "simulation.stop_time".into(),
                    format!("must be positive, got {t}"),
                ));
            }
            Length::Stop(t)
        }
        (None, None, None) => {
            return Err(invalid(
                "simulation".into(),
                "give periods or stop_time (the circuit has no run.stop_time either)".into(),
            ))
        }
    };
    let window = match &sim_spec.window {
        Some(w) => w.clone(),
        None => Window::LastPeriods {
            count: DEFAULT_WINDOW_PERIODS,
        },
    };
    match (&window, length) {
        (Window::LastPeriods { count: 0 }, _) => {
            return Err(invalid(
                "simulation.window.count".into(),
                "must be at least 1".into(),
            ))
        }
        (Window::LastPeriods { .. }, _) if period.is_none() => {
            return Err(invalid(
                "simulation.window".into(),
                "the circuit has no periodic gate: give a window of kind span".into(),
            ))
        }
        (Window::LastPeriods { count }, Length::Periods(n)) if *count > n => {
            return Err(invalid(
                "simulation.window.count".into(),
                format!("{count} periods do not fit in a run of {n}"),
            ))
        }
        (Window::Span { from, to }, _) if !(from < to && *from >= 0.0) => {
            return Err(invalid(
                "simulation.window".into(),
                format!("need 0 <= from < to, got [{from}, {to}]"),
            ))
        }
        (Window::Span { to, .. }, Length::Stop(t)) if *to > t => {
            return Err(invalid(
                "simulation.window.to".into(),
                format!("{to} s is after the end of the run, {t} s"),
            ))
        }
        _ => {}
    }
    Ok((length, window))
}

/// Each plot names a figure and parameters of this sweep.
pub(super) fn plots(
    spec: &SweepSpec,
    figures: &[WindowFigure],
    columns: &[Resolved],
) -> Result<(), SweepError> {
    let invalid = |field: String, message: String| SweepError::Invalid { field, message };

    for (i, plot) in spec.plots.iter().enumerate() {
        let (figure, params) = match plot {
            PlotSpec::Lines { figure, x, lines } => {
                (figure, std::iter::once(x).chain(lines).collect::<Vec<_>>())
            }
            PlotSpec::Histogram { figure, bins } => {
                if bins.is_some_and(|b| b == 0) {
                    return Err(invalid(
                        format!("plots[{i}].bins"),
                        "must be at least 1".into(),
                    ));
                }
                (figure, vec![])
            }
        };
        if !figures.iter().any(|f| f.name == *figure) {
            return Err(invalid(
                format!("plots[{i}].figure"),
                format!("{figure:?} is not a figure of this sweep"),
            ));
        }
        for p in params {
            if !columns.iter().any(|c| c.text == *p) {
                return Err(invalid(
                    format!("plots[{i}]"),
                    format!("{p:?} is not a parameter of this sweep"),
                ));
            }
        }
    }
    Ok(())
}

/// The table's header: plots, fingerprint, point count and columns.
pub(super) fn table_meta(
    spec: &SweepSpec,
    base: &Value,
    points: u64,
    columns: &[Resolved],
    figures: &[WindowFigure],
    kinds: &[FigureKind],
) -> TableMeta {
    TableMeta {
        plots: spec.plots.clone(),
        fingerprint: fingerprint(spec, base),
        points,
        monte_carlo: spec.monte_carlo.is_some(),
        parameters: columns
            .iter()
            .map(|c| Column {
                name: c.text.clone(),
                unit: c.unit.to_string(),
                worst: None,
            })
            .collect(),
        figures: figures
            .iter()
            .zip(kinds)
            .map(|(f, k)| Column {
                name: f.name.clone(),
                unit: match k {
                    FigureKind::Loop(l) => match l.margin {
                        Margin::CrossoverHz => "Hz",
                        Margin::PhaseMarginDeg => "°",
                        Margin::GainMarginDb => "dB",
                    },
                    _ => figure_unit(f),
                }
                .to_string(),
                worst: Some(f.worst),
            })
            .collect(),
    }
}
