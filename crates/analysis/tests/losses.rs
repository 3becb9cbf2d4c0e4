//! Losses: the energy balance on every example circuit, conduction losses
//! against closed forms, jump energy, ESR and winding resistance, loads
//! and efficiency, bad input.

use std::path::PathBuf;

use fluxstep_analysis::losses::{breakdown, LossKind, LossOptions};
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::{
    Capacitor, Circuit, DiodeModel, Element, Inductor, ShootThroughPolicy, Switch,
};
use fluxstep_solver::{simulate, OnInterruption, OnShootThrough, Options, RunResult};

use crate::common::example;

/// Runs an example with its file's policies, recording everything.
fn run_example(c: &Circuit) -> (RunResult, f64) {
    let cfg = c.run.as_ref().expect("every example has run settings");
    let opts = Options {
        // Conserve flux so the interrupted inductor's jump is in the
        // balance (the file's default stops there with a diagnostic).
        on_interruption: OnInterruption::ConserveFlux,
        on_shoot_through: match cfg.on_shoot_through {
            ShootThroughPolicy::Record => OnShootThrough::Record,
            _ => OnShootThrough::Stop,
        },
        ..Options::default()
    };
    (
        simulate(c, cfg.stop_time, opts).expect("example runs"),
        cfg.stop_time,
    )
}

/// Input energy = output + Σ losses (conduction and jumps) + change of
/// stored energy, to 1e-9 relative, on every example circuit and on two
/// windows (the whole run, which includes every start-up jump, and the
/// last fifth). Source: conservation of energy (Tellegen's theorem: the
/// powers of all branches sum to zero at every instant; a jump's logged
/// energy is the stored energy it removes) — common practice.
#[test]
fn energy_balances_on_every_example() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits");
    let mut names: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .filter(|n| n.ends_with(".json"))
        .collect();
    names.sort();
    assert!(names.len() >= 11, "{names:?}");
    for name in &names {
        let c = example(name);
        let (run, stop) = run_example(&c);
        for t0 in [0.0, 0.8 * stop] {
            let r = breakdown(
                &c,
                &run.waveform,
                &run.events,
                t0,
                stop,
                &LossOptions::default(),
            )
            .unwrap_or_else(|e| panic!("{name}: {e}"));
            assert!(
                r.balance_error() < 1e-9,
                "{name} from {t0:e}: residual {:e} J, relative {:e}; {r:#?}",
                r.balance_residual(),
                r.balance_error()
            );
            assert!(
                r.input_energy.is_finite() && r.total_loss() >= 0.0,
                "{name}"
            );
            println!(
                "{name} from {t0:e}: input {:e} J, losses {:e} W, relative residual {:e}",
                r.input_energy,
                r.total_loss(),
                r.balance_error()
            );
        }
    }
}

/// The interrupted inductor's flux jump is counted once, as a jump loss of
/// the 1.1 mJ the file's description states: ½·L·i² with
/// i = 12/1·(1 − e^(−0.5)) (first-order RL step, common practice).
#[test]
fn a_flux_jump_is_a_jump_loss() {
    let c = example("interrupted_inductor.json");
    let (run, stop) = run_example(&c);
    let r = breakdown(
        &c,
        &run.waveform,
        &run.events,
        0.0,
        stop,
        &LossOptions::default(),
    )
    .unwrap();
    let jumps: Vec<_> = r
        .parts
        .iter()
        .filter(|p| p.kind == LossKind::Jump)
        .collect();
    assert_eq!(jumps.len(), 1, "{jumps:?}");
    let Some(Element::Inductor(l)) = c.element("L1") else {
        panic!("L1 is an inductor")
    };
    let i = 12.0 * (1.0 - (-0.5f64).exp());
    let e = 0.5 * l.inductance * i * i;
    assert!(
        (jumps[0].energy - e).abs() < 1e-9 * e,
        "{} vs {e}",
        jumps[0].energy
    );
    assert!((r.by_kind().jump * r.duration() - e).abs() < 1e-9 * e);
}

fn switch(name: &str, a: &str, b: &str, gate: &str, r: f64, body: Option<DiodeModel>) -> Element {
    Element::Switch(Switch {
        name: name.into(),
        nodes: [a.into(), b.into()],
        gate: gate.into(),
        on_resistance: Some(r),
        body_diode: body,
        thermal: None,
        transition: None,
        switching_energy: None,
    })
}

/// A resistive chopper: 10 V through a 0.5 Ω switch into 4.5 Ω at 30 %
/// duty. While on, I = V/(Ron + R) = 2 A: switch loss Ron·I²·D = 0.6 W,
/// load 4.5·4·0.3 = 5.4 W, input 20·0.3 = 6 W, efficiency 0.9 exactly
/// (Ohm's and Joule's laws; common practice).
#[test]
fn switch_on_resistance_loss_matches_joules_law() {
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 10.0)
        .element(switch("S1", "in", "out", "g", 0.5, None))
        .resistor("Rload", "out", "gnd", 4.5)
        .pwm("g", 50e3, 0.3)
        .build()
        .unwrap();
    let run = simulate(&c, 200e-6, Options::default()).unwrap();
    let opts = LossOptions {
        loads: vec!["Rload".into()],
    };
    // Ten whole periods.
    let r = breakdown(&c, &run.waveform, &run.events, 0.0, 200e-6, &opts).unwrap();
    assert!((r.element_loss("S1") - 0.6).abs() < 1e-12, "{r:#?}");
    assert!((r.output_power() - 5.4).abs() < 1e-12);
    assert!((r.input_power() - 6.0).abs() < 1e-12);
    assert!((r.efficiency().unwrap() - 0.9).abs() < 1e-12);
    assert!((r.by_kind().conduction - 0.6).abs() < 1e-12);
}

/// A diode with 0.7 V and 0.1 Ω from 10 V through 9.2 Ω: I = (10 − 0.7) /
/// 9.3 = 1 A, diode loss Vf·I + Ron·I² = 0.8 W (piecewise-linear diode
/// model; common practice).
#[test]
fn diode_loss_is_forward_drop_plus_resistance() {
    let model = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: Some(0.1),
        recovered_charge: None,
    };
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 10.0)
        .diode_model("D1", "in", "out", model)
        .resistor("R1", "out", "gnd", 9.2)
        .build()
        .unwrap();
    let run = simulate(&c, 1e-3, Options::default()).unwrap();
    let r = breakdown(
        &c,
        &run.waveform,
        &run.events,
        0.0,
        1e-3,
        &LossOptions::default(),
    )
    .unwrap();
    assert!((r.element_loss("D1") - 0.8).abs() < 1e-12, "{r:#?}");
    assert!((r.element_loss("R1") - 9.2).abs() < 1e-12);
}

/// Two 1 µF capacitors, one at 10 V, joined by an ideal switch: the jump
/// dissipates ½·(C1·C2/(C1 + C2))·ΔV² = 25 µJ (charge sharing; common
/// practice), counted in the window that starts at the jump and not in
/// the one that ends there.
#[test]
fn charge_sharing_counts_once_at_a_window_start() {
    let c = Circuit::builder()
        .capacitor_with_voltage("C1", "a", "gnd", 1e-6, 10.0)
        .capacitor("C2", "b", "gnd", 1e-6)
        .resistor("Rleak", "b", "gnd", 1e6)
        .timed_switch("S1", "a", "b", &[(1e-6, true)])
        .build()
        .unwrap();
    let run = simulate(&c, 2e-6, Options::default()).unwrap();
    let none = LossOptions::default();
    let before = breakdown(&c, &run.waveform, &run.events, 0.0, 1e-6, &none).unwrap();
    let after = breakdown(&c, &run.waveform, &run.events, 1e-6, 2e-6, &none).unwrap();
    assert_eq!(before.by_kind().jump, 0.0);
    let e = after.by_kind().jump * after.duration();
    assert!((e - 25e-6).abs() < 1e-9 * 25e-6, "{e}");
    // The stored energy at the shared instant: 50 µJ before the jump.
    assert_eq!(before.stored.1, after.stored.0);
    assert!((after.stored.0 - 50e-6).abs() < 1e-15);
    for r in [before, after] {
        assert!(r.balance_error() < 1e-9, "{r:#?}");
    }
}

/// ESR and winding resistance, expanded by the compiler: a DC source into
/// an RL branch whose inductor has 0.2 Ω of winding resistance, with a
/// 10 µF capacitor with 0.05 Ω ESR across the 1.8 Ω load. After the start
/// (many time constants), the DC current is V/(R_w + R) = 5 A, so the
/// winding dissipates 0.2·25 = 5 W and the ESR nothing (Ohm's law; common
/// practice); the balance holds through the start-up.
#[test]
fn esr_and_winding_resistance_are_conduction_losses() {
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 10.0)
        .element(Element::Inductor(Inductor {
            name: "L1".into(),
            nodes: ["in".into(), "out".into()],
            inductance: 10e-6,
            initial_current: None,
            winding_resistance: Some(0.2),
            core: None,
        }))
        .element(Element::Capacitor(Capacitor {
            name: "C1".into(),
            nodes: ["out".into(), "gnd".into()],
            capacitance: 10e-6,
            initial_voltage: None,
            esr: Some(0.05),
        }))
        .resistor("Rload", "out", "gnd", 1.8)
        .build()
        .unwrap();
    let run = simulate(&c, 2e-3, Options::default()).unwrap();
    let opts = LossOptions {
        loads: vec!["Rload".into()],
    };
    let whole = breakdown(&c, &run.waveform, &run.events, 0.0, 2e-3, &opts).unwrap();
    assert!(whole.balance_error() < 1e-9, "{whole:#?}");
    assert!(
        whole.element_loss("C1") > 0.0,
        "the ESR carries the start-up current"
    );
    let late = breakdown(&c, &run.waveform, &run.events, 1.9e-3, 2e-3, &opts).unwrap();
    assert!((late.element_loss("L1") - 5.0).abs() < 1e-9, "{late:#?}");
    assert!(late.element_loss("C1").abs() < 1e-9);
    assert!((late.efficiency().unwrap() - 0.9).abs() < 1e-9);
    let names: Vec<_> = late.parts.iter().map(|p| p.name.as_str()).collect();
    assert_eq!(names, ["L1.winding", "C1.esr"]);
}

/// The synchronous buck example: the channels and body diodes of both
/// switches are separate parts; the body diodes conduct only in the dead
/// times, and the breakdown's per-kind total equals the sum of its parts.
#[test]
fn sync_buck_breakdown_has_channels_and_body_diodes() {
    let c = example("sync_buck.json");
    let (run, stop) = run_example(&c);
    let t0 = stop - 10.0 / 200e3;
    let opts = LossOptions {
        loads: vec!["Rload".into()],
    };
    let r = breakdown(&c, &run.waveform, &run.events, t0, stop, &opts).unwrap();
    let names: Vec<_> = r.parts.iter().map(|p| p.name.as_str()).collect();
    assert_eq!(names, ["Q1", "Q1.body_diode", "Q2", "Q2.body_diode"]);
    let sum: f64 = r.parts.iter().map(|p| p.power).sum();
    assert!((r.by_kind().conduction - sum).abs() < 1e-12 * sum);
    assert!(r.element_loss("Q2.body_diode") > 0.0);
    assert_eq!(r.element_loss("Q1.body_diode"), 0.0);
    let eta = r.efficiency().unwrap();
    assert!(eta > 0.9 && eta < 1.0, "{eta}");
}

#[test]
fn an_unknown_load_is_named() {
    let c = example("buck.json");
    let run = simulate(&c, 10e-6, Options::default()).unwrap();
    let opts = LossOptions {
        loads: vec!["Rlaod".into()],
    };
    let e = breakdown(&c, &run.waveform, &run.events, 0.0, 10e-6, &opts).unwrap_err();
    assert!(matches!(e, AnalysisError::UnknownLoad { .. }));
    assert!(e.to_string().contains("Rlaod"), "{e}");
}

mod switching {
    use fluxstep_analysis::losses::switching::{
        recovery_loss, switching_loss, EnergyTable, SwitchingEnergy,
    };
    use fluxstep_analysis::losses::{breakdown, LossKind, LossOptions};
    use fluxstep_analysis::AnalysisError;
    use fluxstep_netlist::{Circuit, Element, Stimulus};
    use fluxstep_solver::{simulate, Options};

    /// A constant-current chopper: 100 V, an ideal switch, a 10 A current
    /// sink clamped by a freewheeling diode, 100 kHz at 40 %.
    fn chopper() -> Circuit {
        Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 100.0)
            .switch("S1", "in", "sw", "g")
            .diode("D1", "gnd", "sw")
            .current_source("Iload", "sw", "gnd", Stimulus::Constant { value: 10.0 })
            .pwm("g", 100e3, 0.4)
            .build()
            .unwrap()
    }

    fn table(top: f64) -> EnergyTable {
        EnergyTable::single(50.0, &[(0.0, 0.0), (5.0, 50e-6), (top, 300e-6)])
    }

    fn model(on: EnergyTable, off: EnergyTable) -> SwitchingEnergy {
        SwitchingEnergy {
            turn_on: on,
            turn_off: off,
        }
    }

    /// Each edge switches exactly 10 A against 100 V: linear interpolation
    /// gives 50 + (5/15)·250 = 133.3 µJ at 50 V, twice that at 100 V
    /// (datasheet table, linear in current and voltage; common practice).
    /// Three periods [10 µs, 40 µs) hold three turn-ons and three
    /// turn-offs (at t = 0 the switch starts on: no edge).
    #[test]
    fn edges_read_the_table_at_the_exact_current_and_voltage() {
        let c = chopper();
        let run = simulate(&c, 40e-6, Options::default()).unwrap();
        let m = model(table(20.0), table(20.0));
        let s = switching_loss("S1", &m, &run.waveform, &run.events, 10e-6, 40e-6).unwrap();
        let e = 2.0 * (50e-6 + 250e-6 / 3.0);
        assert_eq!((s.edges, s.soft), (6, 0), "{s:?}");
        assert!((s.turn_on - 3.0 * e).abs() < 1e-12 * e, "{s:?}");
        assert!((s.turn_off - 3.0 * e).abs() < 1e-12 * e, "{s:?}");
        assert!(s.outside.is_empty());
        // A table that stops at 8 A: every edge is reported, none counted.
        let short = model(table(8.0), table(8.0));
        let s = switching_loss("S1", &short, &run.waveform, &run.events, 10e-6, 40e-6).unwrap();
        assert_eq!((s.turn_on + s.turn_off, s.outside.len()), (0.0, 6));
        assert!(s
            .outside
            .iter()
            .all(|o| o.current == 10.0 && o.voltage == 100.0));
    }

    /// Two curves (50 V and 150 V): at 100 V the energy is the mean of
    /// the two curves' values at 10 A; a 200 V bus lies outside the table
    /// and is reported (linear interpolation of datasheet curves; common
    /// practice).
    #[test]
    fn two_curves_interpolate_in_voltage_and_never_extrapolate() {
        let mut t = table(20.0);
        let mut upper = t.curves[0].clone();
        upper.voltage = 150.0;
        for p in &mut upper.points {
            p.energy *= 4.0;
        }
        t.curves.push(upper);
        let m = model(t.clone(), t);
        let run = simulate(&chopper(), 40e-6, Options::default()).unwrap();
        let s = switching_loss("S1", &m, &run.waveform, &run.events, 10e-6, 40e-6).unwrap();
        let at_10a = 50e-6 + 250e-6 / 3.0;
        let e = 0.5 * (at_10a + 4.0 * at_10a);
        assert!((s.turn_on - 3.0 * e).abs() < 1e-12 * e, "{s:?}");
        let mut high = chopper();
        if let Element::VoltageSource(v) = &mut high.elements[0] {
            v.waveform = Stimulus::Constant { value: 200.0 };
        }
        let run = simulate(&high, 40e-6, Options::default()).unwrap();
        let s = switching_loss("S1", &m, &run.waveform, &run.events, 10e-6, 40e-6).unwrap();
        assert_eq!(s.outside.len(), 6);
        assert!(s.outside.iter().all(|o| o.voltage == 200.0));
    }

    /// A switch whose current flows in its body diode's direction, or that
    /// turns on at zero volts, switches softly: no table energy
    /// (zero-voltage switching; common practice). The synchronous buck's
    /// low side turns on and off while its body diode carries the
    /// inductor current.
    #[test]
    fn soft_edges_have_no_table_energy() {
        let c =
            Circuit::from_json(include_str!("../../../examples/circuits/sync_buck.json")).unwrap();
        let run = simulate(&c, 40e-6, Options::default()).unwrap();
        let m = model(table(1e3), table(1e3));
        let s = switching_loss("Q2", &m, &run.waveform, &run.events, 20e-6, 40e-6).unwrap();
        assert!(s.edges >= 6 && s.soft == s.edges, "{s:?}");
        assert_eq!(s.turn_on + s.turn_off, 0.0);
        let hs = switching_loss("Q1", &m, &run.waveform, &run.events, 20e-6, 40e-6).unwrap();
        assert!(hs.edges >= 6 && hs.soft == 0, "{hs:?}");
    }

    /// The freewheeling diode is turned off by every switch turn-on while
    /// it carries the 10 A load: Qrr·Vr per period with Vr = 100 V
    /// (reverse-recovery energy Qrr·Vr; common practice). The breakdown
    /// reads `recovered_charge` from the circuit and keeps it out of the
    /// energy balance.
    #[test]
    fn forced_diode_turn_offs_cost_qrr_times_the_reverse_voltage() {
        let mut c = chopper();
        for e in &mut c.elements {
            if let Element::Diode(d) = e {
                d.model.recovered_charge = Some(50e-9);
            }
        }
        let run = simulate(&c, 40e-6, Options::default()).unwrap();
        let r = recovery_loss("D1", 50e-9, &run.waveform, &run.events, 10e-6, 40e-6).unwrap();
        assert_eq!((r.forced, r.natural), (3, 0), "{r:?}");
        let e = 3.0 * 50e-9 * 100.0;
        assert!((r.energy - e).abs() < 1e-12 * e, "{r:?}");
        let opts = LossOptions {
            loads: vec!["Iload".into()],
        };
        let b = breakdown(&c, &run.waveform, &run.events, 10e-6, 40e-6, &opts).unwrap();
        let p = b
            .parts
            .iter()
            .find(|p| p.kind == LossKind::Recovery)
            .unwrap();
        assert_eq!(p.name, "D1");
        assert!((p.energy - e).abs() < 1e-12 * e);
        assert!(b.balance_error() < 1e-9, "{}", b.balance_error());
    }

    /// In discontinuous conduction the diode's current reaches zero by
    /// itself: no recovery loss (Erickson & Maksimović, *Fundamentals of
    /// Power Electronics*, 2nd ed., section 4.3; from memory).
    #[test]
    fn a_diode_that_stops_by_itself_has_no_recovery_loss() {
        let c =
            Circuit::from_json(include_str!("../../../examples/circuits/buck_dcm.json")).unwrap();
        let diode = c
            .elements
            .iter()
            .find_map(|e| match e {
                Element::Diode(d) => Some(d.name.clone()),
                _ => None,
            })
            .unwrap();
        let stop = c.run.as_ref().unwrap().stop_time;
        let run = simulate(&c, stop, Options::default()).unwrap();
        let r = recovery_loss(&diode, 1e-6, &run.waveform, &run.events, stop / 2.0, stop).unwrap();
        assert!(r.natural > 0 && r.forced == 0, "{r:?}");
        assert_eq!(r.energy, 0.0);
    }

    #[test]
    fn bad_tables_name_the_field() {
        let c = chopper();
        let run = simulate(&c, 10e-6, Options::default()).unwrap();
        let mut falling = table(20.0);
        falling.curves[0].points[2].current = 4.0;
        let mut negative = table(20.0);
        negative.curves[0].points[1].energy = -1e-6;
        for (bad, what, field) in [
            (
                falling,
                "increasing",
                "turn_off.curves[0].points[2].current",
            ),
            (
                negative,
                "not negative",
                "turn_off.curves[0].points[1].energy",
            ),
        ] {
            let m = model(table(20.0), bad);
            let e = switching_loss("S1", &m, &run.waveform, &run.events, 0.0, 10e-6).unwrap_err();
            assert!(matches!(e, AnalysisError::LossModel { .. }));
            let text = e.to_string();
            assert!(
                text.contains("S1") && text.contains(field) && text.contains(what),
                "{text}"
            );
        }
    }
}

/// A constant-current chopper (100 V bus, 10 A load, 100 kHz, clamp diode)
/// whose switch has the finite transition model, as `transition: Some(..)`.
fn chopper_with_transitions() -> (Circuit, (f64, f64), (f64, f64)) {
    use fluxstep_netlist::{Stimulus, SwitchTransition, TransitionRates};
    let off = (100.0 / 20e-9, 10.0 / 10e-9);
    let on = (100.0 / 25e-9, 10.0 / 15e-9);
    let mut s = match switch("S1", "sw", "gnd", "g", 0.05, None) {
        Element::Switch(s) => s,
        _ => unreachable!(),
    };
    s.transition = Some(SwitchTransition {
        turn_off: TransitionRates {
            voltage_rate: off.0,
            current_rate: off.1,
        },
        turn_on: TransitionRates {
            voltage_rate: on.0,
            current_rate: on.1,
        },
    });
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 100.0)
        .current_source("I1", "in", "sw", Stimulus::Constant { value: 10.0 })
        .diode("D1", "sw", "in")
        .element(Element::Switch(s))
        .pwm("g", 100e3, 0.5)
        .build()
        .unwrap();
    (c, off, on)
}

/// The breakdown splits a switch's ∫v·i at its transitions: switching
/// energy per period ½·V·I·(t_v + t_i) per edge (Mohan, Undeland &
/// Robbins, *Power Electronics*, switching-loss chapter; common practice),
/// conduction R·I² over the on-time outside the transitions (the on-state
/// begins at the end of the turn-on's voltage fall and ends at the
/// turn-off's gate edge), and the energy balance still closes to 1e-9
/// (conservation of energy, common practice).
#[test]
fn transition_losses_are_switching_energy_in_the_balance() {
    let (c, off, on) = chopper_with_transitions();
    let t = 1e-5;
    let run = simulate(&c, 3.0 * t, Options::default()).unwrap();
    let opts = LossOptions {
        loads: vec!["I1".into()],
    };
    let r = breakdown(&c, &run.waveform, &run.events, t, 2.0 * t, &opts).unwrap();
    let (v, i) = (100.0, 10.0);
    // The voltage ramp starts from the on-state drop v0 = R·I, so the
    // turn-off's voltage rise gives I·(V² − v0²)/(2·dv/dt), which is
    // ½·V·I·t_v for v0 = 0.
    let v0 = 0.05 * i;
    let e_off = i * (v * v - v0 * v0) / (2.0 * off.0) + 0.5 * v * i * (i / off.1);
    let e_on = 0.5 * v * i * (i / on.1 + v / on.0);
    let sw: f64 = r
        .parts
        .iter()
        .filter(|p| p.kind == LossKind::Transition && p.name == "S1")
        .map(|p| p.energy)
        .sum();
    assert!(
        (sw - (e_off + e_on)).abs() < 1e-9 * (e_off + e_on),
        "{sw} vs {}",
        e_off + e_on
    );
    // On from the end of the turn-on (at T + t_i + t_v) to T + T/2.
    let t_on = 0.5 * t - i / on.1 - v / on.0;
    let cond: f64 = r
        .parts
        .iter()
        .filter(|p| p.kind == LossKind::Conduction && p.name == "S1")
        .map(|p| p.energy)
        .sum();
    let want = 0.05 * i * i * t_on;
    assert!((cond - want).abs() < 1e-9 * want, "{cond} vs {want}");
    assert!((r.by_kind().switching - sw / t).abs() < 1e-9 * sw / t);
    assert!(r.balance_error() < 1e-9, "{}", r.balance_error());
    let eta = r.efficiency().unwrap();
    assert!((eta - r.output_power() / r.input_power()).abs() < 1e-12);
}

/// A synchronous buck (24 V, 200 kHz, 50 ns / 80 ns dead times, body
/// diodes) with the transition model on both transistors.
fn sync_buck_with_transitions() -> Circuit {
    use fluxstep_netlist::{SwitchTransition, TransitionRates};
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .element(switch(
            "Q1",
            "in",
            "sw",
            "hb.high",
            0.01,
            Some(body.clone()),
        ))
        .element(switch("Q2", "sw", "gnd", "hb.low", 0.01, Some(body)))
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("R", "out", "gnd", 6.0)
        .complementary_pwm("hb", 200e3, 0.5, 50e-9, 80e-9)
        .build()
        .unwrap();
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
    c
}

/// In a synchronous buck the high side switches hard (two transitions a
/// period, each with switching energy) and the low side at zero voltage
/// into its body diode (none) — common practice; the energy balance
/// closes to 1e-9 over the start-up and over a late period (conservation
/// of energy, common practice).
#[test]
fn sync_buck_transitions_switch_the_high_side_hard_and_balance() {
    let c = sync_buck_with_transitions();
    let t = 5e-6;
    let run = simulate(&c, 400.0 * t, Options::default()).unwrap();
    let w = &run.waveform;
    let q1 = w.transition_spans("Q1");
    let late: Vec<_> = q1.iter().filter(|s| s.t0 >= 399.0 * t).collect();
    assert_eq!(late.len(), 2, "{late:?}");
    assert!(late.iter().any(|s| s.turn_on) && late.iter().any(|s| !s.turn_on));
    // Start-up rings the inductor current negative, and then the low side
    // does switch hard; in continuous conduction (valley 1.3 A) it does not.
    assert!(w.transition_spans("Q2").iter().all(|s| s.t1 < 300.0 * t));
    let opts = LossOptions {
        loads: vec!["R".into()],
    };
    for (t0, t1) in [(0.0, 400.0 * t), (399.0 * t, 400.0 * t)] {
        let r = breakdown(&c, w, &run.events, t0, t1, &opts).unwrap();
        assert!(r.balance_error() < 1e-9, "{t0}: {}", r.balance_error());
        let q2: f64 = r
            .parts
            .iter()
            .filter(|p| p.kind == LossKind::Transition && p.name == "Q2")
            .map(|p| p.energy)
            .sum();
        if t0 > 0.0 {
            assert_eq!(q2, 0.0);
        }
        assert!(r.by_kind().switching > 0.0);
    }
}

/// With a finite turn-on, the high side's rising current takes the low
/// side's body-diode current over: the diode stops inside the transition
/// and then blocks the bus, so each period costs Qrr·Vr with Vr the bus
/// less the high side's on-state drop (reverse-recovery energy Qrr·Vr;
/// common practice). 30 nC at 24 V: 720 nJ per period, within the
/// on-state drop (10 mΩ at about 2 A: 1e-3 relative).
#[test]
fn a_diode_commutated_by_a_finite_turn_on_recovers() {
    use fluxstep_analysis::losses::switching::recovery_loss;
    let mut c = sync_buck_with_transitions();
    for e in &mut c.elements {
        if let Element::Switch(s) = e {
            if s.name == "Q2" {
                s.body_diode.as_mut().unwrap().recovered_charge = Some(30e-9);
            }
        }
    }
    let t = 5e-6;
    let run = simulate(&c, 400.0 * t, Options::default()).unwrap();
    let r = recovery_loss(
        "Q2.body_diode",
        30e-9,
        &run.waveform,
        &run.events,
        399.0 * t,
        400.0 * t,
    )
    .unwrap();
    assert_eq!(r.forced, 1, "{r:?}");
    let e = 30e-9 * 24.0;
    assert!(r.energy < e && r.energy > e * (1.0 - 1e-3), "{r:?}");
    let opts = LossOptions {
        loads: vec!["R".into()],
    };
    let b = breakdown(&c, &run.waveform, &run.events, 399.0 * t, 400.0 * t, &opts).unwrap();
    assert!((b.by_kind().recovery * t - r.energy).abs() < 1e-15);
}

/// The small-signal response does not linearise transition ramps: it
/// refuses the circuit, naming the switch and the field.
#[test]
fn the_response_refuses_transition_models() {
    use fluxstep_analysis::response::{frequency_response, Input};
    use fluxstep_analysis::steady::SteadyOptions;
    let c = sync_buck_with_transitions();
    let e = frequency_response(
        &c,
        &Input::Value("Vin".into()),
        "out",
        &[1e3],
        &SteadyOptions::default(),
    )
    .unwrap_err();
    assert!(
        matches!(&e, AnalysisError::LossModel { element, field, .. } if element == "Q1" && field == "transition"),
        "{e}"
    );
}

/// The demo synchronous buck (examples/losses.rs: 24 V in, 22 µH with
/// 15 mΩ winding, two 10 mΩ transistors with 0.7 V body diodes, 50 ns and
/// 80 ns dead times, 200 kHz) charging a 12 V battery at D = 0.52, with
/// datasheet tables on the high side and 40 nC of recovered charge on the
/// low side's body diode. The battery fixes the output, so the periodic
/// inductor current follows by hand: in each of the four intervals
/// L·di/dt = a − r·i has i(t) = a/r + (i0 − a/r)·e^(−r·t/L) (first-order
/// RL response; common practice), the four affine maps compose to
/// i(T) = A·i0 + B, and the periodic current starts at i0 = B/(1 − A).
/// From it, by hand:
///
/// - input: Vin·∫i over the high side's on-time;
/// - output: Vbat·∫i over the period;
/// - conduction: Ron·∫i² per channel, Rw·∫i² in the winding, Vf·∫i in the
///   low side's body diode during both dead times, with
///   ∫(c + d·e^(−t/τ))² = c²·t + 2cdτ(1 − e^(−t/τ)) + d²τ/2·(1 − e^(−2t/τ));
/// - switching: the high side turns on at i(50 ns) and off at i(D·T),
///   both against Vin + Vf (the body diode clamps the switch node at
///   −Vf), read from the tables by linear interpolation and scaled by
///   (Vin + Vf)/24 V (common practice); the low side switches softly;
/// - recovery: Qrr·(Vin − Ron·i(50 ns)) when the high side's turn-on cuts
///   the body diode's current (common practice);
/// - efficiency P_out / (P_in + switching + recovery).
///
/// The breakdown of one simulated period must agree to 1e-6 (measured:
/// efficiency 95.36 % within 3e-12, conduction within 3e-10, switching and
/// recovery within 1e-14).
#[test]
fn demo_sync_buck_efficiency_matches_a_hand_calculation() {
    use fluxstep_netlist::{EnergyTable, SwitchingEnergy};
    let (vin, vbat, l, rw, ron, vf) = (24.0, 12.0, 22e-6, 0.015, 0.010, 0.7);
    let (t, d, dh, dl) = (5e-6, 0.52, 50e-9, 80e-9);
    let qrr = 40e-9;
    let eon = [(0.0, 0.0), (5.0, 4e-6), (15.0, 14e-6)];
    let eoff = [(0.0, 0.0), (5.0, 3e-6), (15.0, 11e-6)];
    // The four intervals: (length, a, r).
    let intervals = [
        (dh, -vf - vbat, rw),
        (d * t - dh, vin - vbat, rw + ron),
        (dl, -vf - vbat, rw),
        (t - d * t - dl, -vbat, rw + ron),
    ];
    let step = |i0: f64, (len, a, r): (f64, f64, f64)| {
        let k = (-r * len / l).exp();
        a / r + (i0 - a / r) * k
    };
    let (mut big_a, mut big_b) = (1.0, 0.0);
    for &iv in &intervals {
        let k = (-iv.2 * iv.0 / l).exp();
        // i → a/r·(1 − k) + k·i composed after the maps so far.
        big_a *= k;
        big_b = k * big_b + iv.1 / iv.2 * (1.0 - k);
    }
    let i0 = big_b / (1.0 - big_a);
    // ∫i and ∫i² over each interval.
    let mut starts = vec![i0];
    for &iv in &intervals {
        let last = *starts.last().unwrap();
        starts.push(step(last, iv));
    }
    let moments = |i_start: f64, (len, a, r): (f64, f64, f64)| {
        let (c, dd, tau) = (a / r, i_start - a / r, l / r);
        let e1 = 1.0 - (-len / tau).exp();
        let e2 = 1.0 - (-2.0 * len / tau).exp();
        (
            c * len + dd * tau * e1,
            c * c * len + 2.0 * c * dd * tau * e1 + dd * dd * tau / 2.0 * e2,
        )
    };
    let m: Vec<(f64, f64)> = (0..4).map(|k| moments(starts[k], intervals[k])).collect();
    let charge: f64 = m.iter().map(|x| x.0).sum();
    let input = vin * m[1].0;
    let output = vbat * charge;
    let conduction =
        ron * (m[1].1 + m[3].1) + rw * m.iter().map(|x| x.1).sum::<f64>() + vf * (m[0].0 + m[2].0);
    let interp = |tab: &[(f64, f64)], i: f64| {
        let k = tab.iter().position(|p| p.0 > i).unwrap();
        let (a, b) = (tab[k - 1], tab[k]);
        a.1 + (i - a.0) / (b.0 - a.0) * (b.1 - a.1)
    };
    let scale = (vin + vf) / 24.0;
    let switching = (interp(&eon, starts[1]) + interp(&eoff, starts[2])) * scale;
    let recovery = qrr * (vin - ron * starts[1]);
    let eta = output / (input + switching + recovery);

    let body = DiodeModel {
        forward_voltage: Some(vf),
        on_resistance: None,
        recovered_charge: None,
    };
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", vin)
        .transistor("Q1", "in", "sw", "hb.high", ron, body.clone())
        .transistor(
            "Q2",
            "sw",
            "gnd",
            "hb.low",
            ron,
            DiodeModel {
                recovered_charge: Some(qrr),
                ..body
            },
        )
        .element(Element::Inductor(Inductor {
            name: "L1".into(),
            nodes: ["sw".into(), "out".into()],
            inductance: l,
            initial_current: Some(i0),
            winding_resistance: Some(rw),
            core: None,
        }))
        .voltage_source("Vbat", "out", "gnd", vbat)
        .complementary_pwm("hb", 1.0 / t, d, dh, dl)
        .build()
        .unwrap();
    for e in &mut c.elements {
        if let Element::Switch(s) = e {
            if s.name == "Q1" {
                s.switching_energy = Some(SwitchingEnergy {
                    turn_on: EnergyTable::single(24.0, &eon),
                    turn_off: EnergyTable::single(24.0, &eoff),
                });
            }
        }
    }
    let run = simulate(&c, 3.0 * t, Options::default()).unwrap();
    let opts = LossOptions {
        loads: vec!["Vbat".into()],
    };
    let r = breakdown(&c, &run.waveform, &run.events, 2.0 * t, 3.0 * t, &opts).unwrap();
    let close = |got: f64, want: f64, what: &str| {
        assert!(
            (got - want).abs() <= 1e-6 * want.abs(),
            "{what}: simulated {got:e}, by hand {want:e}"
        );
    };
    close(r.input_energy, input, "input energy");
    close(r.output_energy, output, "output energy");
    let k = r.by_kind();
    close(k.conduction * t, conduction, "conduction");
    close(k.switching * t, switching, "switching");
    close(k.recovery * t, recovery, "recovery");
    close(r.efficiency().unwrap(), eta, "efficiency");
    assert!(
        eta > 0.9 && eta < 0.99,
        "a plausible efficiency: {eta}, i0 {i0}, P_out {}, conduction {}, switching {}, recovery {}",
        output / t,
        conduction / t,
        switching / t,
        recovery / t
    );
    assert!(
        i0 > 1.0,
        "continuous conduction with positive current: {i0}"
    );
}
