//! Tuning the voltage loop of a demo design: a 12 V → 1.8 V buck at
//! 300 kHz for a small processor rail (4.7 µH, 2 × 47 µF, 0.9 Ω load),
//! voltage-mode control with a 1 V ramp and a type-III compensator
//! (an integrator, two zeros at 3 kHz below the 7.6 kHz LC resonance and
//! two poles at fs/2). The example sweeps the compensator gain, computes the
//! exact loop gain of each design from the switched model (no averaging)
//! and prints crossover, phase and gain margins, then picks the highest
//! crossover that keeps at least 45° of phase margin and 10 dB of gain
//! margin, and shows its closed-loop output impedance peak.
//!
//! `cargo run --release --example loop_design`

use fluxstep::analysis::response::{
    frequency_response, log_frequencies, loop_gain, BreakPoint, Input,
};
use fluxstep::analysis::steady::SteadyOptions;
use fluxstep::netlist::{Circuit, Compensator, CompensatorLaw, Gate};

const FS: f64 = 300e3;

fn design(gain: f64) -> Circuit {
    let mut c = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "vm")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 4.7e-6)
        .capacitor("C1", "out", "gnd", 94e-6)
        .resistor("Rload", "out", "gnd", 0.9)
        .gate(Gate::VoltageMode {
            name: "vm".into(),
            frequency: FS,
            control: "K.output".into(),
            ramp_low: 0.0,
            ramp_high: 1.0,
            min_duty: 0.0,
            max_duty: 0.9,
        })
        .build_unchecked();
    // LC resonance 1/(2π√(LC)) ≈ 7.6 kHz: the zeros sit just below it.
    c.compensators.push(Compensator {
        name: "K".into(),
        input: "out".into(),
        reference: 1.8,
        law: CompensatorLaw::PolesZeros {
            gain,
            integrator: true,
            zeros_hz: vec![3e3, 3e3],
            poles_hz: vec![FS / 2.0, FS / 2.0],
        },
    });
    c.validate().expect("valid demo design");
    c
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let opts = SteadyOptions::default();
    let freqs = log_frequencies(100.0, 0.5 * FS, 120)?;
    println!("gain      crossover     phase margin   gain margin");
    let mut best: Option<(f64, f64)> = None;
    for gain in [1e3, 2e3, 3e3, 4e3, 6e3, 8e3] {
        let c = design(gain);
        let point = BreakPoint::named(&c, "vm")?;
        let lg = match loop_gain(&c, &point, &freqs, &opts) {
            Ok(lg) => lg,
            Err(e) => {
                println!("{gain:>6.0}   no stable operating point: {e}");
                continue;
            }
        };
        let m = &lg.margins;
        let fc = m.crossover_hz.unwrap_or(f64::NAN);
        let pm = m.phase_margin_deg.unwrap_or(f64::NAN);
        let gm = m.gain_margin_db.unwrap_or(f64::INFINITY);
        println!(
            "{gain:>6.0}   {:>8.2} kHz   {pm:>10.1}°   {gm:>9.1} dB",
            fc / 1e3
        );
        if pm >= 45.0 && gm >= 10.0 && best.is_none_or(|(_, f)| fc > f) {
            best = Some((gain, fc));
        }
    }
    let (gain, fc) = best.ok_or("no gain met the margins")?;
    println!(
        "chosen gain {gain:.0}: crossover {:.2} kHz ({:.3} of fs)",
        fc / 1e3,
        fc / FS
    );
    let z = frequency_response(
        &design(gain),
        &Input::parse("injection:out"),
        "out",
        &freqs,
        &opts,
    )?;
    let peak = z
        .points
        .iter()
        .max_by(|a, b| a.magnitude_db.total_cmp(&b.magnitude_db))
        .ok_or("no points")?;
    println!(
        "closed-loop output impedance peaks at {:.1} mΩ near {:.2} kHz",
        1e3 * 10f64.powf(peak.magnitude_db / 20.0),
        peak.frequency / 1e3
    );
    Ok(())
}
