//! Periodic steady state by shooting against brute-force settling to the
//! same accuracy, on two bucks of our own demo design (24 V in, 200 kHz,
//! D = 0.5, 22 µH):
//!
//! - `dcm`: 47 µF, 60 Ω — discontinuous conduction (a located diode
//!   turn-off every period), slowest Floquet multiplier about 0.992;
//! - `slow_filter`: 1 mF, 10 Ω — continuous conduction with an output
//!   filter whose envelope decays with 2RC = 20 ms, i.e. 4,000 periods per
//!   factor e.
//!
//! `shooting` is `steady::find` to a residual of 1e-12 (compile, Newton,
//! and the final recorded period with its monodromy). `settling` runs plain
//! periods (recording nothing) for the number of periods after which the
//! state first lies within 1e-12 of each state's scale of the shooting
//! fixed point, counted once before timing. Both run in the same process,
//! so their ratio is what to read: these machines' speed drifts by up to
//! 2× between sessions. Run with `cargo bench --bench steady`; the ratio is
//! printed at the start.

use std::hint::black_box;
use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, Criterion};
use fluxstep_analysis::steady::{find, SteadyOptions};
use fluxstep_netlist::Circuit;
use fluxstep_solver::{Options, Record, Simulator};

const T: f64 = 5e-6;

fn buck(c: f64, r: f64) -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", c)
        .resistor("Rload", "out", "gnd", r)
        .pwm("drive", 200e3, 0.5)
        .build()
        .expect("valid demo circuit")
}

/// Periods of plain transient until every state is within 1e-12 of its
/// scale of the fixed point `x`.
fn periods_to_settle(c: &Circuit, x: &[f64]) -> u64 {
    let mut sim = Simulator::new(
        c,
        Options {
            record: Record::Nothing,
            ..Options::default()
        },
    )
    .expect("compiles");
    let scale: Vec<f64> = x.iter().map(|v| v.abs().max(1e-3)).collect();
    for k in 1..=2_000_000u64 {
        sim.advance_to(k as f64 * T).expect("runs");
        let close = sim
            .state()
            .iter()
            .zip(x)
            .zip(&scale)
            .all(|((a, b), s)| (a - b).abs() <= 1e-12 * s);
        if close {
            return k;
        }
    }
    panic!("did not settle within 2,000,000 periods");
}

fn settle(c: &Circuit, periods: u64) -> Vec<f64> {
    let mut sim = Simulator::new(
        c,
        Options {
            record: Record::Nothing,
            ..Options::default()
        },
    )
    .expect("compiles");
    sim.advance_to(periods as f64 * T).expect("runs");
    sim.state().to_vec()
}

fn bench(cr: &mut Criterion) {
    let mut group = cr.benchmark_group("steady");
    group.measurement_time(Duration::from_secs(5));
    group.sample_size(10);
    for (name, circuit) in [
        ("dcm", buck(47e-6, 60.0)),
        ("slow_filter", buck(1e-3, 10.0)),
    ] {
        let ss = find(&circuit, &SteadyOptions::default()).expect("steady state");
        let n = periods_to_settle(&circuit, &ss.state);
        // One side-by-side figure in this process (minimum of 5 each).
        let best = |f: &dyn Fn()| {
            (0..5)
                .map(|_| {
                    let t = Instant::now();
                    f();
                    t.elapsed()
                })
                .min()
                .expect("five runs")
        };
        let shoot = best(&|| {
            black_box(find(&circuit, &SteadyOptions::default()).expect("steady state"));
        });
        let brute = best(&|| {
            black_box(settle(&circuit, n));
        });
        println!(
            "steady/{name}: shooting {:?} ({} Newton steps), settling {n} periods {:?}: {:.0}x faster",
            shoot,
            ss.newton_steps(),
            brute,
            brute.as_secs_f64() / shoot.as_secs_f64()
        );
        group.bench_function(format!("{name}/shooting"), |b| {
            b.iter(|| black_box(find(&circuit, &SteadyOptions::default()).expect("steady")))
        });
        group.bench_function(format!("{name}/settling"), |b| {
            b.iter(|| black_box(settle(&circuit, n)))
        });
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
