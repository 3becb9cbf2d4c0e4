//! Small-signal responses from the linearised switched model, checked
//! against textbook models and brute-force transient injection.

use std::f64::consts::{FRAC_PI_2, PI};

use nalgebra::Complex;

use fluxstep_analysis::response::{
    frequency_response, log_frequencies, loop_gain, BreakPoint, Input,
};
use fluxstep_analysis::steady::{find, SteadyOptions, SteadyState};
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::{
    Circuit, CurrentSource, Element, Gate, Resistor, Stimulus, Transition, VoltageSource,
};
use fluxstep_solver::{Options, Record, Simulator};

use crate::common::{example, peak_current_stiff};

fn steady(c: &Circuit) -> SteadyState {
    find(c, &SteadyOptions::default()).expect("steady state")
}

fn opts() -> SteadyOptions {
    SteadyOptions::default()
}

/// Continuous-conduction buck, duty to output, against the averaged model
/// Gvd(s) = Vin / (1 + s·L/R + s²·L·C) (R. W. Erickson & D. Maksimović,
/// *Fundamentals of Power Electronics*, 2nd ed. 2001, ch. 7–8, Table 8.2):
/// within 1 % in magnitude and 1° in phase up to fs/20, where the averaged
/// model is valid.
#[test]
fn ccm_buck_control_to_output_matches_the_averaged_model() {
    let c = example("buck.json");
    let (vin, l, cap, r, fs) = (24.0, 22e-6, 47e-6, 6.0, 200e3);
    let freqs = log_frequencies(100.0, fs / 20.0, 25).unwrap();
    let resp = frequency_response(&c, &Input::parse("drive.duty"), "out", &freqs, &opts()).unwrap();
    for p in &resp.points {
        let s = Complex::new(0.0, 2.0 * std::f64::consts::PI * p.frequency);
        let g = Complex::new(vin, 0.0) / (s * s * l * cap + s * (l / r) + 1.0);
        let mag_err = (p.value().norm() / g.norm() - 1.0).abs();
        let ph_err = (p.value().arg() - g.arg()).to_degrees().abs();
        assert!(
            mag_err <= 0.01,
            "{} Hz: magnitude off by {:.3} %",
            p.frequency,
            mag_err * 100.0
        );
        assert!(
            ph_err <= 1.0,
            "{} Hz: phase off by {ph_err:.3}°",
            p.frequency
        );
    }
}

/// Reference outputs sin(2πft) (node `ref_s`) and cos(2πft) (node `ref_c`)
/// from two sine sources in a loop of their own, so the Fourier integrals
/// of a brute-force run are exact integrals of products of outputs.
fn add_reference_oscillators(c: &mut Circuit, f: f64) {
    for (name, node, phase) in [("Vref_s", "ref_s", 0.0), ("Vref_c", "ref_c", FRAC_PI_2)] {
        c.elements.push(Element::VoltageSource(VoltageSource {
            name: name.into(),
            nodes: [node.into(), "gnd".into()],
            waveform: Stimulus::Sine {
                offset: 0.0,
                amplitude: 1.0,
                frequency: f,
                phase,
            },
        }));
        c.elements.push(Element::Resistor(Resistor {
            name: format!("R{node}"),
            nodes: [node.into(), "gnd".into()],
            resistance: 1.0,
        }));
    }
}

/// Runs the perturbed circuit `c` from the unperturbed orbit `ss` for
/// `settle` periods, then returns (2/τ)·∫ y·e^{−j2πft} dt over the next
/// `n` periods (whole modulation periods) for each output.
fn brute_force(
    c: &Circuit,
    ss: &SteadyState,
    settle: u64,
    n: u64,
    outputs: &[&str],
) -> Vec<Complex<f64>> {
    let t = ss.period;
    let first = (ss.start_time / t).round() as u64;
    let (a, b) = ((first + settle) as f64 * t, (first + settle + n) as f64 * t);
    let mut sim = Simulator::new(
        c,
        Options {
            record: Record::Window { from: a, to: b },
            ..Options::default()
        },
    )
    .unwrap();
    if ss.start_time > 0.0 {
        sim.advance_to(ss.start_time).unwrap();
    }
    let mut x = sim.state().to_vec();
    for (k, name) in ss.state_names.iter().enumerate() {
        x[sim.state_index(name).unwrap()] = ss.state[k];
    }
    sim.set_state(&x).unwrap();
    sim.advance_to(b).unwrap();
    let run = sim.finish();
    let w = &run.waveform;
    let (s, co) = (w.output("ref_s").unwrap(), w.output("ref_c").unwrap());
    outputs
        .iter()
        .map(|o| {
            let y = w.output(o).unwrap();
            let re = w.integrate(&[y, co], a, b, |v| v[0] * v[1]);
            let im = -w.integrate(&[y, s], a, b, |v| v[0] * v[1]);
            Complex::new(re, im) * (2.0 / (b - a))
        })
        .collect()
}

fn assert_matches(what: &str, f: f64, exact: Complex<f64>, brute: Complex<f64>) {
    let db = 20.0 * (exact.norm() / brute.norm()).log10();
    let deg = (exact / brute).arg().to_degrees();
    assert!(
        db.abs() <= 0.2 && deg.abs() <= 2.0,
        "{what} at {f} Hz: exact {exact} against injection {brute} ({db:+.3} dB, {deg:+.2}°)"
    );
}

/// The buck of buck.json (24 V, 200 kHz, D = 0.5) perturbed three ways at
/// f = k·fs/100, each against a transient with the sinusoid applied,
/// settled for 1,000 periods (the slowest multiplier, 0.991, leaves
/// e^{−8.9} of the start) and Fourier-analysed over the next 100 periods:
/// within 0.2 dB and 2° (common practice for injection measurements; the
/// residue of settling and the second-order terms of the small
/// perturbation are far below that).
fn injection_check(ks: &[u32]) {
    let base = example("buck.json");
    let fs = 200e3;
    for &k in ks {
        let f = k as f64 * fs / 100.0;
        let exact = |input: &str| {
            frequency_response(&base, &Input::parse(input), "out", &[f], &opts())
                .unwrap()
                .points[0]
                .value()
        };
        let ss = steady(&base);
        // Line: Vin = 24 + 0.1·sin(ωt).
        let mut c = base.clone();
        for e in &mut c.elements {
            if let Element::VoltageSource(v) = e {
                if v.name == "Vin" {
                    v.waveform = Stimulus::Sine {
                        offset: 24.0,
                        amplitude: 0.1,
                        frequency: f,
                        phase: 0.0,
                    };
                }
            }
        }
        add_reference_oscillators(&mut c, f);
        let y = brute_force(&c, &ss, 1000, 100, &["out"])[0];
        assert_matches(
            "line to output",
            f,
            exact("Vin"),
            y / Complex::new(0.0, -0.1),
        );
        // Output impedance: 10 mA pushed into `out`.
        let mut c = base.clone();
        c.elements.push(Element::CurrentSource(CurrentSource {
            name: "Iinj".into(),
            nodes: ["gnd".into(), "out".into()],
            waveform: Stimulus::Sine {
                offset: 0.0,
                amplitude: 0.01,
                frequency: f,
                phase: 0.0,
            },
        }));
        add_reference_oscillators(&mut c, f);
        let y = brute_force(&c, &ss, 1000, 100, &["out"])[0];
        assert_matches(
            "output impedance",
            f,
            exact("injection:out"),
            y / Complex::new(0.0, -0.01),
        );
        // Duty: each turn-off edge at kT + D·T moves by T·ε·sin(ω(kT + D·T)).
        let (t, d, eps) = (1.0 / fs, 0.5, 1e-3);
        let mut c = base.clone();
        let transitions = (0..100)
            .flat_map(|j| {
                let on = j as f64 * t;
                let off = on + d * t + t * eps * (2.0 * PI * f * (on + d * t)).sin();
                [
                    Transition { time: on, on: true },
                    Transition {
                        time: off,
                        on: false,
                    },
                ]
            })
            .collect();
        c.gates = vec![Gate::Transitions {
            name: "drive".into(),
            initial: false,
            transitions,
            period: Some(100.0 * t),
        }];
        add_reference_oscillators(&mut c, f);
        let y = brute_force(&c, &ss, 1000, 100, &["out"])[0];
        assert_matches(
            "duty to output",
            f,
            exact("drive.duty"),
            y / Complex::new(0.0, -eps),
        );
    }
}

#[test]
fn responses_match_brute_force_injection() {
    injection_check(&[1, 20, 45]);
}

/// The full set: eight frequencies from fs/100 to 0.45·fs (run with
/// `cargo test -p fluxstep-analysis -- --ignored`).
#[test]
#[ignore = "about a minute; the suite runs three frequencies"]
fn responses_match_brute_force_injection_at_eight_frequencies() {
    injection_check(&[1, 2, 5, 10, 20, 30, 40, 45]);
}

/// Peak-current control into a stiff output: the reference-to-current
/// response has the double pole at fs/2 of the sampling gain, with
/// Q = 1/(π·(mc·D′ − 0.5)), mc = 1 + Se/Sn (R. B. Ridley, "A new,
/// continuous-time model for current-mode control", IEEE TPEL 1991): the
/// magnitude at fs/2 relative to the low-frequency gain equals Q, within
/// 10 %, for two ramps.
#[test]
fn peak_current_double_pole_at_half_the_switching_frequency() {
    let (vin, vo, l, fs) = (12.0, 7.2, 22e-6, 100e3);
    let (d, sn, sf) = (vo / vin, (vin - vo) / l, vo / l);
    // Two ramps that keep the 3 A peak in continuous conduction (with a
    // ramp near the down-slope the valley reaches zero here). The exact
    // ratio agrees with Ridley's Q to about 1e-7 at both.
    for se in [0.3 * sf, 0.5 * sf] {
        let c = peak_current_stiff(vo, 3.0, se);
        let r = frequency_response(
            &c,
            &Input::parse("pc.reference"),
            "L1.current",
            &[10.0, fs / 2.0],
            &opts(),
        )
        .unwrap();
        let ratio = r.points[1].value().norm() / r.points[0].value().norm();
        let mc = 1.0 + se / sn;
        let q = 1.0 / (PI * (mc * (1.0 - d) - 0.5));
        assert!(
            (ratio / q - 1.0).abs() <= 0.1,
            "Se = {se}: |H(fs/2)|/|H(0)| = {ratio}, Q = {q}"
        );
        assert!(r.points[1].frequency <= 0.5 * fs && !r.points[1].beyond_nyquist);
    }
    // Without a ramp above D = 0.5 there is no response to report.
    let err = frequency_response(
        &peak_current_stiff(vo, 3.0, 0.0),
        &Input::parse("pc.reference"),
        "L1.current",
        &[10.0],
        &opts(),
    )
    .unwrap_err();
    assert!(matches!(err, AnalysisError::Unstable { .. }), "{err}");
    assert!(err.to_string().contains("unstable"), "{err}");
}

/// Discontinuous-conduction buck, duty to output: Gd0 = (2V/D)·(1 − M)/(2 − M)
/// and a single low-frequency pole ωp = (2 − M)/((1 − M)·R·C) (Erickson &
/// Maksimović, 2nd ed. 2001, ch. 15, Table 15.3), an approximation valid
/// well below fs: the gain at fp/20 within 3 % and the magnitude at fp
/// within 5 % of Gd0/√2.
#[test]
fn dcm_buck_control_to_output_matches_the_dcm_model() {
    let c = example("buck_dcm.json");
    let ss = steady(&c);
    let v = ss.measurement("out").unwrap().average;
    let (vin, d, r, cap) = (24.0, 0.5, 60.0, 47e-6);
    let m = v / vin;
    let gd0 = 2.0 * v / d * (1.0 - m) / (2.0 - m);
    let fp = (2.0 - m) / ((1.0 - m) * r * cap) / (2.0 * PI);
    let resp = frequency_response(
        &c,
        &Input::parse("drive.duty"),
        "out",
        &[fp / 20.0, fp],
        &opts(),
    )
    .unwrap();
    let low = resp.points[0].value().norm();
    let at_pole = resp.points[1].value().norm();
    assert!((low / gd0 - 1.0).abs() <= 0.03, "gain {low} against {gd0}");
    assert!(
        (at_pole / (gd0 / 2f64.sqrt()) - 1.0).abs() <= 0.05,
        "at fp = {fp} Hz: {at_pole} against {}",
        gd0 / 2f64.sqrt()
    );
}

/// The closed voltage loop of voltage_mode_buck.json broken at the
/// compensator's input: T(f) from the linearised model against a
/// transient with a sinusoid injected in series with the measurement
/// (R. D. Middlebrook, "Measurement of loop gain in feedback systems",
/// Int. J. Electronics 1975: T = −v_return / v_injected-side), at five
/// frequencies around crossover; crossover and phase margin within 5 %.
#[test]
fn loop_gain_matches_brute_force_loop_injection() {
    let base = example("voltage_mode_buck.json");
    let point = BreakPoint::named(&base, "K").unwrap();
    let freqs: Vec<f64> = (8..=12).map(|k| k as f64 * 2e3).collect();
    let lg = loop_gain(&base, &point, &freqs, &opts()).unwrap();
    let mut measured = vec![];
    for (i, &f) in freqs.iter().enumerate() {
        let mut c = base.clone();
        c.compensators[0].input = "sense".into();
        c.elements.push(Element::VoltageSource(VoltageSource {
            name: "Vinj".into(),
            nodes: ["sense".into(), "out".into()],
            waveform: Stimulus::Sine {
                offset: 0.0,
                amplitude: 5e-3,
                frequency: f,
                phase: 0.0,
            },
        }));
        c.elements.push(Element::Resistor(Resistor {
            name: "Rsense".into(),
            nodes: ["sense".into(), "gnd".into()],
            resistance: 1e9,
        }));
        add_reference_oscillators(&mut c, f);
        let ss = steady(&base);
        let y = brute_force(&c, &ss, 400, 100, &["out", "sense"]);
        let t_bf = -y[0] / y[1];
        assert_matches("loop gain", f, lg.points[i].value(), t_bf);
        measured.push(t_bf);
    }
    // Crossover and phase margin of the injection, interpolated in log f.
    let k = measured
        .iter()
        .position(|t| t.norm() < 1.0)
        .expect("crossover in range");
    assert!(k > 0);
    let (m0, m1) = (measured[k - 1].norm().ln(), measured[k].norm().ln());
    let u = m0 / (m0 - m1);
    let fc_bf = (freqs[k - 1].ln() + u * (freqs[k].ln() - freqs[k - 1].ln())).exp();
    let (p0, p1) = (measured[k - 1].arg(), measured[k].arg());
    let pm_bf = 180.0 + (p0 + u * (p1 - p0)).to_degrees();
    let fc = lg.margins.crossover_hz.expect("crossover");
    let pm = lg.margins.phase_margin_deg.expect("phase margin");
    assert!(
        (fc / fc_bf - 1.0).abs() <= 0.05,
        "crossover {fc} against {fc_bf}"
    );
    assert!(
        (pm / pm_bf - 1.0).abs() <= 0.05,
        "phase margin {pm} against {pm_bf}"
    );
}

#[test]
fn bad_input_is_named() {
    let c = example("buck.json");
    let err = frequency_response(&c, &Input::parse("Vbogus"), "out", &[1e3], &opts()).unwrap_err();
    let text = err.to_string();
    assert!(matches!(err, AnalysisError::UnknownInput { .. }), "{text}");
    assert!(
        text.contains("Vin") && text.contains("drive.duty") && text.contains("injection:out"),
        "{text}"
    );
    let err = frequency_response(&c, &Input::parse("Vin"), "nowhere", &[1e3], &opts()).unwrap_err();
    assert!(matches!(err, AnalysisError::UnknownOutput { .. }), "{err}");
    assert!(err.to_string().contains("out"), "{err}");
    // A circuit without a steady state: the steady-state error, unchanged.
    let err = frequency_response(
        &example("interrupted_inductor.json"),
        &Input::parse("Vin"),
        "out",
        &[1e3],
        &opts(),
    )
    .unwrap_err();
    assert!(matches!(err, AnalysisError::NoPeriod), "{err}");
    for f in [0.0, -1.0, f64::NAN] {
        let err = frequency_response(&c, &Input::parse("Vin"), "out", &[f], &opts()).unwrap_err();
        assert!(err.to_string().contains("positive"), "{err}");
    }
    assert!(log_frequencies(10.0, 100e3, 0).is_err());
    assert!(log_frequencies(0.0, 100e3, 10).is_err());
    assert!(log_frequencies(1e3, 10.0, 10).is_err());
    // Above fs/2 is allowed and marked.
    let r = frequency_response(&c, &Input::parse("Vin"), "out", &[99e3, 150e3], &opts()).unwrap();
    assert!(!r.points[0].beyond_nyquist && r.points[1].beyond_nyquist);
    let err = loop_gain(&c, &BreakPoint::GateSense("drive".into()), &[1e3], &opts()).unwrap_err();
    assert!(matches!(err, AnalysisError::UnknownInput { .. }), "{err}");
    assert!(BreakPoint::named(&c, "drive").is_err());
}

#[test]
fn log_frequencies_span_the_range() {
    let f = log_frequencies(10.0, 100e3, 5).unwrap();
    assert_eq!(f.len(), 5);
    assert_eq!(f[0], 10.0);
    assert_eq!(f[4], 100e3);
    assert!((f[2] - 1e3).abs() < 1e-9);
}
