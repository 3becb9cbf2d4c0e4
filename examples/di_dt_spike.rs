//! v = L·di/dt: 10 A switched off in 10 ns through 10 nH of wiring
//! inductance gives 10 V across the wiring. Prints the voltage during the
//! fall and writes out/di_dt_spike.svg.
//!
//! Caution: real wiring spikes add to the supply voltage across a
//! transistor; simulation does not replace measurement or qualified review.

use fluxstep::netlist::{Circuit, Stimulus};
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::{simulate, Options};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    // The load current is forced by a current source: 10 A, falling to 0
    // between 100 ns and 110 ns, through 10 nH of wiring.
    let c = Circuit::builder()
        .current_source(
            "Iload",
            "gnd",
            "a",
            Stimulus::pwl(&[(0.0, 10.0), (100e-9, 10.0), (110e-9, 0.0)]),
        )
        .inductor_with_current("Lwire", "a", "gnd", 10e-9, 10.0)
        .build()?;
    let run = simulate(&c, 200e-9, Options::default())?;
    let w = &run.waveform;
    let v = w.output("Lwire.voltage")?;
    let i = w.output("Lwire.current")?;
    println!("10 nH wiring, 10 A → 0 in 10 ns:");
    for t in [50e-9, 105e-9, 150e-9] {
        println!(
            "  t = {:5.1} ns: current {:6.3} A, voltage across the wiring {:7.3} V",
            t * 1e9,
            w.value(i, t).unwrap_or(f64::NAN),
            w.value(v, t).unwrap_or(f64::NAN)
        );
    }
    let opts = ReviewOptions {
        outputs: vec!["Lwire.current".into(), "Lwire.voltage".into()],
        ripple: false,
        ..ReviewOptions::default()
    };
    let fig = review_figure("di/dt across 10 nH of wiring", w, Some(&run.events), &opts)?;
    std::fs::create_dir_all("out")?;
    write_svg(&fig, "out/di_dt_spike.svg")?;
    println!("  figure written to out/di_dt_spike.svg");
    Ok(())
}
