//! `fluxstep run` end to end: every example circuit runs and writes its four
//! files; a circuit that interrupts an inductor exits 1; bad input exits 2.

use std::path::{Path, PathBuf};
use std::process::Command;

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn fluxstep(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_fluxstep"))
        .args(args)
        .current_dir(root())
        .output()
        .unwrap()
}

#[test]
fn every_example_circuit_runs_and_writes_its_files() {
    let dir = std::env::temp_dir().join(format!("fluxstep-run-{}", std::process::id()));
    for entry in std::fs::read_dir(root().join("examples/circuits")).unwrap() {
        let path = entry.unwrap().path();
        let name = path.file_stem().unwrap().to_string_lossy().into_owned();
        if name == "interrupted_inductor" {
            continue;
        }
        let out = dir.join(&name);
        let o = fluxstep(&[
            "run",
            path.to_str().unwrap(),
            "--dir",
            out.to_str().unwrap(),
            "--grid",
            "200",
        ]);
        assert!(
            o.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        let csv = std::fs::read_to_string(out.join("waveform.csv")).unwrap();
        let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
        let circuit = fluxstep_netlist_outputs(&path);
        assert_eq!(&header[1..], circuit.as_slice(), "{name}: columns");
        for line in csv.lines().skip(1) {
            let cells: Vec<&str> = line.split(',').collect();
            assert_eq!(cells.len(), header.len());
            assert!(cells[0].parse::<f64>().is_ok());
            for c in &cells[1..] {
                assert!(
                    c.is_empty() || c.parse::<f64>().map(f64::is_finite).unwrap_or(false),
                    "{name}: cell {c:?}"
                );
            }
        }
        let svg = std::fs::read_to_string(out.join("figure.svg")).unwrap();
        assert_eq!(
            svg.matches("<polyline").count(),
            header.len() - 1,
            "{name}: one line per trace"
        );
        let events = std::fs::read_to_string(out.join("events.json")).unwrap();
        assert!(events.contains("state_names"));
        let summary = std::fs::read_to_string(out.join("summary.json")).unwrap();
        assert!(summary.contains("measurements"));
    }
    let _ = std::fs::remove_dir_all(dir);
}

/// The output names a circuit file asks for (its run.outputs), read as text.
fn fluxstep_netlist_outputs(path: &Path) -> Vec<String> {
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    v["run"]["outputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn interrupted_inductor_exits_1_with_the_diagnostic() {
    let dir = std::env::temp_dir().join(format!("fluxstep-int-{}", std::process::id()));
    let o = fluxstep(&[
        "run",
        "examples/circuits/interrupted_inductor.json",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("inductor current interrupted") && err.contains("S1") && err.contains("L1"),
        "{err}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn malformed_input_exits_2() {
    let dir = std::env::temp_dir().join(format!("fluxstep-bad-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let bad = dir.join("bad.json");
    std::fs::write(&bad, "{ this is not json").unwrap();
    let o = fluxstep(&["run", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let o = fluxstep(&[
        "run",
        "examples/circuits/buck.json",
        "--outputs",
        "nosuch.current",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("nosuch.current"));
    let _ = std::fs::remove_dir_all(dir);
}

fn scratch_dir(what: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("fluxstep-{what}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    dir
}

/// Issue 13: a run that stops on a diagnostic still writes the waveform,
/// events, figure and summary up to the fault; the exit status stays 1.
#[test]
fn issue_13_a_stopped_run_writes_its_files() {
    let dir = scratch_dir("stopped");
    let o = fluxstep(&[
        "run",
        "examples/circuits/interrupted_inductor.json",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["stopped"]["time"].as_f64(), Some(50e-6));
    assert!(summary["stopped"]["diagnostic"]
        .as_str()
        .unwrap()
        .contains("inductor current interrupted"));
    assert_eq!(summary["window"][1].as_f64(), Some(50e-6));
    let csv = std::fs::read_to_string(dir.join("waveform.csv")).unwrap();
    assert!(csv.lines().count() > 100);
    let svg = std::fs::read_to_string(dir.join("figure.svg")).unwrap();
    assert!(svg.contains("stopped: inductor current interrupted"));
    assert!(std::fs::read_to_string(dir.join("events.json"))
        .unwrap()
        .contains("switch_off"));
    let _ = std::fs::remove_dir_all(dir);
}

/// Issue 13: the flux-conserving jump the diagnostic suggests is reachable
/// from the command line (and from the file's run settings).
#[test]
fn issue_13_on_interruption_from_the_command_line() {
    let dir = scratch_dir("conserve");
    let o = fluxstep(&[
        "run",
        "examples/circuits/interrupted_inductor.json",
        "--dir",
        dir.to_str().unwrap(),
        "--on-interruption",
        "conserve_flux",
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let events = std::fs::read_to_string(dir.join("events.json")).unwrap();
    assert!(
        events.contains("flux_jump") && events.contains("energy"),
        "{events}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

/// Issue 13: a folder that cannot be created is not invalid input: exit 3.
#[test]
fn issue_13_an_unwritable_folder_exits_3() {
    let o = fluxstep(&[
        "run",
        "examples/circuits/buck.json",
        "--dir",
        "/dev/null/cannot-be-a-folder",
    ]);
    assert_eq!(o.status.code(), Some(3));
    assert!(
        String::from_utf8_lossy(&o.stderr).contains("cannot write /dev/null/cannot-be-a-folder")
    );
}

/// Issue 13: the summary table has units and SI prefixes, and rounding
/// noise shows as 0. Expected values: buck.json's own description (2 A
/// average inductor current, 24 V switch node) — common practice.
#[test]
fn issue_13_summary_table_has_units() {
    let dir = scratch_dir("table");
    let o = fluxstep(&[
        "run",
        "examples/circuits/buck.json",
        "--dir",
        dir.to_str().unwrap(),
        "--grid",
        "50",
    ]);
    assert!(o.status.success());
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("5.000 ms simulated"), "{out}");
    let row = |name: &str| {
        out.lines()
            .find(|l| l.trim_start().starts_with(&format!("{name} ")))
            .unwrap()
            .to_string()
    };
    assert!(row("L1.current").contains("2.000 A"), "{out}");
    assert!(row("sw").contains("24.00 V"), "{out}");
    assert!(row("out").contains(" mV"), "{out}");
    // The energy balance's residual is a certificate, in scientific form.
    let table: Vec<&str> = out
        .lines()
        .filter(|l| {
            !l.contains("written:")
                && !l.contains("energy balance:")
                && !l.contains("energy certificate:")
        })
        .collect();
    assert!(
        table.iter().all(|l| !l.contains("e-") && !l.contains("e0")),
        "{out}"
    );
    let flyback = fluxstep(&[
        "run",
        "examples/circuits/flyback.json",
        "--dir",
        dir.to_str().unwrap(),
        "--grid",
        "50",
    ]);
    let out = String::from_utf8_lossy(&flyback.stdout);
    // The primary current touches zero; rounding leaves -8.65e-12 A.
    assert!(
        out.lines()
            .any(|l| l.contains("T1.pri.current") && l.contains(" 0 A ")),
        "{out}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

/// Issue 13: an unknown output lists every output form and this
/// circuit's outputs.
#[test]
fn issue_13_unknown_output_lists_the_forms() {
    let dir = scratch_dir("unknown");
    let o = fluxstep(&[
        "run",
        "examples/circuits/buck.json",
        "--outputs",
        "L1.flux",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    for form in [
        "body_diode",
        "primary",
        "WINDING",
        "COMPENSATOR.output",
        "L1.current",
    ] {
        assert!(err.contains(form), "{form}: {err}");
    }
    let _ = std::fs::remove_dir_all(dir);
}

/// Every key of summary.json and events.json (from a normal run, a
/// stopped one and one with a flux jump), every event kind and every CSV
/// column header form is named in docs/outputs.md.
#[test]
fn issue_13_every_output_key_is_documented() {
    let doc = std::fs::read_to_string(root().join("docs/outputs.md")).unwrap();
    fn keys(v: &serde_json::Value, out: &mut Vec<String>) {
        match v {
            serde_json::Value::Object(m) => {
                for (k, x) in m {
                    out.push(k.clone());
                    keys(x, out);
                }
            }
            serde_json::Value::Array(a) => a.iter().for_each(|x| keys(x, out)),
            _ => {}
        }
    }
    let runs: [&[&str]; 3] = [
        &["examples/circuits/sync_buck.json"],
        &["examples/circuits/interrupted_inductor.json"],
        &[
            "examples/circuits/interrupted_inductor.json",
            "--on-interruption",
            "conserve_flux",
        ],
    ];
    let mut seen = vec![];
    for (k, extra) in runs.iter().enumerate() {
        let dir = scratch_dir(&format!("doc{k}"));
        let mut args = vec![
            "run",
            extra[0],
            "--dir",
            dir.to_str().unwrap(),
            "--grid",
            "20",
        ];
        args.extend(&extra[1..]);
        fluxstep(&args);
        for file in ["summary.json", "events.json"] {
            let v: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(dir.join(file)).unwrap()).unwrap();
            keys(&v, &mut seen);
            if let Some(events) = v["events"].as_array() {
                seen.extend(
                    events
                        .iter()
                        .map(|e| e["kind"].as_str().unwrap().to_string()),
                );
            }
        }
        let csv = std::fs::read_to_string(dir.join("waveform.csv")).unwrap();
        seen.push(
            csv.lines()
                .next()
                .unwrap()
                .split(',')
                .next()
                .unwrap()
                .to_string(),
        );
        let _ = std::fs::remove_dir_all(dir);
    }
    seen.sort();
    seen.dedup();
    for key in &seen {
        assert!(
            doc.contains(&format!("`{key}`")),
            "docs/outputs.md does not name `{key}`"
        );
    }
    for kind in [
        "switch_on",
        "switch_off",
        "diode_on",
        "diode_off",
        "source_breakpoint",
        "charge_jump",
        "flux_jump",
        "shoot_through",
    ] {
        assert!(doc.contains(&format!("`{kind}`")), "{kind}");
    }
    assert!(seen.iter().any(|k| k == "stopped") && seen.iter().any(|k| k == "energy"));
}

/// Issue 19 (bounded memory, clear refusals). Root causes: `--grid` was
/// used unchecked as a vector's size (a capacity-overflow panic); the CSV's
/// rows were collected in memory before writing; recording had no memory
/// bound; an existing file given as the output folder gave "File exists".
mod issue_19 {
    use super::*;

    fn temp(name: &str) -> PathBuf {
        std::env::temp_dir().join(format!("fluxstep-i19-{name}-{}", std::process::id()))
    }

    #[test]
    fn issue_19_a_huge_grid_is_refused_not_a_panic() {
        let dir = temp("grid");
        let o = fluxstep(&[
            "run",
            "examples/circuits/buck.json",
            "--dir",
            dir.to_str().unwrap(),
            "--grid",
            "18446744073709551615",
        ]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains("--grid") && err.contains("from 2 to"), "{err}");
        assert!(!err.contains("panicked"), "{err}");
    }

    #[test]
    fn issue_19_a_record_past_the_memory_budget_stops_naming_it() {
        let dir = temp("budget");
        let o = fluxstep(&[
            "run",
            "examples/circuits/buck.json",
            "--dir",
            dir.to_str().unwrap(),
            "--from",
            "0",
            "--memory-budget",
            "100k",
        ]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(1), "{err}");
        assert!(err.contains("memory budget of 100000 bytes"), "{err}");
        assert!(err.contains("--memory-budget"), "{err}");
        // What was recorded up to there is written.
        assert!(dir.join("waveform.csv").exists());
        let o = fluxstep(&[
            "run",
            "examples/circuits/buck.json",
            "--memory-budget",
            "lots",
        ]);
        assert_eq!(o.status.code(), Some(2));
    }

    #[test]
    fn issue_19_a_stop_time_the_periods_cannot_be_resolved_in_is_refused() {
        let o = fluxstep(&["run", "examples/circuits/buck.json", "--stop", "1e300"]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(
            err.contains("drive.frequency") && err.contains("too short"),
            "{err}"
        );
        let o = fluxstep(&["run", "examples/circuits/buck.json", "--stop", "inf"]);
        assert_eq!(o.status.code(), Some(2));
    }

    #[test]
    fn issue_19_a_device_as_the_output_folder_is_named_clearly() {
        let o = fluxstep(&["run", "examples/circuits/buck.json", "--dir", "/dev/null"]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(3), "{err}");
        assert!(
            err.contains("/dev/null") && err.contains("not a folder"),
            "{err}"
        );
    }
}

/// Issue 17: the synchronous buck's run prints the energy balance, the
/// efficiency and the loss of each part, writes them into summary.json and
/// draws losses.svg; a circuit without loss data prints only the balance
/// (conservation of energy, common practice).
#[test]
fn issue_17_run_prints_losses_and_the_energy_balance() {
    let dir = scratch_dir("losses");
    let o = fluxstep(&[
        "run",
        "examples/circuits/sync_buck.json",
        "--dir",
        dir.to_str().unwrap(),
        "--grid",
        "50",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("energy balance: residual"), "{out}");
    assert!(
        out.contains("losses (loads Rload)") && out.contains("efficiency 99."),
        "{out}"
    );
    assert!(
        out.lines()
            .any(|l| l.trim_start().starts_with("Q2.body_diode")),
        "{out}"
    );
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    let l = &summary["losses"];
    assert_eq!(l["balance"]["passed"], true);
    assert!(l["balance"]["relative"].as_f64().unwrap() < 1e-12);
    let eta = l["efficiency"].as_f64().unwrap();
    let (pin, pout) = (
        l["input_power"].as_f64().unwrap(),
        l["output_power"].as_f64().unwrap(),
    );
    assert!((eta - pout / pin).abs() < 1e-12, "{l}");
    let svg = std::fs::read_to_string(dir.join("losses.svg")).unwrap();
    assert!(svg.contains("Q2.body_diode") && svg.contains("efficiency"));
    let ideal = fluxstep(&[
        "run",
        "examples/circuits/buck.json",
        "--dir",
        dir.join("buck").to_str().unwrap(),
        "--grid",
        "50",
    ]);
    let out = String::from_utf8_lossy(&ideal.stdout);
    assert!(
        out.contains("energy balance: residual") && !out.contains("losses ("),
        "{out}"
    );
    assert!(!dir.join("buck/losses.svg").exists());
    let _ = std::fs::remove_dir_all(dir);
}

/// Issue 17: bad loss data is refused by `check` with exit 2, naming the
/// element and the field.
#[test]
fn issue_17_bad_loss_data_names_the_field() {
    let base: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(root().join("examples/circuits/sync_buck.json")).unwrap(),
    )
    .unwrap();
    let table = |points: serde_json::Value| {
        serde_json::json!({ "turn_on": { "curves": [ { "voltage": "24", "points": points } ] },
                            "turn_off": { "curves": [ { "voltage": "24", "points": [
                                { "current": "0", "energy": "0" },
                                { "current": "10", "energy": "5u" } ] } ] } })
    };
    let cases: Vec<(&str, &str, serde_json::Value, &str)> = vec![
        (
            "Q1",
            "switching_energy",
            table(serde_json::json!([
                { "current": "0", "energy": "0" },
                { "current": "10", "energy": "5u" },
                { "current": "8", "energy": "6u" } ])),
            "switching_energy.turn_on.curves[0].points[2].current",
        ),
        (
            "Q1",
            "switching_energy",
            table(serde_json::json!([
                { "current": "0", "energy": "0" },
                { "current": "10", "energy": "-5u" } ])),
            "switching_energy.turn_on.curves[0].points[1].energy",
        ),
        (
            "L1",
            "core",
            serde_json::json!({ "k": "3", "alpha": "3.5", "beta": "2.5", "turns": "10",
                                "area": "50u", "volume": "5u" }),
            "core.alpha",
        ),
        (
            "L1",
            "core",
            serde_json::json!({ "k": "-3", "alpha": "1.5", "beta": "2.5", "turns": "10",
                                "area": "50u", "volume": "5u" }),
            "core.k",
        ),
    ];
    for (k, (element, field, value, named)) in cases.into_iter().enumerate() {
        let mut c = base.clone();
        for e in c["elements"].as_array_mut().unwrap() {
            if e["name"] == element {
                e[field] = value.clone();
            }
        }
        let path =
            std::env::temp_dir().join(format!("fluxstep-badloss-{}-{k}.json", std::process::id()));
        std::fs::write(&path, c.to_string()).unwrap();
        let o = fluxstep(&["check", path.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{named}: {err}");
        assert!(
            err.contains(element) && err.contains(named),
            "{named}: {err}"
        );
        let _ = std::fs::remove_file(path);
    }
    // A negative recovered charge on a body diode.
    let mut c = base.clone();
    for e in c["elements"].as_array_mut().unwrap() {
        if e["name"] == "Q2" {
            e["body_diode"]["recovered_charge"] = "-1n".into();
        }
    }
    let path = std::env::temp_dir().join(format!("fluxstep-badqrr-{}.json", std::process::id()));
    std::fs::write(&path, c.to_string()).unwrap();
    let o = fluxstep(&["check", path.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("Q2") && err.contains("body_diode.recovered_charge"),
        "{err}"
    );
    let _ = std::fs::remove_file(path);
}
