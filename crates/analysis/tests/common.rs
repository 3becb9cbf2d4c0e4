//! Circuits shared by the analysis tests.

use std::path::PathBuf;

use fluxstep_netlist::{Circuit, Gate};

/// An example circuit of the repository by file name.
pub fn example(name: &str) -> Circuit {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../../examples/circuits")
        .join(name);
    Circuit::from_file(&path).unwrap_or_else(|e| panic!("{name}: {e}"))
}

/// A peak-current-controlled buck into a stiff output (a voltage source
/// `vo`), so the inductor current is the only state: 12 V in, 22 µH,
/// 100 kHz, peak reference `reference` (A), compensation ramp `slope` (A/s).
pub fn peak_current_stiff(vo: f64, reference: f64, slope: f64) -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "pc")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .voltage_source("Vo", "out", "gnd", vo)
        .gate(Gate::PeakCurrent {
            name: "pc".into(),
            frequency: 100e3,
            sense: "L1.current".into(),
            reference,
            slope,
            max_duty: 0.95,
        })
        .build()
        .expect("valid")
}
