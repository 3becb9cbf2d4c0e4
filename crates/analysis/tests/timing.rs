//! Timing rules on circuits whose timing is known in closed form, one
//! violation among 10,000 periods, golden comparisons and their sentences.

use fluxstep_analysis::timing::{assert_timing, check, describe_comparison};
use fluxstep_netlist::{Circuit, DiodeModel, EdgeSense, TimingCheck, TimingRule};
use fluxstep_solver::{simulate, EventLog, Options, Tolerances};

use crate::common::example;

const T: f64 = 10e-6; // 100 kHz

/// A synchronous buck driven by a complementary pair: Q1 on at
/// k·T + 50 ns, off at k·T + D·T; Q2 on at k·T + D·T + 80 ns, off at
/// (k + 1)·T. Body diodes of 0.7 V carry the current in the dead times.
fn pair(duty: f64) -> Circuit {
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
        .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body)
        .inductor("L1", "sw", "out", 47e-6)
        .capacitor("C1", "out", "gnd", 22e-6)
        .resistor("R", "out", "gnd", 4.0)
        .complementary_pwm("hb", 1.0 / T, duty, 50e-9, 80e-9)
        .build()
        .unwrap()
}

fn run(c: &Circuit, stop: f64) -> EventLog {
    simulate(c, stop, Options::default()).unwrap().events
}

/// Within a few units in the last place of the instants involved: the
/// edges are computed as k·T + phase, so a difference of two of them
/// carries their rounding.
fn close(a: f64, b: f64, at: f64) {
    let ulp = f64::EPSILON * at.abs().max(T);
    assert!((a - b).abs() <= 8.0 * ulp, "{a:e} vs {b:e} (ulp {ulp:e})");
}

fn rule(check: TimingCheck) -> TimingRule {
    TimingRule::new(check).named("r")
}

// Source for the expected gaps and times below: common practice — the
// dead-time arithmetic of a complementary pair (edge times as the gate
// defines them, docs/netlist.md).
#[test]
fn dead_time_of_a_complementary_pair_is_the_shorter_dead_time() {
    let log = run(&pair(0.5), 100.0 * T);
    let r = rule(TimingCheck::DeadTime {
        switches: ["Q1".into(), "Q2".into()],
        min: 40e-9,
    });
    let report = check(&[r], &log, None, Some(T)).unwrap();
    let o = &report.rules[0];
    assert!(o.passed, "{}", o.sentence);
    let w = o.worst.as_ref().unwrap();
    close(w.value, 50e-9, w.time);
    close(w.margin, 10e-9, w.time);
    // Q2 turned off, then Q1 turned on: the 50 ns dead time.
    assert_eq!(w.elements, ["Q2", "Q1"]);
    assert_eq!(o.violated_periods, 0);
    assert!(o.periods >= 99, "{}", o.periods);
    // Against 60 ns every period violates it once (the 50 ns gap), and
    // the 80 ns gap still passes.
    let strict = rule(TimingCheck::DeadTime {
        switches: ["Q1".into(), "Q2".into()],
        min: 60e-9,
    });
    let o = &check(&[strict], &log, None, Some(T)).unwrap().rules[0];
    assert!(!o.passed);
    assert_eq!(o.violations, o.violated_periods);
    close(o.worst.as_ref().unwrap().margin, -10e-9, 1e-3);
    assert!(
        o.sentence
            .contains("the dead time from Q2 turning off to Q1 turning on is 50 ns")
            && o.sentence.contains("10 ns short of the 60 ns minimum"),
        "{}",
        o.sentence
    );
}

// Source: common practice (edge times of the complementary pair).
#[test]
fn on_off_time_and_period_rules_measure_the_gate_edges() {
    let log = run(&pair(0.5), 50.0 * T);
    let rules = [
        rule(TimingCheck::OnTime {
            switch: "Q1".into(),
            min: Some(4e-6),
            max: Some(4.95e-6),
        }),
        rule(TimingCheck::OffTime {
            switch: "Q2".into(),
            min: Some(5.08e-6),
            max: None,
        }),
        rule(TimingCheck::SwitchingPeriod {
            switch: "Q1".into(),
            min: Some(T),
            max: Some(T),
        }),
        rule(TimingCheck::NoOverlap {
            switches: vec!["Q1".into(), "Q2".into()],
        }),
    ];
    let report = check(&rules, &log, None, Some(T)).unwrap();
    let on = report.rules[0].worst.as_ref().unwrap();
    // On-time D·T − 50 ns = 4.95 µs: against the 4.95 µs maximum the
    // margin is zero within rounding, against 4 µs it is 0.95 µs.
    close(on.value, 4.95e-6, 1e-3);
    let off = report.rules[1].worst.as_ref().unwrap();
    // Q2 off from (k+1)·T to (k+1)·T + D·T + 80 ns: 5.08 µs.
    close(off.value, 5.08e-6, 1e-3);
    let period = report.rules[2].worst.as_ref().unwrap();
    close(period.value, T, 1e-3);
    let overlap = report.rules[3].worst.as_ref().unwrap();
    close(overlap.margin, 50e-9, 1e-3);
    for o in &report.rules {
        // A limit met to rounding may fall either side by an ulp.
        assert!(
            o.passed || o.worst.as_ref().unwrap().margin > -1e-18,
            "{}",
            o.sentence
        );
    }
}

/// An asynchronous buck into a stiff 5 V output (a voltage source): the
/// inductor current starts from zero every period (discontinuous
/// conduction), so the diode conducts for exactly
/// D₂·T = D·T·(Vin − Vout)/Vout after the switch turns off.
fn dcm_buck() -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 10e-6)
        .voltage_source("Vo", "out", "gnd", 5.0)
        .pwm("drive", 1.0 / T, 0.3)
        .build()
        .unwrap()
}

// Source: R. W. Erickson & D. Maksimović, Fundamentals of Power
// Electronics, 2nd ed. (2001), ch. 5 (discontinuous conduction of the
// buck: D₂ from the volt-second balance of the inductor, which starts and
// ends each period at zero current). With a stiff output the off-phase
// current falls linearly, so its zero is the closed-form root
// t_off + D·T·(Vin − Vout)/Vout of the exact solution.
#[test]
fn diode_conduction_in_discontinuous_conduction_is_the_located_turn_off_minus_the_switch_turn_off()
{
    let log = run(&dcm_buck(), 20.0 * T);
    let expected = 0.3 * T * (12.0 - 5.0) / 5.0; // 4.2 µs
    let r = rule(TimingCheck::DiodeConduction {
        diode: "D1".into(),
        max: 4e-6,
    });
    let o = &check(&[r], &log, None, Some(T)).unwrap().rules[0];
    assert!(!o.passed);
    assert_eq!(o.violated_periods, 20, "{}", o.sentence);
    let w = o.worst.as_ref().unwrap();
    assert!(
        (w.value - expected).abs() < 1e-9 * expected,
        "{:e}",
        w.value
    );
    // Per period, against the log's own instants.
    let offs: Vec<f64> = log
        .of("S1")
        .filter(|e| e.kind == fluxstep_solver::EventKind::SwitchOff)
        .map(|e| e.time)
        .collect();
    let located: Vec<f64> = log
        .of("D1")
        .filter(|e| e.kind == fluxstep_solver::EventKind::DiodeOff)
        .map(|e| e.time)
        .collect();
    assert_eq!(offs.len(), located.len());
    let worst = offs
        .iter()
        .zip(&located)
        .map(|(a, b)| b - a)
        .fold(0.0, f64::max);
    assert_eq!(w.value, worst);
    assert!(
        o.sentence.contains("D1 conducts for 4.2 µs in one period"),
        "{}",
        o.sentence
    );
}

// Source: common practice — with current flowing out of the switch node
// during the dead time, the low-side body diode conducts until the high
// side turns on and commutates it (a hard turn-on, every period).
#[test]
fn hard_turn_on_counts_every_commutated_body_diode() {
    let log = run(&pair(0.5), 30.0 * T);
    let hard = rule(TimingCheck::HardTurnOn {
        switch: "Q1".into(),
        diode: "Q2.body_diode".into(),
        max_count: 0,
    });
    let o = &check(&[hard], &log, None, Some(T)).unwrap().rules[0];
    // Q2's body diode is commutated by Q1 turning on (hard) and by Q2
    // taking its current over (not hard): count those at Q1's turn-ons.
    let q1_on: Vec<f64> = log
        .of("Q1")
        .filter(|e| e.kind == fluxstep_solver::EventKind::SwitchOn)
        .map(|e| e.time)
        .collect();
    let commutations = log
        .of("Q2.body_diode")
        .filter(|e| e.is_commutation() && q1_on.contains(&e.time))
        .count();
    assert!(commutations > 20, "{commutations}");
    assert_eq!(o.violations, commutations);
    assert!(
        o.sentence
            .contains("Q1 turns on while Q2.body_diode conducts"),
        "{}",
        o.sentence
    );
    // In discontinuous conduction the diode has stopped before the next
    // turn-on: no hard turn-on.
    let dcm = run(&dcm_buck(), 10.0 * T);
    let soft = rule(TimingCheck::HardTurnOn {
        switch: "S1".into(),
        diode: "D1".into(),
        max_count: 0,
    });
    let o = &check(&[soft], &dcm, None, Some(T)).unwrap().rules[0];
    assert!(o.passed && o.measured == 0, "{}", o.sentence);
}

// Source: common practice — a first-order RC charging from a step,
// v(t) = V·(1 − e^(−t/RC)), rises monotonically: its maximum over [0, RC]
// is V·(1 − 1/e) at t = RC.
#[test]
fn an_output_band_uses_the_exact_extremes() {
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 10.0)
        .resistor("R1", "in", "out", 1e3)
        .capacitor("C1", "out", "gnd", 1e-6)
        .build()
        .unwrap();
    let res = simulate(&c, 2e-3, Options::default()).unwrap();
    let band = rule(TimingCheck::Band {
        output: "out".into(),
        min: -1.0,
        max: 6.4,
    })
    .within(0.0, 1e-3);
    let o = &check(
        std::slice::from_ref(&band),
        &res.events,
        Some(&res.waveform),
        None,
    )
    .unwrap()
    .rules[0];
    let w = o.worst.as_ref().unwrap();
    let peak = 10.0 * (1.0 - (-1.0f64).exp());
    assert!((w.value - peak).abs() < 1e-12, "{}", w.value);
    assert!((w.margin - (6.4 - peak)).abs() < 1e-12);
    assert_eq!(w.time, 1e-3);
    assert!(o.passed, "{}", o.sentence);
    // A band over a window the record does not cover is an error.
    let late = band.within(1e-3, 3e-3);
    let err = check(&[late], &res.events, Some(&res.waveform), None).unwrap_err();
    assert!(err.to_string().contains("not all recorded"), "{err}");
}

// Source: by construction — a comparator gate switches at the located
// crossing itself (docs/netlist.md), so the delay is zero.
#[test]
fn edge_delay_of_a_comparator_gate_is_zero() {
    let c = example("hysteretic_buck.json");
    let log = run(&c, 2e-4);
    let delay = rule(TimingCheck::EdgeDelay {
        switch: c
            .elements
            .iter()
            .find(|e| matches!(e, fluxstep_netlist::Element::Switch(_)))
            .unwrap()
            .name()
            .into(),
        edge: EdgeSense::Both,
        max: 1e-9,
    });
    let o = &check(&[delay], &log, None, None).unwrap().rules[0];
    assert!(o.measured > 10, "{}", o.sentence);
    assert_eq!(o.worst.as_ref().unwrap().value, 0.0);
    assert!(o.passed);
}

/// The log of a run with one event's time replaced (as a firmware change
/// that moves one edge would).
fn with_moved(log: &EventLog, index: usize, time: f64) -> EventLog {
    let mut v: serde_json::Value = serde_json::from_str(&log.to_json()).unwrap();
    v["events"][index]["time"] = time.into();
    serde_json::from_value(v).unwrap()
}

/// The index of the `n`-th turn-on of `switch` in the log.
fn nth_on(log: &EventLog, switch: &str, n: usize) -> usize {
    log.iter()
        .enumerate()
        .filter(|(_, e)| e.element == switch && e.kind == fluxstep_solver::EventKind::SwitchOn)
        .nth(n)
        .unwrap()
        .0
}

#[test]
fn one_violated_period_in_ten_thousand_is_found_with_its_index_and_instant() {
    let log = run(&pair(0.5), 10_000.0 * T);
    // Period 7321: Q1 turns on 20 ns early (a 30 ns dead time).
    let i = nth_on(&log, "Q1", 7321);
    let t = log.get(i).unwrap().time;
    assert_eq!((t / T).floor() as u64, 7321);
    let bad = with_moved(&log, i, t - 20e-9);
    let r = rule(TimingCheck::DeadTime {
        switches: ["Q1".into(), "Q2".into()],
        min: 40e-9,
    })
    .named("bridge dead time");
    let o = &check(&[r], &bad, None, Some(T)).unwrap().rules[0];
    assert!(!o.passed);
    assert_eq!((o.violations, o.violated_periods), (1, 1));
    assert!(o.periods >= 9_999, "{}", o.periods);
    let w = o.worst.as_ref().unwrap();
    assert_eq!(w.period, Some(7321));
    assert_eq!(w.time, t - 20e-9);
    close(w.value, 30e-9, t);
    assert!(
        o.sentence.starts_with("rule 'bridge dead time' violated:")
            && o.sentence.contains("(period 7321)")
            && o.sentence.contains("1 of "),
        "{}",
        o.sentence
    );
}

#[test]
fn an_overlap_is_a_negative_gap_and_reads_as_both_on_together() {
    let log = run(&pair(0.5), 20.0 * T);
    // Q1 turns on 100 ns before Q2 has turned off.
    let i = nth_on(&log, "Q1", 10);
    let t = log.get(i).unwrap().time;
    let bad = with_moved(&log, i, t - 150e-9);
    let r = rule(TimingCheck::NoOverlap {
        switches: vec!["Q1".into(), "Q2".into()],
    });
    let o = &check(&[r], &bad, None, Some(T)).unwrap().rules[0];
    assert!(!o.passed);
    let w = o.worst.as_ref().unwrap();
    close(w.value, -100e-9, t);
    assert!(
        o.sentence
            .contains("Q1 turned on 100 ns before Q2 turned off"),
        "{}",
        o.sentence
    );
}

#[test]
fn assert_timing_panics_with_the_sentence() {
    let log = run(&pair(0.5), 10.0 * T);
    let r = rule(TimingCheck::DeadTime {
        switches: ["Q1".into(), "Q2".into()],
        min: 60e-9,
    });
    let err = std::panic::catch_unwind(|| assert_timing(&[r], &log, None, Some(T))).unwrap_err();
    let text = err.downcast_ref::<String>().unwrap();
    assert!(text.starts_with("rule 'r' violated"), "{text}");
}

#[test]
fn identical_runs_compare_equal() {
    let a = run(&pair(0.5), 20.0 * T);
    let b = run(&pair(0.5), 20.0 * T);
    let c = a.compare(&b, &Tolerances::default()).unwrap();
    assert!(c.is_equal(), "{}", describe_comparison(&c));
    assert_eq!(c.matched, a.len());
    close(c.period.unwrap(), T, T);
    assert!(describe_comparison(&c).starts_with("the event log matches"));
}

#[test]
fn an_edge_moved_by_one_nanosecond_is_reported_first() {
    let golden = run(&pair(0.5), 40.0 * T);
    let i = nth_on(&golden, "Q2", 37);
    let t = golden.get(i).unwrap().time;
    let moved = with_moved(&golden, i, t + 1e-9);
    let c = moved
        .compare(&golden, &Tolerances::absolute(0.5e-9))
        .unwrap();
    assert_eq!((c.moved, c.added, c.missing), (1, 0, 0));
    let d = c.first().unwrap();
    assert_eq!(d.element, "Q2");
    assert_eq!(d.golden_time, Some(t));
    let text = describe_comparison(&c);
    assert!(
        text.starts_with("period 37: Q2 turns on 1 ns later than in the golden log"),
        "{text}"
    );
    // The whole sentence, pinned on purpose: instants with enough digits
    // to find them in the run, the shift and the tolerance shortest.
    assert_eq!(
        text,
        "period 37: Q2 turns on 1 ns later than in the golden log \
         (at 375.081 µs instead of 375.08 µs); 1 moved, 0 added, 0 missing \
         of 319 events (319 in the golden log), 500 ps allowed"
    );
    // Within a 1 ns tolerance plus the rounding of the shifted instant it
    // passes.
    let d = (t + 1e-9) - t;
    assert!(moved
        .compare(&golden, &Tolerances::absolute(d))
        .unwrap()
        .is_equal());
}

#[test]
fn an_extra_event_and_a_shorter_log_are_reported() {
    let golden = run(&pair(0.5), 20.0 * T);
    let mut v: serde_json::Value = serde_json::from_str(&golden.to_json()).unwrap();
    let events = v["events"].as_array_mut().unwrap();
    let i = nth_on(&golden, "Q1", 5);
    let mut extra = events[i].clone();
    extra["time"] = (golden.get(i).unwrap().time + 1e-6).into();
    extra["kind"] = "switch_off".into();
    events.insert(i + 1, extra);
    let longer: EventLog = serde_json::from_value(v).unwrap();
    let c = longer
        .compare(&golden, &Tolerances::absolute(1e-12))
        .unwrap();
    assert_eq!((c.added, c.missing), (1, 0), "{}", describe_comparison(&c));
    let text = describe_comparison(&c);
    assert!(text.contains("Q1 turns off at"), "{text}");
    // A log of half the run compares over the common span.
    let half = run(&pair(0.5), 10.0 * T);
    let c = half.compare(&golden, &Tolerances::absolute(1e-12)).unwrap();
    assert!(c.is_equal(), "{}", describe_comparison(&c));
    assert!(c.outside_common_span > 0);
}

#[test]
fn logs_of_different_circuits_are_refused() {
    let a = run(&pair(0.5), 5.0 * T);
    let b = run(&dcm_buck(), 5.0 * T);
    let err = a.compare(&b, &Tolerances::default()).unwrap_err();
    assert!(err.to_string().contains("different circuits"), "{err}");
}
