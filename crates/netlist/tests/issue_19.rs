//! Issue 19, input handling. Root cause: serde reads a struct or an
//! internally tagged enum from a JSON array of its fields in order, so
//! positional arrays passed for objects nobody documented; and a UTF-8
//! byte-order mark made the first byte of the file "not JSON".

use fluxstep_netlist::{Circuit, NetlistError};

fn json_error(text: &str) -> (String, String) {
    match Circuit::from_json(text) {
        Err(NetlistError::Json { path, message }) => (path, message),
        other => panic!("expected a JSON error, got {other:?}"),
    }
}

#[test]
fn issue_19_a_positional_element_is_refused() {
    let (path, message) = json_error(
        r#"{"elements": [["inductor", "L1", ["sw", "out"], "22u"]], "run": {"stop_time": 1}}"#,
    );
    assert_eq!(path, "elements[0]");
    assert!(
        message.contains("expected an object with `kind`"),
        "{message}"
    );
}

#[test]
fn issue_19_a_top_level_array_is_refused() {
    let (_, message) = json_error(r#"[{"kind": "resistor"}]"#);
    assert!(message.contains("expected an object"), "{message}");
}

#[test]
fn issue_19_points_as_pairs_are_refused() {
    let (path, message) = json_error(
        r#"{"elements": [{"kind": "voltage_source", "name": "V1", "nodes": ["a", "gnd"],
             "waveform": {"kind": "piecewise_linear", "points": [[0, 0], [1, 1]]}}]}"#,
    );
    assert_eq!(path, "elements[0].waveform.points[0]");
    assert!(message.contains("expected an object"), "{message}");
}

#[test]
fn issue_19_run_settings_as_an_array_are_refused() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../examples/circuits/buck.json"
    ))
    .unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    v["run"] = serde_json::json!([5e-3, 4.95e-3]);
    let (path, _) = json_error(&v.to_string());
    assert_eq!(path, "run");
}

#[test]
fn issue_19_a_byte_order_mark_is_skipped() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../examples/circuits/buck.json"
    ))
    .unwrap();
    let plain = Circuit::from_json(&text).unwrap();
    let with_bom = Circuit::from_json(&format!("\u{feff}{text}")).unwrap();
    assert_eq!(plain, with_bom);
}

/// A problem lists at most a dozen names and counts the rest: the message
/// of an unknown gate signal among 2,000 used to name all 2,000.
#[test]
fn issue_19_a_problem_names_a_dozen_and_counts_the_rest() {
    let mut b = Circuit::builder()
        .voltage_source("V1", "in", "gnd", 1.0)
        .switch("S1", "in", "out", "nowhere")
        .resistor("R1", "out", "gnd", 1.0);
    for i in 0..2000 {
        b = b.pwm(&format!("g{i}"), 1e3, 0.5);
    }
    let problems = match b.build() {
        Err(NetlistError::Invalid(p)) => p,
        other => panic!("expected problems, got {other:?}"),
    };
    let p = problems
        .iter()
        .find(|p| p.message.contains("unknown gate signal"))
        .expect("the unknown signal is named");
    assert!(
        p.message.contains("'g11'") && !p.message.contains("'g12'"),
        "{}",
        p.message
    );
    assert!(p.message.contains("and 1988 more"), "{}", p.message);
}
