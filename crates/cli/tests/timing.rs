//! `fluxstep run` with timing rules and `fluxstep compare` as a user runs
//! them: exit codes and the designer's sentences.

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

fn sync_buck() -> serde_json::Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits/sync_buck.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The sync buck with `rules` as its timing rules and a shorter run,
/// written to a scratch file.
fn with_rules(name: &str, rules: serde_json::Value) -> PathBuf {
    let mut c = sync_buck();
    c["run"]["timing"] = rules;
    c["run"]["stop_time"] = "1m".into();
    c["run"]["record_from"] = "0.95m".into();
    let path = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("{name}.json"));
    std::fs::write(&path, c.to_string()).unwrap();
    path
}

fn run(path: &Path, dir: &str) -> (Option<i32>, String, PathBuf) {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(dir);
    let out = fluxstep(&[
        "run",
        path.to_str().unwrap(),
        "--dir",
        dir.to_str().unwrap(),
    ]);
    let stderr = text(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    (out.status.code(), stderr, dir)
}

#[test]
fn a_violated_rule_exits_1_naming_rule_elements_and_instant() {
    let path = with_rules(
        "dead60",
        serde_json::json!([{"name": "bridge dead time", "kind": "dead_time",
                             "switches": ["Q1", "Q2"], "min": "60n"}]),
    );
    let (code, stderr, dir) = run(&path, "dead60");
    assert_eq!(code, Some(1), "{stderr}");
    assert!(
        stderr.contains("rule 'bridge dead time' violated: the dead time from Q2 turning off to Q1 turning on is 50 ns at t = ")
            && stderr.contains("10 ns short of the 60 ns minimum"),
        "{stderr}"
    );
    // The files are written, with every margin in the summary.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["timing"]["passed"], false);
    let margin = summary["timing"]["rules"][0]["worst"]["margin"]
        .as_f64()
        .unwrap();
    assert!((margin + 10e-9).abs() < 1e-15, "{margin}");
}

#[test]
fn bad_rules_exit_2_naming_the_rule_and_field() {
    for (rule, field, words) in [
        (
            serde_json::json!({"name": "g", "kind": "on_time", "switch": "Q9", "max": "1u"}),
            "run.timing[0].switch",
            "no element is named 'Q9'",
        ),
        (
            serde_json::json!({"name": "g", "kind": "hard_turn_on", "switch": "Q1", "diode": "Q2"}),
            "run.timing[0].diode",
            "'Q2' is a switch; this field needs a diode",
        ),
        (
            serde_json::json!({"name": "g", "kind": "dead_time", "switches": ["Q1", "Q2"], "min": 0}),
            "run.timing[0].min",
            "must be a positive time",
        ),
        (
            serde_json::json!({"name": "g", "kind": "diode_conduction", "diode": "Q2.body_diode", "max": "-5n"}),
            "run.timing[0].max",
            "must be a positive time",
        ),
    ] {
        let path = with_rules("bad", serde_json::json!([rule]));
        let (code, stderr, _) = run(&path, "bad");
        assert_eq!(code, Some(2), "{stderr}");
        assert!(
            stderr.contains(field) && stderr.contains("rule 'g'") && stderr.contains(words),
            "{stderr}"
        );
    }
}

#[test]
fn compare_reports_the_first_divergence_and_refuses_other_circuits() {
    let golden_path = with_rules("golden", serde_json::json!([]));
    let (code, stderr, golden) = run(&golden_path, "golden");
    assert_eq!(code, Some(0), "{stderr}");
    let g = golden.join("events.json");
    // Same run: equal, exit 0.
    let same = fluxstep(&["compare", g.to_str().unwrap(), g.to_str().unwrap()]);
    assert_eq!(same.status.code(), Some(0), "{}", text(&same.stderr));
    assert!(text(&same.stdout).starts_with("the event log matches"));
    // One edge 12.5 ns late.
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&g).unwrap()).unwrap();
    let events = v["events"].as_array_mut().unwrap();
    let k = events
        .iter()
        .position(|e| e["element"] == "Q2" && e["kind"] == "switch_on")
        .unwrap();
    let t = events[k]["time"].as_f64().unwrap();
    events[k]["time"] = (t + 12.5e-9).into();
    let moved = golden.join("moved.json");
    std::fs::write(&moved, v.to_string()).unwrap();
    let out = fluxstep(&[
        "compare",
        moved.to_str().unwrap(),
        g.to_str().unwrap(),
        "--tolerance",
        "1n",
    ]);
    let stderr = text(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    let period = (t / 5e-6).floor();
    assert!(
        stderr.contains(&format!(
            "period {period}: Q2 turns on 12.5 ns later than in the golden log"
        )),
        "{stderr}"
    );
    assert!(stderr.contains("1 moved, 0 added, 0 missing"), "{stderr}");
    // Within a 20 ns tolerance it passes.
    let out = fluxstep(&[
        "compare",
        moved.to_str().unwrap(),
        g.to_str().unwrap(),
        "--tolerance",
        "20n",
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    // Another circuit's log: refused (exit 2).
    let other = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits/buck.json");
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("other");
    let o = fluxstep(&[
        "run",
        other.to_str().unwrap(),
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let out = fluxstep(&[
        "compare",
        dir.join("events.json").to_str().unwrap(),
        g.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        text(&out.stderr).contains("different circuits"),
        "{}",
        text(&out.stderr)
    );
}
