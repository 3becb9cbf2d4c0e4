//! Timing regression, our own demo: a synchronous buck (24 V to 12 V,
//! 200 kHz) whose controller change shortens the dead time before the
//! high side turns on from 50 ns to 25 ns. A timing rule (at least 40 ns)
//! and a golden event-log comparison both catch it, in the words a test
//! failure would print.
//!
//! ```sh
//! cargo run --release --example timing_regression
//! ```

use fluxstep::analysis::timing::{check, describe_comparison};
use fluxstep::netlist::{Circuit, DiodeModel, TimingCheck, TimingRule};
use fluxstep::solver::{simulate, Options, Tolerances};

const T: f64 = 5e-6;

fn buck(dead_time_high: f64) -> Circuit {
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
        .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body)
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("Rload", "out", "gnd", 6.0)
        .complementary_pwm("hb", 1.0 / T, 0.5, dead_time_high, 50e-9)
        .build()
        .expect("a valid circuit")
}

fn main() {
    let stop = 2e-3; // 400 periods
    let golden = simulate(&buck(50e-9), stop, Options::default())
        .expect("the golden run")
        .events;
    let changed = simulate(&buck(25e-9), stop, Options::default())
        .expect("the changed run")
        .events;
    let rules = [
        TimingRule::new(TimingCheck::DeadTime {
            switches: ["Q1".into(), "Q2".into()],
            min: 40e-9,
        })
        .named("bridge dead time"),
        TimingRule::new(TimingCheck::DiodeConduction {
            diode: "Q2.body_diode".into(),
            max: 120e-9,
        })
        .named("body diode conduction"),
    ];
    for (label, log) in [
        ("before the change", &golden),
        ("after the change", &changed),
    ] {
        println!("{label}:");
        let report = check(&rules, log, None, Some(T)).expect("rules evaluate");
        for r in &report.rules {
            println!("  {}", r.sentence);
        }
    }
    let c = changed
        .compare(&golden, &Tolerances::absolute(1e-9))
        .expect("the same circuit");
    println!(
        "golden comparison (1 ns allowed):\n  {}",
        describe_comparison(&c)
    );
}
