use fluxstep_netlist::Circuit;
use fluxstep_solver::{simulate, Options};
#[test]
fn scratch_buck() {
    let buck = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 100e-6)
        .capacitor("C1", "out", "gnd", 100e-6)
        .resistor("Rload", "out", "gnd", 5.0)
        .pwm("drive", 100e3, 0.5)
        .build()
        .unwrap();
    let run = simulate(&buck, 2e-3, Options::default());
    match &run { Err(e) => println!("ERR {e}"), Ok(r) => { println!("{:?} segs {}", r.stats, r.waveform.segments().len()); for e in r.events.events.iter().take(12) { println!("{:e} {:?} {} {:?}", e.time, e.kind, e.element, e.after); } } }
    let r = run.unwrap();
    let out = r.waveform.output("out").unwrap();
    println!("avg {}", r.waveform.average(out, 1.9e-3, 2e-3));
}
