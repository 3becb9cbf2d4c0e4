//! Cost per event against the number of states: an interleaved buck of
//! 1, 2, 4, 8 and 12 phases (12 V → 3 V, 250 kHz per phase, D = 0.25,
//! the phases T/N apart, each with its own switch, freewheeling diode and
//! inductor, one shared output capacitor and load), recording everything,
//! side by side with a bare loop of precomputed exact steps of the same
//! dimension in the same process; and a buck whose diode turns off by
//! itself (discontinuous conduction: a located event) against the same
//! buck in continuous conduction (scheduled events only), the
//! discontinuous buck twice: started on its periodic steady state (found
//! by shooting, `fluxstep_analysis::steady::find`), and 0.2 % off it,
//! from where its output settles over thousands of periods and every
//! located instant is a new length.
//!
//! ```sh
//! cargo bench --bench phases
//! ```
//!
//! The bare loop is the floor the simulator approaches: per event one
//! n×n matrix–vector product and a constant, the state copied into a
//! growing record. The simulator's cost per event is the marginal one:
//! a run of P periods minus a run of P/50, so compiling the circuit and
//! building the first modes (printed apart as the start-up) do not count.
//! The table is measured in rounds: each round runs every row once (the
//! best of three runs each) and takes its ratios within the round, runs
//! seconds apart; the table gives each figure's median over nine rounds.
//! The machines are shared: a burst of load slows a row and its round's
//! baseline together, or one round of nine. The ratios in the same
//! process are what counts.
//!
//! The word `located` runs the last two rows alone.
//!
//! For counting instructions, one circuit alone: a number of phases,
//! `ccm`, `dcm` (settling) or `dcms` (on its steady state), then
//! optionally the periods (default 20,000), and anywhere the word
//! `nocert`:
//!
//! ```sh
//! cargo bench --bench phases --no-run
//! valgrind --tool=callgrind target/release/deps/phases-* 12 2000
//! ```

use std::hint::black_box;
use std::time::Instant;

use fluxstep_netlist::{Circuit, Gate};
use fluxstep_solver::{Options, Record, RunResult, Simulator, Stats};

mod common;

/// Switching frequency of each phase (Hz).
const F: f64 = 250e3;
/// Duty cycle of every phase.
const D: f64 = 0.25;

/// An `n`-phase interleaved buck started near its periodic steady state
/// (output at D·Vin, each inductor at its load share).
fn interleaved(n: usize) -> Circuit {
    let mut b = Circuit::builder().voltage_source("Vin", "in", "gnd", 12.0);
    let share = 10.0;
    for k in 1..=n {
        let sw = format!("sw{k}");
        b = b
            .switch(&format!("S{k}"), "in", &sw, &format!("ph{k}"))
            .diode(&format!("D{k}"), "gnd", &sw)
            .inductor_with_current(&format!("L{k}"), &sw, "out", 2.2e-6, share)
            .gate(Gate::Pwm {
                name: format!("ph{k}"),
                frequency: F,
                duty: D,
                delay: (k - 1) as f64 / (n as f64 * F),
                start: None,
                stop: None,
            });
    }
    b.capacitor_with_voltage("Cout", "out", "gnd", 470e-6, D * 12.0)
        .resistor("Rload", "out", "gnd", D * 12.0 / (share * n as f64))
        .build()
        .expect("benchmark circuit is valid")
}

/// A one-phase buck at light load: `dcm` selects a load at which the
/// diode current reaches zero inside each period (a located event).
fn single(dcm: bool) -> Circuit {
    single_from(dcm, None)
}

/// [`single`] from the state `(iL, vC)` where given.
fn single_from(dcm: bool, start: Option<(f64, f64)>) -> Circuit {
    let (r, i0) = if dcm { (30.0, 0.0) } else { (0.3, 10.0) };
    let (i0, v0) = start.unwrap_or((i0, if dcm { 8.5 } else { 3.0 }));
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "ph1")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", 2.2e-6, i0)
        .capacitor_with_voltage("Cout", "out", "gnd", 470e-6, v0)
        .resistor("Rload", "out", "gnd", r)
        .pwm("ph1", F, D)
        .build()
        .expect("benchmark circuit is valid")
}

/// [`single`] started on its periodic steady state (found by shooting).
fn settled(dcm: bool) -> Circuit {
    let c = single(dcm);
    let ss =
        fluxstep_analysis::steady::find(&c, &fluxstep_analysis::steady::SteadyOptions::default())
            .expect("the buck has a steady state");
    let i = ss
        .state_names
        .iter()
        .position(|n| n.contains("L1"))
        .expect("L1");
    let v = ss
        .state_names
        .iter()
        .position(|n| n.contains("Cout"))
        .expect("Cout");
    single_from(dcm, Some((ss.state[i], ss.state[v])))
}

/// The circuit a word names: a number of phases, `ccm` or `dcm`.
fn one(word: &str) -> Option<Circuit> {
    match word {
        "ccm" => Some(single(false)),
        "dcm" => Some(single(true)),
        "dcms" => Some(settled(true)),
        "ccms" => Some(settled(false)),
        _ => word
            .parse()
            .ok()
            .filter(|n| (1..=64).contains(n))
            .map(interleaved),
    }
}

/// (event instants handled, states, best seconds, counters) of `periods`
/// switching periods.
fn run(c: &Circuit, periods: f64, reps: usize) -> (usize, usize, f64, Stats) {
    run_with(c, periods, reps, true)
}

/// [`run`] with the energy certificate on or off. Each run records into
/// the storage of the one before (`Simulator::reuse_storage`), as the bare
/// loop below keeps its record's capacity: otherwise a run of 200,000
/// events spent a third of its time faulting in fresh pages (39 ms for
/// 100,000 periods of the one-phase buck, against 23 ms reusing), a cost
/// of the allocator and the system, not of the solver, which also varied
/// between builds with the heap's layout.
fn run_with(c: &Circuit, periods: f64, reps: usize, certify: bool) -> (usize, usize, f64, Stats) {
    let mut best = f64::INFINITY;
    let mut events = 0;
    let mut states = 0;
    let mut stats = Stats::default();
    let mut old: Option<RunResult> = None;
    for _ in 0..reps {
        let opts = Options {
            record: Record::All,
            energy_tolerance: certify.then_some(fluxstep_solver::DEFAULT_ENERGY_TOLERANCE),
            ..Options::default()
        };
        let start = Instant::now();
        let mut sim = Simulator::new(c, opts).expect("the buck compiles");
        if let Some(old) = old.take() {
            sim.reuse_storage(old);
        }
        sim.advance_to(periods / F).expect("the buck runs");
        let r = sim.finish();
        best = best.min(start.elapsed().as_secs_f64());
        events = r.stats.scheduled_events + r.stats.state_events;
        states = r.events.state_names().len();
        stats = r.stats;
        old = Some(black_box(r));
    }
    (events, states, best, stats)
}

/// Best seconds of `steps` exact steps z ← Φ·z + g of dimension `n`
/// (two alternating precomputed maps, as a switch toggling), each state
/// recorded.
fn bare(n: usize, steps: usize, reps: usize) -> f64 {
    // A contractive map with every entry used, so that nothing folds away.
    let map = |s: f64| -> (Vec<f64>, Vec<f64>) {
        let phi = (0..n * n)
            .map(|k| {
                if k % (n + 1) == 0 {
                    0.9
                } else {
                    s / (n * n) as f64
                }
            })
            .collect();
        let g = (0..n).map(|k| 0.01 * (k + 1) as f64).collect();
        (phi, g)
    };
    let maps = [map(0.05), map(0.07)];
    let mut best = f64::INFINITY;
    // Kept between runs, emptied, as the simulator's storage is.
    let mut record: Vec<f64> = Vec::new();
    for _ in 0..reps {
        let mut z = vec![0.0; n];
        let mut next = vec![0.0; n];
        record.clear();
        let start = Instant::now();
        for s in 0..steps {
            let (phi, g) = &maps[s & 1];
            for (i, out) in next.iter_mut().enumerate() {
                let row = &phi[i * n..(i + 1) * n];
                *out = g[i] + row.iter().zip(&z).map(|(a, b)| a * b).sum::<f64>();
            }
            std::mem::swap(&mut z, &mut next);
            record.extend_from_slice(&z);
            record.push(s as f64);
        }
        best = best.min(start.elapsed().as_secs_f64());
        black_box(&record);
    }
    best
}

/// Per-event cost of a run past its start: the difference of a run of
/// `periods` and a short one of `periods / 50`, so the one-time work
/// (compiling the circuit, building and settling the first modes) is left
/// out; with the start-up cost (the short run's time beyond its events,
/// ns), the events of the difference and the counters of the long run.
fn marginal(
    c: &Circuit,
    periods: f64,
    reps: usize,
    certify: bool,
) -> (f64, f64, usize, usize, Stats) {
    let short = (periods / 50.0).round().max(20.0);
    let (e1, _, s1, _) = run_with(c, short, reps, certify);
    let (e2, states, s2, stats) = run_with(c, periods, reps, certify);
    let per_event = (s2 - s1) * 1e9 / (e2 - e1) as f64;
    let start = s1 * 1e9 - per_event * e1 as f64;
    (per_event, start, e2 - e1, states, stats)
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let words = common::plain_words(&args);
    if let Some(circuit) = words.first().and_then(|w| one(w)) {
        // One circuit alone, for counting instructions: its name (`1` to
        // `12` phases, `ccm`, `dcm`, `dcms`), optionally the periods, and anywhere
        // the word `nocert`.
        let periods = words
            .get(1)
            .and_then(|w| w.parse().ok())
            .unwrap_or(20_000.0);
        let certify = !words.contains(&"nocert");
        let (events, states, s, stats) = run_with(&circuit, periods, 1, certify);
        println!(
            "{events} events, {states} states, {:.3} ms; {stats:?}",
            s * 1e3
        );
        return;
    }
    // `nocert`: the whole table without the energy certificate, to see
    // what the check costs.
    let certify = !words.contains(&"nocert");
    // A warm-up run: the first run of the process pays for faulting in
    // the allocator's pages and showed twice the per-event cost.
    run(&interleaved(1), 20_000.0, 1);
    // Rounds: each measures every row once (best of three runs each), and a
    // ratio is taken within its round, between runs seconds apart; the
    // table gives the median over the rounds. These machines are shared:
    // a burst of load that slows one row slows its round's baseline too,
    // or falls in one round of nine.
    let rounds = 9;
    let reps = 3;
    // `located`: the located rows alone (the scheduled and discontinuous
    // bucks), for comparing two builds of the located path quickly.
    let sizes: &[usize] = if words.contains(&"located") {
        &[]
    } else {
        &[1, 2, 4, 8, 12]
    };
    let dcms = [
        // On its periodic steady state (a regression test of a settled
        // design), the located instants come back within a few ulps; from
        // 0.2 % off it (8.5 V), the output settles with a time constant
        // of thousands of periods and every located instant is a new
        // length.
        ("on its steady state", settled(true)),
        ("settling from 8.5 V", single(true)),
    ];
    let phases: Vec<Circuit> = sizes.iter().map(|&n| interleaved(n)).collect();
    let ccm = single(false);
    let mut rows: Vec<Vec<Row>> = vec![vec![]; sizes.len()];
    let mut located: Vec<Vec<(f64, f64, f64)>> = vec![vec![]; dcms.len()];
    let mut counters = vec![];
    for round in 0..rounds {
        for (k, (&n, c)) in sizes.iter().zip(&phases).enumerate() {
            // About 200,000 events at every size.
            let periods = (200_000 / n.max(2)) as f64;
            let (ns, start, events, states, stats) = marginal(c, periods, reps, certify);
            let bare_ns = bare(states, events, reps) * 1e9 / events as f64;
            rows[k].push(Row {
                ns,
                start,
                events,
                states,
                bare_ns,
            });
            if round == 0 {
                counters.push((format!("{n} phases"), stats));
            }
        }
        // Two scheduled events a period in continuous conduction; in
        // discontinuous conduction a located diode turn-off besides. The
        // located event's own cost is what a DCM period costs beyond two
        // scheduled events.
        let periods = 50_000.0;
        let (ns_ccm, _, ev_ccm, _, st_ccm) = marginal(&ccm, periods, reps, certify);
        if round == 0 {
            counters.push(("CCM buck".into(), st_ccm));
        }
        for (k, (name, dcm)) in dcms.iter().enumerate() {
            let (ns_dcm, _, ev_dcm, _, st_dcm) = marginal(dcm, periods, reps, certify);
            if round == 0 {
                counters.push((format!("DCM buck {name}"), st_dcm));
            }
            // The same periods in both runs; the CCM buck has two events
            // in each.
            let per_period = ns_dcm * ev_dcm as f64 / (ev_ccm as f64 / 2.0);
            located[k].push((ns_ccm, per_period, (per_period - 2.0 * ns_ccm) / ns_ccm));
        }
    }
    for (name, stats) in counters {
        println!("counters, {name}: {stats:?}");
    }
    println!("medians of {rounds} rounds (each row's ratios within its round):");
    println!(
        "phases states   events   ns/event   start-up µs   bare ns/event   bare/sim   per event vs 1 phase"
    );
    for (k, n) in sizes.iter().enumerate() {
        let r = &rows[k];
        let med = |f: &dyn Fn(usize) -> f64| median((0..rounds).map(f).collect());
        let ns = med(&|i| r[i].ns);
        let start = med(&|i| r[i].start);
        let bare_ns = med(&|i| r[i].bare_ns);
        let share = med(&|i| r[i].bare_ns / r[i].ns);
        let vs_one = med(&|i| r[i].ns / rows[0][i].ns);
        println!(
            "{n:>6} {:>6} {:>8} {ns:>10.1} {:>13.1} {bare_ns:>15.1} {:>9.1} % {vs_one:>10.2}×",
            r[0].states,
            r[0].events,
            start * 1e-3,
            100.0 * share,
        );
    }
    for (k, (name, _)) in dcms.iter().enumerate() {
        let l = &located[k];
        let ns_ccm = median(l.iter().map(|x| x.0).collect());
        let per_period = median(l.iter().map(|x| x.1).collect());
        let ratio = median(l.iter().map(|x| x.2).collect());
        println!(
            "DCM buck {name}: {per_period:.1} ns per period; scheduled event (CCM buck) {ns_ccm:.1} ns; located diode turn-off = {ratio:.2}× a scheduled event"
        );
    }
}

/// One row of the table in one round.
#[derive(Clone)]
struct Row {
    ns: f64,
    start: f64,
    events: usize,
    states: usize,
    bare_ns: f64,
}

/// The median of `v` (the mean of the middle two for an even count).
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}
