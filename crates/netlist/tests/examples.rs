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
        "interrupted_inductor.json",
        "rectifier.json",
        "sync_buck.json",
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
        if name != "interrupted_inductor.json" {
            assert!(nodes.iter().any(|n| n == "out"), "{name}: no node 'out'");
        }
        if name != "rectifier.json" {
            assert!(nodes.iter().any(|n| n == "sw"), "{name}: no node 'sw'");
        }
    }
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
