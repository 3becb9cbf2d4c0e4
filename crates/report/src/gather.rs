//! Asking the analyses: the periodic steady state (or a transient window
//! when there is none), measurements, losses, junction temperatures, loop
//! gains and an optional sweep. Findings about the circuit are kept as
//! facts for the page; only what makes a page impossible is an error.

use fluxstep_analysis::losses::thermal::{
    junction_temperature_of, JunctionTemperature, ThermalStart,
};
use fluxstep_analysis::losses::{breakdown, has_loss_data, loads, LossOptions, LossReport};
use fluxstep_analysis::response::{log_frequencies, loop_gain, BreakPoint, LoopGain};
use fluxstep_analysis::steady::{find, SteadyOptions, SteadyState};
use fluxstep_analysis::sweep::{RunOptions, Summary, Sweep};
use fluxstep_netlist::{Circuit, Element};
use fluxstep_solver::measure::{measure, Measurement};
use fluxstep_solver::{Options, Record, RunResult, Simulator, SolverError};

use crate::{ReportError, ReportOptions};

/// Where the operating point comes from.
pub(crate) enum Basis {
    /// The periodic steady state.
    Steady(Box<SteadyState>),
    /// A transient window: why there is no steady state, and the
    /// diagnostic that stopped the run, if one did.
    Transient {
        run: Box<RunResult>,
        why: String,
        stopped: Option<SolverError>,
    },
}

/// One closed loop's gain, or why it could not be computed.
pub(crate) struct Loop {
    pub name: String,
    pub at: String,
    pub gain: Result<LoopGain, String>,
}

/// Everything the page shows.
pub(crate) struct Facts {
    pub basis: Basis,
    /// The window the numbers cover: one period, or the transient window.
    pub window: (f64, f64),
    pub period: Option<f64>,
    /// Outputs of the figure.
    pub outputs: Vec<String>,
    /// Measurements over the window of the figure's outputs.
    pub measurements: Vec<Measurement>,
    /// Each inductor (by name) and its current's measurement.
    pub inductors: Vec<(String, Measurement)>,
    /// Each switch, diode and body diode: current and voltage measurements.
    pub stress: Vec<(String, Option<Measurement>, Option<Measurement>)>,
    /// The ripple output's measurement, if that node exists.
    pub ripple: Option<Measurement>,
    /// Zoom instants for the figure.
    pub zoom: Vec<f64>,
    pub losses: Result<LossReport, String>,
    /// Whether any part has a loss field (else the loss section says so).
    pub loss_data: bool,
    pub loads: Vec<String>,
    pub junctions: Vec<Result<JunctionTemperature, String>>,
    pub loops: Vec<Loop>,
    pub sweep: Option<Result<Summary, String>>,
    /// The sweep file's plots that could be drawn, in its order.
    pub sweep_plots: Vec<fluxstep_plot::Figure>,
}

impl Facts {
    pub fn run(&self) -> &RunResult {
        match &self.basis {
            Basis::Steady(ss) => &ss.run,
            Basis::Transient { run, .. } => run,
        }
    }
}

/// The report's outputs: the file's `run.outputs`, else the first
/// inductor current, `sw` and `out` where they exist.
fn outputs(c: &Circuit) -> Vec<String> {
    if let Some(o) = c
        .run
        .as_ref()
        .map(|r| r.outputs.clone())
        .filter(|o| !o.is_empty())
    {
        return o;
    }
    let mut v = vec![];
    if let Some(l) = c
        .elements
        .iter()
        .find(|e| matches!(e, Element::Inductor(_)))
    {
        v.push(format!("{}.current", l.name()));
    }
    for n in ["sw", "out"] {
        if c.nodes().iter().any(|x| x == n) {
            v.push(n.into());
        }
    }
    v
}

/// A transient per the file's run settings, recording `[from, stop]`.
fn transient(c: &Circuit, period: Option<f64>) -> Result<(RunResult, Option<SolverError>), String> {
    let Some(run) = &c.run else {
        return Err("the file has no run settings for a transient".into());
    };
    let stop = run.stop_time;
    let from = run
        .record_from
        .unwrap_or_else(|| period.map(|p| (stop - 5.0 * p).max(0.0)).unwrap_or(0.0));
    let opts = Options {
        record: Record::Window { from, to: stop },
        on_interruption: match run.on_interruption {
            fluxstep_netlist::InterruptionPolicy::ConserveFlux => {
                fluxstep_solver::OnInterruption::ConserveFlux
            }
            _ => fluxstep_solver::OnInterruption::Stop,
        },
        on_shoot_through: match run.on_shoot_through {
            fluxstep_netlist::ShootThroughPolicy::Record => fluxstep_solver::OnShootThrough::Record,
            _ => fluxstep_solver::OnShootThrough::Stop,
        },
        ..Options::default()
    };
    let mut sim = Simulator::new(c, opts).map_err(|e| e.to_string())?;
    let stopped = sim.advance_to(stop).err();
    Ok((sim.finish(), stopped))
}

pub(crate) fn gather(c: &Circuit, opts: &ReportOptions) -> Result<Facts, ReportError> {
    let period = fluxstep_analysis::steady::period(c).ok();
    let steady_opts = SteadyOptions {
        record_periods: 2,
        ..SteadyOptions::default()
    };
    let basis = basis(c, period, &steady_opts)?;
    let (window, events) = match &basis {
        Basis::Steady(ss) => ((ss.start_time, ss.end_time()), &ss.run.events),
        Basis::Transient { run, why, .. } => (
            run.waveform.span().ok_or_else(|| {
                ReportError::Nothing(format!(
                    "no periodic steady state ({why}) and the transient recorded nothing"
                ))
            })?,
            &run.events,
        ),
    };
    let run = match &basis {
        Basis::Steady(ss) => &ss.run,
        Basis::Transient { run, .. } => run,
    };
    let w = &run.waveform;
    let (a, b) = window;
    let m = |name: &str| -> Option<Measurement> {
        let id = w.output(name).ok()?;
        measure(w, id, a, b).ok()
    };
    let outputs: Vec<String> = outputs(c)
        .into_iter()
        .filter(|o| w.output(o).is_ok())
        .collect();
    let measurements = outputs.iter().filter_map(|o| m(o)).collect();
    let (inductors, stress, junction_parts) = parts(c, &m);
    let ripple_node = c
        .run
        .as_ref()
        .and_then(|r| r.limits.as_ref())
        .map(|l| l.ripple_output().to_string())
        .unwrap_or_else(|| "out".into());
    let ripple = m(&ripple_node);
    let zoom = zoom(events, a, b, period);
    let loads = loads(c);
    let loss_data = has_loss_data(c, &loads);
    let losses = breakdown(
        c,
        w,
        events,
        a,
        b,
        &LossOptions {
            loads: loads.clone(),
        },
    )
    .map_err(|e| e.to_string());
    let start = match &basis {
        Basis::Steady(_) => ThermalStart::Periodic,
        Basis::Transient { .. } => ThermalStart::Ambient,
    };
    let junctions = junction_parts
        .iter()
        .map(|p| {
            junction_temperature_of(c, w, events, p, a, b, start).map_err(|e| format!("{p}: {e}"))
        })
        .collect();
    let loops = loops(c, opts, period)?;
    let (sweep, sweep_plots) = sweep(opts);
    Ok(Facts {
        window,
        period,
        outputs,
        measurements,
        inductors,
        stress,
        ripple,
        zoom,
        losses,
        loss_data,
        loads,
        junctions,
        loops,
        sweep,
        sweep_plots,
        basis,
    })
}

/// The basis of the page: the periodic steady state, or where there is
/// none, the transient of the file's run settings.
fn basis(
    c: &Circuit,
    period: Option<f64>,
    steady_opts: &SteadyOptions,
) -> Result<Basis, ReportError> {
    Ok(match find(c, steady_opts) {
        Ok(ss) => Basis::Steady(Box::new(ss)),
        Err(e) => {
            let why = e.to_string();
            let (run, stopped) = transient(c, period).map_err(|t| {
                ReportError::Nothing(format!("no periodic steady state ({why}); {t}"))
            })?;
            Basis::Transient {
                run: Box::new(run),
                why,
                stopped,
            }
        }
    })
}

/// A switch, diode or body diode: its name and the measurements of its
/// current and voltage.
type Stress = (String, Option<Measurement>, Option<Measurement>);

/// The measured inductor currents, the stress on each switch, body diode
/// and diode, and the parts with a thermal network.
fn parts(
    c: &Circuit,
    m: &dyn Fn(&str) -> Option<Measurement>,
) -> (Vec<(String, Measurement)>, Vec<Stress>, Vec<String>) {
    let mut inductors = vec![];
    let mut stress = vec![];
    let mut junction_parts = vec![];
    for e in &c.elements {
        match e {
            Element::Inductor(l) => {
                if let Some(x) = m(&format!("{}.current", l.name)) {
                    inductors.push((l.name.clone(), x));
                }
            }
            Element::Switch(s) => {
                stress.push((
                    s.name.clone(),
                    m(&format!("{}.current", s.name)),
                    m(&format!("{}.voltage", s.name)),
                ));
                if s.body_diode.is_some() {
                    let d = format!("{}.body_diode", s.name);
                    stress.push((
                        d.clone(),
                        m(&format!("{d}.current")),
                        m(&format!("{d}.voltage")),
                    ));
                }
                if s.thermal.is_some() {
                    junction_parts.push(s.name.clone());
                }
            }
            Element::Diode(d) => {
                stress.push((
                    d.name.clone(),
                    m(&format!("{}.current", d.name)),
                    m(&format!("{}.voltage", d.name)),
                ));
                if d.thermal.is_some() {
                    junction_parts.push(d.name.clone());
                }
            }
            _ => {}
        }
    }
    (inductors, stress, junction_parts)
}

/// The instants to zoom on in the waveform figure.
fn zoom(events: &fluxstep_solver::EventLog, a: f64, b: f64, period: Option<f64>) -> Vec<f64> {
    // Zoom on the first turn-off of a switch and of a diode in the window:
    // the dead time or the commutation a reviewer looks at closely.
    let mut zoom: Vec<f64> = vec![];
    for kind in [
        fluxstep_solver::EventKind::SwitchOff,
        fluxstep_solver::EventKind::DiodeOff,
    ] {
        if let Some(e) = events.of_kind(kind).find(|e| e.time > a && e.time < b) {
            let span = period.unwrap_or(b - a) / 50.0;
            if zoom.iter().all(|z| (z - e.time).abs() > span) {
                zoom.push(e.time);
            }
        }
    }
    zoom
}

/// The loop gains of the circuit.
fn loops(c: &Circuit, opts: &ReportOptions, period: Option<f64>) -> Result<Vec<Loop>, ReportError> {
    // Loops: each compensator (broken at its input), and each closed-loop
    // gate whose sense is not a compensator's output.
    let mut points = vec![];
    for k in &c.compensators {
        points.push((
            k.name.clone(),
            format!("the input of compensator {}", k.name),
        ));
    }
    for g in &c.gates {
        if let Some(spec) = g.comparator() {
            let by_compensator = c
                .compensators
                .iter()
                .any(|k| spec.sense == format!("{}.output", k.name));
            if !by_compensator {
                points.push((
                    g.name().to_string(),
                    format!("the sense input of gate {}", g.name()),
                ));
            }
        }
    }
    let mut loops = vec![];
    if let (false, Some(p)) = (points.is_empty(), period) {
        let n = if opts.loop_points == 0 {
            80
        } else {
            opts.loop_points
        };
        let freqs = log_frequencies(10.0, 0.5 / p, n)?;
        for (name, at) in points {
            let gain = BreakPoint::named(c, &name)
                .and_then(|bp| loop_gain(c, &bp, &freqs, &SteadyOptions::default()))
                .map_err(|e| e.to_string());
            loops.push(Loop { name, at, gain });
        }
    }
    Ok(loops)
}

/// The sweep's summary and plots, when the options name a sweep file.
fn sweep(opts: &ReportOptions) -> (Option<Result<Summary, String>>, Vec<fluxstep_plot::Figure>) {
    let mut sweep_plots = vec![];
    let sweep = opts.sweep.as_ref().map(|path| {
        let s = Sweep::from_file(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let table = s
            .run(&RunOptions::default())
            .map_err(|e| format!("{}: {e}", path.display()))?;
        sweep_plots = crate::sweep_plots::plots(&table)
            .into_iter()
            .filter_map(|(_, f)| f)
            .collect();
        Ok(Summary::of(&table))
    });
    (sweep, sweep_plots)
}
