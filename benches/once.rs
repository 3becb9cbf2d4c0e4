//! One run of a benchmark converter, for counting instructions (repeatable
//! on shared machines, unlike wall time):
//!
//! ```sh
//! cargo bench --bench once --no-run
//! valgrind --tool=callgrind target/release/deps/once-* ccm all
//! ```
//!
//! Arguments: `ccm`, `dcm` or `pi` (the bucks of `benches/common`; `pi`
//! is the CCM buck under the sampled PI controller), then `all`
//! or `nothing` (what to record), then optionally how many runs (default
//! 1; each run is timed and printed, as a criterion iteration would be),
//! then optionally `reuse` (each run records into the storage of the run
//! before, so that fresh pages do not dominate the time), and anywhere the
//! word `nocert` (no energy certificate: `Options::energy_tolerance` set
//! to `None`, to see what the check costs). Prints the events and the
//! wall time per event of this one run.

use std::time::Instant;

use fluxstep_solver::{Options, Record, Simulator};

mod common;

use common::{buck_ccm, buck_dcm, digital_pi_buck, run_digital_pi, PERIODS};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let words = common::plain_words(&args);
    let dcm = words.first() == Some(&"dcm");
    let pi = words.first() == Some(&"pi");
    let record = if words.get(1) == Some(&"nothing") {
        Record::Nothing
    } else {
        Record::All
    };
    // An optional third word: how many runs (each printed).
    let runs: usize = words.get(2).and_then(|w| w.parse().ok()).unwrap_or(1);
    // An optional fourth word `reuse`: each run records into the storage of
    // the one before (no fresh pages, as `record_all_reused`).
    let reuse = words.get(3) == Some(&"reuse");
    let certify = !words.contains(&"nocert");
    let c = if pi {
        digital_pi_buck()
    } else if dcm {
        buck_dcm()
    } else {
        buck_ccm()
    };
    let mut previous = None;
    for _ in 0..runs {
        let start = Instant::now();
        let opts = Options {
            record,
            energy_tolerance: certify.then_some(fluxstep_solver::DEFAULT_ENERGY_TOLERANCE),
            ..Options::default()
        };
        let run = if pi {
            run_digital_pi(&c, record)
        } else {
            let mut sim = Simulator::new(&c, opts).expect("compiles");
            if let Some(old) = previous.take() {
                sim.reuse_storage(old);
            }
            sim.advance_periods(PERIODS).expect("runs");
            sim.finish()
        };
        let n = run.stats.scheduled_events + run.stats.state_events;
        let dt = start.elapsed().as_secs_f64();
        let located = run.stats.state_events;
        if reuse {
            previous = Some(run);
        }
        println!(
            "{n} events ({located} located), {:.1} ns per event",
            dt * 1e9 / n as f64
        );
    }
}
