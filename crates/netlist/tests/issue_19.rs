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
