//! The `fluxstep` binary as a user runs it: exit codes, stdout and stderr.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn fluxstep(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_fluxstep"))
        .args(args)
        .output()
        .expect("the fluxstep binary runs")
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

/// Runs `fluxstep check` on `path`; asserts the exit code and that nothing
/// panicked; returns (stdout, stderr).
fn check(path: &Path, code: i32) -> (String, String) {
    let out = fluxstep(&["check", path.to_str().expect("utf-8 path")]);
    let (stdout, stderr) = (text(&out.stdout), text(&out.stderr));
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(
        out.status.code(),
        Some(code),
        "{}\nstdout:\n{stdout}\nstderr:\n{stderr}",
        path.display()
    );
    (stdout, stderr)
}

fn examples_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits")
}

/// Writes `contents` to a scratch file named `name` and returns its path.
fn scratch(name: &str, contents: &str) -> PathBuf {
    let path = Path::new(env!("CARGO_TARGET_TMPDIR")).join(name);
    std::fs::write(&path, contents).expect("write a scratch file");
    path
}

#[test]
fn every_example_circuit_checks() {
    let mut seen = 0;
    for entry in std::fs::read_dir(examples_dir()).expect("examples/circuits exists") {
        let path = entry.expect("directory entry").path();
        if path.extension().is_some_and(|e| e == "json") {
            let (stdout, stderr) = check(&path, 0);
            assert!(stdout.contains("valid circuit"), "{stdout}");
            assert!(stdout.contains("states:"), "{stdout}");
            assert!(stderr.is_empty(), "{stderr}");
            seen += 1;
        }
    }
    assert!(seen >= 8, "only {seen} example circuits");
}

#[test]
fn summary_counts_nodes_elements_gates_and_states() {
    let (stdout, _) = check(&examples_dir().join("sync_buck.json"), 0);
    assert!(
        stdout.contains("nodes:    4 (gnd, in, sw, out)"),
        "{stdout}"
    );
    assert!(stdout.contains("2 switches"), "{stdout}");
    assert!(stdout.contains("signals:  hb.high, hb.low"), "{stdout}");
    assert!(stdout.contains("states:   2 "), "{stdout}");
    let (stdout, _) = check(&examples_dir().join("rectifier.json"), 0);
    assert!(
        stdout.contains("states:   3 (1 capacitor voltage, 2 for 1 sine source)"),
        "{stdout}"
    );
    let (stdout, _) = check(&examples_dir().join("flyback.json"), 0);
    assert!(stdout.contains("states:   4 "), "{stdout}");
}

#[test]
fn negative_inductance_and_dangling_node() {
    let path = scratch(
        "negative_inductance.json",
        r#"{"elements": [
  {"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"],
   "waveform": {"kind": "constant", "value": "12"}},
  {"kind": "resistor", "name": "R1", "nodes": ["in", "a"], "resistance": "1"},
  {"kind": "inductor", "name": "L1", "nodes": ["a", "gnd"], "inductance": "-10u"},
  {"kind": "resistor", "name": "R2", "nodes": ["a", "nowhere"], "resistance": "1k"}
]}"#,
    );
    let (stdout, stderr) = check(&path, 2);
    assert!(stdout.is_empty(), "{stdout}");
    let lines: Vec<&str> = stderr.lines().collect();
    assert!(lines[0].contains("invalid circuit, 2 problems"), "{stderr}");
    assert!(
        lines
            .iter()
            .any(|l| l.contains("L1.inductance") && l.contains("must be positive")),
        "{stderr}"
    );
    assert!(
        lines
            .iter()
            .any(|l| l.contains("R2.nodes[1]") && l.contains("node 'nowhere'")),
        "{stderr}"
    );
}

#[test]
fn malformed_json() {
    let path = scratch(
        "malformed.json",
        r#"{"elements": [
  {"kind": "resistor", "name": "R1", "nodes": ["in", "gnd"], "resistance": "1k"},
]}"#,
    );
    let (_, stderr) = check(&path, 2);
    assert!(
        stderr.contains("malformed.json") && stderr.contains("trailing comma at line 3 column 1"),
        "{stderr}"
    );
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
}

#[test]
fn bad_value_names_its_field() {
    let path = scratch(
        "bad_value.json",
        r#"{"elements": [
  {"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"],
   "waveform": {"kind": "constant", "value": "12"}},
  {"kind": "resistor", "name": "R1", "nodes": ["in", "a"], "resistance": "1"},
  {"kind": "inductor", "name": "L1", "nodes": ["a", "gnd"], "inductance": "10uH"}
]}"#,
    );
    let (_, stderr) = check(&path, 2);
    assert!(stderr.contains("elements[2].inductance"), "{stderr}");
    assert!(stderr.contains("\"10uH\""), "{stderr}");
}

#[test]
fn not_json() {
    let path = scratch("not_json.txt", "V1 in 0 12\nR1 in 0 1k\n");
    let (_, stderr) = check(&path, 2);
    assert!(stderr.contains("not_json.txt: line 1 column 1"), "{stderr}");
    let path = scratch("empty.json", "");
    check(&path, 2);
    let path = scratch("binary.json", "\u{0}\u{1}\u{2}");
    check(&path, 2);
}

#[test]
fn missing_file() {
    let (_, stderr) = check(Path::new("/nonexistent/circuit.json"), 2);
    assert!(
        stderr.contains("cannot read /nonexistent/circuit.json"),
        "{stderr}"
    );
}

#[test]
fn usage() {
    let out = fluxstep(&[]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out.stderr).contains("Usage"));
    let out = fluxstep(&["check"]);
    assert_eq!(out.status.code(), Some(2));
    let out = fluxstep(&["--help"]);
    assert_eq!(out.status.code(), Some(0));
    assert!(text(&out.stdout).contains("check"));
}

/// Issue 13: `--help` says what the tool does and lists every exit code;
/// the folder option is `--dir` (not `--out`, too close to `--outputs`);
/// `--from` says it takes seconds with SI prefixes.
#[test]
fn issue_13_help_describes_the_tool_and_its_exit_codes() {
    let help = text(&fluxstep(&["--help"]).stdout);
    assert!(
        help.lines()
            .next()
            .unwrap()
            .contains("simulation of switching power converters"),
        "{help}"
    );
    for code in [
        "0  success",
        "1  the simulation stopped",
        "2  invalid input",
        "3  an output folder",
    ] {
        assert!(help.contains(code), "{code}: {help}");
    }
    let run = text(&fluxstep(&["run", "--help"]).stdout);
    assert!(
        run.contains("--dir <FOLDER>") && !run.contains("--out "),
        "{run}"
    );
    assert!(run.contains("3  an output folder"), "{run}");
    let from = run.split("--from").nth(1).unwrap();
    assert!(from.contains("seconds, SI prefixes allowed"), "{run}");
    let old = fluxstep(&["run", "x.json", "--out", "y"]);
    assert_eq!(old.status.code(), Some(2));
}

/// Issue 13: README lists the same exit codes as `--help`.
#[test]
fn issue_13_readme_lists_the_exit_codes() {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("../../README.md"))
            .unwrap();
    for code in [
        "0  success",
        "1  the simulation stopped",
        "2  invalid input",
        "3  an output folder",
    ] {
        assert!(readme.contains(code), "{code}");
    }
    assert!(readme.contains("docs/outputs.md"));
    assert!(!readme.contains("--out "));
}

/// Issue 13: examples whose energy can hurt carry a caution that defers
/// to local electrical codes and qualified review; descriptions match what
/// ideal parts do (no ring-down without a capacitance to ring with).
#[test]
fn issue_13_example_descriptions_carry_cautions_and_match_results() {
    let description = |name: &str| {
        let text = std::fs::read_to_string(examples_dir().join(format!("{name}.json"))).unwrap();
        let v: serde_json::Value = serde_json::from_str(&text).unwrap();
        v["description"].as_str().unwrap().to_string()
    };
    for name in ["flyback", "rectifier", "interrupted_inductor"] {
        let d = description(name);
        assert!(d.contains("Caution"), "{name}: {d}");
        assert!(
            d.contains("local electrical codes") && d.contains("qualified review"),
            "{name}"
        );
    }
    assert!(description("flyback").contains("147 V"));
    assert!(
        description("rectifier").contains("mains") && description("rectifier").contains("4.7 mF")
    );
    let dcm = description("buck_dcm");
    assert!(
        !dcm.contains("rings down") && dcm.contains("steps"),
        "{dcm}"
    );
}
