//! Helpers shared by the unit tests.

/// A repeatable uniform generator on [0, 1) (xorshift64, 53 bits), so that
/// randomised tests see the same cases on every machine.
pub(crate) fn uniform(mut seed: u64) -> impl FnMut() -> f64 {
    move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// A buck at light load whose diode turns off inside every period
/// (12 V, 250 kHz, D = 0.25, 2.2 µH, 470 µF, 30 Ω: discontinuous
/// conduction; demo values), its output capacitor starting at `v0`.
pub(crate) fn light_buck(v0: f64) -> fluxstep_netlist::Circuit {
    fluxstep_netlist::Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "ph1")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 2.2e-6)
        .capacitor_with_voltage("Cout", "out", "gnd", 470e-6, v0)
        .resistor("Rload", "out", "gnd", 30.0)
        .pwm("ph1", 250e3, 0.25)
        .build()
        .expect("valid")
}

/// An interleaved buck's values (demo values): `phases` phases of
/// frequency `f` and duty `duty`, phase k delayed by (k − 1)/(phases·f),
/// each with its own switch, freewheeling diode and inductor `l` (from
/// `i0` where given), from `vin` into one capacitor `c` (from `v0`) and
/// load `r`.
pub(crate) struct Interleaved {
    pub phases: usize,
    pub f: f64,
    pub duty: f64,
    pub vin: f64,
    pub l: f64,
    pub i0: Option<f64>,
    pub c: f64,
    pub v0: f64,
    pub r: f64,
}

/// The interleaved buck of `p`, phase k (from 1) held off before and
/// after the times `limits(k)` gives.
pub(crate) fn interleaved_buck(
    p: Interleaved,
    limits: impl Fn(usize) -> (Option<f64>, Option<f64>),
) -> fluxstep_netlist::Circuit {
    use fluxstep_netlist::Gate;
    let mut b = fluxstep_netlist::Circuit::builder().voltage_source("Vin", "in", "gnd", p.vin);
    for k in 1..=p.phases {
        let (sw, l) = (format!("sw{k}"), format!("L{k}"));
        b = b
            .switch(&format!("S{k}"), "in", &sw, &format!("ph{k}"))
            .diode(&format!("D{k}"), "gnd", &sw);
        b = match p.i0 {
            Some(i0) => b.inductor_with_current(&l, &sw, "out", p.l, i0),
            None => b.inductor(&l, &sw, "out", p.l),
        };
        let (start, stop) = limits(k);
        b = b.gate(Gate::Pwm {
            name: format!("ph{k}"),
            frequency: p.f,
            duty: p.duty,
            delay: (k - 1) as f64 / (p.phases as f64 * p.f),
            start,
            stop,
        });
    }
    b.capacitor_with_voltage("Cout", "out", "gnd", p.c, p.v0)
        .resistor("Rload", "out", "gnd", p.r)
        .build()
        .expect("valid")
}

/// A synchronous buck with dead times and body diodes (24 V → 12 V,
/// 200 kHz, 22 µH, 47 µF, 6 Ω; demo values), from rest (`None`) or from
/// (inductor current, capacitor voltage); with `ramps`, transition models
/// on both transistors.
pub(crate) fn sync_buck(start: Option<(f64, f64)>, ramps: bool) -> fluxstep_netlist::Circuit {
    use fluxstep_netlist::{Circuit, DiodeModel, Element, SwitchTransition, TransitionRates};
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    let b = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
        .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body);
    let b = match start {
        None => b
            .inductor("L1", "sw", "out", 22e-6)
            .capacitor("C1", "out", "gnd", 47e-6),
        Some((i0, v0)) => b
            .inductor_with_current("L1", "sw", "out", 22e-6, i0)
            .capacitor_with_voltage("C1", "out", "gnd", 47e-6, v0),
    };
    let mut c = b
        .resistor("R", "out", "gnd", 6.0)
        .complementary_pwm("hb", 200e3, 0.5, 50e-9, 80e-9)
        .build()
        .expect("valid");
    if ramps {
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

/// Every example circuit, with a run time that reaches its steady
/// behaviour (the unit tests' shared list).
pub(crate) const EXAMPLES: [(&str, f64); 13] = [
    ("buck.json", 1e-3),
    ("buck_dcm.json", 1e-3),
    ("boost.json", 1e-3),
    ("sync_buck.json", 1e-3),
    ("flyback.json", 2e-3),
    ("rectifier.json", 40e-3),
    ("peak_current_buck.json", 1e-3),
    ("hysteretic_buck.json", 1e-3),
    ("voltage_mode_buck.json", 2e-3),
    ("buck_boost.json", 1e-3),
    ("three_phase_bridge.json", 40e-3),
    ("interleaved_buck_12.json", 20e-6),
    ("three_phase_inverter.json", 20e-3),
];

/// An example circuit file of the repository (examples/circuits).
pub(crate) fn example(file: &str) -> fluxstep_netlist::Circuit {
    let path = format!(
        "{}/../../examples/circuits/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    fluxstep_netlist::Circuit::from_file(path).expect("example circuit is valid")
}
