//! Regression tests of issue 19, item 2 (run time that grew with
//! stiffness). Root cause: every interval was split into sub-intervals with
//! ρ·δ ≤ 1/2, ρ bounding the fastest dynamics of the mode, so a decaying
//! mode of 1 fs (1 fH behind 1 Ω) or 22 ps (a 1 µΩ load on 22 µF) asked
//! for up to 2²⁰ Taylor sub-steps per interval — minutes or hours of run
//! time, and past that cap sub-steps too long for their Taylor series, so
//! garbage. Now a span that would need more than 64 sub-steps is advanced
//! by one matrix exponential, and event location steps by what is still
//! alive (`propagate::Spectrum`): fast decaying modes bound the step only
//! until they have died out. The counters `Stats::stiff_spans` and
//! `Stats::stiff_substeps` show the work; no test times anything.

use fluxstep_netlist::{Circuit, Element};
use fluxstep_solver::measure::measure;
use fluxstep_solver::{simulate, EventKind, Options, Side, Simulator, SolverError};

use super::util::rel;

/// An example circuit file of the repository.
fn example(file: &str) -> Circuit {
    let path = format!(
        "{}/../../examples/circuits/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    Circuit::from_file(path).expect("example circuit is valid")
}

/// 1 V, 1 Ω, 1 fH in series from rest (τ = L/R = 1 fs), to 1 ms.
#[test]
fn issue_19_one_femtohenry_reaches_one_millisecond_in_one_exponential() {
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 1.0)
        .resistor("R1", "in", "a", 1.0)
        .inductor("L1", "a", "gnd", 1e-15)
        .build()
        .unwrap();
    let run = simulate(&c, 1e-3, Options::default()).expect("runs");
    let w = &run.waveform;
    let i = w.output("L1.current").unwrap();
    // The RL step: i(t) = (V/R)(1 − e^{−tR/L}) (common practice); after
    // 1e12 time constants exactly V/R = 1 A (Ohm's law).
    let end = w.value(i, 1e-3).unwrap();
    assert!(rel(end, 1.0) <= 1e-15, "{end}");
    // Dense output inside the fast transient, from the same segment.
    let one_tau = w.value(i, 1e-15).unwrap();
    assert!(rel(one_tau, 1.0 - (-1.0f64).exp()) <= 1e-12, "{one_tau}");
    // The batched evaluation (grids, plots, the Python bindings) gives the
    // same values as one call per instant.
    let times = [0.0, 1e-15, 3e-15, 1e-9, 0.5e-3, 1e-3];
    let batch = w.values(i, &times, Side::After).unwrap();
    for (&t, &b) in times.iter().zip(&batch) {
        assert_eq!(b, w.value(i, t).unwrap(), "at {t}");
    }
    // Extremes and averages over the stiff segment: the current rises
    // from 0 to 1 A; its average over 1 ms is 1 A − τ/1 ms (the RL step's
    // integral, common practice).
    let m = measure(w, i, 0.0, 1e-3).unwrap();
    // (Interpolated on the pieces: within rounding of the 1 A scale.)
    assert!(m.min.abs() <= 1e-15, "{m:?}");
    assert!(rel(m.max, 1.0) <= 1e-15, "{m:?}");
    assert!(rel(m.average, 1.0 - 1e-12) <= 1e-12, "{m:?}");
    let s = run.stats;
    assert_eq!(s.stiff_spans, 1, "{s:?}");
    assert_eq!(s.exponentials, 1, "{s:?}");
    assert_eq!(s.state_events, 0, "{s:?}");
}

/// A lossless LC tank (1 µH, 1 µF, 1 A at t = 0; ω = 1e6 rad/s) after
/// 10⁵ periods: the current is back at 1 A and a quarter period later at
/// 0 A, with the capacitor at the amplitude √(L/C)·1 A = 1 V (the LC
/// tank's closed form i = cos ωt, v = −√(L/C) sin ωt: common practice).
#[test]
fn issue_19_lc_tank_keeps_period_and_amplitude_over_many_periods() {
    let (l, cap) = (1e-6, 1e-6);
    let c = Circuit::builder()
        .inductor_with_current("L1", "a", "gnd", l, 1.0)
        .capacitor("C1", "a", "gnd", cap)
        .build()
        .unwrap();
    let omega = 1.0 / (l * cap).sqrt();
    let period = std::f64::consts::TAU / omega;
    let n = 100_000.0;
    let t_end = n * period + 0.25 * period;
    let run = simulate(&c, t_end, Options::default()).expect("runs");
    let w = &run.waveform;
    let (i, v) = (
        w.output("L1.current").unwrap(),
        w.output("C1.voltage").unwrap(),
    );
    // Phase error of f64 time itself: ε·ωt ≈ 1.4e-10.
    let i_full = w.value(i, n * period).unwrap();
    assert!((i_full - 1.0).abs() <= 1e-8, "{i_full}");
    let i_quarter = w.value(i, t_end).unwrap();
    assert!(i_quarter.abs() <= 1e-8, "{i_quarter}");
    let amp = (l / cap).sqrt();
    let v_quarter = w.value(v, t_end).unwrap();
    assert!((v_quarter.abs() - amp).abs() <= 1e-8, "{v_quarter}");
    // Energy ½Li² + ½Cv² stays ½L·(1 A)².
    let energy = 0.5 * l * i_quarter * i_quarter + 0.5 * cap * v_quarter * v_quarter;
    assert!(rel(energy, 0.5 * l) <= 1e-9, "{energy}");
    assert_eq!(run.stats.stiff_spans, 1, "{:?}", run.stats);
}

/// An N-stage RC ladder (1 Ω, 100 pF per stage, the slowest time constant
/// about 0.4·N²·RC = 6.5e-8 s for N = 40) with a 10 Ω load at its end,
/// after 1 ms: every node at its DC value, the divider
/// v_k = V·(N − k + R_L/R)/(N + R_L/R) (Ohm's law; the transient has
/// decayed by e^{-15000}).
#[test]
fn issue_19_rc_ladder_reaches_its_exact_dc_solution() {
    let n = 40;
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
    let c = b
        .resistor("RL", &format!("n{n}"), "gnd", 10.0)
        .build()
        .unwrap();
    let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
    sim.advance_to(1e-3).expect("runs");
    for k in 1..=n {
        let v = sim.output_value(&format!("C{k}.voltage")).unwrap();
        let exact = (n - k) as f64 + 10.0;
        let exact = exact / (n as f64 + 10.0);
        assert!((v - exact).abs() <= 1e-12, "stage {k}: {v} vs {exact}");
    }
    assert_eq!(sim.stats().stiff_spans, 1);
}

/// The boost of examples/circuits/boost.json with its 24 Ω load replaced
/// by a 1 µΩ fault (RC = 22 ps against a 5 µs switching period).
fn fault_boost() -> Circuit {
    let mut c = example("boost.json");
    for e in &mut c.elements {
        if let Element::Resistor(r) = e {
            r.resistance = 1e-6;
        }
    }
    c.validate().expect("still a valid circuit");
    c
}

/// The fault-loaded boost stays finite and its capacitor's charge
/// balances: ∫ i_D dt = ∫ v/R dt + C·Δv (Kirchhoff's current law at the
/// output node, integrated: common practice). The inductor current ramps
/// at nearly V_in/L throughout (the output is shorted): L·Δi =
/// ∫ (V_in − v_sw) dt (Faraday's law, common practice).
#[test]
fn issue_19_boost_with_a_fault_load_stays_finite_and_balances_charge() {
    let c = fault_boost();
    let t_end = 1e-3;
    let run = simulate(&c, t_end, Options::default()).expect("runs");
    let s = run.stats;
    assert!(s.stiff_spans + s.cache_hits > 0, "{s:?}");
    // 200 periods, two intervals each; each scanned in about 2·60
    // sub-intervals while the 22 ps mode dies out, then one or two.
    assert!(s.stiff_substeps <= 400 * 200, "{s:?}");
    let w = &run.waveform;
    let out = |n: &str| w.output(n).unwrap();
    let (il, vc, id, vsw) = (
        out("L1.current"),
        out("C1.voltage"),
        out("D1.current"),
        out("sw"),
    );
    let z_end = w.state(t_end).expect("recorded");
    assert!(z_end.iter().all(|v| v.is_finite()), "{z_end:?}");
    let q_diode = w.integrate(&[id], 0.0, t_end, |x| x[0]);
    let q_load = w.integrate(&[vc], 0.0, t_end, |x| x[0] / 1e-6);
    let dv = w.value(vc, t_end).unwrap() - w.value(vc, 0.0).unwrap();
    let q_cap = 22e-6 * dv;
    assert!(q_diode > 0.0);
    assert!(
        rel(q_load + q_cap, q_diode) <= 1e-9,
        "{q_diode} vs {q_load} + {q_cap}"
    );
    let flux = 22e-6 * (w.value(il, t_end).unwrap() - w.value(il, 0.0).unwrap());
    let volt_s = w.integrate(&[vsw], 0.0, t_end, |x| 12.0 - x[0]);
    assert!(rel(flux, volt_s) <= 1e-9, "{flux} vs {volt_s}");
    // Nearly V_in·t/L: the shorted output holds the switch node near 0 V.
    assert!(rel(flux, 12.0 * t_end) <= 1e-3, "{flux}");
}

/// The synchronous buck of examples/circuits/sync_buck.json with an
/// inductance of 1e-300 H (a case the fuzz harness found running for
/// minutes): the run finishes or stops with a diagnostic naming the
/// inductor, and does so in a bounded number of sub-intervals.
#[test]
fn issue_19_sync_buck_with_a_vanishing_inductance_finishes_or_names_it() {
    let mut c = example("sync_buck.json");
    for e in &mut c.elements {
        if let Element::Inductor(l) = e {
            l.inductance = 1e-300;
        }
    }
    c.validate().expect("still a valid circuit");
    let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
    match sim.advance_to(20e-6) {
        Ok(()) => {
            assert!(sim.state().iter().all(|v| v.is_finite()));
        }
        Err(e) => {
            let text = e.to_string();
            assert!(text.contains("L1"), "{text}");
            assert!(!matches!(e, SolverError::NonFinite { .. }), "{text}");
        }
    }
    assert!(sim.stats().stiff_substeps <= 100_000, "{:?}", sim.stats());
}

/// A boost without its switch and with a 1 pH inductor (a case the fuzz
/// harness found taking 13 s of run and seconds of measurement): 12 V
/// through 1 pH and an ideal diode into 22 µF ∥ 24 Ω, from rest, for 40
/// ms. The first half-period of the LC charges the output to about twice
/// the input and the diode turns off; the output then decays through the
/// load (τ = RC = 528 µs) to the input after RC·ln 2 ≈ 366 µs, where the
/// diode turns on for good: a ringing at 1/(2π√(LC)) ≈ 34 MHz with
/// Q = R·√(C/L) ≈ 1.1e5 (its envelope decays with 2RC ≈ 1.06 ms), whose
/// current dips towards zero every 30 ns without going below it, around
/// V/R = 0.5 A (resonant charging, the RC discharge and the parallel
/// RLC's Q: common practice). Every sub-interval of the scan used to
/// search such a dip; the energy envelope (`envelope.rs`) now clears the
/// rest of each span at once.
#[test]
fn issue_19_a_picohenry_ringing_that_never_crosses_is_not_scanned_period_by_period() {
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .inductor("L1", "in", "sw", 1e-12)
        .diode("D1", "sw", "out")
        .capacitor("C1", "out", "gnd", 22e-6)
        .resistor("Rload", "out", "gnd", 24.0)
        .build()
        .unwrap();
    let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
    sim.advance_to(40e-3).expect("runs");
    let stats = sim.stats();
    let run = sim.finish();
    let kinds: Vec<_> = run.events.iter().map(|e| (e.kind, e.time)).collect();
    // (The diode conducts from t = 0, the initial pattern, not an event.)
    assert_eq!(kinds.len(), 2, "{kinds:?}");
    assert_eq!(kinds[0].0, EventKind::DiodeOff);
    assert_eq!(kinds[1].0, EventKind::DiodeOn);
    // Off after the half-period π·√(LC) ≈ 14.73 ns (the load shifts it
    // by about 1/Q); on again near RC·ln 2 (the output starts a little
    // below 24 V after the lossy half-period).
    let half = std::f64::consts::PI * (1e-12f64 * 22e-6).sqrt();
    assert!(rel(kinds[0].1, half) < 1e-3, "{kinds:?}");
    let rc_ln2 = 24.0 * 22e-6 * 2f64.ln();
    assert!(rel(kinds[1].1, rc_ln2) < 1e-3, "{kinds:?}");
    // 40 ms of a 33 MHz ringing is 1.3 million periods, about 17 million
    // sub-intervals of the scan; the envelope clears the spans instead.
    assert!(stats.envelope_skips >= 1, "{stats:?}");
    assert!(stats.stiff_substeps <= 10_000, "{stats:?}");
    // After 40 ms the ringing has died (e^{−37} of its start): 0.5 A and
    // the output at the input (Ohm's law), to 1e-9.
    let w = &run.waveform;
    let i = w.output("L1.current").unwrap();
    let m = measure(w, i, 39.9e-3, 40e-3).unwrap();
    assert!(rel(m.min, 0.5) < 1e-9 && rel(m.max, 0.5) < 1e-9, "{m:?}");
    let out = w.output("out").unwrap();
    assert!(rel(w.value(out, 40e-3).unwrap(), 12.0) < 1e-9);
}
