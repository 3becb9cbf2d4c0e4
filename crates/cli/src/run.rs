//! `fluxstep run FILE`: run the transient a circuit file describes and
//! write the design-review outputs into a folder: `waveform.csv` (time plus
//! one column per output), `events.json`, `summary.json` (exact
//! measurements) and `figure.svg`; print a compact summary table.
//! docs/outputs.md describes every column and key of these files.
//!
//! A run that stops on a diagnostic still writes what it recorded up to the
//! fault, with the diagnostic in the summary and as a red line on the
//! figure, and then exits with status 1.

use std::io::{IsTerminal, Write as _};
use std::path::{Path, PathBuf};

use anyhow::Context;
use fluxstep_netlist::si::{format_si_digits, format_si_short};
use fluxstep_netlist::{Circuit, InterruptionPolicy, OutputName, ShootThroughPolicy};
use fluxstep_plot::{render_svg, review_figure, ReviewOptions};
use fluxstep_solver::measure::{measure, without_rounding_noise, Measurement};
use fluxstep_solver::{
    OnInterruption, OnShootThrough, Options, Record, RunResult, Simulator, SolverError,
};

/// Arguments of `fluxstep run`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The circuit file (JSON, see docs/netlist.md).
    pub file: PathBuf,
    /// Stop time in seconds, SI prefixes allowed ("5m"); default: the file's `run.stop_time`.
    #[arg(long, value_name = "SECONDS")]
    pub stop: Option<String>,
    /// Start of the recorded window in seconds, SI prefixes allowed ("4.9m");
    /// default: the file's `run.record_from`, else the last 5 switching periods.
    #[arg(long, value_name = "SECONDS")]
    pub from: Option<String>,
    /// Outputs to record, comma-separated (`L1.current,sw,out`); default: the file's `run.outputs`.
    #[arg(long, value_delimiter = ',', value_name = "NAMES")]
    pub outputs: Vec<String>,
    /// Folder the four files are written into; default `out/<file stem>`.
    #[arg(long, value_name = "FOLDER")]
    pub dir: Option<PathBuf>,
    /// Points of the uniform grid in the CSV (event instants are always
    /// added), from 2 to 100,000,000.
    #[arg(long, default_value_t = 2000, value_name = "POINTS", value_parser = grid_points)]
    pub grid: usize,
    /// Peak memory of the run, in bytes with SI prefixes ("500M", "2G"):
    /// the recorded waveform and events get all of it but a headroom for
    /// the program and the writing of the outputs (1/64, at least 16 MiB,
    /// at most half), and a run that would record more stops with a
    /// diagnostic naming this budget (exit 1). Default 2 GiB.
    #[arg(long, value_name = "BYTES")]
    pub memory_budget: Option<String>,
    /// When a switch or diode leaves inductor current with no path: stop
    /// (default) or go on with the flux-conserving jump; default: the
    /// file's `run.on_interruption`.
    #[arg(long, value_enum, value_name = "POLICY")]
    pub on_interruption: Option<Interruption>,
    /// When closed switches short a source or capacitor through their
    /// on-resistance: stop (default) or record the event and go on;
    /// default: the file's `run.on_shoot_through`.
    #[arg(long, value_enum, value_name = "POLICY")]
    pub on_shoot_through: Option<ShootThrough>,
    /// Instants in seconds, SI prefixes allowed ("4.9525m,4.955m"), around
    /// which the figure adds a narrow zoom column (a dead time, a diode
    /// turn-off).
    #[arg(long, value_delimiter = ',', value_name = "SECONDS")]
    pub zoom: Vec<String>,
    /// Width of each zoom column's window in seconds ("200n"); default: a
    /// fiftieth of the switching period.
    #[arg(long, value_name = "SECONDS")]
    pub zoom_span: Option<String>,
}

/// `--on-interruption`, spelled as in the circuit file.
#[derive(Clone, Copy, Debug, clap::ValueEnum)]
pub enum Interruption {
    /// Stop with a diagnostic.
    Stop,
    /// Go on with the flux-conserving jump and log the energy lost.
    #[value(name = "conserve_flux")]
    ConserveFlux,
}

/// `--on-shoot-through`, spelled as in the circuit file.
#[derive(Clone, Copy, Debug, clap::ValueEnum)]
pub enum ShootThrough {
    /// Stop with a diagnostic.
    Stop,
    /// Log a shoot-through event and go on.
    Record,
}

/// The simulation stopped on a diagnostic (exit status 1).
#[derive(Debug)]
pub struct Stopped(pub SolverError);

impl std::fmt::Display for Stopped {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "the simulation stopped: {}", self.0)?;
        if let SolverError::MemoryBudget { .. } = self.0 {
            // What the user can change from the command line.
            write!(
                f,
                " (raise it with --memory-budget, or record a shorter window with --from)"
            )?;
        }
        Ok(())
    }
}

impl std::error::Error for Stopped {}

/// An output folder or file could not be created or written (exit status 3).
#[derive(Debug)]
pub struct WriteFailed {
    /// The folder or file.
    pub path: PathBuf,
    /// The cause.
    pub source: std::io::Error,
}

impl std::fmt::Display for WriteFailed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "cannot write {}: {}", self.path.display(), self.source)
    }
}

impl std::error::Error for WriteFailed {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        Some(&self.source)
    }
}

pub(crate) fn write_failed(path: &Path) -> impl FnOnce(std::io::Error) -> anyhow::Error + '_ {
    move |source| {
        anyhow::Error::new(WriteFailed {
            path: path.to_path_buf(),
            source,
        })
    }
}

/// The largest `--grid`: 10⁸ rows are a CSV of several gigabytes already.
pub(crate) const MAX_GRID: usize = 100_000_000;

/// Parses `--grid`: a whole number from 2 to [`MAX_GRID`].
pub(crate) fn grid_points(text: &str) -> Result<usize, String> {
    match text.parse::<usize>() {
        Ok(n) if (2..=MAX_GRID).contains(&n) => Ok(n),
        _ => Err(format!(
            "expected a whole number of points from 2 to {MAX_GRID}, got {text:?}"
        )),
    }
}

/// Parses `--memory-budget`: bytes with SI prefixes ("500M", "2G"; a
/// trailing "B" is allowed), at least 1 kB.
pub(crate) fn memory_budget(text: &str) -> anyhow::Result<usize> {
    let number = text.strip_suffix('B').unwrap_or(text);
    let bytes = fluxstep_netlist::parse_si(number).with_context(|| "--memory-budget")?;
    if !(1e3..=usize::MAX as f64).contains(&bytes) {
        anyhow::bail!(
            "--memory-budget must lie between 1k and {:e} bytes, got {text:?}",
            usize::MAX as f64
        );
    }
    Ok(bytes as usize)
}

/// What the recording may take of a `--memory-budget` of `budget` bytes:
/// all but a headroom for the program itself (its code, caches and
/// buffers, about 8 MiB) and the writing of the outputs, 1/64 of the
/// budget, at least 16 MiB, at most half. So the run's peak resident
/// memory stays within the budget (a 100 MHz buck recording 1 s with the
/// default 2 GiB peaked 8 MiB over it when the recording got all of it).
pub(crate) fn recording_budget(budget: usize) -> usize {
    let headroom = (budget / 64).max(16 << 20).min(budget / 2);
    budget - headroom
}

fn si_arg(text: &str, what: &str) -> anyhow::Result<f64> {
    fluxstep_netlist::parse_si(text).with_context(|| format!("--{what}"))
}

/// Everything a run needs, settled from the file and the flags.
struct Plan {
    stop: f64,
    from: f64,
    outputs: Vec<String>,
    on_interruption: OnInterruption,
    on_shoot_through: OnShootThrough,
    period: Option<f64>,
    memory_budget: usize,
}

fn plan(args: &Args, circuit: &Circuit) -> anyhow::Result<Plan> {
    let cfg = circuit.run.as_ref();
    let stop = match (&args.stop, cfg) {
        (Some(s), _) => si_arg(s, "stop")?,
        (None, Some(c)) => c.stop_time,
        (None, None) => anyhow::bail!("no stop time: give --stop or a run.stop_time in the file"),
    };
    if !(stop.is_finite() && stop > 0.0) {
        anyhow::bail!("--stop must be positive and finite, got {stop:e} s");
    }
    if args.stop.is_some() {
        // The file's own stop time was checked with the file.
        let problems = circuit.time_resolution_problems(stop);
        if !problems.is_empty() {
            return Err(anyhow::Error::new(fluxstep_netlist::NetlistError::Invalid(
                problems,
            )))
            .context(format!("with --stop {stop:e} s"));
        }
    }
    let memory_budget = args
        .memory_budget
        .as_deref()
        .map(memory_budget)
        .transpose()?
        .unwrap_or(fluxstep_solver::DEFAULT_MEMORY_BUDGET);
    let outputs: Vec<String> = if args.outputs.is_empty() {
        cfg.map(|c| c.outputs.clone()).unwrap_or_default()
    } else {
        args.outputs.clone()
    };
    let period = circuit.signals().iter().find_map(|(_, s)| s.period);
    let from = match (&args.from, cfg.and_then(|c| c.record_from)) {
        (Some(s), _) => si_arg(s, "from")?,
        (None, Some(f)) => f,
        (None, None) => period.map(|p| (stop - 5.0 * p).max(0.0)).unwrap_or(0.0),
    };
    if from.is_nan() || from < 0.0 || from >= stop {
        anyhow::bail!(
            "the recorded window must start in [0, stop): --from {} with stop {}",
            format_si_short(from, "s"),
            format_si_short(stop, "s")
        );
    }
    let on_interruption = match (args.on_interruption, cfg.map(|c| c.on_interruption)) {
        (Some(Interruption::ConserveFlux), _) | (None, Some(InterruptionPolicy::ConserveFlux)) => {
            OnInterruption::ConserveFlux
        }
        _ => OnInterruption::Stop,
    };
    let on_shoot_through = match (args.on_shoot_through, cfg.map(|c| c.on_shoot_through)) {
        (Some(ShootThrough::Record), _) | (None, Some(ShootThroughPolicy::Record)) => {
            OnShootThrough::Record
        }
        _ => OnShootThrough::Stop,
    };
    Ok(Plan {
        stop,
        from,
        outputs,
        on_interruption,
        on_shoot_through,
        period,
        memory_budget,
    })
}

/// Runs `circuit` to `plan.stop` recording [from, stop]; a diagnostic ends
/// the run early and is returned beside what was recorded.
fn simulate(
    circuit: &Circuit,
    plan: &Plan,
    from: f64,
    progress: bool,
) -> anyhow::Result<(RunResult, Option<SolverError>)> {
    let opts = Options {
        record: Record::Window {
            from,
            to: plan.stop,
        },
        on_interruption: plan.on_interruption,
        on_shoot_through: plan.on_shoot_through,
        memory_budget: recording_budget(plan.memory_budget),
        ..Options::default()
    };
    let mut sim = Simulator::new(circuit, opts).map_err(|e| anyhow::Error::new(Stopped(e)))?;
    for o in &plan.outputs {
        if sim.waveform().output(o).is_err() {
            anyhow::bail!(
                "unknown output {o:?}: an output is {}; this circuit has {}",
                fluxstep_netlist::OUTPUT_FORMS,
                sim.waveform().output_names().join(", ")
            );
        }
    }
    // Advance in slices so that a long run can show progress on a terminal.
    let bar = progress.then(|| {
        let b = indicatif::ProgressBar::new(100);
        b.set_style(
            indicatif::ProgressStyle::with_template("{bar:40} {percent:>3}% simulated")
                .expect("valid template"),
        );
        b
    });
    let mut stopped = None;
    for k in 1..=100u32 {
        let t = if k == 100 {
            plan.stop
        } else {
            plan.stop * f64::from(k) / 100.0
        };
        if let Err(e) = sim.advance_to(t) {
            // The diagnostic names the budget the user gave.
            stopped = Some(match e {
                SolverError::MemoryBudget { time, .. } => SolverError::MemoryBudget {
                    time,
                    budget: plan.memory_budget,
                },
                e => e,
            });
            break;
        }
        if let Some(b) = &bar {
            b.set_position(u64::from(k));
        }
    }
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    Ok((sim.finish(), stopped))
}

/// The `--zoom` instants and the `--zoom-span`.
fn zoom_args(args: &Args) -> anyhow::Result<(Vec<f64>, Option<f64>)> {
    let zoom = args
        .zoom
        .iter()
        .map(|z| si_arg(z, "zoom"))
        .collect::<anyhow::Result<Vec<f64>>>()?;
    let zoom_span = args
        .zoom_span
        .as_deref()
        .map(|z| si_arg(z, "zoom-span"))
        .transpose()?;
    if zoom_span.is_some_and(|s| !(s > 0.0 && s.is_finite())) {
        anyhow::bail!("--zoom-span must be positive");
    }
    Ok((zoom, zoom_span))
}

/// The output folder: `--dir`, else `out/` and the file's stem.
fn output_dir(args: &Args) -> PathBuf {
    args.dir.clone().unwrap_or_else(|| {
        let stem = args
            .file
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "run".into());
        PathBuf::from("out").join(stem)
    })
}

/// Runs the plan; a fault before the recorded window leaves nothing to
/// show, so the run is repeated recording up to the fault.
fn simulate_to_show(
    circuit: &Circuit,
    plan: &Plan,
) -> anyhow::Result<(RunResult, Option<SolverError>)> {
    let progress = std::io::stderr().is_terminal();
    let (mut result, mut stopped) = simulate(circuit, plan, plan.from, progress)?;
    if let Some(e) = &stopped {
        // A fault before the recorded window leaves nothing to show: run
        // again (the run is deterministic, so it stops at the same
        // instant) recording a window of the same length up to the fault.
        let fault = e.time().unwrap_or(plan.from);
        if result.waveform.span().is_none() && fault > 0.0 {
            let from = (fault - (plan.stop - plan.from)).max(0.0);
            (result, stopped) = simulate(circuit, plan, from, false)?;
        }
    }
    Ok((result, stopped))
}

/// The summary.json of a run before losses, stop and timing are added:
/// the exact measurements over the recorded window, with their units.
fn summary_json(
    args: &Args,
    plan: &Plan,
    result: &RunResult,
    (a, b): (f64, f64),
    measurements: &[Measurement],
) -> serde_json::Value {
    let unit = |name: &str| OutputName::parse(name).map(|o| o.unit()).unwrap_or("");
    serde_json::json!({
        "file": args.file.display().to_string(),
        "stop_time": plan.stop,
        "window": [a, b],
        "events": result.events.len(),
        "modes": result.stats.modes,
        "certificate": crate::losses::certificate_json(&result.certificate),
        "measurements": measurements.iter().map(|m| {
            let mut v = serde_json::to_value(m).expect("a measurement serializes");
            v["unit"] = unit(&m.output).into();
            v
        }).collect::<Vec<_>>(),
    })
}

/// Runs the file's transient and writes the four files.
///
/// # Errors
///
/// Bad input (file, flags, output names): an ordinary error (exit 2). A
/// simulation diagnostic: [`Stopped`] (exit 1), after the files are
/// written. A folder or file that cannot be written: [`WriteFailed`] (exit 3).
pub fn run(args: &Args) -> anyhow::Result<()> {
    let circuit = crate::input::read_circuit(&args.file)?;
    let mut plan = plan(args, &circuit)?;
    if plan.outputs.is_empty() {
        plan.outputs = default_outputs(&circuit);
    }
    let (zoom, zoom_span) = zoom_args(args)?;
    let dir = output_dir(args);
    create_folder(&dir)?;

    let (result, stopped) = simulate_to_show(&circuit, &plan)?;
    let w = &result.waveform;
    let Some((a, b)) = w.span() else {
        return match stopped {
            Some(e) => Err(anyhow::Error::new(Stopped(e))),
            None => anyhow::bail!("nothing was recorded"),
        };
    };
    let ids: Vec<_> = plan
        .outputs
        .iter()
        .map(|o| w.output(o).expect("checked by simulate"))
        .collect();

    // Waveform CSV: event instants plus a uniform grid, written row by row.
    let csv_path = dir.join("waveform.csv");
    write_csv(
        &csv_path,
        &plan.outputs,
        csv_times(w, a, b, args.grid),
        |t, out| {
            out.extend(ids.iter().map(|id| w.value(*id, t).ok()));
        },
    )?;
    let events_path = dir.join("events.json");
    // Streamed: the log of a run stopped by its memory budget is as large
    // as the budget, and its text several times that.
    std::fs::File::create(&events_path)
        .and_then(|f| result.events.write_json(std::io::BufWriter::new(f)))
        .map_err(write_failed(&events_path))?;

    // Summary: exact measurements over the recorded window.
    let measurements: Vec<Measurement> = ids
        .iter()
        .filter_map(|id| measure(w, *id, a, b).ok())
        .collect();
    let mut summary = summary_json(args, &plan, &result, (a, b), &measurements);
    // The energy balance of the window, and the losses where the circuit
    // has loss data (docs/outputs.md).
    let title0 = args
        .file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let losses = crate::losses::section(&circuit, w, &result.events, (a, b), false, &title0);
    summary["losses"] = losses.json.clone();
    if let Some(svg) = &losses.chart {
        let path = dir.join("losses.svg");
        std::fs::write(&path, svg).map_err(write_failed(&path))?;
    }
    if let Some(e) = &stopped {
        summary["stopped"] = serde_json::json!({
            "time": e.time(),
            "diagnostic": e.to_string(),
        });
    }
    // Timing rules of the file (docs/timing.md): margins into the summary;
    // a violation exits 1 once every file is written.
    let timing = crate::compare::timing_rules(&circuit, &result, plan.period, |from| {
        Ok(simulate(&circuit, &plan, from, false)?.0)
    })?
    .map(|report| crate::compare::timing_summary(&report));
    let violated = timing.and_then(|(value, err)| {
        summary["timing"] = value;
        err
    });
    let summary_path = dir.join("summary.json");
    std::fs::write(
        &summary_path,
        serde_json::to_string_pretty(&summary)? + "\n",
    )
    .map_err(write_failed(&summary_path))?;

    let title = args
        .file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let fig = review_figure(
        &title,
        w,
        Some(&result.events),
        &ReviewOptions {
            outputs: plan.outputs.clone(),
            period: plan.period,
            zoom,
            zoom_span,
            stopped: stopped
                .as_ref()
                .map(|e| (e.time().unwrap_or(b), format!("stopped: {}", short(e)))),
            ..ReviewOptions::default()
        },
    )?;
    let svg = render_svg(&fig)?;
    let figure_path = dir.join("figure.svg");
    std::fs::write(&figure_path, svg).map_err(write_failed(&figure_path))?;

    print!(
        "{}",
        table(
            &title,
            plan.stop,
            (a, b),
            result.events.len(),
            &plan.outputs,
            &measurements
        )
    );
    print!("{}", crate::losses::certificate_line(&result.certificate));
    losses.print_with_files(&dir);
    match (stopped, violated, losses.failed) {
        (Some(e), _, _) => Err(anyhow::Error::new(Stopped(e))),
        (None, Some(v), _) => Err(anyhow::Error::new(v)),
        (None, None, Some(f)) => Err(anyhow::Error::new(f)),
        (None, None, None) => Ok(()),
    }
}

/// The kind of a diagnostic in a few words, for the figure.
fn short(e: &SolverError) -> &'static str {
    match e {
        SolverError::InductorInterrupted { .. } => "inductor current interrupted",
        SolverError::ShortCircuit { .. } => "short circuit",
        SolverError::CurrentSourceOpen { .. } => "current source open",
        SolverError::NoConsistentPattern { .. } => "no consistent diode pattern",
        SolverError::Chatter { .. } => "chatter",
        SolverError::EventLimit { .. } => "event limit",
        SolverError::MemoryBudget { .. } => "memory budget",
        SolverError::NonFinite { .. } => "value not finite",
        SolverError::TransitionIncomplete { .. } => "switching transition incomplete",
        SolverError::EnergyBalance { .. } => "energy balance failed",
        _ => "diagnostic",
    }
}

/// Writes the waveform CSV row by row through a buffered writer: the file
/// is never held in memory as a whole. `row` appends the output values at
/// a time (`None`: undetermined there, written as an empty cell).
pub(crate) fn write_csv(
    path: &Path,
    outputs: &[String],
    times: impl IntoIterator<Item = f64>,
    mut row: impl FnMut(f64, &mut Vec<Option<f64>>),
) -> anyhow::Result<()> {
    let file = std::fs::File::create(path).map_err(write_failed(path))?;
    let mut csv = csv::Writer::from_writer(std::io::BufWriter::new(file));
    let io = |e: csv::Error| match e.into_kind() {
        csv::ErrorKind::Io(source) => anyhow::Error::new(WriteFailed {
            path: path.to_path_buf(),
            source,
        }),
        other => anyhow::anyhow!("{}: {other:?}", path.display()),
    };
    csv.write_field("time").map_err(io)?;
    for o in outputs {
        csv.write_field(o).map_err(io)?;
    }
    csv.write_record(None::<&[u8]>).map_err(io)?;
    let mut values = Vec::with_capacity(outputs.len());
    let mut cell = String::new();
    for t in times {
        values.clear();
        row(t, &mut values);
        cell.clear();
        std::fmt::Write::write_fmt(&mut cell, format_args!("{t:e}")).expect("to a String");
        csv.write_field(&cell).map_err(io)?;
        for v in &values {
            cell.clear();
            if let Some(v) = v {
                std::fmt::Write::write_fmt(&mut cell, format_args!("{v:e}")).expect("to a String");
            }
            csv.write_field(&cell).map_err(io)?;
        }
        csv.write_record(None::<&[u8]>).map_err(io)?;
    }
    let mut inner = csv.into_inner().map_err(|e| {
        anyhow::Error::new(WriteFailed {
            path: path.to_path_buf(),
            source: std::io::Error::other(e.to_string()),
        })
    })?;
    inner.flush().map_err(write_failed(path))?;
    Ok(())
}

/// The rows of a waveform CSV over [a, b]: every event instant (segment
/// start) inside and `n` equally spaced points, in increasing order without
/// repeats. Both are already in order, so they are merged as they are
/// written: nothing the size of the record or the grid is held in memory.
pub(crate) fn csv_times(
    w: &fluxstep_solver::Waveform,
    a: f64,
    b: f64,
    n: usize,
) -> impl Iterator<Item = f64> + '_ {
    let n = n.max(2);
    let mut events = w
        .segments()
        .iter()
        .map(|s| s.t0)
        .filter(move |&t| t >= a && t <= b)
        .peekable();
    let mut grid = (0..n)
        .map(move |k| a + (b - a) * k as f64 / (n - 1) as f64)
        .peekable();
    let mut last = None;
    std::iter::from_fn(move || loop {
        let t = match (events.peek(), grid.peek()) {
            (Some(&e), Some(&g)) if e <= g => events.next(),
            (_, Some(_)) => grid.next(),
            (Some(_), None) => events.next(),
            (None, None) => return None,
        }?;
        if last != Some(t) {
            last = Some(t);
            return Some(t);
        }
    })
}

/// Creates the output folder, with a clear message where the path is a
/// file or a device (`--dir /dev/null`) rather than a folder.
pub(crate) fn create_folder(dir: &Path) -> anyhow::Result<()> {
    if dir.exists() && !dir.is_dir() {
        return Err(anyhow::Error::new(WriteFailed {
            path: dir.to_path_buf(),
            source: std::io::Error::other(
                "exists and is not a folder (the outputs are written as files into a folder)",
            ),
        }));
    }
    std::fs::create_dir_all(dir).map_err(write_failed(dir))
}

/// The summary printed on stdout: what was simulated, then one row per
/// output with units and SI prefixes; values below the run's rounding
/// floor are shown as 0 (the JSON keeps the raw numbers).
pub fn table(
    title: &str,
    stop: f64,
    (a, b): (f64, f64),
    events: usize,
    outputs: &[String],
    measurements: &[Measurement],
) -> String {
    let mut out = format!(
        "{title}: {} simulated, window {} … {}, {events} event{}\n",
        format_si_digits(stop, "s", 4),
        format_si_digits(a, "s", 6),
        format_si_digits(b, "s", 6),
        if events == 1 { "" } else { "s" },
    );
    out.push_str(&measurement_rows(outputs, measurements, "window"));
    out
}

/// One row per output with units and SI prefixes, under a heading; values
/// below the rounding floor shown as 0. `span` names what the numbers
/// cover ("window", "period").
pub(crate) fn measurement_rows(
    outputs: &[String],
    measurements: &[Measurement],
    span: &str,
) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "  {:<26} {:>11} {:>11} {:>11} {:>11} {:>11}\n",
        "output", "average", "rms", "min", "max", "peak-peak"
    ));
    let shown = without_rounding_noise(measurements);
    for o in outputs {
        let key = OutputName::parse(o).ok();
        let unit = key.as_ref().map(|k| k.unit()).unwrap_or("");
        let found = shown
            .iter()
            .find(|m| m.output == *o || OutputName::parse(&m.output).ok() == key);
        match found {
            Some(m) => {
                let f = |v: f64| format_si_digits(v, unit, 4);
                out.push_str(&format!(
                    "  {:<26} {:>11} {:>11} {:>11} {:>11} {:>11}\n",
                    o,
                    f(m.average),
                    f(m.rms),
                    f(m.min),
                    f(m.max),
                    f(m.peak_to_peak)
                ));
            }
            None => out.push_str(&format!("  {o:<26} (undetermined in part of the {span})\n")),
        }
    }
    out
}

/// Without a list: the first inductor current, node `sw` and node `out`
/// where they exist.
pub(crate) fn default_outputs(c: &Circuit) -> Vec<String> {
    let mut v = vec![];
    if let Some(l) = c
        .elements
        .iter()
        .find(|e| matches!(e, fluxstep_netlist::Element::Inductor(_)))
    {
        v.push(format!("{}.current", l.name()));
    }
    for n in ["sw", "out"] {
        if c.nodes().iter().any(|x| x == n) {
            v.push(n.into());
        }
    }
    if v.is_empty() {
        v.push(c.nodes().get(1).cloned().unwrap_or_else(|| "gnd".into()));
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    fn m(output: &str, average: f64, rms: f64, min: f64, max: f64) -> Measurement {
        Measurement {
            output: output.into(),
            t0: 0.0,
            t1: 1.0,
            average,
            rms,
            min,
            max,
            peak_to_peak: max - min,
            time_of_min: 0.0,
            time_of_max: 0.0,
        }
    }

    /// Issue 19: the recording leaves the program its headroom within the
    /// budget (1/64, at least 16 MiB, at most half).
    #[test]
    fn issue_19_the_recording_leaves_headroom_within_the_budget() {
        assert_eq!(recording_budget(2 << 30), (2 << 30) - (32 << 20));
        assert_eq!(recording_budget(100_000_000), 100_000_000 - (16 << 20));
        assert_eq!(recording_budget(100_000), 50_000);
    }

    /// Issue 13: units and SI prefixes in the table, rounding noise as 0.
    #[test]
    fn issue_13_the_table_prints_units_and_hides_rounding_noise() {
        let text = table(
            "buck",
            5e-3,
            (4.95e-3, 5e-3),
            42,
            &["L1.current".into(), "out".into(), "K.output".into()],
            &[
                m("L1.current", 1.99972, 2.03815, -8.65e-12, 2.68202),
                m("out", 11.9999, 11.9999, 11.9907, 12.0091),
                m("K.output", 0.270143, 0.270719, 0.238883, 0.407923),
            ],
        );
        assert!(
            text.contains("5.000 ms simulated, window 4.95000 ms … 5.00000 ms, 42 events"),
            "{text}"
        );
        assert!(text.contains("2.000 A"), "{text}");
        assert!(text.contains("2.682 A"), "{text}");
        assert!(text.contains(" 0 A "), "{text}");
        assert!(!text.contains("e-12"), "{text}");
        assert!(text.contains("18.40 mV"), "{text}");
        assert!(text.contains("270.1 m"), "{text}");
        assert!(!text.contains("e0"), "{text}");
    }
}
