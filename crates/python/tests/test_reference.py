"""Results equal the Rust API's bit for bit.

The references in reference/*.json are written by the Rust test
tests/python_reference.rs with plain Rust calls (simulate in one call,
Waveform::value, vertices, measure, steady::find, frequency_response), which
also checks they are current. JSON numbers there are the shortest text that
reads back to the same float, so == below compares bits.
"""

import json
import math

import numpy as np
import pytest

import fluxstep

from conftest import ROOT

REF = ROOT / "crates" / "python" / "tests" / "reference"


def bits_equal(a, b):
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    return a.shape == b.shape and np.array_equal(a.view(np.int64), b.view(np.int64))


@pytest.mark.parametrize("name", ["buck_dcm", "sync_buck", "peak_current_buck"])
def test_runs_equal_the_rust_api_bit_for_bit(name):
    ref = json.loads((REF / f"{name}.json").read_text())
    run = fluxstep.simulate(ROOT / ref["circuit"], ref["stop"], ref["record_from"])
    assert run.ok
    times = np.array(ref["times"])
    for out, expected in ref["values"].items():
        expected = np.array([math.nan if v is None else v for v in expected])
        got = run.waveform(out, times)
        assert bits_equal(got, expected), out
    vt, vv = run.vertices(ref["vertices"]["output"], interior=ref["vertices"]["interior"])
    assert bits_equal(vt, ref["vertices"]["t"])
    assert bits_equal(vv, ref["vertices"]["v"])
    for m in ref["measurements"]:
        got = run.measure(m["output"])
        for k, v in m.items():
            assert got[k] == v, (m["output"], k)
    events = ref["events"]
    assert run.state_names == events["state_names"]
    assert len(run.events) == len(events["events"])
    for got, want in zip(run.events, events["events"]):
        for k in ("time", "kind", "cause", "element", "before", "after"):
            assert got[k] == want[k], k
        assert got["energy"] == want.get("energy")
        assert got["moved"] == want.get("moved")
    for k, v in ref["stats"].items():
        assert run.stats[k] == v, k


def test_steady_state_and_response_equal_the_rust_api():
    ref = json.loads((REF / "analyses.json").read_text())
    c = fluxstep.Circuit.from_file(ROOT / ref["circuit"])
    ss = fluxstep.steady.find(c)
    want = ref["steady"]
    assert ss.period == want["period"]
    assert ss.start_time == want["start_time"]
    assert bits_equal(ss.state, want["state"])
    assert ss.residual == want["residual"]
    assert ss.multipliers == want["multipliers"]
    assert ss.iterations == want["iterations"]
    r = ref["response"]
    resp = fluxstep.response.frequency_response(c, r["input"], r["output"], r["frequencies"])
    assert resp.points == r["points"]
    assert bits_equal(resp.columns["magnitude_db"], [p["magnitude_db"] for p in r["points"]])
