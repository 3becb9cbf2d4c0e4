//! Finite switching transitions against ideal switches: a synchronous
//! buck (24 V → 12 V, 200 kHz, 50 ns / 80 ns dead times, body diodes)
//! with the clamped inductive switching model on both transistors, and
//! the same converter with ideal switches, events per second of each in
//! the same process: events handled (the instants the solver stops at,
//! scheduled and located, as `benches/phases.rs` counts them; a hard
//! edge with a transition model is three of them), and periods per
//! second, which is also the rate of recorded switch and diode events
//! (eight a period in both runs).
//!
//! ```sh
//! cargo bench --bench transitions
//! ```
//!
//! The high-side transistor switches hard at both edges (two ramps and a
//! located clamp each); the low side turns on and off at zero voltage
//! into its body diode, so its model adds nothing. Wall time is the
//! minimum of several runs, the two variants taking turns (the machines
//! are shared); each run records into the storage of the one before.
//!
//! For counting instructions (repeatable, unlike wall time), one variant
//! alone: `ideal` or `ramps`, then optionally the periods (default
//! 20,000) and the runs (default 9), and anywhere the word `nocert` (no
//! energy certificate, to see what the check costs):
//!
//! ```sh
//! cargo bench --bench transitions --no-run
//! valgrind --tool=callgrind target/release/deps/transitions-* ramps 4000 1
//! ```

use std::time::Instant;

use fluxstep_netlist::{Circuit, DiodeModel, Element, SwitchTransition, TransitionRates};
use fluxstep_solver::{Options, Record, RunResult, Simulator, Stats};

mod common;

const T: f64 = 5e-6;
const PERIODS: f64 = 20_000.0;

fn buck(transitions: bool) -> Circuit {
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
        .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body)
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("R", "out", "gnd", 6.0)
        .complementary_pwm("hb", 1.0 / T, 0.5, 50e-9, 80e-9)
        .build()
        .unwrap();
    if transitions {
        for e in &mut c.elements {
            if let Element::Switch(s) = e {
                s.transition = Some(SwitchTransition {
                    turn_off: TransitionRates {
                        voltage_rate: 24.0 / 10e-9,
                        current_rate: 2.0 / 5e-9,
                    },
                    turn_on: TransitionRates {
                        voltage_rate: 24.0 / 12e-9,
                        current_rate: 2.0 / 6e-9,
                    },
                });
            }
        }
    }
    c
}

/// The best of a series of runs of one circuit: events, seconds,
/// counters.
#[derive(Default)]
struct Best {
    events: usize,
    seconds: Option<f64>,
    stats: Stats,
    /// The storage of the last run, recorded into again by the next
    /// (`Simulator::reuse_storage`): without it, whether each run's
    /// megabytes go back to the system and fault in again depends on the
    /// allocator's heap layout, which moved the times by up to 1.9x
    /// between builds that differed in no hot code.
    old: Option<RunResult>,
}

impl Best {
    /// One more run of `c` over `periods`, with the energy certificate or
    /// without.
    fn run(&mut self, c: &Circuit, periods: f64, certify: bool) {
        let opts = Options {
            record: Record::All,
            energy_tolerance: certify.then_some(fluxstep_solver::DEFAULT_ENERGY_TOLERANCE),
            ..Options::default()
        };
        let start = Instant::now();
        let mut sim = Simulator::new(c, opts).expect("the buck compiles");
        if let Some(old) = self.old.take() {
            sim.reuse_storage(old);
        }
        sim.advance_to(periods * T).expect("the buck runs");
        let run = sim.finish();
        let s = start.elapsed().as_secs_f64();
        self.seconds = Some(self.seconds.map_or(s, |b| b.min(s)));
        self.events = run.events.len();
        self.stats = run.stats;
        self.old = Some(run);
    }

    fn seconds(&self) -> f64 {
        self.seconds.unwrap_or(f64::NAN)
    }
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let words = common::plain_words(&args);
    let one = words
        .first()
        .copied()
        .filter(|w| *w == "ideal" || *w == "ramps");
    let periods: f64 = words.get(1).and_then(|w| w.parse().ok()).unwrap_or(PERIODS);
    let reps: usize = words.get(2).and_then(|w| w.parse().ok()).unwrap_or(9);
    let certify = !words.contains(&"nocert");
    if let Some(which) = one {
        let c = buck(which == "ramps");
        let mut best = Best::default();
        for _ in 0..reps {
            best.run(&c, periods, certify);
        }
        println!(
            "{which}: {} events in {:.3} ms, {:.3e} events/s",
            best.events,
            best.seconds() * 1e3,
            best.events as f64 / best.seconds()
        );
        println!("counters: {:?}", best.stats);
        return;
    }
    // The two variants alternate, so that both see the same load of a
    // shared machine.
    let (ideal, ramps) = (buck(false), buck(true));
    let (mut a, mut b) = (Best::default(), Best::default());
    for _ in 0..reps {
        a.run(&ideal, periods, true);
        b.run(&ramps, periods, true);
    }
    let (ideal_s, ideal_stats) = (a.seconds(), a.stats);
    let (ramp_s, ramp_stats) = (b.seconds(), b.stats);
    // Events handled: the instants the solver stops at, scheduled (gate
    // edges, ends of ramp phases) and located (clamps, diodes), counted
    // as the phases bench counts them. The recorded switch and diode
    // events are the same in both runs (eight a period), so their rate
    // is the periods' rate.
    let handled = |s: &Stats| (s.scheduled_events + s.state_events) as f64;
    let (ideal_events, ramp_events) = (handled(&ideal_stats), handled(&ramp_stats));
    let ideal_rate = ideal_events / ideal_s;
    let ramp_rate = ramp_events / ramp_s;
    println!(
        "ideal switches:       {ideal_events} events handled ({} recorded) in {:.3} ms, {:.3e} events/s",
        a.events,
        ideal_s * 1e3,
        ideal_rate
    );
    println!(
        "with transitions:     {ramp_events} events handled ({} recorded) in {:.3} ms, {:.3e} events/s",
        b.events,
        ramp_s * 1e3,
        ramp_rate
    );
    println!("counters, ideal:       {ideal_stats:?}");
    println!("counters, transitions: {ramp_stats:?}");
    println!(
        "ratio of events handled per second: {:.1} %; of periods (or recorded events) per second: {:.1} %",
        100.0 * ramp_rate / ideal_rate,
        100.0 * ideal_s / ramp_s
    );
}
