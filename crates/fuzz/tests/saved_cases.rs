//! Cases the harness saved (issue 19), replayed through `run_case`: each
//! one panicked or ran for minutes before its fix, and each now ends with
//! a refusal of the file or of the run. A regression panics here or never
//! returns; nothing is timed.
//!
//! - `panic-infinite-clock-period.json`: a peak-current clock of 5e-324 Hz
//!   (period ∞) indexed the compensation ramp at a NaN instant; now the
//!   file is refused naming `frequency`.
//! - `panic-winding-5e-324.json`: a flyback winding of 5e-324 H passed the
//!   Cholesky test of its inductance matrix, whose general inverse then
//!   failed while compiling; now the winding is refused by name.
//! - `slow-inductance-1e-300.json`, `slow-capacitance-1e-300.json`,
//!   `slow-capacitance-2e-308.json`: dynamics near 1e300 /s, whose
//!   measurement walked pieces shorter than one ulp of time; now refused
//!   when the pattern is entered (faster than 1e150 /s).
//! - `slow-terahertz-source.json`: a 1 THz sine; the run refuses it, and
//!   the measurement of what was recorded is refused above 2²⁰ pieces.
//! - `slow-capacitance-5e-324.json`: the voltage multiplier with one
//!   capacitor of 5e-324 F, whose 1/C is ∞: the rate bound was NaN, so
//!   the run was neither refused nor finished; now the value is refused
//!   by name.
//! - `slow-grazing-diode.json`: the rectifier without load; the same
//!   crossing was located at the same instant forever, now the run stops
//!   naming the diode.
//! - `panic-forward-voltage-max.json`: the three-phase inverter with a body
//!   diode's forward voltage of 1.8e308 V (`f64::MAX`); the constraint
//!   matrix of a pattern overflowed and the singular value decomposition
//!   panicked on a NaN; now that pattern has no multipliers and the run
//!   ends with a diagnostic.
//!
//! - `slow-boost-1-picohenry.json`: the boost without its switch and
//!   with L1 = 1 pH: 12 V through 1 pH and the diode into 22 µF ∥ 24 Ω
//!   (Q ≈ 1e5 at 34 MHz). Once the output falls to the input the diode
//!   current rings down towards zero every 30 ns for milliseconds: each
//!   dip was bisected on exact states (13 s), then the measurement
//!   interpolated the decayed ringing piece by piece (seconds). Now the
//!   energy envelope clears the spans and the flat stretch is one piece;
//!   the run reaches its stop.
//! - `slow-inverter-1e100-ohm.json`: the three-phase inverter with Rb =
//!   1e100 Ω, 2.7 s (over 4 s once in the long run) in the dip search's
//!   matrix exponentials; the dips now take Illinois steps (0.6 s), and
//!   the run ends with its diagnostic.
//! - `slow-dcm-buck-1e-300-hertz-gate.json`: the DCM buck with a gate of
//!   1e-300 Hz and a stop time of f64::MAX, run in slices of 2.8e306 s:
//!   1.65 s alone, over the limit once in the long run. The energy
//!   envelope's growth factor over such a slice was e^∞ (a rounding
//!   margin of 1e-12 /s on the growth rate), so every slice was scanned
//!   and measured piece by piece while the ringing died; the growth is
//!   now bounded only until every live component has died
//!   (`Spectrum::settled_after`).

use fluxstep_fuzz::{run_case, Limits};

fn case(name: &str) -> String {
    std::fs::read_to_string(format!("{}/tests/cases/{name}", env!("CARGO_MANIFEST_DIR"))).unwrap()
}

#[test]
fn issue_19_a_clock_with_an_infinite_period_is_refused_not_a_panic() {
    let o = run_case(
        &case("panic-infinite-clock-period.json"),
        &Limits::default(),
    );
    assert!(!o.valid, "{o:?}");
}

#[test]
fn issue_19_a_winding_without_a_finite_inverse_is_refused_not_a_panic() {
    let o = run_case(&case("panic-winding-5e-324.json"), &Limits::default());
    assert!(!o.valid, "{o:?}");
}

#[test]
fn issue_19_saved_slow_cases_end_with_a_refusal() {
    for name in [
        "slow-inductance-1e-300.json",
        "slow-capacitance-1e-300.json",
        "slow-capacitance-2e-308.json",
        "slow-terahertz-source.json",
        "slow-grazing-diode.json",
        "slow-inverter-1e100-ohm.json",
        "slow-dcm-buck-1e-300-hertz-gate.json",
    ] {
        let o = run_case(&case(name), &Limits::default());
        assert!(o.valid && !o.ran, "{name}: {o:?}");
    }
}

#[test]
fn issue_19_a_capacitance_without_a_finite_reciprocal_is_refused() {
    let o = run_case(&case("slow-capacitance-5e-324.json"), &Limits::default());
    assert!(!o.valid, "{o:?}");
}

#[test]
fn issue_19_a_forward_voltage_of_f64_max_is_not_a_panic() {
    let o = run_case(&case("panic-forward-voltage-max.json"), &Limits::default());
    assert!(o.valid && !o.timed_out, "{o:?}");
}

#[test]
fn issue_19_a_picohenry_ringing_runs_to_its_stop() {
    let o = run_case(&case("slow-boost-1-picohenry.json"), &Limits::default());
    assert!(o.valid && o.ran, "{o:?}");
}
