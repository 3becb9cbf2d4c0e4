//! Junction temperature: Foster networks driven by the exact loss against
//! their closed forms (steady rise, step response, periodic ripple), the
//! warning above the maximum, bad input.

use fluxstep_analysis::losses::thermal::{
    junction_temperature, step_rise, JunctionTemperature, ThermalStart,
};
use fluxstep_analysis::AnalysisError;
use fluxstep_netlist::{Circuit, Diode, DiodeModel, Element, FosterPair, Switch, ThermalNetwork};
use fluxstep_solver::{simulate, Options};

fn stage(resistance: f64, time_constant: f64) -> FosterPair {
    FosterPair {
        resistance,
        time_constant,
    }
}

/// Two junction–case stages and one case–ambient stage, 40 °C ambient.
fn network(max_junction: Option<f64>) -> ThermalNetwork {
    ThermalNetwork {
        junction_case: vec![stage(0.3, 1e-4), stage(0.5, 2e-3)],
        case_ambient: vec![stage(1.2, 1e-2)],
        ambient: Some(40.0),
        max_junction,
    }
}

/// 10 V into a diode of 0.7 V and 0.1 Ω and 9.2 Ω: 1 A, a constant
/// 0.8 W in the diode from t = 0 (Ohm's law; common practice).
fn dc_diode(net: ThermalNetwork) -> Circuit {
    Circuit::builder()
        .voltage_source("V1", "in", "gnd", 10.0)
        .element(Element::Diode(Diode {
            name: "D1".into(),
            nodes: ["in".into(), "out".into()],
            model: DiodeModel {
                forward_voltage: Some(0.7),
                on_resistance: Some(0.1),
                recovered_charge: None,
            },
            thermal: Some(net),
        }))
        .resistor("R1", "out", "gnd", 9.2)
        .build()
        .unwrap()
}

/// A constant loss P settles every Foster stage at R_k·P: the junction at
/// ambient + P·ΣR = 40 + 0.8·2.0 = 41.6 °C (Foster network; common
/// practice), to 1e-12.
#[test]
fn steady_temperature_is_loss_times_total_resistance() {
    let c = dc_diode(network(None));
    let run = simulate(&c, 1e-3, Options::default()).unwrap();
    let j =
        junction_temperature(&c, &run.waveform, "D1", 0.0, 1e-3, ThermalStart::Periodic).unwrap();
    for t in [j.steady, j.min, j.max, j.end] {
        assert!((t - 41.6).abs() < 1e-12 * 41.6, "{j:?}");
    }
    assert!((j.average_loss - 0.8).abs() < 1e-12);
}

/// From ambient, a step of loss P gives ΔT(t) = Σ R_k·P·(1 − e^(−t/τ_k))
/// (Foster network step response; common practice), to 1e-12 of the rise.
#[test]
fn step_response_is_the_sum_of_exponentials() {
    let net = network(None);
    let c = dc_diode(net.clone());
    let run = simulate(&c, 30e-3, Options::default()).unwrap();
    for t in [50e-6, 1e-3, 7e-3, 30e-3] {
        let j =
            junction_temperature(&c, &run.waveform, "D1", 0.0, t, ThermalStart::Ambient).unwrap();
        let rise = step_rise(&net, 0.8, t);
        assert!(
            (j.end - 40.0 - rise).abs() < 1e-12 * rise,
            "t = {t:e}: {} vs {}",
            j.end - 40.0,
            rise
        );
        // A step response rises monotonically: the peak is at the end.
        assert_eq!(j.max, j.end);
    }
}

/// A resistive chopper (10 V, 0.5 Ω switch, 4.5 Ω load, 30 % of 20 µs):
/// the switch dissipates P = 2 W while on and nothing while off. One stage
/// (R = 1 K/W, τ = 10 µs) in periodic steady state swings between
/// θ_max = R·P·(1 − e^(−DT/τ))/(1 − e^(−T/τ)) at turn-off and
/// θ_min = θ_max·e^(−(1−D)T/τ) at turn-on (first-order response to a
/// periodic pulse train; common practice), to 1e-9.
#[test]
fn periodic_ripple_matches_the_pulse_train_closed_form() {
    let net = ThermalNetwork {
        junction_case: vec![stage(1.0, 10e-6)],
        case_ambient: vec![],
        ambient: None,
        max_junction: Some(25.5),
    };
    let c = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 10.0)
        .element(Element::Switch(Switch {
            name: "S1".into(),
            nodes: ["in".into(), "out".into()],
            gate: "g".into(),
            on_resistance: Some(0.5),
            body_diode: None,
            thermal: Some(net),
            transition: None,
            switching_energy: None,
        }))
        .resistor("Rload", "out", "gnd", 4.5)
        .pwm("g", 50e3, 0.3)
        .build()
        .unwrap();
    let run = simulate(&c, 40e-6, Options::default()).unwrap();
    let period = 20e-6;
    let j: JunctionTemperature = junction_temperature(
        &c,
        &run.waveform,
        "S1",
        period,
        2.0 * period,
        ThermalStart::Periodic,
    )
    .unwrap();
    let (p, d, tau) = (2.0, 0.3, 10e-6);
    let hi = p * -(-d * period / tau).exp_m1() / -(-period / tau).exp_m1();
    let lo = hi * (-(1.0 - d) * period / tau).exp();
    assert!((j.max - 25.0 - hi).abs() < 1e-9 * hi, "{j:?} vs {hi}");
    assert!((j.min - 25.0 - lo).abs() < 1e-9 * hi, "{j:?} vs {lo}");
    assert!((j.time_of_max - (period + d * period)).abs() < 1e-18);
    assert!((j.average_loss - 0.6).abs() < 1e-12);
    // 25.5 °C is exceeded: the warning names the switch.
    let w = j.warning().expect("above the maximum");
    assert!(w.starts_with("S1: "), "{w}");
}

#[test]
fn an_element_without_a_network_is_named() {
    let c = dc_diode(network(None));
    let run = simulate(&c, 1e-3, Options::default()).unwrap();
    let e = junction_temperature(&c, &run.waveform, "R1", 0.0, 1e-3, ThermalStart::Ambient)
        .unwrap_err();
    assert!(matches!(e, AnalysisError::LossModel { .. }), "{e:?}");
    assert!(
        e.to_string().contains("R1") && e.to_string().contains("thermal"),
        "{e}"
    );
    let j =
        junction_temperature(&c, &run.waveform, "D1", 0.0, 1e-3, ThermalStart::Ambient).unwrap();
    assert_eq!(j.warning(), None);
}

/// Switching energy heats the junction too. An ideal switch (no
/// conduction loss) chops a 10 A current sink from 100 V at 100 kHz,
/// D = 0.4, with tables that give E_on = 60 µJ and E_off = 40 µJ at every
/// edge. A single Foster stage (R, τ) then sees two pulses a period: each
/// lifts it by E·R/τ and it decays in between, so in the periodic state
/// just after the turn-on θ_on = (R/τ)(E_on + E_off·e^(−(1−D)T/τ)) /
/// (1 − e^(−T/τ)), just after the turn-off θ_off = (R/τ)(E_off +
/// E_on·e^(−DT/τ)) / (1 − e^(−T/τ)), and the lowest value is the larger
/// one decayed to the next pulse (impulse response of a first-order
/// thermal network; common practice). Mean rise: (E_on + E_off)·f·R.
/// All within 1e-12.
#[test]
fn switching_pulses_heat_the_junction_exactly() {
    use fluxstep_analysis::losses::thermal::junction_temperature_of;
    use fluxstep_netlist::{EnergyTable, Stimulus, SwitchingEnergy};
    let (r, tau, t, d) = (2.0, 3e-6, 10e-6, 0.4);
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 100.0)
        .switch("S1", "in", "sw", "g")
        .diode("D1", "gnd", "sw")
        .current_source("Iload", "sw", "gnd", Stimulus::Constant { value: 10.0 })
        .pwm("g", 1.0 / t, d)
        .build()
        .unwrap();
    for e in &mut c.elements {
        if let Element::Switch(s) = e {
            s.thermal = Some(ThermalNetwork {
                junction_case: vec![stage(r, tau)],
                case_ambient: vec![],
                ambient: Some(25.0),
                max_junction: None,
            });
            s.switching_energy = Some(SwitchingEnergy {
                turn_on: EnergyTable::single(100.0, &[(0.0, 0.0), (20.0, 120e-6)]),
                turn_off: EnergyTable::single(100.0, &[(0.0, 0.0), (20.0, 80e-6)]),
            });
        }
    }
    let run = simulate(&c, 4.0 * t, Options::default()).unwrap();
    let j = junction_temperature_of(
        &c,
        &run.waveform,
        &run.events,
        "S1",
        2.0 * t,
        3.0 * t,
        ThermalStart::Periodic,
    )
    .unwrap();
    let (e_on, e_off) = (60e-6, 40e-6);
    let k = 1.0 - (-t / tau).exp();
    let on = r / tau * (e_on + e_off * (-(1.0 - d) * t / tau).exp()) / k;
    let off = r / tau * (e_off + e_on * (-d * t / tau).exp()) / k;
    let low = (on * (-d * t / tau).exp()).min(off * (-(1.0 - d) * t / tau).exp());
    let close = |got: f64, want: f64| (got - want).abs() < 1e-12 * want;
    assert!(close(j.max - 25.0, on.max(off)), "{j:?} vs {on} {off}");
    assert!(close(j.min - 25.0, low), "{j:?} vs {low}");
    assert!(close(j.average_loss, (e_on + e_off) / t), "{j:?}");
    assert!(close(j.steady - 25.0, (e_on + e_off) / t * r), "{j:?}");
    // Without the tables the ideal switch stays at ambient.
    let cold = junction_temperature(
        &c,
        &run.waveform,
        "S1",
        2.0 * t,
        3.0 * t,
        ThermalStart::Periodic,
    )
    .unwrap();
    assert!(cold.max - 25.0 < 1e-12, "{cold:?}");
}
