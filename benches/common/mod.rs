//! The converters both benchmark programs run (`solver.rs`, `once.rs`),
//! and the command-line words of the programs that take them.

// Each program uses only part of this module.
#![allow(dead_code)]

use fluxstep_netlist::{Circuit, Gate};
use fluxstep_solver::control::{Apply, Commands, Sampling};
use fluxstep_solver::{Options, Record, RunResult, Simulator};

/// The plain words of a benchmark's command line (`cargo bench` passes
/// `--bench`, and filters start with `-` too): only these select a run.
pub fn plain_words(args: &[String]) -> Vec<&str> {
    args.iter()
        .map(String::as_str)
        .filter(|a| !a.starts_with('-'))
        .collect()
}

/// Switching periods per run.
pub const PERIODS: u64 = 10_000;

/// Asynchronous buck starting at (inductor current, capacitor voltage).
pub fn buck(l: f64, r: f64, i0: f64, v0: f64) -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", l, i0)
        .capacitor_with_voltage("C1", "out", "gnd", 100e-6, v0)
        .resistor("Rload", "out", "gnd", r)
        .pwm("drive", 100e3, 0.4)
        .build()
        .expect("benchmark circuit is valid")
}

/// Continuous conduction near steady state: Vout ≈ D·Vin = 4.8 V,
/// I ≈ Vout/R = 2.4 A.
pub fn buck_ccm() -> Circuit {
    buck(47e-6, 2.0, 2.4, 4.8)
}

/// Discontinuous conduction near steady state: M = 2/(1 + √(1 + 4K/D²)),
/// K = 2L/(R·T) = 0.04, so Vout ≈ 0.828·12 V ≈ 9.94 V; the inductor
/// current starts each period at zero.
pub fn buck_dcm() -> Circuit {
    buck(10e-6, 50.0, 0.0, 9.94)
}

/// Switching period of the closed-loop runs (s).
pub const T: f64 = 10e-6;

/// The CCM buck with its PWM duty left to a controller.
pub fn digital_pi_buck() -> Circuit {
    let mut c = buck_ccm();
    c.gates = vec![Gate::Pwm {
        name: "drive".into(),
        frequency: 1.0 / T,
        duty: 0.4,
        delay: 0.0,
        start: None,
        stop: None,
    }];
    c.validate().expect("benchmark circuit is valid");
    c
}

/// A discrete PI regulating the output to 4.8 V: sampled at each period
/// start, 1 µs computation delay, the new duty applied at the next period.
pub fn run_digital_pi(circuit: &Circuit, record: Record) -> RunResult {
    let opts = Options {
        record,
        ..Options::default()
    };
    let mut sim = Simulator::new(circuit, opts).expect("compiles");
    let (kp, ki) = (0.01, 200.0);
    let mut integral = 0.4;
    let pi = move |_t: f64, y: &[Option<f64>], cmd: &mut Commands| {
        let e = 4.8 - y[0].expect("the output node is always determined");
        integral = (integral + ki * T * e).clamp(0.0, 0.9);
        cmd.set_duty("drive", (kp * e + integral).clamp(0.0, 0.9));
    };
    let sampling = Sampling {
        inputs: vec!["out".into()],
        period: T,
        offset: 0.0,
        delay: 1e-6,
        apply: Apply::NextPeriod,
    };
    sim.add_controller(sampling, Box::new(pi))
        .expect("valid sampling");
    sim.advance_to(PERIODS as f64 * T).expect("runs");
    sim.finish()
}
