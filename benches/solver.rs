//! Solver throughput on the two converters of the physics tests: an
//! asynchronous buck (12 V in, 100 kHz, D = 0.4, 100 µF) in continuous
//! conduction (47 µH, 2 Ω) and in discontinuous conduction (10 µH, 50 Ω),
//! each run for 10,000 switching periods from near its steady state.
//!
//! Reported rates (criterion's `thrpt` line, elements per second):
//! - `buck_ccm/events/*`: scheduled + located events per second, recording
//!   the whole waveform and event log (`record_all`), the same into the
//!   storage of the previous run (`record_all_reused`, see
//!   `Simulator::reuse_storage`: no fresh pages to fault in), or nothing
//!   (`record_nothing`, to separate the cost of recording).
//! - `buck_dcm/state_events/*`: located diode turn-offs per second. Each
//!   period also has two scheduled edges, so 1e9 / rate is the whole
//!   period's cost; the cost of the location itself is that minus two
//!   events of `buck_ccm/events/record_nothing`.
//! - `periods/*`: switching periods per second for both runs.
//! - `closed_loop/digital_pi_buck/*`: the CCM buck under a sampled PI
//!   controller (sample at each period start, 1 µs computation delay, new
//!   duty at the next period): scheduled + located events per second.
//! - `closed_loop/peak_current_buck/*`: a buck under peak-current control
//!   (clock turn-on, comparator turn-off located on the exact solution every
//!   period, 0.1 A/µs compensation ramp): scheduled + located events per
//!   second.
//!
//! Each timed iteration is one end-to-end run: compile, resolve the initial
//! pattern, advance 10,000 periods. The recorded result is dropped outside
//! the timed region. Run with `cargo bench --bench solver`.
//!
//! Wall time on shared machines drifts by up to 2× within an hour; to
//! compare two versions, count the instructions of one run instead with
//! `benches/once.rs` under valgrind (see there).

use std::cell::Cell;
use std::hint::black_box;
use std::time::Duration;

use criterion::measurement::WallTime;
use criterion::{
    criterion_group, criterion_main, BatchSize, BenchmarkGroup, Criterion, Throughput,
};
use fluxstep_netlist::{Circuit, Gate};
use fluxstep_solver::{Options, Record, RunResult, Simulator, Stats};

mod common;

use common::{buck_ccm, buck_dcm, digital_pi_buck, run_digital_pi, PERIODS, T};

/// Buck under peak-current control, 12 V in, 22 µH, 100 µF, 2 Ω, peak
/// reference 2.8 A: about 5 V out, duty about 0.42, continuous conduction;
/// starts near that state.
fn peak_current_buck() -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "pc")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", 22e-6, 2.5)
        .capacitor_with_voltage("C1", "out", "gnd", 100e-6, 5.0)
        .resistor("Rload", "out", "gnd", 2.0)
        .gate(Gate::PeakCurrent {
            name: "pc".into(),
            frequency: 1.0 / T,
            sense: "L1.current".into(),
            reference: 2.8,
            slope: 0.1e6,
            max_duty: 0.9,
        })
        .build()
        .expect("benchmark circuit is valid")
}

fn run_to_end(circuit: &Circuit, record: Record) -> RunResult {
    let opts = Options {
        record,
        ..Options::default()
    };
    let mut sim = Simulator::new(circuit, opts).expect("compiles");
    sim.advance_to(PERIODS as f64 * T).expect("runs");
    sim.finish()
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
    census_with(name, circuit, run)
}

fn census_with(name: &str, circuit: &Circuit, runner: Runner) -> Stats {
    let s = runner(circuit, Record::Nothing).stats;
    eprintln!(
        "{name}: {PERIODS} periods, {} scheduled + {} located events per run \
         ({} modes, {} exponentials, {} cached steps)",
        s.scheduled_events, s.state_events, s.modes, s.exponentials, s.cache_hits
    );
    s
}

/// One end-to-end run of a circuit (the timed unit).
type Runner = fn(&Circuit, Record) -> RunResult;

fn timed(g: &mut BenchmarkGroup<'_, WallTime>, id: &str, circuit: &Circuit, record: Record) {
    timed_with(g, id, circuit, record, run)
}

fn timed_with(
    g: &mut BenchmarkGroup<'_, WallTime>,
    id: &str,
    circuit: &Circuit,
    record: Record,
    runner: Runner,
) {
    g.bench_function(id, |b| {
        b.iter_batched(
            || (),
            |()| runner(black_box(circuit), record),
            BatchSize::PerIteration,
        )
    });
}

/// As [`timed`], each run recording into the storage of the run before it
/// (`Simulator::reuse_storage`): what a sweep or a test suite of many runs
/// sees once its buffers exist, without the cost of fresh pages.
fn timed_reusing(g: &mut BenchmarkGroup<'_, WallTime>, id: &str, circuit: &Circuit) {
    let previous: Cell<Option<RunResult>> = Cell::new(Some(run(circuit, Record::All)));
    g.bench_function(id, |b| {
        b.iter_batched(
            || previous.take(),
            |old| {
                let mut sim =
                    Simulator::new(black_box(circuit), Options::default()).expect("compiles");
                if let Some(old) = old {
                    sim.reuse_storage(old);
                }
                sim.advance_periods(PERIODS).expect("runs");
                previous.set(Some(sim.finish()));
            },
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
    timed_reusing(&mut g, "record_all_reused", &ccm);
    timed(&mut g, "record_nothing", &ccm, Record::Nothing);
    g.finish();

    let mut g = c.benchmark_group("buck_dcm/state_events");
    configure(&mut g);
    g.throughput(Throughput::Elements(s_dcm.state_events as u64));
    timed(&mut g, "record_all", &dcm, Record::All);
    timed_reusing(&mut g, "record_all_reused", &dcm);
    timed(&mut g, "record_nothing", &dcm, Record::Nothing);
    g.finish();

    let mut g = c.benchmark_group("periods");
    configure(&mut g);
    g.throughput(Throughput::Elements(PERIODS));
    timed(&mut g, "buck_ccm", &ccm, Record::All);
    timed(&mut g, "buck_dcm", &dcm, Record::All);
    g.finish();

    closed_loop(c);
}

/// Closed loops: a sampled controller every period, and a comparator event
/// located every period.
fn closed_loop(c: &mut Criterion) {
    let pi = digital_pi_buck();
    let pc = peak_current_buck();
    let s_pi = census_with("closed_loop/digital_pi_buck", &pi, run_digital_pi);
    let s_pc = census_with("closed_loop/peak_current_buck", &pc, run_to_end);
    // Sanity (not a speed check): one comparator turn-off per period.
    assert!(
        s_pc.state_events as u64 >= PERIODS,
        "the peak-current run does not locate a turn-off every period"
    );
    for (name, circuit, stats, runner) in [
        (
            "closed_loop/digital_pi_buck",
            &pi,
            s_pi,
            run_digital_pi as Runner,
        ),
        (
            "closed_loop/peak_current_buck",
            &pc,
            s_pc,
            run_to_end as Runner,
        ),
    ] {
        let mut g = c.benchmark_group(name);
        configure(&mut g);
        g.throughput(Throughput::Elements(
            (stats.scheduled_events + stats.state_events) as u64,
        ));
        timed_with(&mut g, "record_all", circuit, Record::All, runner);
        timed_with(&mut g, "record_nothing", circuit, Record::Nothing, runner);
        g.finish();
    }
}

criterion_group!(benches, solver);
criterion_main!(benches);
