//! `fluxstep check FILE`: read and validate a circuit and print a summary.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::Context as _;
use fluxstep_netlist::si::format_si_short as si;
use fluxstep_netlist::{Circuit, Compensator, CompensatorLaw, Gate, OutputName};

/// Arguments of `fluxstep check`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The circuit file (JSON, see docs/netlist.md).
    pub file: PathBuf,
}

/// Validates the file and prints its summary on stdout.
///
/// # Errors
///
/// As [`crate::input::read_circuit`] (unreadable file, not a JSON circuit,
/// or a circuit that breaks rules), and a circuit the solver cannot compile.
pub fn run(args: &Args) -> anyhow::Result<()> {
    let circuit = crate::input::read_circuit(&args.file)?;
    let text = summary(&args.file, &circuit).with_context(|| args.file.display().to_string())?;
    print!("{text}");
    Ok(())
}

/// The element kinds in the order the summary lists them, with their
/// names for one and for several.
const KINDS: [(&str, &str, &str); 9] = [
    ("voltage_source", "voltage source", "voltage sources"),
    ("current_source", "current source", "current sources"),
    ("resistor", "resistor", "resistors"),
    ("inductor", "inductor", "inductors"),
    ("capacitor", "capacitor", "capacitors"),
    (
        "coupled_inductors",
        "set of coupled inductors",
        "sets of coupled inductors",
    ),
    (
        "ideal_transformer",
        "ideal transformer",
        "ideal transformers",
    ),
    ("switch", "switch", "switches"),
    ("diode", "diode", "diodes"),
];

fn plural(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// The unit of an output named in a gate or compensator ("A" for a
/// current, "V" for a voltage, "" for a compensator output).
fn unit(output: &str) -> &'static str {
    OutputName::parse(output).map(|o| o.unit()).unwrap_or("")
}

/// One compensator: name, law, what it measures and its set-point.
fn describe_compensator(k: &Compensator) -> String {
    let law = match &k.law {
        CompensatorLaw::Pi { kp, ki } => format!("PI, kp {kp}, ki {}", si(*ki, "/s")),
        CompensatorLaw::PolesZeros {
            integrator,
            zeros_hz,
            poles_hz,
            ..
        } => {
            let list = |v: &[f64]| {
                v.iter()
                    .map(|f| si(*f, "Hz"))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            let mut parts = vec![];
            if *integrator {
                parts.push("integrator".to_string());
            }
            if !zeros_hz.is_empty() {
                parts.push(format!("zeros {}", list(zeros_hz)));
            }
            if !poles_hz.is_empty() {
                parts.push(format!("poles {}", list(poles_hz)));
            }
            format!("poles and zeros: {}", parts.join("; "))
        }
        CompensatorLaw::StateSpace { b, .. } => {
            format!("state space, {}", plural(b.len(), "state", "states"))
        }
    };
    format!(
        "{} ({law}; measures {}, reference {}; output {}.output)",
        k.name,
        k.input,
        si(k.reference, unit(&k.input)),
        k.name
    )
}

fn describe_gate(g: &Gate) -> String {
    match g {
        Gate::Pwm {
            name,
            frequency,
            duty,
            ..
        } => format!("{name} (pwm, {}, duty {duty})", si(*frequency, "Hz")),
        Gate::ComplementaryPwm {
            name,
            frequency,
            duty,
            dead_time_high,
            dead_time_low,
            ..
        } => format!(
            "{name} (complementary pwm, {}, duty {duty}, dead times {} high / {} low)",
            si(*frequency, "Hz"),
            si(*dead_time_high, "s"),
            si(*dead_time_low, "s"),
        ),
        Gate::Transitions {
            name,
            transitions,
            period,
            ..
        } => {
            let repeat = match period {
                Some(p) => format!(", repeating every {}", si(*p, "s")),
                None => String::new(),
            };
            format!(
                "{name} ({}{repeat})",
                plural(transitions.len(), "transition", "transitions")
            )
        }
        Gate::PeakCurrent {
            name,
            frequency,
            sense,
            reference,
            slope,
            ..
        } => format!(
            "{name} (peak-current control of {sense} at {}, reference {}, compensation slope {})",
            si(*frequency, "Hz"),
            si(*reference, unit(sense)),
            si(*slope, &format!("{}/s", unit(sense))),
        ),
        Gate::ValleyCurrent {
            name,
            frequency,
            sense,
            reference,
            ..
        } => format!(
            "{name} (valley-current control of {sense} at {}, reference {})",
            si(*frequency, "Hz"),
            si(*reference, unit(sense)),
        ),
        Gate::Hysteretic {
            name,
            sense,
            low,
            high,
        } => format!(
            "{name} (hysteretic control of {sense}, between {} and {})",
            si(*low, unit(sense)),
            si(*high, unit(sense)),
        ),
        Gate::VoltageMode {
            name,
            frequency,
            control,
            ramp_low,
            ramp_high,
            ..
        } => format!(
            "{name} (voltage-mode pwm at {} from {control}, ramp {} to {})",
            si(*frequency, "Hz"),
            si(*ramp_low, unit(control)),
            si(*ramp_high, unit(control)),
        ),
    }
}

/// The summary printed by `check`; the state counts come from the solver.
///
/// # Errors
///
/// A circuit the solver cannot compile ([`fluxstep_solver::state_counts`]).
pub fn summary(path: &Path, circuit: &Circuit) -> Result<String, fluxstep_solver::SolverError> {
    let mut out = String::new();
    let nodes = circuit.nodes();
    // Writing to a String cannot fail.
    let mut line = |label: &str, text: String| {
        writeln!(out, "  {label:<9} {text}").expect("writing to a String");
    };
    line("nodes:", format!("{} ({})", nodes.len(), nodes.join(", ")));

    let by_kind: Vec<String> = KINDS
        .iter()
        .filter_map(|(kind, one, many)| {
            let n = circuit
                .elements
                .iter()
                .filter(|e| e.kind_name() == *kind)
                .count();
            (n > 0).then(|| plural(n, one, many))
        })
        .collect();
    line(
        "elements:",
        format!("{} ({})", circuit.elements.len(), by_kind.join(", ")),
    );

    let gates: Vec<String> = circuit.gates.iter().map(describe_gate).collect();
    let signals: Vec<String> = circuit
        .signals()
        .into_iter()
        .map(|(name, _)| name)
        .collect();
    if gates.is_empty() {
        line("gates:", "none".to_string());
    } else {
        line("gates:", gates.join("; "));
        line("signals:", signals.join(", "));
    }

    if !circuit.compensators.is_empty() {
        let list: Vec<String> = circuit
            .compensators
            .iter()
            .map(describe_compensator)
            .collect();
        line("control:", list.join("; "));
    }

    let s = fluxstep_solver::state_counts(circuit)?;
    let mut parts = Vec::new();
    if s.inductor_currents > 0 {
        parts.push(plural(
            s.inductor_currents,
            "inductor current",
            "inductor currents",
        ));
    }
    if s.capacitor_voltages > 0 {
        parts.push(plural(
            s.capacitor_voltages,
            "capacitor voltage",
            "capacitor voltages",
        ));
    }
    if s.sine_sources > 0 {
        parts.push(format!(
            "{} for {}",
            2 * s.sine_sources,
            plural(s.sine_sources, "sine source", "sine sources")
        ));
    }
    if s.compensator_states > 0 {
        parts.push(plural(
            s.compensator_states,
            "compensator state",
            "compensator states",
        ));
    }
    let detail = if parts.is_empty() {
        String::new()
    } else {
        format!(" ({})", parts.join(", "))
    };
    line("states:", format!("{}{detail}", s.total()));

    if let Some(run) = &circuit.run {
        let from = match run.record_from {
            Some(t) => format!(", recording from {}", si(t, "s")),
            None => String::new(),
        };
        let outputs = if run.outputs.is_empty() {
            String::new()
        } else {
            format!("; outputs {}", run.outputs.join(", "))
        };
        line(
            "run:",
            format!("until {}{from}{outputs}", si(run.stop_time, "s")),
        );
    }
    Ok(format!("{}: valid circuit\n{out}", path.display()))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn buck() -> Circuit {
        Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 24.0)
            .switch("S1", "in", "sw", "drive")
            .diode("D1", "gnd", "sw")
            .inductor("L1", "sw", "out", 22e-6)
            .capacitor("C1", "out", "gnd", 47e-6)
            .resistor("Rload", "out", "gnd", 6.0)
            .pwm("drive", 200e3, 0.5)
            .run(1e-3, &["L1.current", "out"])
            .build()
            .unwrap()
    }

    #[test]
    fn buck_summary() {
        let text = summary(Path::new("buck.json"), &buck()).unwrap();
        assert_eq!(
            text,
            "buck.json: valid circuit\n\
             \x20 nodes:    4 (gnd, in, sw, out)\n\
             \x20 elements: 6 (1 voltage source, 1 resistor, 1 inductor, 1 capacitor, 1 switch, 1 diode)\n\
             \x20 gates:    drive (pwm, 200 kHz, duty 0.5)\n\
             \x20 signals:  drive\n\
             \x20 states:   2 (1 inductor current, 1 capacitor voltage)\n\
             \x20 run:      until 1 ms; outputs L1.current, out\n"
        );
    }

    /// Issue 13: thresholds and slopes carry units; compensators are
    /// listed by name.
    #[test]
    fn issue_13_control_settings_have_units_and_compensators_names() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits");
        let c = Circuit::from_file(root.join("peak_current_buck.json")).unwrap();
        let text = summary(Path::new("p.json"), &c).unwrap();
        assert!(text.contains("reference 4.3 A"), "{text}");
        assert!(text.contains("compensation slope 250 kA/s"), "{text}");
        let c = Circuit::from_file(root.join("voltage_mode_buck.json")).unwrap();
        let text = summary(Path::new("v.json"), &c).unwrap();
        assert!(text.contains("control:  K (poles and zeros"), "{text}");
        assert!(text.contains("reference 3.3 V"), "{text}");
        let c = Circuit::from_file(root.join("hysteretic_buck.json")).unwrap();
        let text = summary(Path::new("h.json"), &c).unwrap();
        assert!(text.contains("between 4.975 V and 5.025 V"), "{text}");
    }
}
