//! A synchronous buck with a complementary gate pair and dead time: prints
//! the usual numbers, then the event sequence around one dead time
//! (high-side off → low-side body diode on → low-side switch on) and the
//! switch-node voltage during it; writes out/sync_buck.svg.

mod common;

use fluxstep::solver::EventKind;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let (circuit, run) =
        common::run_and_report("sync_buck", "synchronous buck with dead time", 3.0)?;
    let w = &run.waveform;
    let (_, end) = w.span().ok_or("nothing recorded")?;
    // The high-side switch is the one whose first terminal is the input.
    let high = circuit
        .elements
        .iter()
        .find_map(|e| match e {
            fluxstep::netlist::Element::Switch(s) if s.gate.ends_with(".high") => {
                Some(s.name.clone())
            }
            _ => None,
        })
        .ok_or("no switch driven by a .high signal")?;
    let last_off = run
        .events
        .iter()
        .rev()
        .find(|e| e.kind == EventKind::SwitchOff && e.time < end * 0.999 && e.element == high)
        .ok_or("no high-side turn-off found")?
        .time;
    println!(
        "  events around the dead time after {:.4} µs:",
        last_off * 1e6
    );
    for e in run
        .events
        .iter()
        .filter(|e| e.time >= last_off && e.time < last_off + 200e-9)
    {
        println!("    {:>12.4} µs  {:?} {}", e.time * 1e6, e.kind, e.element);
    }
    let sw = w.output("sw")?;
    if let Ok(v) = w.value(sw, last_off + 1e-9) {
        println!("  switch node 1 ns into the dead time: {v:.4} V");
    }
    Ok(())
}
