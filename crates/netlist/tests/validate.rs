//! One bad circuit per validation rule. Each test breaks one rule of an
//! otherwise valid circuit and checks that the problem names the element
//! (or gate), the field and, where one is involved, the node.

use fluxstep_netlist::*;

use crate::common::{buck, expect, problems, valid};

fn winding(name: &str, a: &str, b: &str, inductance: f64) -> Winding {
    Winding {
        name: name.into(),
        nodes: [a.into(), b.into()],
        inductance,
        initial_current: None,
    }
}

fn by_k(a: &str, b: &str, k: f64) -> Coupling {
    Coupling {
        windings: [a.into(), b.into()],
        k: Some(k),
        mutual: None,
    }
}

fn coupled(windings: Vec<Winding>, couplings: Vec<Coupling>) -> Element {
    Element::CoupledInductors(CoupledInductors {
        name: "T1".into(),
        windings,
        couplings,
    })
}

/// A flyback (48 V in, 100 kHz): primary `in`→`sw`, secondary dotted at
/// ground, output diode, filter and load; no clamp (not needed for validity).
fn flyback_with(magnetics: Element) -> CircuitBuilder {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 48.0)
        .element(magnetics)
        .switch("S1", "sw", "gnd", "drive")
        .diode("D1", "sec", "out")
        .capacitor("C1", "out", "gnd", 100e-6)
        .resistor("Rload", "out", "gnd", 6.0)
        .pwm("drive", 100e3, 0.5)
}

fn flyback_magnetics() -> Element {
    coupled(
        vec![
            winding("pri", "in", "sw", 200e-6),
            winding("sec", "gnd", "sec", 12.5e-6),
        ],
        vec![by_k("pri", "sec", 0.99)],
    )
}

fn transformer(primary: [&str; 2], secondary: [&str; 2], n: f64) -> Element {
    Element::IdealTransformer(IdealTransformer {
        name: "X1".into(),
        primary: primary.map(String::from),
        secondary: secondary.map(String::from),
        turns_ratio: n,
    })
}

fn pwl(points: &[(f64, f64)], period: Option<f64>) -> Stimulus {
    Stimulus::PiecewiseLinear {
        points: points
            .iter()
            .map(|&(time, value)| Point { time, value })
            .collect(),
        period,
    }
}

fn complementary(duty: f64, dead_time_high: f64, dead_time_low: f64) -> Gate {
    Gate::ComplementaryPwm {
        name: "hb".into(),
        frequency: 100e3,
        duty,
        delay: 0.0,
        dead_time_high,
        dead_time_low,
        start: None,
        stop: None,
    }
}

/// A synchronous buck driven by a complementary pair `hb`.
fn sync_buck(gate: Gate) -> Circuit {
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
        .gate(gate)
        .build_unchecked()
}

fn pwm_gate(duty: f64, delay: f64, start: Option<f64>, stop: Option<f64>) -> Gate {
    Gate::Pwm {
        name: "drive".into(),
        frequency: 200e3,
        duty,
        delay,
        start,
        stop,
    }
}

/// The buck with its gate replaced.
fn buck_gate(g: Gate) -> Circuit {
    let mut c = buck().build_unchecked();
    c.gates = vec![g];
    c
}

fn transitions(times: &[f64], period: Option<f64>) -> Gate {
    Gate::Transitions {
        name: "drive".into(),
        initial: false,
        transitions: times
            .iter()
            .enumerate()
            .map(|(i, &time)| Transition {
                time,
                on: i % 2 == 0,
            })
            .collect(),
        period,
    }
}

// ----- valid circuits ------------------------------------------------------

#[test]
fn valid_circuits_have_no_problems() {
    valid(&buck().build_unchecked());
    valid(&flyback_with(flyback_magnetics()).build_unchecked());
    valid(&sync_buck(complementary(0.5, 50e-9, 50e-9)));
    // A forward-style transformer whose secondary return is grounded.
    valid(
        &Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 12.0)
            .element(transformer(["in", "gnd"], ["s", "gnd"], 2.0))
            .resistor("R1", "s", "gnd", 10.0)
            .build_unchecked(),
    );
    // `0` is ground too.
    valid(
        &Circuit::builder()
            .voltage_source("V1", "in", "0", 5.0)
            .resistor("R1", "in", "gnd", 1e3)
            .build_unchecked(),
    );
    // An inductor in series with a current source is a cut of inductors and
    // current sources, which the solver handles: not a current-source cut.
    valid(
        &buck()
            .current_source("I1", "gnd", "x", Stimulus::constant(1.0))
            .inductor("L2", "x", "out", 1e-6)
            .build_unchecked(),
    );
    // Dead times that exactly fill their part of the period are allowed.
    valid(&sync_buck(complementary(0.25, 2.5e-6, 7.5e-6)));
}

#[test]
fn all_problems_are_reported_at_once() {
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .switch("S1", "in", "sw", "drv")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", -22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("Rload", "out", "loose", 6.0)
        .pwm("drive", 200e3, 1.5)
        .build_unchecked();
    expect(&c, Some("L1"), Some("inductance"), "must be positive");
    expect(&c, Some("Rload"), Some("nodes[1]"), "node 'loose'");
    expect(&c, Some("S1"), Some("gate"), "unknown gate signal 'drv'");
    expect(&c, Some("drive"), Some("duty"), "[0, 1]");
    match Circuit::from_json(&c.to_json()) {
        Err(NetlistError::Invalid(p)) => assert!(p.len() >= 4, "{p:?}"),
        other => panic!("expected Invalid, got {other:?}"),
    }
    let shown = problems(&c)
        .iter()
        .find(|p| p.field.as_deref() == Some("inductance"))
        .unwrap()
        .to_string();
    assert_eq!(shown, "L1.inductance: must be positive, got -2.2e-5");
}

#[test]
fn empty_circuit() {
    expect(&Circuit::default(), None, Some("elements"), "no elements");
}

// ----- names ---------------------------------------------------------------

#[test]
fn duplicate_element_name() {
    let c = buck().resistor("L1", "out", "gnd", 1.0).build_unchecked();
    let p = expect(&c, Some("L1"), Some("name"), "duplicate element name 'L1'");
    assert!(p.message.contains("elements[3]") && p.message.contains("elements[6]"));
}

#[test]
fn duplicate_gate_name() {
    let c = buck().pwm("drive", 100e3, 0.3).build_unchecked();
    expect(
        &c,
        Some("drive"),
        Some("name"),
        "duplicate gate name 'drive'",
    );
}

#[test]
fn duplicate_winding_name() {
    let m = coupled(
        vec![
            winding("p", "in", "sw", 200e-6),
            winding("p", "gnd", "sec", 12.5e-6),
        ],
        vec![],
    );
    let c = flyback_with(m).build_unchecked();
    expect(
        &c,
        Some("T1"),
        Some("windings[1].name"),
        "duplicate winding name 'p'",
    );
}

#[test]
fn unusable_names() {
    let c = buck().resistor("R 2", "out", "gnd", 1.0).build_unchecked();
    expect(&c, Some("R 2"), Some("name"), "whitespace");
    let c = buck().resistor("R.2", "out", "gnd", 1.0).build_unchecked();
    expect(&c, Some("R.2"), Some("name"), "must not contain '.'");
    let c = buck().resistor("", "out", "gnd", 1.0).build_unchecked();
    expect(&c, Some("elements[6]"), Some("name"), "is empty");
    let c = buck()
        .resistor("R2", "out", "a.b", 1.0)
        .resistor("R3", "a.b", "gnd", 1.0)
        .build_unchecked();
    let p = expect(&c, Some("R2"), Some("nodes[1]"), "node name \"a.b\"");
    assert_eq!(p.node.as_deref(), Some("a.b"));
    // Reported once, where the node is first used.
    assert_eq!(
        problems(&c)
            .iter()
            .filter(|p| p.message.contains("node name"))
            .count(),
        1
    );
    let c = buck().pwm("g x", 1e3, 0.5).build_unchecked();
    expect(&c, Some("g x"), Some("name"), "gate name");
    let m = coupled(
        vec![
            winding("pri", "in", "sw", 200e-6),
            winding("", "gnd", "sec", 12.5e-6),
        ],
        vec![],
    );
    expect(
        &flyback_with(m).build_unchecked(),
        Some("T1"),
        Some("windings[1].name"),
        "winding name \"\" is empty",
    );
}

#[test]
fn unknown_gate_reference() {
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .switch("S1", "in", "sw", "drv")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("Rload", "out", "gnd", 6.0)
        .pwm("drive", 200e3, 0.5)
        .build_unchecked();
    let p = expect(&c, Some("S1"), Some("gate"), "unknown gate signal 'drv'");
    assert!(p.message.contains("'drive'"), "lists the known signals");
    // A complementary pair is referred to by its signals, not its name.
    let mut c = sync_buck(complementary(0.5, 50e-9, 50e-9));
    if let Element::Switch(s) = &mut c.elements[1] {
        s.gate = "hb".into();
    }
    let p = expect(&c, Some("Q1"), Some("gate"), "unknown gate signal 'hb'");
    assert!(p.message.contains("'hb.high'"));
}

// ----- topology ------------------------------------------------------------

#[test]
fn dangling_node() {
    let c = buck()
        .resistor("R2", "out", "nowhere", 1.0)
        .build_unchecked();
    let p = expect(
        &c,
        Some("R2"),
        Some("nodes[1]"),
        "node 'nowhere' is reached by only this terminal",
    );
    assert_eq!(p.node.as_deref(), Some("nowhere"));
}

#[test]
fn missing_ground() {
    let c = Circuit::builder()
        .voltage_source("V1", "a", "b", 5.0)
        .resistor("R1", "a", "b", 1.0)
        .build_unchecked();
    expect(&c, None, None, "no element touches ground");
    // Only that: every part floats, and saying so again adds nothing.
    assert_eq!(problems(&c).len(), 1);
}

#[test]
fn terminals_on_the_same_node() {
    let c = buck().resistor("R2", "out", "out", 1.0).build_unchecked();
    let p = expect(
        &c,
        Some("R2"),
        Some("nodes"),
        "both terminals are node 'out'",
    );
    assert_eq!(p.node.as_deref(), Some("out"));
    // `0` and `gnd` are the same node.
    let c = buck().capacitor("C2", "0", "gnd", 1e-6).build_unchecked();
    expect(
        &c,
        Some("C2"),
        Some("nodes"),
        "both terminals are node 'gnd'",
    );
    // A transformer winding shorted on itself.
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .resistor("R1", "in", "gnd", 1.0)
        .element(transformer(["in", "gnd"], ["s", "s"], 2.0))
        .build_unchecked();
    expect(
        &c,
        Some("X1"),
        Some("secondary"),
        "both terminals are node 's'",
    );
}

#[test]
fn part_without_ground() {
    let c = buck()
        .voltage_source("V2", "a", "b", 5.0)
        .resistor("R2", "a", "b", 1.0)
        .build_unchecked();
    let p = expect(&c, Some("V2"), Some("nodes"), "no connection to ground");
    assert!(p.message.contains("'a', 'b'") && p.message.contains("R2"));
    assert_eq!(p.node.as_deref(), Some("a"));
}

#[test]
fn transformer_sides_need_their_own_ground() {
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .element(transformer(["in", "gnd"], ["s1", "s2"], 2.0))
        .resistor("R1", "s1", "s2", 10.0)
        .build_unchecked();
    let p = expect(&c, Some("X1"), Some("secondary"), "no connection to ground");
    assert!(p.message.contains("X1.secondary") && p.message.contains("own path to ground"));
}

#[test]
fn coupled_windings_need_their_own_ground() {
    let m = coupled(
        vec![
            winding("pri", "in", "sw", 200e-6),
            winding("sec", "ret", "sec", 12.5e-6),
        ],
        vec![by_k("pri", "sec", 0.99)],
    );
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 48.0)
        .element(m)
        .switch("S1", "sw", "gnd", "drive")
        .diode("D1", "sec", "out")
        .capacitor("C1", "out", "ret", 100e-6)
        .resistor("Rload", "out", "ret", 6.0)
        .pwm("drive", 100e3, 0.5)
        .build_unchecked();
    let p = expect(
        &c,
        Some("T1"),
        Some("windings[1].nodes"),
        "no connection to ground",
    );
    assert!(p.message.contains("T1.sec"));
}

#[test]
fn loop_of_voltage_sources() {
    let c = buck()
        .voltage_source("V2", "in", "gnd", 5.0)
        .build_unchecked();
    let p = expect(
        &c,
        Some("V2"),
        Some("nodes"),
        "closes a loop made only of voltage sources",
    );
    assert!(p.message.contains("'in'") && p.message.contains("Vin"));
    // Around three sources the last one is named, with the other two.
    let c = Circuit::builder()
        .voltage_source("V1", "a", "gnd", 1.0)
        .voltage_source("V2", "b", "a", 1.0)
        .voltage_source("V3", "b", "gnd", 2.0)
        .resistor("R1", "b", "gnd", 1.0)
        .build_unchecked();
    let p = expect(
        &c,
        Some("V3"),
        Some("nodes"),
        "only of voltage sources (with V2, V1)",
    );
    assert_eq!(p.node.as_deref(), Some("b"));
}

#[test]
fn cut_of_current_sources() {
    // One node fed and drained only by current sources.
    let c = buck()
        .current_source("I1", "gnd", "x", Stimulus::constant(1.0))
        .current_source("I2", "x", "out", Stimulus::constant(1.0))
        .build_unchecked();
    let p = expect(
        &c,
        Some("I1"),
        Some("nodes"),
        "only through current source(s) I1, I2",
    );
    assert_eq!(p.node.as_deref(), Some("x"));
    // A set of nodes joined to the rest only through one current source.
    let c = buck()
        .current_source("I1", "out", "a", Stimulus::constant(1.0))
        .resistor("R2", "a", "b", 1.0)
        .capacitor("C2", "a", "b", 1e-6)
        .build_unchecked();
    // Node b has two terminals (R2, C2), node a three: nothing dangles.
    let p = expect(&c, Some("I1"), Some("nodes"), "node(s) 'a', 'b'");
    assert!(p.message.contains("current source(s) I1"));
}

// ----- values --------------------------------------------------------------

#[test]
fn non_finite_values() {
    let c = buck()
        .resistor("R2", "out", "gnd", f64::NAN)
        .build_unchecked();
    expect(&c, Some("R2"), Some("resistance"), "finite");
    let c = buck()
        .inductor_with_current("L2", "out", "gnd", 1e-6, f64::INFINITY)
        .build_unchecked();
    expect(&c, Some("L2"), Some("initial_current"), "finite");
    let c = buck()
        .capacitor_with_voltage("C2", "out", "gnd", 1e-6, f64::NAN)
        .build_unchecked();
    expect(&c, Some("C2"), Some("initial_voltage"), "finite");
    let c = buck()
        .voltage_waveform("V2", "x", "gnd", Stimulus::constant(f64::NAN))
        .resistor("R2", "x", "gnd", 1.0)
        .build_unchecked();
    expect(&c, Some("V2"), Some("waveform.value"), "finite");
    let c = buck()
        .voltage_waveform("V2", "x", "gnd", pwl(&[(0.0, 1.0), (f64::NAN, 2.0)], None))
        .resistor("R2", "x", "gnd", 1.0)
        .build_unchecked();
    expect(&c, Some("V2"), Some("waveform.points[1].time"), "finite");
    let c = buck_gate(pwm_gate(f64::NAN, 0.0, None, None));
    expect(&c, Some("drive"), Some("duty"), "finite");
}

#[test]
fn values_that_must_be_positive() {
    let cases: Vec<(Circuit, &str, &str)> = vec![
        (
            buck().resistor("R2", "out", "gnd", 0.0).build_unchecked(),
            "R2",
            "resistance",
        ),
        (
            buck().inductor("L2", "out", "gnd", -1e-6).build_unchecked(),
            "L2",
            "inductance",
        ),
        (
            buck().capacitor("C2", "out", "gnd", 0.0).build_unchecked(),
            "C2",
            "capacitance",
        ),
        (
            Circuit::builder()
                .voltage_source("Vin", "in", "gnd", 12.0)
                .element(transformer(["in", "gnd"], ["s", "gnd"], -2.0))
                .resistor("R1", "s", "gnd", 10.0)
                .build_unchecked(),
            "X1",
            "turns_ratio",
        ),
        (
            buck()
                .voltage_waveform("V2", "x", "gnd", Stimulus::sine(0.0, 1.0, 0.0, 0.0))
                .resistor("R2", "x", "gnd", 1.0)
                .build_unchecked(),
            "V2",
            "waveform.frequency",
        ),
        (
            buck()
                .voltage_waveform("V2", "x", "gnd", Stimulus::sine(0.0, 1.0, -50.0, 0.0))
                .resistor("R2", "x", "gnd", 1.0)
                .build_unchecked(),
            "V2",
            "waveform.frequency",
        ),
        (
            buck_gate(Gate::Pwm {
                name: "drive".into(),
                frequency: 0.0,
                duty: 0.5,
                delay: 0.0,
                start: None,
                stop: None,
            }),
            "drive",
            "frequency",
        ),
        (
            flyback_with(coupled(
                vec![
                    winding("pri", "in", "sw", 200e-6),
                    winding("sec", "gnd", "sec", 0.0),
                ],
                vec![by_k("pri", "sec", 0.99)],
            ))
            .build_unchecked(),
            "T1",
            "windings[1].inductance",
        ),
    ];
    for (c, element, field) in cases {
        expect(&c, Some(element), Some(field), "must be positive");
    }
}

#[test]
fn diode_and_switch_values_must_not_be_negative() {
    let model = |vf: Option<f64>, r: Option<f64>| DiodeModel {
        forward_voltage: vf,
        on_resistance: r,
        recovered_charge: None,
    };
    let c = buck()
        .diode_model("D2", "gnd", "out", model(Some(-0.7), None))
        .build_unchecked();
    expect(
        &c,
        Some("D2"),
        Some("forward_voltage"),
        "must not be negative",
    );
    let c = buck()
        .diode_model("D2", "gnd", "out", model(None, Some(-0.1)))
        .build_unchecked();
    expect(
        &c,
        Some("D2"),
        Some("on_resistance"),
        "must not be negative",
    );
    let c = buck()
        .transistor("Q2", "out", "gnd", "drive", -0.01, model(None, None))
        .build_unchecked();
    expect(
        &c,
        Some("Q2"),
        Some("on_resistance"),
        "must not be negative",
    );
    let c = buck()
        .transistor("Q2", "out", "gnd", "drive", 0.01, model(Some(-1.0), None))
        .build_unchecked();
    expect(
        &c,
        Some("Q2"),
        Some("body_diode.forward_voltage"),
        "must not be negative",
    );
    let c = buck()
        .transistor("Q2", "out", "gnd", "drive", 0.01, model(None, Some(-1.0)))
        .build_unchecked();
    expect(
        &c,
        Some("Q2"),
        Some("body_diode.on_resistance"),
        "must not be negative",
    );
}

#[test]
fn esr_and_winding_resistance_must_not_be_negative() {
    let c = buck()
        .element(Element::Capacitor(Capacitor {
            name: "C2".into(),
            nodes: ["out".into(), "gnd".into()],
            capacitance: 1e-6,
            initial_voltage: None,
            esr: Some(-0.01),
        }))
        .build_unchecked();
    expect(&c, Some("C2"), Some("esr"), "must not be negative");
    let c = buck()
        .element(Element::Inductor(Inductor {
            name: "L2".into(),
            nodes: ["out".into(), "x".into()],
            inductance: 1e-6,
            initial_current: None,
            winding_resistance: Some(f64::NAN),
            core: None,
        }))
        .resistor("Rx", "x", "gnd", 1.0)
        .build_unchecked();
    expect(&c, Some("L2"), Some("winding_resistance"), "finite");
}

#[test]
fn thermal_networks_need_positive_stages() {
    let stage = |resistance: f64, time_constant: f64| FosterPair {
        resistance,
        time_constant,
    };
    let with = |net: ThermalNetwork| {
        buck()
            .element(Element::Diode(Diode {
                name: "D2".into(),
                nodes: ["gnd".into(), "out".into()],
                model: DiodeModel::default(),
                thermal: Some(net),
            }))
            .build_unchecked()
    };
    let net = |jc: Vec<FosterPair>, ca: Vec<FosterPair>| ThermalNetwork {
        junction_case: jc,
        case_ambient: ca,
        ambient: None,
        max_junction: None,
    };
    let c = with(net(vec![stage(0.5, 1e-3), stage(0.0, 1e-2)], vec![]));
    expect(
        &c,
        Some("D2"),
        Some("thermal.junction_case[1].resistance"),
        "must be positive",
    );
    let c = with(net(vec![stage(0.5, 1e-3)], vec![stage(2.0, -1.0)]));
    expect(
        &c,
        Some("D2"),
        Some("thermal.case_ambient[0].time_constant"),
        "must be positive",
    );
    let c = with(net(vec![], vec![]));
    expect(
        &c,
        Some("D2"),
        Some("thermal.junction_case"),
        "at least one",
    );
}

#[test]
fn transition_rates_must_be_positive() {
    let with = |off_v: f64, on_i: f64| {
        let rates = |voltage_rate, current_rate| TransitionRates {
            voltage_rate,
            current_rate,
        };
        buck()
            .element(Element::Switch(Switch {
                name: "S9".into(),
                nodes: ["in".into(), "sw".into()],
                gate: "drive".into(),
                on_resistance: None,
                body_diode: None,
                thermal: None,
                transition: Some(SwitchTransition {
                    turn_off: rates(off_v, 1e9),
                    turn_on: rates(1e9, on_i),
                }),
                switching_energy: None,
            }))
            .build_unchecked()
    };
    expect(
        &with(0.0, 1e9),
        Some("S9"),
        Some("transition.turn_off.voltage_rate"),
        "must be positive",
    );
    expect(
        &with(1e9, -2.0),
        Some("S9"),
        Some("transition.turn_on.current_rate"),
        "must be positive",
    );
    expect(
        &with(f64::INFINITY, 1e9),
        Some("S9"),
        Some("transition.turn_off.voltage_rate"),
        "finite",
    );
}

// ----- coupled inductors ---------------------------------------------------

fn flyback_couplings(couplings: Vec<Coupling>) -> Circuit {
    flyback_with(coupled(
        vec![
            winding("pri", "in", "sw", 200e-6),
            winding("sec", "gnd", "sec", 12.5e-6),
        ],
        couplings,
    ))
    .build_unchecked()
}

#[test]
fn coupling_names_an_unknown_winding() {
    let c = flyback_couplings(vec![by_k("pri", "second", 0.99)]);
    let p = expect(
        &c,
        Some("T1"),
        Some("couplings[0].windings[1]"),
        "unknown winding 'second'",
    );
    assert!(p.message.contains("'pri', 'sec'"));
}

#[test]
fn coupling_gives_both_or_neither() {
    let mut both = by_k("pri", "sec", 0.99);
    both.mutual = Some(40e-6);
    expect(
        &flyback_couplings(vec![both]),
        Some("T1"),
        Some("couplings[0]"),
        "either k or mutual, not both",
    );
    let neither = Coupling {
        windings: ["pri".into(), "sec".into()],
        k: None,
        mutual: None,
    };
    expect(
        &flyback_couplings(vec![neither]),
        Some("T1"),
        Some("couplings[0]"),
        "give the coupling as k or as mutual",
    );
}

#[test]
fn coupling_coefficient_above_one() {
    let c = flyback_couplings(vec![by_k("pri", "sec", 1.2)]);
    expect(
        &c,
        Some("T1"),
        Some("couplings[0].k"),
        "must lie in [-1, 1]",
    );
    let c = flyback_couplings(vec![by_k("pri", "sec", -1.01)]);
    expect(
        &c,
        Some("T1"),
        Some("couplings[0].k"),
        "must lie in [-1, 1]",
    );
}

#[test]
fn inductance_matrix_not_positive_definite() {
    // k = 1: no leakage at all, a singular matrix.
    let c = flyback_couplings(vec![by_k("pri", "sec", 1.0)]);
    expect(&c, Some("T1"), Some("couplings"), "not positive definite");
    // A mutual inductance above √(L1·L2) = 50 µH.
    let m = Coupling {
        windings: ["pri".into(), "sec".into()],
        k: None,
        mutual: Some(60e-6),
    };
    expect(
        &flyback_couplings(vec![m]),
        Some("T1"),
        Some("couplings"),
        "not positive definite",
    );
    // Three windings, each pair below 1, together impossible.
    let c = flyback_with(coupled(
        vec![
            winding("pri", "in", "sw", 200e-6),
            winding("sec", "gnd", "sec", 12.5e-6),
            winding("aux", "gnd", "aux", 12.5e-6),
        ],
        vec![
            by_k("pri", "sec", 0.9),
            by_k("pri", "aux", 0.9),
            by_k("sec", "aux", -0.9),
        ],
    ))
    .resistor("Raux", "aux", "gnd", 1e3)
    .build_unchecked();
    expect(&c, Some("T1"), Some("couplings"), "not positive definite");
}

#[test]
fn coupled_inductors_need_two_windings() {
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .resistor("R1", "in", "a", 1.0)
        .element(coupled(vec![winding("only", "a", "gnd", 1e-3)], vec![]))
        .build_unchecked();
    expect(&c, Some("T1"), Some("windings"), "at least two windings");
}

#[test]
fn coupling_of_a_winding_with_itself_or_twice() {
    let c = flyback_couplings(vec![by_k("pri", "pri", 0.5)]);
    expect(&c, Some("T1"), Some("couplings[0].windings"), "with itself");
    let c = flyback_couplings(vec![by_k("pri", "sec", 0.9), by_k("sec", "pri", 0.9)]);
    expect(
        &c,
        Some("T1"),
        Some("couplings[1].windings"),
        "already coupled by couplings[0]",
    );
}

// ----- waveforms -----------------------------------------------------------

fn with_source(w: Stimulus) -> Circuit {
    buck()
        .voltage_waveform("V2", "x", "gnd", w)
        .resistor("R2", "x", "gnd", 1.0)
        .build_unchecked()
}

#[test]
fn pwl_times_not_strictly_increasing() {
    let c = with_source(pwl(&[(0.0, 0.0), (1e-6, 1.0), (0.5e-6, 2.0)], None));
    expect(
        &c,
        Some("V2"),
        Some("waveform.points[2].time"),
        "strictly increasing",
    );
    let c = with_source(pwl(&[(0.0, 0.0), (1e-6, 1.0), (1e-6, 2.0)], None));
    expect(
        &c,
        Some("V2"),
        Some("waveform.points[2].time"),
        "strictly increasing",
    );
}

#[test]
fn pwl_without_points() {
    let c = with_source(pwl(&[], None));
    expect(
        &c,
        Some("V2"),
        Some("waveform.points"),
        "at least one point",
    );
}

#[test]
fn repeating_pwl_points_outside_the_period() {
    let c = with_source(pwl(&[(0.0, 0.0), (2e-6, 1.0)], Some(1e-6)));
    expect(
        &c,
        Some("V2"),
        Some("waveform.points[1].time"),
        "outside one period",
    );
    let c = with_source(pwl(&[(-1e-7, 0.0), (1e-6, 1.0)], Some(1e-6)));
    expect(
        &c,
        Some("V2"),
        Some("waveform.points[0].time"),
        "outside one period",
    );
    // A point at exactly one period closes the pattern: allowed.
    valid(&with_source(pwl(&[(0.0, 0.0), (1e-6, 1.0)], Some(1e-6))));
    let c = with_source(pwl(&[(0.0, 0.0)], Some(0.0)));
    expect(&c, Some("V2"), Some("waveform.period"), "must be positive");
}

// ----- gates ---------------------------------------------------------------

#[test]
fn duty_outside_zero_to_one() {
    for duty in [-0.1, 1.2] {
        let c = buck_gate(pwm_gate(duty, 0.0, None, None));
        expect(&c, Some("drive"), Some("duty"), "must lie in [0, 1]");
    }
    valid(&buck_gate(pwm_gate(0.0, 0.0, None, None)));
    valid(&buck_gate(pwm_gate(1.0, 0.0, None, None)));
    let c = sync_buck(complementary(1.5, 0.0, 0.0));
    expect(&c, Some("hb"), Some("duty"), "must lie in [0, 1]");
}

#[test]
fn delay_outside_one_period() {
    // T = 5 µs.
    let c = buck_gate(pwm_gate(0.5, 5e-6, None, None));
    expect(&c, Some("drive"), Some("delay"), "must lie in [0, period)");
    let c = buck_gate(pwm_gate(0.5, -1e-6, None, None));
    expect(&c, Some("drive"), Some("delay"), "must lie in [0, period)");
    valid(&buck_gate(pwm_gate(0.5, 4.9e-6, None, None)));
}

#[test]
fn start_not_before_stop() {
    let c = buck_gate(pwm_gate(0.5, 0.0, Some(1e-3), Some(1e-3)));
    expect(&c, Some("drive"), Some("stop"), "must come after start");
    valid(&buck_gate(pwm_gate(0.5, 0.0, Some(1e-3), Some(2e-3))));
}

#[test]
fn dead_times() {
    let c = sync_buck(complementary(0.5, -1e-9, 50e-9));
    expect(
        &c,
        Some("hb"),
        Some("dead_time_high"),
        "must not be negative",
    );
    let c = sync_buck(complementary(0.5, 50e-9, -1e-9));
    expect(
        &c,
        Some("hb"),
        Some("dead_time_low"),
        "must not be negative",
    );
    // 100 kHz, 10 % duty: the high part of the period is 1 µs.
    let c = sync_buck(complementary(0.1, 2e-6, 50e-9));
    expect(&c, Some("hb"), Some("dead_time_high"), "does not fit");
    // 95 % duty: the low part is 0.5 µs.
    let c = sync_buck(complementary(0.95, 50e-9, 1e-6));
    expect(&c, Some("hb"), Some("dead_time_low"), "does not fit");
}

#[test]
fn transition_times() {
    let c = buck_gate(transitions(&[1e-6, 1e-6], None));
    expect(
        &c,
        Some("drive"),
        Some("transitions[1].time"),
        "strictly increasing",
    );
    let c = buck_gate(transitions(&[2e-6, 1e-6], None));
    expect(
        &c,
        Some("drive"),
        Some("transitions[1].time"),
        "strictly increasing",
    );
    // Repeating: times lie in [0, period); the period's end is the next start.
    let c = buck_gate(transitions(&[0.0, 5e-6], Some(5e-6)));
    expect(
        &c,
        Some("drive"),
        Some("transitions[1].time"),
        "outside one period",
    );
    valid(&buck_gate(transitions(&[0.0, 2.5e-6], Some(5e-6))));
    let c = buck_gate(transitions(&[0.0, 2.5e-6], Some(-5e-6)));
    expect(&c, Some("drive"), Some("period"), "must be positive");
}

// ----- run settings --------------------------------------------------------

fn with_run(stop_time: f64, record_from: Option<f64>, outputs: &[&str]) -> Circuit {
    let mut c = buck().run(stop_time, outputs).build_unchecked();
    c.run.as_mut().unwrap().record_from = record_from;
    c
}

#[test]
fn run_stop_time_and_window() {
    expect(
        &with_run(0.0, None, &[]),
        None,
        Some("run.stop_time"),
        "must be positive",
    );
    expect(
        &with_run(1e-3, Some(1e-3), &[]),
        None,
        Some("run.record_from"),
        "[0, stop_time)",
    );
    expect(
        &with_run(1e-3, Some(-1e-6), &[]),
        None,
        Some("run.record_from"),
        "[0, stop_time)",
    );
    valid(&with_run(
        1e-3,
        Some(0.9e-3),
        &["L1.current", "sw", "out", "0", "gnd"],
    ));
}

#[test]
fn run_outputs() {
    let c = with_run(1e-3, None, &["out", "nowhere"]);
    let p = expect(&c, None, Some("run.outputs[1]"), "names no node");
    assert_eq!(p.node.as_deref(), Some("nowhere"));
    let c = with_run(1e-3, None, &["L9.current"]);
    expect(&c, None, Some("run.outputs[0]"), "no element is named 'L9'");
    let c = with_run(1e-3, None, &["L1.flux"]);
    expect(&c, None, Some("run.outputs[0]"), "unknown output");
    let c = with_run(1e-3, None, &["S1.body_diode.current"]);
    expect(&c, None, Some("run.outputs[0]"), "has no body_diode");
    let c = with_run(1e-3, None, &["L1.winding.current"]);
    expect(
        &c,
        None,
        Some("run.outputs[0]"),
        "inductor 'L1' has no part 'winding'",
    );

    // Windings of coupled inductors are named ELEMENT.WINDING.
    let fly = |outputs: &[&str]| {
        flyback_with(flyback_magnetics())
            .run(1e-3, outputs)
            .build_unchecked()
    };
    valid(&fly(&["T1.pri.current", "T1.sec.voltage", "sw"]));
    expect(
        &fly(&["T1.current"]),
        None,
        Some("run.outputs[0]"),
        "one current per winding",
    );
    expect(
        &fly(&["T1.tertiary.current"]),
        None,
        Some("run.outputs[0]"),
        "no winding 'tertiary'",
    );

    // Body diodes are SWITCH.body_diode; an ideal transformer has a primary
    // and a secondary.
    let mut c = sync_buck(complementary(0.5, 50e-9, 50e-9));
    c.run = Some(RunSettings {
        stop_time: 1e-3,
        record_from: None,
        outputs: vec!["Q2.body_diode.current".into(), "Q2.current".into()],
        ..RunSettings::default_for(1e-3)
    });
    valid(&c);
    let x = |outputs: &[&str]| {
        Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 12.0)
            .element(transformer(["in", "gnd"], ["s", "gnd"], 2.0))
            .resistor("R1", "s", "gnd", 10.0)
            .run(1e-3, outputs)
            .build_unchecked()
    };
    valid(&x(&["X1.primary.current", "X1.secondary.voltage"]));
    expect(
        &x(&["X1.current"]),
        None,
        Some("run.outputs[0]"),
        "a primary and a secondary",
    );
}

// ----- closed-loop gates ---------------------------------------------------

fn peak(frequency: f64, slope: f64, max_duty: f64) -> Gate {
    Gate::PeakCurrent {
        name: "drive".into(),
        frequency,
        sense: "L1.current".into(),
        reference: 3.0,
        slope,
        max_duty,
    }
}

fn valley(frequency: f64, slope: f64) -> Gate {
    Gate::ValleyCurrent {
        name: "drive".into(),
        frequency,
        sense: "L1.current".into(),
        reference: 1.0,
        slope,
    }
}

fn hysteretic(low: f64, high: f64) -> Gate {
    Gate::Hysteretic {
        name: "drive".into(),
        sense: "out".into(),
        low,
        high,
    }
}

fn voltage_mode(frequency: f64, ramp: (f64, f64), duty: (f64, f64)) -> Gate {
    Gate::VoltageMode {
        name: "drive".into(),
        frequency,
        control: "K.output".into(),
        ramp_low: ramp.0,
        ramp_high: ramp.1,
        min_duty: duty.0,
        max_duty: duty.1,
    }
}

fn compensator(name: &str, input: &str, law: CompensatorLaw) -> Compensator {
    Compensator {
        name: name.into(),
        input: input.into(),
        reference: 12.0,
        law,
    }
}

fn pi() -> CompensatorLaw {
    CompensatorLaw::Pi {
        kp: 0.01,
        ki: 200.0,
    }
}

fn poles_zeros(integrator: bool, zeros_hz: &[f64], poles_hz: &[f64]) -> CompensatorLaw {
    CompensatorLaw::PolesZeros {
        gain: 1e3,
        integrator,
        zeros_hz: zeros_hz.to_vec(),
        poles_hz: poles_hz.to_vec(),
    }
}

/// The buck under analog voltage-mode control: gate `drive` compares the
/// output of compensator `K` (measuring `out`) with a 0–1 sawtooth.
fn voltage_mode_buck(gate: Gate, compensators: Vec<Compensator>) -> Circuit {
    let mut c = buck_gate(gate);
    c.compensators = compensators;
    c
}

/// The voltage-mode buck with compensator K's law replaced.
fn with_law(law: CompensatorLaw) -> Circuit {
    voltage_mode_buck(
        voltage_mode(200e3, (0.0, 1.0), (0.0, 0.9)),
        vec![compensator("K", "out", law)],
    )
}

#[test]
fn valid_closed_loop_circuits_have_no_problems() {
    valid(&buck_gate(peak(200e3, 0.1e6, 0.9)));
    // No compensation ramp and no duty limit are allowed.
    valid(&buck_gate(peak(200e3, 0.0, 1.0)));
    valid(&buck_gate(valley(200e3, 0.0)));
    valid(&buck_gate(hysteretic(11.9, 12.1)));
    valid(&with_law(pi()));
    valid(&with_law(poles_zeros(true, &[2e3, 2e3], &[50e3, 50e3])));
    // Zeros up to the number of poles, integrator included: proper.
    valid(&with_law(poles_zeros(
        true,
        &[1e3, 2e3, 3e3],
        &[50e3, 60e3],
    )));
    valid(&with_law(poles_zeros(false, &[], &[10e3])));
    valid(&with_law(CompensatorLaw::StateSpace {
        a: vec![vec![0.0, 1.0], vec![-1e6, -1e3]],
        b: vec![0.0, 1.0],
        c: vec![1.0, 0.0],
        d: 0.5,
    }));
    // A minimum duty just below the maximum.
    valid(&voltage_mode_buck(
        voltage_mode(200e3, (0.0, 1.0), (0.89, 0.9)),
        vec![compensator("K", "out", pi())],
    ));
}

#[test]
fn closed_loop_frequency_must_be_positive() {
    for f in [0.0, -100e3] {
        let c = buck_gate(peak(f, 0.0, 1.0));
        expect(&c, Some("drive"), Some("frequency"), "must be positive");
        let c = buck_gate(valley(f, 0.0));
        expect(&c, Some("drive"), Some("frequency"), "must be positive");
        let c = voltage_mode_buck(
            voltage_mode(f, (0.0, 1.0), (0.0, 1.0)),
            vec![compensator("K", "out", pi())],
        );
        expect(&c, Some("drive"), Some("frequency"), "must be positive");
    }
    let c = buck_gate(peak(f64::INFINITY, 0.0, 1.0));
    expect(&c, Some("drive"), Some("frequency"), "finite");
}

/// Issue 19 (a fuzz case): a winding of 5e-324 H passes the Cholesky
/// test of the inductance matrix, but its inverse, which the solver needs,
/// overflows (a panic compiling the circuit). The winding is refused by
/// name.
#[test]
fn issue_19_a_winding_without_a_finite_inverse_is_refused() {
    let c = flyback_with(coupled(
        vec![
            winding("pri", "in", "sw", 5e-324),
            winding("sec", "gnd", "sec", 12.5e-6),
        ],
        vec![by_k("pri", "sec", 0.99)],
    ))
    .build_unchecked();
    expect(
        &c,
        Some("T1"),
        Some("windings[0].inductance"),
        "reciprocal must be a finite number",
    );
}

/// Issue 19 (a fuzz case): a clock of 5e-324 Hz has the period 1/f = ∞,
/// whose schedule k·T is NaN (a panic indexing the compensation ramp's
/// corners). Every frequency field refuses a period that is not finite.
#[test]
fn issue_19_a_frequency_whose_period_is_infinite_is_refused() {
    let f = 5e-324;
    let text = "period 1/f must be a finite number of seconds";
    expect(
        &buck_gate(peak(f, 0.25e6, 0.9)),
        Some("drive"),
        Some("frequency"),
        text,
    );
    expect(
        &buck_gate(valley(f, 0.0)),
        Some("drive"),
        Some("frequency"),
        text,
    );
    let c = voltage_mode_buck(
        voltage_mode(f, (0.0, 1.0), (0.0, 1.0)),
        vec![compensator("K", "out", pi())],
    );
    expect(&c, Some("drive"), Some("frequency"), text);
    expect(
        &buck_gate(pwm_gate_at(f)),
        Some("drive"),
        Some("frequency"),
        text,
    );
    let c = buck()
        .voltage_waveform("V2", "x", "gnd", Stimulus::sine(0.0, 1.0, f, 0.0))
        .resistor("R2", "x", "gnd", 1.0)
        .build_unchecked();
    expect(&c, Some("V2"), Some("waveform.frequency"), text);
    // A tiny frequency with a finite period passes.
    valid(&buck_gate(peak(1e-300, 0.25e6, 0.9)));
}

fn pwm_gate_at(frequency: f64) -> Gate {
    Gate::Pwm {
        name: "drive".into(),
        frequency,
        duty: 0.5,
        delay: 0.0,
        start: None,
        stop: None,
    }
}

#[test]
fn max_duty_outside_zero_to_one() {
    for max in [0.0, -0.5, 1.2] {
        let c = buck_gate(peak(200e3, 0.0, max));
        expect(&c, Some("drive"), Some("max_duty"), "must lie in (0, 1]");
        let c = voltage_mode_buck(
            voltage_mode(200e3, (0.0, 1.0), (0.0, max)),
            vec![compensator("K", "out", pi())],
        );
        expect(&c, Some("drive"), Some("max_duty"), "must lie in (0, 1]");
    }
    let c = buck_gate(peak(200e3, 0.0, f64::NAN));
    expect(&c, Some("drive"), Some("max_duty"), "finite");
}

#[test]
fn min_duty_not_below_max_duty() {
    for (min, max) in [(0.5, 0.5), (0.8, 0.6), (-0.1, 0.9)] {
        let c = voltage_mode_buck(
            voltage_mode(200e3, (0.0, 1.0), (min, max)),
            vec![compensator("K", "out", pi())],
        );
        let p = expect(
            &c,
            Some("drive"),
            Some("min_duty"),
            "must lie in [0, max_duty",
        );
        assert!(p.message.contains(&format!("{max}")), "{}", p.message);
    }
}

#[test]
fn hysteretic_thresholds_in_order() {
    for (low, high) in [(12.0, 12.0), (12.1, 11.9)] {
        let c = buck_gate(hysteretic(low, high));
        expect(&c, Some("drive"), Some("high"), "must exceed low");
    }
    // Both thresholds are checked for finiteness.
    let c = buck_gate(hysteretic(f64::NAN, f64::INFINITY));
    expect(&c, Some("drive"), Some("low"), "finite");
    expect(&c, Some("drive"), Some("high"), "finite");
}

#[test]
fn voltage_mode_ramp_in_order() {
    for (lo, hi) in [(1.0, 1.0), (2.0, 0.5)] {
        let c = voltage_mode_buck(
            voltage_mode(200e3, (lo, hi), (0.0, 1.0)),
            vec![compensator("K", "out", pi())],
        );
        expect(&c, Some("drive"), Some("ramp_high"), "must exceed ramp_low");
    }
    // Both ends are checked for finiteness, even when the first fails.
    let c = voltage_mode_buck(
        voltage_mode(200e3, (f64::NAN, f64::INFINITY), (0.0, 1.0)),
        vec![compensator("K", "out", pi())],
    );
    expect(&c, Some("drive"), Some("ramp_low"), "finite");
    expect(&c, Some("drive"), Some("ramp_high"), "finite");
}

#[test]
fn compensation_slope_must_not_be_negative() {
    let c = buck_gate(peak(200e3, -1e5, 1.0));
    expect(&c, Some("drive"), Some("slope"), "must not be negative");
    let c = buck_gate(valley(200e3, -1e5));
    expect(&c, Some("drive"), Some("slope"), "must not be negative");
}

#[test]
fn comparator_reference_must_be_finite() {
    let mut g = peak(200e3, 0.0, 1.0);
    if let Gate::PeakCurrent { reference, .. } = &mut g {
        *reference = f64::NAN;
    }
    expect(&buck_gate(g), Some("drive"), Some("reference"), "finite");
}

#[test]
fn sense_or_control_names_an_unknown_output() {
    let sensing = |sense: &str| {
        let mut g = peak(200e3, 0.0, 1.0);
        if let Gate::PeakCurrent { sense: s, .. } = &mut g {
            *s = sense.into();
        }
        buck_gate(g)
    };
    expect(
        &sensing("L9.current"),
        Some("drive"),
        Some("sense"),
        "no element is named 'L9'",
    );
    expect(
        &sensing("L1.flux"),
        Some("drive"),
        Some("sense"),
        "unknown output",
    );
    expect(
        &sensing("K.output"),
        Some("drive"),
        Some("sense"),
        "no compensator is named 'K'",
    );
    let mut g = valley(200e3, 0.0);
    if let Gate::ValleyCurrent { sense, .. } = &mut g {
        *sense = "D9.current".into();
    }
    expect(
        &buck_gate(g),
        Some("drive"),
        Some("sense"),
        "no element is named 'D9'",
    );
    let mut g = hysteretic(11.9, 12.1);
    if let Gate::Hysteretic { sense, .. } = &mut g {
        *sense = "nowhere".into();
    }
    expect(&buck_gate(g), Some("drive"), Some("sense"), "names no node");
    // A voltage-mode gate's comparison input is its `control`.
    let c = voltage_mode_buck(
        voltage_mode(200e3, (0.0, 1.0), (0.0, 1.0)),
        vec![compensator("Q", "out", pi())],
    );
    expect(
        &c,
        Some("drive"),
        Some("control"),
        "no compensator is named 'K'",
    );
}

// ----- compensators --------------------------------------------------------

#[test]
fn duplicate_compensator_name() {
    let c = voltage_mode_buck(
        voltage_mode(200e3, (0.0, 1.0), (0.0, 1.0)),
        vec![
            compensator("K", "out", pi()),
            compensator("K", "out", pi()),
            compensator("K", "L1.current", pi()),
        ],
    );
    let p = expect(
        &c,
        Some("K"),
        Some("name"),
        "duplicate compensator name 'K'",
    );
    assert!(p.message.contains("compensators[0] and compensators[1]"));
    // Each later duplicate names the first user of the name.
    expect(
        &c,
        Some("K"),
        Some("name"),
        "compensators[0] and compensators[2]",
    );
}

#[test]
fn unusable_compensator_names() {
    let c = voltage_mode_buck(
        voltage_mode(200e3, (0.0, 1.0), (0.0, 1.0)),
        vec![
            compensator("K", "out", pi()),
            compensator("", "out", pi()),
            compensator("", "out", pi()),
            compensator("K.a", "out", pi()),
        ],
    );
    expect(&c, Some("compensators[1]"), Some("name"), "is empty");
    // A name that is not empty labels its own problems, as for elements.
    expect(&c, Some("K.a"), Some("name"), "must not contain '.'");
    // Two empty names are two empty names, not a duplicate.
    assert!(
        !problems(&c)
            .iter()
            .any(|p| p.message.contains("duplicate compensator name ''")),
        "{:?}",
        problems(&c)
    );
}

#[test]
fn compensator_input_unknown() {
    let c = with_law(pi());
    let mut c2 = c.clone();
    c2.compensators[0].input = "nowhere".into();
    let p = expect(&c2, Some("K"), Some("input"), "names no node");
    assert!(p.message.contains("nowhere"));
    c2.compensators[0].input = "L9.current".into();
    expect(&c2, Some("K"), Some("input"), "no element is named 'L9'");
    let mut c3 = c;
    c3.compensators[0].reference = f64::INFINITY;
    expect(&c3, Some("K"), Some("reference"), "finite");
}

#[test]
fn compensator_input_is_another_compensators_output() {
    let c = voltage_mode_buck(
        voltage_mode(200e3, (0.0, 1.0), (0.0, 1.0)),
        vec![
            compensator("K", "K2.output", pi()),
            compensator("K2", "out", pi()),
        ],
    );
    expect(&c, Some("K"), Some("input"), "not another compensator");
    // K2 exists, so that is the only problem with K's input.
    let on_input: Vec<_> = problems(&c)
        .into_iter()
        .filter(|p| p.field.as_deref() == Some("input"))
        .collect();
    assert_eq!(on_input.len(), 1, "{on_input:?}");
}

#[test]
fn poles_and_zeros_at_non_positive_frequencies() {
    let c = with_law(poles_zeros(true, &[0.0], &[50e3]));
    expect(&c, Some("K"), Some("law.zeros_hz[0]"), "must be positive");
    let c = with_law(poles_zeros(true, &[1e3], &[50e3, -50e3]));
    expect(&c, Some("K"), Some("law.poles_hz[1]"), "must be positive");
    let c = with_law(poles_zeros(true, &[f64::NAN], &[50e3]));
    expect(&c, Some("K"), Some("law.zeros_hz[0]"), "finite");
}

#[test]
fn more_zeros_than_poles() {
    // Integrator and one pole: two zeros at most.
    let c = with_law(poles_zeros(true, &[1e3, 2e3, 3e3], &[50e3]));
    let p = expect(&c, Some("K"), Some("law.zeros_hz"), "not be proper");
    assert!(p.message.contains("3 zeros") && p.message.contains("only 2 poles"));
    let c = with_law(poles_zeros(false, &[1e3, 2e3], &[50e3]));
    expect(&c, Some("K"), Some("law.zeros_hz"), "only 1 poles");
}

#[test]
fn poles_and_zeros_without_any_pole() {
    let c = with_law(poles_zeros(false, &[], &[]));
    expect(&c, Some("K"), Some("law.poles_hz"), "at least one pole");
}

#[test]
fn state_space_dimensions() {
    let ss = |a: Vec<Vec<f64>>, b: Vec<f64>, c: Vec<f64>| {
        with_law(CompensatorLaw::StateSpace { a, b, c, d: 0.0 })
    };
    let c = ss(
        vec![vec![0.0, 1.0], vec![-1.0]],
        vec![0.0, 1.0],
        vec![1.0, 0.0],
    );
    expect(&c, Some("K"), Some("law.a"), "square matrix");
    let c = ss(vec![], vec![], vec![]);
    expect(&c, Some("K"), Some("law.a"), "at least one row");
    let c = ss(
        vec![vec![0.0, 1.0], vec![-1.0, 0.0]],
        vec![1.0],
        vec![1.0, 0.0],
    );
    expect(&c, Some("K"), Some("law.b"), "must have 2 entries, has 1");
    let c = ss(
        vec![vec![0.0, 1.0], vec![-1.0, 0.0]],
        vec![0.0, 1.0],
        vec![1.0, 0.0, 0.0],
    );
    expect(&c, Some("K"), Some("law.c"), "must have 2 entries, has 3");
}

#[test]
fn state_space_entries_must_be_finite() {
    for bad in [f64::NAN, f64::INFINITY] {
        let c = with_law(CompensatorLaw::StateSpace {
            a: vec![vec![-1e3, bad], vec![0.0, -1e3]],
            b: vec![1.0, 1.0],
            c: vec![1.0, 0.0],
            d: 0.0,
        });
        expect(&c, Some("K"), Some("law"), "finite");
        let c = with_law(CompensatorLaw::StateSpace {
            a: vec![vec![-1e3]],
            b: vec![1.0],
            c: vec![1.0],
            d: bad,
        });
        expect(&c, Some("K"), Some("law"), "finite");
    }
}

#[test]
fn run_output_names_an_unknown_compensator() {
    let mut c = with_law(pi());
    c.run = Some(RunSettings {
        stop_time: 1e-3,
        record_from: None,
        outputs: vec!["out".into(), "K.output".into()],
        ..RunSettings::default_for(1e-3)
    });
    valid(&c);
    c.run.as_mut().unwrap().outputs[1] = "K2.output".into();
    expect(
        &c,
        None,
        Some("run.outputs[1]"),
        "no compensator is named 'K2'",
    );
}

/// The asynchronous buck with one timing rule in its run settings.
fn buck_with_rule(check: TimingCheck) -> Circuit {
    let mut c = buck().build().unwrap();
    c.run = Some(RunSettings {
        timing: vec![TimingRule::new(check).named("guard")],
        ..RunSettings::default_for(1e-3)
    });
    c
}

#[test]
fn timing_rules_name_switches_and_diodes_of_the_right_kind() {
    valid(&buck_with_rule(TimingCheck::DiodeConduction {
        diode: "D1".into(),
        max: 3e-6,
    }));
    let p = expect(
        &buck_with_rule(TimingCheck::OnTime {
            switch: "S9".into(),
            min: Some(1e-6),
            max: None,
        }),
        None,
        Some("run.timing[0].switch"),
        "no element is named 'S9'",
    );
    assert!(p.message.contains("rule 'guard'"), "{p}");
    expect(
        &buck_with_rule(TimingCheck::DiodeConduction {
            diode: "S1".into(),
            max: 1e-6,
        }),
        None,
        Some("run.timing[0].diode"),
        "'S1' is a switch; this field needs a diode",
    );
    expect(
        &buck_with_rule(TimingCheck::DiodeConduction {
            diode: "S1.body_diode".into(),
            max: 1e-6,
        }),
        None,
        Some("run.timing[0].diode"),
        "switch 'S1' has no body_diode",
    );
    expect(
        &buck_with_rule(TimingCheck::HardTurnOn {
            switch: "D1".into(),
            diode: "D1".into(),
            max_count: 0,
        }),
        None,
        Some("run.timing[0].switch"),
        "'D1' is a diode; this field needs a switch",
    );
    expect(
        &buck_with_rule(TimingCheck::NoOverlap {
            switches: vec!["S1".into()],
        }),
        None,
        Some("run.timing[0].switches"),
        "two or more",
    );
}

#[test]
fn timing_limits_must_be_positive_and_finite() {
    for bad in [0.0, -1e-9, f64::INFINITY] {
        expect(
            &buck_with_rule(TimingCheck::DiodeConduction {
                diode: "D1".into(),
                max: bad,
            }),
            None,
            Some("run.timing[0].max"),
            "must be a positive time",
        );
    }
    expect(
        &buck_with_rule(TimingCheck::OnTime {
            switch: "S1".into(),
            min: None,
            max: None,
        }),
        None,
        Some("run.timing[0].min"),
        "give min, max or both",
    );
    expect(
        &buck_with_rule(TimingCheck::OffTime {
            switch: "S1".into(),
            min: Some(2e-6),
            max: Some(1e-6),
        }),
        None,
        Some("run.timing[0].max"),
        "must not be below min",
    );
    let mut c = buck_with_rule(TimingCheck::Band {
        output: "out".into(),
        min: 0.0,
        max: 13.0,
    });
    c.run.as_mut().unwrap().timing[0].from = Some(5e-4);
    c.run.as_mut().unwrap().timing[0].to = Some(1e-4);
    expect(&c, None, Some("run.timing[0].to"), "must be after from");
}

#[test]
fn timing_rules_read_from_json_with_their_fields_beside_the_name() {
    let text = r#"{
      "elements": [
        {"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"], "waveform": {"kind": "constant", "value": 24}},
        {"kind": "switch", "name": "S1", "nodes": ["in", "sw"], "gate": "drive"},
        {"kind": "diode", "name": "D1", "nodes": ["gnd", "sw"]},
        {"kind": "inductor", "name": "L1", "nodes": ["sw", "out"], "inductance": "22u"},
        {"kind": "capacitor", "name": "C1", "nodes": ["out", "gnd"], "capacitance": "47u"},
        {"kind": "resistor", "name": "R", "nodes": ["out", "gnd"], "resistance": 6}
      ],
      "gates": [{"kind": "pwm", "name": "drive", "frequency": "200k", "duty": 0.5}],
      "run": {"stop_time": "1m", "timing": [
        {"name": "freewheel", "kind": "diode_conduction", "diode": "D1", "max": "3u", "from": "100u"}
      ]}
    }"#;
    let c = Circuit::from_json(text).unwrap();
    let rule = &c.run.as_ref().unwrap().timing[0];
    assert_eq!(rule.from, Some(100e-6));
    assert_eq!(
        rule.check,
        TimingCheck::DiodeConduction {
            diode: "D1".into(),
            max: 3e-6
        }
    );
    let back = Circuit::from_json(&c.to_json()).unwrap();
    assert_eq!(back, c);
    let err = Circuit::from_json(&text.replace("\"max\": \"3u\"", "\"maxx\": \"3u\""))
        .unwrap_err()
        .to_string();
    assert!(err.contains("maxx"), "{err}");
}

/// The asynchronous buck with design limits in its run settings.
fn buck_with_limits(limits: DesignLimits) -> Circuit {
    let mut c = buck().build().unwrap();
    c.run = Some(RunSettings {
        limits: Some(limits),
        ..RunSettings::default_for(1e-3)
    });
    c
}

#[test]
fn design_limits_name_parts_of_the_right_kind_and_positive_values() {
    let part = |element: &str, value: f64| PartLimit {
        element: element.into(),
        value,
    };
    let good = DesignLimits {
        output: Some("out".into()),
        max_output_ripple: Some(0.1),
        saturation_current: vec![part("L1", 4.0)],
        voltage_rating: vec![part("S1", 40.0), part("D1", 40.0)],
        derating: Some(0.8),
        min_phase_margin: Some(45.0),
        max_junction_temperature: Some(125.0),
    };
    valid(&buck_with_limits(good.clone()));
    let c = buck_with_limits(DesignLimits {
        output: Some("vout".into()),
        max_output_ripple: Some(-1.0),
        saturation_current: vec![part("S1", 4.0), part("L9", 1.0)],
        voltage_rating: vec![part("L1", 40.0), part("D1", 0.0)],
        derating: Some(1.5),
        min_phase_margin: Some(200.0),
        max_junction_temperature: Some(f64::NAN),
    });
    let at = |field: &str, text: &str| {
        expect(&c, None, Some(field), text);
    };
    at("run.limits.output", "no node is named 'vout'");
    at("run.limits.max_output_ripple", "must be a positive voltage");
    at(
        "run.limits.saturation_current[0].element",
        "'S1' is not an inductor",
    );
    at(
        "run.limits.saturation_current[1].element",
        "no element is named 'L9'",
    );
    at(
        "run.limits.voltage_rating[0].element",
        "'L1' is not a switch or diode",
    );
    at("run.limits.voltage_rating[1].value", "must be positive");
    at("run.limits.derating", "must lie in (0, 1]");
    at("run.limits.min_phase_margin", "must lie in (0, 180)");
    at("run.limits.max_junction_temperature", "must be a finite");
    assert_eq!(problems(&c).len(), 9);
}

/// Issue 19 (a fuzz case): a capacitor of 5e-324 F in the voltage
/// multiplier put ∞ (1/C) into the state equations, whose rate bound was
/// then NaN, so the run was neither refused nor finished (tens of seconds
/// for 50 µs). A resistance, inductance or capacitance without a finite
/// reciprocal is refused by name; the smallest normal float still passes.
#[test]
fn issue_19_values_without_a_finite_reciprocal_are_refused() {
    let rlc = |r: f64, l: f64, c: f64| {
        Circuit::builder()
            .voltage_source("V1", "in", "gnd", 1.0)
            .resistor("R1", "in", "a", r)
            .inductor("L1", "a", "b", l)
            .capacitor("C1", "b", "gnd", c)
            .build_unchecked()
    };
    for (c, element, field) in [
        (rlc(5e-324, 1e-6, 1e-6), "R1", "resistance"),
        (rlc(1.0, 5e-324, 1e-6), "L1", "inductance"),
        (rlc(1.0, 1e-6, 5e-324), "C1", "capacitance"),
    ] {
        expect(
            &c,
            Some(element),
            Some(field),
            "reciprocal must be a finite number",
        );
    }
    assert!(rlc(f64::MIN_POSITIVE, f64::MIN_POSITIVE, f64::MIN_POSITIVE)
        .validate()
        .is_ok());
}
