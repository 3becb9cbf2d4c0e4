//! Elementary circuits against closed-form solutions.

use fluxstep_netlist::{Circuit, Gate, Stimulus, Transition};
use fluxstep_solver::{simulate, EventKind, Options};

use super::util::{energy_balance, rel};

fn step_gate(name: &str, at: f64, on: bool) -> Gate {
    Gate::Transitions {
        name: name.into(),
        initial: !on,
        transitions: vec![Transition { time: at, on }],
        period: None,
    }
}

/// RL step: i(t) = (V/R)(1 − e^{−tR/L}) after an ideal switch closes, and the
/// inductor takes the full source voltage at the closing instant
/// (Faraday–Lenz law; common practice).
#[test]
fn rl_step_matches_closed_form() {
    let (v, r, l, t_on) = (1.0, 1.0, 2e-3, 1e-4);
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", v)
        .switch("S1", "in", "a", "g")
        .resistor("R1", "a", "b", r)
        .inductor("L1", "b", "gnd", l)
        .diode("D1", "gnd", "a")
        .gate(step_gate("g", t_on, true))
        .build()
        .unwrap();
    let run = simulate(&c, 1e-2, Options::default()).unwrap();
    let w = &run.waveform;
    let il = w.output("L1.current").unwrap();
    let vl = w.output("L1.voltage").unwrap();
    for k in [0.1, 0.5, 1.0, 2.0, 3.0, 4.5] {
        let t = t_on + k * l / r;
        let exact = v / r * (1.0 - (-(t - t_on) * r / l).exp());
        assert!(
            rel(w.value(il, t).unwrap(), exact) < 1e-12,
            "t = {t}: {} vs {exact}",
            w.value(il, t).unwrap()
        );
    }
    assert_eq!(w.value_before(vl, t_on).unwrap(), 0.0);
    assert!(rel(w.value(vl, t_on).unwrap(), v) < 1e-12);
    let (d, s) = energy_balance(&c, &run);
    assert!(rel(s, d) < 1e-9, "energy {d} vs {s}");
}

/// Commutation: a settled 1 A (1 V, 1 Ω) is switched at one instant into a
/// 3 Ω loop without the source. The current is continuous, the inductor
/// voltage jumps to 3 V with the polarity that keeps the current flowing
/// (v·i < 0: the inductor delivers energy), and the current decays with
/// time constant L/(3 Ω) (Faraday–Lenz law, Kirchhoff's laws; common practice).
#[test]
fn commutation_into_a_resistive_loop() {
    let (l, t1) = (1e-3, 1e-4);
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 1.0)
        .switch("S1", "in", "a", "g1")
        .switch("S2", "a", "c", "g2")
        .resistor("R2", "c", "gnd", 2.0)
        .resistor("R1", "a", "b", 1.0)
        .inductor_with_current("L1", "b", "gnd", l, 1.0)
        .gate(step_gate("g1", t1, false))
        .gate(step_gate("g2", t1, true))
        .build()
        .unwrap();
    let run = simulate(&c, 3e-3, Options::default()).unwrap();
    let w = &run.waveform;
    let il = w.output("L1.current").unwrap();
    let vl = w.output("L1.voltage").unwrap();
    assert!(rel(w.value_before(il, t1).unwrap(), 1.0) < 1e-12);
    assert!(rel(w.value(il, t1).unwrap(), 1.0) < 1e-12);
    assert!(w.value_before(vl, t1).unwrap().abs() < 1e-12);
    let v_after = w.value(vl, t1).unwrap();
    assert!(
        rel(v_after, -3.0) < 1e-12,
        "inductor voltage after commutation {v_after}"
    );
    for k in [0.5, 1.0, 2.0] {
        let t = t1 + k * l / 3.0;
        assert!(rel(w.value(il, t).unwrap(), (-k).exp()) < 1e-12);
    }
    let (d, s) = energy_balance(&c, &run);
    // The source delivers nothing after t1; before it, 1 W into R1 only.
    assert!(
        (d - s).abs() < 1e-9 * (d.abs() + 0.5 * l),
        "energy {d} vs {s}"
    );
}

/// Series RLC step, underdamped: v_C(t) = V[1 − e^{−αt}(cos ω_d t + (α/ω_d) sin ω_d t)],
/// i(t) = (V/(ω_d L)) e^{−αt} sin ω_d t, α = R/2L, ω_d = √(1/LC − α²)
/// (any circuits text, e.g. Nilsson & Riedel, *Electric Circuits*; common practice).
#[test]
fn series_rlc_underdamped_step() {
    let (v, r, l, cap) = (10.0, 2.0, 1e-3, 10e-6);
    let c = Circuit::builder()
        .voltage_waveform("V1", "in", "gnd", Stimulus::constant(v))
        .resistor("R1", "in", "a", r)
        .inductor("L1", "a", "b", l)
        .capacitor("C1", "b", "gnd", cap)
        .build()
        .unwrap();
    let run = simulate(&c, 2e-3, Options::default()).unwrap();
    let w = &run.waveform;
    let alpha = r / (2.0 * l);
    let wd = (1.0 / (l * cap) - alpha * alpha).sqrt();
    let vc = w.output("C1.voltage").unwrap();
    let il = w.output("L1.current").unwrap();
    for k in 1..40 {
        let t = k as f64 * 0.05e-3 + 1.234e-6;
        let e = (-alpha * t).exp();
        let vc_exact = v * (1.0 - e * ((wd * t).cos() + alpha / wd * (wd * t).sin()));
        let i_exact = v / (wd * l) * e * (wd * t).sin();
        assert!(
            (w.value(vc, t).unwrap() - vc_exact).abs() < 1e-10 * v,
            "vc at {t}"
        );
        assert!(
            (w.value(il, t).unwrap() - i_exact).abs() < 1e-10 * v / (wd * l),
            "i at {t}"
        );
    }
    let (d, s) = energy_balance(&c, &run);
    assert!(rel(s, d) < 1e-9);
}

/// v = L·di/dt: 10 nH whose current a piecewise-linear current source forces
/// from 10 A to 0 in 10 ns shows 10 V (Faraday's law; common practice).
#[test]
fn di_dt_spike_across_wiring_inductance() {
    let c = Circuit::builder()
        .current_source(
            "I1",
            "gnd",
            "a",
            Stimulus::pwl(&[(0.0, 10.0), (100e-9, 10.0), (110e-9, 0.0)]),
        )
        .inductor_with_current("Lw", "a", "gnd", 10e-9, 10.0)
        .build()
        .unwrap();
    let run = simulate(&c, 200e-9, Options::default()).unwrap();
    let w = &run.waveform;
    let vl = w.output("Lw.voltage").unwrap();
    let il = w.output("Lw.current").unwrap();
    for t in [101e-9, 105e-9, 109.9e-9] {
        assert!(
            rel(w.value(vl, t).unwrap(), -10.0) < 1e-12,
            "v_L at {t}: {}",
            w.value(vl, t).unwrap()
        );
    }
    assert!(w.value(vl, 50e-9).unwrap().abs() < 1e-12);
    assert!(w.value(vl, 150e-9).unwrap().abs() < 1e-12);
    assert!(rel(w.value(il, 105e-9).unwrap(), 5.0) < 1e-12);
    assert_eq!(run.events.of_kind(EventKind::SourceBreakpoint).count(), 2);
}
