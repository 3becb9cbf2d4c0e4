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
        .voltage_waveform("Vin", "in", "gnd", Waveform::pwl(&points))
        .current_source(
            "I1",
            "gnd",
            "out",
            Waveform::sine(1.0 / 3.0, 0.5, 50.0, -std::f64::consts::FRAC_PI_2),
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
    let Waveform::PiecewiseLinear { points, .. } = &v.waveform else {
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
