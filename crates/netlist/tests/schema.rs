//! The committed JSON Schema (docs/circuit.schema.json) must match the one
//! generated from the types. Regenerate it with
//! `UPDATE_SCHEMA=1 cargo test -p fluxstep-netlist`.

use std::path::PathBuf;

fn schema_path() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../docs/circuit.schema.json")
}

#[test]
fn committed_schema_is_up_to_date() {
    let fresh = fluxstep_netlist::json_schema();
    let path = schema_path();
    if std::env::var_os("UPDATE_SCHEMA").is_some_and(|v| v == "1") {
        std::fs::write(&path, &fresh).expect("write docs/circuit.schema.json");
        return;
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    // Compare as text with line endings normalised, so a checkout that
    // turned \n into \r\n does not count as stale.
    assert!(
        committed.replace("\r\n", "\n") == fresh,
        "docs/circuit.schema.json is missing or stale; regenerate it with\n\
         \n    UPDATE_SCHEMA=1 cargo test -p fluxstep-netlist\n\nand commit the result"
    );
}

#[test]
fn schema_describes_the_format() {
    let schema: serde_json::Value =
        serde_json::from_str(&fluxstep_netlist::json_schema()).expect("schema is JSON");
    let text = schema.to_string();
    for kind in [
        "resistor",
        "inductor",
        "capacitor",
        "coupled_inductors",
        "ideal_transformer",
        "voltage_source",
        "current_source",
        "switch",
        "diode",
        "piecewise_linear",
        "complementary_pwm",
        "transitions",
    ] {
        assert!(text.contains(&format!("\"{kind}\"")), "schema lacks {kind}");
    }
}
