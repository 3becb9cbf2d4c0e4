//! Finite switching transitions against ideal switches: a synchronous
//! buck (24 V → 12 V, 200 kHz, 50 ns / 80 ns dead times, body diodes)
//! with the clamped inductive switching model on both transistors, and
//! the same converter with ideal switches, events per second of each in
//! the same process.
//!
//! ```sh
//! cargo bench --bench transitions
//! ```
//!
//! The high-side transistor switches hard at both edges (two ramps and a
//! located clamp each); the low side turns on and off at zero voltage
//! into its body diode, so its model adds nothing. Wall time is the
//! minimum of several runs (the machines are shared).

use std::time::Instant;

use fluxstep_netlist::{Circuit, DiodeModel, Element, SwitchTransition, TransitionRates};
use fluxstep_solver::{simulate, Options, Record, Stats};

const T: f64 = 5e-6;
const PERIODS: f64 = 20_000.0;

fn buck(transitions: bool) -> Circuit {
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
        .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body)
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("R", "out", "gnd", 6.0)
        .complementary_pwm("hb", 1.0 / T, 0.5, 50e-9, 80e-9)
        .build()
        .unwrap();
    if transitions {
        for e in &mut c.elements {
            if let Element::Switch(s) = e {
                s.transition = Some(SwitchTransition {
                    turn_off: TransitionRates {
                        voltage_rate: 24.0 / 10e-9,
                        current_rate: 2.0 / 5e-9,
                    },
                    turn_on: TransitionRates {
                        voltage_rate: 24.0 / 12e-9,
                        current_rate: 2.0 / 6e-9,
                    },
                });
            }
        }
    }
    c
}

/// (events, best seconds, counters) over `reps` runs.
fn measure(c: &Circuit, reps: usize) -> (usize, f64, Stats) {
    let mut best = f64::INFINITY;
    let mut events = 0;
    let mut stats = Stats::default();
    for _ in 0..reps {
        let opts = Options {
            record: Record::All,
            ..Options::default()
        };
        let start = Instant::now();
        let run = simulate(c, PERIODS * T, opts).expect("the buck runs");
        best = best.min(start.elapsed().as_secs_f64());
        events = run.events.len();
        stats = run.stats;
    }
    (events, best, stats)
}

fn main() {
    // `cargo bench` passes `--bench`; a filter argument is ignored.
    let reps = 5;
    let (ideal_events, ideal_s, ideal_stats) = measure(&buck(false), reps);
    let (ramp_events, ramp_s, ramp_stats) = measure(&buck(true), reps);
    let ideal_rate = ideal_events as f64 / ideal_s;
    let ramp_rate = ramp_events as f64 / ramp_s;
    println!(
        "ideal switches:       {ideal_events} events in {:.3} ms, {:.3e} events/s",
        ideal_s * 1e3,
        ideal_rate
    );
    println!(
        "with transitions:     {ramp_events} events in {:.3} ms, {:.3e} events/s",
        ramp_s * 1e3,
        ramp_rate
    );
    println!("counters, ideal:       {ideal_stats:?}");
    println!("counters, transitions: {ramp_stats:?}");
    println!(
        "ratio of events/s:    {:.1} % (periods/s: {:.1} %)",
        100.0 * ramp_rate / ideal_rate,
        100.0 * ideal_s / ramp_s
    );
}
