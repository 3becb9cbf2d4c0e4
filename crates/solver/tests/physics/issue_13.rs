//! Regression tests of issue 13 (outputs a designer can trust): the
//! recorded window, coinciding gate edges, measurement by period, event
//! causes and output look-up.

use fluxstep_netlist::{Circuit, DiodeModel, Gate};
use fluxstep_solver::measure::{measure, measure_period};
use fluxstep_solver::{
    EventCause, EventKind, EventRef, Options, Record, RunResult, Simulator, ValueError,
};

/// An example circuit file of the repository.
fn example(file: &str) -> Circuit {
    let path = format!(
        "{}/../../examples/circuits/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    Circuit::from_file(path).expect("example circuit is valid")
}

/// Runs an example as `fluxstep run` does: its own stop time and window,
/// advanced in a hundred slices.
fn run_as_the_cli_does(file: &str) -> (RunResult, f64, f64) {
    let c = example(file);
    let run = c.run.clone().expect("the example has run settings");
    let (from, stop) = (run.record_from.expect("a window start"), run.stop_time);
    let opts = Options {
        record: Record::Window { from, to: stop },
        ..Options::default()
    };
    let mut sim = Simulator::new(&c, opts).expect("compiles");
    for k in 1..=100u32 {
        let t = if k == 100 {
            stop
        } else {
            stop * f64::from(k) / 100.0
        };
        sim.advance_to(t).expect("runs");
    }
    (sim.finish(), from, stop)
}

/// Root cause: `record` kept whole solver segments that overlapped the
/// window, so the record (and every measurement over its span, as the
/// command line takes them) started at the segment's start, 9.9475 ms
/// instead of 9.95 ms for the boost, and covered 10.5 periods (switch-node
/// average 12.57 V, diode 1.047 A). Each end segment is now clipped to the
/// window.
///
/// Over any window [a, b] the inductor's volt-second balance gives
/// avg v_sw = Vin − L·(i_L(b) − i_L(a))/(b − a), and the output
/// capacitor's charge balance gives avg i_D = avg v_out / R +
/// C·(v_C(b) − v_C(a))/(b − a) (R. W. Erickson & D. Maksimović,
/// *Fundamentals of Power Electronics*, 2nd ed. 2001, ch. 2, inductor
/// volt-second and capacitor charge balance); both hold exactly, so to
/// 1e-9. In periodic steady state over whole periods (ten here) the
/// correction terms vanish. The example runs 40 ms so that its start-up
/// (Q about 12, time constant near 1 ms) has died away to rounding before
/// the window: the switch node then averages the 12 V input to 1e-9, and
/// the diode the load current avg v_out / R to 1e-9. That load current is
/// 0.99973 A, not 1 A: with 114 mV of output ripple the output averages
/// 23.9935 V over the period while the switch node, which sees the output
/// only while the switch is off, averages 24 V over the off time
/// (R. W. Erickson & D. Maksimović, as above; the difference is the
/// ripple's shape, common practice).
#[test]
fn issue_13_boost_window_is_exactly_the_requested_one() {
    let (run, from, stop) = run_as_the_cli_does("boost.json");
    let w = &run.waveform;
    assert_eq!(w.span(), Some((from, stop)));
    let (a, b) = w.span().unwrap();
    let m = |name: &str| measure(w, w.output(name).unwrap(), a, b).unwrap();
    let (sw, d, out) = (m("sw"), m("D1.current"), m("out"));
    let il = w.output("L1.current").unwrap();
    let vc = w.output("C1.voltage").unwrap();
    let (l, c, r, vin) = (22e-6, 22e-6, 24.0, 12.0);
    let di = w.value_before(il, b).unwrap() - w.value(il, a).unwrap();
    let dv = w.value_before(vc, b).unwrap() - w.value(vc, a).unwrap();
    let sw_balance = vin - l * di / (b - a);
    let d_balance = out.average / r + c * dv / (b - a);
    assert!(
        (sw.average - sw_balance).abs() < 1e-9,
        "{} vs {sw_balance}",
        sw.average
    );
    assert!(
        (d.average - d_balance).abs() < 1e-9,
        "{} vs {d_balance}",
        d.average
    );
    assert!((sw.average - 12.0).abs() < 1e-9, "{}", sw.average);
    assert!(
        (d.average - out.average / r).abs() < 1e-9,
        "{} vs {}",
        d.average,
        out.average / r
    );
    assert!((d.average - 1.0).abs() < 5e-4, "{}", d.average);
}

/// The clipped first segment starts from the exact state at `from`: the
/// same bits as a run that records everything gives at that instant, and
/// the same at every instant of the window.
#[test]
fn issue_13_clipped_record_agrees_with_the_full_record() {
    for file in [
        "boost.json",
        "hysteretic_buck.json",
        "voltage_mode_buck.json",
    ] {
        let (clipped, from, stop) = run_as_the_cli_does(file);
        let c = example(file);
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        for k in 1..=100u32 {
            let t = if k == 100 {
                stop
            } else {
                stop * f64::from(k) / 100.0
            };
            sim.advance_to(t).expect("runs");
        }
        let full = sim.finish();
        let (a, b) = (&clipped.waveform, &full.waveform);
        assert_eq!(a.span(), Some((from, stop)), "{file}");
        assert_eq!(a.segments()[0].t0, from, "{file}");
        assert_eq!(a.state(from), b.state(from), "{file}: state at the start");
        // Inside the first segment the clipped record advances from `from`,
        // the full one from the segment's start: the same exact solution
        // to rounding (common practice).
        for k in 0..=50 {
            let t = from + (stop - from) * f64::from(k) / 50.0;
            for name in a.output_names() {
                let id = a.output(name).unwrap();
                // At `from` the window sees the value just after.
                let (x, y) = if k == 0 {
                    (a.value(id, t).ok(), b.value(id, t).ok())
                } else {
                    (a.value_before(id, t).ok(), b.value_before(id, t).ok())
                };
                match (x, y) {
                    (Some(x), Some(y)) => assert!(
                        (x - y).abs() <= 1e-12 * y.abs().max(1.0),
                        "{file}: {name} at {t}: {x} vs {y}"
                    ),
                    _ => assert_eq!(x.is_some(), y.is_some(), "{file}: {name} at {t}"),
                }
            }
        }
    }
}

/// A synchronous buck, 12 V to about 4.8 V at 200 kHz (demo values), its
/// half bridge driven by `gates` (high and low side signals `hi`, `lo`);
/// with body diodes the switches have 10 mΩ on-resistance and 0.7 V body
/// diodes.
fn sync_buck(gates: &[Gate], [hi, lo]: [&str; 2], body_diodes: bool) -> Circuit {
    let b = Circuit::builder().voltage_source("Vin", "in", "gnd", 12.0);
    let b = if body_diodes {
        let body = DiodeModel {
            forward_voltage: Some(0.7),
            on_resistance: None,
            recovered_charge: None,
        };
        b.transistor("Q1", "in", "sw", hi, 10e-3, body.clone())
            .transistor("Q2", "sw", "gnd", lo, 10e-3, body)
    } else {
        b.switch("Q1", "in", "sw", hi).switch("Q2", "sw", "gnd", lo)
    };
    let mut b = b
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("Rload", "out", "gnd", 2.4);
    for g in gates {
        b = b.gate(g.clone());
    }
    b.build().expect("valid")
}

const F: f64 = 200e3;

/// The pair as one complementary gate with zero dead times: the high side
/// on over [0.3, 0.7)·T, the low side the rest.
fn complementary() -> Vec<Gate> {
    vec![Gate::ComplementaryPwm {
        name: "hb".into(),
        frequency: F,
        duty: 0.4,
        delay: 0.3 / F,
        dead_time_high: 0.0,
        dead_time_low: 0.0,
        start: None,
        stop: None,
    }]
}

/// The same pair as two independent gates whose edges coincide by
/// construction: the same frequency, delays 0.3·T and 0.7·T that sum to a
/// period, duties 0.4 and 0.6.
fn two_gates() -> Vec<Gate> {
    let pwm = |name: &str, duty: f64, delay: f64| Gate::Pwm {
        name: name.into(),
        frequency: F,
        duty,
        delay,
        start: None,
        stop: None,
    };
    vec![pwm("hi", 0.4, 0.3 / F), pwm("lo", 0.6, 0.7 / F)]
}

/// Runs 10,000 periods and returns the run; panics on a diagnostic.
fn ten_thousand_periods(c: &Circuit, what: &str) -> RunResult {
    let mut sim = Simulator::new(c, Options::default()).expect("compiles");
    if let Err(e) = sim.advance_to(10_000.0 / F) {
        panic!("{what}: {e}");
    }
    sim.finish()
}

/// Root cause: the low side's turn-off was computed as cycle k plus phase
/// T and the high side's turn-on as cycle k + 1 plus phase 0, which differ
/// by an ulp in about a third of the cycles: a one-ulp gap interrupted the
/// inductor current, a one-ulp overlap shorted the source. Gate edges of
/// any signals within a few units in the last place of each other are now
/// one instant. Both drives run 10,000 periods with only switch events
/// (no body diode ever conducts: zero dead time), with and without body
/// diodes, and agree to 1e-12.
#[test]
fn issue_13_zero_dead_time_runs_and_matches_two_gates() {
    for body in [false, true] {
        let pair = sync_buck(&complementary(), ["hb.high", "hb.low"], body);
        let a = ten_thousand_periods(&pair, "complementary pair");
        let b = ten_thousand_periods(&sync_buck(&two_gates(), ["hi", "lo"], body), "two gates");
        for r in [&a, &b] {
            assert_eq!(r.events.len(), 40_000, "body diodes {body}");
            assert!(r
                .events
                .iter()
                .all(|e| matches!(e.kind, EventKind::SwitchOn | EventKind::SwitchOff)));
        }
        let stop = 10_000.0 / F;
        for (x, y) in a.events.iter().zip(b.events.iter()) {
            assert_eq!((x.kind, x.element), (y.kind, y.element));
            assert!(
                (x.time - y.time).abs() <= 1e-12 * stop,
                "{} vs {}",
                x.time,
                y.time
            );
            for (p, q) in x.after.iter().zip(y.after) {
                assert!((p - q).abs() <= 1e-12 * q.abs().max(1.0), "{p} vs {q}");
            }
        }
    }
}

/// Events say why they happened. In the buck in discontinuous conduction
/// the freewheeling diode turns off when its current falls to zero, a
/// located crossing (in steady state); in the synchronous buck with dead time the body diode
/// is commutated off when the low-side switch turns on, at the gate edge.
/// The diode's turn-on at the high side's turn-off is a commutation too.
#[test]
fn issue_13_events_tell_commutation_from_zero_current() {
    let dcm = fluxstep_solver::simulate(&example("buck_dcm.json"), 1e-3, Options::default())
        .expect("runs");
    let offs: Vec<_> = dcm.events.of_kind(EventKind::DiodeOff).collect();
    assert!(offs.len() > 100);
    // Start-up overshoot runs in continuous conduction (commutated off at
    // the switch's turn-on); in steady discontinuous conduction the
    // current reaches zero first.
    let (early, late): (Vec<EventRef<'_>>, Vec<EventRef<'_>>) =
        offs.iter().partition(|e| e.time < 0.5e-3);
    assert!(early.iter().any(|e| e.is_commutation()));
    assert!(late.len() > 50);
    assert!(late
        .iter()
        .all(|e| e.cause == EventCause::Crossing && !e.is_commutation()));
    let sync = fluxstep_solver::simulate(&example("sync_buck.json"), 1e-3, Options::default())
        .expect("runs");
    let offs: Vec<_> = sync.events.of_kind(EventKind::DiodeOff).collect();
    assert!(offs.len() > 100);
    assert!(offs.iter().all(|e| e.is_commutation()));
    assert!(sync
        .events
        .of_kind(EventKind::SwitchOn)
        .all(|e| e.cause == EventCause::Scheduled));
    // The JSON form carries the cause, and reads back.
    let text = sync.events.to_json();
    assert!(text.contains("\"cause\": \"scheduled\""));
    let back: fluxstep_solver::EventLog = serde_json::from_str(&text).expect("reads back");
    assert_eq!(back.to_json(), text);
}

/// A charge-sharing jump reports the charge it moved as well as the energy
/// it dissipated: C1 at V1 joined to C2 at V2 passes
/// C1·C2/(C1 + C2)·(V1 − V2) and loses ½·C1·C2/(C1 + C2)·(V1 − V2)²
/// (conservation of charge; common practice). The switch comes from the
/// builder's shortcut for a switch that closes at a given time; opening it
/// again later moves nothing.
#[test]
fn issue_13_charge_jump_reports_the_charge_moved() {
    let (c1, v1, c2, v2) = (1e-6, 10.0, 2.2e-6, 2.0);
    let c = Circuit::builder()
        .capacitor_with_voltage("C1", "a", "gnd", c1, v1)
        .capacitor_with_voltage("C2", "b", "gnd", c2, v2)
        .timed_switch("S1", "a", "b", &[(1e-6, true), (2e-6, false)])
        .build()
        .expect("valid");
    let run = fluxstep_solver::simulate(&c, 3e-6, Options::default()).expect("runs");
    let jumps: Vec<_> = run.events.of_kind(EventKind::ChargeJump).collect();
    assert_eq!(jumps.len(), 1);
    let series = c1 * c2 / (c1 + c2);
    let (q, loss) = (series * (v1 - v2), 0.5 * series * (v1 - v2).powi(2));
    let j = jumps[0];
    assert_eq!(j.time, 1e-6);
    assert_eq!(j.cause, EventCause::Scheduled);
    assert!(
        (j.moved.unwrap() - q).abs() < 1e-12 * q,
        "{:?} vs {q}",
        j.moved
    );
    assert!((j.energy.unwrap() - loss).abs() < 1e-12 * loss);
    let edges = run.events.edges_within("S1", 0.0, 3e-6);
    assert_eq!(
        edges.iter().map(|e| (e.time, e.on)).collect::<Vec<_>>(),
        [(1e-6, true), (2e-6, false)]
    );
    let text = run.events.to_json();
    assert!(text.contains("\"moved\""), "{text}");
}

/// One way to look outputs up: the waveform and the simulator give the
/// same id or the same error, which lists every accepted form; a value
/// that is missing says why (outside the record, or floating).
#[test]
fn issue_13_output_lookup_and_missing_values_say_why() {
    let c = example("buck.json");
    let opts = Options {
        record: Record::Window {
            from: 1e-4,
            to: 2e-4,
        },
        ..Options::default()
    };
    let mut sim = Simulator::new(&c, opts).expect("compiles");
    let il = sim.output("L1.current").expect("an output");
    sim.advance_to(2e-4).expect("runs");
    assert_eq!(sim.waveform().output("L1.current").unwrap(), il);
    for bad in ["L9.current", "L1.flux"] {
        let a = sim.output(bad).unwrap_err().to_string();
        let b = sim.waveform().output(bad).unwrap_err().to_string();
        assert_eq!(a, b);
        for form in [
            "ELEMENT.current",
            "body_diode",
            "XFMR.primary",
            "WINDING",
            ".output",
        ] {
            assert!(a.contains(form), "{a}");
        }
    }
    assert_eq!(
        sim.value(il).unwrap(),
        sim.output_value("L1.current").unwrap()
    );
    let w = sim.waveform();
    assert!(matches!(
        w.value(il, 0.5e-4),
        Err(ValueError::OutsideRecord { span: Some((a, b)), .. }) if a == 1e-4 && b == 2e-4
    ));
    assert!(w.value(il, 1.5e-4).is_ok());
}

/// Slopes are exact from the mode. In a buck with the switch on the
/// inductor current rises at (Vin − Vout)/L and with it off falls at
/// −Vout/L (the inductor's own law, v = L·di/dt; common practice); the
/// capacitor voltage changes at i_C/C. Checked against the values the
/// waveform gives at the same instants, to 1e-12.
#[test]
fn issue_13_slopes_are_exact_from_the_mode() {
    let c = example("buck.json");
    let run = fluxstep_solver::simulate(&c, 1e-3, Options::default()).expect("runs");
    let w = &run.waveform;
    let id = |n: &str| w.output(n).unwrap();
    let (il, vl, vc, ic) = (
        id("L1.current"),
        id("L1.voltage"),
        id("C1.voltage"),
        id("C1.current"),
    );
    let cap = match c.element("C1") {
        Some(fluxstep_netlist::Element::Capacitor(k)) => k.capacitance,
        _ => panic!("C1 is a capacitor"),
    };
    let l_h = match c.element("L1") {
        Some(fluxstep_netlist::Element::Inductor(k)) => k.inductance,
        _ => panic!("L1 is an inductor"),
    };
    let mut checked = 0;
    for k in 0..200 {
        let t = 0.9e-3 + 1e-4 * f64::from(k) / 200.0 + 1.234e-8;
        let di = w.slope(il, t).unwrap();
        let want = w.value(vl, t).unwrap() / l_h;
        assert!(
            (di - want).abs() <= 1e-12 * want.abs().max(1.0),
            "{di} vs {want}"
        );
        let dv = w.slope(vc, t).unwrap();
        let want = w.value(ic, t).unwrap() / cap;
        assert!(
            (dv - want).abs() <= 1e-12 * want.abs().max(1.0),
            "{dv} vs {want}"
        );
        checked += 1;
    }
    assert_eq!(checked, 200);
}

/// Issue 13, item 14: one period measured by its index with the period's
/// own scheduled lengths. Far into a run absolute time is quantised
/// (ulp(0.1 s) ≈ 1.4e-17 s, about 1.4e-12 of a 10 µs period), so a window
/// taken from absolute instants is biased by that much; the scheduled
/// lengths are the same bits in every period.
///
/// The switch node of an ideal buck in continuous conduction is exactly
/// Vin while S1 conducts and exactly 0 while the ideal diode does, so its
/// average over a period is D·Vin = 6 V (common practice; the on-time is
/// the scheduled D·T).
#[test]
fn issue_13_period_by_index_uses_the_scheduled_lengths() {
    let buck = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", 100e-6, 1.2)
        .capacitor_with_voltage("C1", "out", "gnd", 100e-6, 6.0)
        .resistor("Rload", "out", "gnd", 5.0)
        .pwm("drive", 100e3, 0.5)
        .build()
        .unwrap();
    // Ten periods near 0.1 s, cycle 12,345 on.
    let (k0, n) = (12_345_i64, 10);
    let opts = Options {
        record: Record::Window {
            from: (k0 as f64 - 2.0) * 1e-5,
            to: (k0 + n + 2) as f64 * 1e-5,
        },
        ..Options::default()
    };
    let mut sim = Simulator::new(&buck, opts).unwrap();
    sim.advance_periods((k0 + n + 2) as u64).unwrap();
    let w = sim.waveform();
    let sw = w.output("sw").unwrap();
    let (mut worst_index, mut worst_window) = (0.0_f64, 0.0_f64);
    for k in k0..k0 + n {
        let (a, b) = (sim.cycle_start(k).unwrap(), sim.cycle_start(k + 1).unwrap());
        // Both ends are segment boundaries in the same bits as the edges.
        assert!(w.segments().iter().any(|s| s.t0 == a));
        assert!(w.segments().iter().any(|s| s.t1 == b));
        let by_index = measure_period(w, sw, a, b).unwrap();
        let by_window = measure(w, sw, a, b).unwrap();
        worst_index = worst_index.max((by_index.average - 6.0).abs());
        worst_window = worst_window.max((by_window.average - 6.0).abs());
    }
    // The period by its index: D·Vin to a few ulps of 6 V.
    assert!(worst_index <= 8.0 * f64::EPSILON * 6.0, "{worst_index:e}");
    // The same windows measured from absolute instants carry the
    // quantisation of time, far above rounding of the value.
    assert!(worst_window > 1e-13, "{worst_window:e}");
    let (a, b) = (
        sim.cycle_start(k0).unwrap(),
        sim.cycle_start(k0 + 1).unwrap(),
    );
    // An instant that is not a boundary is refused, naming it.
    let err = measure_period(w, sw, a + 1e-7, b).unwrap_err();
    assert!(
        err.to_string().contains("no recorded segment boundary"),
        "{err}"
    );
}

/// Batched evaluation (`Waveform::values`) is the same exact solution as
/// `Waveform::value` summed in another order: on every example circuit
/// and every recorded output, within 1e-12 of the output's largest
/// magnitude (1e-9 for a compensator output, a difference of far larger
/// terms; common practice for two roundings of one series), NaN
/// exactly where `value` has no value, and the same bits whatever order
/// the instants come in.
#[test]
fn batched_values_agree_with_value() {
    use fluxstep_solver::Side;
    for file in [
        "buck.json",
        "buck_dcm.json",
        "boost.json",
        "sync_buck.json",
        "flyback.json",
        "rectifier.json",
        "hysteretic_buck.json",
        "voltage_mode_buck.json",
    ] {
        let (run, from, stop) = run_as_the_cli_does(file);
        let w = &run.waveform;
        // Instants across the window and a little outside it, plus every
        // segment boundary (where outputs step).
        let n = 2_000;
        let mut times: Vec<f64> = (0..=n)
            .map(|k| from - 0.01 * (stop - from) + 1.02 * (stop - from) * k as f64 / n as f64)
            .collect();
        times.extend(w.segments().iter().map(|s| s.t0));
        times.sort_by(f64::total_cmp);
        let mut shuffled = times.clone();
        shuffled.reverse();
        shuffled.rotate_left(times.len() / 3);
        for name in w.output_names() {
            let id = w.output(name).unwrap();
            for side in [Side::After, Side::Before] {
                let batch = w.values(id, &times, side).unwrap();
                let one = |t: f64| match side {
                    Side::After => w.value(id, t),
                    Side::Before => w.value_before(id, t),
                };
                let scale = times
                    .iter()
                    .filter_map(|&t| one(t).ok())
                    .fold(0.0_f64, |a, v| a.max(v.abs()));
                let mut worst = 0.0_f64;
                for (&t, &b) in times.iter().zip(&batch) {
                    match one(t) {
                        Ok(v) => {
                            worst = worst.max((v - b).abs() / scale.max(f64::MIN_POSITIVE));
                        }
                        Err(_) => assert!(b.is_nan(), "{file} {name} at {t:e}: {b:e}"),
                    }
                }
                // A compensator output is a difference of terms far larger
                // than itself (gain 5000 and double zeros in
                // voltage_mode_buck), so both summations round at 1.7e-10
                // of its magnitude there; circuit quantities at 1e-14.
                let bound = if name.ends_with(".output") {
                    1e-9
                } else {
                    1e-12
                };
                assert!(worst <= bound, "{file} {name}: {worst:e}");
                let again = w.values(id, &shuffled, side).unwrap();
                for (t, v) in shuffled.iter().zip(&again) {
                    let k = times.partition_point(|x| x < t);
                    assert_eq!(v.to_bits(), batch[k].to_bits(), "{file} {name} at {t:e}");
                }
            }
        }
    }
}
