//! Core loss by the improved generalised Steinmetz equation on the exact
//! flux waveform, against the closed forms of K. Venkatachalam,
//! C. R. Sullivan, T. Abdallah & H. Tacca, "Accurate prediction of ferrite
//! core loss with nonsinusoidal waveforms using only Steinmetz
//! parameters", IEEE COMPEL 2002: the Steinmetz equation for a sinusoid,
//! the piecewise-linear sum for a triangle.

use fluxstep_analysis::losses::core::{core_loss, igse_ki};
use fluxstep_analysis::losses::{breakdown, LossKind, LossOptions};
use fluxstep_netlist::{Circuit, CoreModel, Element, Stimulus};
use fluxstep_solver::{simulate, Options};

fn core(alpha: f64, beta: f64) -> CoreModel {
    CoreModel {
        k: 12.0,
        alpha,
        beta,
        turns: 20.0,
        area: 50e-6,
        volume: 5e-6,
    }
}

/// An inductor across a sine source: v = V·sin ωt, B = L·i/(N·A) with a
/// sinusoidal part of peak B̂ = V/(ω·N·A). Over one period the iGSE gives
/// k·f^α·B̂^β per volume exactly (iGSE paper, by construction of k_i),
/// for several α and β; within 1e-9.
#[test]
fn sinusoidal_flux_gives_the_steinmetz_equation() {
    let (v, f, l) = (10.0, 50e3, 100e-6);
    let period = 1.0 / f;
    for (alpha, beta) in [(1.4, 2.6), (1.0, 2.0), (1.9, 3.1), (2.7, 2.2)] {
        let c = Circuit::builder()
            .voltage_waveform(
                "V1",
                "a",
                "gnd",
                Stimulus::Sine {
                    offset: 0.0,
                    amplitude: v,
                    frequency: f,
                    phase: 0.0,
                },
            )
            .inductor("L1", "a", "gnd", l)
            .build()
            .unwrap();
        let run = simulate(&c, 3.0 * period, Options::default()).unwrap();
        let m = core(alpha, beta);
        let x = core_loss("L1", l, &m, &run.waveform, 2.0 * period, 3.0 * period).unwrap();
        let b_peak = v / (2.0 * std::f64::consts::PI * f * m.turns * m.area);
        assert!((x.flux_density_swing - 2.0 * b_peak).abs() < 1e-12 * b_peak);
        let steinmetz = m.k * f.powf(alpha) * b_peak.powf(beta);
        assert!(
            (x.power_density - steinmetz).abs() < 1e-9 * steinmetz,
            "α {alpha} β {beta}: {} vs {steinmetz}",
            x.power_density
        );
        assert!((x.power - steinmetz * m.volume).abs() < 1e-9 * steinmetz * m.volume);
        assert!((x.energy - x.power * period).abs() < 1e-15 * x.energy);
    }
}

/// A half bridge from +Vp and −Vn rails drives the inductor: B rises
/// linearly for D·T and falls for (1 − D)·T with ΔB = Vp·D·T/(N·A). The
/// iGSE paper's piecewise-linear form gives
/// P_v = k_i·ΔB^β·T^(−α)·(D^(1−α) + (1 − D)^(1−α)); the symmetric
/// triangle (D = 1/2) and an asymmetric one (D = 1/4), within 1e-9.
#[test]
fn triangular_flux_matches_the_piecewise_linear_closed_form() {
    let (f, l) = (100e3, 47e-6);
    let period = 1.0 / f;
    for (d, vp, vn) in [(0.5, 12.0, 12.0), (0.25, 15.0, 5.0)] {
        let c = Circuit::builder()
            .voltage_source("Vp", "p", "gnd", vp)
            .voltage_source("Vn", "gnd", "n", vn)
            .switch("S1", "p", "a", "hb.high")
            .switch("S2", "a", "n", "hb.low")
            .inductor("L1", "a", "gnd", l)
            .complementary_pwm("hb", f, d, 0.0, 0.0)
            .build()
            .unwrap();
        let run = simulate(&c, 4.0 * period, Options::default()).unwrap();
        let m = core(1.5, 2.5);
        let x = core_loss("L1", l, &m, &run.waveform, 3.0 * period, 4.0 * period).unwrap();
        let swing = vp * d * period / (m.turns * m.area);
        assert!(
            (x.flux_density_swing - swing).abs() < 1e-12 * swing,
            "{x:?}"
        );
        let ki = igse_ki(m.k, m.alpha, m.beta);
        let closed = ki
            * swing.powf(m.beta)
            * period.powf(-m.alpha)
            * (d.powf(1.0 - m.alpha) + (1.0 - d).powf(1.0 - m.alpha));
        assert!(
            (x.power_density - closed).abs() < 1e-9 * closed,
            "D {d}: {} vs {closed}",
            x.power_density
        );
    }
}

/// The breakdown reads the inductor's `core` from the circuit and lists
/// `L1.core` as a core loss, outside the energy balance (which stays
/// closed; conservation of energy, common practice).
#[test]
fn the_breakdown_lists_the_core_loss() {
    let mut c = Circuit::from_json(include_str!("../../../examples/circuits/buck.json")).unwrap();
    for e in &mut c.elements {
        if let Element::Inductor(l) = e {
            l.core = Some(core(1.5, 2.5));
        }
    }
    let stop = c.run.as_ref().unwrap().stop_time;
    let run = simulate(&c, stop, Options::default()).unwrap();
    let (t0, t1) = (stop - 10e-6, stop);
    let opts = LossOptions {
        loads: vec!["Rload".into()],
    };
    let r = breakdown(&c, &run.waveform, &run.events, t0, t1, &opts).unwrap();
    let p = r.parts.iter().find(|p| p.kind == LossKind::Core).unwrap();
    assert_eq!(p.name, "L1.core");
    assert!(p.energy > 0.0);
    assert!(r.by_kind().core > 0.0);
    assert!(r.balance_error() < 1e-9);
}
