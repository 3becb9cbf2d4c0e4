//! Shared by the examples: run a circuit file to its stop time, print the
//! numbers a designer reads off, and write the review figure.

use fluxstep::netlist::Circuit;
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::{simulate, Options, RunResult};

/// Runs `examples/circuits/<name>.json`, prints average/min/max of each
/// output over the last `periods` switching periods and writes `out/<name>.svg`.
pub fn run_and_report(
    name: &str,
    title: &str,
    periods: f64,
) -> Result<(Circuit, RunResult), Box<dyn std::error::Error>> {
    let path = format!(
        "{}/examples/circuits/{name}.json",
        env!("CARGO_MANIFEST_DIR")
    );
    let circuit = Circuit::from_file(&path)?;
    let cfg = circuit
        .run
        .clone()
        .ok_or("the circuit file has no run section")?;
    let run = simulate(&circuit, cfg.stop_time, Options::default())?;
    let w = &run.waveform;
    let (_, end) = w.span().ok_or("nothing recorded")?;
    let period = circuit
        .signals()
        .iter()
        .find_map(|(_, s)| s.period)
        .unwrap_or(end / 10.0);
    let (t0, t1) = ((end - periods * period).max(0.0), end);
    println!(
        "{title}: last {periods} periods, {:.2} µs … {:.2} µs",
        t0 * 1e6,
        t1 * 1e6
    );
    println!(
        "  {:<24} {:>12} {:>12} {:>12} {:>12}",
        "output", "average", "min", "max", "peak-peak"
    );
    for o in &cfg.outputs {
        let id = w.output(o)?;
        let pts = w.vertices(id, t0, t1, 16);
        let (lo, hi) = pts
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
                (l.min(p.1), h.max(p.1))
            });
        println!(
            "  {:<24} {:>12.5} {:>12.5} {:>12.5} {:>12.5}",
            o,
            w.average(id, t0, t1),
            lo,
            hi,
            hi - lo
        );
    }
    println!("  events: {}, modes: {}", run.events.len(), run.stats.modes);
    let opts = ReviewOptions {
        outputs: cfg.outputs.clone(),
        window: Some((t0, t1)),
        ..ReviewOptions::default()
    };
    let fig = review_figure(title, w, Some(&run.events), &opts)?;
    std::fs::create_dir_all("out")?;
    let svg = format!("out/{name}.svg");
    write_svg(&fig, &svg)?;
    println!("  figure written to {svg}");
    Ok((circuit, run))
}
