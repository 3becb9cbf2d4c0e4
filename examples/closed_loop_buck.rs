//! Closed-loop voltage-mode buck (12 V → 5 V, 100 kHz, 2.5 A) with a load
//! step of +50 % load current (2.5 A → 3.75 A at 10 ms), under three loops:
//!
//! - analog type-III compensator (integrator, two zeros, two poles) driving
//!   a PWM comparator against a 1 V sawtooth, designed for a 10 kHz
//!   crossover;
//! - analog PI compensator on the same comparator;
//! - digital PI with the same gains, sampling the output at each period
//!   start, 1.5 µs of computation delay, the new duty taking effect at the
//!   next period.
//!
//! Every loop starts with a 2 ms soft-start ramp of its set-point. For each
//! it prints the settling time after start-up and after the load step (the
//! time after which the output stays within ±1 % of 5 V, found from the
//! exact extremes of every period and refined by bisection), the overshoot
//! after start-up and after the load step where it exceeds the settled
//! ripple, the load-step undershoot (exact extremes) and the final error
//! (average over the last 10 periods).
//!
//! What to read from it: the type-III loop crosses over above the LC
//! resonance and damps it; a PI loop must cross over well below the
//! resonance and cannot damp it (it adds no phase lead), so a load step
//! rings at about 2.2 kHz. The digital PI behaves like the analog one at
//! these gains; it regulates its sample at the period start, not the
//! average, hence its small final error. Writes `out/closed_loop_buck.svg`
//! (type-III loop) and `out/closed_loop_buck_digital.svg` (digital PI),
//! both around the load step: inductor current, switch node, output.

use std::error::Error;
use std::f64::consts::PI;

use fluxstep::netlist::{Circuit, Compensator, CompensatorLaw, Gate, Transition};
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::control::{Apply, Commands, Sampling};
use fluxstep::solver::measure::{measure, settling_time, Measurement};
use fluxstep::solver::{Options, RunResult, Simulator};

const VIN: f64 = 12.0;
const VREF: f64 = 5.0;
const FS: f64 = 100e3;
const T: f64 = 1.0 / FS;
const L: f64 = 33e-6;
const C: f64 = 150e-6;
const RLOAD: f64 = 2.0;
/// Switched in parallel at `T_STEP`: 5 V / 4 Ω = +1.25 A, +50 %.
const RSTEP: f64 = 4.0;
const T_STEP: f64 = 10e-3;
const T_END: f64 = 20e-3;
const SOFT_START: f64 = 2e-3;
/// Sawtooth amplitude of the analog modulator (V).
const VRAMP: f64 = 1.0;
const MAX_DUTY: f64 = 0.9;
/// PI gains shared by the analog and digital PI loops: a crossover near
/// 12·KI/2π ≈ 190 Hz, well below the LC resonance (2.26 kHz, Q ≈ 4.3),
/// with the resonant peak held 7 dB below unity loop gain. Without an
/// output capacitor series resistance a PI cannot damp the resonance.
const KP: f64 = 0.005;
const KI: f64 = 100.0;
/// Computation delay of the digital controller (s).
const DELAY: f64 = 1.5e-6;
/// Settling band (fraction of the set-point).
const BAND: f64 = 0.01;

/// The power stage with its load step; `gate` drives the switch `S1`.
fn power_stage(gate: Gate) -> Circuit {
    Circuit::builder()
        .description("voltage-mode buck, 12 V to 5 V, 100 kHz, +50 % load step at 10 ms")
        .voltage_source("Vin", "in", "gnd", VIN)
        .switch("S1", "in", "sw", gate.name())
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", L)
        .capacitor("C1", "out", "gnd", C)
        .resistor("Rload", "out", "gnd", RLOAD)
        .switch("Sstep", "out", "x", "step")
        .resistor("Rstep", "x", "gnd", RSTEP)
        .gate(gate)
        .gate(Gate::Transitions {
            name: "step".into(),
            initial: false,
            transitions: vec![Transition {
                time: T_STEP,
                on: true,
            }],
            period: None,
        })
        .build_unchecked()
}

/// Set-point during the soft-start ramp and after it.
fn set_point(t: f64) -> f64 {
    VREF * (t / SOFT_START).min(1.0)
}

/// Type-III compensator for a 10 kHz crossover, G(s) = g/s·((1 + s/ωz)/(1 + s/ωp))²
/// with both zeros at 1.5 kHz (below the LC resonance) and both poles at
/// 60 kHz; g puts the loop magnitude at exactly 1 at the crossover (loop:
/// Vin/Vramp · G / |1 + sL/R + s²LC|). Returns g and the law.
fn type_three() -> (f64, CompensatorLaw) {
    let (fc, fz, fp) = (10e3, 1.5e3, 60e3);
    let w = 2.0 * PI * fc;
    let plant = VIN / VRAMP / ((1.0 - w * w * L * C).powi(2) + (w * L / RLOAD).powi(2)).sqrt();
    let shape = (1.0 + (fc / fz).powi(2)) / (1.0 + (fc / fp).powi(2)) / w;
    let g = 1.0 / (plant * shape);
    let law = CompensatorLaw::PolesZeros {
        gain: g,
        integrator: true,
        zeros_hz: vec![fz, fz],
        poles_hz: vec![fp, fp],
    };
    (g, law)
}

/// Analog loop: compensator `K` on the output, PWM comparator against the
/// sawtooth; the soft-start moves K's set-point once per period.
fn run_analog(law: CompensatorLaw) -> Result<RunResult, Box<dyn Error>> {
    let mut circuit = power_stage(Gate::VoltageMode {
        name: "vm".into(),
        frequency: FS,
        control: "K.output".into(),
        ramp_low: 0.0,
        ramp_high: VRAMP,
        min_duty: 0.0,
        max_duty: MAX_DUTY,
    });
    circuit.compensators.push(Compensator {
        name: "K".into(),
        input: "out".into(),
        reference: 0.0,
        law,
    });
    circuit.validate()?;
    let mut sim = Simulator::new(&circuit, Options::default())?;
    let soft_start = |t: f64, _: &[Option<f64>], cmd: &mut Commands| {
        if t <= SOFT_START + T {
            cmd.set_reference("K", set_point(t));
        }
    };
    let sampling = Sampling {
        period: T,
        ..Sampling::default()
    };
    sim.add_controller(sampling, Box::new(soft_start))?;
    sim.advance_to(T_END)?;
    Ok(sim.finish())
}

/// Digital loop: PI on the sampled output with the integrator clamped to
/// the duty range (anti-windup).
fn run_digital() -> Result<RunResult, Box<dyn Error>> {
    let circuit = power_stage(Gate::Pwm {
        name: "drive".into(),
        frequency: FS,
        duty: 0.0,
        delay: 0.0,
        start: None,
        stop: None,
    });
    circuit.validate()?;
    let mut sim = Simulator::new(&circuit, Options::default())?;
    let mut integral = 0.0;
    let pi = move |t: f64, y: &[Option<f64>], cmd: &mut Commands| {
        let e = set_point(t) - y[0].expect("the output node is always determined");
        integral = (integral + KI * T * e).clamp(0.0, MAX_DUTY);
        cmd.set_duty("drive", (KP * e + integral).clamp(0.0, MAX_DUTY));
    };
    let sampling = Sampling {
        inputs: vec!["out".into()],
        period: T,
        offset: 0.0,
        delay: DELAY,
        apply: Apply::NextPeriod,
    };
    sim.add_controller(sampling, Box::new(pi))?;
    sim.advance_to(T_END)?;
    Ok(sim.finish())
}

/// The peak above the set-point, reported as an overshoot (time after
/// `since`) only where it rises above the peak of the settled ripple
/// `steady` by more than a tenth of that ripple; below that it is the
/// ripple itself.
fn overshoot(max: f64, at: f64, steady: &Measurement, since: f64) -> String {
    if max > steady.max + 0.1 * steady.peak_to_peak {
        format!(
            "overshoot {:+.2} mV ({:+.3} %) at +{:.3} ms",
            (max - VREF) * 1e3,
            (max - VREF) / VREF * 100.0,
            (at - since) * 1e3
        )
    } else {
        "no overshoot beyond the ripple".to_string()
    }
}

fn fmt_settle(s: Option<f64>) -> String {
    s.map_or("not settled".into(), |t| format!("{:.3} ms", t * 1e3))
}

fn report(label: &str, run: &RunResult) -> Result<(), Box<dyn Error>> {
    let w = &run.waveform;
    let out = w.output("out")?;
    let start = measure(w, out, 0.0, T_STEP)?;
    let step = measure(w, out, T_STEP, T_END)?;
    let fin = measure(w, out, T_END - 10.0 * T, T_END)?;
    let il = w.output("L1.current")?;
    let ripple = measure(w, il, T_END - 10.0 * T, T_END)?;
    println!("{label}");
    let pre = measure(w, out, T_STEP - 10.0 * T, T_STEP)?;
    println!(
        "  start-up   settling (±1 %) {:>12}   {}",
        fmt_settle(settling_time(w, out, VREF, BAND, 0.0, T_STEP, T)?),
        overshoot(start.max, start.time_of_max, &pre, 0.0),
    );
    println!(
        "  load step  settling (±1 %) {:>12}   undershoot {:8.2} mV ({:.3} %) at +{:.3} ms, {}",
        fmt_settle(settling_time(w, out, VREF, BAND, T_STEP, T_END, T)?),
        (VREF - step.min) * 1e3,
        (VREF - step.min) / VREF * 100.0,
        (step.time_of_min - T_STEP) * 1e3,
        overshoot(step.max, step.time_of_max, &fin, T_STEP),
    );
    println!(
        "  final      average {:.5} V, error {:+.3} mV ({:+.4} %), output ripple {:.2} mV p-p, \
         inductor {:.3} A avg / {:.3} A p-p",
        fin.average,
        (fin.average - VREF) * 1e3,
        (fin.average - VREF) / VREF * 100.0,
        fin.peak_to_peak * 1e3,
        ripple.average,
        ripple.peak_to_peak
    );
    println!(
        "  event log {} entries; solver: {} scheduled instants, {} located events, {} modes",
        run.events.len(),
        run.stats.scheduled_events,
        run.stats.state_events,
        run.stats.modes
    );
    Ok(())
}

/// Review figure from `before` the load step to `after` it (s).
fn figure(
    title: &str,
    run: &RunResult,
    (before, after): (f64, f64),
    path: &str,
) -> Result<(), Box<dyn Error>> {
    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into(), "out".into()],
        window: Some((T_STEP - before, T_STEP + after)),
        ..ReviewOptions::default()
    };
    let fig = review_figure(title, &run.waveform, Some(&run.events), &opts)?;
    write_svg(&fig, path)?;
    println!("  figure written to {path}");
    Ok(())
}

fn main() -> Result<(), Box<dyn Error>> {
    println!(
        "voltage-mode buck {VIN} V → {VREF} V, {} kHz, L = {} µH, C = {} µF, \
         load {} A → {} A at {} ms, soft-start {} ms",
        FS / 1e3,
        L * 1e6,
        C * 1e6,
        VREF / RLOAD,
        VREF / RLOAD + VREF / RSTEP,
        T_STEP * 1e3,
        SOFT_START * 1e3
    );
    std::fs::create_dir_all("out")?;

    let (g, law) = type_three();
    println!("\ntype III: g = {g:.1} /s, zeros 1.5 kHz ×2, poles 60 kHz ×2");
    let analog3 = run_analog(law)?;
    report("analog type-III compensator (10 kHz crossover)", &analog3)?;
    figure(
        "closed-loop buck, analog type III: +50 % load step",
        &analog3,
        (0.1e-3, 0.5e-3),
        "out/closed_loop_buck.svg",
    )?;

    println!("\nPI gains kp = {KP}, ki = {KI} /s (analog and digital alike)");
    let analog_pi = run_analog(CompensatorLaw::Pi { kp: KP, ki: KI })?;
    report("analog PI compensator", &analog_pi)?;

    let digital = run_digital()?;
    report(
        &format!(
            "digital PI (sample at each period start, {} µs delay, next-period update)",
            DELAY * 1e6
        ),
        &digital,
    )?;
    figure(
        "closed-loop buck, digital PI: +50 % load step",
        &digital,
        (0.2e-3, 1.6e-3),
        "out/closed_loop_buck_digital.svg",
    )?;
    Ok(())
}
