//! Periodic steady state of a demo design: a 36 V → 12 V buck at 150 kHz
//! for a small motor-drive auxiliary rail, first at full and light load
//! (continuous and discontinuous conduction), then the same power stage
//! under peak-current control from a 20 V input (D = 0.6), without and
//! with a compensation ramp. Prints the state at period start, ripple,
//! peak and valley current, and the Floquet multipliers in plain words.
//!
//! `cargo run --release --example steady_state`

use fluxstep::analysis::steady::{find, Reading, SteadyOptions, SteadyState};
use fluxstep::netlist::{Circuit, Gate};

fn voltage_mode(load: f64) -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 36.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 33e-6)
        .capacitor("C1", "out", "gnd", 68e-6)
        .resistor("Rload", "out", "gnd", load)
        .pwm("drive", 150e3, 1.0 / 3.0)
        .build()
        .expect("valid demo circuit")
}

fn peak_current(ramp: f64) -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 20.0)
        .switch("S1", "in", "sw", "pc")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 33e-6)
        .capacitor("C1", "out", "gnd", 68e-6)
        .resistor("Rload", "out", "gnd", 4.0)
        .gate(Gate::PeakCurrent {
            name: "pc".into(),
            frequency: 150e3,
            sense: "L1.current".into(),
            reference: 3.4,
            slope: ramp,
            max_duty: 0.9,
        })
        .build()
        .expect("valid demo circuit")
}

fn report(title: &str, ss: &SteadyState) -> Result<(), Box<dyn std::error::Error>> {
    let il = ss.measurement("L1.current")?;
    let out = ss.measurement("out")?;
    println!("{title}");
    println!(
        "  found in {} Newton steps (residual {:.1e}); output {:.4} V, ripple {:.2} mV p-p",
        ss.newton_steps(),
        ss.residual,
        out.average,
        out.peak_to_peak * 1e3
    );
    // A valley of −1e-16 A is rounding of a located zero: show it as 0.
    let valley = if il.min.abs() <= 1e-9 * il.max {
        0.0
    } else {
        il.min
    };
    println!(
        "  inductor current: average {:.3} A, peak {:.3} A, valley {:.3} A ({})",
        il.average,
        il.max,
        valley,
        if valley == 0.0 {
            "discontinuous conduction"
        } else {
            "continuous conduction"
        }
    );
    for m in &ss.multipliers {
        let words = match m.reading {
            Reading::Stable => "stable".to_string(),
            Reading::Slow => format!("slow mode, {:.0} periods per factor e", m.periods_per_e),
            Reading::Unstable => "UNSTABLE".to_string(),
            Reading::PeriodDoubling => "UNSTABLE: period doubling (subharmonic)".to_string(),
        };
        println!(
            "  multiplier {:+.4}{:+.4}i  |λ| = {:.4}  {words}",
            m.re, m.im, m.magnitude
        );
    }
    Ok(())
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let opts = SteadyOptions::default();
    report("full load (6 Ω)", &find(&voltage_mode(6.0), &opts)?)?;
    report("light load (60 Ω)", &find(&voltage_mode(60.0), &opts)?)?;
    // Down-slope 12 V / 33 µH = 0.36 A/µs; half of it stops the
    // subharmonic oscillation above 50 % duty.
    report(
        "peak-current control, no ramp",
        &find(&peak_current(0.0), &opts)?,
    )?;
    report(
        "peak-current control, 0.2 A/µs ramp",
        &find(&peak_current(0.2e6), &opts)?,
    )?;
    Ok(())
}
