"""Every error class is raised, with the Rust library's message."""

import json
import warnings

import numpy as np
import pytest

import fluxstep


BAD = {
    "elements": [
        {"kind": "inductor", "name": "L1", "nodes": ["a", "gnd"], "inductance": -1e-5},
        {"kind": "resistor", "name": "R1", "nodes": ["a", "x"], "resistance": 5},
    ]
}


def test_circuit_error_lists_every_problem():
    with pytest.raises(fluxstep.CircuitError) as e:
        fluxstep.Circuit.from_dict(BAD)
    text = str(e.value)
    assert text.startswith("invalid circuit, ")
    assert len(e.value.problems) >= 2
    assert "L1.inductance: must be positive" in text
    for p in e.value.problems:
        assert p["message"] in text
    # The same problems through the JSON route.
    with pytest.raises(fluxstep.CircuitError) as e2:
        fluxstep.Circuit.from_json(json.dumps(BAD))
    assert str(e2.value) == text
    assert isinstance(e.value, ValueError) and isinstance(e.value, fluxstep.FluxstepError)


def test_circuit_error_names_the_malformed_field():
    doc = {"elements": [{"kind": "inductor", "name": "L1", "nodes": ["a", "gnd"], "inductance": "5x"}]}
    with pytest.raises(fluxstep.CircuitError) as e:
        fluxstep.Circuit.from_dict(doc)
    assert e.value.path == "elements[0].inductance"
    assert str(e.value).startswith("elements[0].inductance: ")
    with pytest.raises(fluxstep.CircuitError, match="line 1 column"):
        fluxstep.Circuit.from_json("{")


def test_builder_errors():
    with pytest.raises(fluxstep.CircuitError, match="R1"):
        fluxstep.CircuitBuilder().resistor("R1", "a", "gnd", -1.0).build()


def test_unreadable_file_is_an_os_error(tmp_path):
    with pytest.raises(FileNotFoundError, match="cannot read"):
        fluxstep.Circuit.from_file(tmp_path / "missing.json")


def test_output_error(examples):
    with pytest.raises(fluxstep.OutputError, match='unknown output "L9.current"'):
        fluxstep.simulate(examples / "buck.json", 1e-5, outputs=["L9.current"])
    run = fluxstep.simulate(examples / "buck.json", 1e-5)
    with pytest.raises(fluxstep.OutputError, match="nope"):
        run.waveform("nope", 0.0)


def test_simulation_error_is_attached_to_a_stopped_run(examples):
    with pytest.warns(fluxstep.StoppedRunWarning, match="stopped"):
        run = fluxstep.simulate(examples / "interrupted_inductor.json", on_interruption="stop")
    assert not run.ok
    err = run.stopped
    assert isinstance(err, fluxstep.SimulationError)
    assert err.kind == "inductor_interrupted"
    assert err.time is not None and err.time > 0
    assert "L1" in str(err)
    # What was recorded up to the fault is there.
    a, b = run.span
    assert b == pytest.approx(err.time)
    assert run.summary["stopped"]["diagnostic"] == str(err)
    with pytest.raises(fluxstep.SimulationError):
        raise err


def test_simulation_error_raised_when_the_circuit_cannot_start():
    # An inductor carrying current with no path at t = 0.
    c = (
        fluxstep.CircuitBuilder()
        .inductor("L1", "a", "gnd", 1e-3, initial_current=1.0)
        .timed_switch("S1", "a", "b", [(1e-3, True)])
        .resistor("R1", "b", "gnd", 1.0)
        .build()
    )
    with pytest.raises(fluxstep.SimulationError) as e:
        fluxstep.simulate(c, 2e-3)
    assert e.value.kind == "inductor_interrupted"
    assert e.value.time == 0.0
    assert "L1 carried" in str(e.value)


def test_measure_error(examples):
    run = fluxstep.simulate(examples / "buck.json", 1e-4, record_from=5e-5)
    with pytest.raises(fluxstep.MeasureError, match="not inside the recorded span"):
        run.measure("out", 0.0, 1e-4)
    with pytest.raises(fluxstep.MeasureError, match="empty"):
        run.measure("out", 8e-5, 6e-5)


def test_unavailable_value_error_only_when_strict(examples):
    run = fluxstep.simulate(examples / "buck.json", 1e-4, record_from=5e-5)
    assert np.isnan(run.waveform("out", 1e-5))
    with pytest.raises(fluxstep.UnavailableValueError, match="outside the recorded window"):
        run.waveform("out", 1e-5, strict=True)
    with pytest.raises(fluxstep.UnavailableValueError):
        run.waveform("out", np.array([6e-5, 1e-5]), strict=True)


def test_analysis_error():
    c = fluxstep.CircuitBuilder().voltage_source("V1", "a", "gnd", 1.0).resistor("R1", "a", "gnd", 1.0).build()
    with pytest.raises(fluxstep.AnalysisError) as e:
        fluxstep.steady.find(c)
    assert e.value.kind == "no_period"
    assert "no periodic steady state" in str(e.value)
    with pytest.raises(fluxstep.AnalysisError) as e:
        fluxstep.response.log_frequencies(-1.0, 10.0, 3)
    assert e.value.kind == "invalid_option"


def test_sweep_error(examples):
    spec = {
        "circuit": "(given)",
        "simulation": {"periods": 10},
        "parameters": [{"path": "nothing.here", "values": {"kind": "list", "values": [1.0]}}],
        "figures": [{"kind": "window", "name": "v", "of": "out", "measure": "average"}],
    }
    with pytest.raises(fluxstep.SweepError, match="unknown parameter path"):
        fluxstep.sweep.Sweep(spec, examples / "buck.json")
