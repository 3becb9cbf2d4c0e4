//! The voltage spike across a transistor at turn-off, from a stray
//! inductance in its commutation loop.
//!
//! A demo design of our own: a 48 V bus, an inductive load carrying 8 A
//! (a current source), a clamp diode back to the bus, and a transistor
//! with finite switching transitions (turn-off: 48 V in 12 ns, 8 A in
//! 8 ns) behind 15 nH of loop inductance (wiring and package). During the
//! current fall the transistor sees the bus plus Ls·di/dt = 15 nH × 1 A/ns
//! = 15 V. Prints the switching energies and the peak, and writes
//! out/turn_off_spike.svg.
//!
//! ```sh
//! cargo run --release --example turn_off_spike
//! ```
//!
//! Caution: the spike depends on the stray inductance and rates you give;
//! real layouts ring with the transistor's capacitances, which this model
//! leaves out. Simulation does not replace measurement on the assembled
//! board, and a part's voltage margin needs qualified review.

use fluxstep::analysis::losses::{breakdown, LossKind, LossOptions};
use fluxstep::netlist::{
    Circuit, DiodeModel, Element, Stimulus, Switch, SwitchTransition, TransitionRates,
};
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::{simulate, Options};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let (bus, load, stray) = (48.0, 8.0, 15e-9);
    let f = 200e3;
    let q1 = Switch {
        name: "Q1".into(),
        nodes: ["sw".into(), "src".into()],
        gate: "g".into(),
        on_resistance: Some(0.02),
        body_diode: None,
        thermal: None,
        transition: Some(SwitchTransition {
            turn_off: TransitionRates {
                voltage_rate: bus / 12e-9,
                current_rate: load / 8e-9,
            },
            turn_on: TransitionRates {
                voltage_rate: bus / 10e-9,
                current_rate: load / 10e-9,
            },
        }),
        switching_energy: None,
    };
    let c = Circuit::builder()
        .voltage_source("Vbus", "bus", "gnd", bus)
        .current_source("Iload", "bus", "sw", Stimulus::Constant { value: load })
        .diode_model(
            "D1",
            "sw",
            "bus",
            DiodeModel {
                forward_voltage: Some(0.6),
                on_resistance: None,
                recovered_charge: None,
            },
        )
        .element(Element::Switch(q1))
        .inductor_with_current("Lstray", "src", "gnd", stray, load)
        .pwm("g", f, 0.4)
        .build()?;
    let t = 1.0 / f;
    let run = simulate(&c, 3.0 * t, Options::default())?;
    let w = &run.waveform;
    let v = w.output("Q1.voltage")?;
    let spans = w.transition_spans("Q1");
    println!("48 V bus, 8 A load, 15 nH loop inductance:");
    for s in spans.iter().filter(|s| !s.turn_on).take(1) {
        let mid = 0.5 * (s.clamp + s.t1);
        println!(
            "  turn-off at {:.3} µs: voltage rise {:.2} ns, current fall {:.2} ns",
            s.t0 * 1e6,
            (s.clamp - s.t0) * 1e9,
            (s.t1 - s.clamp) * 1e9
        );
        println!(
            "  transistor voltage during the fall: {:.3} V (bus + diode drop + Ls·di/dt = {:.3} V)",
            w.value(v, mid)?,
            bus + 0.6 + stray * load / 8e-9
        );
    }
    let r = breakdown(
        &c,
        w,
        &run.events,
        t,
        2.0 * t,
        &LossOptions {
            loads: vec!["Iload".into()],
        },
    )?;
    for p in r.parts.iter().filter(|p| p.name == "Q1") {
        let what = match p.kind {
            LossKind::Transition => "switching",
            _ => "conduction",
        };
        println!(
            "  Q1 {what}: {:.3} µJ per period, {:.3} W",
            p.energy * 1e6,
            p.power
        );
    }
    let opts = ReviewOptions {
        outputs: vec!["Q1.voltage".into(), "Q1.current".into()],
        ripple: false,
        window: spans
            .iter()
            .find(|s| !s.turn_on)
            .map(|s| (s.t0 - 10e-9, s.t1 + 20e-9)),
        ..ReviewOptions::default()
    };
    let fig = review_figure(
        "turn-off with 15 nH loop inductance",
        w,
        Some(&run.events),
        &opts,
    )?;
    std::fs::create_dir_all("out")?;
    write_svg(&fig, "out/turn_off_spike.svg")?;
    println!("  figure written to out/turn_off_spike.svg");
    Ok(())
}
