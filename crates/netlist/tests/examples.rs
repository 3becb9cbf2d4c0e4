//! Every circuit in examples/circuits reads, validates, round-trips and
//! follows the naming habits the other examples and docs rely on.

use std::path::PathBuf;

use fluxstep_netlist::*;

fn examples() -> Vec<(String, Circuit)> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits");
    let mut out: Vec<(String, Circuit)> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|entry| entry.expect("directory entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "json"))
        .map(|p| {
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            let c = Circuit::from_file(&p).unwrap_or_else(|e| panic!("{name}: {e}"));
            (name, c)
        })
        .collect();
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out
}

#[test]
fn every_example_is_valid_and_round_trips() {
    let all = examples();
    for name in [
        "boost.json",
        "buck.json",
        "buck_boost.json",
        "buck_dcm.json",
        "flyback.json",
        "hysteretic_buck.json",
        "interrupted_inductor.json",
        "peak_current_buck.json",
        "rectifier.json",
        "sync_buck.json",
        "voltage_mode_buck.json",
    ] {
        assert!(all.iter().any(|(n, _)| n == name), "{name} is missing");
    }
    for (name, c) in &all {
        let back = Circuit::from_json(&c.to_json()).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(&back, c, "{name}");
        assert!(!c.description.is_empty(), "{name} says what it is");
        let run = c
            .run
            .as_ref()
            .unwrap_or_else(|| panic!("{name} has a run section"));
        assert!(!run.outputs.is_empty(), "{name} records something");
    }
}

#[test]
fn converters_name_their_switch_node_and_output() {
    for (name, c) in examples() {
        let nodes = c.nodes();
        // An inverter's output is three legs; a multiphase converter's
        // first phase has the node `sw`.
        if !["interrupted_inductor.json", "three_phase_inverter.json"].contains(&name.as_str()) {
            assert!(nodes.iter().any(|n| n == "out"), "{name}: no node 'out'");
        }
        // Rectifiers and multipliers switch by their diodes alone; an
        // inverter's switch nodes are its legs.
        if ![
            "rectifier.json",
            "three_phase_bridge.json",
            "multiplier_24.json",
            "three_phase_inverter.json",
        ]
        .contains(&name.as_str())
        {
            assert!(nodes.iter().any(|n| n == "sw"), "{name}: no node 'sw'");
        }
    }
}

#[test]
fn closed_loop_examples_record_their_control() {
    let all = examples();
    let find = |name: &str| {
        all.iter()
            .find(|(n, _)| n == name)
            .unwrap_or_else(|| panic!("{name} is missing"))
            .1
            .clone()
    };
    // Each closed-loop scenario uses the gate kind it is named after.
    let kinds = [
        ("voltage_mode_buck.json", "voltage_mode"),
        ("peak_current_buck.json", "peak_current"),
        ("hysteretic_buck.json", "hysteretic"),
    ];
    for (name, kind) in kinds {
        let c = find(name);
        let text = c.to_json();
        assert!(
            text.contains(&format!("\"kind\": \"{kind}\"")),
            "{name} has no {kind} gate"
        );
        let outputs = &c.run.as_ref().expect("a run section").outputs;
        for o in ["L1.current", "sw", "out"] {
            assert!(outputs.iter().any(|x| x == o), "{name} does not record {o}");
        }
    }
    // Every example with compensators records each compensator's output.
    for (name, c) in &all {
        let outputs = &c.run.as_ref().expect("a run section").outputs;
        for k in &c.compensators {
            let o = format!("{}.output", k.name);
            assert!(outputs.contains(&o), "{name} does not record {o}");
        }
    }
    // The voltage-mode buck is driven by its compensator and has a load
    // step: a transitions gate switching an extra load resistor in.
    let vm = find("voltage_mode_buck.json");
    assert!(vm.gates.iter().any(|g| matches!(
        g,
        Gate::VoltageMode { control, .. } if control == "K.output"
    )));
    assert!(vm
        .gates
        .iter()
        .any(|g| matches!(g, Gate::Transitions { .. })));
    assert_eq!(vm.compensators.len(), 1);
}

/// The JSON block that follows `heading` in docs/netlist.md.
fn doc_example(heading: &str) -> Circuit {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../docs/netlist.md");
    let doc = std::fs::read_to_string(&path).expect("docs/netlist.md exists");
    let section = doc
        .split(heading)
        .nth(1)
        .unwrap_or_else(|| panic!("docs/netlist.md has a section {heading:?}"));
    let json = section
        .split("```json\n")
        .nth(1)
        .and_then(|rest| rest.split("```").next())
        .expect("the example is a json block");
    Circuit::from_json(json).unwrap_or_else(|e| panic!("docs/netlist.md, {heading}: {e}"))
}

#[test]
fn the_closed_loop_example_in_the_format_reference_is_valid() {
    let c = doc_example("### A complete closed-loop example");
    let file = examples()
        .into_iter()
        .find(|(n, _)| n == "voltage_mode_buck.json")
        .expect("voltage_mode_buck.json")
        .1;
    assert_eq!(
        c.elements, file.elements,
        "the example is voltage_mode_buck.json"
    );
    assert_eq!(c.gates, file.gates);
    assert_eq!(c.compensators, file.compensators);
    assert_eq!(c.run, file.run);
}

#[test]
fn the_complete_example_in_the_format_reference_is_valid() {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../docs/netlist.md");
    let doc = std::fs::read_to_string(&path).expect("docs/netlist.md exists");
    let section = doc
        .split("## A complete example")
        .nth(1)
        .expect("docs/netlist.md has a complete example");
    let json = section
        .split("```json\n")
        .nth(1)
        .and_then(|rest| rest.split("```").next())
        .expect("the example is a json block");
    let c = Circuit::from_json(json).unwrap_or_else(|e| panic!("docs/netlist.md example: {e}"));
    let file = examples()
        .into_iter()
        .find(|(n, _)| n == "buck.json")
        .expect("buck.json")
        .1;
    assert_eq!(c.elements, file.elements, "the example is buck.json");
    assert_eq!(c.gates, file.gates);
    assert_eq!(c.run, file.run);
}
