//! SI values through JSON: a table of good strings (each must give the
//! same bits as the Rust literal) and bad ones (each must fail with
//! [`NetlistError::Json`] whose path names the field).

use fluxstep_netlist::*;

/// A valid circuit whose third element's inductance is `value` (raw JSON).
fn with_inductance(value: &str) -> String {
    format!(
        r#"{{"elements": [
  {{"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"],
    "waveform": {{"kind": "constant", "value": 5}}}},
  {{"kind": "resistor", "name": "R1", "nodes": ["in", "x"], "resistance": "1k"}},
  {{"kind": "inductor", "name": "L1", "nodes": ["x", "gnd"], "inductance": {value}}}
]}}"#
    )
}

fn inductance_of(c: &Circuit) -> f64 {
    match &c.elements[2] {
        Element::Inductor(l) => l.inductance,
        other => panic!("expected the inductor, got {other:?}"),
    }
}

#[test]
fn good_strings() {
    let table: &[(&str, f64)] = &[
        ("22u", 22e-6),
        ("22µ", 22e-6),
        ("22μ", 22e-6),
        ("4.7n", 4.7e-9),
        ("0.1u", 0.1e-6),
        ("200k", 200e3),
        ("1M", 1e6),
        ("1m", 1e-3),
        ("1e-6", 1e-6),
        ("1E-6", 1e-6),
        ("2.2e-5", 2.2e-5),
        (".5p", 0.5e-12),
        ("3f", 3e-15),
        ("1.5G", 1.5e9),
        ("2T", 2e12),
        ("10", 10.0),
        (" 47u ", 47e-6),
    ];
    for (text, expected) in table {
        let c = Circuit::from_json(&with_inductance(&format!("{text:?}")))
            .unwrap_or_else(|e| panic!("{text:?}: {e}"));
        assert_eq!(
            inductance_of(&c).to_bits(),
            expected.to_bits(),
            "{text:?} gave {} instead of {expected}",
            inductance_of(&c)
        );
    }
    // Plain JSON numbers are values in SI units.
    for (json, expected) in [("22e-6", 22e-6), ("0.001", 1e-3), ("1", 1.0)] {
        let c = Circuit::from_json(&with_inductance(json)).unwrap();
        assert_eq!(
            inductance_of(&c).to_bits(),
            f64::to_bits(expected),
            "{json}"
        );
    }
}

#[test]
fn bad_strings_name_the_field() {
    let table = [
        "\"1.2.3\"",
        "\"5x\"",
        "\"\"",
        "\"NaN\"",
        "\"inf\"",
        "\"-inf\"",
        "\"5V\"",
        "\"22uH\"",
        "\"u\"",
        "\"1e\"",
        "\"1e3k\"",
        "\"k1\"",
        "\"1 k\"",
        "\"--1\"",
        "\"0x10\"",
        "1e999",
        "null",
        "true",
        "[1]",
        "{}",
    ];
    for json in table {
        match Circuit::from_json(&with_inductance(json)) {
            Err(NetlistError::Json { path, message }) => {
                assert_eq!(path, "elements[2].inductance", "{json}: {message}");
                let e = NetlistError::Json { path, message };
                assert!(e.to_string().starts_with("elements[2].inductance: "), "{e}");
            }
            other => panic!("{json}: expected a JSON error, got {other:?}"),
        }
    }
}

#[test]
fn bad_values_elsewhere_name_their_path() {
    let text = r#"{
  "elements": [
    {"kind": "voltage_source", "name": "Vin", "nodes": ["in", "gnd"],
     "waveform": {"kind": "piecewise_linear",
                  "points": [{"time": 0, "value": 0}, {"time": "1uu", "value": 5}]}},
    {"kind": "switch", "name": "S1", "nodes": ["in", "sw"], "gate": "drive",
     "body_diode": {"forward_voltage": "0.7"}},
    {"kind": "diode", "name": "D1", "nodes": ["gnd", "sw"], "forward_voltage": "0.7"},
    {"kind": "coupled_inductors", "name": "T1",
     "windings": [{"name": "p", "nodes": ["sw", "gnd"], "inductance": "1m"},
                  {"name": "s", "nodes": ["gnd", "o"], "inductance": "1m"}],
     "couplings": [{"windings": ["p", "s"], "k": 0.99}]},
    {"kind": "resistor", "name": "R1", "nodes": ["o", "gnd"], "resistance": 1}
  ],
  "gates": [{"kind": "pwm", "name": "drive", "frequency": "100k", "duty": 0.5}],
  "run": {"stop_time": "1m"}
}"#;
    let cases = [
        (
            "\"body_diode\": {\"forward_voltage\": \"0.7\"}",
            "\"body_diode\": {\"forward_voltage\": \"0.7v\"}",
            "elements[1].body_diode.forward_voltage",
        ),
        (
            "[\"gnd\", \"sw\"], \"forward_voltage\": \"0.7\"",
            "[\"gnd\", \"sw\"], \"forward_voltage\": \"0.7 V\"",
            "elements[2].forward_voltage",
        ),
        (
            "\"k\": 0.99",
            "\"k\": \"high\"",
            "elements[3].couplings[0].k",
        ),
        (
            "\"inductance\": \"1m\"}]",
            "\"inductance\": \"1mH\"}]",
            "elements[3].windings[1].inductance",
        ),
        ("\"duty\": 0.5", "\"duty\": \"50%\"", "gates[0].duty"),
        (
            "\"stop_time\": \"1m\"",
            "\"stop_time\": \"1 ms\"",
            "run.stop_time",
        ),
        (
            "\"resistance\": 1",
            "\"resistance\": 1, \"tolerance\": 0.01",
            "elements[4].tolerance",
        ),
    ];
    // As written, the first point time is bad.
    match Circuit::from_json_unchecked(text) {
        Err(NetlistError::Json { path, .. }) => {
            assert_eq!(path, "elements[0].waveform.points[1].time")
        }
        other => panic!("expected a JSON error, got {other:?}"),
    }
    let fixed = text.replace("\"1uu\"", "\"1u\"");
    Circuit::from_json_unchecked(&fixed).unwrap();
    for (from, to, path) in cases {
        let bad = fixed.replacen(from, to, 1);
        assert_ne!(bad, fixed, "{from}");
        match Circuit::from_json_unchecked(&bad) {
            Err(NetlistError::Json { path: p, message }) => assert_eq!(p, path, "{message}"),
            other => panic!("{to}: expected a JSON error, got {other:?}"),
        }
    }
}

#[test]
fn missing_fields_and_bad_kinds_name_their_object() {
    let base = with_inductance("\"1u\"");
    let cases = [
        (
            "\"name\": \"R1\", ",
            "",
            "elements[1]",
            "missing field `name`",
        ),
        (
            "\"kind\": \"resistor\"",
            "\"kind\": \"resister\"",
            "elements[1].kind",
            "unknown variant",
        ),
        (
            "\"kind\": \"constant\", ",
            "",
            "elements[0].waveform",
            "missing field `kind`",
        ),
        (
            "[\"in\", \"x\"]",
            "[\"in\"]",
            "elements[1].nodes",
            "invalid length 1",
        ),
    ];
    for (from, to, path, text) in cases {
        let bad = base.replacen(from, to, 1);
        assert_ne!(bad, base, "{from}");
        match Circuit::from_json(&bad) {
            Err(NetlistError::Json { path: p, message }) => {
                assert_eq!(p, path, "{message}");
                assert!(message.contains(text), "{message}");
            }
            other => panic!("{to}: expected a JSON error, got {other:?}"),
        }
    }
}

#[test]
fn text_that_is_not_json_names_the_position() {
    for (text, path) in [
        ("", "line 1 column 0"),
        ("hello", "line 1 column 1"),
        ("{\"elements\": [", "line 1 column 14"),
        ("{\"elements\": [],}", "line 1 column 17"),
    ] {
        match Circuit::from_json(text) {
            Err(NetlistError::Json { path: p, message }) => {
                assert_eq!(p, path, "{text:?}: {message}");
                assert!(
                    !message.contains(" at line"),
                    "position said once: {message}"
                );
            }
            other => panic!("{text:?}: expected a JSON error, got {other:?}"),
        }
    }
}

#[test]
fn the_first_of_two_identical_mistakes_is_named() {
    // serde buffers tagged objects, so the path is found by reproducing the
    // error on cut-down copies; the same mistake in a later element must not
    // be taken for it.
    let source = |name: &str, points: &str| {
        format!(
            r#"{{"kind": "voltage_source", "name": "{name}", "nodes": ["a", "gnd"],
               "waveform": {{"kind": "piecewise_linear", "points": [{points}]}}}}"#
        )
    };
    let text = format!(
        r#"{{"elements": [{}, {}]}}"#,
        source(
            "V1",
            r#"{"time": 0, "value": 1}, {"time": "1uu", "value": 2}, {"time": 3, "value": 3}"#
        ),
        source("V2", r#"{"time": "1uu", "value": 2}"#),
    );
    match Circuit::from_json_unchecked(&text) {
        Err(NetlistError::Json { path, .. }) => {
            assert_eq!(path, "elements[0].waveform.points[1].time")
        }
        other => panic!("expected a JSON error, got {other:?}"),
    }
    let text = text.replacen(r#"{"time": "1uu", "value": 2}"#, r#"{"value": 2}"#, 1);
    match Circuit::from_json_unchecked(&text) {
        Err(NetlistError::Json { path, message }) => {
            assert_eq!(path, "elements[0].waveform.points[1]");
            assert!(message.contains("missing field `time`"), "{message}");
        }
        other => panic!("expected a JSON error, got {other:?}"),
    }
}

/// Issue 13: the interruption and shoot-through policies are run settings
/// of the file, named as the policies are in docs/netlist.md.
#[test]
fn issue_13_run_policies_are_run_settings() {
    let text = |extra: &str| {
        format!(
            r#"{{"elements": [
  {{"kind": "voltage_source", "name": "V1", "nodes": ["a", "gnd"],
   "waveform": {{"kind": "constant", "value": 1}}}},
  {{"kind": "resistor", "name": "R1", "nodes": ["a", "gnd"], "resistance": 1}}
], "run": {{"stop_time": "1m"{extra}}}}}"#
        )
    };
    let c = Circuit::from_json(&text("")).unwrap();
    let run = c.run.as_ref().unwrap();
    assert_eq!(run.on_interruption, InterruptionPolicy::Stop);
    assert_eq!(run.on_shoot_through, ShootThroughPolicy::Stop);
    // Defaults are left out of the JSON form.
    assert!(!c.to_json().contains("on_interruption"));
    let c = Circuit::from_json(&text(
        r#", "on_interruption": "conserve_flux", "on_shoot_through": "record""#,
    ))
    .unwrap();
    let run = c.run.as_ref().unwrap();
    assert_eq!(run.on_interruption, InterruptionPolicy::ConserveFlux);
    assert_eq!(run.on_shoot_through, ShootThroughPolicy::Record);
    assert_eq!(Circuit::from_json(&c.to_json()).unwrap(), c);
    match Circuit::from_json(&text(r#", "on_interruption": "ignore""#)) {
        Err(NetlistError::Json { path, message }) => {
            assert_eq!(path, "run.on_interruption");
            assert!(message.contains("conserve_flux"), "{message}");
        }
        other => panic!("expected a JSON error, got {other:?}"),
    }
}

/// Issue 13: the message for an unknown output form lists every form the
/// format accepts.
#[test]
fn issue_13_unknown_output_form_lists_every_form() {
    let p = OutputName::parse("L1.flux").unwrap_err();
    for form in [
        "node name",
        "ELEMENT.current",
        "ELEMENT.voltage",
        "WINDING.current",
        "primary",
        "secondary",
        "body_diode",
        "COMPENSATOR.output",
    ] {
        assert!(p.message.contains(form), "{form}: {}", p.message);
    }
    assert_eq!(OutputName::parse("L1.current").unwrap().unit(), "A");
    assert_eq!(OutputName::parse("out").unwrap().unit(), "V");
    assert_eq!(OutputName::parse("K.output").unwrap().unit(), "");
}
