//! to_json → from_json gives back an equal circuit, with every f64 the
//! same bits (checked directly on awkward values and, for whole circuits,
//! through the text: the shortest representation that reads back exactly
//! is unique per value, so equal text means equal bits).

use fluxstep_netlist::*;

use crate::common::buck;

/// Values whose decimal form is easy to get wrong.
const AWKWARD: &[f64] = &[
    0.1 + 0.2,
    1.0 / 3.0,
    4.7e-9,
    22e-6,
    -0.0,
    5e-324,
    2.2250738585072014e-308,
    1.7976931348623157e308,
    123456789.12345679,
    -2.5e-15,
];

/// One element of every kind with every optional field set.
pub fn every_kind() -> Circuit {
    let model = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: Some(0.05),
        recovered_charge: None,
    };
    let points: Vec<(f64, f64)> = AWKWARD
        .iter()
        .enumerate()
        .map(|(i, &v)| (i as f64 * 1e-6, v))
        .collect();
    let windings = vec![
        Winding {
            name: "pri".into(),
            nodes: ["in".into(), "sw".into()],
            inductance: 200e-6,
            initial_current: Some(0.1 + 0.2),
        },
        Winding {
            name: "sec".into(),
            nodes: ["gnd".into(), "sec".into()],
            inductance: 12.5e-6,
            initial_current: None,
        },
    ];
    Circuit::builder()
        .description("every element kind, for the round trip")
        .voltage_waveform("Vin", "in", "gnd", Stimulus::pwl(&points))
        .current_source(
            "I1",
            "gnd",
            "out",
            Stimulus::sine(1.0 / 3.0, 0.5, 50.0, -std::f64::consts::FRAC_PI_2),
        )
        .element(Element::CoupledInductors(CoupledInductors {
            name: "T1".into(),
            windings,
            couplings: vec![Coupling {
                windings: ["pri".into(), "sec".into()],
                k: Some(0.99),
                mutual: None,
            }],
        }))
        .element(Element::IdealTransformer(IdealTransformer {
            name: "X1".into(),
            primary: ["in".into(), "gnd".into()],
            secondary: ["aux".into(), "gnd".into()],
            turns_ratio: 4.0,
        }))
        .transistor("Q1", "sw", "gnd", "hb.low", 0.01, model.clone())
        .switch("S1", "in", "sw", "hb.high")
        .diode_model("D1", "sec", "out", model)
        .diode("D2", "aux", "out")
        .inductor_with_current("L1", "out", "gnd", 22e-6, -0.0)
        .capacitor_with_voltage("C1", "out", "gnd", 4.7e-9, 12.0)
        .resistor("R1", "aux", "gnd", 1e3)
        .gate(Gate::ComplementaryPwm {
            name: "hb".into(),
            frequency: 200e3,
            duty: 0.3,
            delay: 1e-7,
            dead_time_high: 50e-9,
            dead_time_low: 30e-9,
            start: Some(1e-6),
            stop: Some(1e-3),
        })
        .gate(Gate::Pwm {
            name: "spare".into(),
            frequency: 1e6,
            duty: 0.1,
            delay: 0.0,
            start: None,
            stop: Some(2e-3),
        })
        .gate(Gate::Transitions {
            name: "burst".into(),
            initial: true,
            transitions: vec![
                Transition {
                    time: 0.0,
                    on: true,
                },
                Transition {
                    time: 1e-6,
                    on: false,
                },
            ],
            period: Some(5e-6),
        })
        .run(1e-3, &["L1.current", "T1.pri.current", "out"])
        .build_unchecked()
}

#[test]
fn buck_round_trip() {
    let c = buck()
        .run(2e-3, &["L1.current", "sw", "out"])
        .build()
        .unwrap();
    let text = c.to_json();
    let back = Circuit::from_json(&text).unwrap();
    assert_eq!(back, c);
    assert_eq!(back.to_json(), text);
}

#[test]
fn every_kind_round_trips_exactly() {
    let c = every_kind();
    let text = c.to_json();
    let back = Circuit::from_json_unchecked(&text).unwrap();
    assert_eq!(back, c);
    assert_eq!(back.to_json(), text);
}

#[test]
fn awkward_values_keep_their_bits() {
    let back = Circuit::from_json_unchecked(&every_kind().to_json()).unwrap();
    let Element::VoltageSource(v) = &back.elements[0] else {
        panic!("Vin first")
    };
    let Stimulus::PiecewiseLinear { points, .. } = &v.waveform else {
        panic!("a pwl source")
    };
    for (p, expected) in points.iter().zip(AWKWARD) {
        assert_eq!(p.value.to_bits(), expected.to_bits(), "{expected:e}");
    }
    let Element::Inductor(l) = back.element("L1").unwrap() else {
        panic!("L1 is an inductor")
    };
    // −0.0 == 0.0 for `==`; the sign bit must survive too.
    assert_eq!(l.initial_current.unwrap().to_bits(), (-0.0f64).to_bits());
}

#[test]
fn the_every_kind_circuit_is_itself_valid() {
    // So that the round trip above exercises a realistic circuit, not only
    // a bag of fields.
    crate::common::valid(&every_kind());
}

/// Every closed-loop gate kind and every compensator law, with awkward
/// values and every optional field set away from its default.
pub fn closed_loop() -> Circuit {
    let mut c = Circuit::builder()
        .description("every closed-loop gate and compensator law, for the round trip")
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "pc")
        .switch("S2", "in", "sw", "vc")
        .switch("S3", "in", "sw", "hy")
        .switch("S4", "in", "sw", "vm")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 4.7e-9)
        .resistor("Rload", "out", "gnd", 1.0 / 3.0)
        .gate(Gate::PeakCurrent {
            name: "pc".into(),
            frequency: 200e3,
            sense: "L1.current".into(),
            reference: 0.1 + 0.2,
            slope: 123456789.12345679,
            max_duty: 0.9,
        })
        .gate(Gate::ValleyCurrent {
            name: "vc".into(),
            frequency: 1.0 / 3.0 * 1e6,
            sense: "L1.current".into(),
            reference: -0.0,
            slope: 2.5e-15,
        })
        .gate(Gate::Hysteretic {
            name: "hy".into(),
            sense: "out".into(),
            low: 4.975,
            high: 5.025,
        })
        .gate(Gate::VoltageMode {
            name: "vm".into(),
            frequency: 150e3,
            control: "K2.output".into(),
            ramp_low: 0.1 + 0.2,
            ramp_high: 1.8,
            min_duty: 0.05,
            max_duty: 0.95,
        })
        .run(1e-3, &["L1.current", "out", "K1.output", "K2.output"])
        .build_unchecked();
    c.compensators = vec![
        Compensator {
            name: "K1".into(),
            input: "out".into(),
            reference: 3.3,
            law: CompensatorLaw::Pi {
                kp: 1.0 / 3.0,
                ki: 22e-6,
            },
        },
        Compensator {
            name: "K2".into(),
            input: "out".into(),
            reference: 5.0,
            law: CompensatorLaw::PolesZeros {
                gain: 2199.1,
                integrator: false,
                zeros_hz: vec![0.1 + 0.2, 1.5e3],
                poles_hz: vec![60e3, 1.0 / 3.0 * 1e5],
            },
        },
        Compensator {
            name: "K3".into(),
            input: "L1.current".into(),
            reference: -2.5e-15,
            law: CompensatorLaw::StateSpace {
                a: vec![vec![0.0, 1.0], vec![-4e10, -1.0 / 3.0]],
                b: vec![5e-324, 1.0],
                c: vec![1.7976931348623157e308, -0.0],
                d: 0.1 + 0.2,
            },
        },
    ];
    c
}

#[test]
fn closed_loop_gates_and_compensators_round_trip_exactly() {
    let c = closed_loop();
    crate::common::valid(&c);
    let text = c.to_json();
    // Each kind and law appears under its JSON tag.
    for tag in [
        "\"peak_current\"",
        "\"valley_current\"",
        "\"hysteretic\"",
        "\"voltage_mode\"",
        "\"pi\"",
        "\"poles_zeros\"",
        "\"state_space\"",
    ] {
        assert!(text.contains(tag), "{tag} missing from\n{text}");
    }
    let back = Circuit::from_json(&text).unwrap();
    assert_eq!(back, c);
    assert_eq!(back.to_json(), text);
    // Bits, not only values: −0.0 and the smallest subnormal survive.
    let CompensatorLaw::StateSpace { b, c: cv, .. } = &back.compensators[2].law else {
        panic!("K3 is a state space")
    };
    assert_eq!(b[0].to_bits(), 5e-324f64.to_bits());
    assert_eq!(cv[1].to_bits(), (-0.0f64).to_bits());
    let Gate::ValleyCurrent { reference, .. } = &back.gates[1] else {
        panic!("vc is a valley-current gate")
    };
    assert_eq!(reference.to_bits(), (-0.0f64).to_bits());
}

#[test]
fn closed_loop_defaults_are_filled_in() {
    // Left out: slope 0 and max_duty 1 (peak current), ramp_low 0 and
    // min_duty 0 and max_duty 1 (voltage mode), integrator true and no
    // zeros (poles and zeros), d 0 (state space).
    let text = r#"{
      "elements": [
        {"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"],
         "waveform": {"kind": "constant", "value": "12"}},
        {"kind": "switch", "name": "S1", "nodes": ["in", "sw"], "gate": "pc"},
        {"kind": "switch", "name": "S2", "nodes": ["in", "sw"], "gate": "vm"},
        {"kind": "diode", "name": "D1", "nodes": ["gnd", "sw"]},
        {"kind": "inductor", "name": "L1", "nodes": ["sw", "out"], "inductance": "22u"},
        {"kind": "capacitor", "name": "C1", "nodes": ["out", "gnd"], "capacitance": "47u"},
        {"kind": "resistor", "name": "Rload", "nodes": ["out", "gnd"], "resistance": "6"}
      ],
      "gates": [
        {"kind": "peak_current", "name": "pc", "frequency": "100k", "sense": "L1.current",
         "reference": "2"},
        {"kind": "voltage_mode", "name": "vm", "frequency": "100k", "control": "K.output",
         "ramp_high": "1"}
      ],
      "compensators": [
        {"name": "K", "input": "out", "reference": "5",
         "law": {"kind": "poles_zeros", "gain": 100, "poles_hz": [20000]}},
        {"name": "K2", "input": "out", "reference": "5",
         "law": {"kind": "state_space", "a": [[-1000]], "b": [1], "c": [1]}}
      ]
    }"#;
    let c = Circuit::from_json(text).unwrap();
    assert_eq!(
        c.gates[0],
        Gate::PeakCurrent {
            name: "pc".into(),
            frequency: 100e3,
            sense: "L1.current".into(),
            reference: 2.0,
            slope: 0.0,
            max_duty: 1.0,
        }
    );
    assert_eq!(
        c.gates[1],
        Gate::VoltageMode {
            name: "vm".into(),
            frequency: 100e3,
            control: "K.output".into(),
            ramp_low: 0.0,
            ramp_high: 1.0,
            min_duty: 0.0,
            max_duty: 1.0,
        }
    );
    assert_eq!(
        c.compensators[0].law,
        CompensatorLaw::PolesZeros {
            gain: 100.0,
            integrator: true,
            zeros_hz: vec![],
            poles_hz: vec![20e3],
        }
    );
    assert_eq!(
        c.compensators[1].law,
        CompensatorLaw::StateSpace {
            a: vec![vec![-1e3]],
            b: vec![1.0],
            c: vec![1.0],
            d: 0.0,
        }
    );
    let back = Circuit::from_json(&c.to_json()).unwrap();
    assert_eq!(back, c);
}
