//! Solver throughput on the two converters of the physics tests: an
//! asynchronous buck (12 V in, 100 kHz, D = 0.4, 100 µF) in continuous
//! conduction (47 µH, 2 Ω) and in discontinuous conduction (10 µH, 50 Ω),
//! each run for 10,000 switching periods from near its steady state.
//!
//! Reported rates (criterion's `thrpt` line, elements per second):
//! - `buck_ccm/events/*`: scheduled + located events per second, recording
//!   the whole waveform (`record_all`) or nothing (`record_nothing`, to
//!   separate the cost of recording).
//! - `buck_dcm/state_events/*`: located diode turn-offs per second
//!   (nanoseconds per located event = 1e9 / rate).
//! - `periods/*`: switching periods per second for both runs.
//!
//! Each timed iteration is one end-to-end run: compile, resolve the initial
//! pattern, advance 10,000 periods. The recorded result is dropped outside
//! the timed region. Run with `cargo bench --bench solver`.

use std::hint::black_box;
use std::time::Duration;

use criterion::measurement::WallTime;
use criterion::{
    criterion_group, criterion_main, BatchSize, BenchmarkGroup, Criterion, Throughput,
};
use fluxstep_netlist::Circuit;
use fluxstep_solver::{Options, Record, RunResult, Simulator, Stats};

/// Switching periods per run.
const PERIODS: u64 = 10_000;

/// Asynchronous buck starting at (inductor current, capacitor voltage).
fn buck(l: f64, r: f64, i0: f64, v0: f64) -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", l, i0)
        .capacitor_with_voltage("C1", "out", "gnd", 100e-6, v0)
        .resistor("Rload", "out", "gnd", r)
        .pwm("drive", 100e3, 0.4)
        .build()
        .expect("benchmark circuit is valid")
}

/// Continuous conduction near steady state: Vout ≈ D·Vin = 4.8 V,
/// I ≈ Vout/R = 2.4 A.
fn buck_ccm() -> Circuit {
    buck(47e-6, 2.0, 2.4, 4.8)
}

/// Discontinuous conduction near steady state: M = 2/(1 + √(1 + 4K/D²)),
/// K = 2L/(R·T) = 0.04, so Vout ≈ 0.828·12 V ≈ 9.94 V; the inductor
/// current starts each period at zero.
fn buck_dcm() -> Circuit {
    buck(10e-6, 50.0, 0.0, 9.94)
}

fn run(circuit: &Circuit, record: Record) -> RunResult {
    let opts = Options {
        record,
        ..Options::default()
    };
    let mut sim = Simulator::new(circuit, opts).expect("compiles");
    sim.advance_periods(PERIODS).expect("runs");
    sim.finish()
}

/// One untimed run to count the events the timed runs will process.
fn census(name: &str, circuit: &Circuit) -> Stats {
    let s = run(circuit, Record::Nothing).stats;
    eprintln!(
        "{name}: {PERIODS} periods, {} scheduled + {} located events per run \
         ({} modes, {} exponentials, {} cached steps)",
        s.scheduled_events, s.state_events, s.modes, s.exponentials, s.cache_hits
    );
    s
}

fn timed(g: &mut BenchmarkGroup<'_, WallTime>, id: &str, circuit: &Circuit, record: Record) {
    g.bench_function(id, |b| {
        b.iter_batched(
            || (),
            |()| run(black_box(circuit), record),
            BatchSize::PerIteration,
        )
    });
}

fn configure(g: &mut BenchmarkGroup<'_, WallTime>) {
    g.sample_size(10);
    g.warm_up_time(Duration::from_secs(1));
    g.measurement_time(Duration::from_secs(5));
}

fn solver(c: &mut Criterion) {
    let ccm = buck_ccm();
    let dcm = buck_dcm();
    let s_ccm = census("buck_ccm", &ccm);
    let s_dcm = census("buck_dcm", &dcm);
    // Sanity of the scenarios (not a speed check): continuous conduction
    // never locates a diode turn-off; discontinuous conduction locates one
    // per period.
    assert_eq!(
        s_ccm.state_events, 0,
        "the CCM run left continuous conduction"
    );
    assert!(
        s_dcm.state_events as u64 >= PERIODS,
        "the DCM run is not discontinuous every period"
    );

    let mut g = c.benchmark_group("buck_ccm/events");
    configure(&mut g);
    g.throughput(Throughput::Elements(
        (s_ccm.scheduled_events + s_ccm.state_events) as u64,
    ));
    timed(&mut g, "record_all", &ccm, Record::All);
    timed(&mut g, "record_nothing", &ccm, Record::Nothing);
    g.finish();

    let mut g = c.benchmark_group("buck_dcm/state_events");
    configure(&mut g);
    g.throughput(Throughput::Elements(s_dcm.state_events as u64));
    timed(&mut g, "record_all", &dcm, Record::All);
    timed(&mut g, "record_nothing", &dcm, Record::Nothing);
    g.finish();

    let mut g = c.benchmark_group("periods");
    configure(&mut g);
    g.throughput(Throughput::Elements(PERIODS));
    timed(&mut g, "buck_ccm", &ccm, Record::All);
    timed(&mut g, "buck_dcm", &dcm, Record::All);
    g.finish();
}

criterion_group!(benches, solver);
criterion_main!(benches);
