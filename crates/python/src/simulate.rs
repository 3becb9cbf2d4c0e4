//! `simulate`: a circuit run in slices between gate edges, so that Ctrl-C
//! is seen while the result stays bit-identical to a run in one call.

use std::sync::OnceLock;
use std::time::Instant;

use fluxstep_netlist::{Circuit, InterruptionPolicy, ShootThroughPolicy};
use fluxstep_solver::{OnInterruption, OnShootThrough, Options, Record, Simulator, SolverError};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use crate::circuit::circuit_arg;
use crate::errors::{output_error, solver_error, warn_stopped};
use crate::run::PyRun;

/// Wall time a slice of the run aims at between two looks for Ctrl-C (s).
const SLICE_SECONDS: f64 = 0.02;

/// The first gate edge at or after `target` (and before `stop`) that no
/// other edge precedes within a few units in the last place. The solver
/// schedules exactly these instants (the same `SignalShape::edges`), so a
/// run cut there and continued takes the same steps, with the same bits,
/// as a run in one call. Edges that nearly coincide are merged by the
/// solver at the earlier one, so the later one of such a pair is not a
/// cut. `None` when no edge lies in `[target, target + horizon)`.
fn edge_cut(circuit: &Circuit, target: f64, horizon: f64, stop: f64) -> Option<f64> {
    let from = target - horizon.min(target);
    let mut times: Vec<f64> = circuit
        .signals()
        .iter()
        .flat_map(|(_, s)| s.edges(from, target + horizon))
        .map(|e| e.time)
        .collect();
    times.sort_by(f64::total_cmp);
    times.dedup();
    let close = |a: f64, b: f64| (b - a) <= 16.0 * f64::EPSILON * b.abs().max(f64::MIN_POSITIVE);
    times
        .iter()
        .enumerate()
        .filter(|&(_, &t)| t >= target && t < stop && t > 0.0)
        .find(|&(i, &t)| i == 0 || !close(times[i - 1], t))
        .map(|(_, &t)| t)
}

/// The length of the first slice: 4,096 periods of the first periodic gate
/// (a few milliseconds of a simple converter; each cut costs a return from
/// the solver's lean driver and a look for signals, so short runs are
/// better cut rarely), or a sixteenth of the run.
fn first_slice(circuit: &Circuit, stop: f64) -> f64 {
    circuit
        .signals()
        .iter()
        .find_map(|(_, s)| s.period)
        .map(|p| 4096.0 * p)
        .unwrap_or(stop / 16.0)
        .min(stop)
}

/// Advances `sim` to `stop` in slices cut at gate edges, looking for
/// Ctrl-C (and other signals) between slices with the interpreter attached
/// only for that look. Returns the diagnostic that stopped the run, if any.
fn advance_sliced(
    circuit: &Circuit,
    sim: &mut Simulator,
    stop: f64,
) -> Result<Option<SolverError>, PyErr> {
    let mut slice = first_slice(circuit, stop);
    // How far past a slice's end to look for its cut: a few periods (the
    // edges of that stretch are generated and sorted at every cut).
    let horizon = circuit
        .signals()
        .iter()
        .find_map(|(_, s)| s.period)
        .map(|p| 4.0 * p)
        .unwrap_or(stop);
    loop {
        let t = sim.time();
        if t >= stop {
            return Ok(None);
        }
        let target = t + slice;
        let cut = if target < stop {
            edge_cut(circuit, target, horizon.min(slice), stop).unwrap_or(stop)
        } else {
            stop
        };
        let started = Instant::now();
        if let Err(e) = sim.advance_to(cut) {
            return Ok(Some(e));
        }
        let took = started.elapsed().as_secs_f64();
        // Grow or shrink the slice toward the wall time aimed at; the cut
        // instants do not change the result, only how often Ctrl-C is seen.
        let factor = if took > 0.0 {
            SLICE_SECONDS / took
        } else {
            4.0
        };
        slice *= factor.clamp(0.5, 4.0);
        if cut < stop {
            Python::attach(|py| py.check_signals())?;
        }
    }
}

/// Why a run could not start or go on.
enum Failure {
    Solver(SolverError),
    Output(String),
    Python(PyErr),
}

/// Where each `simulate` setting comes from: the argument, else the
/// circuit's run settings, else the solver's default.
struct Plan {
    stop: f64,
    opts: Options,
    outputs: Vec<String>,
}

#[allow(clippy::too_many_arguments)]
fn plan(
    circuit: &Circuit,
    stop: Option<f64>,
    record_from: Option<f64>,
    outputs: Option<Vec<String>>,
    on_interruption: Option<&str>,
    on_shoot_through: Option<&str>,
    max_events: Option<usize>,
    chatter_events: Option<usize>,
    chatter_window: Option<f64>,
) -> PyResult<Plan> {
    let cfg = circuit.run.as_ref();
    let stop = match (stop, cfg) {
        (Some(s), _) => s,
        (None, Some(c)) => c.stop_time,
        (None, None) => {
            return Err(PyValueError::new_err(
                "no stop time: give stop or a run.stop_time in the circuit",
            ))
        }
    };
    if !(stop > 0.0 && stop.is_finite()) {
        return Err(PyValueError::new_err(format!(
            "stop must be positive and finite, got {stop} s"
        )));
    }
    // The file's window belongs to the file's stop time: it applies only
    // while it starts before the stop asked for.
    let from = record_from.or(cfg.and_then(|c| c.record_from).filter(|&f| f < stop));
    let record = match from {
        None => Record::All,
        Some(f) if f >= 0.0 && f < stop => Record::Window { from: f, to: stop },
        Some(f) => {
            return Err(PyValueError::new_err(format!(
                "record_from must lie in [0, stop) = [0, {stop}) s, got {f} s"
            )))
        }
    };
    let on_interruption = match on_interruption {
        Some("stop") => OnInterruption::Stop,
        Some("conserve_flux") => OnInterruption::ConserveFlux,
        Some(other) => {
            return Err(PyValueError::new_err(format!(
                "on_interruption must be \"stop\" or \"conserve_flux\", got {other:?}"
            )))
        }
        None => match cfg.map(|c| c.on_interruption) {
            Some(InterruptionPolicy::ConserveFlux) => OnInterruption::ConserveFlux,
            _ => OnInterruption::Stop,
        },
    };
    let on_shoot_through = match on_shoot_through {
        Some("stop") => OnShootThrough::Stop,
        Some("record") => OnShootThrough::Record,
        Some(other) => {
            return Err(PyValueError::new_err(format!(
                "on_shoot_through must be \"stop\" or \"record\", got {other:?}"
            )))
        }
        None => match cfg.map(|c| c.on_shoot_through) {
            Some(ShootThroughPolicy::Record) => OnShootThrough::Record,
            _ => OnShootThrough::Stop,
        },
    };
    let d = Options::default();
    let opts = Options {
        record,
        on_interruption,
        on_shoot_through,
        max_events: max_events.unwrap_or(d.max_events),
        chatter_events: chatter_events.unwrap_or(d.chatter_events),
        chatter_window: chatter_window.unwrap_or(d.chatter_window),
        memory_budget: d.memory_budget,
        energy_tolerance: d.energy_tolerance,
    };
    let outputs = outputs
        .or_else(|| cfg.map(|c| c.outputs.clone()).filter(|o| !o.is_empty()))
        .unwrap_or_default();
    Ok(Plan {
        stop,
        opts,
        outputs,
    })
}

/// Runs the transient of ``circuit`` from its initial state to ``stop`` (s).
///
/// ``circuit`` is a :class:`Circuit` or anything :func:`load` reads (a dict,
/// JSON text, a path). Settings not given come from the circuit's ``run``
/// settings, else the solver's defaults: ``stop`` from ``run.stop_time``;
/// ``record_from`` (start of the recorded window, s) from
/// ``run.record_from`` when that lies before ``stop``, else the whole run
/// is recorded; ``outputs`` (the
/// outputs the summary measures) from ``run.outputs``, else every output;
/// ``on_interruption`` (``"stop"`` or ``"conserve_flux"``) and
/// ``on_shoot_through`` (``"stop"`` or ``"record"``) from the file, else
/// ``"stop"``; ``max_events`` (1e9), ``chatter_events`` (200) and
/// ``chatter_window`` (0: automatic, 2e-7 of the shortest gate period) as in the solver.
///
/// The result is the solver's, bit for bit. The run releases the GIL and
/// looks for Ctrl-C about every 20 ms (between slices that end on the
/// circuit's own gate edges, so the slicing changes no bit); Ctrl-C raises
/// KeyboardInterrupt. A run that stops on a diagnostic is not an error: the
/// returned :class:`Run` holds what was recorded up to the fault, its
/// ``stopped`` attribute the diagnostic (a :class:`SimulationError`), and a
/// :class:`StoppedRunWarning` is issued.
///
/// Raises CircuitError for a circuit that cannot be read, OutputError for
/// an unknown output name, SimulationError when the circuit cannot start
/// (e.g. an initial state no conduction pattern can hold), ValueError for
/// settings out of range.
#[pyfunction]
#[pyo3(signature = (circuit, stop=None, record_from=None, outputs=None, *, on_interruption=None,
    on_shoot_through=None, max_events=None, chatter_events=None, chatter_window=None))]
#[allow(clippy::too_many_arguments)]
pub fn simulate(
    py: Python<'_>,
    circuit: &Bound<'_, PyAny>,
    stop: Option<f64>,
    record_from: Option<f64>,
    outputs: Option<Vec<String>>,
    on_interruption: Option<&str>,
    on_shoot_through: Option<&str>,
    max_events: Option<usize>,
    chatter_events: Option<usize>,
    chatter_window: Option<f64>,
) -> PyResult<PyRun> {
    let c = circuit_arg(py, circuit)?;
    let plan = plan(
        &c,
        stop,
        record_from,
        outputs,
        on_interruption,
        on_shoot_through,
        max_events,
        chatter_events,
        chatter_window,
    )?;
    let stop_time = plan.stop;
    // Everything from compiling to the last slice runs detached from the
    // interpreter; the simulator never leaves this closure.
    let done = py.detach(|| -> Result<_, Failure> {
        let mut sim = Simulator::new(&c, plan.opts.clone()).map_err(Failure::Solver)?;
        let names = sim.waveform().output_names().to_vec();
        if let Some(o) = plan
            .outputs
            .iter()
            .find(|o| sim.waveform().output(o).is_err())
        {
            return Err(Failure::Output(format!(
                "unknown output {o:?}: an output is {}; this circuit has {}",
                fluxstep_netlist::OUTPUT_FORMS,
                names.join(", ")
            )));
        }
        // Room for the whole run at once, not grown slice by slice.
        sim.reserve_until(stop_time);
        let stopped = advance_sliced(&c, &mut sim, stop_time).map_err(Failure::Python)?;
        let outputs = if plan.outputs.is_empty() {
            names
        } else {
            plan.outputs
        };
        Ok((sim.finish(), stopped, outputs))
    });
    let (result, stopped, outputs) = match done {
        Ok(x) => x,
        Err(Failure::Solver(e)) => return Err(solver_error(py, e)),
        Err(Failure::Output(m)) => return Err(output_error(py, m)),
        Err(Failure::Python(e)) => return Err(e),
    };
    let run = PyRun {
        result,
        stopped,
        stop: stop_time,
        outputs,
        summary: OnceLock::new(),
    };
    if let Some(e) = &run.stopped {
        warn_stopped(
            py,
            &format!("the simulation stopped before its stop time: {e}"),
        )?;
    }
    Ok(run)
}

/// Seconds a plain Rust run of ``circuit`` to ``stop`` takes (compile,
/// advance in one call, finish; everything recorded), timed inside Rust.
/// A baseline for the bindings' benchmark: the time of :func:`simulate`
/// on the same circuit in the same process, divided by this, is the
/// Python call's overhead. Not part of the API.
#[pyfunction]
#[pyo3(name = "_plain_run_seconds")]
pub fn plain_run_seconds(py: Python<'_>, circuit: &Bound<'_, PyAny>, stop: f64) -> PyResult<f64> {
    let c = circuit_arg(py, circuit)?;
    let (took, result) = py.detach(|| {
        let started = Instant::now();
        let result = Simulator::new(&c, Options::default()).and_then(|mut sim| {
            sim.advance_to(stop)?;
            Ok(sim.finish())
        });
        (started.elapsed().as_secs_f64(), result)
    });
    // Dropped after the timing, as the Python result is.
    drop(result.map_err(|e| solver_error(py, e))?);
    Ok(took)
}
