//! Peak-current-mode boost (12 V → 24 V, 100 kHz, 1 A load, then a +50 %
//! load step to 1.5 A at 10 ms) with an outer digital voltage loop.
//!
//! Inner loop: the switch turns on at every clock edge and off when the
//! inductor current reaches the peak reference minus a compensation ramp
//! (0.3 A/µs, more than half the inductor current's down-slope
//! (24 V − 12 V)/22 µH = 0.55 A/µs, so the current loop is stable at any
//! duty). The turn-off is a comparator event located on the exact solution.
//!
//! Outer loop: a PI controller samples the output once per period, a
//! quarter period after the clock edge (mid-way through the on-time, where
//! the falling output is near its average), and 1 µs later (its
//! computation delay) sets the peak reference with
//! `Commands::set_reference`. Its set-point ramps from 12 V to 24 V over
//! 2 ms (soft-start); the output capacitor starts charged to the input
//! voltage, as it is through the diode once power is applied.
//!
//! Prints settling time (output within ±1 % of 24 V for good, from the
//! exact extremes of every period, refined by bisection), overshoot and
//! undershoot (exact extremes), final error (average over the last 10
//! periods) and the on-time spread of the last periods (period-one
//! operation). Writes `out/peak_current_boost.svg` around the load step.

use std::error::Error;

use fluxstep::netlist::{Circuit, Gate, Transition};
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::control::{Apply, Commands, Sampling};
use fluxstep::solver::measure::{measure, settling_time, Measurement};
use fluxstep::solver::{EventKind, Options, RunResult, Simulator};

const VIN: f64 = 12.0;
const VREF: f64 = 24.0;
const FS: f64 = 100e3;
const T: f64 = 1.0 / FS;
const L: f64 = 22e-6;
const C: f64 = 100e-6;
/// 24 V / 24 Ω = 1 A.
const RLOAD: f64 = 24.0;
/// Switched in parallel at `T_STEP`: +0.5 A, +50 %.
const RSTEP: f64 = 48.0;
const T_STEP: f64 = 10e-3;
const T_END: f64 = 20e-3;
const SOFT_START: f64 = 2e-3;
/// Compensation ramp (A/s).
const SLOPE: f64 = 0.3e6;
const MAX_DUTY: f64 = 0.85;
/// Peak reference limit (A): the current limit of the stage.
const I_LIMIT: f64 = 6.0;
/// Outer PI: current-mode control-to-output gain ≈ R(1 − D)/2 = 6 V/A with
/// its pole at 2/(RC) ≈ 130 Hz; KP puts the crossover near 2 kHz, KI/KP
/// its zero near 200 Hz. The right-half-plane zero, R(1 − D)²/(2πL)
/// ≈ 43 kHz, is far above.
const KP: f64 = 2.5;
const KI: f64 = 3200.0;
const DELAY: f64 = 1e-6;
/// Sample instant within the period (fraction): mid-way through the
/// on-time, where the output, falling linearly, is near its average.
const SAMPLE_AT: f64 = 0.25;
const BAND: f64 = 0.01;

fn boost() -> Result<Circuit, Box<dyn Error>> {
    Ok(Circuit::builder()
        .description("peak-current-mode boost, 12 V to 24 V, 100 kHz, +50 % load step")
        .voltage_source("Vin", "in", "gnd", VIN)
        .inductor("L1", "in", "sw", L)
        .switch("S1", "sw", "gnd", "pc")
        .diode("D1", "sw", "out")
        .capacitor_with_voltage("C1", "out", "gnd", C, VIN)
        .resistor("Rload", "out", "gnd", RLOAD)
        .switch("Sstep", "out", "x", "step")
        .resistor("Rstep", "x", "gnd", RSTEP)
        .gate(Gate::PeakCurrent {
            name: "pc".into(),
            frequency: FS,
            sense: "L1.current".into(),
            reference: 0.0,
            slope: SLOPE,
            max_duty: MAX_DUTY,
        })
        .gate(Gate::Transitions {
            name: "step".into(),
            initial: false,
            transitions: vec![Transition {
                time: T_STEP,
                on: true,
            }],
            period: None,
        })
        .build()?)
}

fn set_point(t: f64) -> f64 {
    VIN + (VREF - VIN) * (t / SOFT_START).min(1.0)
}

/// The peak above the set-point, reported as an overshoot (time after
/// `since`) only where it rises above the peak of the settled ripple
/// `steady` by more than a tenth of that ripple; below that it is the
/// ripple itself.
fn overshoot(max: f64, at: f64, steady: &Measurement, since: f64) -> String {
    if max > steady.max + 0.1 * steady.peak_to_peak {
        format!(
            "overshoot {:+.1} mV ({:+.3} %) at +{:.3} ms",
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

fn main() -> Result<(), Box<dyn Error>> {
    let circuit = boost()?;
    let mut sim = Simulator::new(&circuit, Options::default())?;
    let mut integral = 0.0;
    let outer = move |t: f64, y: &[Option<f64>], cmd: &mut Commands| {
        let e = set_point(t) - y[0].expect("the output node is always determined");
        integral = (integral + KI * T * e).clamp(0.0, I_LIMIT);
        cmd.set_reference("pc", (KP * e + integral).clamp(0.0, I_LIMIT));
    };
    let sampling = Sampling {
        inputs: vec!["out".into()],
        period: T,
        offset: SAMPLE_AT * T,
        delay: DELAY,
        apply: Apply::NextPeriod,
    };
    sim.add_controller(sampling, Box::new(outer))?;
    sim.advance_to(T_END)?;
    let run: RunResult = sim.finish();
    let w = &run.waveform;
    let out = w.output("out")?;
    let il = w.output("L1.current")?;

    println!(
        "peak-current boost {VIN} V → {VREF} V, {} kHz, L = {} µH, C = {} µF, ramp {} A/µs, \
         load {} A → {} A at {} ms, soft-start {} ms",
        FS / 1e3,
        L * 1e6,
        C * 1e6,
        SLOPE * 1e-6,
        VREF / RLOAD,
        VREF / RLOAD + VREF / RSTEP,
        T_STEP * 1e3,
        SOFT_START * 1e3
    );
    println!(
        "outer digital PI: kp = {KP} A/V, ki = {KI} A/(V·s), sampled at {} of each period, \
         {} µs delay",
        SAMPLE_AT,
        DELAY * 1e6
    );
    let start = measure(w, out, 0.0, T_STEP)?;
    let step = measure(w, out, T_STEP, T_END)?;
    let fin = measure(w, out, T_END - 10.0 * T, T_END)?;
    let fin_il = measure(w, il, T_END - 10.0 * T, T_END)?;
    let start_il = measure(w, il, 0.0, T_STEP)?;
    let pre = measure(w, out, T_STEP - 10.0 * T, T_STEP)?;
    println!(
        "  start-up   settling (±1 %) {:>10}   {}, \
         inductor peak {:.3} A",
        fmt_settle(settling_time(w, out, VREF, BAND, 0.0, T_STEP, T)?),
        overshoot(start.max, start.time_of_max, &pre, 0.0),
        start_il.max,
    );
    println!(
        "  load step  settling (±1 %) {:>10}   undershoot {:8.1} mV ({:.3} %) at +{:.3} ms, {}",
        fmt_settle(settling_time(w, out, VREF, BAND, T_STEP, T_END, T)?),
        (VREF - step.min) * 1e3,
        (VREF - step.min) / VREF * 100.0,
        (step.time_of_min - T_STEP) * 1e3,
        overshoot(step.max, step.time_of_max, &fin, T_STEP),
    );
    println!(
        "  final      average {:.5} V, error {:+.2} mV ({:+.4} %), output ripple {:.1} mV p-p",
        fin.average,
        (fin.average - VREF) * 1e3,
        (fin.average - VREF) / VREF * 100.0,
        fin.peak_to_peak * 1e3
    );
    println!(
        "             inductor {:.4} A average, {:.4} A peak, {:.4} A p-p",
        fin_il.average, fin_il.max, fin_il.peak_to_peak
    );
    // On-times of the last periods: equal in period-one operation.
    let mut on_times = vec![];
    let mut on = None;
    for e in run.events.of("S1") {
        match e.kind {
            EventKind::SwitchOn => on = Some(e.time),
            EventKind::SwitchOff => {
                if let Some(t) = on.take() {
                    on_times.push(e.time - t);
                }
            }
            _ => {}
        }
    }
    let last = &on_times[on_times.len().saturating_sub(20)..];
    let (lo, hi) = last
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), d| {
            (l.min(*d), h.max(*d))
        });
    println!(
        "             last {} on-times {:.4} µs (duty {:.4}), spread {:.2e} s",
        last.len(),
        hi * 1e6,
        hi / T,
        hi - lo
    );
    println!(
        "  event log {} entries; solver: {} scheduled instants, {} located events, {} modes",
        run.events.len(),
        run.stats.scheduled_events,
        run.stats.state_events,
        run.stats.modes
    );

    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into(), "out".into()],
        window: Some((T_STEP - 0.1e-3, T_STEP + 0.8e-3)),
        ..ReviewOptions::default()
    };
    let fig = review_figure(
        "peak-current boost with digital voltage loop: +50 % load step",
        w,
        Some(&run.events),
        &opts,
    )?;
    std::fs::create_dir_all("out")?;
    write_svg(&fig, "out/peak_current_boost.svg")?;
    println!("  figure written to out/peak_current_boost.svg");
    Ok(())
}
