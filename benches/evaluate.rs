//! Exact evaluation of a recorded output at 10⁶ instants: the batched
//! `Waveform::values` (the Python bindings' `Run.waveform`) against one
//! `Waveform::value` call per instant, in the same process.
//!
//! ```sh
//! cargo bench --bench evaluate
//! ```
//!
//! Target (issue on the Python bindings): under 50 ns per point for the
//! batch. The per-point calls are the baseline the ratio is taken against.

use std::time::Duration;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use fluxstep_netlist::Circuit;
use fluxstep_solver::{simulate, Options, Side};

fn buck() -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", 47e-6, 2.4)
        .capacitor_with_voltage("C1", "out", "gnd", 100e-6, 4.8)
        .resistor("Rload", "out", "gnd", 2.0)
        .pwm("drive", 100e3, 0.4)
        .build()
        .unwrap()
}

fn evaluate(c: &mut Criterion) {
    // 100 periods recorded, 10⁶ instants across them.
    let run = simulate(&buck(), 1e-3, Options::default()).unwrap();
    let w = &run.waveform;
    let il = w.output("L1.current").unwrap();
    let (a, b) = w.span().unwrap();
    let n = 1_000_000;
    let times: Vec<f64> = (0..n)
        .map(|k| a + (b - a) * k as f64 / (n - 1) as f64)
        .collect();
    let mut g = c.benchmark_group("evaluate");
    g.throughput(Throughput::Elements(n as u64));
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(5));
    g.bench_function("values 1e6", |bch| {
        bch.iter(|| w.values(il, &times, Side::After).unwrap())
    });
    g.bench_function("value per point 1e6", |bch| {
        bch.iter(|| times.iter().map(|&t| w.value(il, t).unwrap()).sum::<f64>())
    });
    g.finish();
}

criterion_group!(benches, evaluate);
criterion_main!(benches);
