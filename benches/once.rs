//! One run of a benchmark converter, for counting instructions (repeatable
//! on shared machines, unlike wall time):
//!
//! ```sh
//! cargo bench --bench once --no-run
//! valgrind --tool=callgrind target/release/deps/once-* ccm all
//! ```
//!
//! Arguments: `ccm` or `dcm` (the bucks of `benches/solver.rs`), then `all`
//! or `nothing` (what to record). Prints the events and the wall time per
//! event of this one run.

use std::time::Instant;

use fluxstep_netlist::Circuit;
use fluxstep_solver::{Options, Record, Simulator};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    // `cargo bench` passes `--bench`; only plain words select a run.
    let words: Vec<&str> = args
        .iter()
        .map(String::as_str)
        .filter(|a| !a.starts_with('-'))
        .collect();
    let dcm = words.first() == Some(&"dcm");
    let record = if words.get(1) == Some(&"nothing") {
        Record::Nothing
    } else {
        Record::All
    };
    // (L, R, initial current, initial voltage) as in benches/solver.rs.
    let (l, r, i0, v0) = if dcm {
        (10e-6, 50.0, 0.0, 9.94)
    } else {
        (47e-6, 2.0, 2.4, 4.8)
    };
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", l, i0)
        .capacitor_with_voltage("C1", "out", "gnd", 100e-6, v0)
        .resistor("Rload", "out", "gnd", r)
        .pwm("drive", 100e3, 0.4)
        .build()
        .expect("benchmark circuit is valid");
    let start = Instant::now();
    let opts = Options {
        record,
        ..Options::default()
    };
    let mut sim = Simulator::new(&c, opts).expect("compiles");
    sim.advance_periods(10_000).expect("runs");
    let run = sim.finish();
    let n = run.stats.scheduled_events + run.stats.state_events;
    let dt = start.elapsed().as_secs_f64();
    println!(
        "{} events ({} located), {:.1} ns per event",
        n,
        run.stats.state_events,
        dt * 1e9 / n as f64
    );
}
