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
            "--out",
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
        "--out",
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
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("nosuch.current"));
    let _ = std::fs::remove_dir_all(dir);
}
