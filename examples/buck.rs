//! The main job: an asynchronous buck (24 V → ~12 V at 200 kHz) run to
//! steady state; prints ripple, peak, valley, conduction mode and output
//! voltage, and writes `out/buck.svg` (inductor current, switch node, output).

use fluxstep::netlist::Circuit;
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::{simulate, EventKind, Options};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/examples/circuits/buck.json");
    let circuit = Circuit::from_file(path)?;
    let run_cfg = circuit.run.clone().ok_or("buck.json has no run section")?;
    let run = simulate(&circuit, run_cfg.stop_time, Options::default())?;
    let w = &run.waveform;
    let period = circuit
        .signals()
        .iter()
        .find_map(|(_, s)| s.period)
        .ok_or("no PWM gate")?;
    let (_, end) = w.span().ok_or("nothing recorded")?;
    let (t0, t1) = (end - 5.0 * period, end);
    let il = w.output("L1.current")?;
    let out = w.output("out")?;
    let pts = w.vertices(il, t0, t1, 8);
    let (lo, hi) = pts
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
            (l.min(p.1), h.max(p.1))
        });
    let zero_current_turn_offs = run
        .events
        .of_kind(EventKind::DiodeOff)
        .filter(|e| {
            e.time > t0
                && run
                    .events
                    .of_kind(EventKind::SwitchOn)
                    .all(|s| s.time != e.time)
        })
        .count();
    println!(
        "buck, last 5 periods ({:.1} µs … {:.1} µs)",
        t0 * 1e6,
        t1 * 1e6
    );
    println!(
        "  output voltage (average)   {:8.4} V",
        w.average(out, t0, t1)
    );
    println!(
        "  inductor current average   {:8.4} A",
        w.average(il, t0, t1)
    );
    println!("  inductor current peak      {:8.4} A", hi);
    println!("  inductor current valley    {:8.4} A", lo);
    println!("  ripple peak-to-peak        {:8.4} A", hi - lo);
    println!(
        "  conduction                 {}",
        if zero_current_turn_offs == 0 {
            "continuous"
        } else {
            "discontinuous"
        }
    );
    println!("  events {} (modes {})", run.events.len(), run.stats.modes);
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into(), "out".into()],
        window: Some((t0, t1)),
        ..ReviewOptions::default()
    };
    let fig = review_figure(
        "asynchronous buck, steady state",
        w,
        Some(&run.events),
        &opts,
    )?;
    std::fs::create_dir_all("out")?;
    write_svg(&fig, "out/buck.svg")?;
    println!("  figure written to out/buck.svg");
    Ok(())
}
