//! Efficiency against load of a synchronous buck with dead time, and its
//! loss breakdown.
//!
//! A demo design of our own: 24 V → 12 V at 200 kHz, 22 µH with 15 mΩ of
//! winding resistance, 47 µF with 5 mΩ of ESR, two 10 mΩ transistors with
//! 0.7 V body diodes, 50 ns / 80 ns dead times. The high-side transistor
//! has the clamped inductive switching model (turn-off: 24 V in 10 ns,
//! current fall 5 ns per 2 A scaled as a fixed rate; turn-on similar); the
//! low side switches at zero voltage; its body diode has 30 nC of
//! recovered charge, and the inductor's ferrite core has Steinmetz
//! parameters for the iGSE core loss. Each load point runs 3,000 periods
//! and reports the last one; the breakdown of the full-load point is drawn
//! as `out/losses/losses.svg`.
//!
//! ```sh
//! cargo run --release --example losses
//! ```
//!
//! Caution: a simulated efficiency is as good as the part data given;
//! it does not replace measurement and qualified review.

use fluxstep::analysis::losses::{breakdown, LossOptions};
use fluxstep::netlist::{
    Capacitor, Circuit, CoreModel, DiodeModel, Element, Inductor, SwitchTransition, TransitionRates,
};
use fluxstep::plot::{loss_chart_svg, LossBar};
use fluxstep::solver::{simulate, Options};

const T: f64 = 5e-6;

fn buck(load: f64) -> Result<Circuit, Box<dyn std::error::Error>> {
    let body = DiodeModel {
        forward_voltage: Some(0.7),
        on_resistance: None,
        recovered_charge: None,
    };
    let low_body = DiodeModel {
        recovered_charge: Some(30e-9),
        ..body.clone()
    };
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .transistor("Q1", "in", "sw", "hb.high", 0.01, body)
        .transistor("Q2", "sw", "gnd", "hb.low", 0.01, low_body)
        .element(Element::Inductor(Inductor {
            name: "L1".into(),
            nodes: ["sw".into(), "out".into()],
            inductance: 22e-6,
            initial_current: Some(12.0 / load),
            winding_resistance: Some(0.015),
            // A ferrite fit of our own: 22 turns on 60 mm² and 5.5 cm³.
            core: Some(CoreModel {
                k: 3.0,
                alpha: 1.45,
                beta: 2.6,
                turns: 22.0,
                area: 60e-6,
                volume: 5.5e-6,
            }),
        }))
        .element(Element::Capacitor(Capacitor {
            name: "C1".into(),
            nodes: ["out".into(), "gnd".into()],
            capacitance: 47e-6,
            initial_voltage: Some(12.0),
            esr: Some(0.005),
        }))
        .resistor("Rload", "out", "gnd", load)
        .complementary_pwm("hb", 1.0 / T, 0.5, 50e-9, 80e-9)
        .build()?;
    for e in &mut c.elements {
        if let Element::Switch(s) = e {
            if s.name == "Q1" {
                s.transition = Some(SwitchTransition {
                    turn_off: TransitionRates {
                        voltage_rate: 24.0 / 10e-9,
                        current_rate: 1e9,
                    },
                    turn_on: TransitionRates {
                        voltage_rate: 24.0 / 12e-9,
                        current_rate: 0.8e9,
                    },
                });
            }
        }
    }
    Ok(c)
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    println!(
        "{:>8} {:>8} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>8} {:>9}",
        "load", "I out", "P out", "cond.", "switch.", "recov.", "core", "total", "eff.", "balance"
    );
    let mut chart = None;
    for load in [24.0, 12.0, 6.0, 4.0, 3.0, 2.4, 2.0] {
        let c = buck(load)?;
        let periods = 3000.0;
        let run = simulate(&c, periods * T, Options::default())?;
        let opts = LossOptions {
            loads: vec!["Rload".into()],
        };
        let r = breakdown(
            &c,
            &run.waveform,
            &run.events,
            (periods - 1.0) * T,
            periods * T,
            &opts,
        )?;
        let k = r.by_kind();
        println!(
            "{:>6.1} Ω {:>6.2} A {:>7.3} W {:>7.3} W {:>7.3} W {:>7.3} W {:>7.3} W {:>7.3} W {:>7.2} % {:>9.1e}",
            load,
            12.0 / load,
            r.output_power(),
            k.conduction,
            k.switching,
            k.recovery,
            k.core,
            r.total_loss(),
            100.0 * r.efficiency().unwrap_or(f64::NAN),
            r.balance_error()
        );
        if load == 2.0 {
            let bars: Vec<LossBar> = r
                .by_part()
                .into_iter()
                .map(|p| LossBar {
                    part: p.part,
                    by_kind: p.by_kind,
                })
                .collect();
            let title = format!(
                "synchronous buck, 24 V to 12 V at 6 A: efficiency {:.2} %",
                100.0 * r.efficiency().unwrap_or(f64::NAN)
            );
            chart = Some(loss_chart_svg(Some(&title), &bars));
        }
    }
    println!(
        "(conduction: channels, body diodes, winding and ESR; switching: Q1's transitions; \
         recovery: Q2's body diode; core: L1 by the iGSE)"
    );
    if let Some(svg) = chart {
        std::fs::create_dir_all("out/losses")?;
        std::fs::write("out/losses/losses.svg", svg)?;
        println!("breakdown at full load: out/losses/losses.svg");
    }
    Ok(())
}
