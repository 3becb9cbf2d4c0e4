//! Finite switching transitions (the clamped inductive switching model of
//! N. Mohan, T. Undeland & W. Robbins, *Power Electronics: Converters,
//! Applications and Design*, chapter on switching losses; common practice).
//!
//! The circuit is the textbook's constant-current chopper: a 10 A current
//! source feeds the switch node, a diode clamps it to the 100 V bus while
//! the switch is off.

use fluxstep_netlist::{
    Circuit, Element, Stimulus as Shape, Switch, SwitchTransition, TransitionRates,
};
use fluxstep_solver::{simulate, EventKind, Options, SolverError};

use super::util::{energy_balance, rel};

const V: f64 = 100.0;
const I: f64 = 10.0;
const F: f64 = 100e3;
/// Turn-off: voltage rise 20 ns, current fall 10 ns.
const OFF: (f64, f64) = (V / 20e-9, I / 10e-9);
/// Turn-on: current rise 15 ns, voltage fall 25 ns.
const ON: (f64, f64) = (V / 25e-9, I / 15e-9);

fn switch_with_transition(a: &str, b: &str) -> Element {
    Element::Switch(Switch {
        name: "S1".into(),
        nodes: [a.into(), b.into()],
        gate: "g".into(),
        on_resistance: None,
        body_diode: None,
        thermal: None,
        transition: Some(SwitchTransition {
            turn_off: TransitionRates {
                voltage_rate: OFF.0,
                current_rate: OFF.1,
            },
            turn_on: TransitionRates {
                voltage_rate: ON.0,
                current_rate: ON.1,
            },
        }),
        switching_energy: None,
    })
}

/// The chopper; with `stray`, an inductance of that value in series with
/// the switch (in the commutation loop), carrying the load current at 0.
fn chopper(stray: Option<f64>) -> Circuit {
    let b = Circuit::builder()
        .voltage_source("V1", "in", "gnd", V)
        .current_source("I1", "in", "sw", Shape::Constant { value: I })
        .diode("D1", "sw", "in")
        .pwm("g", F, 0.5);
    match stray {
        None => b.element(switch_with_transition("sw", "gnd")),
        Some(ls) => b
            .element(switch_with_transition("sw", "s"))
            .inductor_with_current("Ls", "s", "gnd", ls, I),
    }
    .build()
    .unwrap()
}

/// Switching energy per period = ½·V·I·(t_v + t_i) at turn-off and at
/// turn-on (Mohan, Undeland & Robbins, switching-loss chapter; common
/// practice), from the exact ∫v·i of the switch over each transition and
/// over the whole period (the switch is otherwise ideal, so the period's
/// energy is the switching energy alone).
#[test]
fn chopper_switching_energy_is_half_v_i_times_the_transition_times() {
    let c = chopper(None);
    let t = 1.0 / F;
    let run = simulate(&c, 3.0 * t, Options::default()).unwrap();
    let w = &run.waveform;
    let off = 0.5 * V * I * (V / OFF.0 + I / OFF.1);
    let on = 0.5 * V * I * (I / ON.1 + V / ON.0);
    let period =
        fluxstep_solver::measure::part_energy(w, "S1", t, 2.0 * t).expect("S1 is recorded");
    assert!(rel(period, off + on) < 1e-9, "{period} vs {}", off + on);
    let spans = w.transition_spans("S1");
    // Off at T/2, on at T, off at 3T/2, on at 2T, off at 5T/2 (on at 3T
    // starts the record's last instant).
    assert_eq!(spans.len(), 5, "{spans:?}");
    for s in &spans {
        let e = fluxstep_solver::measure::part_energy(w, "S1", s.t0, s.t1).unwrap();
        let (want, first, second) = if s.turn_on {
            (on, I / ON.1, V / ON.0)
        } else {
            (off, V / OFF.0, I / OFF.1)
        };
        assert!(rel(e, want) < 1e-9, "{s:?}: {e} vs {want}");
        // The phases last V/(dv/dt) and I/(di/dt) (the clamp is located
        // to machine precision).
        assert!(((s.clamp - s.t0) - first).abs() < 1e-9 * first, "{s:?}");
        assert!(((s.t1 - s.clamp) - second).abs() < 1e-9 * second, "{s:?}");
    }
    // Tellegen: energy delivered = energy absorbed (common practice).
    let (delivered, absorbed) = energy_balance(&c, &run);
    assert!(rel(absorbed, delivered) < 1e-9, "{absorbed} vs {delivered}");
}

/// A stray inductance Ls in the commutation loop: during the current fall
/// the switch sees V + Ls·di/dt = V + Ls·I/t_fall (v = L·di/dt; Mohan et
/// al., switching-loss chapter), with no interruption diagnostic.
#[test]
fn stray_inductance_gives_its_overshoot_over_the_current_fall() {
    let ls = 10e-9;
    let c = chopper(Some(ls));
    let t = 1.0 / F;
    let run = simulate(&c, 2.0 * t, Options::default()).unwrap();
    let w = &run.waveform;
    let v = w.output("S1.voltage").unwrap();
    let t_fall = I / OFF.1;
    let want = V + ls * I / t_fall;
    let spans = w.transition_spans("S1");
    let off: Vec<_> = spans.iter().filter(|s| !s.turn_on).collect();
    assert!(!off.is_empty(), "{spans:?}");
    for s in off {
        for frac in [0.1, 0.5, 0.9] {
            let tm = s.clamp + frac * (s.t1 - s.clamp);
            let got = w.value(v, tm).unwrap();
            assert!(rel(got, want) < 1e-9, "{tm}: {got} vs {want}");
        }
    }
    let (delivered, absorbed) = energy_balance(&c, &run);
    assert!(rel(absorbed, delivered) < 1e-9, "{absorbed} vs {delivered}");
}

/// Without a clamping diode the voltage ramp never ends: the run stops
/// with a diagnostic naming the switch at its next gate edge, not a hang.
#[test]
fn a_transition_nothing_clamps_is_a_diagnostic_naming_the_switch() {
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", V)
        .resistor("R1", "in", "sw", 10.0)
        .element(switch_with_transition("sw", "gnd"))
        .pwm("g", F, 0.5)
        .build()
        .unwrap();
    let e = simulate(&c, 3.0 / F, Options::default()).unwrap_err();
    match &e {
        SolverError::TransitionIncomplete { switch, time, .. } => {
            assert_eq!(switch, "S1");
            assert!((time - 1.0 / F).abs() < 1e-15, "{time}");
        }
        other => panic!("{other}"),
    }
    assert!(e.to_string().contains("S1"), "{e}");
}

/// Edges logged as usual: the gate edges are the switch events.
#[test]
fn transitions_keep_the_switch_events_at_the_gate_edges() {
    let run = simulate(&chopper(None), 1.0 / F, Options::default()).unwrap();
    let offs: Vec<f64> = run
        .events
        .iter()
        .filter(|e| e.kind == EventKind::SwitchOff)
        .map(|e| e.time)
        .collect();
    assert_eq!(offs, vec![0.5 / F]);
}
