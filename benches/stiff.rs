//! Stiff circuits (issue 19, item 2): run time must not grow with the
//! fastest time constant. Each case beside a baseline in the same process,
//! the buck of `examples/circuits/buck.json` over the same span.
//!
//! ```sh
//! cargo bench --bench stiff
//! ```
//!
//! Cases and targets:
//! - 1 V / 1 Ω / 1 fH (τ = 1 fs, no switches) for 1 ms: under 1 s;
//! - the boost of `examples/circuits/boost.json` with a 1 µΩ fault load
//!   (RC = 22 ps) for 10 ms: under 1 s;
//! - a lossless LC tank (1 µH, 1 µF) for 10⁶ periods, recording everything
//!   (the default): at least 10⁶ periods per second;
//! - a 400-stage RC ladder (1 Ω, 100 pF per stage, 10 Ω load), no
//!   events, for 1 ms.
//!
//! Before this work they took 6.8 s for 1 ns (so hours for 1 ms), about
//! five hours, 110 µs per period and 51 s. The counters printed first
//! (`Stats::stiff_spans`, `Stats::stiff_substeps`) show the work done.

use std::time::Duration;

use criterion::{criterion_group, criterion_main, Criterion};
use fluxstep_netlist::{Circuit, Element};
use fluxstep_solver::{simulate, Options};

fn example(file: &str) -> Circuit {
    let path = format!("{}/examples/circuits/{file}", env!("CARGO_MANIFEST_DIR"));
    Circuit::from_file(path).expect("example circuit is valid")
}

fn femtohenry() -> Circuit {
    Circuit::builder()
        .voltage_source("V1", "in", "gnd", 1.0)
        .resistor("R1", "in", "a", 1.0)
        .inductor("L1", "a", "gnd", 1e-15)
        .build()
        .expect("valid")
}

fn fault_boost() -> Circuit {
    let mut c = example("boost.json");
    for e in &mut c.elements {
        if let Element::Resistor(r) = e {
            r.resistance = 1e-6;
        }
    }
    c
}

/// The tank and its period (s).
fn tank() -> (Circuit, f64) {
    let c = Circuit::builder()
        .inductor_with_current("L1", "a", "gnd", 1e-6, 1.0)
        .capacitor("C1", "a", "gnd", 1e-6)
        .build()
        .expect("valid");
    (c, std::f64::consts::TAU * 1e-6)
}

fn ladder(n: usize) -> Circuit {
    let mut b = Circuit::builder().voltage_source("V1", "n0", "gnd", 1.0);
    for k in 1..=n {
        b = b
            .resistor(
                &format!("R{k}"),
                &format!("n{}", k - 1),
                &format!("n{k}"),
                1.0,
            )
            .capacitor(&format!("C{k}"), &format!("n{k}"), "gnd", 100e-12);
    }
    b.resistor("RL", &format!("n{n}"), "gnd", 10.0)
        .build()
        .expect("valid")
}

fn bench(c: &mut Criterion) {
    let buck = example("buck.json");
    let (lc, period) = tank();
    let lc_periods = 1e6;
    let cases: Vec<(&str, Circuit, f64)> = vec![
        ("buck 1 ms (baseline)", buck.clone(), 1e-3),
        ("1 fH 1 ms", femtohenry(), 1e-3),
        ("buck 10 ms (baseline)", buck, 10e-3),
        ("boost 1 µΩ load 10 ms", fault_boost(), 10e-3),
        ("LC tank 1e6 periods", lc, lc_periods * period),
        ("RC ladder 400 stages 1 ms", ladder(400), 1e-3),
    ];
    for (name, circuit, stop) in &cases {
        let run = simulate(circuit, *stop, Options::default()).expect("runs");
        println!("{name}: {:?}", run.stats);
    }
    let mut g = c.benchmark_group("stiff");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(3));
    for (name, circuit, stop) in &cases {
        g.bench_function(*name, |b| {
            b.iter(|| simulate(circuit, *stop, Options::default()).expect("runs"))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
