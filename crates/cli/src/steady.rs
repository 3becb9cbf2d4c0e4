//! `fluxstep steady FILE`: find the periodic steady state of a circuit by
//! shooting and write `waveform.csv` (one period), `events.json`,
//! `summary.json` (state at period start by name, measurements, Floquet
//! multipliers, iterations, residual) and `figure.svg` (two periods); print
//! a summary with units.

use std::path::PathBuf;

use anyhow::Context;
use fluxstep_analysis::steady::{find, Reading, SteadyOptions, SteadyState};
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::si::{format_si_digits, format_si_short};
use fluxstep_netlist::Circuit;
use fluxstep_plot::{review_figure, write_svg, ReviewOptions};
use fluxstep_solver::measure::Measurement;

use crate::compare::TimingFailed;
use crate::run::Stopped;

use crate::run::{measurement_rows, write_csv, write_failed};

/// Arguments of `fluxstep steady`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The circuit file (JSON, see docs/netlist.md).
    pub file: PathBuf,
    /// Outputs for the CSV and figure, comma-separated; default: the file's
    /// `run.outputs`, else the first inductor current, `sw` and `out`.
    #[arg(long, value_delimiter = ',')]
    pub outputs: Vec<String>,
    /// Output folder; default `out/<file stem>-steady`.
    #[arg(long)]
    pub dir: Option<PathBuf>,
    /// Newton stops when no state changes over a period by more than this
    /// fraction of its scale.
    #[arg(long, default_value_t = 1e-12)]
    pub tolerance: f64,
    /// Most Newton iterations.
    #[arg(long, default_value_t = 50)]
    pub max_iterations: usize,
    /// Periods of plain transient before the first Newton iterate.
    #[arg(long, default_value_t = 0)]
    pub settle: u64,
    /// Find a fixed point over this many periods (2: a period-two orbit).
    #[arg(long, default_value_t = 1)]
    pub period_multiple: u64,
    /// Points of the uniform grid in the CSV (event instants are always added).
    #[arg(long, default_value_t = 1000, value_parser = crate::run::grid_points)]
    pub grid: usize,
}

/// The unit of a state by its name (`L1.current` in A, `C1.voltage` in V;
/// oscillator and compensator states have none).
fn state_unit(name: &str) -> &'static str {
    if name.ends_with(".current") {
        "A"
    } else if name.ends_with(".voltage") {
        "V"
    } else {
        ""
    }
}

fn words(r: Reading) -> &'static str {
    match r {
        Reading::Stable => "stable",
        Reading::Slow => "slow mode",
        Reading::Unstable => "unstable",
        Reading::PeriodDoubling => "unstable: period doubling",
    }
}

/// Finds the steady state and writes the four files.
///
/// # Errors
///
/// Bad input or a circuit without a steady state: an ordinary error (exit
/// 2). A solver diagnostic on the orbit, or no convergence: [`Stopped`]-like
/// (exit 1).
pub fn run(args: &Args) -> anyhow::Result<()> {
    let circuit = crate::input::read_circuit(&args.file)?;
    let opts = SteadyOptions {
        tolerance: args.tolerance,
        max_iterations: args.max_iterations,
        settle_periods: args.settle,
        period_multiple: args.period_multiple,
        record_periods: 2,
        ..SteadyOptions::default()
    };
    let ss = match find(&circuit, &opts) {
        Ok(ss) => ss,
        Err(AnalysisError::Solver(e)) => return Err(anyhow::Error::new(Stopped(e))),
        Err(e @ AnalysisError::NotConverged { .. }) => {
            return Err(anyhow::Error::new(NotFound(e.to_string())))
        }
        Err(e) => return Err(e.into()),
    };
    let w = &ss.run.waveform;
    let outputs = output_names(args, &circuit);
    let mut ids = vec![];
    for o in &outputs {
        ids.push(w.output(o).with_context(|| {
            format!(
                "unknown output {o:?}; the outputs are {}",
                w.output_names().join(", ")
            )
        })?);
    }
    let stem = args
        .file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "circuit".into());
    let dir = args
        .dir
        .clone()
        .unwrap_or_else(|| PathBuf::from("out").join(format!("{stem}-steady")));
    crate::run::create_folder(&dir)?;

    // One period in the CSV: event instants plus a uniform grid.
    let (a, b) = (ss.start_time, ss.end_time());
    let times = crate::run::csv_times(w, a, b, args.grid);
    write_csv(&dir.join("waveform.csv"), &outputs, times, |t, row| {
        row.extend(ids.iter().map(|id| w.value(*id, t).ok()));
    })?;
    let write = |name: &str, text: String| {
        let path = dir.join(name);
        std::fs::write(&path, text).map_err(write_failed(&path))
    };
    // The events of the first period only.
    let events: Vec<_> = ss
        .run
        .events
        .iter()
        .filter(|e| e.time >= a && e.time < b)
        .map(|e| e.to_event())
        .collect();
    write("events.json", serde_json::to_string_pretty(&events)? + "\n")?;
    let measurements = ss.measurements();
    let state: serde_json::Map<String, serde_json::Value> = ss
        .state_names
        .iter()
        .zip(&ss.state)
        .map(|(n, v)| (n.clone(), serde_json::json!(v)))
        .collect();
    let timing = timing(&circuit, &ss)?;
    let mut summary = serde_json::json!({
        "file": args.file.display().to_string(),
        "period": ss.period,
        "start_time": ss.start_time,
        "state_at_period_start": state,
        "residual": ss.residual,
        "newton_steps": ss.newton_steps(),
        "iterations": ss.iterations,
        "stable": ss.is_stable(),
        "multipliers": ss.multipliers,
        "measurements": measurements,
        "certificate": crate::losses::certificate_json(&ss.run.certificate),
    });
    let losses = crate::losses::section(
        &circuit,
        w,
        &ss.run.events,
        (a, b),
        true,
        &format!("{stem}: periodic steady state"),
    );
    summary["losses"] = losses.json.clone();
    if let Some(svg) = &losses.chart {
        write("losses.svg", svg.clone())?;
    }
    let violated = timing.and_then(|(value, err)| {
        summary["timing"] = value;
        err
    });
    write(
        "summary.json",
        serde_json::to_string_pretty(&summary)? + "\n",
    )?;
    let fig = review_figure(
        &format!("{stem}: periodic steady state"),
        w,
        Some(&ss.run.events),
        &ReviewOptions {
            outputs: outputs.clone(),
            period: Some(ss.period),
            ..ReviewOptions::default()
        },
    )?;
    write_svg(&fig, dir.join("figure.svg"))?;

    print_orbit(&stem, &ss, &outputs, &measurements);
    print!("{}", crate::losses::certificate_line(&ss.run.certificate));
    losses.print_with_files(&dir);
    // A violated timing rule or a failed energy balance exits 1 once every
    // file is written.
    match (violated, losses.failed) {
        (Some(e), _) => Err(anyhow::Error::new(e)),
        (None, Some(f)) => Err(anyhow::Error::new(f)),
        (None, None) => Ok(()),
    }
}

/// The outputs to write: those of the command line, else the file's, else
/// the default ones.
fn output_names(args: &Args, circuit: &Circuit) -> Vec<String> {
    let mut outputs: Vec<String> = if args.outputs.is_empty() {
        circuit
            .run
            .as_ref()
            .map(|c| c.outputs.clone())
            .unwrap_or_default()
    } else {
        args.outputs.clone()
    };
    if outputs.is_empty() {
        outputs = crate::run::default_outputs(circuit);
    }
    outputs
}

/// The file's timing rules over the recorded orbit (two periods): the
/// `timing` entry of the summary and the error of a violated rule. Rules
/// with a time window concern the transient (start-up, a load step) and
/// are left to `fluxstep run`.
fn timing(
    circuit: &Circuit,
    ss: &SteadyState,
) -> anyhow::Result<Option<(serde_json::Value, Option<TimingFailed>)>> {
    let rules: Vec<_> = circuit
        .run
        .as_ref()
        .map(|r| {
            r.timing
                .iter()
                .filter(|t| t.from.is_none() && t.to.is_none())
                .cloned()
                .collect()
        })
        .unwrap_or_default();
    Ok(if rules.is_empty() {
        None
    } else {
        Some(crate::compare::timing_summary(
            &fluxstep_analysis::timing::check(
                &rules,
                &ss.run.events,
                Some(&ss.run.waveform),
                Some(ss.period),
            )?,
        ))
    })
}

/// Prints the orbit: period, state at period start, the measurements,
/// stability and the Floquet multipliers.
fn print_orbit(stem: &str, ss: &SteadyState, outputs: &[String], measurements: &[Measurement]) {
    println!(
        "{stem}: periodic steady state, period {} ({}), found in {} Newton steps, residual {:.1e}",
        format_si_short(ss.period, "s"),
        format_si_short(1.0 / ss.period, "Hz"),
        ss.newton_steps(),
        ss.residual
    );
    println!("  state at period start:");
    // The same rounding floor as the table: a located zero of 1e-17 A is 0.
    let top = |unit: &str| {
        ss.state_names
            .iter()
            .zip(&ss.state)
            .filter(|(n, _)| state_unit(n) == unit)
            .fold(0.0f64, |m, (_, v)| m.max(v.abs()))
    };
    for (n, v) in ss.state_names.iter().zip(&ss.state) {
        let unit = state_unit(n);
        let shown = if v.abs() <= fluxstep_solver::measure::ROUNDING_REL * top(unit) {
            0.0
        } else {
            *v
        };
        println!("    {n:<24} {:>12}", format_si_digits(shown, unit, 4));
    }
    print!("{}", measurement_rows(outputs, measurements, "period"));
    println!(
        "  stability: {}",
        if ss.is_stable() { "stable" } else { "UNSTABLE" }
    );
    for m in &ss.multipliers {
        let value = if m.im == 0.0 {
            format!("{:.6}", m.re)
        } else {
            format!(
                "{:.6} {} {:.6}i",
                m.re,
                if m.im < 0.0 { "-" } else { "+" },
                m.im.abs()
            )
        };
        println!(
            "    multiplier {value:<28} |λ| {:.6}  {}",
            m.magnitude,
            words(m.reading)
        );
    }
}

/// The steady-state search did not converge (exit status 1).
#[derive(Debug)]
pub struct NotFound(pub String);

impl std::fmt::Display for NotFound {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for NotFound {}
