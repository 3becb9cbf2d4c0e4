"""Circuits from files, JSON text, dicts and the builder."""

import json

import pytest

import fluxstep


def test_dict_and_json_routes_give_identical_circuits(examples):
    for path in sorted(examples.glob("*.json")):
        text = path.read_text()
        from_file = fluxstep.Circuit.from_file(path)
        from_json = fluxstep.Circuit.from_json(text)
        from_dict = fluxstep.Circuit.from_dict(json.loads(text))
        assert from_file == from_json == from_dict, path.name
        assert from_dict.to_json() == from_json.to_json()
        assert fluxstep.load(str(path)) == from_json
        assert fluxstep.load(json.loads(text)) == from_json
        # Round trip through the dict form.
        assert fluxstep.Circuit.from_dict(from_json.to_dict()) == from_json


def test_dict_and_json_runs_are_identical(examples):
    text = (examples / "buck.json").read_text()
    a = fluxstep.simulate(json.loads(text), 1e-4)
    b = fluxstep.simulate(text, 1e-4)
    assert a.events == b.events


def test_builder_mirrors_the_rust_one():
    b = (
        fluxstep.CircuitBuilder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 100e-6, initial_voltage=4.0)
        .resistor("Rload", "out", "gnd", 2.0)
        .pwm("drive", 100e3, 0.4)
    )
    c = b.build()
    assert c.elements == ["Vin", "S1", "D1", "L1", "C1", "Rload"]
    assert c.nodes == ["gnd", "in", "sw", "out"]
    assert "L1.current" in c.outputs
    d = c.to_dict()
    assert d["elements"][4]["initial_voltage"] == 4.0
    assert fluxstep.Circuit.from_dict(d) == c


def test_builder_takes_waveform_and_element_dicts():
    c = (
        fluxstep.CircuitBuilder()
        .voltage_source("V1", "a", "gnd", {"kind": "sine", "amplitude": "10", "frequency": "50"})
        .element({"kind": "resistor", "name": "R1", "nodes": ["a", "gnd"], "resistance": "1k"})
        .build()
    )
    assert c.elements == ["V1", "R1"]
