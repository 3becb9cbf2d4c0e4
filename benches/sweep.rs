//! Sweep throughput: 1,000 points of the demo buck (examples/circuits/
//! buck.json: input 20–28 V × load 6–60 Ω × inductance ±20 %, 10 values
//! each), 200 switching periods from rest per point, figures (average,
//! ripple, peak) over the last 10 periods; with 1 and with 2 threads.
//!
//! Criterion's `thrpt` line is points per second. The table is the same
//! in every bit for both thread counts (the sweep tests check that); only
//! the time differs. Run with `cargo bench --bench sweep`, alone on the
//! machine: two benchmarks at once share the cores and halve each other.

use std::hint::black_box;
use std::time::Duration;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use fluxstep_analysis::sweep::{RunOptions, Sweep, SweepSpec};
use fluxstep_netlist::Circuit;

/// Points of the benchmark sweep.
const POINTS: u64 = 1000;

fn sweep() -> Sweep {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/examples/circuits/buck.json");
    let circuit = Circuit::from_file(path).expect("the demo buck is valid");
    let spec = SweepSpec::from_json(
        r#"{
        "circuit": "buck.json",
        "simulation": {"periods": 200, "window": {"kind": "last_periods", "count": 10}},
        "parameters": [
            {"path": "Vin.waveform.value", "values": {"kind": "linear", "from": 20, "to": 28, "count": 10}},
            {"path": "Rload.resistance", "values": {"kind": "log", "from": 6, "to": 60, "count": 10}},
            {"path": "L1.inductance", "values": {"kind": "linear", "from": "17.6u", "to": "26.4u", "count": 10}}
        ],
        "figures": [
            {"kind": "window", "name": "vout", "of": "out", "measure": "average"},
            {"kind": "window", "name": "ripple", "of": "out", "measure": "peak_to_peak"},
            {"kind": "window", "name": "il_peak", "of": "L1.current", "measure": "max"}
        ]
    }"#,
    )
    .expect("the benchmark sweep reads");
    let s = Sweep::new(spec, &circuit).expect("the benchmark sweep is valid");
    assert_eq!(s.points(), POINTS);
    s
}

fn bench(c: &mut Criterion) {
    let s = sweep();
    let check = s.run(&RunOptions::default()).expect("runs");
    assert_eq!(check.failures(), 0, "every point of the benchmark runs");
    let mut g = c.benchmark_group("sweep/buck_1000_points_200_periods");
    g.sample_size(10);
    g.warm_up_time(Duration::from_secs(2));
    g.measurement_time(Duration::from_secs(20));
    g.throughput(Throughput::Elements(POINTS));
    for threads in [1, 2] {
        // Pools are built inside `run`; building one costs microseconds
        // against the run's tenths of a second.
        g.bench_function(format!("threads_{threads}"), |b| {
            b.iter(|| {
                black_box(
                    s.run(&RunOptions {
                        threads: Some(threads),
                        ..RunOptions::default()
                    })
                    .expect("runs"),
                )
            })
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
