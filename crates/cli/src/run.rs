//! `fluxstep run FILE`: run the transient a circuit file describes and
//! write the design-review outputs into a folder: `waveform.csv` (time plus
//! one column per output), `events.json`, `summary.json` (exact
//! measurements) and `figure.svg`; print a compact summary table.

use std::fmt::Write as _;
use std::io::IsTerminal;
use std::path::PathBuf;

use anyhow::Context;
use fluxstep_plot::{review_figure, write_svg, ReviewOptions};
use fluxstep_solver::measure::{measure, Measurement};
use fluxstep_solver::{Options, Record, Simulator, SolverError};

/// Arguments of `fluxstep run`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The circuit file (JSON, see docs/netlist.md).
    pub file: PathBuf,
    /// Stop time in seconds, SI prefixes allowed ("5m"); default: the file's `run.stop_time`.
    #[arg(long)]
    pub stop: Option<String>,
    /// Start of the recorded window ("4.9m"); default: the file's
    /// `run.record_from`, else the last 5 switching periods.
    #[arg(long)]
    pub from: Option<String>,
    /// Outputs, comma-separated (`L1.current,sw,out`); default: the file's `run.outputs`.
    #[arg(long, value_delimiter = ',')]
    pub outputs: Vec<String>,
    /// Output folder; default `out/<file stem>`.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Points of the uniform grid in the CSV (event instants are always added).
    #[arg(long, default_value_t = 2000)]
    pub grid: usize,
}

/// The simulation stopped on a diagnostic (exit status 1).
#[derive(Debug)]
pub struct Stopped(pub SolverError);

impl std::fmt::Display for Stopped {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "the simulation stopped: {}", self.0)
    }
}

impl std::error::Error for Stopped {}

fn si_arg(text: &str, what: &str) -> anyhow::Result<f64> {
    fluxstep_netlist::parse_si(text).with_context(|| format!("--{what}"))
}

/// Runs the file's transient and writes the four files.
///
/// # Errors
///
/// Bad input (file, flags, output names): an ordinary error (exit 2). A
/// simulation diagnostic: [`Stopped`] (exit 1).
pub fn run(args: &Args) -> anyhow::Result<()> {
    let circuit = crate::input::read_circuit(&args.file)?;
    let cfg = circuit.run.clone();
    let stop = match (&args.stop, &cfg) {
        (Some(s), _) => si_arg(s, "stop")?,
        (None, Some(c)) => c.stop_time,
        (None, None) => anyhow::bail!("no stop time: give --stop or a run.stop_time in the file"),
    };
    if stop.is_nan() || stop <= 0.0 {
        anyhow::bail!("--stop must be positive, got {stop}");
    }
    let mut outputs: Vec<String> = if args.outputs.is_empty() {
        cfg.as_ref().map(|c| c.outputs.clone()).unwrap_or_default()
    } else {
        args.outputs.clone()
    };
    let period = circuit.signals().iter().find_map(|(_, s)| s.period);
    let from = match (&args.from, cfg.as_ref().and_then(|c| c.record_from)) {
        (Some(s), _) => si_arg(s, "from")?,
        (None, Some(f)) => f,
        (None, None) => period.map(|p| (stop - 5.0 * p).max(0.0)).unwrap_or(0.0),
    };
    if from.is_nan() || from < 0.0 || from >= stop {
        anyhow::bail!(
            "the recorded window must start in [0, stop): --from {from} with stop {stop}"
        );
    }
    let opts = Options {
        record: Record::Window { from, to: stop },
        ..Options::default()
    };
    let mut sim = Simulator::new(&circuit, opts).map_err(|e| anyhow::Error::new(Stopped(e)))?;
    if outputs.is_empty() {
        outputs = default_outputs(&circuit);
    }
    for o in &outputs {
        if sim.waveform().output(o).is_err() {
            anyhow::bail!(
                "unknown output {o:?}: expected a node name, ELEMENT.current or ELEMENT.voltage"
            );
        }
    }
    // Advance in slices so that a long run can show progress on a terminal.
    let bar = std::io::stderr().is_terminal().then(|| {
        let b = indicatif::ProgressBar::new(100);
        b.set_style(
            indicatif::ProgressStyle::with_template("{bar:40} {percent:>3}% simulated")
                .expect("valid template"),
        );
        b
    });
    for k in 1..=100u32 {
        let t = if k == 100 {
            stop
        } else {
            stop * f64::from(k) / 100.0
        };
        sim.advance_to(t)
            .map_err(|e| anyhow::Error::new(Stopped(e)))?;
        if let Some(b) = &bar {
            b.set_position(u64::from(k));
        }
    }
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let result = sim.finish();
    let w = &result.waveform;
    let dir = args.out.clone().unwrap_or_else(|| {
        let stem = args
            .file
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "run".into());
        PathBuf::from("out").join(stem)
    });
    std::fs::create_dir_all(&dir).with_context(|| format!("cannot create {}", dir.display()))?;
    let ids: Vec<_> = outputs
        .iter()
        .map(|o| w.output(o).expect("checked above"))
        .collect();

    // Waveform CSV: event instants plus a uniform grid.
    let (a, b) = w.span().context("nothing was recorded")?;
    let mut times = w.event_times(a, b);
    let n = args.grid.max(2);
    times.extend((0..n).map(|k| a + (b - a) * k as f64 / (n - 1) as f64));
    times.sort_by(f64::total_cmp);
    times.dedup();
    let mut csv = String::from("time");
    for o in &outputs {
        write!(csv, ",{o}").expect("writing to a string");
    }
    csv.push('\n');
    for t in &times {
        write!(csv, "{t:e}").expect("writing to a string");
        for id in &ids {
            match w.value(*id, *t) {
                Ok(v) => write!(csv, ",{v:e}").expect("writing to a string"),
                Err(_) => csv.push(','),
            }
        }
        csv.push('\n');
    }
    std::fs::write(dir.join("waveform.csv"), csv).context("cannot write waveform.csv")?;
    std::fs::write(dir.join("events.json"), result.events.to_json())
        .context("cannot write events.json")?;

    // Summary: exact measurements over the recorded window.
    let mut measurements: Vec<Measurement> = vec![];
    for id in &ids {
        if let Ok(m) = measure(w, *id, a, b) {
            measurements.push(m);
        }
    }
    let summary = serde_json::json!({
        "file": args.file.display().to_string(),
        "stop_time": stop,
        "window": [a, b],
        "events": result.events.len(),
        "modes": result.stats.modes,
        "measurements": measurements,
    });
    std::fs::write(
        dir.join("summary.json"),
        serde_json::to_string_pretty(&summary)? + "\n",
    )
    .context("cannot write summary.json")?;

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
            outputs: outputs.clone(),
            ..ReviewOptions::default()
        },
    )?;
    write_svg(&fig, dir.join("figure.svg"))?;

    println!(
        "{}: {:.4e} s simulated, window {:.4e} … {:.4e} s, {} events",
        title,
        stop,
        a,
        b,
        result.events.len()
    );
    println!(
        "  {:<26} {:>12} {:>12} {:>12} {:>12} {:>12}",
        "output", "average", "rms", "min", "max", "peak-peak"
    );
    for (o, id) in outputs.iter().zip(&ids) {
        match measurements
            .iter()
            .find(|m| m.output == *o || w.output(&m.output).ok() == Some(*id))
        {
            Some(m) => println!(
                "  {:<26} {:>12.5e} {:>12.5e} {:>12.5e} {:>12.5e} {:>12.5e}",
                o, m.average, m.rms, m.min, m.max, m.peak_to_peak
            ),
            None => println!("  {o:<26} (undetermined in part of the window)"),
        }
    }
    println!(
        "  written: {}/{{waveform.csv, events.json, summary.json, figure.svg}}",
        dir.display()
    );
    Ok(())
}

/// Without a list: the first inductor current, node `sw` and node `out`
/// where they exist.
fn default_outputs(c: &fluxstep_netlist::Circuit) -> Vec<String> {
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
