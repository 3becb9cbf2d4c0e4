"""fluxstep: exact switching simulation of power converters, in Python.

Between two switching events a circuit of ideal switches, diodes, R, L, C
and sources is linear, so fluxstep advances it exactly with a matrix
exponential and locates every diode and comparator event to machine
precision. This package wraps the Rust library; results are NumPy arrays.

Quick tour::

    import numpy as np
    import fluxstep

    buck = fluxstep.Circuit.from_file("examples/circuits/buck.json")
    run = fluxstep.simulate(buck, stop=5e-3, record_from=4.95e-3)
    t = np.linspace(*run.span, 10_000)
    il = run.waveform("L1.current", t)          # exact, vectorised
    print(run.measure("out"))                   # exact average, RMS, ripple
    ss = fluxstep.steady.find(buck)             # periodic steady state
    r = fluxstep.response.frequency_response(
        buck, "drive.duty", "out", fluxstep.response.log_frequencies(100, 1e5, 50))

Simulation results do not replace measurement on real hardware, local
electrical codes or qualified review, least of all where mains voltages or
large stored energies are involved.

See docs/python.md for the guide.
"""

from . import response, steady, sweep
from ._errors import (
    AnalysisError,
    CircuitError,
    FluxstepError,
    MeasureError,
    OutputError,
    SimulationError,
    StoppedRunWarning,
    SweepError,
    UnavailableValueError,
)
from ._fluxstep import Circuit, CircuitBuilder, Run, __version__, load, losses, simulate

__all__ = [
    "AnalysisError",
    "Circuit",
    "CircuitBuilder",
    "CircuitError",
    "FluxstepError",
    "MeasureError",
    "OutputError",
    "Run",
    "SimulationError",
    "StoppedRunWarning",
    "SweepError",
    "UnavailableValueError",
    "__version__",
    "load",
    "losses",
    "response",
    "simulate",
    "steady",
    "sweep",
]
