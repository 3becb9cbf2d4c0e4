//! The converters both benchmark programs run (`solver.rs`, `once.rs`).

// Each program uses only part of this module.
#![allow(dead_code)]

use fluxstep_netlist::Circuit;

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
