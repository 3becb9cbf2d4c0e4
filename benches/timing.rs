//! Timing rules and golden comparison: what the rules add to a
//! 100,000-period run, and comparing two logs of 1,000,000 events.
//!
//! ```sh
//! cargo bench --bench timing
//! ```
//!
//! `run` is the 100,000-period run of a synchronous buck (complementary
//! pair, 50 ns / 80 ns dead times, every event recorded); `rules` is the
//! evaluation of six timing rules over its log, to be set against `run`.
//! `compare` sets a log of 1,000,000 events against a copy with one edge
//! moved.

use std::time::Duration;

use criterion::{criterion_group, criterion_main, Criterion};
use fluxstep_analysis::timing::check;
use fluxstep_netlist::{Circuit, DiodeModel, TimingCheck, TimingRule};
use fluxstep_solver::{simulate, EventLog, Options, Tolerances};

const T: f64 = 5e-6;

fn pair() -> Circuit {
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
        .resistor("R", "out", "gnd", 6.0)
        .complementary_pwm("hb", 1.0 / T, 0.5, 50e-9, 80e-9)
        .build()
        .unwrap()
}

fn rules() -> Vec<TimingRule> {
    let s = |n: &str| n.to_string();
    vec![
        TimingRule::new(TimingCheck::DeadTime {
            switches: [s("Q1"), s("Q2")],
            min: 40e-9,
        }),
        TimingRule::new(TimingCheck::OnTime {
            switch: s("Q1"),
            min: Some(1e-6),
            max: Some(4e-6),
        }),
        TimingRule::new(TimingCheck::SwitchingPeriod {
            switch: s("Q2"),
            min: Some(0.99 * T),
            max: Some(1.01 * T),
        }),
        TimingRule::new(TimingCheck::NoOverlap {
            switches: vec![s("Q1"), s("Q2")],
        }),
        TimingRule::new(TimingCheck::DiodeConduction {
            diode: s("Q2.body_diode"),
            max: 200e-9,
        }),
        TimingRule::new(TimingCheck::HardTurnOn {
            switch: s("Q1"),
            diode: s("Q2.body_diode"),
            max_count: u64::MAX,
        }),
    ]
}

/// A log of `n` events: a copy of `log` repeated with shifted times.
fn big(log: &EventLog, n: usize) -> EventLog {
    let v: serde_json::Value = serde_json::from_str(&log.to_json()).unwrap();
    let events = v["events"].as_array().unwrap();
    let span = 1e-2;
    let mut out = Vec::with_capacity(n);
    let mut k = 0.0;
    while out.len() < n {
        for e in events {
            if out.len() == n {
                break;
            }
            let mut e = e.clone();
            e["time"] = (e["time"].as_f64().unwrap() + k * span).into();
            out.push(e);
        }
        k += 1.0;
    }
    serde_json::from_value(serde_json::json!({"state_names": v["state_names"], "events": out}))
        .unwrap()
}

fn bench(c: &mut Criterion) {
    let circuit = pair();
    let stop = 100_000.0 * T;
    let mut g = c.benchmark_group("timing");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(10));
    g.bench_function("run 100k periods", |b| {
        b.iter(|| simulate(&circuit, stop, Options::default()).unwrap())
    });
    let run = simulate(&circuit, stop, Options::default()).unwrap();
    println!("100k-period log: {} events", run.events.len());
    let rules = rules();
    g.bench_function("rules over 100k periods", |b| {
        b.iter(|| check(&rules, &run.events, None, Some(T)).unwrap())
    });
    let short = simulate(&circuit, 2e-3, Options::default()).unwrap().events;
    let golden = big(&short, 1_000_000);
    let mut v: serde_json::Value = serde_json::from_str(&golden.to_json()).unwrap();
    let t = v["events"][500_000]["time"].as_f64().unwrap();
    v["events"][500_000]["time"] = (t + 1e-9).into();
    let new: EventLog = serde_json::from_value(v).unwrap();
    let tol = Tolerances::absolute(1e-12);
    let result = new.compare(&golden, &tol).unwrap();
    assert_eq!(result.moved, 1);
    g.bench_function("compare 1M events", |b| {
        b.iter(|| new.compare(&golden, &tol).unwrap())
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
