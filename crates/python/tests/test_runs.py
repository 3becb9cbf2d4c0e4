"""Runs: vectorised evaluation, vertices, events, summary, analyses."""

import os
import signal
import threading
import time

import numpy as np
import pytest

import fluxstep


def test_vectorised_evaluation_of_a_million_points(examples):
    run = fluxstep.simulate(examples / "buck.json")
    a, b = run.span
    t = np.linspace(a, b, 1_000_000)
    v = run.waveform("L1.current", t)
    assert v.shape == t.shape and v.dtype == np.float64
    assert not np.isnan(v).any()
    # Spot checks against scalar calls; any shape is kept.
    for k in (0, 123_457, 999_999):
        assert v[k] == run.waveform("L1.current", float(t[k]))
    grid = run.waveform("L1.current", t[:12].reshape(3, 4))
    assert grid.shape == (3, 4) and np.array_equal(grid.ravel(), v[:12])
    # Outside the record: NaN, as documented.
    assert np.isnan(run.waveform("out", np.array([a - 1e-6, b + 1e-6]))).all()


def test_vertices_events_and_summary(examples):
    run = fluxstep.simulate(examples / "buck_dcm.json")
    t, v = run.vertices("L1.current")
    assert t.shape == v.shape and t[0] == run.span[0] and t[-1] == run.span[1]
    ev = run.events
    arr = run.events_array
    assert len(arr) == len(ev) > 0
    assert arr["time"].tolist() == [e["time"] for e in ev]
    assert arr["kind"].tolist() == [e["kind"] for e in ev]
    assert arr["before"].shape == (len(ev), len(run.state_names))
    # Discontinuous conduction: some diode turn-offs are located crossings.
    assert any(e["kind"] == "diode_off" and e["cause"] == "crossing" for e in ev)
    s = run.summary
    assert s["window"] == list(run.span) and s["events"] == len(ev) and s["stopped"] is None
    assert [m["output"] for m in s["measurements"]] == run.outputs
    assert s["measurements"][0] == run.measure(run.outputs[0])
    # The solver's energy certificate (energy conservation; common
    # practice): the balance of the recorded window closes.
    c = run.certificate
    assert c["checked_segments"] > 0 and c["unchecked_time"] == 0.0
    assert c["delivered"] > 0.0 and abs(c["relative"]) < 1e-10
    total = c["dissipated"] + c["jumps"] + c["stored_change"]
    assert abs(c["delivered"] - total - c["residual"]) <= 1e-15 * c["delivered"]


def test_sweep_columns_are_ready_for_a_dataframe(examples, root):
    sw = fluxstep.sweep.Sweep(root / "examples" / "sweeps" / "buck_operating_range.sweep.json")
    table = sw.run()
    cols = table.columns
    n = len(table)
    assert n == sw.points
    assert all(len(c) == n for c in cols.values())
    assert "status" in cols and "point" in cols
    assert table.summary()["points"] == n
    # One thread and two give the same table, bit for bit.
    assert sw.run(threads=1).to_csv() == table.to_csv()


def test_ctrl_c_stops_a_long_run_cleanly(examples):
    # 1,000 s of a 200 kHz buck (2e8 periods, about a minute): far longer
    # than the signal's delay.
    c = fluxstep.Circuit.from_file(examples / "buck.json")
    timer = threading.Timer(0.3, lambda: os.kill(os.getpid(), signal.SIGINT))
    started = time.monotonic()
    timer.start()
    try:
        with pytest.raises(KeyboardInterrupt):
            fluxstep.simulate(c, 1000.0, record_from=999.999)
    finally:
        timer.cancel()
    assert time.monotonic() - started < 5.0
    # The interpreter and the package go on working.
    run = fluxstep.simulate(c, 1e-4)
    assert run.ok


def test_steady_state_measurements_and_run(examples):
    ss = fluxstep.steady.find(examples / "buck.json")
    m = ss.measurement("out")
    assert m == ss.run.measure("out", ss.start_time, ss.end_time)
    assert len(ss.measurements()) > 0
    assert ss.monodromy.shape == (len(ss.free_states), len(ss.free_states))
    with pytest.raises(fluxstep.OutputError):
        ss.measurement("nope")


def test_losses_of_the_synchronous_buck(examples):
    # Energy conservation over the recorded window (common practice): the
    # sources' energy equals the load's, the losses and the change of
    # stored energy; the efficiency is output over input.
    path = examples / "sync_buck.json"
    run = fluxstep.simulate(path)
    r = fluxstep.losses(path, run)
    assert r["loads"] == ["Rload"]
    assert (r["t0"], r["t1"]) == run.span
    assert r["balance_error"] < 1e-12
    assert abs(r["efficiency"] - r["output_power"] / r["input_power"]) < 1e-12
    parts = {p["part"]: p for p in r["by_part"]}
    assert "Q2.body_diode" in parts and parts["Q2.body_diode"]["total"] > 0
    assert abs(sum(p["total"] for p in r["by_part"]) - r["total_loss"]) < 1e-12
    assert r["by_kind"]["conduction"] == pytest.approx(r["total_loss"], rel=1e-12)
    # A named load that is not an element is refused.
    with pytest.raises(fluxstep.AnalysisError):
        fluxstep.losses(path, run, loads=["Rmissing"])
