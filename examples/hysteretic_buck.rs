//! Hysteretic (ripple-regulated) buck: 12 V → 5 V, 2.5 A, the switch turning
//! off when the output rises above 5.025 V and on when it falls below
//! 4.975 V — no clock, no compensator. The output capacitor's series
//! resistance (30 mΩ) puts a ripple in phase with the inductor current on
//! the output, which is what makes the switching frequency well defined.
//!
//! The supply ramps from 0 to 12 V over 1 ms (the switch stays on while the
//! output is below the band, so the output follows the supply up without
//! the inrush of a hard start); at 3 ms the load steps by +50 % (2.5 A →
//! 3.75 A). Every comparator crossing is a state event located on the exact
//! solution.
//!
//! Prints the switching frequency observed before and after the load step
//! (from the switch-on instants), output and inductor ripple and final error
//! (exact extremes and average over whole switching cycles), the overshoot
//! at start-up, the undershoot at the load step, and the settling times
//! (output within ±1 % of 5 V for good). Writes `out/hysteretic_buck.svg`
//! around the load step.

use std::error::Error;

use fluxstep::netlist::{Circuit, Gate, Stimulus as Source, Transition};
use fluxstep::plot::{review_figure, write_svg, ReviewOptions};
use fluxstep::solver::measure::{measure, settling_time};
use fluxstep::solver::{simulate, EventKind, Options, RunResult};

const VIN: f64 = 12.0;
const VREF: f64 = 5.0;
const HYST: f64 = 0.05;
const L: f64 = 10e-6;
const C: f64 = 47e-6;
const ESR: f64 = 30e-3;
const RLOAD: f64 = 2.0;
const RSTEP: f64 = 4.0;
const SUPPLY_RAMP: f64 = 1e-3;
const T_STEP: f64 = 3e-3;
const T_END: f64 = 5e-3;
const BAND: f64 = 0.01;
/// Scan length for the settling search (s); a fraction of a switching cycle.
const CHUNK: f64 = 1e-6;

fn hysteretic_buck() -> Result<Circuit, Box<dyn Error>> {
    Ok(Circuit::builder()
        .description("hysteretic buck, 12 V to 5 V, ±25 mV band, +50 % load step at 3 ms")
        .voltage_waveform(
            "Vin",
            "in",
            "gnd",
            Source::pwl(&[(0.0, 0.0), (SUPPLY_RAMP, VIN)]),
        )
        .switch("S1", "in", "sw", "hy")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", L)
        .resistor("Resr", "out", "cap", ESR)
        .capacitor("C1", "cap", "gnd", C)
        .resistor("Rload", "out", "gnd", RLOAD)
        .switch("Sstep", "out", "x", "step")
        .resistor("Rstep", "x", "gnd", RSTEP)
        .gate(Gate::Hysteretic {
            name: "hy".into(),
            sense: "out".into(),
            low: VREF - HYST / 2.0,
            high: VREF + HYST / 2.0,
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

fn fmt_settle(s: Option<f64>) -> String {
    s.map_or("not settled".into(), |t| format!("{:.3} ms", t * 1e3))
}

/// Whole switching cycles within a time span.
struct Cycles {
    /// Number of cycles.
    count: usize,
    /// Mean switching frequency over them (Hz).
    frequency: f64,
    /// From the first switch-on instant to the last (s).
    window: (f64, f64),
}

/// Switching cycles in [t0, t1], delimited by switch-on instants.
fn cycles(run: &RunResult, t0: f64, t1: f64) -> Result<Cycles, Box<dyn Error>> {
    let ons: Vec<f64> = run
        .events
        .of("S1")
        .filter(|e| e.kind == EventKind::SwitchOn && e.time >= t0 && e.time <= t1)
        .map(|e| e.time)
        .collect();
    if ons.len() < 2 {
        return Err(format!("fewer than two switching cycles in [{t0:e}, {t1:e}] s").into());
    }
    let (a, b) = (ons[0], ons[ons.len() - 1]);
    let n = ons.len() - 1;
    Ok(Cycles {
        count: n,
        frequency: n as f64 / (b - a),
        window: (a, b),
    })
}

fn steady(label: &str, run: &RunResult, t0: f64, t1: f64) -> Result<(), Box<dyn Error>> {
    let w = &run.waveform;
    let Cycles {
        count: n,
        frequency: f,
        window: (a, b),
    } = cycles(run, t0, t1)?;
    let out = measure(w, w.output("out")?, a, b)?;
    let il = measure(w, w.output("L1.current")?, a, b)?;
    println!(
        "  {label:<11} {n} cycles in {:.3}…{:.3} ms: frequency {:.1} kHz",
        a * 1e3,
        b * 1e3,
        f / 1e3
    );
    println!(
        "              output {:.5} V (error {:+.2} mV, {:+.3} %), ripple {:.2} mV p-p \
         ({:.4}…{:.4} V)",
        out.average,
        (out.average - VREF) * 1e3,
        (out.average - VREF) / VREF * 100.0,
        out.peak_to_peak * 1e3,
        out.min,
        out.max
    );
    println!(
        "              inductor {:.4} A average, {:.4} A p-p ({:.4}…{:.4} A)",
        il.average, il.peak_to_peak, il.min, il.max
    );
    Ok(())
}

fn main() -> Result<(), Box<dyn Error>> {
    let circuit = hysteretic_buck()?;
    let run = simulate(&circuit, T_END, Options::default())?;
    let w = &run.waveform;
    let out = w.output("out")?;
    println!(
        "hysteretic buck {VIN} V → {VREF} V, band {:.3}…{:.3} V, L = {} µH, C = {} µF + {} mΩ, \
         load {} A → {} A at {} ms, supply ramp {} ms",
        VREF - HYST / 2.0,
        VREF + HYST / 2.0,
        L * 1e6,
        C * 1e6,
        ESR * 1e3,
        VREF / RLOAD,
        VREF / RLOAD + VREF / RSTEP,
        T_STEP * 1e3,
        SUPPLY_RAMP * 1e3
    );
    let start = measure(w, out, 0.0, T_STEP)?;
    let step = measure(w, out, T_STEP, T_END)?;
    println!(
        "  start-up    settling (±1 %) {:>10}, overshoot {:+.2} mV ({:+.3} %) at {:.4} ms",
        fmt_settle(settling_time(w, out, VREF, BAND, 0.0, T_STEP, CHUNK)?),
        (start.max - VREF) * 1e3,
        (start.max - VREF) / VREF * 100.0,
        start.time_of_max * 1e3
    );
    steady("before step", &run, T_STEP - 0.5e-3, T_STEP)?;
    println!(
        "  load step   settling (±1 %) {:>10}, undershoot {:.2} mV ({:.3} %) at +{:.2} µs",
        fmt_settle(settling_time(w, out, VREF, BAND, T_STEP, T_END, CHUNK)?),
        (VREF - step.min) * 1e3,
        (VREF - step.min) / VREF * 100.0,
        (step.time_of_min - T_STEP) * 1e6
    );
    steady("final", &run, T_END - 0.5e-3, T_END)?;
    println!(
        "  event log {} entries; solver: {} scheduled instants, {} located events, {} modes",
        run.events.len(),
        run.stats.scheduled_events,
        run.stats.state_events,
        run.stats.modes
    );

    let opts = ReviewOptions {
        outputs: vec!["L1.current".into(), "sw".into(), "out".into()],
        window: Some((T_STEP - 30e-6, T_STEP + 60e-6)),
        ..ReviewOptions::default()
    };
    let fig = review_figure(
        "hysteretic buck: +50 % load step",
        w,
        Some(&run.events),
        &opts,
    )?;
    std::fs::create_dir_all("out")?;
    write_svg(&fig, "out/hysteretic_buck.svg")?;
    println!("  figure written to out/hysteretic_buck.svg");
    Ok(())
}
