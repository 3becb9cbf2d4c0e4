//! Regression tests of issue 19 (robustness at extreme scales).
//!
//! Root cause of the false diagnostics: fixed small-number thresholds
//! compared quantities of different units. The network's singularity test
//! took the ratio of the smallest to the largest LU pivot of the raw
//! modified-nodal matrix, which mixes conductances (1/R) with the unit
//! entries of voltage branches; with every impedance scaled by k = 3e-8 the
//! ratio fell below 1e-13 and the regular freewheeling mode of a buck read
//! as singular, so the run stopped at t = 0 with a short. The test now runs
//! on the equilibrated matrix. The chatter window was 1 ps whatever the
//! circuit's speed; it is now a fraction of the shortest gate period.
//!
//! Metamorphic laws (common practice; they follow from the circuit
//! equations by a change of units): scaling every impedance by k (R·k,
//! L·k, C/k) keeps every time constant and divides every current by k;
//! scaling every time by s (L·s, C·s, frequencies /s, times ·s) stretches
//! the solution in time; scaling every source and every threshold by a
//! scales every voltage and current by a. The event sequence must not
//! change and the outputs must scale exactly, here to 1e-9 of each
//! quantity's own range.

use fluxstep_netlist::Circuit;
use fluxstep_solver::{simulate, OnInterruption, Options, RunResult};
use proptest::prelude::*;
use serde_json::Value;

/// The example circuit files of the repository.
const EXAMPLES: &[&str] = &[
    "boost.json",
    "buck.json",
    "buck_boost.json",
    "buck_dcm.json",
    "flyback.json",
    "hysteretic_buck.json",
    "interleaved_buck_12.json",
    "interrupted_inductor.json",
    "multiplier_24.json",
    "peak_current_buck.json",
    "rectifier.json",
    "sync_buck.json",
    "three_phase_bridge.json",
    "three_phase_inverter.json",
    "voltage_mode_buck.json",
];

/// Examples and impedance factors at the ends of the issue's range that
/// do not scale yet: none now. The 24-diode multiplier at k ≤ 1e-9 was
/// (its capacitors ×1e9 and more), for three reasons fixed since:
/// - at 5.5 µs, after Db1 turns off, its margin's slope came out
///   −2.7e-4 V/s where the unscaled run has −1.8e-7, both rounding of
///   terms of 4e8 V/s that cancel inside M·z; the band compared it with
///   the row's products with M·z (5 V/s), rejected every pattern and
///   reported a false short (Db2, Da2 across Cb2). Derivatives are now
///   judged against the terms of their last product, |row|·|M|·|Mᵏ⁻¹z|
///   (`Scales::derivative_zero`);
/// - at 16.86 µs ten diodes reach their forward voltage at one instant
///   by symmetry; the stiff root search put them 5e-19 s apart unscaled
///   and 2.8e-16 s (7e-13 of the interval) scaled, so six fired together
///   there and all ten here (`SAME_INSTANT_REL`, now 1e-11);
/// - Db2–Db11 then sit at their forward voltage with zero current for
///   microseconds (conducting and blocking describe the same state), and
///   the search by Hamming distance preferred a nearer pattern that
///   closed a capacitor loop with a charge jump of negative loss over the
///   jump-free pattern pivoting had found. A jump is now taken only where
///   no pattern holds without one (`resolve.rs`).
///
/// (The first false short, at 0.19 µs, came from a current floor of zero
/// in a circuit without inductors, and the flyback at k = 1e-12, the
/// interrupted inductor and the inverter at k = 1e12 from Taylor series
/// that stopped on the largest entry of the state, currents and voltages
/// together; both are fixed: `run/scales.rs`, `propagate.rs`.)
const OPEN_EXTREMES: &[(&str, f64)] = &[];

/// Examples the random scaling test leaves out: none now. The
/// voltage-mode buck was, with k = 1.3e-10 and s = 1.1e-8 together: its
/// compensator's states (5e-13 there) shared one energy-weighted stopping
/// test with the inductor's √L·i (0.46) and kept 1e-6 of their digits,
/// which moved its first comparator turn-off by 2.7e-11 of a period (now
/// judged apart, `propagate::negligible_in_energy`). The peak-current
/// buck and the rectifier came from this test itself: an edge at the stop
/// instant taken or not by rounding, and a tie of the physics broken by
/// rounding (see `assert_scales`).
const OPEN: &[&str] = &[];

/// Impedance, time and amplitude factors.
#[derive(Clone, Copy, Debug)]
struct Scale {
    k: f64,
    s: f64,
    a: f64,
}

fn example_json(file: &str) -> Value {
    let path = format!(
        "{}/../../examples/circuits/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    let c = Circuit::from_file(path).expect("example circuit is valid");
    serde_json::from_str(&c.to_json()).expect("canonical JSON")
}

fn mul(v: &mut Value, key: &str, f: f64) {
    if let Some(x) = v.get_mut(key) {
        if let Some(n) = x.as_f64() {
            *x = Value::from(n * f);
        }
    }
}

fn mul_all(v: &mut Value, key: &str, f: f64) {
    if let Some(Value::Array(xs)) = v.get_mut(key) {
        for x in xs {
            if let Some(n) = x.as_f64() {
                *x = Value::from(n * f);
            }
        }
    }
}

/// Factor of a quantity named like an output: currents scale by a/k,
/// voltages by a; a sine source's oscillator states have unit amplitude.
fn unit(name: &str, sc: Scale) -> f64 {
    if name.contains(".oscillator") {
        1.0
    } else if name.ends_with(".current") {
        sc.a / sc.k
    } else {
        sc.a
    }
}

/// The example scaled by `sc`, run settings included (times ·s).
fn scaled(file: &str, sc: Scale) -> Circuit {
    let Scale { k, s, a } = sc;
    let mut c = example_json(file);
    for e in c["elements"].as_array_mut().expect("elements") {
        let kind = e["kind"].as_str().unwrap_or("").to_string();
        mul(e, "resistance", k);
        mul(e, "on_resistance", k);
        mul(e, "inductance", k * s);
        mul(e, "capacitance", s / k);
        mul(e, "forward_voltage", a);
        mul(e, "initial_current", a / k);
        mul(e, "initial_voltage", a);
        if let Some(b) = e.get_mut("body_diode") {
            mul(b, "forward_voltage", a);
            mul(b, "on_resistance", k);
        }
        if let Some(Value::Array(ws)) = e.get_mut("windings") {
            for w in ws {
                mul(w, "inductance", k * s);
                mul(w, "resistance", k);
            }
        }
        let amp = if kind == "current_source" { a / k } else { a };
        if let Some(w) = e.get_mut("waveform") {
            for key in ["value", "amplitude", "offset", "low", "high"] {
                mul(w, key, amp);
            }
            mul(w, "frequency", 1.0 / s);
            mul(w, "period", s);
            mul(w, "phase_time", s);
        }
    }
    for g in c
        .get_mut("gates")
        .and_then(Value::as_array_mut)
        .into_iter()
        .flatten()
    {
        mul(g, "frequency", 1.0 / s);
        mul(g, "period", s);
        mul(g, "delay", s);
        mul(g, "dead_time_high", s);
        mul(g, "dead_time_low", s);
        if let Some(Value::Array(ts)) = g.get_mut("transitions") {
            for t in ts {
                mul(t, "time", s);
            }
        }
        let sense = g["sense"].as_str().unwrap_or("").to_string();
        let f = unit(&sense, sc);
        mul(g, "high", f);
        mul(g, "low", f);
        mul(g, "reference", f);
        mul(g, "slope", f / s);
        mul(g, "ramp_high", a);
        mul(g, "ramp_low", a);
    }
    for comp in c
        .get_mut("compensators")
        .and_then(Value::as_array_mut)
        .into_iter()
        .flatten()
    {
        mul(comp, "reference", a);
        if let Some(law) = comp.get_mut("law") {
            // With an integrator the gain is in 1/s.
            if law["integrator"] == Value::Bool(true) {
                mul(law, "gain", 1.0 / s);
            }
            mul_all(law, "poles_hz", 1.0 / s);
            mul_all(law, "zeros_hz", 1.0 / s);
        }
    }
    if let Some(run) = c.get_mut("run") {
        // Timing rules read the event log afterwards; the solver ignores
        // them.
        if let Some(o) = run.as_object_mut() {
            o.remove("timing");
        }
        mul(run, "stop_time", s);
        mul(run, "record_from", s);
    }
    Circuit::from_json(&c.to_string()).expect("the scaled circuit is valid")
}

/// The first `stop` seconds (times the time factor) of the scaled example.
fn run(file: &str, sc: Scale, stop: f64) -> RunResult {
    let c = scaled(file, sc);
    // The example with an interruption by design goes on with the
    // flux-conserving jump, so its whole sequence is compared too.
    let opts = Options {
        on_interruption: OnInterruption::ConserveFlux,
        ..Options::default()
    };
    simulate(&c, stop * sc.s, opts).unwrap_or_else(|e| panic!("{file} at {sc:?}: {e}"))
}

/// How long each example is run in the scaling tests: 40 of its gate
/// periods, or its whole run if shorter (keeps the debug build quick).
fn span(file: &str) -> f64 {
    let c = example_json(file);
    let stop = c["run"]["stop_time"].as_f64().expect("stop time");
    let f = c["gates"].as_array().and_then(|g| {
        g.iter()
            .filter_map(|g| g["frequency"].as_f64())
            .reduce(f64::max)
    });
    match f {
        Some(f) => stop.min(40.0 / f),
        None => stop.min(4e-4),
    }
}

/// Same events (kind, element, cause), instants ·s, states and outputs
/// scaled by their units, each to 1e-9 of its own range over the run.
fn assert_scales(file: &str, sc: Scale) {
    // The peak-current buck with both k and s far from 1 (k = 3.7e-8 with
    // s = 7.5e-6) once agreed to 3.5e-9 only and had 1e-8 here; it meets
    // 1e-9 now, as do 80 random (k, s, a) checked beside this test (which
    // of the changes since fixed it was not traced).
    let rel = 1e-9;
    let stop = span(file);
    let one = run(
        file,
        Scale {
            k: 1.0,
            s: 1.0,
            a: 1.0,
        },
        stop,
    );
    let other = run(file, sc, stop);
    let (e1, e2) = (&one.events, &other.events);
    let names = e1.state_names();
    let mut range = vec![0.0f64; names.len()];
    for e in e1.iter() {
        for (r, v) in range.iter_mut().zip(e.after) {
            *r = r.max(v.abs());
        }
    }
    // Each state is judged against the largest state of its unit (a
    // capacitor still at 0 V is compared with the run's voltages).
    let of_unit = |current: bool| {
        (0..names.len())
            .filter(|&i| names[i].ends_with(".current") == current)
            .map(|i| range[i])
            .fold(0.0f64, f64::max)
    };
    let (ri, rv) = (of_unit(true), of_unit(false));
    for (i, r) in range.iter_mut().enumerate() {
        *r = if names[i].ends_with(".current") {
            ri
        } else {
            rv
        };
    }
    // Events closer than the tolerance on their instants (`rel` of the
    // run) are one instant as far as this test can tell, and are compared
    // in a fixed order: two gate edges that coincide only to the decimals
    // of the file (the twelve-phase buck's S2 on and S11 off at T/12) are
    // taken in either order or at instants an ulp apart once the times
    // are scaled; and a tie of the physics is broken by rounding (the
    // rectifier's D1 and D4 reach their forward voltage together at
    // 0.3 ms, by the symmetry of its two equal ties to ground: one
    // instant unscaled, D4 then D1 1.3e-13 s later at k = 4668).
    fn grouped(log: &fluxstep_solver::EventLog, width: f64) -> Vec<fluxstep_solver::EventRef<'_>> {
        let mut v: Vec<_> = log.iter().collect();
        let mut i = 0;
        while i < v.len() {
            let t0 = v[i].time;
            let mut j = i + 1;
            while j < v.len() && (v[j].time - t0).abs() <= width {
                j += 1;
            }
            v[i..j].sort_by_key(|e| (format!("{:?}", e.kind), format!("{:?}", e.cause), e.element));
            i = j;
        }
        v
    }
    // Events at the stop instant itself are left out: a gate edge there
    // (the runs last a whole number of periods) is applied when its
    // computed time is within four ulps of the stop time, and whether it
    // is depends on the rounding of the two products, not on the circuit
    // (the peak-current buck at s = 6.6e-6: its 40th switch-on, 1 ulp
    // past the stop unscaled, falls 5 ulps past it scaled).
    let mut g1 = grouped(e1, rel * stop);
    g1.retain(|e| e.time < stop * (1.0 - 1e-12));
    let mut g2 = grouped(e2, rel * stop * sc.s);
    g2.retain(|e| e.time < stop * sc.s * (1.0 - 1e-12));
    assert_eq!(g1.len(), g2.len(), "{file} {sc:?}: event count");
    for (a, b) in g1.iter().zip(g2.iter()) {
        assert_eq!(
            (a.kind, a.cause, a.element),
            (b.kind, b.cause, b.element),
            "{file} {sc:?}: event at {}",
            a.time
        );
        assert!(
            (b.time - a.time * sc.s).abs() <= rel * stop * sc.s,
            "{file} {sc:?}: {} at {} vs {}",
            a.element,
            a.time * sc.s,
            b.time
        );
        for (i, (x, y)) in a.after.iter().zip(b.after).enumerate() {
            // A compensator's internal states depend on its realisation
            // (their units follow s); its output is compared below.
            if !names[i].ends_with(".current") && !names[i].ends_with(".voltage") {
                continue;
            }
            let f = unit(&names[i], sc);
            assert!(
                (y - x * f).abs() <= rel * range[i].max(f64::MIN_POSITIVE) * f,
                "{file} {sc:?}: {} at {}: {} vs {}",
                names[i],
                a.time,
                x * f,
                y
            );
        }
    }
    let (w1, w2) = (&one.waveform, &other.waveform);
    // Off the switching instants (an output that steps there is taken on
    // either side by rounding of the scaled time).
    let pts: Vec<f64> = (0..50)
        .map(|j| stop * (f64::from(j) + std::f64::consts::FRAC_1_PI) / 50.0)
        .collect();
    let values: Vec<(&str, Vec<Option<f64>>)> = w1
        .output_names()
        .iter()
        .map(|name| {
            let i1 = w1.output(name).unwrap();
            let v: Vec<Option<f64>> = pts.iter().map(|&t| w1.value(i1, t).ok()).collect();
            (name.as_str(), v)
        })
        .collect();
    // Like the states, each output is judged against the largest of its
    // unit (a capacitor current that the phases cancel to rounding, or a
    // conducting ideal diode's voltage, is compared with the circuit's
    // currents or voltages, not with its own noise).
    let own = |v: &[Option<f64>]| v.iter().flatten().fold(0.0f64, |m, x| m.max(x.abs()));
    let of_outputs = |current: bool| {
        values
            .iter()
            .filter(|(n, _)| !n.contains(".oscillator") && n.ends_with(".current") == current)
            .map(|(_, v)| own(v))
            .fold(0.0f64, f64::max)
    };
    let (oi, ov) = (ri.max(of_outputs(true)), rv.max(of_outputs(false)));
    for (name, v1) in &values {
        let i2 = w2.output(name).unwrap();
        let r = if name.contains(".oscillator") {
            own(v1)
        } else if name.ends_with(".current") {
            oi
        } else {
            ov
        };
        let f = unit(name, sc);
        for (&t, x) in pts.iter().zip(v1) {
            let y = w2.value(i2, t * sc.s).ok();
            match (x, y) {
                (Some(x), Some(y)) => assert!(
                    (y - x * f).abs() <= rel * r.max(f64::MIN_POSITIVE) * f,
                    "{file} {sc:?}: {name} at {t}: {} vs {y}",
                    x * f
                ),
                (None, None) => {}
                _ => panic!("{file} {sc:?}: {name} at {t}: defined in one run only"),
            }
        }
    }
}

/// The scales of the issue's reproduction: k = 3e-8 stopped the buck at
/// t = 0 with a false short; every value ×1e-12 (k = s = 1e-12) likewise;
/// a 200 THz buck (s = 1e-9) stopped on the absolute 1 ps chatter window;
/// and the ends of the issue's range of k, 1e-12 and 1e12.
#[test]
fn issue_19_extreme_scales_keep_the_event_sequence() {
    for sc in [
        (3e-8, 1.0, 1.0),
        (1e-12, 1e-12, 1.0),
        (1e-12, 1.0, 1.0),
        (1e12, 1.0, 1.0),
        (1e12, 1e3, 1e-3),
        (1.0, 1e-9, 1.0),
        (1.0, 1e9, 1e6),
    ] {
        let (k, s, a) = sc;
        assert_scales("buck.json", Scale { k, s, a });
    }
    // The rectifier's diodes all off at t = 0 leave its source on two
    // 1 MΩ ties to ground: at k ≥ 4e7 the network was judged singular
    // and the run stopped with a false short (D3, D1 across C1).
    for k in [1e-12, 4e7, 1e9, 1e12] {
        assert_scales("rectifier.json", Scale { k, s: 1.0, a: 1.0 });
    }
}

/// Every example at the ends of the issue's impedance range, k = 1e-12,
/// 1e-9, 1e9 and 1e12 (R·k, L·k, C/k: the same time constants, currents
/// ×1/k; common practice), keeps its event sequence and scales its
/// states and outputs to 1e-9 of their unit's range, except the open
/// findings of [`OPEN_EXTREMES`].
#[test]
fn issue_19_every_example_at_the_ends_of_the_impedance_range() {
    for file in EXAMPLES {
        for k in [1e-12, 1e-9, 1e9, 1e12] {
            if !OPEN_EXTREMES.contains(&(*file, k)) {
                assert_scales(file, Scale { k, s: 1.0, a: 1.0 });
            }
        }
    }
}

/// With every impedance ×1e12 the currents are 1e-12 of the voltages.
/// The certificate's Gramians once came from a Padé exponential of Van
/// Loan's block matrix, which lost the small entries: it saw the stored
/// energy jump by 4e-5 of itself at the diode's turn-off and refused the
/// run, while the states agreed with the unscaled run (the scaling test
/// above includes k = 1e12). On the balanced Taylor series the balance
/// closes to rounding. Energy conservation (Tellegen's theorem; common
/// practice).
#[test]
fn issue_19_impedance_times_1e12_closes_the_energy_balance() {
    for k in [1e12, 1e-12] {
        let c = scaled("buck.json", Scale { k, s: 1.0, a: 1.0 });
        let stop = span("buck.json");
        let cert = simulate(&c, stop, Options::default())
            .expect("runs")
            .certificate;
        assert!(cert.checked_time > 0.99 * stop, "k = {k}: {cert:?}");
        assert!(cert.relative_residual() < 1e-12, "k = {k}: {cert:?}");
    }
}

/// A boost whose load is 0.3 µΩ (a fault: RC = 6.6 ps) reported a short
/// across its capacitor at t = 0: the network matrix held 1/R = 3.3e6
/// beside unit entries. It must run, and its output is the RC-limited
/// source: at 1 ns nothing is wrong with the circuit.
#[test]
fn issue_19_micro_ohm_load_is_no_short() {
    let mut c = example_json("boost.json");
    for e in c["elements"].as_array_mut().unwrap() {
        if e["kind"] == "resistor" {
            e["resistance"] = Value::from(0.3e-6);
        }
    }
    let c = Circuit::from_json(&c.to_string()).unwrap();
    let r = simulate(&c, 1e-9, Options::default());
    assert!(r.is_ok(), "{:?}", r.err());
}

proptest! {
    #![proptest_config(ProptestConfig {
        cases: 48,
        // A fixed seed: the same 48 cases on every run (a random one made
        // the suite's outcome depend on the day, see the open findings).
        rng_seed: proptest::test_runner::RngSeed::Fixed(19),
        ..ProptestConfig::default()
    })]

    /// Every example keeps its event sequence and scales its outputs
    /// under k ∈ [1e-12, 1e12], s ∈ [1e-9, 1e9], a ∈ [1e-6, 1e6] (log-
    /// uniform), one example per case.
    #[test]
    fn issue_19_every_example_scales(
        ex in 0..EXAMPLES.len(),
        lk in -12.0f64..12.0,
        ls in -9.0f64..9.0,
        la in -6.0f64..6.0,
    ) {
        let sc = Scale { k: 10f64.powf(lk), s: 10f64.powf(ls), a: 10f64.powf(la) };
        // The twelve-phase buck's S2 on and S11 off coincide only to the
        // decimals of the file; `assert_scales` compares such groups in a
        // fixed order. (The interrupted inductor at k = 10^5.39 with
        // a = 10^-5.81, currents near 3e-11 A, once gave L1's and Vin's
        // currents 1.5e-9 apart; it meets 1e-9 now, as do 80 random
        // (k, s, a) checked beside this test.)
        prop_assume!(!OPEN.contains(&EXAMPLES[ex]));
        assert_scales(EXAMPLES[ex], sc);
    }
}

/// The voltage-mode buck with every impedance ×1.3e-10 and every time
/// ×1.1e-8 (each factor alone scaled): its compensator's states, 5e-13
/// there, shared one energy-weighted Taylor stopping test with the
/// inductor's √L·i of 0.46 and kept only 1e-6 of their digits; the first
/// comparator turn-off moved by 2.7e-11 of a period and the inductor
/// current drifted 1.9e-8 apart over 20 periods. Scaling laws of the
/// circuit equations (common practice).
#[test]
fn issue_19_compensator_states_keep_their_digits_beside_the_circuit() {
    assert_scales(
        "voltage_mode_buck.json",
        Scale {
            k: 1.309646682109468e-10,
            s: 1.1250801898037111e-8,
            a: 1.0,
        },
    );
}
