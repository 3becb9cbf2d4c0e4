//! Periodic steady state by shooting, checked against independent
//! computations: long settled transients, textbook closed forms and
//! finite differences of the period map.

use std::time::Duration;

use nalgebra::{DMatrix, DVector};

use fluxstep_analysis::steady::{find, Reading, SteadyOptions, SteadyState};
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::{Circuit, Stimulus};
use fluxstep_solver::measure::measure;
use fluxstep_solver::{EventKind, Options, Record, Simulator};

use crate::common::{example, peak_current_stiff};

fn steady(c: &Circuit) -> SteadyState {
    find(c, &SteadyOptions::default()).expect("steady state")
}

/// The state at a period boundary after `periods` periods of plain
/// transient from the circuit's own initial state, and the last period's
/// peak, valley and ripple of `current` and ripple of `out`.
fn settled(c: &Circuit, ss: &SteadyState, periods: u64, current: &str) -> (Vec<f64>, [f64; 4]) {
    let first = (ss.start_time / ss.period).round() as u64;
    let t_end = (first + periods) as f64 * ss.period;
    let t_last = (first + periods - 1) as f64 * ss.period;
    let opts = Options {
        record: Record::Window {
            from: t_last,
            to: t_end,
        },
        ..Options::default()
    };
    let mut sim = Simulator::new(c, opts).expect("compiles");
    sim.advance_to(t_end).expect("runs");
    let x = sim.state().to_vec();
    let run = sim.finish();
    let w = &run.waveform;
    let i = measure(w, w.output(current).unwrap(), t_last, t_end).unwrap();
    let v = measure(w, w.output("out").unwrap(), t_last, t_end).unwrap();
    (x, [i.max, i.min, i.peak_to_peak, v.peak_to_peak])
}

fn assert_close(what: &str, a: f64, b: f64, scale: f64, rel: f64) {
    assert!(
        (a - b).abs() <= rel * scale,
        "{what}: {a} against {b} (difference {:e}, allowed {:e})",
        (a - b).abs(),
        rel * scale
    );
}

/// The shooting fixed point equals the state a long transient settles to,
/// to 1e-10 of each quantity's scale. Source: common practice (a stable
/// periodic orbit is the limit of the transient; after 8,000 periods the
/// slowest multiplier of these circuits, |λ| ≤ 0.996, leaves a distance
/// below 0.996^8000 ≈ 1e-14 of the start).
#[test]
fn fixed_point_agrees_with_a_long_settled_transient() {
    for (file, current) in [
        ("buck.json", "L1.current"),
        ("buck_dcm.json", "L1.current"),
        ("boost.json", "L1.current"),
        ("voltage_mode_buck.json", "L1.current"),
    ] {
        let c = example(file);
        let ss = steady(&c);
        assert!(ss.residual <= 1e-12, "{file}: residual {:e}", ss.residual);
        let slowest = ss.multipliers[0].magnitude;
        assert!(
            slowest.powi(8000) < 1e-12,
            "{file}: settles too slowly for the check"
        );
        let (x, [peak, valley, ripple, out_ripple]) = settled(&c, &ss, 8000, current);
        for (k, name) in ss.state_names.iter().enumerate() {
            let scale = x[k].abs().max(ss.state[k].abs()).max(1e-3);
            assert_close(&format!("{file} {name}"), ss.state[k], x[k], scale, 1e-10);
        }
        let m = ss.measurement(current).unwrap();
        let o = ss.measurement("out").unwrap();
        assert_close(&format!("{file} peak"), m.max, peak, peak.abs(), 1e-10);
        assert_close(&format!("{file} valley"), m.min, valley, peak.abs(), 1e-10);
        assert_close(
            &format!("{file} ripple"),
            m.peak_to_peak,
            ripple,
            peak.abs(),
            1e-10,
        );
        assert_close(
            &format!("{file} out ripple"),
            o.peak_to_peak,
            out_ripple,
            o.max.abs(),
            1e-10,
        );
    }
}

/// Newton's iteration counts. For a fixed event sequence the period map is
/// affine, so one step is exact (Aprille & Trick, Proc. IEEE 1972; common
/// practice): the continuous-conduction buck from rest needs at most 3;
/// discontinuous conduction (the sequence changes once the current reaches
/// zero) at most 8; the closed voltage loop at most 12.
#[test]
fn newton_converges_in_few_steps() {
    for (file, most) in [
        ("buck.json", 3),
        ("buck_dcm.json", 8),
        ("voltage_mode_buck.json", 12),
    ] {
        let ss = steady(&example(file));
        assert!(
            ss.newton_steps() <= most,
            "{file}: {} steps: {:?}",
            ss.newton_steps(),
            ss.iterations
        );
        assert!(ss.residual <= 1e-12, "{file}: residual {:e}", ss.residual);
        assert!(ss.iterations.last().unwrap().residual <= 1e-12);
        // The starting point is the circuit's own initial state.
        assert_eq!(ss.iterations[0].damping, 0.0);
    }
}

/// Discontinuous-conduction buck: M = 2 / (1 + √(1 + 4K/D²)), K = 2L/(R·T)
/// (R. W. Erickson & D. Maksimović, *Fundamentals of Power Electronics*,
/// 2nd ed. 2001, ch. 5, eq. 5.39), which assumes a small output ripple: the
/// exact average may differ by up to the relative peak-to-peak ripple.
#[test]
fn discontinuous_conduction_ratio_and_turn_off_instant() {
    let c = example("buck_dcm.json");
    let ss = steady(&c);
    let (vin, l, r, d, t): (f64, f64, f64, f64, f64) = (24.0, 22e-6, 60.0, 0.5, 5e-6);
    let k = 2.0 * l / (r * t);
    let m_book = 2.0 / (1.0 + (1.0 + 4.0 * k / (d * d)).sqrt());
    let out = ss.measurement("out").unwrap();
    let m_sim = out.average / vin;
    assert!(
        (m_sim - m_book).abs() <= out.peak_to_peak / out.average,
        "M = {m_sim} against the small-ripple {m_book}"
    );
    // The diode turns off once per period, where the inductor current
    // reaches zero. Independently: from the state at the switch's turn-off,
    // the freewheeling circuit (L across the output, C ∥ R) is
    // x' = A x with A = [[0, −1/L], [1/C, −1/(R·C)]] (Kirchhoff's laws;
    // common practice); its current root is found by bisection on e^{A·t}.
    let events = &ss.run.events;
    let off: Vec<_> = events
        .iter()
        .filter(|e| e.kind == EventKind::SwitchOff)
        .collect();
    let diode_off: Vec<_> = events
        .iter()
        .filter(|e| e.kind == EventKind::DiodeOff && e.element == "D1")
        .collect();
    assert_eq!(off.len(), 1);
    assert_eq!(diode_off.len(), 1);
    let cap = 47e-6;
    let a = DMatrix::from_row_slice(2, 2, &[0.0, -1.0 / l, 1.0 / cap, -1.0 / (r * cap)]);
    let x_off = DVector::from_column_slice(off[0].after);
    let current = |tau: f64| ((&a * tau).exp() * &x_off)[0];
    let (mut lo, mut hi) = (0.0, t);
    assert!(current(lo) > 0.0 && current(hi) < 0.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if current(mid) > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let root = off[0].time + 0.5 * (lo + hi);
    assert_close("diode turn-off instant", diode_off[0].time, root, t, 1e-12);
}

/// Peak-current control into a stiff output: the current loop's multiplier
/// is −(m2 − mc)/(m1 + mc) with m1 = (Vin − Vo)/L, m2 = Vo/L and mc the
/// compensation ramp; −D/(1 − D) without a ramp (R. B. Ridley, "A new,
/// continuous-time model for current-mode control", IEEE TPEL 1991; common
/// practice). The inductor currents are exact straight lines, so the
/// multiplier is exact up to rounding.
#[test]
fn peak_current_multiplier_matches_the_slope_ratio() {
    let l = 22e-6;
    for (vo, mc) in [(5.0, 0.0), (7.2, 0.0), (7.2, 0.2e6), (4.0, 0.1e6)] {
        let ss = steady(&peak_current_stiff(vo, 3.0, mc));
        assert_eq!(ss.multipliers.len(), 1);
        let (m1, m2) = ((12.0 - vo) / l, vo / l);
        let expect = -(m2 - mc) / (m1 + mc);
        let got = ss.multipliers[0].re;
        assert_close(&format!("Vo {vo}, ramp {mc}"), got, expect, 1.0, 1e-6);
        assert_eq!(ss.multipliers[0].im, 0.0);
    }
}

/// The multiplier −D/(1−D) crosses −1 at D = 0.5: just below the orbit is
/// stable, just above it is unstable by period doubling (Ridley 1991;
/// common practice).
#[test]
fn period_doubling_sets_in_above_half_duty() {
    let below = steady(&peak_current_stiff(0.49 * 12.0, 3.0, 0.0));
    assert!(below.is_stable());
    let above = steady(&peak_current_stiff(0.51 * 12.0, 3.0, 0.0));
    assert!(!above.is_stable());
    assert_eq!(above.multipliers[0].reading, Reading::PeriodDoubling);
}

/// At D = 0.6 without a ramp the orbit is found although it is unstable,
/// reported as such, and a transient started on it (plus a nudge of 1 µA)
/// moves away into period-two behaviour, as a multiplier of −1.5 predicts
/// (Ridley 1991; common practice): with a 1.5 A peak reference the growing
/// alternation ends where the valley reaches zero, and period starts then
/// alternate between 0 A and a second value.
#[test]
fn unstable_orbit_is_found_and_a_transient_leaves_it() {
    let c = peak_current_stiff(7.2, 1.5, 0.0);
    let ss = steady(&c);
    assert_close("multiplier", ss.multipliers[0].re, -1.5, 1.0, 1e-6);
    assert_eq!(ss.multipliers[0].reading, Reading::PeriodDoubling);
    assert!(ss.residual <= 1e-12);
    let mut sim = Simulator::new(&c, Options::default()).unwrap();
    sim.set_state(&[ss.state[0] + 1e-6]).unwrap();
    let mut starts = vec![];
    for k in 1..=400u32 {
        sim.advance_to(k as f64 * ss.period).unwrap();
        starts.push(sim.state()[0]);
    }
    let n = starts.len();
    let (a, b, c2) = (starts[n - 3], starts[n - 2], starts[n - 1]);
    // Two alternating values, far apart, repeating every second period.
    assert!((a - c2).abs() < 1e-6 * a.abs(), "{a} {b} {c2}");
    assert!((a - b).abs() > 0.01, "no alternation: {a} {b}");
    assert!((ss.state[0] - b).abs() > 0.005 && (ss.state[0] - a).abs() > 0.005);
    // And the period-two orbit itself is a fixed point of the map over two
    // periods, which shooting with `period_multiple: 2` finds.
    let two = find(
        &c,
        &SteadyOptions {
            period_multiple: 2,
            settle_periods: 200,
            ..SteadyOptions::default()
        },
    )
    .expect("period-two orbit");
    assert_close("period", two.period, 2e-5, 2e-5, 1e-15);
    let lo = a.min(b);
    assert!(
        (two.state[0] - a).abs() < 1e-6 || (two.state[0] - b).abs() < 1e-6,
        "period-two start {} against the transient's {a} / {b} (low {lo})",
        two.state[0]
    );
}

/// The period map P(x): one period of plain transient from `x` at the
/// boundary `t0`.
fn period_map(c: &Circuit, t0: f64, t: f64, x: &[f64]) -> Vec<f64> {
    let mut sim = Simulator::new(c, Options::default()).unwrap();
    sim.advance_to(t0).unwrap();
    sim.set_state(x).unwrap();
    sim.advance_to(t0 + t).unwrap();
    sim.state().to_vec()
}

/// The exact Jacobian (transition matrices and the saltation matrix of the
/// located diode turn-off) against central finite differences of the
/// period map, on the discontinuous-conduction buck. With a step h of 1e-5
/// of each state's scale the difference quotient's error is about
/// h²·|P‴|/6 (below 1e-9 here, P being smooth within one event sequence)
/// plus rounding ε·|P|/h ≈ 1e-11: agreement to 1e-6 leaves a wide margin
/// (common practice for difference checks of derivatives).
#[test]
fn jacobian_with_saltation_matches_finite_differences() {
    let c = example("buck_dcm.json");
    let ss = steady(&c);
    // Away from the fixed point, where the current at period start is zero
    // anyway: perturb around the orbit with a slightly different output.
    let mut x = ss.state.clone();
    x[1] *= 0.98;
    let n = x.len();
    let scales = [1.0, 17.0];
    // The exact Jacobian at `x`: the monodromy of a run from it.
    let jac = {
        let mut sim = Simulator::new(&c, Options::default()).unwrap();
        sim.set_state(&x).unwrap();
        sim.advance_to(ss.period).unwrap();
        let run = sim.finish();
        let n_seg = run.waveform.segments().len();
        fluxstep_analysis::steady::period_jacobian(&run.waveform, 0..n_seg, None)
    };
    for col in 0..n {
        let h = 1e-5 * scales[col];
        let mut xp = x.clone();
        let mut xm = x.clone();
        xp[col] += h;
        xm[col] -= h;
        // The current cannot start negative with the switch on at t = 0
        // through an ideal diode path: the switch carries it, so both signs
        // are valid states.
        let pp = period_map(&c, 0.0, ss.period, &xp);
        let pm = period_map(&c, 0.0, ss.period, &xm);
        for row in 0..n {
            let fd = (pp[row] - pm[row]) / (2.0 * h);
            let exact = jac[(row, col)];
            let scale = exact.abs().max(scales[row] / scales[col]);
            assert_close(&format!("J[{row},{col}]"), exact, fd, scale, 1e-6);
        }
    }
    // The saltation matters: without it the current row would be far off
    // (the current's own multiplier is 0 in discontinuous conduction).
    assert!(jac[(0, 0)].abs() < 1e-9, "J[0,0] = {}", jac[(0, 0)]);
}

#[test]
fn no_periodic_part_is_a_clear_error() {
    let err = find(
        &example("interrupted_inductor.json"),
        &SteadyOptions::default(),
    )
    .unwrap_err();
    assert!(matches!(err, AnalysisError::NoPeriod), "{err}");
    assert!(err.to_string().contains("no periodic"));
}

#[test]
fn incommensurate_periods_name_the_gate_and_the_source() {
    let c = Circuit::builder()
        .voltage_waveform(
            "Vin",
            "in",
            "gnd",
            Stimulus::Sine {
                offset: 12.0,
                amplitude: 1.0,
                frequency: 100e3 * std::f64::consts::PI,
                phase: 0.0,
            },
        )
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("Rload", "out", "gnd", 6.0)
        .pwm("drive", 100e3, 0.5)
        .build()
        .unwrap();
    let err = find(&c, &SteadyOptions::default()).unwrap_err();
    let text = err.to_string();
    assert!(
        matches!(err, AnalysisError::Incommensurate { .. }),
        "{text}"
    );
    assert!(text.contains("drive") && text.contains("Vin"), "{text}");
}

#[test]
fn iteration_and_time_limits_return_the_history() {
    let c = example("buck_dcm.json");
    let err = find(
        &c,
        &SteadyOptions {
            max_iterations: 2,
            ..SteadyOptions::default()
        },
    )
    .unwrap_err();
    match &err {
        AnalysisError::NotConverged { history, .. } => {
            assert_eq!(history.len(), 3);
            assert!(history[2].residual > 1e-12 && history[2].residual < history[0].residual);
        }
        other => panic!("expected NotConverged, got {other}"),
    }
    assert!(err.to_string().contains("iteration limit 2"), "{err}");
    let err = find(
        &c,
        &SteadyOptions {
            time_limit: Some(Duration::ZERO),
            ..SteadyOptions::default()
        },
    )
    .unwrap_err();
    assert!(err.to_string().contains("time limit"), "{err}");
}

#[test]
fn bad_options_name_the_field() {
    let c = example("buck.json");
    for (opts, field) in [
        (
            SteadyOptions {
                tolerance: 0.0,
                ..SteadyOptions::default()
            },
            "tolerance",
        ),
        (
            SteadyOptions {
                period_multiple: 0,
                ..SteadyOptions::default()
            },
            "period_multiple",
        ),
    ] {
        let err = find(&c, &opts).unwrap_err();
        assert!(err.to_string().contains(field), "{err}");
    }
}

/// Two capacitors in series across a switched source keep the charge of
/// their middle node: the period map leaves it where it starts (a
/// multiplier of 1), so there is no single steady state (common practice).
#[test]
fn a_state_without_a_steady_value_is_named() {
    let c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .resistor("R1", "sw", "gnd", 10.0)
        .capacitor("C1", "sw", "mid", 1e-6)
        .capacitor("C2", "mid", "gnd", 1e-6)
        .pwm("drive", 100e3, 0.5)
        .build()
        .unwrap();
    match find(&c, &SteadyOptions::default()) {
        Err(AnalysisError::Undetermined { state }) => {
            assert!(state.starts_with("C"), "{state}");
        }
        other => panic!("expected Undetermined, got {other:?}"),
    }
}

/// Twelve equal buck phases of ideal parts share one output: a current
/// circulating between two phases meets no resistance, so the period map
/// keeps it where it starts (eleven multipliers of exactly 1; common
/// practice: lossless parallel phases do not share current by
/// themselves). The eigenvalue iteration stalls on that multiplicity; the
/// analysis still names the state instead of looping.
#[test]
fn lossless_parallel_phases_have_no_single_steady_state() {
    let c = example("interleaved_buck_12.json");
    match find(&c, &SteadyOptions::default()) {
        Err(AnalysisError::Undetermined { state }) => {
            assert!(state.starts_with('L'), "{state}");
        }
        other => panic!("expected Undetermined, got {other:?}"),
    }
}
