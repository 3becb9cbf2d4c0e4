//! The losses block of `fluxstep run` and `fluxstep steady`: the energy
//! balance certificate of every run, and, where the circuit has loss data
//! or loads, the efficiency, the loss by mechanism and by part, junction
//! temperatures and the loss chart (`losses.svg`).

use std::fmt::Write as _;

use fluxstep_analysis::losses::thermal::{junction_temperature_of, ThermalStart};
use fluxstep_analysis::losses::{
    breakdown, has_loss_data, loads, LossOptions, LossReport, PartTotals,
};
use fluxstep_netlist::si::format_si_digits;
use fluxstep_netlist::{Circuit, Element};
use fluxstep_plot::{loss_chart_svg, LossBar};
use fluxstep_solver::{EnergyCertificate, EventLog, Waveform};

/// Largest energy-balance residual a run may show, relative to the
/// largest term of the balance (input, output plus losses, stored energy):
/// beyond it the run's numbers are not trusted and the command exits 1.
/// Exact runs of the example circuits stay below 1e-12.
pub(crate) const BALANCE_TOLERANCE: f64 = 1e-6;

/// The energy balance of a run failed its tolerance (exit status 1).
#[derive(Debug)]
pub struct BalanceFailed(pub String);

impl std::fmt::Display for BalanceFailed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for BalanceFailed {}

/// What the losses block adds to a command's output.
pub(crate) struct Section {
    /// The `losses` value of summary.json.
    pub json: serde_json::Value,
    /// Lines for the terminal (each starting with two spaces).
    pub text: String,
    /// The loss chart, when the circuit has loss data.
    pub chart: Option<String>,
    /// The balance failed its tolerance.
    pub failed: Option<BalanceFailed>,
}

impl Section {
    /// Prints the losses lines and the line naming the files written into
    /// `dir` (the waveform, events, summary and figure, and the loss chart
    /// when there is one): the tail of `run` and `steady` alike.
    pub(crate) fn print_with_files(&self, dir: &std::path::Path) {
        print!("{}", self.text);
        println!(
            "  written: {}/{{waveform.csv, events.json, summary.json, figure.svg{}}}",
            dir.display(),
            if self.chart.is_some() {
                ", losses.svg"
            } else {
                ""
            }
        );
    }
}

fn w(p: f64) -> String {
    format_si_digits(p, "W", 3)
}

/// The losses block over `[t0, t1]` (the recorded window of a run, or one
/// period of a steady state with `periodic`).
pub(crate) fn section(
    c: &Circuit,
    waveform: &Waveform,
    events: &EventLog,
    (t0, t1): (f64, f64),
    periodic: bool,
    title: &str,
) -> Section {
    let loads = loads(c);
    let mut text = String::new();
    let report = match breakdown(
        c,
        waveform,
        events,
        t0,
        t1,
        &LossOptions {
            loads: loads.clone(),
        },
    ) {
        Ok(r) => r,
        Err(e) => {
            let _ = writeln!(text, "  energy balance: not evaluated ({e})");
            return Section {
                json: serde_json::json!({ "error": e.to_string() }),
                text,
                chart: None,
                failed: None,
            };
        }
    };
    let (mut json, failed) = balance(&report, (t0, t1), &mut text);
    if !has_loss_data(c, &loads) {
        return Section {
            json,
            text,
            chart: None,
            failed,
        };
    }
    let (parts, efficiency) = breakdown_lines(&report, &loads, &mut json, &mut text);
    junction_lines(
        c,
        waveform,
        events,
        (t0, t1),
        periodic,
        &mut json,
        &mut text,
    );
    let bars: Vec<LossBar> = parts
        .into_iter()
        .map(|t| LossBar {
            part: t.part,
            by_kind: t.by_kind,
        })
        .collect();
    let heading = match efficiency {
        Some(e) => format!("{title}: losses, efficiency {:.2} %", 100.0 * e),
        None => format!("{title}: losses"),
    };
    Section {
        json,
        text,
        chart: Some(loss_chart_svg(Some(&heading), &bars)),
        failed,
    }
}

/// The run's own energy certificate (checked by the solver as the run
/// went, over the recorded segments) as the `certificate` of summary.json.
pub(crate) fn certificate_json(c: &EnergyCertificate) -> serde_json::Value {
    serde_json::json!({
        "delivered": c.delivered,
        "dissipated": c.dissipated,
        "jumps": c.jumps,
        "stored_change": c.stored_change,
        "residual": c.residual,
        "relative": c.relative_residual(),
        "tolerance": fluxstep_solver::DEFAULT_ENERGY_TOLERANCE,
        "checked_time": c.checked_time,
        "unchecked_time": c.unchecked_time,
        "checked_segments": c.checked_segments,
    })
}

/// The certificate's console line.
pub(crate) fn certificate_line(c: &EnergyCertificate) -> String {
    let j = |e: f64| format_si_digits(e, "J", 4);
    let mut s = format!(
        "  energy certificate: sources delivered {}, parts dissipated {}, jumps lost {}, \
         storage gained {}; residual {:.1e} of the largest term, checked over {}",
        j(c.delivered),
        j(c.dissipated),
        j(c.jumps),
        j(c.stored_change),
        c.relative_residual(),
        fluxstep_netlist::si::format_si_digits(c.checked_time, "s", 4),
    );
    if c.unchecked_time > 0.0 {
        let _ = write!(
            s,
            " ({} not checked: see docs/outputs.md)",
            fluxstep_netlist::si::format_si_digits(c.unchecked_time, "s", 4)
        );
    }
    s.push('\n');
    s
}

/// The energy balance line and its `losses` JSON, with the error when it
/// fails its tolerance.
fn balance(
    report: &LossReport,
    (t0, t1): (f64, f64),
    text: &mut String,
) -> (serde_json::Value, Option<BalanceFailed>) {
    let residual = report.balance_residual();
    let relative = report.balance_error();
    let ok = relative <= BALANCE_TOLERANCE;
    let _ = writeln!(
        text,
        "  energy balance: residual {residual:.2e} J, {relative:.1e} of the largest term \
         (tolerance {BALANCE_TOLERANCE:.0e}){}",
        if ok { "" } else { ": FAILED" }
    );
    let failed = (!ok).then(|| {
        BalanceFailed(format!(
            "the energy balance over [{t0:e}, {t1:e}] s is off by {residual:.3e} J \
             ({relative:.2e} of its largest term, tolerance {BALANCE_TOLERANCE:.0e}): \
             the numbers of this run are not to be trusted; check the circuit for \
             values at the limits of double precision"
        ))
    });
    let json = serde_json::json!({
        "t0": t0,
        "t1": t1,
        "balance": {
            "residual": residual,
            "relative": relative,
            "tolerance": BALANCE_TOLERANCE,
            "passed": ok,
        },
    });
    (json, failed)
}

/// The efficiency, the loss by mechanism and by part and the parts outside
/// their switching-energy tables; returns the parts worth a bar of the
/// chart and the efficiency.
fn breakdown_lines(
    report: &LossReport,
    loads: &[String],
    json: &mut serde_json::Value,
    text: &mut String,
) -> (Vec<PartTotals>, Option<f64>) {
    let kinds = report.by_kind();
    // Parts whose loss is rounding noise of the converter's power (ideal
    // parts) are left out of the table and the chart.
    let noise = 1e-9 * (report.total_loss().abs() + report.output_power().abs());
    let parts: Vec<_> = report
        .by_part()
        .into_iter()
        .filter(|p| p.total.abs() > noise)
        .collect();
    let efficiency = report.efficiency();
    json["loads"] = serde_json::json!(loads);
    json["input_power"] = report.input_power().into();
    json["output_power"] = report.output_power().into();
    json["total_loss"] = report.total_loss().into();
    json["efficiency"] = efficiency.into();
    json["by_kind"] = serde_json::to_value(&kinds).unwrap_or_default();
    json["parts"] = serde_json::to_value(&report.parts).unwrap_or_default();
    if !report.outside_tables.is_empty() {
        json["outside_tables"] = serde_json::to_value(&report.outside_tables).unwrap_or_default();
    }
    let _ = writeln!(
        text,
        "  losses ({}): input {}, output {}, losses {}, efficiency {}",
        if loads.is_empty() {
            "no loads named".to_string()
        } else {
            format!("loads {}", loads.join(", "))
        },
        w(report.input_power()),
        w(report.output_power()),
        w(report.total_loss()),
        efficiency.map_or("not defined".into(), |e| format!("{:.3} %", 100.0 * e)),
    );
    // Efficiency is a steady-state figure: say so when the window's stored
    // energy moved (a start-up or a load step inside it).
    let moved = report.stored.1 - report.stored.0;
    if moved.abs() > 1e-4 * report.input_energy.abs() {
        let _ = writeln!(
            text,
            "    note: the stored energy changed by {} over the window ({:.2} % of the input \
             energy), so the window is not in steady state and the efficiency is not the \
             converter's",
            format_si_digits(moved, "J", 3),
            100.0 * moved / report.input_energy
        );
    }
    json["stored_energy_change"] = moved.into();
    let by_kind: Vec<String> = [
        ("conduction", kinds.conduction),
        ("switching", kinds.switching),
        ("recovery", kinds.recovery),
        ("core", kinds.core),
        ("jump", kinds.jump),
    ]
    .iter()
    .filter(|k| k.1 != 0.0)
    .map(|(k, p)| format!("{k} {}", w(*p)))
    .collect();
    if !by_kind.is_empty() {
        let _ = writeln!(text, "    by mechanism: {}", by_kind.join(", "));
    }
    for p in &parts {
        let kinds: Vec<String> = p
            .by_kind
            .iter()
            .map(|(k, v)| format!("{k} {}", w(*v)))
            .collect();
        let _ = writeln!(
            text,
            "    {:<20} {:>10}   {}",
            p.part,
            w(p.total),
            kinds.join(", ")
        );
    }
    for o in &report.outside_tables {
        let _ = writeln!(
            text,
            "    warning: {} {} at t = {:e} s switches {} against {}, outside its \
             switching-energy table (not counted)",
            o.element,
            if o.on { "turn-on" } else { "turn-off" },
            o.time,
            format_si_digits(o.current, "A", 3),
            format_si_digits(o.voltage, "V", 3)
        );
    }
    (parts, efficiency)
}

/// The junction temperature of every part with a thermal network.
fn junction_lines(
    c: &Circuit,
    waveform: &Waveform,
    events: &EventLog,
    (t0, t1): (f64, f64),
    periodic: bool,
    json: &mut serde_json::Value,
    text: &mut String,
) {
    let start = if periodic {
        ThermalStart::Periodic
    } else {
        ThermalStart::Ambient
    };
    let mut junctions = vec![];
    for e in &c.elements {
        let name = match e {
            Element::Switch(s) if s.thermal.is_some() => &s.name,
            Element::Diode(d) if d.thermal.is_some() => &d.name,
            _ => continue,
        };
        match junction_temperature_of(c, waveform, events, name, t0, t1, start) {
            Ok(j) => {
                let _ = writeln!(
                    text,
                    "    junction {:<11} mean {:.1} °C, peak {:.1} °C, ripple {:.2} K",
                    j.element,
                    j.steady,
                    j.max,
                    j.ripple()
                );
                if let Some(warn) = j.warning() {
                    let _ = writeln!(text, "    warning: {warn}");
                }
                junctions.push(serde_json::to_value(&j).unwrap_or_default());
            }
            Err(e) => {
                let _ = writeln!(text, "    junction {name}: not evaluated ({e})");
            }
        }
    }
    if !junctions.is_empty() {
        json["junctions"] = junctions.into();
    }
}
