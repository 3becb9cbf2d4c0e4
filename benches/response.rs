//! Small-signal responses from the linearised switched model against
//! brute-force injection, in one process (these machines' speed drifts by
//! up to 2× between sessions: read the ratio).
//!
//! - `response/buck_200`: duty-to-output of examples/circuits/buck.json at
//!   200 frequencies from 10 Hz to 100 kHz, steady state included.
//! - `response/closed_loop_200`: the loop gain of
//!   examples/circuits/voltage_mode_buck.json at 200 frequencies, with its
//!   margins, steady state included.
//! - `response/injection_1`: one frequency of brute-force injection on the
//!   buck (a sine on the input voltage, 1,000 periods settled from the
//!   orbit, 100 periods Fourier-analysed, as the tests do). Multiplied by
//!   200 it is the brute-force cost of one 200-point response; the ratio is
//!   printed at the start.
//!
//! Run with `cargo bench --bench response`.

use std::hint::black_box;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, Criterion};
use fluxstep_analysis::response::{
    frequency_response, log_frequencies, loop_gain, BreakPoint, Input,
};
use fluxstep_analysis::steady::{find, SteadyOptions, SteadyState};
use fluxstep_netlist::{Circuit, Element, Stimulus};
use fluxstep_solver::{Options, Record, Simulator};

fn example(name: &str) -> Circuit {
    let p = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("examples/circuits")
        .join(name);
    Circuit::from_file(p).expect("example circuit")
}

/// One brute-force injection: Vin = 24 + 0.1·sin(2πft), settled 1,000
/// periods from the orbit, then the output's Fourier coefficient at f over
/// 100 periods (by exact integrals against a sine and a cosine).
fn injection(base: &Circuit, ss: &SteadyState, f: f64) -> f64 {
    let mut c = base.clone();
    for e in &mut c.elements {
        if let Element::VoltageSource(v) = e {
            if v.name == "Vin" {
                v.waveform = Stimulus::Sine {
                    offset: 24.0,
                    amplitude: 0.1,
                    frequency: f,
                    phase: 0.0,
                };
            }
        }
    }
    let t = ss.period;
    let (a, b) = (1000.0 * t, 1100.0 * t);
    let mut sim = Simulator::new(
        &c,
        Options {
            record: Record::Window { from: a, to: b },
            ..Options::default()
        },
    )
    .expect("compiles");
    let mut x = sim.state().to_vec();
    for (k, name) in ss.state_names.iter().enumerate() {
        x[sim.state_index(name).expect("same states")] = ss.state[k];
    }
    sim.set_state(&x).expect("valid state");
    sim.advance_to(b).expect("runs");
    let run = sim.finish();
    let w = &run.waveform;
    let out = w.output("out").expect("out");
    let vin = w.output("in").expect("in");
    // ∫ out·(vin − 24) dt: the in-phase part (the quadrature part costs the same).
    w.integrate(&[out, vin], a, b, |v| v[0] * (v[1] - 24.0))
}

fn bench(cr: &mut Criterion) {
    let buck = example("buck.json");
    let vm = example("voltage_mode_buck.json");
    let opts = SteadyOptions::default();
    let freqs = log_frequencies(10.0, 100e3, 200).expect("range");
    let duty = Input::parse("drive.duty");
    let point = BreakPoint::named(&vm, "vm").expect("gate");
    let ss = find(&buck, &opts).expect("steady");
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
    let r = best(&|| {
        black_box(frequency_response(&buck, &duty, "out", &freqs, &opts).expect("response"));
    });
    let l = best(&|| {
        black_box(loop_gain(&vm, &point, &freqs, &opts).expect("loop gain"));
    });
    let one = best(&|| {
        black_box(injection(&buck, &ss, 20e3));
    });
    println!(
        "response/buck_200 {r:?}, closed_loop_200 {l:?}; one injection {one:?}, ×200 = {:?}: {:.0}× faster",
        one * 200,
        (one * 200).as_secs_f64() / r.as_secs_f64()
    );
    let mut g = cr.benchmark_group("response");
    g.measurement_time(Duration::from_secs(5));
    g.sample_size(10);
    g.bench_function("buck_200", |b| {
        b.iter(|| {
            black_box(frequency_response(&buck, &duty, "out", &freqs, &opts).expect("response"))
        })
    });
    g.bench_function("closed_loop_200", |b| {
        b.iter(|| black_box(loop_gain(&vm, &point, &freqs, &opts).expect("loop gain")))
    });
    g.bench_function("injection_1", |b| {
        b.iter(|| black_box(injection(&buck, &ss, 20e3)))
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
