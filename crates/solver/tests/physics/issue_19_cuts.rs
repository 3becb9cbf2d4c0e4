//! Issue 19, item 4: inductors in a cut with a current source. At t = 0 an
//! inductor in series with a current source takes the source's current
//! (its flux set by the source, as a capacitor across a voltage source
//! takes its voltage); an interruption reports the energy the inductor
//! holds, ½·L·I² (common practice).

use fluxstep_netlist::{Circuit, Stimulus};
use fluxstep_solver::{simulate, EventKind, Options, SolverError};

/// 1 A from a current source through 10 µH and 1 Ω, the inductor starting
/// at 0 A: at t = 0 it jumps to 1 A (a flux jump logged at the start) and
/// stays there; the resistor then dissipates exactly 1 W (Ohm's law).
#[test]
fn an_inductor_in_series_with_a_current_source_takes_its_current_at_t0() {
    let c = Circuit::builder()
        .current_source("I1", "gnd", "a", Stimulus::Constant { value: 1.0 })
        .inductor("L1", "a", "b", 10e-6)
        .resistor("R1", "b", "gnd", 1.0)
        .build()
        .unwrap();
    let run = simulate(&c, 10e-6, Options::default()).expect("no interruption at t = 0");
    let first = run.events.iter().next().unwrap();
    assert_eq!(first.kind, EventKind::FluxJump);
    assert_eq!(first.time, 0.0);
    let w = &run.waveform;
    let il = w.output("L1.current").unwrap();
    for t in [0.0, 1e-6, 10e-6] {
        assert!((w.value(il, t).unwrap() - 1.0).abs() < 1e-12);
    }
    let vr = w.output("R1.voltage").unwrap();
    assert!((w.value(vr, 5e-6).unwrap() - 1.0).abs() < 1e-12);
}

/// The same source and inductor (starting at 1 A) through a switch that
/// opens at 5 µs: the run stops naming the inductor with its own energy
/// ½·10 µH·(1 A)² = 5 µJ (it used to report 3.75 µJ, a projection that
/// mixed in the source), and names the current source apart.
#[test]
fn an_interrupted_source_path_reports_the_inductor_energy() {
    let c = Circuit::builder()
        .current_source("I1", "gnd", "a", Stimulus::Constant { value: 1.0 })
        .inductor_with_current("L1", "a", "b", 10e-6, 1.0)
        .timed_switch("S1", "b", "gnd", &[(0.0, true), (5e-6, false)])
        .build()
        .unwrap();
    match simulate(&c, 10e-6, Options::default()) {
        Err(e @ SolverError::InductorInterrupted { .. }) => {
            let text = e.to_string();
            let SolverError::InductorInterrupted {
                time,
                inductors,
                energy,
                current,
                sources,
                ..
            } = e
            else {
                unreachable!()
            };
            assert_eq!(sources, vec!["I1".to_string()], "{text}");
            assert!(
                text.contains("current source I1 also drives that path"),
                "{text}"
            );
            assert_eq!(time, 5e-6);
            assert_eq!(inductors, vec!["L1".to_string()]);
            assert!((current - 1.0).abs() < 1e-12);
            assert!((energy - 5e-6).abs() < 1e-18, "{energy:e}");
        }
        other => panic!("expected an interruption, got {other:?}"),
    }
}
