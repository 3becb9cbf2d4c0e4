//! An inductor current interrupted with no path: the run stops with a
//! diagnostic naming the switch, the inductor, the current and the stored
//! energy; the same circuit with a freewheeling diode runs on.
//!
//! Caution: in hardware this is the voltage spike that arcs a contact or
//! destroys a transistor. Simulation does not replace measurement, local
//! electrical codes or qualified review.

use fluxstep::netlist::Circuit;
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::{simulate, Options};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/circuits/interrupted_inductor.json"
    );
    let circuit = Circuit::from_file(path)?;
    let stop = circuit.run.as_ref().map(|r| r.stop_time).unwrap_or(1e-3);
    match simulate(&circuit, stop, Options::default()) {
        Err(e) => println!("without a freewheeling path the run stops:\n  {e}"),
        Ok(_) => println!("unexpected: the run finished"),
    }
    // The fix: a freewheeling diode from the switch node back to the supply,
    // so the inductor current can circulate through R1 when S1 opens.
    let switch = circuit
        .elements
        .iter()
        .find_map(|e| match e {
            fluxstep::netlist::Element::Switch(s) => Some(s.clone()),
            _ => None,
        })
        .ok_or("no switch in the circuit")?;
    let mut fixed = circuit.clone();
    let builder = Circuit::builder().diode("Dfw", &switch.nodes[0], "in");
    fixed.elements.extend(builder.build_unchecked().elements);
    fixed.validate()?;
    let run = simulate(&fixed, stop, Options::default())?;
    let w = &run.waveform;
    let id = w.output("Dfw.current")?;
    let t_open = run
        .events
        .iter()
        .find(|e| e.element == switch.name)
        .map(|e| e.time)
        .ok_or("the switch never opened")?;
    println!("with a freewheeling diode Dfw the run goes on:");
    println!("  the switch opens at {:.3} µs", t_open * 1e6);
    println!(
        "  diode current just after: {:.6} A",
        w.value(id, t_open).unwrap_or(f64::NAN)
    );
    let outputs: Vec<String> = circuit
        .run
        .as_ref()
        .map(|r| r.outputs.clone())
        .unwrap_or_default();
    let opts = ReviewOptions {
        outputs,
        event_markers: true,
        ..ReviewOptions::default()
    };
    let fig = review_figure(
        "interrupted inductor, fixed with a freewheeling diode",
        w,
        Some(&run.events),
        &opts,
    )?;
    std::fs::create_dir_all("out")?;
    write_svg(&fig, "out/interrupted_inductor.svg")?;
    println!("  figure written to out/interrupted_inductor.svg");
    Ok(())
}
