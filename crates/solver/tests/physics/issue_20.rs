//! Issue 20: circuits of many diodes (the conduction pattern by a linear
//! complementarity solver) and the example circuits of larger converters.

use fluxstep_netlist::{Circuit, Gate};
use fluxstep_solver::measure::measure;
use fluxstep_solver::{simulate, EventKind, Options, SolverError};

/// An example circuit file of the repository.
fn example(file: &str) -> Circuit {
    let path = format!(
        "{}/../../examples/circuits/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    Circuit::from_file(path).expect("example circuit is valid")
}

/// The three-phase bridge's diodes turn on in the order D1, D2, …, D6,
/// one every 60 degrees, each at a crossing of two phase voltages: the
/// positive rail takes the most positive phase, the negative rail the most
/// negative (N. Mohan, T. Undeland & W. Robbins, *Power Electronics*, the
/// chapter on line-frequency diode rectifiers, three-phase full bridge;
/// common practice). With ideal sources and diodes the commutation is
/// instantaneous, so D1 (phase a, positive rail) turns on where va = vc,
/// at 30° + k·360°, and D(i+1) 60° after Di; each instant is located on
/// the exact solution, so the tolerance is a few nanoseconds.
#[test]
fn issue_20_three_phase_bridge_conducts_in_the_60_degree_sequence() {
    let c = example("three_phase_bridge.json");
    let f = 50.0;
    let run = simulate(&c, 0.1, Options::default()).expect("runs");
    let ons: Vec<(f64, String)> = run
        .events
        .of_kind(EventKind::DiodeOn)
        .filter(|e| e.time > 0.04)
        .map(|e| (e.time, e.element.to_string()))
        .collect();
    assert!(ons.len() >= 6 * 3, "{} turn-ons", ons.len());
    for (t, d) in &ons {
        let k: usize = d[1..].parse().expect("diodes are D1..D6");
        // Degrees into the period, then the expected instant in the
        // sequence nearest t.
        let deg = (t * f).fract() * 360.0;
        let want = 30.0 + 60.0 * (k as f64 - 1.0);
        let off = (deg - want + 180.0).rem_euclid(360.0) - 180.0;
        assert!(
            off.abs() * 1.0 / (360.0 * f) < 5e-9,
            "{d} on at {t} s, {deg:.6}° into the period, expected {want}°"
        );
    }
    // The order: each turn-on is the next diode of the sequence.
    for w in ons.windows(2) {
        let a: usize = w[0].1[1..].parse().unwrap();
        let b: usize = w[1].1[1..].parse().unwrap();
        assert_eq!(b, a % 6 + 1, "{} then {}", w[0].1, w[1].1);
    }
    // Each diode conducts 120°: it turns off when the diode two places on
    // in the sequence (same rail) turns on.
    let offs: Vec<(f64, String)> = run
        .events
        .of_kind(EventKind::DiodeOff)
        .filter(|e| e.time > 0.04)
        .map(|e| (e.time, e.element.to_string()))
        .collect();
    for (t, d) in &offs {
        let k: usize = d[1..].parse().unwrap();
        let next = (k + 1) % 6 + 1;
        assert!(
            ons.iter()
                .any(|(u, e)| *e == format!("D{next}") && (u - t).abs() < 1e-12),
            "{d} off at {t} s without D{next} turning on"
        );
    }
}

/// A circuit of 24 diodes (a twelve-stage multiplier) runs, and its
/// output climbs towards 2·N·(Vpeak − Vf) without passing it (common
/// practice for the diode-capacitor ladder at light load; a charge pump
/// cannot exceed its no-load voltage).
#[test]
fn issue_20_a_circuit_of_24_diodes_runs() {
    let c = example("multiplier_24.json");
    let run = simulate(&c, 1e-3, Options::default()).expect("runs");
    let w = &run.waveform;
    let out = w.output("out").expect("output");
    let end = w.span().expect("recorded").1;
    let v = w.value(out, end).expect("value");
    let limit = 2.0 * 12.0 * (10.0 - 0.6);
    // After 50 cycles it has passed a fifth of the way (68 V).
    assert!(v > 0.2 * limit && v < limit, "output {v} V of {limit} V");
    // Every diode took part.
    for k in 1..=12 {
        for side in ["a", "b"] {
            let name = format!("D{side}{k}");
            assert!(
                run.events
                    .of_kind(EventKind::DiodeOn)
                    .any(|e| e.element == name),
                "{name} never conducted"
            );
        }
    }
}

/// Twelve interleaved buck phases of `l` each at 250 kHz, the phases T/12
/// apart, started in the periodic steady state of the ideal converter
/// (each inductor at its own point of the triangle of ripple ΔI around
/// I = Vout/(12·R), the output at D·Vin).
fn interleaved(d: f64) -> Circuit {
    let (n, vin, f, l, r) = (12usize, 12.0, 250e3, 2.2e-6, 0.025);
    let t = 1.0 / f;
    let vo = d * vin;
    let i_avg = vo / r / n as f64;
    let di = (vin - vo) * d * t / l;
    let mut b = Circuit::builder().voltage_source("Vin", "in", "gnd", vin);
    for k in 0..n {
        let tau = (-(k as f64) * t / n as f64).rem_euclid(t);
        let i0 = if tau < d * t {
            i_avg - di / 2.0 + (vin - vo) / l * tau
        } else {
            i_avg + di / 2.0 - vo / l * (tau - d * t)
        };
        let (sw, g) = (format!("sw{k}"), format!("ph{k}"));
        b = b
            .switch(&format!("S{k}"), "in", &sw, &g)
            .diode(&format!("D{k}"), "gnd", &sw)
            .inductor_with_current(&format!("L{k}"), &sw, "out", l, i0)
            .gate(Gate::Pwm {
                name: g,
                frequency: f,
                duty: d,
                delay: k as f64 * t / n as f64,
                start: None,
                stop: None,
            });
    }
    b.capacitor_with_voltage("Cout", "out", "gnd", 470e-6, vo)
        .resistor("Rload", "out", "gnd", r)
        .run(1e-3, &["Cout.current", "L0.current"])
        .build()
        .expect("valid")
}

/// Interleaving N equal phases cancels the ripple current into the output
/// capacitor at D = k/N: the N triangles, shifted by T/N, add up to a
/// constant (common practice). At D = 3/12 the capacitor current over a
/// period is flat to rounding, though each inductor ripples by 4.1 A; at
/// D = 0.3 the sum keeps a ripple of Vin/(L·f)·(N·D − m)(m + 1 − N·D)/N
/// with m = ⌊N·D⌋ (from memory; it assumes a constant output voltage,
/// here constant to 1e-5 of itself, so 1 % is ample).
#[test]
fn issue_20_interleaved_buck_ripple_cancels_at_k_over_n() {
    let (vin, f, l, n) = (12.0, 250e3, 2.2e-6, 12.0);
    for (d, cancels) in [(0.25, true), (0.3, false)] {
        let c = interleaved(d);
        let run = simulate(&c, 20.0 / f, Options::default()).expect("runs");
        let w = &run.waveform;
        let (t0, t1) = (19.0 / f, 20.0 / f);
        let ic = measure(w, w.output("Cout.current").unwrap(), t0, t1).unwrap();
        let il = measure(w, w.output("L0.current").unwrap(), t0, t1).unwrap();
        let phase_ripple = (vin - d * vin) * d / f / l;
        assert!(
            (il.peak_to_peak - phase_ripple).abs() < 1e-3 * phase_ripple,
            "D = {d}: phase ripple {} vs {phase_ripple}",
            il.peak_to_peak
        );
        if cancels {
            assert!(
                ic.peak_to_peak < 1e-9 * phase_ripple,
                "D = {d}: capacitor ripple {} A",
                ic.peak_to_peak
            );
        } else {
            let m = (n * d).floor();
            let want = vin / (l * f) * (n * d - m) * (m + 1.0 - n * d) / n;
            assert!(
                (ic.peak_to_peak - want).abs() < 1e-2 * want,
                "D = {d}: capacitor ripple {} A vs {want} A",
                ic.peak_to_peak
            );
        }
    }
}

/// Bad input: a loop of ideal diodes around an ideal voltage source has
/// no consistent pattern (conducting shorts the source, blocking leaves a
/// diode forward biased). The run stops with a diagnostic that names the
/// diodes and the instant; with 3 diodes and with 30 (above the size the
/// exhaustive search covers) alike, never a panic or a cycle.
#[test]
fn issue_20_a_diode_loop_around_a_source_is_a_clean_error() {
    for n in [3usize, 30] {
        let mut b = Circuit::builder().voltage_source("V1", "n0", "gnd", 5.0);
        for k in 0..n {
            let (a, c) = (
                format!("n{k}"),
                if k + 1 == n {
                    "gnd".into()
                } else {
                    format!("n{}", k + 1)
                },
            );
            b = b
                .diode(&format!("D{k}"), &a, &c)
                .resistor(&format!("R{k}"), &a, "gnd", 1e3);
        }
        let c = b.build().expect("valid netlist");
        let err = match simulate(&c, 1e-3, Options::default()) {
            Err(e) => e,
            Ok(_) => panic!("{n} diodes: the run should stop"),
        };
        let text = err.to_string();
        assert_eq!(err.time(), Some(0.0), "{text}");
        assert!(
            text.contains("D0") && text.contains(&format!("D{}", n - 1)),
            "{text}"
        );
        assert!(
            matches!(
                err,
                SolverError::ShortCircuit { .. } | SolverError::NoConsistentPattern { .. }
            ),
            "{text}"
        );
    }
}

/// In a two-level inverter leg, the dead time hands the load current to a
/// body diode chosen by its sign: while the phase current leaves the leg
/// the low-side diode conducts (the leg sits one forward voltage below the
/// negative rail), while it enters the high-side one (N. Mohan,
/// T. Undeland & W. Robbins, *Power Electronics*, the chapter on
/// switch-mode dc-ac inverters, effect of blanking time; common practice).
/// Checked at every switch turn-off of the example's three legs over one
/// output period, where the current is clearly away from zero.
#[test]
fn issue_20_inverter_dead_times_go_to_the_body_diode_of_the_current_sign() {
    let c = example("three_phase_inverter.json");
    let run = simulate(&c, 40e-3, Options::default()).expect("runs");
    let names = run.events.state_names().to_vec();
    let events: Vec<_> = run.events.iter().filter(|e| e.time > 20e-3).collect();
    let mut checked = 0;
    for (i, e) in events.iter().enumerate() {
        if e.kind != EventKind::SwitchOff {
            continue;
        }
        // Qah, Qal, … : the leg's letter, its current's state.
        let leg = &e.element[1..2];
        let k = names
            .iter()
            .position(|n| n == &format!("L{leg}.current"))
            .expect("an inductor current per leg");
        let current = e.before[k];
        if current.abs() < 0.2 {
            continue;
        }
        let want = if current > 0.0 {
            format!("Q{leg}l.body_diode")
        } else {
            format!("Q{leg}h.body_diode")
        };
        // The turn-off of the switch whose own body diode takes over
        // changes nothing else; otherwise the other diode turns on at the
        // same instant.
        let own = e.element == want.trim_end_matches(".body_diode");
        let on_now = events[i + 1..]
            .iter()
            .take_while(|x| x.time == e.time)
            .any(|x| x.kind == EventKind::DiodeOn && x.element == want);
        assert!(
            on_now,
            "{} off at {} s with I{leg} = {current} A: {want} should conduct (own diode: {own})",
            e.element, e.time
        );
        checked += 1;
    }
    assert!(checked > 500, "{checked} turn-offs checked");
}
