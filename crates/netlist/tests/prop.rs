//! Generated circuits survive to_json → from_json unchanged, and
//! validation never panics on them, however wrong they are.
//!
//! The generator covers every element kind, waveform and gate with any
//! finite f64 (subnormals, −0.0 and extremes included) and any names, so
//! most generated circuits are invalid; the round trip does not care
//! (`from_json_unchecked`), and validation must still only return problems.

use fluxstep_netlist::*;
use proptest::collection::vec;
use proptest::num::f64 as pf64;
use proptest::option;
use proptest::prelude::*;

/// Any finite f64.
fn value() -> impl Strategy<Value = f64> {
    pf64::POSITIVE | pf64::NEGATIVE | pf64::NORMAL | pf64::SUBNORMAL | pf64::ZERO
}

/// Names: mostly plausible, sometimes anything (quotes, unicode, empty).
fn name() -> impl Strategy<Value = String> {
    prop_oneof![
        4 => "[A-Za-z][A-Za-z0-9_]{0,5}",
        1 => "\\PC{0,8}",
    ]
}

/// A few node names so that generated circuits share nodes.
fn node() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("gnd".to_string()),
        Just("0".to_string()),
        "n[0-4]",
        "\\PC{0,4}"
    ]
}

fn nodes() -> impl Strategy<Value = [String; 2]> {
    (node(), node()).prop_map(|(a, b)| [a, b])
}

fn waveform() -> impl Strategy<Value = Stimulus> {
    prop_oneof![
        value().prop_map(Stimulus::constant),
        (
            vec(
                (value(), value()).prop_map(|(time, value)| Point { time, value }),
                0..5
            ),
            option::of(value())
        )
            .prop_map(|(points, period)| Stimulus::PiecewiseLinear { points, period }),
        (value(), value(), value(), value()).prop_map(|(o, a, f, p)| Stimulus::sine(o, a, f, p)),
    ]
}

fn diode_model() -> impl Strategy<Value = DiodeModel> {
    (option::of(value()), option::of(value())).prop_map(|(forward_voltage, on_resistance)| {
        DiodeModel {
            forward_voltage,
            on_resistance,
            recovered_charge: None,
        }
    })
}

fn winding() -> impl Strategy<Value = Winding> {
    (name(), nodes(), value(), option::of(value())).prop_map(
        |(name, nodes, inductance, initial_current)| Winding {
            name,
            nodes,
            inductance,
            initial_current,
        },
    )
}

fn coupling() -> impl Strategy<Value = Coupling> {
    (name(), name(), option::of(value()), option::of(value())).prop_map(|(a, b, k, mutual)| {
        Coupling {
            windings: [a, b],
            k,
            mutual,
        }
    })
}

fn element() -> impl Strategy<Value = Element> {
    prop_oneof![
        (name(), nodes(), value()).prop_map(|(name, nodes, resistance)| {
            Element::Resistor(Resistor {
                name,
                nodes,
                resistance,
            })
        }),
        (
            name(),
            nodes(),
            value(),
            option::of(value()),
            option::of(value())
        )
            .prop_map(
                |(name, nodes, inductance, initial_current, winding_resistance)| {
                    Element::Inductor(Inductor {
                        name,
                        nodes,
                        inductance,
                        initial_current,
                        winding_resistance,
                        core: None,
                    })
                }
            ),
        (
            name(),
            nodes(),
            value(),
            option::of(value()),
            option::of(value())
        )
            .prop_map(|(name, nodes, capacitance, initial_voltage, esr)| {
                Element::Capacitor(Capacitor {
                    name,
                    nodes,
                    capacitance,
                    initial_voltage,
                    esr,
                })
            }),
        (name(), vec(winding(), 0..4), vec(coupling(), 0..3)).prop_map(
            |(name, windings, couplings)| Element::CoupledInductors(CoupledInductors {
                name,
                windings,
                couplings,
            })
        ),
        (name(), nodes(), nodes(), value()).prop_map(|(name, primary, secondary, turns_ratio)| {
            Element::IdealTransformer(IdealTransformer {
                name,
                primary,
                secondary,
                turns_ratio,
            })
        }),
        (name(), nodes(), waveform()).prop_map(|(name, nodes, waveform)| {
            Element::VoltageSource(VoltageSource {
                name,
                nodes,
                waveform,
            })
        }),
        (name(), nodes(), waveform()).prop_map(|(name, nodes, waveform)| {
            Element::CurrentSource(CurrentSource {
                name,
                nodes,
                waveform,
            })
        }),
        (
            name(),
            nodes(),
            name(),
            option::of(value()),
            option::of(diode_model()),
            option::of((value(), value(), value(), value()))
        )
            .prop_map(|(name, nodes, gate, on_resistance, body_diode, ramps)| {
                Element::Switch(Switch {
                    name,
                    nodes,
                    gate,
                    on_resistance,
                    body_diode,
                    thermal: None,
                    transition: ramps.map(|(a, b, c, d)| SwitchTransition {
                        turn_off: TransitionRates {
                            voltage_rate: a,
                            current_rate: b,
                        },
                        turn_on: TransitionRates {
                            voltage_rate: c,
                            current_rate: d,
                        },
                    }),
                    switching_energy: None,
                })
            }),
        (name(), nodes(), diode_model()).prop_map(|(name, nodes, model)| Element::Diode(Diode {
            name,
            nodes,
            model,
            thermal: None,
        })),
    ]
}

fn gate() -> impl Strategy<Value = Gate> {
    prop_oneof![
        (
            name(),
            value(),
            value(),
            value(),
            option::of(value()),
            option::of(value())
        )
            .prop_map(|(name, frequency, duty, delay, start, stop)| Gate::Pwm {
                name,
                frequency,
                duty,
                delay,
                start,
                stop,
            }),
        (
            name(),
            (value(), value(), value()),
            (value(), value()),
            (option::of(value()), option::of(value()))
        )
            .prop_map(
                |(
                    name,
                    (frequency, duty, delay),
                    (dead_time_high, dead_time_low),
                    (start, stop),
                )| {
                    Gate::ComplementaryPwm {
                        name,
                        frequency,
                        duty,
                        delay,
                        dead_time_high,
                        dead_time_low,
                        start,
                        stop,
                    }
                }
            ),
        (
            name(),
            any::<bool>(),
            vec(
                (value(), any::<bool>()).prop_map(|(time, on)| Transition { time, on }),
                0..4
            ),
            option::of(value())
        )
            .prop_map(|(name, initial, transitions, period)| Gate::Transitions {
                name,
                initial,
                transitions,
                period,
            }),
    ]
}

/// Timing rules of every kind, with any names and values.
fn timing_rule() -> impl Strategy<Value = TimingRule> {
    let check = prop_oneof![
        (name(), name(), value()).prop_map(|(a, b, min)| TimingCheck::DeadTime {
            switches: [a, b],
            min
        }),
        (name(), option::of(value()), option::of(value()))
            .prop_map(|(switch, min, max)| TimingCheck::OnTime { switch, min, max }),
        (name(), option::of(value()), option::of(value()))
            .prop_map(|(switch, min, max)| TimingCheck::OffTime { switch, min, max }),
        (name(), option::of(value()), option::of(value()))
            .prop_map(|(switch, min, max)| TimingCheck::SwitchingPeriod { switch, min, max }),
        vec(name(), 0..4).prop_map(|switches| TimingCheck::NoOverlap { switches }),
        (name(), value()).prop_map(|(diode, max)| TimingCheck::DiodeConduction { diode, max }),
        (name(), name(), any::<u64>()).prop_map(|(switch, diode, max_count)| {
            TimingCheck::HardTurnOn {
                switch,
                diode,
                max_count,
            }
        }),
        (
            name(),
            prop_oneof![
                Just(EdgeSense::On),
                Just(EdgeSense::Off),
                Just(EdgeSense::Both)
            ],
            value()
        )
            .prop_map(|(switch, edge, max)| TimingCheck::EdgeDelay { switch, edge, max }),
        ("\\PC{0,12}", value(), value()).prop_map(|(output, min, max)| TimingCheck::Band {
            output,
            min,
            max
        }),
    ];
    (name(), option::of(value()), option::of(value()), check).prop_map(|(name, from, to, check)| {
        TimingRule {
            name,
            from,
            to,
            check,
        }
    })
}

fn run() -> impl Strategy<Value = RunSettings> {
    (
        vec(timing_rule(), 0..3),
        (
            value(),
            option::of(value()),
            vec("\\PC{0,12}", 0..4),
            prop_oneof![
                Just(InterruptionPolicy::Stop),
                Just(InterruptionPolicy::ConserveFlux)
            ],
            prop_oneof![
                Just(ShootThroughPolicy::Stop),
                Just(ShootThroughPolicy::Record)
            ],
        ),
    )
        .prop_map(
            |(timing, (stop_time, record_from, outputs, on_interruption, on_shoot_through))| {
                RunSettings {
                    stop_time,
                    record_from,
                    outputs,
                    on_interruption,
                    on_shoot_through,
                    timing,
                    limits: None,
                    loads: Vec::new(),
                }
            },
        )
}

fn circuit() -> impl Strategy<Value = Circuit> {
    (
        "\\PC{0,20}",
        vec(element(), 0..8),
        vec(gate(), 0..3),
        option::of(run()),
    )
        .prop_map(|(description, elements, gates, run)| Circuit {
            description,
            elements,
            gates,
            compensators: vec![],
            run,
        })
}

proptest! {
    #![proptest_config(ProptestConfig {
        cases: 256,
        // A fixed seed: the same circuits on every run.
        rng_seed: proptest::test_runner::RngSeed::Fixed(1),
        ..ProptestConfig::default()
    })]

    #[test]
    fn generated_circuits_round_trip(c in circuit()) {
        let text = c.to_json();
        let back = Circuit::from_json_unchecked(&text)
            .map_err(|e| TestCaseError::fail(format!("{e}\n{text}")))?;
        prop_assert_eq!(&back, &c);
        // Equal text: every f64 kept its bits, −0.0 included.
        prop_assert_eq!(back.to_json(), text);
    }

    #[test]
    fn validation_never_panics(c in circuit()) {
        let problems = match c.validate() {
            Ok(()) => Vec::new(),
            Err(NetlistError::Invalid(p)) => p,
            Err(e) => return Err(TestCaseError::fail(format!("unexpected error {e}"))),
        };
        for p in problems {
            prop_assert!(!p.message.is_empty());
            prop_assert!(!p.message.starts_with(char::is_uppercase), "{}", p.message);
        }
    }
}
