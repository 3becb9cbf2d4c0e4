//! `fluxstep response FILE`: the small-signal frequency response of the
//! circuit's periodic steady state from an input to an output, or the loop
//! gain of a closed loop with its margins; writes `response.csv`,
//! `response.json` and `bode.svg` and prints a summary with units.

use std::path::PathBuf;

use fluxstep_analysis::response::{
    frequency_response, log_frequencies, loop_gain, BreakPoint, Input, Margins, Point, Resonance,
};
use fluxstep_analysis::steady::SteadyOptions;
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::si::format_si_short;
use fluxstep_netlist::Circuit;
use fluxstep_plot::{bode_figure, write_svg, BodeMarks, BodePoint};

use crate::run::{write_failed, Stopped, WriteFailed};
use crate::steady::NotFound;

/// Arguments of `fluxstep response`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The circuit file (JSON, see docs/netlist.md).
    pub file: PathBuf,
    /// The small-signal input: a source (`Vin`), `GATE.duty`,
    /// `GATE.reference` (current-mode gate), `GATE.sense`,
    /// `COMPENSATOR.reference` or `injection:NODE` (a current into a node).
    #[arg(long)]
    pub input: Option<String>,
    /// The output (a node, `ELEMENT.current`, `COMPENSATOR.output`, …).
    #[arg(long)]
    pub output: Option<String>,
    /// Instead of --input/--output: the loop gain of the loop broken at a
    /// closed-loop gate's sense input or a compensator's input (by name).
    #[arg(long = "loop")]
    pub loop_point: Option<String>,
    /// Lowest frequency in hertz, SI prefixes allowed ("10", "1k").
    #[arg(long, default_value = "10")]
    pub from: String,
    /// Highest frequency in hertz, SI prefixes allowed; default half the
    /// switching frequency.
    #[arg(long)]
    pub to: Option<String>,
    /// Number of frequencies, spaced evenly on a log scale.
    #[arg(long, default_value_t = 200)]
    pub points: usize,
    /// Output folder; default `out/<file stem>-response`.
    #[arg(long)]
    pub dir: Option<PathBuf>,
}

fn hz(text: &str, what: &str) -> anyhow::Result<f64> {
    fluxstep_netlist::parse_si(text).map_err(|e| anyhow::anyhow!("--{what} {text:?}: {e}"))
}

/// Maps an analysis error to the exit codes: a diagnostic of the solver,
/// no convergence or an unstable orbit are findings about the circuit
/// (exit 1); everything else is input that cannot be used (exit 2).
fn classify(e: AnalysisError) -> anyhow::Error {
    match e {
        AnalysisError::Solver(s) => anyhow::Error::new(Stopped(s)),
        e @ (AnalysisError::NotConverged { .. } | AnalysisError::Unstable { .. }) => {
            anyhow::Error::new(NotFound(e.to_string()))
        }
        e => e.into(),
    }
}

/// Runs the analysis and writes the three files.
///
/// # Errors
///
/// As described at [`classify`]; a file that cannot be written:
/// [`WriteFailed`] (exit 3).
pub fn run(args: &Args) -> anyhow::Result<()> {
    let circuit = crate::input::read_circuit(&args.file)?;
    let fs = 1.0 / fluxstep_analysis::steady::period(&circuit).map_err(classify)?;
    let from = hz(&args.from, "from")?;
    let to = match &args.to {
        Some(t) => hz(t, "to")?,
        None => 0.5 * fs,
    };
    let freqs = log_frequencies(from, to, args.points)?;
    let stem = args
        .file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "circuit".into());
    let Answer {
        title,
        points,
        margins,
        resonances,
        unit,
        describe,
    } = analyse(args, &circuit, &stem, &freqs)?;
    let dir = args
        .dir
        .clone()
        .unwrap_or_else(|| PathBuf::from("out").join(format!("{stem}-response")));
    std::fs::create_dir_all(&dir).map_err(write_failed(&dir))?;

    // CSV: one row per frequency.
    let csv_path = dir.join("response.csv");
    let mut text = String::from("frequency_hz,magnitude_db,phase_deg,re,im,beyond_nyquist\n");
    for p in &points {
        text.push_str(&format!(
            "{:e},{:e},{:e},{:e},{:e},{}\n",
            p.frequency, p.magnitude_db, p.phase_deg, p.re, p.im, p.beyond_nyquist
        ));
    }
    std::fs::write(&csv_path, text).map_err(write_failed(&csv_path))?;
    let json = serde_json::json!({
        "file": args.file.display().to_string(),
        "transfer": describe,
        "unit": unit,
        "switching_frequency": fs,
        "margins": margins,
        "resonances": resonances,
        "points": points,
    });
    let json_path = dir.join("response.json");
    std::fs::write(&json_path, serde_json::to_string_pretty(&json)? + "\n")
        .map_err(write_failed(&json_path))?;
    let bode: Vec<BodePoint> = points
        .iter()
        .map(|p| BodePoint {
            frequency: p.frequency,
            magnitude_db: p.magnitude_db,
            phase_deg: p.phase_deg,
        })
        .collect();
    let marks = BodeMarks {
        crossover: margins
            .as_ref()
            .and_then(|m| Some((m.crossover_hz?, m.phase_margin_deg?))),
        phase_crossover: margins
            .as_ref()
            .and_then(|m| Some((m.phase_crossover_hz?, m.gain_margin_db?))),
        switching_frequency: Some(fs),
    };
    let fig = bode_figure(&title, &describe, &bode, &marks)?;
    let svg_path = dir.join("bode.svg");
    write_svg(&fig, &svg_path).map_err(|e| {
        anyhow::Error::new(WriteFailed {
            path: svg_path.clone(),
            source: std::io::Error::other(e.to_string()),
        })
    })?;

    print_answer(
        &title,
        &points,
        margins.as_ref(),
        &resonances,
        &unit,
        (from, to, fs),
    );
    println!(
        "  written: {}/{{response.csv, response.json, bode.svg}}",
        dir.display()
    );
    Ok(())
}

/// What the analysis answered, ready to write and print.
struct Answer {
    /// The figure's title.
    title: String,
    points: Vec<Point>,
    /// The loop's margins (a loop gain only).
    margins: Option<Margins>,
    /// Resonance peaks (a transfer function only).
    resonances: Vec<Resonance>,
    /// The transfer function's unit ("" for a loop gain).
    unit: String,
    /// What was computed, in words.
    describe: String,
}

/// A loop gain (`--loop`) or a transfer function (`--input`, `--output`)
/// at the frequencies.
fn analyse(args: &Args, circuit: &Circuit, stem: &str, freqs: &[f64]) -> anyhow::Result<Answer> {
    let opts = SteadyOptions::default();
    let (title, points, margins, resonances, unit, describe) =
        match (&args.loop_point, &args.input, &args.output) {
            (Some(p), None, None) => {
                let point = BreakPoint::named(circuit, p)?;
                let lg = loop_gain(circuit, &point, freqs, &opts).map_err(classify)?;
                let at = match &point {
                    BreakPoint::GateSense(g) => format!("the sense input of gate {g}"),
                    BreakPoint::CompensatorInput(k) => format!("the input of compensator {k}"),
                };
                (
                    format!("{stem}: loop gain broken at {at}"),
                    lg.points,
                    Some(lg.margins),
                    vec![],
                    String::new(),
                    format!("loop gain T at {at}"),
                )
            }
            (None, Some(i), Some(o)) => {
                let r = frequency_response(circuit, &Input::parse(i), o, freqs, &opts)
                    .map_err(classify)?;
                (
                    format!("{stem}: {o} / {i}"),
                    r.points,
                    None,
                    r.resonances,
                    r.unit.clone(),
                    format!("{o} / {i}"),
                )
            }
            _ => anyhow::bail!(
            "give either --input and --output (a transfer function) or --loop POINT (a loop gain)"
        ),
        };
    Ok(Answer {
        title,
        points,
        margins,
        resonances,
        unit,
        describe,
    })
}

/// Prints the answer: range, first point, resonances, margins and the
/// frequencies beyond the Nyquist frequency.
fn print_answer(
    title: &str,
    points: &[Point],
    margins: Option<&Margins>,
    resonances: &[Resonance],
    unit: &str,
    (from, to, fs): (f64, f64, f64),
) {
    println!("{title}");
    println!(
        "  {} frequencies from {} to {}; switching frequency {}",
        points.len(),
        format_si_short(from, "Hz"),
        format_si_short(to, "Hz"),
        format_si_short(fs, "Hz")
    );
    if let Some(first) = points.first() {
        let unit = if unit.is_empty() {
            String::new()
        } else {
            format!(" ({unit})")
        };
        println!(
            "  at {}: {:.2} dB{unit}, {:.1}°",
            format_si_short(first.frequency, "Hz"),
            first.magnitude_db,
            first.phase_deg
        );
    }
    for r in resonances {
        println!(
            "  peak at {}: {:.2} dB ({:.1} dB above its surroundings)",
            format_si_short(r.frequency, "Hz"),
            r.magnitude_db,
            r.prominence_db
        );
    }
    if let Some(m) = margins {
        match (m.crossover_hz, m.phase_margin_deg) {
            (Some(fc), Some(pm)) => println!(
                "  crossover {} ({:.3} of fs), phase margin {pm:.1}°",
                format_si_short(fc, "Hz"),
                fc / fs
            ),
            _ => println!("  no crossover in the range"),
        }
        match (m.phase_crossover_hz, m.gain_margin_db) {
            (Some(fp), Some(gm)) => {
                println!("  gain margin {gm:.1} dB at {}", format_si_short(fp, "Hz"))
            }
            _ => println!("  no phase crossover (−180°) in the range"),
        }
    }
    let beyond = points.iter().filter(|p| p.beyond_nyquist).count();
    if beyond > 0 {
        println!(
            "  {beyond} frequencies lie above fs/2 = {} (beyond the Nyquist frequency: sidebands alias there)",
            format_si_short(0.5 * fs, "Hz")
        );
    }
}
