//! Regression tests of issue 19 (bounded memory). Root cause: recording
//! everything kept every segment and event however long the run, so a
//! 100 MHz converter recorded for 1 s grew until the allocator aborted the
//! process. The record now has a budget ([`Options::memory_budget`]) and
//! the run stops with a diagnostic naming it.

use fluxstep_netlist::Circuit;
use fluxstep_solver::{Options, Record, Simulator, SolverError};

/// The buck of examples/circuits/buck.json (200 kHz).
fn buck() -> Circuit {
    let path = format!(
        "{}/../../examples/circuits/buck.json",
        env!("CARGO_MANIFEST_DIR")
    );
    Circuit::from_file(path).expect("example circuit is valid")
}

#[test]
fn issue_19_a_record_past_its_budget_stops_with_a_diagnostic() {
    let budget = 64 * 1024;
    let opts = Options {
        record: Record::All,
        memory_budget: budget,
        ..Options::default()
    };
    let mut sim = Simulator::new(&buck(), opts).expect("compiles");
    let err = sim.advance_to(5e-3).expect_err("stops on the budget");
    let SolverError::MemoryBudget { time, budget: b } = err else {
        panic!("expected the memory budget, got {err}");
    };
    assert_eq!(b, budget);
    assert!(time > 0.0 && time < 5e-3, "{time}");
    assert!(
        err.to_string().contains("memory budget of 65536 bytes"),
        "{err}"
    );
    let r = sim.finish();
    let used = r.waveform.memory_bytes() + r.events.memory_bytes();
    // Checked at every event and scheduled instant: over by at most one
    // segment and an instant's events (a few hundred bytes here).
    assert!(used > budget / 2 && used <= budget + 1024, "{used}");
}

#[test]
fn issue_19_a_window_within_the_budget_runs_to_the_end() {
    // The same run recording only its last 50 µs stays far below the
    // budget that stopped the full record.
    let opts = Options {
        record: Record::Window {
            from: 4.95e-3,
            to: 5e-3,
        },
        memory_budget: 64 * 1024,
        ..Options::default()
    };
    let mut sim = Simulator::new(&buck(), opts).expect("compiles");
    sim.advance_to(5e-3).expect("runs to the end");
}
