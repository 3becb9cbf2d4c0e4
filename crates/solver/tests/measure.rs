//! Measurements on the exact solution checked against closed forms and
//! against an independent search on `Waveform::value`.

use fluxstep_netlist::{Circuit, Stimulus as Source};
use fluxstep_solver::measure::{
    element_energy, element_power, measure, measure_last_periods, MeasureError, Measurement,
};
use fluxstep_solver::{simulate, Options, RunResult, Waveform};

const REL: f64 = 1e-9;

fn close(got: f64, want: f64, rel: f64, what: &str) {
    let err = (got - want).abs();
    assert!(
        err <= rel * want.abs().max(f64::MIN_POSITIVE),
        "{what}: got {got:.17e}, want {want:.17e}, relative error {:.3e}",
        err / want.abs()
    );
}

fn run(c: &Circuit, stop: f64) -> RunResult {
    simulate(c, stop, Options::default()).expect("run")
}

/// Buck with an ideal voltage source as its load: the output cannot move,
/// so the inductor current is an exact triangle, rising (Vin − Vout)/L for
/// D·T and falling Vout/L for (1 − D)·T. Vout = D·Vin gives volt-second
/// balance, and starting the inductor at the valley current puts the run
/// in steady state from the first period.
const VIN: f64 = 12.0;
const DUTY: f64 = 0.25;
const VOUT: f64 = DUTY * VIN;
const FSW: f64 = 200e3;
const L: f64 = 47e-6;
const I_VALLEY: f64 = 2.0;

fn triangle_circuit() -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", VIN)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", L, I_VALLEY)
        .voltage_source("Vout", "out", "gnd", VOUT)
        .pwm("drive", FSW, DUTY)
        .build()
        .expect("triangle circuit")
}

#[test]
fn triangle_current_average_rms_and_ripple() {
    let t = 1.0 / FSW;
    let r = run(&triangle_circuit(), 40.0 * t);
    let il = r.waveform.output("L1.current").unwrap();
    // Ripple of a buck inductor: ΔI = (Vin − Vout)·D·T / L (Erickson &
    // Maksimović, Fundamentals of Power Electronics, 2nd ed. 2001, eq. 2.19
    // with 2ΔiL as peak-to-peak).
    let ripple = (VIN - VOUT) * DUTY * t / L;
    // A triangle from valley to peak and back averages to its midpoint
    // (common practice).
    let avg = I_VALLEY + ripple / 2.0;
    let m = measure(&r.waveform, il, 30.0 * t, 40.0 * t).unwrap();
    close(m.average, avg, REL, "average");
    // RMS² = I_avg² + ΔI²/12 for a triangle over whole periods (common practice).
    close(
        m.rms * m.rms,
        avg * avg + ripple * ripple / 12.0,
        REL,
        "rms²",
    );
    close(m.peak_to_peak, ripple, REL, "peak-to-peak");
    close(m.max, I_VALLEY + ripple, REL, "peak");
    close(m.min, I_VALLEY, REL, "valley");
    // The peak is at a turn-off, D·T into a period, and the valley at a
    // turn-on (common practice: the current rises while the switch is on).
    // Every period reaches them equally up to rounding, so only the phase
    // is checked.
    let phase = |time: f64| {
        let p = time / t;
        p - p.round()
    };
    assert!(
        (phase(m.time_of_max) - DUTY).abs() < 1e-9,
        "peak at {}",
        m.time_of_max
    );
    assert!(
        phase(m.time_of_min).abs() < 1e-9,
        "valley at {}",
        m.time_of_min
    );

    // The default window: the last N periods end at the stop time.
    let last = measure_last_periods(&r.waveform, il, t, 10).unwrap();
    close(last.average, avg, REL, "average, last periods");
    close(
        last.rms * last.rms,
        avg * avg + ripple * ripple / 12.0,
        REL,
        "rms², last periods",
    );
    close(last.peak_to_peak, ripple, REL, "peak-to-peak, last periods");
}

#[test]
fn whole_run_of_exact_periods_is_a_valid_last_periods_window() {
    let t = 1.0 / FSW;
    let r = run(&triangle_circuit(), 7.0 * t);
    let il = r.waveform.output("L1.current").unwrap();
    let m = measure_last_periods(&r.waveform, il, t, 7).unwrap();
    // Same triangle as above (common practice).
    let ripple = (VIN - VOUT) * DUTY * t / L;
    close(
        m.average,
        I_VALLEY + ripple / 2.0,
        REL,
        "average over the whole run",
    );
    assert!(matches!(
        measure_last_periods(&r.waveform, il, t, 8),
        Err(MeasureError::OutsideRecord { .. })
    ));
}

/// Independent extreme search: every event instant (both limits), a dense
/// grid, then golden-section search on `value` around the best sample.
/// Slow but shares nothing with the measurement code except `value`.
fn brute_extreme(w: &Waveform, id: fluxstep_solver::OutputId, t0: f64, t1: f64, sign: f64) -> f64 {
    let f = |t: f64| sign * w.value(id, t).unwrap();
    let n = 20_000;
    let mut grid: Vec<f64> = (0..=n)
        .map(|k| t0 + (t1 - t0) * k as f64 / n as f64)
        .collect();
    grid.extend(w.event_times(t0, t1));
    grid.sort_by(f64::total_cmp);
    grid.dedup();
    let mut best = f64::NEG_INFINITY;
    let mut best_k = 0;
    for (k, &t) in grid.iter().enumerate() {
        let mut y = if t < t1 { f(t) } else { f64::NEG_INFINITY };
        if t > t0 {
            y = y.max(sign * w.value_before(id, t).unwrap());
        }
        if y > best {
            best = y;
            best_k = k;
        }
    }
    // Golden section on each neighbouring interval (the maximum of a
    // continuous output lies in one of them).
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for (lo, hi) in [
        (grid[best_k.saturating_sub(1)], grid[best_k]),
        (grid[best_k], grid[(best_k + 1).min(grid.len() - 1)]),
    ] {
        if hi <= lo {
            continue;
        }
        let (mut a, mut b) = (lo, hi);
        let mut c = b - g * (b - a);
        let mut d = a + g * (b - a);
        let (mut fc, mut fd) = (f(c), f(d));
        for _ in 0..200 {
            if b - a <= 4.0 * f64::EPSILON * b.abs() {
                break;
            }
            if fc > fd {
                b = d;
                d = c;
                fd = fc;
                c = b - g * (b - a);
                fc = f(c);
            } else {
                a = c;
                c = d;
                fc = fd;
                d = a + g * (b - a);
                fd = f(d);
            }
            best = best.max(fc).max(fd);
        }
    }
    sign * best
}

#[test]
fn buck_ripple_matches_independent_extremes() {
    // The crate's demo buck (12 V, 100 kHz, 50 %, 100 µH, 100 µF, 5 Ω),
    // run 8 ms so the LC start-up ring (τ ≈ 1 ms) has mostly died out.
    let buck = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 100e-6)
        .capacitor("C1", "out", "gnd", 100e-6)
        .resistor("Rload", "out", "gnd", 5.0)
        .pwm("drive", 100e3, 0.5)
        .build()
        .unwrap();
    let t = 1e-5;
    let r = run(&buck, 8e-3);
    let (t0, t1) = (8e-3 - 3.0 * t, 8e-3);
    for name in ["L1.current", "out"] {
        let id = r.waveform.output(name).unwrap();
        let m = measure(&r.waveform, id, t0, t1).unwrap();
        // Exact extremes found independently (dense sampling + golden
        // section on the exact value; common practice).
        let max = brute_extreme(&r.waveform, id, t0, t1, 1.0);
        let min = brute_extreme(&r.waveform, id, t0, t1, -1.0);
        close(m.max, max, REL, &format!("{name} max"));
        close(m.min, min, REL, &format!("{name} min"));
        close(
            m.peak_to_peak,
            max - min,
            REL,
            &format!("{name} peak-to-peak"),
        );
        close(
            r.waveform.value(id, m.time_of_max).unwrap(),
            m.max,
            REL,
            "value at time of max",
        );
        close(
            r.waveform.value(id, m.time_of_min).unwrap(),
            m.min,
            REL,
            "value at time of min",
        );
        println!("{name}: {m:?}");
    }
    // Sanity against the textbook ripple ΔI = (Vin − Vout)·D·T/L with
    // Vout ≈ D·Vin (Erickson & Maksimović 2001, eq. 2.19): 0.3 A, within
    // the few per cent that output ripple and start-up residue move it.
    let il = r.waveform.output("L1.current").unwrap();
    let m = measure(&r.waveform, il, t0, t1).unwrap();
    assert!(
        (m.peak_to_peak - 0.3).abs() < 0.02,
        "ripple {}",
        m.peak_to_peak
    );
}

#[test]
fn resistor_energy_in_rc_discharge() {
    let (c, r_ohm, v0) = (2.2e-6, 330.0, 48.0);
    let tau = r_ohm * c;
    let circuit = Circuit::builder()
        .capacitor_with_voltage("C1", "top", "gnd", c, v0)
        .resistor("R1", "top", "gnd", r_ohm)
        .build()
        .unwrap();
    let r = run(&circuit, 5.0 * tau);
    for &(t0, t1) in &[(0.0, 0.7 * tau), (0.3 * tau, 2.9 * tau), (0.0, 5.0 * tau)] {
        // ∫ v²/R dt with v = V0·e^{−t/RC}: ½·C·V0²·(e^{−2t0/RC} − e^{−2t1/RC})
        // (common practice).
        let want = 0.5 * c * v0 * v0 * ((-2.0 * t0 / tau).exp() - (-2.0 * t1 / tau).exp());
        let e = element_energy(&r.waveform, "R1", t0, t1).unwrap();
        close(e, want, REL, "resistor energy");
        let p = element_power(&r.waveform, "R1", t0, t1).unwrap();
        close(p, want / (t1 - t0), REL, "resistor average power");
        // Energy balance: what the resistor absorbs the capacitor delivers
        // (Tellegen's theorem; common practice).
        let ec = element_energy(&r.waveform, "C1", t0, t1).unwrap();
        close(-ec, want, REL, "capacitor energy");
    }
    // The closed form from t = 0: ½·C·V0²·(1 − e^{−2t/RC}) (common practice).
    let t1 = 1.3 * tau;
    let e = element_energy(&r.waveform, "R1", 0.0, t1).unwrap();
    close(
        e,
        0.5 * c * v0 * v0 * (1.0 - (-2.0 * t1 / tau).exp()),
        REL,
        "from zero",
    );
}

#[test]
fn ideal_converter_power_balance() {
    let t = 1.0 / FSW;
    let r = run(&triangle_circuit(), 10.0 * t);
    let (t0, t1) = (5.0 * t, 10.0 * t);
    // An ideal diode has zero volts while conducting and zero current while
    // blocking: it absorbs nothing (common practice).
    let d = element_power(&r.waveform, "D1", t0, t1).unwrap();
    assert!(d.abs() < 1e-9, "ideal diode power {d}");
    // The load source takes the inductor current in at its plus node, so
    // it absorbs Vout·I_avg (common practice), and the input source
    // delivers the same: a lossless converter (common practice).
    let ripple = (VIN - VOUT) * DUTY * t / L;
    let p_out = element_power(&r.waveform, "Vout", t0, t1).unwrap();
    close(
        p_out,
        VOUT * (I_VALLEY + ripple / 2.0),
        REL,
        "load source power",
    );
    let p_in = element_power(&r.waveform, "Vin", t0, t1).unwrap();
    close(-p_in, p_out, REL, "input source power");
}

#[test]
fn transistor_power_includes_its_body_diode() {
    // The triangle circuit with the freewheeling diode replaced by a
    // transistor that never turns on: its body diode (0.7 V drop)
    // freewheels instead.
    let vf = 0.7;
    let body = fluxstep_netlist::DiodeModel {
        forward_voltage: Some(vf),
        on_resistance: None,
        recovered_charge: None,
    };
    let circuit = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", VIN)
        .switch("S1", "in", "sw", "drive")
        .transistor("S2", "sw", "gnd", "never", 0.0, body)
        .inductor_with_current("L1", "sw", "out", L, I_VALLEY)
        .voltage_source("Vout", "out", "gnd", VOUT)
        .pwm("drive", FSW, DUTY)
        .pwm("never", FSW, 0.0)
        .build()
        .unwrap();
    let t = 1.0 / FSW;
    let r = run(&circuit, 10.0 * t);
    let (t0, t1) = (4.0 * t, 9.0 * t);
    // A diode with a fixed forward drop absorbs Vf times the charge it
    // conducts (common practice).
    let id = r.waveform.output("S2.body_diode.current").unwrap();
    let charge = r.waveform.integrate(&[id], t0, t1, |x| x[0]);
    assert!(charge > 0.0);
    let e = element_energy(&r.waveform, "S2", t0, t1).unwrap();
    close(e, vf * charge, REL, "transistor energy");
    // Energy balance over every element (Tellegen's theorem): the
    // inductor's share is its change of stored energy ½·L·(i1² − i0²)
    // (common practice).
    let il = r.waveform.output("L1.current").unwrap();
    let (i0, i1) = (
        r.waveform.value(il, t0).unwrap(),
        r.waveform.value(il, t1).unwrap(),
    );
    let el = element_energy(&r.waveform, "L1", t0, t1).unwrap();
    close(el, 0.5 * L * (i1 * i1 - i0 * i0), REL, "inductor energy");
    let total: f64 = ["Vin", "S1", "S2", "L1", "Vout"]
        .iter()
        .map(|n| element_energy(&r.waveform, n, t0, t1).unwrap())
        .sum();
    let scale = element_energy(&r.waveform, "Vout", t0, t1).unwrap().abs();
    assert!(
        total.abs() <= REL * scale,
        "energy balance off by {total:e} J of {scale:e} J"
    );
}

#[test]
fn underdamped_rlc_overshoot_is_interior() {
    // Series R–L–C switched onto a step: v_C = V·[1 − e^{−αt}(cos ω_d t +
    // (α/ω_d) sin ω_d t)], α = R/2L, ω_d = √(1/LC − α²); extremes at
    // t = kπ/ω_d with v_C = V·(1 − (−1)^k e^{−αkπ/ω_d}) (any circuits
    // textbook; common practice).
    let (v, rr, l, c): (f64, f64, f64, f64) = (10.0, 0.5, 22e-6, 4.7e-6);
    let alpha = rr / (2.0 * l);
    let wd = (1.0 / (l * c) - alpha * alpha).sqrt();
    let circuit = Circuit::builder()
        .voltage_waveform("V1", "a", "gnd", Source::constant(v))
        .resistor("R1", "a", "b", rr)
        .inductor("L1", "b", "c", l)
        .capacitor("C1", "c", "gnd", c)
        .build()
        .unwrap();
    let half = std::f64::consts::PI / wd;
    let r = run(&circuit, 3.0 * half);
    let vc = r.waveform.output("c").unwrap();
    // Irregular window ends, so that no sample of the search grid falls on
    // an extreme by symmetry and the refinement is really exercised.
    let m = measure(&r.waveform, vc, 0.37 * half, 2.61 * half).unwrap();
    let overshoot = v * (1.0 + (-alpha * half).exp());
    let undershoot = v * (1.0 - (-2.0 * alpha * half).exp());
    close(m.max, overshoot, REL, "overshoot");
    close(m.time_of_max, half, 1e-7, "time of overshoot");
    close(m.min, undershoot, REL, "undershoot");
    close(m.time_of_min, 2.0 * half, 1e-7, "time of undershoot");
    // The extremes are not at the window ends.
    assert!(m.time_of_max > 0.5 * half && m.time_of_max < 2.5 * half);
    println!("{m:?}");
}

#[test]
fn errors_name_the_output_and_times() {
    let t = 1.0 / FSW;
    let r = run(&triangle_circuit(), 10.0 * t);
    let il = r.waveform.output("L1.current").unwrap();
    let e = measure(&r.waveform, il, 5.0 * t, 20.0 * t).unwrap_err();
    assert!(matches!(e, MeasureError::OutsideRecord { .. }));
    let text = e.to_string();
    assert!(
        text.contains("L1.current") && text.contains("1e-4"),
        "{text}"
    );
    let e = measure(&r.waveform, il, 5.0 * t, 5.0 * t).unwrap_err();
    assert!(matches!(e, MeasureError::InvalidWindow { .. }), "{e}");
    let e = measure(&r.waveform, il, f64::NAN, 5.0 * t).unwrap_err();
    assert!(matches!(e, MeasureError::InvalidWindow { .. }), "{e}");
    let e = measure_last_periods(&r.waveform, il, 0.0, 3).unwrap_err();
    assert!(matches!(e, MeasureError::InvalidPeriods { .. }), "{e}");
    let e = element_power(&r.waveform, "Lx", 0.0, t).unwrap_err();
    assert!(e.to_string().contains("Lx"), "{e}");
    // "L1" must not match an element whose name merely starts with "L1".
    assert!(element_power(&r.waveform, "L", 0.0, t).is_err());
}

#[test]
fn floating_node_is_undetermined() {
    // A half-bridge with no load: during dead time both switches are open
    // and the midpoint floats.
    let f = 100e3;
    let circuit = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 10.0)
        .switch("Shigh", "in", "mid", "drive.high")
        .switch("Slow", "mid", "gnd", "drive.low")
        .complementary_pwm("drive", f, 0.5, 50e-9, 50e-9)
        .build()
        .unwrap();
    let r = run(&circuit, 5.0 / f);
    let mid = r.waveform.output("mid").unwrap();
    let e = measure_last_periods(&r.waveform, mid, 1.0 / f, 2).unwrap_err();
    match &e {
        MeasureError::Undetermined { subject, time } => {
            assert_eq!(subject, "mid");
            assert!(*time >= 3.0 / f && *time <= 5.0 / f, "{e}");
        }
        other => panic!("expected undetermined, got {other}"),
    }
    // The open switch carries no current, so its power is still defined.
    let p = element_power(&r.waveform, "Shigh", 3.0 / f, 5.0 / f).unwrap();
    assert!(p.abs() < 1e-12, "{p}");
}

#[test]
fn measurement_round_trips_through_json() {
    let t = 1.0 / FSW;
    let r = run(&triangle_circuit(), 10.0 * t);
    let il = r.waveform.output("L1.current").unwrap();
    let m = measure_last_periods(&r.waveform, il, t, 3).unwrap();
    let text = serde_json::to_string(&m).unwrap();
    assert!(text.contains("\"peak_to_peak\""), "{text}");
    let back: Measurement = serde_json::from_str(&text).unwrap();
    assert_eq!(back, m);
}
